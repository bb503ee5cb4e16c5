"""The report: files written, never overwritten, readable plots, strict JSON, a CSV a spreadsheet reads,
and ``rxbench analyze`` on the command line. Sessions are synthetic (invented data, see test_session).
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import struct
from types import SimpleNamespace

import pytest
from test_session import lossy, noise_in, tone_in, write_capture

from rxbench import report as rep
from rxbench.cli import main
from rxbench.session import analyze_session, open_session
from rxbench.dsp.uncertainty import Budget, Component
from rxbench.dsp.units import T0_K, power_from_db

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


@pytest.fixture(scope="module")
def session_dir(tmp_path_factory):
    """A small session with every role: ladder, thru/device/thru, hot/cold with and without the device,
    antenna and load."""
    d = tmp_path_factory.mktemp("session")
    t = 0
    for i, att in enumerate((0, 2, 4, 6, 10)):
        x = tone_in(-90.0, 10 + i)
        if att:
            x = lossy(x, float(att), 20 + i)
        write_capture(d, f"{i:02d}-step", x, role="step", seed=30 + i, time_s=(t := t + 1), attenuation_db=float(att))
    write_capture(d, "10-thru", tone_in(-90.0, 40), role="thru", seed=41, time_s=(t := t + 1))
    write_capture(d, "11-dut", lossy(tone_in(-90.0, 42), 3.0, 43), role="dut", seed=44, time_s=(t := t + 1))
    write_capture(d, "12-thru", tone_in(-90.0, 45), role="thru", seed=46, time_s=(t := t + 1))
    t_hot = T0_K * (power_from_db(15.0) + 1)
    for j, (role, temp) in enumerate((("cold", T0_K), ("hot", t_hot))):
        write_capture(d, f"2{j}-{role}", noise_in(temp, 50 + j), role=role, seed=60 + j, enr_db=15.0)
        write_capture(d, f"2{j}-{role}-dut", lossy(noise_in(temp, 70 + j), 3.0, 80 + j), role=role, seed=90 + j,
                      enr_db=15.0, with_dut=True)
    write_capture(d, "30-antenna", noise_in(T0_K * 30, 100), role="antenna", seed=101)
    write_capture(d, "31-load", noise_in(T0_K, 102), role="load", seed=103)
    (d / "plan.toml").write_text('title = "Synthetic bench for the report tests"\n')
    return d


@pytest.fixture(scope="module")
def analysis(session_dir):
    return analyze_session(open_session(session_dir))


def png_size(path):
    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE, path
    width, height = struct.unpack(">II", data[16:24])  # IHDR: first chunk, width and height
    return width, height


def test_report_has_every_file_and_readable_plots(analysis, session_dir):
    out = rep.write_report(analysis)
    assert out == session_dir / "report"
    names = {p.name for p in out.iterdir()}
    assert {"report.md", "results.json", "results.csv", "ladder.png", "frequency.png", "snr-cost.png",
            "spectra-01.png", "spectra-02.png"} <= names
    for png in out.glob("*.png"):
        w, h = png_size(png)
        assert 500 <= w <= 2500 and 300 <= h <= 2500, (png.name, w, h)
    md = (out / "report.md").read_text()
    for png in out.glob("*.png"):
        assert f"]({png.name})" in md
    assert "Synthetic bench for the report tests" in md
    assert "## Cautions" in md and "transmitter" in md
    # No temporary folder is left behind.
    assert not [p for p in session_dir.iterdir() if p.name.startswith(".")]


def test_results_json_is_strict_and_complete(analysis, session_dir):
    out = rep.write_report(analysis, overwrite=True)

    def refuse(name):
        raise AssertionError(f"non-standard JSON constant {name}")

    doc = json.loads((out / "results.json").read_text(), parse_constant=refuse)
    assert {x["method"] for x in doc["losses"]} == {"direct", "substitution"}
    assert doc["ladder"] and doc["noise_figure"] and doc["external_noise"] and doc["snr_cost"]
    assert doc["summary"]["insertion_loss_db"] == pytest.approx(3.0, abs=0.2)
    assert set(doc["plots"]) == {p.name for p in out.glob("*.png")}


def test_results_csv_has_one_number_per_row(analysis, tmp_path):
    rows = rep.csv_rows(analysis)
    rep.write_csv(rows, tmp_path / "results.csv")
    with open(tmp_path / "results.csv", newline="", encoding="utf-8") as f:
        path_rows = list(csv.DictReader(f))
    assert len(path_rows) == len(rows) > 10
    for r in path_rows:
        float(r["value"])  # every row carries a number
        assert r["unit"] in ("dB", "dBFS", "dBFS/Hz")
    loss = [r for r in path_rows if r["section"] == "loss"]
    assert {r["method"] for r in loss} == {"direct", "substitution"}


def test_a_report_never_overwrites_an_earlier_one(analysis, session_dir, monkeypatch):
    # file handling only: skip drawing the spectra pages
    monkeypatch.setattr(rep.writer.spectra_pages, "draw_pages", lambda pages, folder, figures=None: [])
    first = rep.next_report_dir(session_dir)
    assert first.name.startswith("report")
    (session_dir / "report").mkdir(exist_ok=True)
    marker = session_dir / "report" / "my-notes.txt"
    marker.write_text("kept")
    a = rep.write_report(analysis)
    b = rep.write_report(analysis)
    assert a.name.startswith("report-") and b.name.startswith("report-") and a != b
    assert marker.read_text() == "kept"
    # --overwrite replaces report/ itself (and only it).
    c = rep.write_report(analysis, overwrite=True)
    assert c == session_dir / "report" and not marker.exists()
    assert (a / "report.md").is_file() and (b / "report.md").is_file()


@pytest.mark.parametrize("helper", [False, True], ids=["one process", "pages in a forked child"])
def test_a_failed_report_leaves_nothing_half_written(analysis, session_dir, monkeypatch, helper):
    from rxbench.report import helper as helper_module

    monkeypatch.setattr(helper_module, "core_free", lambda: helper)
    before = sorted(p.name for p in session_dir.iterdir())

    def boom(*args, **kwargs):
        raise RuntimeError("plot failed")

    monkeypatch.setattr(rep.writer, "plot_ladder", boom)
    with pytest.raises(RuntimeError):
        rep.write_report(analysis)
    assert sorted(p.name for p in session_dir.iterdir()) == before


def test_summary_lines_state_expanded_uncertainties(analysis):
    lines = rep.summary_lines(analysis)
    assert any(line.startswith("insertion loss (direct") and "±" in line for line in lines)
    assert any(line.startswith("noise figure (receiver)") for line in lines)
    assert any(line.startswith("SNR cost on 10 m") for line in lines)


def test_analyze_command_json_and_text(session_dir):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        assert main(["analyze", str(session_dir), "--json"]) == 0
    doc = json.loads(out.getvalue())  # stdout is exactly one JSON document
    report_dir = doc["report_dir"]
    assert (session_dir / report_dir.split("/")[-1] / "report.md").is_file()
    for key in ("summary", "captures", "losses", "ladder", "noise_figure", "loss_vs_frequency",
                "external_noise", "snr_cost", "warnings", "incomplete", "skipped"):
        assert key in doc
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        assert main(["analyze", str(session_dir)]) == 0
    text = out.getvalue()
    assert "insertion loss (direct" in text and "report:" in text and "k = 2" in text


def test_report_of_a_session_with_nothing_to_measure(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=1)
    a = analyze_session(open_session(tmp_path))
    out = rep.write_report(a)
    assert {p.name for p in out.glob("*.png")} == {"spectra-01.png"}
    assert "no measurement could be made" in (out / "report.md").read_text()
    doc = json.loads((out / "results.json").read_text())
    assert doc["summary"]["insertion_loss_db"] is None and len(doc["captures"]) == 1


def test_the_mismatch_sentence_follows_the_budgets():
    def result(*components):  # what the sentence reads of a LossResult
        return SimpleNamespace(loss=SimpleNamespace(budget=Budget(components)))

    assessed = result(Component.u_shaped("mismatch DUT-load", 0.155))
    missing = result(Component.not_assessed("mismatch", "give the SWRs"))
    assert "is in these budgets" in rep.document._mismatch_sentence([assessed])
    assert "not assessed in these budgets" in rep.document._mismatch_sentence([missing])
    assert "some of these budgets" in rep.document._mismatch_sentence([assessed, missing])
