"""``report.md``: the session's numbers, budgets and plots as Markdown."""

from __future__ import annotations

import io
import math

from rxbench.output import CAUTIONS
from rxbench.report.plots import ENV_COLOURS
from rxbench.report.text import _f, _mhz, _pm, _table, plan_title, summary_lines
from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.session import Analysis


def _mismatch_sentence(losses) -> str:
    """What the loss budgets say about impedance mismatch between generator, attenuator, device and dongle."""
    assessed = [x for x in losses
                if any(c.name.startswith("mismatch") and c.u > 0 for c in x.loss.budget.components)]
    if len(assessed) == len(losses):
        return ("Mismatch between generator, attenuator, device and dongle is in these budgets, from the "
                "plan's `[match]` SWRs (first-order terms, U-shaped; Harris & Warner 1981).")
    return ("Mismatch between generator, attenuator, device and dongle is not assessed in "
            f"{'these budgets' if not assessed else 'some of these budgets'} (a zero line marks it): give "
            "the SWRs in the plan's `[match]` table (`source_swr`, `load_swr`, `dut_swr`). It is commonly "
            "a few tenths of a dB, more with a bare dongle input (Harris & Warner 1981).")


def markdown(analysis: Analysis, plots: dict, extra_markdown: str | None = None) -> str:
    s = analysis.session
    title = plan_title(analysis)
    md = io.StringIO()
    w = md.write
    w(f"# rxbench report: {s.folder.name}\n\n")
    if title:
        w(f"Plan: *{title}*\n\n")
    simulated = any(e.capture.extra.get("simulated") for e in s.entries)
    w(f"{len(s.entries)} captures analysed" + (" (from the simulated bench: invented data)" if simulated else "")
      + f"; {len(s.incomplete)} incomplete and {len(s.skipped)} unusable left out. Uncertainties are "
      "expanded uncertainties U = k·u with k = 2 (about 95 %), JCGM 100:2008 (GUM).\n\n")
    w("## Summary\n\n")
    for line in summary_lines(analysis):
        w(f"- {line}\n")
    w("\n")
    if extra_markdown:
        w(extra_markdown.rstrip() + "\n\n")

    if analysis.losses:
        w("## Insertion loss (tone)\n\n")
        w("Direct: the thru reading minus the DUT reading at the same generator level (a thru after the "
          "DUT removes linear drift). Substitution: the ladder setting that reads like the DUT, "
          "interpolated (PCHIP) between the neighbouring steps, so the dongle serves only as a "
          "comparator (Kaylie 1966).\n\n")
        rows = []
        for x in analysis.losses:
            loss = x.loss
            rows.append([x.method, f"{x.dut_attenuation_db:g}", _mhz(x.frequency_hz), _f(x.insertion_loss_db, 3),
                         _f(x.expanded_uncertainty_db, 3), x.n_devices, _f(x.per_device_db, 3),
                         "" if loss.drift_db is None else f"{loss.drift_db:+.3f}",
                         "" if loss.bracket_db is None else f"{loss.bracket_db[0]:g}–{loss.bracket_db[1]:g} dB"])
        w(_table(["method", "device at (dB)", "frequency", "loss (dB)", "U (dB)", "devices", "per device (dB)",
                  "thru drift (dB)", "between steps"], rows) + "\n\n")
        w(_mismatch_sentence(analysis.losses) + "\n\n")
        for x in analysis.losses:
            budget = x.loss.budget
            nu = budget.dof_eff
            nu_text = "> 1000" if nu is None or not math.isfinite(nu) or nu > 1000 else f"{nu:.0f}"
            w(f"Budget, {x.method} with the device at {x.dut_attenuation_db:g} dB "
              f"(u_c = {x.u_db:.3f} dB, ν_eff = {nu_text}):\n\n")
            w(_table(["component", "u (dB)", "sensitivity", "contribution (dB)", "type", "note"],
                     [[c.name, f"{c.u:.4f}", f"{c.sensitivity:.3f}", f"{c.contribution:.4f}",
                       f"{c.kind}, {c.distribution}", c.note] for c in budget.components]) + "\n\n")

    for lad, name in zip(analysis.ladders, plots.get("ladder", [])):
        c = lad.check
        w(f"## Ladder check at {_mhz(lad.center_hz)}\n\n")
        w(f"Errors against a robust reference ({c.reference} of the linear steps); a step whose error "
          f"exceeds ±{c.tolerance_db:g} dB in the dongle's linear range is flagged (the attenuator, "
          f"not the dongle). The dongle read linearly from {c.usable_top_db:g} dB "
          f"(limited by {c.top_limited_by}) to {c.usable_bottom_db:g} dB "
          f"(limited by {c.bottom_limited_by}).\n\n")
        w(_table(["nominal (dB)", "reading (dBFS)", "measured (dB)", "error (dB)", "U (dB)", "region", "flag"],
                 [[f"{c.nominal_db[i]:g}", _f(float(c.reading_dbfs[i]), 2), _f(float(c.measured_db[i]), 3),
                   f"{c.error_db[i]:+.3f}", f"{c.k * c.u_error_db[i]:.3f}", c.region[i],
                   "**off**" if c.flagged[i] else ""] for i in range(len(c.nominal_db))]) + "\n\n")
        w(f"![ladder]({name})\n\n")

    if analysis.noise_figure:
        w("## Noise figure and loss across frequency (noise source)\n\n")
        w("Y-factor: F = [ENR − Y·(T_cold/T0 − 1)]/(Y − 1); the DUT's gain from the change of the hot − cold "
          "excess, G = (N_hot,DUT − N_cold,DUT)/(N_hot − N_cold), and its own noise figure by the "
          "second-stage correction (Friis 1944).\n\n")
        rows = []
        for n in analysis.noise_figure:
            rows.append([_mhz(n.center_hz), _f(n.enr_db), _f(n.y_db),
                         _pm(n.noise_figure_db, n.expanded_uncertainty_db), f"{n.noise_temperature_k:.0f}",
                         _pm(n.insertion_loss_db, n.expanded_uncertainty_loss_db),
                         _pm(n.dut_noise_figure_db, COVERAGE_FACTOR * n.u_dut_noise_figure_db
                             if n.u_dut_noise_figure_db is not None else None)])
        w(_table(["tuned to", "ENR (dB)", "Y (dB)", "receiver NF", "T_e (K)", "DUT loss", "DUT NF"], rows) + "\n\n")
    if "frequency" in plots:
        w(f"![loss and noise figure against frequency]({plots['frequency']})\n\n")

    if analysis.external_noise:
        w("## External noise and what the loss costs\n\n")
        w("Excess X: noise density with the antenna over that with a 50-ohm load, same gain and tuning. "
          "The SNR a loss L costs is ΔSNR = 10·log10(1 + (L − 1)/X), the receiver's own noise included "
          "(ITU-R P.372; Friis 1944). The predictions use the ITU-R P.372 median man-made noise and "
          "the measured receiver noise figure; real sites differ from the medians by several dB.\n\n")
        rows = []
        for ex in analysis.external_noise:
            rows.append([ex.band, _mhz(ex.frequency_hz), _pm(ex.excess_db, ex.expanded_uncertainty_db),
                         _f(ex.receiver_noise_figure_db),
                         "n/a" if ex.antenna_temperature_k is None else f"{ex.antenna_temperature_k:.0f}",
                         _f(ex.fa_db, 1)])
        w(_table(["band", "frequency", "excess X", "receiver NF (dB)", "T_a (K)", "F_a (dB)"], rows) + "\n\n")
        for ex in analysis.external_noise:
            if ex.receiver_noise_figure_note:
                w(f"- {ex.band} at {_mhz(ex.frequency_hz)}: {ex.receiver_noise_figure_note} "
                  "(no noise figure measured at this tuning).\n")
            knee = ex.knee
            if knee:
                steps = ", ".join(f"{v:g}" for v in knee["steps_db"])
                w(f"- {ex.band} at {_mhz(ex.frequency_hz)}: the antenna through {steps} dB of attenuation "
                  f"(and the load) fits the lossy-network model with an excess of {_pm(knee['excess_db'], COVERAGE_FACTOR * knee['u_excess_db'])}, "
                  f"residuals {knee['residual_rms_db']:.2f} dB RMS.\n")
            td = ex.through_dut
            if td:
                w(f"- {ex.band} at {_mhz(ex.frequency_hz)}: through the device the antenna noise drops by "
                  f"{_pm(td['drop_db'], COVERAGE_FACTOR * td['u_drop_db'])}.\n")
        w("\n")
        if analysis.snr_cost:
            envs = list(ENV_COLOURS)
            rows = []
            for c in analysis.snr_cost:
                pred = c.predicted or {}
                rows.append([c.band, _mhz(c.frequency_hz), _pm(c.loss_db, COVERAGE_FACTOR * c.u_loss_db),
                             _pm(c.snr_degradation_db, c.expanded_uncertainty_db),
                             _pm(c.through_dut_db, c.expanded_uncertainty_through_dut_db)]
                            + [_f(pred.get(e)) for e in envs])
            w(_table(["band", "frequency", "loss", "SNR cost (from the excess)", "SNR cost (antenna through the device)"]
                     + [f"{e} (dB)" for e in envs], rows) + "\n\n")
            w("The cost through the device is L minus the drop of the antenna noise through it: "
              "SNR_with/SNR_without = N_with/(L·N_without) at the dongle, with no noise model needed.\n\n")
            for c in analysis.snr_cost:
                w(f"- {c.band}: loss taken from the {c.loss_source}.\n")
            w("\n")
        if "snr_cost" in plots:
            w(f"![SNR cost per band]({plots['snr_cost']})\n\n")

    w("## Captures\n\n")
    rows = []
    for c in analysis.captures:
        t = c.get("tone") or {}
        noise = c.get("noise") or {}
        rows.append([c["name"], c["role"], "" if c["attenuation_db"] is None else f"{c['attenuation_db']:g}",
                     "yes" if c["through_dut"] else "", _mhz(c["center_hz"]), f"{c['duration_s']:.3g}",
                     _f(t.get("power_dbfs")), _f(t.get("snr_db"), 1), _f(noise.get("density_dbfs_per_hz"), 1),
                     "" if c.get("clip_fraction") is None else f"{100 * c['clip_fraction']:.3g}",
                     c["error"] or ""])
    w(_table(["capture", "role", "att. (dB)", "DUT", "tuned to", "s", "tone (dBFS)", "SNR (dB)",
              "noise (dBFS/Hz)", "clipped (%)", "error"], rows) + "\n\n")
    for name in plots.get("spectra", []):
        w(f"![spectra]({name})\n\n")

    if s.incomplete or s.skipped:
        w("## Left out\n\n")
        for p in s.incomplete:
            w(f"- `{p.name}`: incomplete (interrupted capture)\n")
        for p, why in s.skipped:
            w(f"- `{p.name}`: {why}\n")
        w("\n")
    from rxbench.sweep_report import band_markdown

    w(band_markdown(analysis, plots))
    w("## Warnings\n\n")
    if analysis.warnings:
        for x in analysis.warnings:
            w(f"- {x}\n")
    else:
        w("None.\n")
    w("\n## Cautions\n\n" + CAUTIONS + "\n")
    return md.getvalue()
