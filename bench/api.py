"""The Python API for notebooks and scripts: ``import rxbench``, then the functions below.

Captures are opened and read once each; the functions take those readings and return the result
objects the command line prints (frozen dataclasses; ``to_dict()`` where the command line prints
JSON). Errors are the :mod:`rxbench.errors` classes the command line turns into its one-line
messages: :class:`~rxbench.errors.MeasurementError` when the captures do not give the number, any
other :class:`~rxbench.errors.RxbenchError` for bad input.

These names are re-exported lazily by ``rxbench/__init__.py`` (module ``__getattr__``), so that
``import rxbench.dsp`` never imports the shell.
"""

from __future__ import annotations

from pathlib import Path

from rxbench.compared import CENTER_TOLERANCE_HZ
from rxbench.reading import Reading, read_capture
from rxbench.dsp.loss import Loss
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.dsp.subbands import N_SUB_BANDS
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ
from rxbench.dsp.units import T0_K
from rxbench.errors import UsageError
from rxbench.methods.common import pool
from rxbench.methods.compare import CompareResult, compare_paths, read_paths
from rxbench.methods.gain import GainMethodResult
from rxbench.methods.gain import gain_method as _gain_method
from rxbench.methods.loss import LossResult
from rxbench.methods.loss import direct_loss as _direct_loss
from rxbench.methods.noise_curve import NoiseFigureResult, noise_figure_curve
from rxbench.methods.noise_source import y_factor_band
from rxbench.methods.tone import ToneResult, read_tone
from rxbench.recordings import Capture, open_capture
from rxbench.session import Analysis, Session, analyze_session, open_session

__all__ = ["Analysis", "Capture", "CompareResult", "GainMethodResult", "Loss", "LossResult", "NoiseFigureResult",
           "Reading", "Session", "ToneResult", "analyze_session", "compare", "direct_loss", "gain_method",
           "noise_figure", "open_capture", "open_session", "read", "read_paths", "tone"]


def read(capture, *, near_hz: float | None = None, nperseg: int | None = None,
         snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ, want_tone: bool = True) -> Reading:
    """Read a capture (a :class:`Capture` or a path): its spectrum, noise floor, tone and health.

    The same reading ``rxbench inspect`` prints: ``reading.tone.power_dbfs``, ``reading.tone.snr_db``,
    ``reading.floor.density`` (FS**2/Hz), ``reading.health.clip_fraction``, ``reading.warnings``.
    """
    if not isinstance(capture, Capture):
        capture = open_capture(Path(capture))
    return read_capture(capture, near_hz=near_hz, nperseg=nperseg, snr_bandwidth_hz=snr_bandwidth_hz,
                        want_tone=want_tone)


def tone(readings, role: str = "", *, drift_ppm: float = DEFAULT_PPM) -> ToneResult:
    """The tone of one reading or of repeated readings of one role, pooled, with the readings'
    warnings: the :class:`~rxbench.methods.tone.ToneResult` (``power_dbfs``, ``u_power_db``,
    ``frequency_hz``, ``snr_db``, ``warnings``; ``to_dict()``). Refuses readings without a tone
    (MeasurementError) and tones that are not one signal (UnlikeCapturesError)."""
    return read_tone(_readings(readings, role or "tone"), role, drift_ppm=drift_ppm)


def _readings(value, what: str) -> list[Reading]:
    readings = [value] if isinstance(value, Reading) else list(value)
    if not readings or not all(isinstance(r, Reading) for r in readings):
        raise UsageError(f"{what}: give one Reading or a list of them (rxbench.read(capture))")
    return readings


def direct_loss(thru, dut, *, thru_after=None, linearity_db: float | None = None, swr: dict | None = None,
                n_devices: int = 1) -> LossResult:
    """Direct insertion loss: the thru reading minus the DUT reading, at one generator level.

    ``thru``, ``dut`` (and ``thru_after``, the thru captured again after the DUT) are one
    :class:`Reading` each, or lists of repeated readings (pooled). Returns the
    :class:`~rxbench.methods.loss.LossResult` that ``rxbench loss --thru ... --dut ...
    [--thru-after ...] [--linearity-db X] [--source-swr ...]`` prints (``to_dict()`` is its JSON):
    ``insertion_loss_db``, ``expanded_uncertainty_db``, ``loss.budget``, ``warnings``.
    ``linearity_db`` is the half-width of the dongle's linearity error between the two levels (from a
    ladder check; None: not assessed, and warned); ``swr`` maps ``source_swr``, ``load_swr``,
    ``dut_swr`` to the values known.
    """
    groups = [pool(_readings(thru, "thru"), "thru"), pool(_readings(dut, "dut"), "DUT")]
    after = None if thru_after is None else pool(_readings(thru_after, "thru_after"), "thru")
    return _direct_loss(*groups, after, linearity_db=linearity_db, swr=swr, n_devices=n_devices)


def noise_figure(hot, cold, *, enr_db, hot_dut=(), cold_dut=(), n_sub_bands: int = N_SUB_BANDS,
                 t_cold_k: float = T0_K, u_enr_db: float = 0.0) -> NoiseFigureResult:
    """The receive system's noise figure by the Y-factor method from noise-source readings, and with
    readings through a device its insertion loss and noise figure across frequency.

    ``hot`` and ``cold`` are readings (one each or lists) with the source on and off; ``hot_dut``
    and ``cold_dut`` the same through the device. Readings at several centre frequencies are grouped
    by their tuning (repeats at one tuning pooled) and stitched into one curve. ``enr_db`` is the
    source's excess noise ratio (a number, or a function of offset frequency in Hz). Returns the
    :class:`~rxbench.methods.noise_curve.NoiseFigureResult` that ``rxbench nf`` prints
    (``to_dict()`` is its JSON): ``noise_figure_db``, ``u_noise_figure_db``, ``insertion_loss_db``,
    ``bands`` (one per tuning), ``curve`` (per sub-band), ``warnings``.
    """
    roles = {"cold": _readings(cold, "cold"), "hot": _readings(hot, "hot"),
             "cold_dut": [] if not cold_dut else _readings(cold_dut, "cold_dut"),
             "hot_dut": [] if not hot_dut else _readings(hot_dut, "hot_dut")}
    tunings: dict = {}
    if all(len(rs) <= 1 for rs in roles.values()):  # one of each: one tuning, whatever the metadata says
        tunings[None] = roles
    for role, readings in (() if tunings else roles.items()):
        for r in readings:
            key = None if r.capture.center_hz is None else round(r.capture.center_hz / CENTER_TOLERANCE_HZ)
            tunings.setdefault(key, {k: [] for k in roles})[role].append(r)
    bands = []
    for group in tunings.values():
        for role in ("cold", "hot"):
            if not group[role]:
                raise UsageError(f"no {role} reading at the tuning of {_first(group).capture.path.name}")
        bands.append(y_factor_band(*(group[k] for k in roles), enr_db=enr_db, n_sub_bands=n_sub_bands,
                                   t_cold_k=t_cold_k, u_enr_db=u_enr_db))
    enr = f"{enr_db:.2f} dB" if not callable(enr_db) else "a function of frequency"
    return noise_figure_curve(bands, enr=enr, u_enr_db=u_enr_db, t_cold_k=t_cold_k)


def _first(group: dict):
    return next(r for rs in group.values() for r in rs)


def gain_method(reading, *, level_dbm: float) -> GainMethodResult:
    """The noise figure by the gain method from one reading of a tone of known level (dBm at the
    dongle's input): the :class:`~rxbench.methods.gain.GainMethodResult` of ``rxbench nf --tone``."""
    if not isinstance(reading, Reading):
        raise UsageError("gain_method: give one Reading (rxbench.read(capture))")
    return _gain_method(reading, level_dbm)


def compare(a, b, **settings) -> CompareResult:
    """On-air comparison of two receive paths from their readings (:func:`read_paths` reads the
    captures alike); ``settings`` as :func:`rxbench.methods.compare.compare_paths`."""
    return compare_paths(_readings(a, "a"), _readings(b, "b"), **settings)
