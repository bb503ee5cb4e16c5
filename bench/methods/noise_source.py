"""Noise-source methods: the receive system's noise figure by the Y-factor method, and with the same
pair captured through a device its insertion loss and noise figure across frequency, stitched over
several tunings and summarised per amateur band.

Two steps, each a function to a frozen result:

- :func:`y_factor_band` -- the captures of one tuning (repeats of a role pooled): Y, the noise
  figure, and with the DUT its loss and noise figure, per sub-band and over the whole usable band
  (:class:`NoiseSourceBand`);
- :func:`rxbench.methods.noise_curve.noise_figure_curve` -- the bands of one device at every
  tuning: the noise figure pooled over the tunings, the curve stitched across frequency, the
  per-band tables (:class:`~rxbench.methods.noise_curve.NoiseFigureResult`; its ``to_dict()`` is
  what ``rxbench nf --json`` prints).

``rxbench nf`` (flags) and a session (``hot``/``cold`` captures by role) call both. The numerics
are :mod:`rxbench.dsp.noise_source` (per tuning), :mod:`rxbench.dsp.stitch` and
:mod:`rxbench.dsp.bands`. The gain method (a tone of known level) is in :mod:`rxbench.methods.gain`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable, NamedTuple, Sequence

import numpy as np

from rxbench.dsp import noise_source as nsm
from rxbench.dsp.floor import level_movement, usable_mask
from rxbench.dsp.lines import find_lines, merge_intervals
from rxbench.dsp.noisefig import excess_u_db, y_sensitivity
from rxbench.dsp.spectrum import Psd
from rxbench.dsp.subbands import N_SUB_BANDS
from rxbench.dsp.units import T0_K, db_from_power
from rxbench.errors import MeasurementError, UnlikeCapturesError, UsageError
from rxbench.methods.common import COVERAGE_FACTOR, with_aliases
from rxbench.recordings import Capture

#: A capture whose noise level moves more than this over its length (dB, 5-95 % of its sub-averages, and
#: beyond five times their scatter) is warned: Y averages over the movement.
LEVEL_MOVED_DB = 0.5
#: Warn when one dB of error in Y moves the noise figure by more than this many dB.
Y_SENSITIVITY_WARN = 2.0
#: Warn when an expanded uncertainty (dB) exceeds this.
U_WARN_DB = 0.5
#: The roles of one tuning, in the order the analysis takes them.
ROLES = ("cold", "hot", "cold_dut", "hot_dut")
#: Old key names of a band (old -> new), kept for one release: ``rxbench nf``'s ``bands`` used the
#: first, a session's ``noise_figure`` the second.
BAND_ALIASES = {"noise_figure_u_db": "u_noise_figure_db", "usable_band_hz": "band_hz",
                "insertion_loss_u_db": "u_insertion_loss_db", "dut_noise_figure_u_db": "u_dut_noise_figure_db"}

_DB_PER_NEPER = 10.0 / math.log(10.0)


class Spectrum(NamedTuple):
    """One capture's averaged spectrum (a :class:`rxbench.reading.Reading` serves as well)."""

    capture: Capture
    psd: Psd


def _db(x) -> float:
    return float(db_from_power(x)) if x is not None and np.isfinite(x) and x > 0 else math.nan


def _u_db(u, x) -> float:
    return float(_DB_PER_NEPER * u / x) if np.isfinite(x) and x > 0 else math.nan


def _names(spectra) -> str:
    return " + ".join(s.capture.path.name for s in spectra)


def _mean_with_u(values, us) -> tuple[float, float]:
    """Mean of independent values and its standard uncertainty."""
    v, u = np.asarray(values, float), np.asarray(us, float)
    return float(v.mean()), float(np.sqrt(np.sum(u**2)) / v.size)


def _list(a) -> list:
    return np.asarray(a, dtype=float).tolist()


@dataclass(frozen=True, eq=False)
class NoiseSourceBand:
    """The noise-source measurement at one tuning.

    Attributes
    ----------
    center_hz : float or None
        The captures' tuning (None: unknown; offsets only).
    sample_rate_hz : float
    nperseg : int
        FFT length of the spectra.
    numbers : rxbench.dsp.noise_source.NoiseSourceResult
        Per sub-band, the whole usable band last.
    captures : dict
        Role -> capture names.
    device : str
        The DUT's device label (several devices compared), else "".
    n_devices : int
        Identical devices in the path (2: a back-to-back pair).
    warnings : tuple of str
    lines : tuple of dict
        Narrow lines (spurs, carriers) left out of every band power: ``offset_hz`` (the strongest
        bin), ``low_hz``/``high_hz`` (the interval left out) and ``excess_db`` over the local noise.
    """

    center_hz: float | None
    sample_rate_hz: float
    nperseg: int
    numbers: nsm.NoiseSourceResult
    captures: dict = field(default_factory=dict)
    device: str = ""
    n_devices: int = 1
    warnings: tuple = ()
    lines: tuple = ()

    @property
    def has_dut(self) -> bool:
        return self.numbers.dut is not None

    @property
    def noise_factor(self) -> float:
        return float(self.numbers.receiver.noise_factor[-1])

    @property
    def u_noise_factor(self) -> float:
        return float(self.numbers.receiver.u_noise_factor[-1])

    @property
    def y(self) -> float:
        return float(self.numbers.receiver.y[-1])

    @property
    def enr(self) -> float:
        return float(self.numbers.enr[-1])

    @property
    def noise_figure_db(self) -> float:
        return _db(self.noise_factor)

    @property
    def u_noise_figure_db(self) -> float:
        return _u_db(self.u_noise_factor, self.noise_factor)

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.u_noise_figure_db

    @property
    def y_db(self) -> float:
        return _db(self.y)

    @property
    def enr_db(self) -> float:
        return _db(self.enr)

    @property
    def noise_temperature_k(self) -> float:
        return T0_K * (self.noise_factor - 1.0)

    @property
    def sensitivity(self) -> float:
        """d(NF_dB)/d(Y_dB) over the whole band (:func:`rxbench.dsp.noisefig.y_sensitivity`)."""
        return float(y_sensitivity(self.y, self.enr, t_cold_k=self.numbers.t_cold_k))

    @property
    def band_hz(self) -> list[float]:
        return [float(self.numbers.low_hz[-1]), float(self.numbers.high_hz[-1])]

    def _dut(self, name: str) -> float | None:
        d = self.numbers.dut
        return None if d is None else float(np.asarray(getattr(d, name))[-1])

    @property
    def insertion_loss_db(self) -> float | None:
        g = self._dut("gain")
        return None if g is None else -_db(g)

    @property
    def u_insertion_loss_db(self) -> float | None:
        g = self._dut("gain")
        return None if g is None else _u_db(self._dut("u_gain"), g)

    @property
    def expanded_uncertainty_loss_db(self) -> float | None:
        u = self.u_insertion_loss_db
        return None if u is None else COVERAGE_FACTOR * u

    @property
    def dut_noise_figure_db(self) -> float | None:
        f = self._dut("noise_factor")
        return None if f is None else _db(f)

    @property
    def u_dut_noise_figure_db(self) -> float | None:
        f = self._dut("noise_factor")
        return None if f is None else _u_db(self._dut("u_noise_factor"), f)

    def sub_bands(self) -> dict:
        """Per sub-band (the whole band left out): offsets from the centre (Hz) and the numbers, as lists."""
        ns = self.numbers
        rx = ns.receiver
        f = np.asarray(rx.noise_factor)[:-1]
        out = {"offset_hz": _list(ns.center_hz[:-1]), "low_hz": _list(ns.low_hz[:-1]),
               "high_hz": _list(ns.high_hz[:-1]), "width_hz": _list((ns.high_hz - ns.low_hz)[:-1]),
               "enr_db": [_db(v) for v in ns.enr[:-1]], "y_db": [_db(v) for v in np.asarray(rx.y)[:-1]],
               "noise_figure_db": [_db(v) for v in f],
               "u_noise_figure_db": [_u_db(u, v) for u, v in zip(np.asarray(rx.u_noise_factor)[:-1], f)],
               "noise_temperature_k": _list(T0_K * (f - 1.0))}
        d = ns.dut
        if d is not None:
            g, f1 = np.asarray(d.gain)[:-1], np.asarray(d.noise_factor)[:-1]
            own = np.asarray(excess_u_db(ns.n_hot_dut, ns.n_cold_dut, ns.dof_hot_dut, ns.dof_cold_dut), float)
            out.update({"insertion_loss_db": [-_db(v) for v in g],
                        "u_insertion_loss_db": [_u_db(u, v) for u, v in zip(np.asarray(d.u_gain)[:-1], g)],
                        "u_insertion_loss_own_db": _list(np.where(np.isfinite(g), own[:-1], np.nan)),
                        "dut_noise_figure_db": [_db(v) for v in f1],
                        "u_dut_noise_figure_db": [_u_db(u, v) for u, v in
                                                  zip(np.asarray(d.u_noise_factor)[:-1], f1)]})
        return out

    def to_dict(self) -> dict:
        ns = self.numbers
        out = {
            "center_hz": self.center_hz, "sample_rate_hz": self.sample_rate_hz, "nperseg": self.nperseg,
            "band_hz": self.band_hz, "dof_hot": float(ns.dof_hot[-1]), "dof_cold": float(ns.dof_cold[-1]),
            "y_db": self.y_db, "enr_db": self.enr_db, "u_enr_db": ns.u_enr_db, "t_cold_k": ns.t_cold_k,
            "noise_figure_db": self.noise_figure_db, "u_noise_figure_db": self.u_noise_figure_db,
            "expanded_uncertainty_db": self.expanded_uncertainty_db,
            "noise_temperature_k": self.noise_temperature_k,
            "u_noise_temperature_k": T0_K * self.u_noise_factor, "nf_per_y_db": self.sensitivity,
            "insertion_loss_db": self.insertion_loss_db, "u_insertion_loss_db": self.u_insertion_loss_db,
            "expanded_uncertainty_loss_db": self.expanded_uncertainty_loss_db,
            "dut_noise_figure_db": self.dut_noise_figure_db, "u_dut_noise_figure_db": self.u_dut_noise_figure_db,
            "device": self.device, "n_devices": self.n_devices, "coverage_factor": COVERAGE_FACTOR,
            "captures": self.captures, "sub_bands": self.sub_bands(), "lines_left_out": list(self.lines),
            "warnings": list(self.warnings),
        }
        return with_aliases(out, BAND_ALIASES)


def _lines(spectra, dc_halfwidth_hz) -> tuple[np.ndarray, tuple]:
    """The narrow lines of the receiver-alone spectra (cold and hot), merged: (intervals to leave out
    of every spectrum, one dict per merged interval). The DUT's spectra are not searched: a filter's
    skirt is not a line, and a spur of the dongle shows without the DUT as well."""
    found = [find_lines(s.psd, usable_mask(s.psd, dc_halfwidth_hz=dc_halfwidth_hz)[0]) for s in spectra]
    merged = merge_intervals(*(f.intervals_hz for f in found))
    rows = []
    for lo, hi in merged:
        inside = [(e, p) for f in found for e, p in zip(f.excess_db, f.peak_hz) if lo <= p <= hi]
        excess, peak = max(inside)
        rows.append({"offset_hz": float(peak), "low_hz": float(lo), "high_hz": float(hi), "excess_db": float(excess)})
    return merged, tuple(rows)


def _lines_warning(rows, center_hz) -> str:
    def where(r):
        return f"{r['offset_hz'] / 1e3:+.1f} kHz" + ("" if center_hz is None else
                                                    f" ({(center_hz + r['offset_hz']) / 1e6:.4f} MHz)")
    shown = sorted(rows, key=lambda r: -r["excess_db"])[:4]
    listed = ", ".join(f"{where(r)} {r['excess_db']:.1f} dB above the noise" for r in shown)
    more = "" if len(rows) <= 4 else f" and {len(rows) - 4} more"
    return (f"{len(rows)} narrow line(s) left out of the noise-source band powers: {listed}{more} "
            "(the dongle's spurs or a carrier on the bench: counted, they would add to hot and cold alike and "
            "read the noise figure high)")


def _require_same_gain(groups) -> None:
    """Refuse captures of one tuning taken at different dongle gain (where the metadata records it):
    Y, and the DUT's loss, are then ratios of two different receivers' noise."""
    recorded = [(role, s.capture) for role, g in zip(ROLES, groups) for s in g
                if s.capture.extra.get("gain_db") is not None]
    for role, cap in recorded[1:]:
        r0, c0 = recorded[0]
        g0, g1 = float(c0.extra["gain_db"]), float(cap.extra["gain_db"])
        if g1 != g0:
            raise UnlikeCapturesError(
                f"{c0.path.name} ({r0.replace('_', '-')}) and {cap.path.name} ({role.replace('_', '-')}) were taken "
                f"at different dongle gain ({g0:g} vs {g1:g} dB): a noise-source measurement needs one fixed gain "
                "(AGC off) for every capture of a tuning")


def _movement_warnings(groups, dc_halfwidth_hz) -> list[str]:
    out = []
    for role, group in zip(ROLES, groups):
        for s in group:
            spread, scatter = level_movement(s.psd, usable_mask(s.psd, dc_halfwidth_hz=dc_halfwidth_hz)[0])
            if spread > max(LEVEL_MOVED_DB, 5.0 * scatter):
                out.append(f"{s.capture.path.name} ({role.replace('_', '-')}): its noise level moved by {spread:.1f} dB "
                           "during the capture (the source switched, a gain step, a loose connector): Y averages "
                           "over it; capture it again")
    return out


def y_factor_band(cold: Sequence, hot: Sequence, cold_dut: Sequence = (), hot_dut: Sequence = (), *,
                  enr_db: float | Callable, n_sub_bands: int = N_SUB_BANDS, t_cold_k: float = T0_K,
                  u_enr_db: float = 0.0, require_dut: bool = True, device: str = "",
                  n_devices: int = 1) -> NoiseSourceBand:
    """The Y-factor noise figure at one tuning, and with the DUT pair its loss and noise figure.

    Parameters
    ----------
    cold, hot : sequence of Spectrum (or Reading)
        The receiver alone with the source off and on; repeats are pooled.
    cold_dut, hot_dut : sequence of Spectrum, optional
        The same with the DUT between source and dongle; both or neither.
    enr_db : float or callable
        The source's ENR, dB: a number or a function of offset frequency (Hz, array) -> dB.
    n_sub_bands : int
        Sub-bands across the usable band (:data:`rxbench.dsp.subbands.N_SUB_BANDS`).
    t_cold_k, u_enr_db : float
        The source's temperature when off (K), and the ENR's standard uncertainty (dB).
    require_dut : bool
        With the DUT pair given but no excess through it: MeasurementError (True), or a warning and
        the receiver's noise figure alone (False).
    device, n_devices
        The DUT's label and how many identical devices are in the path.

    Raises
    ------
    UnlikeCapturesError
        Captures of the tuning taken at different dongle gain.
    MeasurementError
        The hot reading is not above the cold one over the band (or through the DUT, see above).
    UsageError
        Too many sub-bands for the spectra's bins, or only one of the two DUT states.
    """
    groups = [list(g) for g in (cold, hot, cold_dut, hot_dut)]
    warnings: list[str] = []
    first = groups[1][0].capture if groups[1] else groups[0][0].capture
    _require_same_gain(groups)
    dc_hw = None if first.is_complex else 0.0
    exclude, lines = _lines(groups[0] + groups[1], dc_hw)
    warnings += _movement_warnings(groups, dc_hw)
    if lines:
        warnings.append(_lines_warning(lines, first.center_hz))
    kw = dict(enr_db=enr_db, n_sub_bands=n_sub_bands, t_cold_k=t_cold_k, u_enr_db=u_enr_db,
              dc_halfwidth_hz=dc_hw, exclude_hz=exclude)
    try:
        ns = nsm.noise_source_analysis(*([s.psd for s in g] for g in groups), **kw)
    except ValueError as exc:
        raise UsageError(f"{n_sub_bands} sub-bands: {exc}") from None
    if not ns.valid[-1]:
        raise MeasurementError(
            f"{_names(groups[1])} (hot) reads {_db(ns.n_hot[-1] / ns.n_cold[-1]):.3f} dB against "
            f"{_names(groups[0])} (cold): the hot reading must be the higher; are the captures swapped, "
            "or was the source off?")
    if not ns.valid[:-1].all():
        warnings.append(f"{_names(groups[1])}: in {int((~ns.valid[:-1]).sum())} sub-band(s) the hot reading is "
                        "not above the cold one; no noise figure there")
    if ns.dut is not None and not ns.valid_dut[-1]:
        msg = (f"{_names(groups[3])} (hot-dut) is not above {_names(groups[2])} (cold-dut): no noise-source "
               "excess came through the DUT")
        if require_dut:
            raise MeasurementError(msg)
        warnings.append(msg + "; no loss")
        groups[2:] = [[], []]
        ns = nsm.noise_source_analysis(*([s.psd for s in g] for g in groups), **kw)
    elif ns.dut is not None and not ns.valid_dut[:-1].all():
        warnings.append(f"{_names(groups[3])}: in {int((~ns.valid_dut[:-1]).sum())} sub-band(s) no excess "
                        "came through the DUT; no loss there")
    nperseg = next(s for g in groups for s in g).psd.window.size
    band = NoiseSourceBand(
        first.center_hz, first.sample_rate_hz, int(nperseg), ns,
        captures={role: [s.capture.name for s in g] for role, g in zip(ROLES, groups) if g},
        device=device if ns.dut is not None else "", n_devices=n_devices if ns.dut is not None else 1,
        lines=lines)
    at = "" if band.center_hz is None else f" at {band.center_hz / 1e6:g} MHz"
    u95 = band.expanded_uncertainty_db
    if abs(band.sensitivity) > Y_SENSITIVITY_WARN or u95 > U_WARN_DB:
        warnings.append(
            f"Y = {_db(band.y):.2f} dB{at} is small for a trustworthy noise figure: NF uncertain by "
            f"±{u95:.2f} dB (95 %) from averaging alone, and every 0.1 dB of error in Y (gain drift, the "
            f"source's match changing between on and off) moves it by {abs(band.sensitivity) * 0.1:.2f} dB; "
            "use a source with more ENR")
    return replace(band, warnings=tuple(warnings))
