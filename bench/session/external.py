"""External noise in a session: the antenna-noise excess, the knee fit, and the SNR the loss costs."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from rxbench.dsp import environment as env
from rxbench.dsp.uncertainty import DEFAULT_K
from rxbench.dsp.units import T0_K, db_from_power, noise_temperature_from_nf_db
from rxbench.session.bands import QUIET_GALACTIC, band_name
from rxbench.session.folder import Entry
from rxbench.style import fmt_hz
from rxbench.session.grouping import _compatible, _mhz

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


#: Below this excess the antenna noise is too close to the receiver's own to say much about Ta, dB.
LOW_EXCESS_DB = 1.0


_DB = 10.0 / math.log(10.0)


def loss_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """The measured insertion loss at ``frequency_hz``, its standard uncertainty, where it was measured.

    A tone-based loss counts when its tone lies within ``half_band_hz``; otherwise the noise-source
    curve is used: the sub-band holding the frequency, or a straight line between two neighbouring
    sub-bands (never extrapolated beyond the curve). Returns (loss_db, u_db, at_hz, source) or None.
    """
    cands = [x for x in analysis.losses
             if x["frequency_hz"] is not None and abs(x["frequency_hz"] - frequency_hz) <= half_band_hz]
    if cands:
        best = min(cands, key=lambda x: x["expanded_uncertainty_db"])
        return (best["insertion_loss_db"], best["u_db"], best["frequency_hz"],
                f"{best['method']} loss at {best['frequency_hz'] / 1e6:.4f} MHz")
    curve = analysis.loss_vs_frequency
    if curve is None or not curve["has_loss"]:
        return None
    pts = [(f, l, u, w) for f, l, u, w in zip(curve["frequency_hz"], curve["insertion_loss_db"],
                                               curve["u_insertion_loss_db"], curve["width_hz"]) if l is not None]
    f = np.array([p[0] for p in pts])
    i = int(np.searchsorted(f, frequency_hz))
    for j in (i - 1, i):
        if 0 <= j < len(pts) and abs(pts[j][0] - frequency_hz) < pts[j][3] / 2:
            return pts[j][1], pts[j][2], pts[j][0], f"noise-source loss, sub-band at {pts[j][0] / 1e6:.4f} MHz"
    if 0 < i < len(pts) and f[i] - f[i - 1] <= pts[i][3] + pts[i - 1][3]:
        w = (frequency_hz - f[i - 1]) / (f[i] - f[i - 1])
        loss = (1 - w) * pts[i - 1][1] + w * pts[i][1]
        u = math.hypot((1 - w) * pts[i - 1][2], w * pts[i][2])
        return loss, u, frequency_hz, "noise-source loss, interpolated between two sub-bands"
    return None


#: A receiver noise figure measured this far away (fraction of the frequency) may stand in for one at
#: the frequency itself, stated as such: a dongle's noise figure changes slowly across a band
#: (common practice).
NF_NEAREST_FRACTION = 0.1


def _nf_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """Receiver noise figure (dB), its u and a note at ``frequency_hz``: the same tuning or the curve
    (note None); else the nearest measured tunings, interpolated between the two either side (or the
    nearest one), within :data:`NF_NEAREST_FRACTION` of the frequency, with a note saying how far
    away they were; else None."""
    for n in analysis.noise_figure:
        if n["center_hz"] is not None and abs(n["center_hz"] - frequency_hz) <= half_band_hz:
            return n["noise_figure_db"], n["u_noise_figure_db"], None
    curve = analysis.loss_vs_frequency
    if curve is not None and curve["frequency_hz"]:
        f = np.array(curve["frequency_hz"])
        w = np.array(curve["width_hz"])
        if (np.abs(f - frequency_hz) <= w).any():
            i = int(np.argmin(np.abs(f - frequency_hz)))
            return curve["noise_figure_db"][i], curve["u_noise_figure_db"][i], None
    tuned = sorted((n["center_hz"], n["noise_figure_db"], n["u_noise_figure_db"]) for n in analysis.noise_figure
                   if n["center_hz"] is not None and n.get("noise_figure_db") is not None)
    near = [t for t in tuned if abs(t[0] - frequency_hz) <= NF_NEAREST_FRACTION * frequency_hz]
    if not near:
        return None
    below = [t for t in near if t[0] < frequency_hz]
    above = [t for t in near if t[0] > frequency_hz]
    if below and above:
        (f0, nf0, u0), (f1, nf1, u1) = below[-1], above[0]
        w = (frequency_hz - f0) / (f1 - f0)
        note = (f"receiver noise figure interpolated between {fmt_hz(f0)} and {fmt_hz(f1)} "
                f"({fmt_hz(frequency_hz - f0)} and {fmt_hz(f1 - frequency_hz)} away)")
        return nf0 + w * (nf1 - nf0), max(u0, u1), note
    f0, nf0, u0 = min(near, key=lambda t: abs(t[0] - frequency_hz))
    return nf0, u0, f"receiver noise figure measured at {fmt_hz(f0)}, {fmt_hz(abs(frequency_hz - f0))} away"


def _external(center, group: list[Entry], readings, analysis: Analysis):
    warnings = analysis.warnings
    where = f"external noise at {_mhz(center)}"
    ant = [e for e in group if e.role == "antenna" and not e.through_dut]
    ant_dut = [e for e in group if e.role == "antenna" and e.through_dut]
    for e in group:
        if e.role == "load" and e.through_dut:
            warnings.append(f"{where}: {e.name} is a load through the DUT; the excess uses the load without it")
        if e.role == "antenna" and e.through_dut and e.attenuation_or_zero != 0.0:
            warnings.append(f"{where}: {e.name} is the antenna through the DUT and an attenuator; left out")
    load = [e for e in group if e.role == "load" and not e.through_dut]
    if not ant:
        warnings.append(f"{where}: no antenna capture without the DUT; no excess")
        return None
    ref = ant[0]
    ant, load = _compatible(ant, ref, where, warnings), _compatible(load, ref, where, warnings)
    ant_dut = _compatible([e for e in ant_dut if e.attenuation_or_zero == 0.0], ref, where, warnings)
    by_att: dict = {}
    for e in ant:
        by_att.setdefault(e.attenuation_or_zero, []).append(e)

    def dens(es):
        d = np.array([readings[e].floor.density for e in es])
        u = np.array([readings[e].floor.u_density for e in es])
        return float(d.mean()), float(math.sqrt(np.sum(u**2)) / len(es))

    points = {att: dens(es) for att, es in sorted(by_att.items())}
    load_d = dens(load) if load else None
    res = {"center_hz": center, "band": band_name(center), "frequency_hz": center,
           "sample_rate_hz": ref.capture.sample_rate_hz,
           "captures": {"antenna": {f"{a:g}": [e.name for e in es] for a, es in by_att.items()},
                        "load": [e.name for e in load]}, "knee": None}
    if load_d is None and len(points) < 2:
        warnings.append(f"{where}: an antenna capture but no load capture (and no antenna ladder); no excess")
        return None
    if 0.0 in points and load_d is not None:
        (da, ua), (dl, ul) = points[0.0], load_d
        excess = float(db_from_power(da / dl))
        u_excess = _DB * math.hypot(ua / da, ul / dl)
        res.update(antenna_density_dbfs_per_hz=float(db_from_power(da)),
                   load_density_dbfs_per_hz=float(db_from_power(dl)))
    else:
        excess = u_excess = None
    if len(points) >= 2 or (points and 0.0 not in points and load_d is not None):
        loss = np.array(list(points))
        d = np.array([v[0] for v in points.values()])
        u = np.array([v[1] for v in points.values()])
        kw = {} if load_d is None else {"load_density": load_d[0], "u_load_density": load_d[1]}
        try:
            fit = env.fit_knee(loss, d, u_density=u, **kw)
        except ValueError as exc:
            warnings.append(f"{where}: knee fit: {exc}")
            fit = None
        if fit is not None:
            res["knee"] = {"steps_db": loss.tolist(), "density_dbfs_per_hz": db_from_power(d).tolist(),
                           "residuals_db": fit.residuals_db.tolist(), "residual_rms_db": fit.residual_rms_db,
                           "excess_db": fit.excess_db, "u_excess_db": fit.u_excess_db}
            if excess is None and math.isfinite(fit.u_excess_db):
                excess, u_excess = fit.excess_db, fit.u_excess_db
    if excess is None:
        warnings.append(f"{where}: no antenna capture at 0 dB with a load, and no usable fit; no excess")
        return None
    res.update(excess_db=excess, u_excess_db=u_excess, expanded_uncertainty_db=DEFAULT_K * u_excess)
    res["through_dut"] = None
    if ant_dut and 0.0 in points:
        (da, ua), (dd, ud) = points[0.0], dens(ant_dut)
        res["through_dut"] = {"density_dbfs_per_hz": float(db_from_power(dd)),
                              "drop_db": float(db_from_power(da / dd)), "u_drop_db": _DB * math.hypot(ua / da, ud / dd),
                              "captures": [e.name for e in ant_dut]}
    if excess < LOW_EXCESS_DB:
        warnings.append(f"{where}: the antenna brings only {excess:.2f} dB more noise than the load: "
                        "the receiver's own noise dominates, so every dB of loss costs nearly a dB of SNR")
    half = 0.5 * ref.capture.sample_rate_hz
    nf = _nf_at(analysis, center, half) if center is not None else None
    res.update(receiver_noise_figure_db=None, antenna_temperature_k=None, fa_db=None)
    if nf is not None and nf[2] is not None:
        res["receiver_noise_figure_note"] = nf[2]
        warnings.append(f"{where}: {nf[2]}: Fa and the predictions use it")
    if nf is not None:
        trx = noise_temperature_from_nf_db(nf[0])
        try:
            ta = env.antenna_temperature_from_excess(excess, trx)
        except ValueError as exc:
            warnings.append(f"{where}: {exc}")
        else:
            res.update(receiver_noise_figure_db=nf[0], antenna_temperature_k=float(ta),
                       fa_db=float(env.fa_db_from_temperature(ta)) if ta > 0 else None)
    if center is not None and env.VALID_RANGE_HZ[0] <= center <= env.VALID_RANGE_HZ[1]:
        res["itu_fa_db"] = {k: float(env.man_made_fa_db(center, k)) for k in env.MAN_MADE_NOISE}
        res["itu_fa_db"][QUIET_GALACTIC] = float(env.external_fa_db(center, "quiet-rural", galactic=True))
    return res


def _cost(x_db: float, loss_db: float) -> float:
    """SNR cost of a loss given the excess X over a matched load: 10*log10(1 + (L - 1)/X), dB."""
    return float(env.snr_degradation_db(max(loss_db, 0.0), T0_K * 10 ** (x_db / 10), 0.0))


def _snr_costs(analysis: Analysis) -> None:
    for ex in analysis.external_noise:
        f = ex["frequency_hz"]
        where = f"SNR cost on {ex['band']}"
        if f is None:
            analysis.warnings.append(f"{where}: the captures give no frequency; cannot match a loss")
            continue
        found = loss_at(analysis, f, 0.5 * ex["sample_rate_hz"])
        if found is None:
            analysis.warnings.append(f"{where} ({f / 1e6:.3f} MHz): no loss measured at this frequency; "
                                     "the excess alone is reported")
            continue
        loss_db, u_loss, loss_hz, source = found
        if loss_db < 0:
            analysis.warnings.append(f"{where}: the measured loss is {loss_db:.2f} dB (below 0); cost taken at 0 dB")
        x, u_x = ex["excess_db"], ex["u_excess_db"]
        cost = _cost(x, loss_db)
        h = 1e-3
        d_l = (_cost(x, loss_db + h) - _cost(x, loss_db - h)) / (2 * h)
        d_x = (_cost(x + h, loss_db) - _cost(x - h, loss_db)) / (2 * h)
        u = math.hypot(d_l * u_loss, d_x * u_x)
        entry = {"band": ex["band"], "frequency_hz": f, "loss_db": loss_db, "u_loss_db": u_loss,
                 "loss_source": source, "loss_frequency_hz": loss_hz, "excess_db": x, "u_excess_db": u_x, "snr_degradation_db": cost,
                 "u_db": u, "expanded_uncertainty_db": DEFAULT_K * u, "k": DEFAULT_K,
                 "receiver_noise_figure_db": ex.get("receiver_noise_figure_db"), "predicted": None}
        thru_dut = ex.get("through_dut")
        if thru_dut is not None:
            # SNR through the DUT over SNR without it: L * N_dut / N_antenna (noise densities at the
            # dongle), so the cost is L - drop, with no model of the noise needed.
            direct = loss_db - thru_dut["drop_db"]
            u_direct = math.hypot(u_loss, thru_dut["u_drop_db"])
            entry.update(snr_degradation_through_dut_db=direct, expanded_uncertainty_through_dut_db=DEFAULT_K * u_direct)
            if abs(direct - cost) > DEFAULT_K * math.hypot(u, u_direct) + 0.05:
                analysis.warnings.append(
                    f"{where}: the cost from the excess ({cost:.2f} dB) and from the antenna through the DUT "
                    f"({direct:.2f} dB) disagree; check that the band noise was steady between the captures")
        nf = ex.get("receiver_noise_figure_db")
        if nf is not None and ex.get("itu_fa_db"):
            trx = noise_temperature_from_nf_db(nf)
            entry["predicted"] = {
                k: float(env.snr_degradation_db(max(loss_db, 0.0), env.temperature_from_fa_db(fa), trx))
                for k, fa in ex["itu_fa_db"].items()}
        analysis.snr_cost.append(entry)
