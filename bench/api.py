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

import math
from pathlib import Path

from rxbench.reading import Reading, pool_tones, read_capture
from rxbench.dsp.ladder import Loss
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ
from rxbench.dsp.units import T0_K
from rxbench.errors import MeasurementError, UsageError
from rxbench.methods.compare import CompareResult, compare_paths, read_paths
from rxbench.recordings import Capture, open_capture
from rxbench.session import Analysis, Session, analyze_session, open_session

__all__ = ["Analysis", "Capture", "CompareResult", "Loss", "Reading", "Session", "analyze_session", "compare",
           "direct_loss", "noise_figure", "open_capture", "open_session", "read", "read_paths"]


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


def _readings(value, what: str) -> list[Reading]:
    readings = [value] if isinstance(value, Reading) else list(value)
    if not readings or not all(isinstance(r, Reading) for r in readings):
        raise UsageError(f"{what}: give one Reading or a list of them (rxbench.read(capture))")
    return readings


def direct_loss(thru, dut, *, linearity_db: float = 0.0) -> Loss:
    """Direct insertion loss: the thru reading minus the DUT reading, at one generator level.

    ``thru`` and ``dut`` are one :class:`Reading` each, or lists of repeated readings (pooled). The
    same number, uncertainty and budget as ``rxbench loss --thru ... --dut ... [--linearity-db]``
    without SWRs; ``linearity_db`` is the half-width of the dongle's linearity error between the two
    levels (from a ladder check). Returns :class:`rxbench.dsp.ladder.Loss` (``loss_db``,
    ``expanded_uncertainty_db``, ``budget``).
    """
    thru, dut = _readings(thru, "thru"), _readings(dut, "dut")
    t, d = pool_tones(thru, "thru"), pool_tones(dut, "DUT")
    from rxbench.dsp.ladder import direct_loss as _direct

    try:
        return _direct(t[0], t[1], d[0], d[1], dof=(t[2], d[2], math.inf), linearity_db=linearity_db)
    except ValueError as exc:
        raise MeasurementError(str(exc)) from None


def noise_figure(hot, cold, *, enr_db, n_sub_bands: int = 16, t_cold_k: float = T0_K, u_enr_db: float = 0.0):
    """The receive system's noise figure by the Y-factor method from noise-source readings.

    ``hot`` and ``cold`` are readings (one each or lists, pooled) with the source on and off;
    ``enr_db`` the source's excess noise ratio (a number, or a function of offset frequency in Hz).
    Returns :class:`rxbench.dsp.noisefig.NoiseSourceResult`, per sub-band with the whole usable band
    last: ``result.receiver.nf_db[-1]`` and ``result.receiver.u_nf_db[-1]`` are what ``rxbench nf``
    reports as the noise figure and its standard uncertainty.
    """
    from rxbench.dsp import noisefig

    hot, cold = _readings(hot, "hot"), _readings(cold, "cold")
    try:
        result = noisefig.noise_source_analysis([r.psd for r in cold], [r.psd for r in hot], enr_db=enr_db,
                                                n_sub_bands=n_sub_bands, t_cold_k=t_cold_k, u_enr_db=u_enr_db,
                                                dc_halfwidth_hz=None if hot[0].capture.is_complex else 0.0)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    if not result.valid[-1]:
        raise MeasurementError("the hot reading is not above the cold one: are the captures swapped, or was "
                               "the source off?")
    return result


def compare(a, b, **settings) -> CompareResult:
    """On-air comparison of two receive paths from their readings (:func:`read_paths` reads the
    captures alike); ``settings`` as :func:`rxbench.methods.compare.compare_paths`."""
    return compare_paths(_readings(a, "a"), _readings(b, "b"), **settings)
