"""Noise-source methods of a session: the ``hot``/``cold`` captures of each tuning (and of each device
through the DUT) grouped by their role metadata and handed to the same methods ``rxbench nf`` calls
(:mod:`rxbench.methods.noise_source`)."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rxbench.dsp.units import T0_K
from rxbench.errors import MeasurementError, UsageError
from rxbench.methods.noise_curve import NoiseFigureResult, noise_figure_curve
from rxbench.methods.noise_source import NoiseSourceBand, y_factor_band
from rxbench.session.folder import Entry
from rxbench.session.grouping import _compatible, _mhz

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


def _enr_for(entries: list[Entry], where, warnings):
    vals = sorted({e.enr_db for e in entries if e.enr_db is not None})
    if not vals:
        return None
    if len(vals) > 1:
        warnings.append(f"{where}: the hot captures give different ENRs ({', '.join(f'{v:g}' for v in vals)} dB); "
                        f"using {vals[0]:g} dB")
    return vals[0]


def _noise_source(center, group: list[Entry], readings, analysis: Analysis, n_sub_bands: int) -> NoiseSourceBand | None:
    """The Y-factor method on one tuning's captures (those through the DUT of one device); None, with
    the reason among the analysis's warnings, when they do not give a noise figure."""
    warnings = analysis.warnings
    where = f"noise figure at {_mhz(center)}"
    cold = [e for e in group if e.role == "cold" and not e.through_dut]
    hot = [e for e in group if e.role == "hot" and not e.through_dut]
    cold_d = [e for e in group if e.role == "cold" and e.through_dut]
    hot_d = [e for e in group if e.role == "hot" and e.through_dut]
    if not cold or not hot:
        missing = "cold" if not cold else "hot"
        warnings.append(f"{where}: no {missing} capture without the DUT; no noise figure")
        return None
    ref = cold[0]
    cold, hot = _compatible(cold, ref, where, warnings), _compatible(hot, ref, where, warnings)
    cold_d, hot_d = _compatible(cold_d, ref, where, warnings), _compatible(hot_d, ref, where, warnings)
    if not hot:
        return None
    enr_db = _enr_for(hot + hot_d, where, warnings)
    if enr_db is None:
        warnings.append(f"{where}: the hot captures give no ENR (rxbench:enr_db); no noise figure")
        return None
    with_dut = bool(cold_d and hot_d)
    if (cold_d or hot_d) and not with_dut:
        warnings.append(f"{where}: hot and cold through the DUT are both needed for its loss; only one found")
    u_enr_db = max((e.u_enr_db or 0.0 for e in hot), default=0.0)
    dut = ([readings[e] for e in cold_d], [readings[e] for e in hot_d]) if with_dut else ((), ())
    try:
        band = y_factor_band([readings[e] for e in cold], [readings[e] for e in hot], *dut, enr_db=enr_db,
                             n_sub_bands=n_sub_bands, u_enr_db=u_enr_db, require_dut=False,
                             device=cold_d[0].device if with_dut else "",
                             n_devices=cold_d[0].n_devices if with_dut else 1)
    except (MeasurementError, UsageError) as exc:
        warnings.append(f"{where}: {exc}; no noise figure")
        return None
    warnings.extend(f"{where}: {w}" for w in band.warnings)
    return band


def _curves(bands: list[tuple[str, NoiseSourceBand]], analysis: Analysis) -> list[NoiseFigureResult]:
    """One result over every tuning per device label that gave a loss (``bands`` holds (label, band)
    pairs); without any loss, one result of the receiver alone (one band per tuning)."""
    by_label: dict[str, list[NoiseSourceBand]] = {}
    for label, band in bands:
        by_label.setdefault(label, []).append(band)
    with_loss = [lab for lab, bs in by_label.items() if any(b.has_dut for b in bs)]
    if with_loss:
        groups = {lab: by_label[lab] for lab in with_loss}
    else:
        one: dict = {}
        for _, band in bands:
            one.setdefault(band.center_hz, band)
        groups = {"": list(one.values())}
    out = []
    for label, mine in groups.items():
        if not mine:
            continue
        enrs = sorted({f"{b.to_dict()['enr_db']:.2f}" for b in mine})
        res = noise_figure_curve(mine, enr=f"{', '.join(enrs)} dB (from the hot captures' metadata)",
                                 u_enr_db=max(b.numbers.u_enr_db for b in mine), t_cold_k=T0_K)
        own = {w for b in mine for w in b.warnings}
        what = f"noise figure of {label}" if label else "noise figure"
        analysis.warnings.extend(f"{what}: {w}" for w in res.warnings if w not in own)
        out.append(res)
    return out
