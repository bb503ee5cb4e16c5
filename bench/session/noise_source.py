"""Noise-source methods of a session: the Y-factor noise figure, the DUT's loss and noise figure per
sub-band, and the curves stitched across tunings."""

from __future__ import annotations

from typing import TYPE_CHECKING

import math

import numpy as np

from rxbench.dsp import noisefig
from rxbench.dsp.uncertainty import DEFAULT_K
from rxbench.session.folder import Entry
from rxbench.session.grouping import _compatible, _mhz

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


#: Below this Y-factor the noise figure is hardly measurable, dB.
LOW_Y_DB = 1.0


def _enr_for(entries: list[Entry], where, warnings):
    vals = sorted({e.enr_db for e in entries if e.enr_db is not None})
    if not vals:
        return None
    if len(vals) > 1:
        warnings.append(f"{where}: the hot captures give different ENRs ({', '.join(f'{v:g}' for v in vals)} dB); "
                        f"using {vals[0]:g} dB")
    return vals[0]


def _noise_source(center, group: list[Entry], readings, analysis: Analysis, n_sub_bands: int):
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
    psd = [[readings[e].psd for e in es] for es in (cold, hot) + ((cold_d, hot_d) if with_dut else ())]
    try:
        ns = noisefig.noise_source_analysis(*psd, enr_db=enr_db, n_sub_bands=n_sub_bands, u_enr_db=u_enr_db,
                                            dc_halfwidth_hz=None if ref.capture.is_complex else 0.0)
    except ValueError as exc:
        warnings.append(f"{where}: {exc}")
        return None
    if not ns.valid[-1]:
        warnings.append(f"{where}: the hot captures do not read above the cold ones over the band; "
                        "no noise figure")
        return None
    yf = ns.receiver
    y_db = yf.y_db
    if y_db[-1] < LOW_Y_DB:
        warnings.append(f"{where}: the hot capture is only {y_db[-1]:.2f} dB above the cold one; the noise "
                        "figure is poorly determined (a stronger noise source would help)")
    if not ns.valid[:-1].all():
        warnings.append(f"{where}: in {int((~ns.valid[:-1]).sum())} sub-band(s) the hot reading is not above "
                        "the cold one; no noise figure there")
    nf, u_nf = yf.nf_db, yf.u_nf_db
    res = {
        "center_hz": center, "enr_db": enr_db, "u_enr_db": u_enr_db,
        "y_db": float(y_db[-1]), "noise_figure_db": float(nf[-1]), "u_noise_figure_db": float(u_nf[-1]),
        "expanded_uncertainty_db": DEFAULT_K * float(u_nf[-1]),
        "noise_temperature_k": float(yf.noise_temperature_k[-1]),
        "u_noise_temperature_k": float(yf.u_noise_temperature_k[-1]),
        "band_hz": [float(ns.low_hz[-1]), float(ns.high_hz[-1])],
        "captures": {"cold": [e.name for e in cold], "hot": [e.name for e in hot]},
        "insertion_loss_db": None, "expanded_uncertainty_loss_db": None, "dut_noise_figure_db": None,
    }
    sub = {"offset_hz": ns.center_hz[:-1].tolist(), "width_hz": (ns.high_hz - ns.low_hz)[:-1].tolist(),
           "noise_figure_db": nf[:-1].tolist(), "u_noise_figure_db": u_nf[:-1].tolist()}
    dut = ns.dut
    if dut is not None and not ns.valid_dut[-1]:
        warnings.append(f"{where} through the DUT: the hot captures through the DUT do not read above the cold "
                        "ones over the band; no loss")
    elif dut is not None:
        if not ns.valid_dut[:-1].all():
            warnings.append(f"{where} through the DUT: in {int((~ns.valid_dut[:-1]).sum())} sub-band(s) no "
                            "excess came through the DUT; no loss there")
        il, u_il = dut.insertion_loss_db, dut.u_insertion_loss_db
        dnf, u_dnf = dut.nf_db, dut.u_nf_db
        res.update({
            "insertion_loss_db": float(il[-1]), "u_insertion_loss_db": float(u_il[-1]),
            "expanded_uncertainty_loss_db": DEFAULT_K * float(u_il[-1]),
            "dut_noise_figure_db": float(dnf[-1]), "u_dut_noise_figure_db": float(u_dnf[-1]),
        })
        res["captures"].update({"cold_dut": [e.name for e in cold_d], "hot_dut": [e.name for e in hot_d]})
        own = noisefig.excess_u_db(ns.n_hot_dut, ns.n_cold_dut, ns.dof_hot_dut, ns.dof_cold_dut)
        sub.update({"insertion_loss_db": il[:-1].tolist(), "u_insertion_loss_db": u_il[:-1].tolist(),
                    "u_insertion_loss_own_db": np.asarray(own, dtype=float)[:-1].tolist(),
                    "dut_noise_figure_db": dnf[:-1].tolist(), "u_dut_noise_figure_db": u_dnf[:-1].tolist()})
    res["sub_bands"] = sub
    res["device"] = cold_d[0].device if with_dut else ""
    res["n_devices"] = cold_d[0].n_devices if with_dut else 1
    return res


def _stitch(noise: list[dict]) -> dict | None:
    """Loss and noise figure across frequency, from the sub-bands of every tuning."""
    tuned = [n for n in noise if n["center_hz"] is not None]
    if not tuned:
        return None
    freqs, keep = noisefig.stitch_offsets([n["center_hz"] for n in tuned],
                                          [n["sub_bands"]["offset_hz"] for n in tuned], [n["band_hz"] for n in tuned])
    cols = {"frequency_hz": [], "width_hz": [], "noise_figure_db": [], "u_noise_figure_db": [],
            "insertion_loss_db": [], "u_insertion_loss_db": [], "u_insertion_loss_own_db": [], "dut_noise_figure_db": [],
            "u_dut_noise_figure_db": []}
    for n, f, m in zip(tuned, freqs, keep):
        sub = n["sub_bands"]
        m = m & ~np.isnan(sub["noise_figure_db"])  # a sub-band without a noise figure is no point
        cols["frequency_hz"] += f[m].tolist()
        for key in list(cols)[1:]:
            vals = sub.get(key)
            cols[key] += ([None if math.isnan(v) else v for v in np.asarray(vals, dtype=float)[m].tolist()]
                          if vals is not None else [None] * int(m.sum()))
    order = np.argsort(cols["frequency_hz"])
    out = {k: [v[i] for i in order] for k, v in cols.items()}
    out["k"] = DEFAULT_K
    out["has_loss"] = any(v is not None for v in out["insertion_loss_db"])
    return out
