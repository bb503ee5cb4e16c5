"""``rxbench demo``: a built-in plan run on the simulated bench, analysed, with the report written.

The scenario is invented: a club's field station shares one antenna between two receivers through
a splitter and a 10 m band-pass filter. Does that hurt 10 m reception? The plan measures the
device's insertion loss with a tone (direct, and by substitution on an attenuator ladder, which is
checked step by step), the receiver's noise figure and the device's loss across 10 m with a noise
source, and the band noise of the antenna against a 50-ohm load; the analysis turns these into the
SNR the device costs on 10 m. The simulated bench's hidden truth is then set beside every number,
so the demo also shows that the stated uncertainties cover the truth.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from rxbench.errors import UsageError
from rxbench.output import add_json_option, emit
from rxbench.style import fmt_hz
from rxbench.report import summary_lines
from rxbench.dsp import synth
from rxbench.dsp.units import K_B, T0_K, db_from_power, power_from_db

DEFAULT_OUT = "rxbench-demo"
#: Seed of the simulated bench's noise: the demo gives the same numbers every time.
SEED = 2026
#: Sub-band centres of the noise-source curves are compared with the truth averaged over the sub-band.
SUB_BAND_TRUTH_POINTS = 64

SCENARIO = ("A club's field station shares one antenna between two receivers through a splitter and a "
            "10 m band-pass filter. Does the pair hurt 10 m reception?")

#: The built-in plan (invented scenario). Levels suit the simulated bench's dongle, which reaches
#: full scale at -80 dBm at this gain.
#: The demo's plan (bench/data/demo-plan.toml): the field station's measurements on the simulated bench.
PLAN_TEXT = (Path(__file__).resolve().parent.parent / "data" / "demo-plan.toml").read_text(encoding="utf-8")


def demo_truth():
    """The simulated bench of the demo (invented): the field station's device, a step attenuator
    within its stated 0.05 dB except the 30 dB step (0.45 dB off), a quiet rural site with galactic
    noise on 10 m, and a dongle that compresses near full scale."""
    from rxbench.simulated import BenchTruth

    return BenchTruth(
        attenuator_errors_db=((2.0, 0.02), (4.0, -0.03), (6.0, 0.02), (8.0, -0.04), (10.0, 0.03), (20.0, -0.05),
                              (30.0, 0.45), (40.0, 0.04), (50.0, -0.05)),
        environment="quiet-rural",
        galactic=True,
    )


def add_parser(sub) -> None:
    p = sub.add_parser(
        "demo", help="run a built-in plan on the simulated bench, analyse it and write the report",
        description=("Run the built-in demo plan on the simulated bench (no hardware; invented scenario: "
                     + SCENARIO + "), analyse the session and write its report. Every number is set "
                     "beside the simulated truth."))
    p.add_argument("--out", metavar="DIR", default=DEFAULT_OUT,
                   help="session folder (default %(default)s; if it exists, DIR-2, DIR-3, ... is used)")
    add_json_option(p)
    p.set_defaults(func=run)


def fresh_folder(path) -> Path:
    """``path`` if it does not exist yet, else the first free ``path-2``, ``path-3``, ..."""
    p = Path(path)
    if not p.exists():
        return p
    for n in range(2, 10000):
        cand = p.with_name(f"{p.name}-{n}")
        if not cand.exists():
            return cand
    raise UsageError(f"{p}: too many demo folders beside it; give --out")


# --------------------------------------------------------------------------------------------
# The truth beside the numbers


def receiver_temperature_k(truth, plan) -> float:
    """Noise temperature of the simulated receive chain, K: the dongle's own plus its 8-bit
    quantisation noise referred to the input (Bennett 1948: step**2/12 per rail)."""
    gain_db = truth.conversion_gain_db(plan.dongle.gain_db)
    fs = plan.dongle.sample_rate_hz
    fs2_per_w = 1e3 * power_from_db(gain_db)
    t_q = synth.CU8_QUANTISATION_POWER / fs / fs2_per_w / K_B
    return truth.dongle(plan.dongle.gain_db).noise_temperature_k + t_q


def _band_loss_truth(truth, low_hz: float, high_hz: float) -> float:
    f = np.linspace(low_hz, high_hz, SUB_BAND_TRUTH_POINTS)
    return float(-db_from_power(np.mean(power_from_db(-truth.dut_loss_db(f)))))


def truth_checks(analysis, truth, plan) -> list[dict]:
    """Every demo result beside the simulated truth: within its expanded uncertainty (k = 2)?"""
    trx = receiver_temperature_k(truth, plan)
    checks = []

    def add(quantity, frequency_hz, measured, expanded, true, detail=""):
        checks.append({"quantity": quantity, "frequency_hz": frequency_hz, "measured": measured,
                       "expanded_uncertainty": expanded, "truth": true,
                       "within": bool(abs(measured - true) <= expanded), "detail": detail})

    for x in analysis.losses:
        add(f"insertion loss ({x.method})", x.frequency_hz, x.insertion_loss_db, x.expanded_uncertainty_db,
            truth.dut_loss_db(x.frequency_hz))
    for result in analysis.ladders:
        lad = result.to_dict()
        lin = [s for s in lad["steps"] if s["region"] == "linear"]
        if len(lin) >= 2:
            # The check states each step relative to a reference, with the dongle taken as linear
            # within the check's linearity limit; compare step differences to the 10 dB step (or the
            # middle linear one), adding that limit for steps in the top 10 dB of the dongle's range.
            ref = next((s for s in lin if s["nominal_db"] == 10.0), lin[len(lin) // 2])
            ref_true = truth.attenuation_db(ref["nominal_db"])
            top = lad["usable_top_db"]
            for s in lin:
                if s is ref:
                    continue
                measured = s["measured_db"] - ref["measured_db"]
                true = truth.attenuation_db(s["nominal_db"]) - ref_true
                expanded = lad["k"] * math.hypot(s["u_reading_db"], ref["u_reading_db"])
                if min(s["nominal_db"], ref["nominal_db"]) < top + 10.0:
                    expanded += lad["linearity_db"]
                add("ladder step attenuation", lad["frequency_hz"], measured, expanded, true,
                    f"{s['nominal_db']:g} dB step relative to the {ref['nominal_db']:g} dB step")
    nf_true = float(db_from_power(1.0 + trx / T0_K))
    for n in analysis.noise_figure:
        add("receiver noise figure", n.center_hz, n.noise_figure_db, n.expanded_uncertainty_db, nf_true,
            "dongle plus 8-bit quantisation")
        if n.has_dut:
            lo, hi = n.band_hz
            add("insertion loss (noise source, whole band)", n.center_hz, n.insertion_loss_db,
                n.expanded_uncertainty_loss_db, _band_loss_truth(truth, n.center_hz + lo, n.center_hz + hi))
    curve = analysis.loss_vs_frequency
    if curve is not None and curve["has_loss"]:
        for f, w, loss, u in zip(curve["frequency_hz"], curve["width_hz"], curve["insertion_loss_db"],
                                 curve["u_insertion_loss_db"]):
            add("insertion loss (noise source, sub-band)", f, loss, 2.0 * u,
                _band_loss_truth(truth, f - w / 2, f + w / 2))
    x_true = {}
    for ex in analysis.external_noise:
        ta = T0_K * power_from_db(truth.fa_db(ex.frequency_hz))
        x_true[ex.frequency_hz] = (ta + trx) / (T0_K + trx)
        add("band-noise excess", ex.frequency_hz, ex.excess_db, ex.expanded_uncertainty_db,
            float(db_from_power(x_true[ex.frequency_hz])))
    for c in analysis.snr_cost:
        big_l = power_from_db(truth.dut_loss_db(c.provenance["loss_frequency_hz"]))
        true = float(db_from_power(1.0 + (big_l - 1.0) / x_true[c.frequency_hz]))
        add("SNR cost", c.frequency_hz, c.snr_degradation_db, c.expanded_uncertainty_db, true, c.band)
        if c.through_dut_db is not None:
            add("SNR cost (antenna through the device)", c.frequency_hz, c.through_dut_db,
                c.expanded_uncertainty_through_dut_db, true, c.band)
    return checks


#: Points of the true loss curve drawn in the demo's plots.
TRUTH_CURVE_POINTS = 400


def plot_truth(analysis, truth, plan, checks):
    """The simulated truth for the report's plots: the device's true loss (and, passive at 290 K,
    its noise figure) across the measured frequencies, the receiver's true noise figure and the
    true SNR cost per band (from ``checks``)."""
    from rxbench.report.plots import SimulatedTruth

    freqs = [c["frequency_hz"] for c in checks if c["frequency_hz"] is not None]
    curve = analysis.loss_vs_frequency
    if curve is not None and curve["frequency_hz"]:
        half = max(curve["width_hz"]) / 2
        freqs += [min(curve["frequency_hz"]) - half, max(curve["frequency_hz"]) + half]
    lo, hi = min(freqs), max(freqs)
    pad = max(0.05 * (hi - lo), 100e3)
    f = np.linspace(lo - pad, hi + pad, TRUTH_CURVE_POINTS)
    nf = float(db_from_power(1.0 + receiver_temperature_k(truth, plan) / T0_K))
    costs = {c["frequency_hz"]: c["truth"] for c in checks if c["quantity"] == "SNR cost"}
    return SimulatedTruth(frequency_hz=f, loss_db=np.asarray(truth.dut_loss_db(f)), receiver_nf_db=nf,
                          snr_cost_db=costs)


def _check_line(c: dict) -> str:
    f = "" if c["frequency_hz"] is None else f" at {fmt_hz(c['frequency_hz'])}"
    ok = "within" if c["within"] else "OUTSIDE"
    return (f"{c['quantity']}{f}: {c['measured']:.3f} ± {c['expanded_uncertainty']:.3f} dB (U, k = 2), "
            f"truth {c['truth']:.3f} dB ({ok} U)")


def truth_markdown(checks: list[dict]) -> str:
    n_in = sum(c["within"] for c in checks)
    lines = ["## The simulated truth", "",
             "This session comes from the simulated bench (invented data). Each result beside the bench's "
             f"hidden truth: {n_in} of {len(checks)} lie within their expanded uncertainty (k = 2; about "
             "95 % are expected to).", "",
             "| quantity | frequency | measured (dB) | U (dB) | truth (dB) | within U | detail |",
             "|---|---|---|---|---|---|---|"]
    for c in checks:
        f = "" if c["frequency_hz"] is None else fmt_hz(c["frequency_hz"])
        lines.append(f"| {c['quantity']} | {f} | {c['measured']:.3f} | {c['expanded_uncertainty']:.3f} | "
                     f"{c['truth']:.3f} | {'yes' if c['within'] else '**no**'} | {c['detail']} |")
    return "\n".join(lines)


def _answer(analysis) -> str:
    costs = [c for c in analysis.snr_cost if c.band == "10 m"]
    if not costs:
        return "no SNR cost on 10 m could be worked out (see the warnings)"
    parts = [f"{c.snr_degradation_db:.2f} ± {c.expanded_uncertainty_db:.2f} dB at "
             f"{fmt_hz(c.frequency_hz)} (loss {c.loss_db:.2f} dB, band noise {c.excess_db:.1f} dB "
             "above the receiver's)" for c in costs]
    return ("on 10 m the splitter and filter cost " + "; ".join(parts)
            + ": the band noise at this quiet site sits well above the receiver's own, so the SNR suffers far "
              "less than the loss")


def run_demo(out, *, seed: int = SEED):
    """Capture the demo plan on the simulated bench into a new folder, analyse it and write the report.

    Returns (analysis, report_dir, checks, capture warnings).
    """
    from rxbench.capture import run_session
    from rxbench.plan import parse_plan
    from rxbench.simulated import SimulatedBench

    folder = fresh_folder(out)
    plan = parse_plan(PLAN_TEXT, "demo plan (built in)")
    truth = demo_truth()
    run = run_session(plan, folder, SimulatedBench(truth=truth, seed=seed), yes=True, progress=None)
    # Analyse first, then write the report with the truth table in it.
    from rxbench.report import write_report
    from rxbench.session import analyze_session, open_session

    analysis = analyze_session(open_session(folder))
    checks = truth_checks(analysis, truth, plan)
    md = f"## The question\n\n{SCENARIO}\n\nAnswer: {_answer(analysis)}.\n\n" + truth_markdown(checks)
    report_dir = write_report(analysis, extra_markdown=md, extra_json={"truth_checks": checks, "scenario": SCENARIO},
                              truth=plot_truth(analysis, truth, plan, checks))
    return analysis, report_dir, checks, list(run.warnings)


def run(args: argparse.Namespace) -> int:
    analysis, report_dir, checks, cap_warnings = run_demo(args.out)
    folder = analysis.session.folder
    n_in = sum(c["within"] for c in checks)
    result = {
        "scenario": SCENARIO,
        "simulated": True,
        "session_dir": str(folder),
        "report_dir": str(report_dir),
        "answer": _answer(analysis),
        "summary": analysis.summary(),
        "truth_checks": checks,
        "n_within": n_in,
        "n_checks": len(checks),
        "warnings": cap_warnings + analysis.warnings,
    }
    lines = [
        "rxbench demo (simulated bench, no hardware; invented scenario)",
        SCENARIO,
        f"captured {len(analysis.session.entries)} recordings into {folder}/",
        "results (expanded uncertainty, k = 2):",
    ]
    lines += [f"  {x}" for x in summary_lines(analysis)]
    lines.append(f"against the simulated truth: {n_in} of {len(checks)} results within their uncertainty")
    brief = [c for c in checks if c["quantity"] not in ("ladder step attenuation",
                                                         "insertion loss (noise source, sub-band)")]
    lines += [f"  {_check_line(c)}" for c in brief]
    for q in ("ladder step attenuation", "insertion loss (noise source, sub-band)"):
        sel = [c for c in checks if c["quantity"] == q]
        if sel:
            lines.append(f"  {q}: {sum(c['within'] for c in sel)} of {len(sel)} within U (table in the report)")
    lines.append(f"answer: {_answer(analysis)}.")
    lines.append(f"report: {report_dir / 'report.md'}")
    lines.append(f"analyse it again with: rxbench analyze {folder}")
    emit(args, result, "\n".join(lines), cap_warnings + analysis.warnings)
    return 0
