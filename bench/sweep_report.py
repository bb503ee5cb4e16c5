"""A session's swept curves per device, per amateur band, and compared between devices.

Called by :func:`bench.session.analyze_session` once the noise-source results are in (one
:class:`rxbench.methods.noise_curve.NoiseFigureResult` per device label, which stitches the curve and
summarises it per band with the functions below): it takes one curve per device label, summarises each (and the receive system's noise figure) per band with
:mod:`dsp.bands`, checks each curve's continuity across retunes, and gives the per-band difference
between each device and the first, whose uncertainty comes from each device's own captures (the
reference captures, attenuator and source they share cancel and are not counted twice).
"""

from __future__ import annotations

import numpy as np

from rxbench.dsp import bands

#: A jump between neighbouring tunings beyond this many standard uncertainties is warned about.
JUMP_WARN_SIGMAS = 3.0


def loss_band_rows(label: str, frequency_hz, width_hz, loss_db, u_db, *, k: float, n_devices: int = 1) -> list[dict]:
    """Per-band rows of a loss curve (standard uncertainties in, expanded ones out as well)."""
    rows = []
    for b in bands.per_band(frequency_hz, width_hz, _arr(loss_db), _arr(u_db), k=k):
        row = {"device": label, "band": b.band, "low_hz": b.low_hz, "high_hz": b.high_hz,
               "mean_loss_db": b.mean_db, "u_mean_loss_db": b.u_mean_db,
               "expanded_uncertainty_mean_db": b.expanded_mean_db, "worst_loss_db": b.worst_db,
               "u_worst_loss_db": b.u_worst_db, "expanded_uncertainty_worst_db": b.expanded_worst_db,
               "worst_at_hz": b.worst_at_hz, "coverage": b.coverage, "n_sub_bands": b.n_sub_bands,
               "devices": n_devices, "k": b.k}
        if n_devices > 1:  # identical devices in series: each one's share
            row["per_device_mean_db"] = b.mean_db / n_devices
            row["per_device_worst_db"] = b.worst_db / n_devices
        rows.append(row)
    return rows


def _arr(values) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def nf_band_rows(frequency_hz, width_hz, nf_db, u_db, *, u_enr_db: float, k: float) -> list[dict]:
    """Per-band rows of a noise-figure curve.

    F = ENR/(Y - 1) with the source cold at T0: the noise figure moves dB for dB with the ENR, so the
    ENR's uncertainty is shared by every sub-band (not averaged down); the rest is each one's own."""
    nf, u = _arr(nf_db), _arr(u_db)
    own = np.sqrt(np.clip(u**2 - u_enr_db**2, 0.0, None))
    return [{"band": b.band, "low_hz": b.low_hz, "high_hz": b.high_hz, "mean_noise_figure_db": b.mean_db,
             "u_mean_noise_figure_db": b.u_mean_db, "expanded_uncertainty_mean_db": b.expanded_mean_db,
             "worst_noise_figure_db": b.worst_db, "expanded_uncertainty_worst_db": b.expanded_worst_db,
             "worst_at_hz": b.worst_at_hz, "coverage": b.coverage, "n_sub_bands": b.n_sub_bands, "k": b.k}
            for b in bands.per_band(frequency_hz, width_hz, nf, own, shared_u_db=u_enr_db, k=k)]


def _difference_rows(label_a: str, a: dict, label_b: str, b: dict) -> list[dict]:
    fa = {round(f): i for i, f in enumerate(a["frequency_hz"])}
    idx = [(fa[round(f)], j) for j, f in enumerate(b["frequency_hz"]) if round(f) in fa]
    if not idx:
        return []
    ia, ib = (np.array(x) for x in zip(*idx))
    la, ua = _arr(a["insertion_loss_db"])[ia], _arr(a["u_insertion_loss_own_db"])[ia]
    lb, ub = _arr(b["insertion_loss_db"])[ib], _arr(b["u_insertion_loss_own_db"])[ib]
    d, u = bands.difference_curve(lb, ub, la, ua)
    f, w = np.asarray(a["frequency_hz"])[ia], np.asarray(a["width_hz"])[ia]
    return [{"device": label_b, "reference_device": label_a, "band": r.band, "low_hz": r.low_hz,
             "high_hz": r.high_hz, "difference_db": r.mean_db, "u_difference_db": r.u_mean_db,
             "expanded_uncertainty_db": r.expanded_mean_db, "significant": r.significant, "k": r.k}
            for r in bands.per_band(f, w, d, u, k=a["k"])]


def _jumps(label: str, tunings, k: float, warnings: list[str]) -> list[dict]:
    """Retune steps of one device's loss curve (``tunings``: its NoiseSourceBand results)."""
    tuned = [b for b in tunings if b.center_hz is not None and b.has_dut]
    if len(tuned) < 2:
        return []
    centres = [b.center_hz for b in tuned]
    subs = [b.sub_bands() for b in tuned]
    steps = bands.retune_steps(
        centres, [c + np.asarray(s["offset_hz"]) for c, s in zip(centres, subs)],
        [s["insertion_loss_db"] for s in subs], [s["u_insertion_loss_db"] for s in subs],
        [s["width_hz"] for s in subs], k=k)
    out = []
    for s in steps:
        out.append({"device": label, "frequency_hz": s.frequency_hz, "difference_db": s.difference_db,
                    "u_difference_db": s.u_db, "significant": s.significant})
        if abs(s.difference_db) > JUMP_WARN_SIGMAS * s.u_db:
            what = f"the loss curve of {label}" if label else "the loss curve"
            warnings.append(f"{what} jumps by {s.difference_db:+.2f} dB (u {s.u_db:.2f} dB) across the retune near "
                            f"{s.frequency_hz / 1e6:.3f} MHz: more than {JUMP_WARN_SIGMAS:g} standard uncertainties "
                            "(did the gain or the set-up change between those captures?)")
    return out


def analyse_bands(analysis) -> None:
    """Fill ``analysis``'s loss curve(s), per-band tables, device differences and retune checks from its
    noise-source results (``analysis.noise_source``: one :class:`~rxbench.methods.noise_curve.NoiseFigureResult`
    per device)."""
    results = analysis.noise_source
    if not results:
        return
    curves = {r.device: r.columns() for r in results}
    first = results[0]
    analysis.loss_vs_frequency = curves[first.device]
    if first.has_dut and (len(results) > 1 or first.device):
        analysis.devices = {lab or "device": c for lab, c in curves.items()}
    for r in results:
        c = curves[r.device]
        if c is None or not c["has_loss"]:
            continue
        analysis.per_band.extend(r.per_band)
        analysis.retune_steps.extend(_jumps(r.device, r.bands, c["k"], analysis.warnings))
    ref = first.device
    for r in results[1:]:
        if curves[ref] is not None and curves[r.device] is not None:
            analysis.device_differences.extend(_difference_rows(ref, curves[ref], r.device, curves[r.device]))
    analysis.per_band_noise_figure = list(first.per_band_noise_figure)


# ------------------------------------------------------------------------------------------------
# Report pieces: the per-band tables (Markdown, CSV) and the curve with the bands shaded

BAND_CSV = "per-band.csv"
BAND_PLOT = "bands.png"
_COLOURS = ("#1f5fa8", "#c0392b", "#2e8b57", "#8e44ad", "#d68910")


def _pm(v, u, d=2):
    return f"{v:.{d}f} ± {u:.{d}f}"


def band_markdown(analysis, plots: dict) -> str:
    """The report's section on per-band loss, noise figure and device differences ('' without a curve)."""
    if not analysis.per_band and not analysis.per_band_noise_figure:
        return ""
    out = ["## Loss per band\n"]
    labels = list(dict.fromkeys(r["device"] for r in analysis.per_band))
    if analysis.per_band:
        out.append("Mean and worst loss of each amateur band the swept curve covers, ± the expanded uncertainty "
                   "U (k = 2). The mean weights each sub-band by its overlap with the band; the worst is the "
                   "largest sub-band value, which errs high by up to about its U. A coverage below 100 % means "
                   "the curve stops inside the band.\n")
        rows_by_band: dict = {}
        for r in analysis.per_band:
            rows_by_band.setdefault(r["band"], {})[r["device"]] = r
        head = ["band", "MHz"]
        for lab in labels:
            name = lab or "device"
            head += [f"{name}: mean (dB)", f"{name}: worst (dB)"]
        pair = any(r["devices"] > 1 for r in analysis.per_band)
        if pair:
            head += [f"{lab or 'device'}: per device, mean (dB)" for lab in labels]
        head.append("coverage")
        lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
        for band, per in rows_by_band.items():
            any_r = next(iter(per.values()))
            cells = [band, f"{any_r['low_hz'] / 1e6:g}-{any_r['high_hz'] / 1e6:g}"]
            for lab in labels:
                r = per.get(lab)
                cells += (["", ""] if r is None else
                          [_pm(r["mean_loss_db"], r["expanded_uncertainty_mean_db"]),
                           _pm(r["worst_loss_db"], r["expanded_uncertainty_worst_db"])])
            if pair:
                for lab in labels:
                    r = per.get(lab)
                    cells.append("" if r is None or r["devices"] < 2 else
                                 _pm(r["per_device_mean_db"], r["expanded_uncertainty_mean_db"] / r["devices"]))
            cells.append(f"{100 * min(r['coverage'] for r in per.values()):.0f} %")
            lines.append("| " + " | ".join(cells) + " |")
        out.append("\n".join(lines) + "\n")
    if analysis.device_differences:
        out.append("### Differences between devices\n")
        out.append("Per band, each device's mean loss minus the first device's, ± U (k = 2). Both were measured "
                   "against the same reference captures, with the same attenuator and source: those terms cancel "
                   "in the difference, so its U comes from each device's own captures only. A difference larger "
                   "than its U is significant.\n")
        lines = ["| band | device | minus | difference (dB) | significant |", "|---|---|---|---|---|"]
        for r in analysis.device_differences:
            lines.append(f"| {r['band']} | {r['device']} | {r['reference_device']} | "
                         f"{_pm(r['difference_db'], r['expanded_uncertainty_db'])} | "
                         f"{'yes' if r['significant'] else 'no'} |")
        out.append("\n".join(lines) + "\n")
    if analysis.per_band_noise_figure:
        out.append("### Receive system noise figure per band\n")
        out.append("The ENR's uncertainty is shared by every sub-band and does not average down.\n")
        lines = ["| band | MHz | mean NF (dB) | worst NF (dB) | coverage |", "|---|---|---|---|---|"]
        for r in analysis.per_band_noise_figure:
            lines.append(f"| {r['band']} | {r['low_hz'] / 1e6:g}-{r['high_hz'] / 1e6:g} | "
                         f"{_pm(r['mean_noise_figure_db'], r['expanded_uncertainty_mean_db'])} | "
                         f"{_pm(r['worst_noise_figure_db'], r['expanded_uncertainty_worst_db'])} | "
                         f"{100 * r['coverage']:.0f} % |")
        out.append("\n".join(lines) + "\n")
    if plots.get("bands"):
        out.append(f"![loss and noise figure with the bands shaded]({plots['bands']})\n")
    return "\n".join(out) + "\n"


def band_csv_rows(analysis) -> list[dict]:
    """One row per (quantity, device, band): the per-band tables and differences as CSV."""
    rows = []
    for r in analysis.per_band:
        rows.append({"quantity": "insertion_loss", "device": r["device"], "band": r["band"], "low_hz": r["low_hz"],
                     "high_hz": r["high_hz"], "mean_db": r["mean_loss_db"],
                     "expanded_uncertainty_mean_db": r["expanded_uncertainty_mean_db"], "worst_db": r["worst_loss_db"],
                     "expanded_uncertainty_worst_db": r["expanded_uncertainty_worst_db"], "coverage": r["coverage"],
                     "devices": r["devices"], "significant": ""})
    for r in analysis.device_differences:
        rows.append({"quantity": "loss_difference", "device": f"{r['device']} - {r['reference_device']}",
                     "band": r["band"], "low_hz": r["low_hz"], "high_hz": r["high_hz"], "mean_db": r["difference_db"],
                     "expanded_uncertainty_mean_db": r["expanded_uncertainty_db"], "worst_db": "",
                     "expanded_uncertainty_worst_db": "", "coverage": "", "devices": "",
                     "significant": r["significant"]})
    for r in analysis.per_band_noise_figure:
        rows.append({"quantity": "receiver_noise_figure", "device": "", "band": r["band"], "low_hz": r["low_hz"],
                     "high_hz": r["high_hz"], "mean_db": r["mean_noise_figure_db"],
                     "expanded_uncertainty_mean_db": r["expanded_uncertainty_mean_db"],
                     "worst_db": r["worst_noise_figure_db"],
                     "expanded_uncertainty_worst_db": r["expanded_uncertainty_worst_db"], "coverage": r["coverage"],
                     "devices": "", "significant": ""})
    return rows


def write_band_csv(rows: list[dict], path) -> None:
    import csv

    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0]) if rows else ["quantity"])
        w.writeheader()
        for r in rows:
            w.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})


def plot_bands(analysis, path) -> bool:
    """Each device's loss curve (±U) and the receiver's noise figure, amateur bands shaded."""
    curves = analysis.devices or ({"device": analysis.loss_vs_frequency} if analysis.loss_vs_frequency else {})
    curves = {k: c for k, c in curves.items() if c is not None and c["frequency_hz"]}
    if not curves or not (analysis.per_band or analysis.per_band_noise_figure):
        return False
    from rxbench.report.plots import _figure, _save

    fig = _figure(10.0, 7.0, margins_in=(0.8, 0.2, 0.55, 0.4), gap_in=0.45, rows=2)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    f_all = np.concatenate([np.asarray(c["frequency_hz"]) for c in curves.values()]) / 1e6
    lo, hi = float(f_all.min()), float(f_all.max())
    for ax in (ax1, ax2):
        for name, b_lo, b_hi in bands.AMATEUR_BANDS:
            if b_hi / 1e6 >= lo and b_lo / 1e6 <= hi:
                ax.axvspan(b_lo / 1e6, b_hi / 1e6, color="#f0c419", alpha=0.25, lw=0)
    for name, b_lo, b_hi in bands.AMATEUR_BANDS:
        if b_hi / 1e6 >= lo and b_lo / 1e6 <= hi:
            ax1.text(0.5 * (b_lo + b_hi) / 1e6, 1.0, name, transform=ax1.get_xaxis_transform(), ha="center",
                     va="bottom", fontsize=8)
    for i, (lab, c) in enumerate(curves.items()):
        if not c["has_loss"]:
            continue
        col = _COLOURS[i % len(_COLOURS)]
        f = np.asarray(c["frequency_hz"]) / 1e6
        loss, u = _arr(c["insertion_loss_db"]), _arr(c["u_insertion_loss_db"])
        # points with their ±U bars, not joined: a line through noisy sub-bands suggests a ripple
        ax1.errorbar(f, loss, yerr=c["k"] * u, fmt="o", color=col, ms=3, elinewidth=0.8,
                     label=f"{lab}, per sub-band (±U)")
    colour = {lab: _COLOURS[i % len(_COLOURS)] for i, lab in enumerate(curves)}
    marks = {"direct": "s", "substitution": "D"}
    seen = set()
    for x in analysis.losses:  # tone losses beside the noise-source curves
        if x.frequency_hz is None:
            continue
        lab = x.device or "device"
        key = (lab, x.method)
        ax1.errorbar([x.frequency_hz / 1e6], [x.insertion_loss_db], yerr=[x.expanded_uncertainty_db],
                     fmt=marks.get(x.method, "o"), color=colour.get(lab, "#555555"), ms=6, capsize=3,
                     label=None if key in seen else f"{lab}, tone {x.method} (±U)")
        seen.add(key)
    ax1.set_ylabel("insertion loss (dB)")
    ax1.set_title("Loss against frequency, amateur bands shaded", pad=14)
    ax1.grid(True, lw=0.3)
    c = analysis.loss_vs_frequency
    f = np.asarray(c["frequency_hz"]) / 1e6
    nf, u = _arr(c["noise_figure_db"]), _arr(c["u_noise_figure_db"])
    ax2.errorbar(f, nf, yerr=c["k"] * u, fmt="o", color="#333333", ms=3, elinewidth=0.8,
                 label="receive system, per sub-band (±U)")
    ax2.set_ylabel("noise figure (dB)")
    ax2.set_xlabel("frequency (MHz)")
    ax2.grid(True, lw=0.3)
    for ax in (ax1, ax2):  # headroom above the points for the legend, so it covers none of them
        y0, y1 = ax.get_ylim()
        ax.set_ylim(y0, y1 + 0.25 * (y1 - y0))
        ax.legend(fontsize=8, loc="upper right")
    _save(fig, path)
    return True
