"""External noise: how far the antenna's noise sits above the receiver's own (the excess over a
50-ohm load), the knee fit of antenna readings through known attenuation, and what that means
for the antenna temperature, Fa and the loss the station can afford.

``rxbench excess`` and a session's ``antenna``/``load`` captures call :func:`external_noise`; the
numerics are in :mod:`rxbench.dsp.excess` and :mod:`rxbench.dsp.environment`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from rxbench.dsp import environment as env
from rxbench.dsp.excess import density_ratio_db, fit_knee, mean_density
from rxbench.dsp.units import T0_K, db_from_power, noise_temperature_from_nf_db
from rxbench.errors import MeasurementError
from rxbench.methods.common import COVERAGE_FACTOR, with_aliases
from rxbench.style import band_name

#: Below this excess (dB) the antenna noise is too close to the receiver's own to say much about Ta.
LOW_EXCESS_DB = 1.0
#: Above this standard uncertainty of the excess (dB) a longer capture is advised.
HIGH_U_EXCESS_DB = 0.5
#: Fit residual (RMS, dB) above which the ladder does not follow the model.
MAX_RESIDUAL_RMS_DB = 0.5
#: SNR costs (dB) for which the affordable loss is reported.
BUDGET_COSTS_DB = (0.5, 1.0)
#: Losses (dB) for which the SNR cost is tabulated.
EXAMPLE_LOSSES_DB = (1.0, 3.0, 6.0, 10.0)
#: Name of the prediction with galactic noise added to the quietest man-made category.
QUIET_GALACTIC = "quiet-rural + galactic"
#: Old key names (old -> new), kept for one release.
ALIASES = {"itu_fa_db": "p372_fa_db", "ladder": "knee", "rx_nf_db": "receiver_noise_figure_db"}

CAVEATS = (
    "The excess is read over the capture's band at one time; band noise changes through the day and "
    "with the season, so repeat the reading at the hours you listen.",
    "The 50-ohm load is taken to be at 290 K and matched; the dongle's gain must be fixed (AGC off) "
    "and the same for every capture.",
    "The SNR cost of a loss follows from the excess alone; the noise figure is needed only to turn "
    "the excess into an antenna temperature and Fa.",
)


def _names(readings) -> list[str]:
    return [r.capture.name for r in readings]


def _density(readings) -> tuple[float, float]:
    """Mean noise density of repeated captures and its standard uncertainty."""
    return mean_density([r.floor.density for r in readings], [r.floor.u_density for r in readings])


def p372_medians(frequency_hz: float | None) -> dict | None:
    """ITU-R P.372 median Fa (dB) per man-made category, and the quietest with galactic noise
    added; None outside the lines' range or without a frequency."""
    if frequency_hz is None or not env.VALID_RANGE_HZ[0] <= frequency_hz <= env.VALID_RANGE_HZ[1]:
        return None
    out = {k: float(env.man_made_fa_db(frequency_hz, k)) for k in env.MAN_MADE_NOISE}
    out[QUIET_GALACTIC] = float(env.external_fa_db(frequency_hz, "quiet-rural", galactic=True))
    return out


def loss_budget(excess_db: float) -> dict:
    """The loss that costs each of :data:`BUDGET_COSTS_DB` of SNR, dB."""
    losses = env.loss_for_snr_degradation_db(np.array(BUDGET_COSTS_DB), T0_K * 10 ** (excess_db / 10), 0.0)
    return {f"snr_cost_{c:g}_db": float(v) for c, v in zip(BUDGET_COSTS_DB, losses)}


@dataclass(frozen=True, eq=False)
class ExcessResult:
    """The antenna-noise excess at one tuning and what it means.

    Attributes
    ----------
    center_hz, sample_rate_hz : float or None
    excess_db, u_excess_db : float
        The excess used: the direct antenna-over-load reading when there is one, else the knee fit.
    measured_excess_db, u_measured_excess_db : float or None
        The direct reading (antenna at 0 dB over the load).
    antenna_density_db, load_density_db : float or None
        The two densities of the direct reading, dBFS/Hz.
    knee : dict or None
        The knee fit of the antenna readings through attenuation.
    receiver_noise_figure_db, antenna_temperature_k, fa_db : float or None
        With a receiver noise figure: the antenna temperature and Fa the excess implies.
    through_dut : dict or None
        The antenna through the DUT: the drop of its noise.
    captures : dict
    warnings : tuple of str
    receiver_noise_figure_note : str or None
        Where the receiver noise figure came from when it was not measured at this tuning (a
        session's nearest tunings); None otherwise.
    """

    center_hz: float | None
    sample_rate_hz: float
    excess_db: float
    u_excess_db: float
    measured_excess_db: float | None = None
    u_measured_excess_db: float | None = None
    antenna_density_db: float | None = None
    load_density_db: float | None = None
    knee: dict | None = None
    receiver_noise_figure_db: float | None = None
    antenna_temperature_k: float | None = None
    fa_db: float | None = None
    through_dut: dict | None = None
    captures: dict = field(default_factory=dict)
    warnings: tuple = ()
    receiver_noise_figure_note: str | None = None

    @property
    def frequency_hz(self) -> float | None:
        return self.center_hz

    @property
    def band(self) -> str:
        """The amateur band of the tuning, or its frequency (:func:`rxbench.style.band_name`)."""
        return band_name(self.center_hz)

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.u_excess_db

    @property
    def receiver_temperature_k(self) -> float | None:
        nf = self.receiver_noise_figure_db
        return None if nf is None else noise_temperature_from_nf_db(nf)

    @property
    def p372_fa_db(self) -> dict | None:
        return p372_medians(self.center_hz)

    def snr_cost_table(self) -> list[dict]:
        """The SNR cost of each of :data:`EXAMPLE_LOSSES_DB` behind this excess."""
        costs = env.snr_degradation_db(np.array(EXAMPLE_LOSSES_DB), T0_K * 10 ** (self.excess_db / 10), 0.0)
        return [{"loss_db": v, "snr_degradation_db": float(c)} for v, c in zip(EXAMPLE_LOSSES_DB, costs)]

    def to_dict(self) -> dict:
        out = {
            "center_hz": self.center_hz, "frequency_hz": self.frequency_hz, "sample_rate_hz": self.sample_rate_hz,
            "excess_db": self.excess_db, "u_excess_db": self.u_excess_db,
            "expanded_uncertainty_db": self.expanded_uncertainty_db, "coverage_factor": COVERAGE_FACTOR,
            "measured_excess_db": self.measured_excess_db, "u_measured_excess_db": self.u_measured_excess_db,
            "antenna_density_dbfs_per_hz": self.antenna_density_db, "load_density_dbfs_per_hz": self.load_density_db,
            "knee": self.knee, "receiver_noise_figure_db": self.receiver_noise_figure_db,
            "receiver_temperature_k": self.receiver_temperature_k,
            "antenna_temperature_k": self.antenna_temperature_k, "fa_db": self.fa_db,
            "p372_fa_db": self.p372_fa_db, "through_dut": self.through_dut,
            "snr_cost": self.snr_cost_table(), "loss_budget_db": loss_budget(self.excess_db),
            "caveats": list(CAVEATS), "captures": self.captures, "warnings": list(self.warnings),
        }
        if self.receiver_noise_figure_note is not None:
            out["receiver_noise_figure_note"] = self.receiver_noise_figure_note
        return with_aliases(out, ALIASES)


def _knee(points: dict, load, trx_k, warnings) -> dict | None:
    """The knee fit of antenna readings (attenuation dB -> readings), with the load when known."""
    loss = np.array(list(points), dtype=float)
    dens = [_density(rs) for rs in points.values()]
    d = np.array([v[0] for v in dens])
    u = np.array([v[1] for v in dens])
    kw = {}
    if load:
        kw = dict(zip(("load_density", "u_load_density"), _density(load)))
    fit = fit_knee(loss, d, u_density=u, receiver_temperature_k=trx_k, **kw)
    model = (fit.antenna_density - fit.load_density) / 10 ** (loss / 10) + fit.load_density
    out = {
        "steps": [{"loss_db": float(v), "capture": str(rs[0].capture.path), "captures": _names(rs),
                   "density_dbfs_per_hz": float(db_from_power(di)), "model_dbfs_per_hz": float(db_from_power(m)),
                   "residual_db": float(r)}
                  for (v, rs), di, m, r in zip(points.items(), d, model, fit.residuals_db)],
        "steps_db": loss.tolist(), "density_dbfs_per_hz": db_from_power(d).tolist(),
        "residuals_db": fit.residuals_db.tolist(), "residual_rms_db": fit.residual_rms_db,
        "excess_db": fit.excess_db, "u_excess_db": fit.u_excess_db,
        "fitted_antenna_density_dbfs_per_hz": float(db_from_power(fit.antenna_density)),
        "fitted_load_density_dbfs_per_hz": float(db_from_power(fit.load_density)),
        "external_density_dbfs_per_hz": None, "internal_density_dbfs_per_hz": None,
        "max_step_db": float(loss.max()),
    }
    if trx_k is not None:
        if fit.external_density > 0:
            out["external_density_dbfs_per_hz"] = float(db_from_power(fit.external_density))
        else:
            warnings.append("the fitted external noise is not above zero: the ladder readings and the noise "
                            "figure disagree")
        out["internal_density_dbfs_per_hz"] = float(db_from_power(fit.internal_density))
    if fit.n_points > 2 and fit.residual_rms_db > MAX_RESIDUAL_RMS_DB:
        warnings.append(f"the ladder readings depart from the lossy-network model by {fit.residual_rms_db:.2f} dB "
                        "RMS: check the attenuator steps, that the gain was fixed, and that the band noise was steady")
    if fit.n_points == 2:
        warnings.append("two readings fit the model exactly: add ladder steps to check it")
    return out


def external_noise(antenna: Mapping[float, Sequence], load: Sequence = (), *, rx_nf_db: float | None = None,
                   through_dut: Sequence = ()) -> ExcessResult:
    """The excess of antenna noise over a 50-ohm load's, at one tuning.

    Parameters
    ----------
    antenna : mapping of float to readings
        Attenuation ahead of the dongle (dB; 0 for the antenna alone) -> noise readings of the
        antenna through it (repeats are pooled).
    load : readings
        The 50-ohm load in the antenna's place.
    rx_nf_db : float, optional
        The receiver's noise figure: gives the antenna temperature and Fa (and splits the fit).
    through_dut : readings
        The antenna through the DUT at 0 dB: the drop of its noise.

    Raises
    ------
    MeasurementError
        Neither a direct reading (antenna at 0 dB and a load) nor a usable knee fit.
    """
    warnings: list[str] = []
    points = {float(a): list(rs) for a, rs in sorted(antenna.items()) if rs}
    load = list(load)
    if not points:
        raise MeasurementError("no antenna capture; no excess")
    if not load and len(points) < 2:
        raise MeasurementError("an antenna capture but no load capture (and no antenna ladder); no excess")
    first = next(iter(points.values()))[0].capture
    trx_k = None if rx_nf_db is None else noise_temperature_from_nf_db(rx_nf_db)
    direct = {}
    if 0.0 in points and load:
        (da, ua), (dl, ul) = _density(points[0.0]), _density(load)
        excess, u_excess = density_ratio_db(da, ua, dl, ul)
        direct = dict(measured_excess_db=excess, u_measured_excess_db=u_excess,
                      antenna_density_db=float(db_from_power(da)), load_density_db=float(db_from_power(dl)))
    knee = None
    if len(points) >= 2 or (0.0 not in points and load):
        try:
            knee = _knee(points, load, trx_k, warnings)
        except ValueError as exc:
            if not direct:
                raise MeasurementError(f"knee fit: {exc}") from None
            warnings.append(f"knee fit: {exc}")
    if direct:
        excess, u_excess = direct["measured_excess_db"], direct["u_measured_excess_db"]
    elif knee is not None and math.isfinite(knee["u_excess_db"]):
        excess, u_excess = knee["excess_db"], knee["u_excess_db"]
    else:
        raise MeasurementError("no antenna capture at 0 dB with a load, and no usable fit; no excess")
    if excess < LOW_EXCESS_DB:
        warnings.append(f"the antenna noise is only {excess:.2f} dB above the dongle's own: almost every dB of "
                        "loss costs a dB of SNR here; a quieter receiver (or a preamplifier) would help more "
                        "than less loss")
    if math.isfinite(u_excess) and u_excess > HIGH_U_EXCESS_DB:
        warnings.append(f"the excess is uncertain by {u_excess:.2f} dB (standard): capture longer")
    if knee is not None:
        for key, loss_db in loss_budget(excess).items():
            if loss_db > knee["max_step_db"]:
                warnings.append(f"the loss for {key.replace('snr_cost_', '').replace('_db', '')} dB of SNR cost "
                                f"({loss_db:.1f} dB) lies beyond the ladder's largest step "
                                f"({knee['max_step_db']:g} dB): it is extrapolated by the model")
    ta = fa = None
    if trx_k is not None:
        try:
            ta = float(env.antenna_temperature_from_excess(excess, trx_k))
        except ValueError:
            warnings.append(f"an excess of {excess:.2f} dB with a receiver noise figure of {rx_nf_db:g} dB implies "
                            "a negative antenna temperature: the noise figure is too high for these captures, "
                            "or the load capture is not a matched load")
        else:
            fa = float(env.fa_db_from_temperature(ta)) if ta > 0 else None
    thru = None
    if through_dut and 0.0 in points:
        (da, ua), (dd, ud) = _density(points[0.0]), _density(through_dut)
        drop, u_drop = density_ratio_db(da, ua, dd, ud)
        thru = {"density_dbfs_per_hz": float(db_from_power(dd)), "drop_db": drop, "u_drop_db": u_drop,
                "captures": _names(through_dut)}
    return ExcessResult(
        first.center_hz, first.sample_rate_hz, float(excess), float(u_excess), **direct, knee=knee,
        receiver_noise_figure_db=rx_nf_db, antenna_temperature_k=ta, fa_db=fa, through_dut=thru,
        captures={"antenna": {f"{a:g}": _names(rs) for a, rs in points.items()}, "load": _names(load)},
        warnings=tuple(warnings))
