"""External noise in a session: the antenna-noise excess, the knee fit, and the SNR the loss costs."""

from __future__ import annotations

import dataclasses
from typing import TYPE_CHECKING

import numpy as np

from rxbench.dsp.bands import curve_at, near_tunings
from rxbench.errors import MeasurementError
from rxbench.methods.external import ExcessResult, external_noise
from rxbench.methods.snr_cost import snr_cost
from rxbench.session.folder import Entry
from rxbench.style import fmt_hz
from rxbench.session.grouping import _compatible, _mhz

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


def loss_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """The measured insertion loss at ``frequency_hz``, its standard uncertainty, where it was measured.

    A tone-based loss counts when its tone lies within ``half_band_hz``; otherwise the noise-source
    curve is used: the sub-band holding the frequency, or a straight line between two neighbouring
    sub-bands (never extrapolated beyond the curve; :func:`rxbench.dsp.bands.curve_at`). Returns
    (loss_db, u_db, at_hz, source) or None.
    """
    cands = [x for x in analysis.losses
             if x.frequency_hz is not None and abs(x.frequency_hz - frequency_hz) <= half_band_hz]
    if cands:
        best = min(cands, key=lambda x: x.expanded_uncertainty_db)
        return (best.insertion_loss_db, best.u_db, best.frequency_hz,
                f"{best.method} loss at {best.frequency_hz / 1e6:.4f} MHz")
    curve = analysis.loss_vs_frequency
    if curve is None or not curve["has_loss"]:
        return None
    p = curve_at(frequency_hz, curve["frequency_hz"], curve["width_hz"], curve["insertion_loss_db"],
                 curve["u_insertion_loss_db"])
    if p is None:
        return None
    where = ("interpolated between two sub-bands" if p.interpolated
             else f"sub-band at {p.at_hz / 1e6:.4f} MHz")
    return p.value_db, p.u_db, p.at_hz, f"noise-source loss, {where}"
    return None


#: A receiver noise figure measured this far away (fraction of the frequency) may stand in for one at
#: the frequency itself, stated as such: a dongle's noise figure changes slowly across a band
#: (common practice).
NF_NEAREST_FRACTION = 0.1


def _nf_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """Receiver noise figure (dB), its u and a note at ``frequency_hz``: the same tuning or the curve
    (note None); else the nearest measured tunings, interpolated between the two either side (or the
    nearest one; :func:`rxbench.dsp.bands.near_tunings`), within :data:`NF_NEAREST_FRACTION` of the
    frequency, with a note saying how far away they were; else None."""
    for n in analysis.noise_figure:
        if n.center_hz is not None and abs(n.center_hz - frequency_hz) <= half_band_hz:
            return n.noise_figure_db, n.u_noise_figure_db, None
    curve = analysis.loss_vs_frequency
    if curve is not None and curve["frequency_hz"]:
        f = np.array(curve["frequency_hz"])
        w = np.array(curve["width_hz"])
        if (np.abs(f - frequency_hz) <= w).any():
            i = int(np.argmin(np.abs(f - frequency_hz)))
            return curve["noise_figure_db"][i], curve["u_noise_figure_db"][i], None
    tuned = [n for n in analysis.noise_figure if n.center_hz is not None]
    near = near_tunings(frequency_hz, [n.center_hz for n in tuned], [n.noise_figure_db for n in tuned],
                        [n.u_noise_figure_db for n in tuned], max_distance_hz=NF_NEAREST_FRACTION * frequency_hz)
    if near is None:
        return None
    f0, f1 = near.low_hz, near.high_hz
    if f1 is not None:
        note = (f"receiver noise figure interpolated between {fmt_hz(f0)} and {fmt_hz(f1)} "
                f"({fmt_hz(frequency_hz - f0)} and {fmt_hz(f1 - frequency_hz)} away)")
    else:
        note = f"receiver noise figure measured at {fmt_hz(f0)}, {fmt_hz(abs(frequency_hz - f0))} away"
    return near.value_db, near.u_db, note


# --------------------------------------------------------------------------------------------
# External noise and what the loss costs


def _external(center, group: list[Entry], readings, analysis: Analysis) -> ExcessResult | None:
    """The excess at one tuning (:func:`rxbench.methods.external.external_noise`), with the note on a
    receiver noise figure taken from other tunings."""
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
        by_att.setdefault(e.attenuation_or_zero, []).append(readings[e])
    nf = _nf_at(analysis, center, 0.5 * ref.capture.sample_rate_hz) if center is not None else None
    try:
        res = external_noise(by_att, [readings[e] for e in load], rx_nf_db=None if nf is None else nf[0],
                             through_dut=[readings[e] for e in ant_dut])
    except MeasurementError as exc:
        warnings.append(f"{where}: {exc}")
        return None
    warnings.extend(f"{where}: {w}" for w in res.warnings)
    if nf is not None and nf[2] is not None:
        res = dataclasses.replace(res, receiver_noise_figure_note=nf[2])
        warnings.append(f"{where}: {nf[2]}: Fa and the predictions use it")
    return res


def _snr_costs(analysis: Analysis) -> None:
    for ex in analysis.external_noise:
        f = ex.frequency_hz
        where = f"SNR cost on {ex.band}"
        if f is None:
            analysis.warnings.append(f"{where}: the captures give no frequency; cannot match a loss")
            continue
        found = loss_at(analysis, f, 0.5 * ex.sample_rate_hz)
        if found is None:
            analysis.warnings.append(f"{where} ({f / 1e6:.3f} MHz): no loss measured at this frequency; "
                                     "the excess alone is reported")
            continue
        loss_db, u_loss, loss_hz, source = found
        td = ex.through_dut or {}
        res = snr_cost(loss_db, ex.excess_db, u_loss_db=u_loss, u_excess_db=ex.u_excess_db, frequency_hz=f,
                       rx_nf_db=ex.receiver_noise_figure_db, drop_db=td.get("drop_db"),
                       u_drop_db=td.get("u_drop_db", 0.0),
                       provenance={"loss_source": source, "loss_frequency_hz": loss_hz})
        analysis.warnings.extend(f"{where}: {w}" for w in res.warnings)
        analysis.snr_cost.append(res)
