"""The demo: the README's quick-start command works in-process, and every number it reports lies
within its stated expanded uncertainty of the simulated bench's truth.

The truth is the simulated bench's own (invented scenario; :func:`bench.commands.demo.demo_truth`);
the quantities are checked against it through formulas with published sources: the Y-factor noise
figure (Pozar, Microwave Engineering, from memory), the noise of a passive loss (Bedrosian, RAND
1960), the SNR cost of a loss 10*log10(1 + (L - 1)/X) (Friis, Proc. IRE 32, 1944; ITU-R P.372),
and 8-bit quantisation noise step**2/12 per rail (Bennett 1948).
"""

from __future__ import annotations

import contextlib
import io
import json
import math

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.commands import demo


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """One demo run through the command line, as the README's quick start runs it:
    `pip install -e . && rxbench demo` -> bench.cli.main(["demo", ...]). Returns the session folder."""
    out = tmp_path_factory.mktemp("demo") / "rxbench-demo"
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        code = main(["demo", "--out", str(out)])
    assert code == 0, stderr.getvalue()
    return out, stdout.getvalue()


def test_quick_start_demo_command_runs_and_writes_a_report(demo_run):
    demo_run, out = demo_run
    report = demo_run / "report" / "report.md"
    assert report.is_file()
    assert str(report) in out
    assert "answer:" in out
    for name in ("results.json", "results.csv", "ladder.png", "frequency.png", "snr-cost.png", "spectra-01.png"):
        assert (demo_run / "report" / name).is_file(), name
    doc = json.loads((demo_run / "report" / "results.json").read_text())
    checks = doc["truth_checks"]
    assert checks, "the demo compares its numbers with the simulated truth"
    # The headline numbers: each within its expanded uncertainty (k = 2) of the truth.
    headline = [c for c in checks if c["quantity"] not in ("insertion loss (noise source, sub-band)",)]
    outside = [c for c in headline if not c["within"]]
    assert not outside, outside
    # The sub-band curve: about 95 % should lie within 2u; all within 4u (a 4-sigma excursion would
    # point at a bias, not chance).
    sub = [c for c in checks if c["quantity"] == "insertion loss (noise source, sub-band)"]
    assert len(sub) >= 30
    assert sum(c["within"] for c in sub) >= 0.85 * len(sub)
    assert all(abs(c["measured"] - c["truth"]) <= 2 * c["expanded_uncertainty"] for c in sub)


def test_demo_covers_every_measurement(demo_run):
    demo_run, _ = demo_run
    doc = json.loads((demo_run / "report" / "results.json").read_text())
    methods = {x["method"] for x in doc["losses"]}
    assert methods == {"direct", "substitution"}
    assert doc["ladder"] and doc["ladder"][0]["n_flagged"] == 1
    flagged = [s for s in doc["ladder"][0]["steps"] if s["flagged"]]
    assert [s["nominal_db"] for s in flagged] == [30.0]  # the step the simulated attenuator has 0.45 dB off
    assert len(doc["noise_figure"]) == 5
    assert doc["loss_vs_frequency"]["has_loss"]
    assert {c["band"] for c in doc["snr_cost"]} == {"10 m"}
    # Headline keys of the public interface (DESIGN.md) in the summary.
    for key in ("insertion_loss_db", "expanded_uncertainty_db", "method", "per_device_db"):
        assert doc["summary"][key] is not None


def test_demo_truth_checks_can_fail(demo_run):
    """The comparison can fail: against a bench whose device loses 0.5 dB more, the tone losses (whose
    U is below 0.2 dB) are reported outside their uncertainty."""
    import dataclasses

    from rxbench.plan import parse_plan
    from rxbench.session import analyze_session, open_session

    folder, _ = demo_run
    analysis = analyze_session(open_session(folder))
    truth = demo.demo_truth()
    wrong = dataclasses.replace(truth, dut_loss_table=tuple((f, l + 0.5) for f, l in truth.dut_loss_table))
    plan = parse_plan(demo.PLAN_TEXT, "demo")
    good = [c for c in demo.truth_checks(analysis, truth, plan) if c["quantity"].startswith("insertion loss (")]
    bad = [c for c in demo.truth_checks(analysis, wrong, plan) if c["quantity"].startswith("insertion loss (")]
    assert all(c["within"] for c in good if "sub-band" not in c["quantity"])
    assert not any(c["within"] for c in bad if c["quantity"] in ("insertion loss (direct)",
                                                                  "insertion loss (substitution)"))


def test_demo_plots_draw_the_simulated_truth_and_a_real_session_none(demo_run, monkeypatch, tmp_path):
    """The loss / noise-figure and SNR-cost plots draw the simulated bench's truth, labelled, where the
    demo passes it; the same analysis drawn as a real session (no truth) has no such artist."""
    from rxbench.plan import parse_plan
    from rxbench.report import plots
    from rxbench.session import analyze_session, open_session

    folder, _ = demo_run
    analysis = analyze_session(open_session(folder))
    truth, plan = demo.demo_truth(), parse_plan(demo.PLAN_TEXT, "demo")
    checks = demo.truth_checks(analysis, truth, plan)
    drawn = demo.plot_truth(analysis, truth, plan, checks)
    figures = []
    monkeypatch.setattr(plots, "_save", lambda fig, path: figures.append(fig))

    def labelled(fig):
        return {line.get_label(): line for ax in fig.axes for line in ax.get_lines() + ax.collections
                if line.get_label().startswith(plots.TRUTH_LABEL)}

    assert plots.plot_frequency(analysis, tmp_path / "f.png", drawn)
    assert plots.plot_snr_cost(analysis, tmp_path / "s.png", drawn)
    freq, snr = (labelled(fig) for fig in figures)
    loss_line = freq[plots.TRUTH_LABEL]
    f_mhz, loss = loss_line.get_data()
    # The line is the bench's own loss table (bench/simulated.py), across the measured band.
    assert np.allclose(loss, np.interp(np.asarray(f_mhz) * 1e6, *zip(*truth.dut_loss_table)))
    curve = analysis.loss_vs_frequency
    assert min(f_mhz) <= min(curve["frequency_hz"]) / 1e6 and max(f_mhz) >= max(curve["frequency_hz"]) / 1e6
    receiver = freq[f"{plots.TRUTH_LABEL}: receiver"]
    nf_true = [c["truth"] for c in checks if c["quantity"] == "receiver noise figure"][0]
    assert np.allclose(receiver.get_ydata(), nf_true)
    assert f"{plots.TRUTH_LABEL}: device (passive at 290 K: NF = loss)" in freq
    costs = snr[plots.TRUTH_LABEL]  # one bar per band, at the true cost
    true_costs = sorted(c["truth"] for c in checks if c["quantity"] == "SNR cost")
    assert sorted(seg[0][1] for seg in costs.get_segments()) == pytest.approx(true_costs)

    figures.clear()
    plots.plot_frequency(analysis, tmp_path / "f.png")
    plots.plot_snr_cost(analysis, tmp_path / "s.png")
    assert not any(labelled(fig) for fig in figures)


def test_snr_cost_truth_follows_the_formula():
    # With the antenna no hotter than a resistor (X = 1) the cost equals the loss (REFERENCES.md,
    # "SNR cost of a loss", sanity check [calc]); 3 dB behind X = 10 dB: 10*log10(1 + 0.995/10).
    from rxbench.dsp.environment import snr_cost_from_excess_db

    assert snr_cost_from_excess_db(3.0, 0.0)[0] == pytest.approx(3.0, abs=1e-9)
    assert snr_cost_from_excess_db(3.0, 10.0)[0] == pytest.approx(10 * math.log10(1 + (10 ** 0.3 - 1) / 10),
                                                                  abs=1e-9)


def test_receiver_temperature_includes_quantisation():
    # 8-bit quantisation: 2*(1/127.5)**2/12 FS^2 per sample (Bennett 1948), referred to the input.
    from rxbench.plan import parse_plan

    truth = demo.demo_truth()
    plan = parse_plan(demo.PLAN_TEXT, "demo")
    t = demo.receiver_temperature_k(truth, plan)
    t_dongle = truth.dongle(plan.dongle.gain_db).noise_temperature_k
    g = 1e3 * 10 ** (truth.conversion_gain_db(plan.dongle.gain_db) / 10)
    expected_q = 2 * (1 / 127.5) ** 2 / 12 / 250e3 / g / 1.380649e-23
    assert t - t_dongle == pytest.approx(expected_q, rel=1e-9)


def test_demo_never_reuses_a_folder(tmp_path):
    taken = tmp_path / "rxbench-demo"
    taken.mkdir()
    (tmp_path / "rxbench-demo-2").mkdir()
    assert demo.fresh_folder(taken) == tmp_path / "rxbench-demo-3"
    assert demo.fresh_folder(tmp_path / "new") == tmp_path / "new"


def test_saved_recordings_analyse_offline_to_the_truth(tmp_path):
    """`rxbench analyze recordings/field-station` works with no simulation, and its numbers cover the
    truth of the bench that recorded them (recordings/README.md)."""
    import shutil
    from pathlib import Path

    from rxbench.plan import load_plan

    src = Path(__file__).resolve().parent.parent / "recordings" / "field-station"
    folder = tmp_path / "field-station"
    shutil.copytree(src, folder)  # the report is written inside the session: work on a copy
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        assert main(["analyze", str(folder), "--json"]) == 0, err.getvalue()
    doc = json.loads(out.getvalue())
    assert doc["n_captures"] == 41 and (folder / "report" / "report.md").is_file()
    from rxbench.session import analyze_session, open_session

    analysis = analyze_session(open_session(folder))
    checks = demo.truth_checks(analysis, demo.demo_truth(), load_plan(folder / "plan.toml"))
    headline = [c for c in checks if "sub-band" not in c["quantity"]]
    assert len(headline) >= 20 and all(c["within"] for c in headline), [c for c in headline if not c["within"]]
    assert sum(c["within"] for c in checks) >= 0.9 * len(checks)
