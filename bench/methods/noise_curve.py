"""The noise-source measurement of one device over every tuning: the noise figure pooled over the
tunings, the sub-bands stitched into one curve across frequency (each frequency from the tuning
nearest to it), and the curve's loss and noise figure per amateur band.

:func:`noise_figure_curve` takes the :class:`~rxbench.methods.noise_source.NoiseSourceBand` results
of :func:`~rxbench.methods.noise_source.y_factor_band` (one per tuning) and returns a
:class:`NoiseFigureResult`, whose ``to_dict()`` is what ``rxbench nf --json`` prints; a session
calls it once per device. The numerics are :mod:`rxbench.dsp.stitch` and :mod:`rxbench.dsp.bands`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np

from rxbench.dsp.stitch import stitch_offsets
from rxbench.dsp.units import T0_K
from rxbench.errors import MeasurementError
from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.methods.noise_source import U_WARN_DB, NoiseSourceBand, _db, _mean_with_u, _u_db


def _curve_rows(bands: Sequence[NoiseSourceBand]) -> list[dict]:
    """Sub-band rows of every tuning, overlaps trimmed (each frequency from the tuning nearest to it),
    in ascending frequency; offsets from the centre when a tuning is unknown."""
    absolute = all(b.center_hz is not None for b in bands)
    with_dut = any(b.has_dut for b in bands)
    subs = [b.sub_bands() for b in bands]
    keep = [np.ones(len(s["offset_hz"]), bool) for s in subs]
    if absolute and len(bands) > 1:
        _, keep = stitch_offsets([b.center_hz for b in bands], [s["offset_hz"] for s in subs],
                                 [b.band_hz for b in bands])
    rows = []
    for b, s, k in zip(bands, subs, keep):
        c = b.center_hz if absolute else 0.0
        for i in np.flatnonzero(k):
            row = {"frequency_hz" if absolute else "offset_hz": c + s["offset_hz"][i],
                   "low_hz": c + s["low_hz"][i], "high_hz": c + s["high_hz"][i],
                   "tuned_hz": b.center_hz, "enr_db": s["enr_db"][i], "y_db": s["y_db"][i],
                   "noise_figure_db": s["noise_figure_db"][i], "noise_figure_u_db": s["u_noise_figure_db"][i],
                   "noise_temperature_k": s["noise_temperature_k"][i], "width_hz": s["width_hz"][i]}
            if with_dut and "insertion_loss_db" not in s:  # this tuning's DUT pair gave no loss
                row.update(dict.fromkeys(("insertion_loss_db", "insertion_loss_u_db", "insertion_loss_own_u_db",
                                          "dut_noise_figure_db", "dut_noise_figure_u_db"), math.nan))
            elif with_dut:
                row.update(insertion_loss_db=s["insertion_loss_db"][i], insertion_loss_u_db=s["u_insertion_loss_db"][i],
                           insertion_loss_own_u_db=s["u_insertion_loss_own_db"][i],
                           dut_noise_figure_db=s["dut_noise_figure_db"][i],
                           dut_noise_figure_u_db=s["u_dut_noise_figure_db"][i])
            rows.append(row)
    key = "frequency_hz" if absolute else "offset_hz"
    rows.sort(key=lambda row: row[key])
    return rows


@dataclass(frozen=True, eq=False)
class NoiseFigureResult:
    """The noise-source measurement of one device over every tuning.

    Attributes
    ----------
    bands : tuple of NoiseSourceBand
        One per tuning, in ascending frequency.
    curve : tuple of dict
        The sub-bands of every tuning stitched into one curve (:func:`noise_figure_curve`).
    enr : str
        How the ENR was given (for the reader).
    u_enr_db, t_cold_k : float
    per_band, per_band_noise_figure : tuple of dict
        The curve's loss and noise figure per amateur band (absolute frequencies only).
    warnings : tuple of str
    """

    bands: tuple
    curve: tuple
    enr: str
    u_enr_db: float
    t_cold_k: float
    per_band: tuple = ()
    per_band_noise_figure: tuple = ()
    warnings: tuple = ()

    @property
    def device(self) -> str:
        return next((b.device for b in self.bands if b.has_dut), "")

    @property
    def has_dut(self) -> bool:
        """Does any tuning give the DUT's loss? (The pooled loss is over those that do.)"""
        return any(b.has_dut for b in self.bands)

    @property
    def absolute(self) -> bool:
        return all(b.center_hz is not None for b in self.bands)

    def _pooled(self, value: str, u: str) -> tuple[float, float]:
        return _mean_with_u([getattr(b, value) for b in self.bands], [getattr(b, u) for b in self.bands])

    @property
    def noise_factor(self) -> tuple[float, float]:
        """The noise factor pooled over the tunings, and its standard uncertainty."""
        return self._pooled("noise_factor", "u_noise_factor")

    @property
    def noise_figure_db(self) -> float:
        return _db(self.noise_factor[0])

    @property
    def u_noise_figure_db(self) -> float:
        return _u_db(self.noise_factor[1], self.noise_factor[0])

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.u_noise_figure_db

    def _dut_pooled(self, name: str) -> tuple[float, float]:
        d = [b.numbers.dut for b in self.bands if b.has_dut]
        return _mean_with_u([float(np.asarray(getattr(x, name))[-1]) for x in d],
                            [float(np.asarray(getattr(x, "u_" + name))[-1]) for x in d])

    @property
    def insertion_loss_db(self) -> float | None:
        if not self.has_dut:
            return None
        g, _ = self._dut_pooled("gain")
        return -_db(g)

    @property
    def u_insertion_loss_db(self) -> float | None:
        if not self.has_dut:
            return None
        g, u = self._dut_pooled("gain")
        return _u_db(u, g)

    def columns(self) -> dict | None:
        """The stitched curve as columns (a session's ``loss_vs_frequency``): points with a noise figure
        only, missing values None; None without absolute frequencies."""
        if not self.absolute:
            return None
        rows = [r for r in self.curve if math.isfinite(r["noise_figure_db"])]
        names = {"frequency_hz": "frequency_hz", "width_hz": "width_hz", "noise_figure_db": "noise_figure_db",
                 "u_noise_figure_db": "noise_figure_u_db", "insertion_loss_db": "insertion_loss_db",
                 "u_insertion_loss_db": "insertion_loss_u_db", "u_insertion_loss_own_db": "insertion_loss_own_u_db",
                 "dut_noise_figure_db": "dut_noise_figure_db", "u_dut_noise_figure_db": "dut_noise_figure_u_db"}
        out = {k: [None if r.get(v) is None or not math.isfinite(r[v]) else r[v] for r in rows]
               for k, v in names.items()}
        out["k"] = COVERAGE_FACTOR
        out["has_loss"] = any(v is not None for v in out["insertion_loss_db"])
        return out

    def to_dict(self) -> dict:
        f, u_f = self.noise_factor
        y = float(np.mean([b.y for b in self.bands]))
        enr = float(np.mean([b.enr for b in self.bands]))
        out = {
            "method": "y-factor", "noise_figure_db": self.noise_figure_db, "noise_figure_u_db": self.u_noise_figure_db,
            "noise_figure_expanded_uncertainty_db": self.expanded_uncertainty_db,
            "noise_temperature_k": T0_K * (f - 1.0), "noise_temperature_u_k": T0_K * u_f,
            "y_db": _db(y), "enr_db": _db(enr), "enr": self.enr, "enr_u_db": self.u_enr_db, "t_cold_k": self.t_cold_k,
            "coverage_factor": COVERAGE_FACTOR, "device": self.device,
        }
        if self.has_dut:
            f1, u_f1 = self._dut_pooled("noise_factor")
            out.update(insertion_loss_db=self.insertion_loss_db, insertion_loss_u_db=self.u_insertion_loss_db,
                       insertion_loss_expanded_uncertainty_db=COVERAGE_FACTOR * self.u_insertion_loss_db,
                       dut_noise_figure_db=_db(f1), dut_noise_figure_u_db=_u_db(u_f1, f1))
        out["bands"] = [b.to_dict() for b in self.bands]
        out["curve"] = [dict(r) for r in self.curve]
        if self.absolute:
            if self.has_dut:
                out["per_band"] = list(self.per_band)
            out["per_band_noise_figure"] = list(self.per_band_noise_figure)
        out["warnings"] = list(self.warnings)
        return out


def noise_figure_curve(bands: Sequence[NoiseSourceBand], *, enr: str = "", u_enr_db: float = 0.0,
                       t_cold_k: float = T0_K) -> NoiseFigureResult:
    """The noise figure (and the DUT's loss) of one device over every tuning: pooled, stitched into one
    curve across frequency, and per amateur band.

    ``bands`` are the :func:`y_factor_band` results of one device, one per tuning; ``enr`` says how
    the ENR was given; ``u_enr_db`` is shared by every sub-band of the per-band noise-figure table
    (the noise figure moves dB for dB with the ENR, so it does not average down).
    """
    from rxbench.sweep_report import loss_band_rows, nf_band_rows

    bands = tuple(sorted(bands, key=lambda b: (b.center_hz is None, b.center_hz or 0.0)))
    if not bands:
        raise MeasurementError("no tuning with both a hot and a cold capture; no noise figure")
    warnings = [w for b in bands for w in b.warnings]
    curve = tuple(_curve_rows(bands))
    result = NoiseFigureResult(bands, curve, enr, float(u_enr_db), float(t_cold_k))
    per_band = per_nf = ()
    if result.absolute and curve:
        f = [r["frequency_hz"] for r in curve]
        w = [r["width_hz"] for r in curve]
        if result.has_dut:
            per_band = tuple(loss_band_rows(result.device, f, w, [r["insertion_loss_db"] for r in curve],
                                            [r["insertion_loss_u_db"] for r in curve], k=COVERAGE_FACTOR,
                                            n_devices=max(b.n_devices for b in bands)))
        per_nf = tuple(nf_band_rows(f, w, [r["noise_figure_db"] for r in curve], [r["noise_figure_u_db"] for r in curve],
                                    u_enr_db=u_enr_db, k=COVERAGE_FACTOR))
    f_mean, _ = result.noise_factor
    if f_mean < 1.0:
        warnings.append(f"noise figure {result.noise_figure_db:.2f} dB is below 0 dB, which is impossible: the ENR is "
                        "too high, or the dongle's gain (AGC) changed between the hot and cold captures")
    if result.has_dut:
        il, u95 = result.insertion_loss_db, COVERAGE_FACTOR * result.u_insertion_loss_db
        if il < 0:
            warnings.append(f"the DUT shows {-il:.2f} dB of gain: not a passive device, or the dongle's gain "
                            "changed between the reference and the DUT captures")
        if u95 > U_WARN_DB:
            warnings.append(f"insertion loss uncertain by ±{u95:.2f} dB (95 %): too little noise-source excess came "
                            "through the DUT; use more ENR or longer captures")
    return replace(result, per_band=per_band, per_band_noise_figure=per_nf, warnings=tuple(warnings))
