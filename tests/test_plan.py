"""Measurement plans: parsing, validation messages that name file, line and field, expansion."""

from __future__ import annotations

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.errors import PlanError
from rxbench.keys import ROLES
from rxbench.plan import example_plans, load_plan, parse_plan

BASE = """\
title = "test"

[dongle]
sample_rate_hz = 250000
gain_db = 30.0

[generator]
level_dbm = -40.0

[defaults]
center_hz = 28.4e6
duration_s = 0.5
"""


def plan_with(steps: str, base: str = BASE):
    return parse_plan(base + steps, "p.toml")


def error_of(text: str) -> str:
    with pytest.raises(PlanError) as exc:
        parse_plan(text, "p.toml")
    return str(exc.value)


@pytest.mark.parametrize("path", example_plans(), ids=lambda p: p.name)
def test_example_plans_are_valid(path):
    plan = load_plan(path)
    caps = plan.expand()
    assert caps and all(c.role in ROLES for c in caps)
    assert len({c.base_name for c in caps}) == len(caps)
    assert plan.title


def test_examples_cover_every_measurement():
    roles = {s.role for p in example_plans() for s in load_plan(p).steps}
    assert roles == set(ROLES)
    names = {p.stem for p in example_plans()}
    assert {"direct-loss", "substitution-loss", "ladder-check", "y-factor-nf", "external-noise",
            "field-station"} <= names


def test_defaults_and_step_values():
    plan = plan_with("""
[[step]]
name = "a"
role = "thru"
attenuation_db = 60

[[step]]
name = "b"
role = "dut"
attenuation_db = 60
center_hz = 29e6
repeats = 3
""")
    a, b = plan.steps
    assert (a.center_hz, a.duration_s, a.repeats, a.with_dut) == (28.4e6, 0.5, 1, False)
    assert (b.center_hz, b.repeats, b.with_dut) == (29e6, 3, True)  # a dut step has the DUT in the path
    caps = plan.expand()
    assert [c.base_name for c in caps] == ["01-a", "02-b", "03-b", "04-b"]
    assert [c.repeat for c in caps] == [1, 1, 2, 3]
    assert caps[0].input_dbm == -100.0  # -40 dBm generator, 60 dB attenuation
    assert "60 dB" in a.instruction  # a default instruction names the setting


def test_plan_text_is_data_never_code():
    plan = plan_with("""
[[step]]
name = "a"
role = "thru"
instruction = "__import__('os').system('echo hacked')"
""")
    assert plan.steps[0].instruction == "__import__('os').system('echo hacked')"


@pytest.mark.parametrize(
    "step, line, words",
    [
        ('[[step]]\nname = "a"\nrole = "thru"\nattenuation_db = "forty"\n', 17, ["attenuation_db", "'forty'"]),
        ('[[step]]\nname = "a"\nrole = "thru"\natten_db = 40\n', 17, ["atten_db", "unknown field"]),
        ('[[step]]\nname = "a"\nrole = "through"\n', 16, ["role", "thru, dut"]),
        ('[[step]]\nname = "a b"\nrole = "thru"\n', 15, ["name", "'a b'"]),
        ('[[step]]\nname = "a"\nrole = "thru"\nrepeats = 1.5\n', 17, ["repeats", "whole number"]),
        ('[[step]]\nname = "a"\nrole = "thru"\nduration_s = 0.01\n', 17, ["duration_s", "16384"]),
        ('[[step]]\nname = "a"\nrole = "hot"\n', 16, ["role", "enr_db"]),
        ('[[step]]\nname = "a"\nrole = "thru"\ndevices = 2\n', 17, ["devices", "'dut'"]),
        ('[[step]]\nrole = "thru"\n', 14, ["step 1", "name"]),
    ],
)
def test_errors_name_file_line_and_field(step, line, words):
    msg = error_of(BASE + "\n" + step)
    assert msg.startswith(f"p.toml, line {line}:"), msg
    for w in words:
        assert w in msg, msg


def test_duplicate_names_point_at_the_second():
    msg = error_of(BASE + '\n[[step]]\nname = "a"\nrole = "thru"\n\n[[step]]\nname = "a"\nrole = "dut"\n')
    assert msg.startswith("p.toml, line 19:") and "step 2" in msg and "already the name of step 1" in msg


def test_errors_in_dongle_table():
    assert "line 5: [dongle] gain_db" in error_of(BASE.replace("gain_db = 30.0", 'gain_db = "auto"'))
    msg = error_of(BASE.replace("sample_rate_hz = 250000", "sample_rate_hz = 500000"))
    assert "line 4: [dongle] sample_rate_hz" in msg and "225001-300000" in msg
    msg = error_of(BASE.replace("[dongle]", "[dongle]\nppm = 1.5") + '[[step]]\nname="a"\nrole="thru"\n')
    assert "line 4: [dongle] ppm" in msg
    msg = error_of(BASE.replace("[dongle]", '[dongle]\ndirect_sampling = "q"\nupconverter_hz = 125e6'))
    assert "upconverter_hz" in msg and "exclude" in msg
    assert "missing required table [dongle]" in error_of('[[step]]\nname = "a"\nrole = "thru"\ncenter_hz = 1e8\n')


@pytest.mark.parametrize("rate, ok", [
    # librtlsdr's rtlsdr_set_sample_rate refuses rate <= 225 kHz, 300 kHz < rate <= 900 kHz and rate > 3.2 MHz
    # (from memory of librtlsdr.c)
    (225000, False), (225001, True), (300000, True), (300001, False), (900000, False), (900001, True),
    (2048000, True), (3200000, True), (3200001, False),
])
def test_sample_rate_ranges(rate, ok):
    text = BASE.replace("sample_rate_hz = 250000", f"sample_rate_hz = {rate}") + '[[step]]\nname="a"\nrole="thru"\n'
    if ok:
        assert parse_plan(text, "p.toml").dongle.sample_rate_hz == rate
    else:
        assert "sample_rate_hz" in error_of(text)


def test_toml_syntax_error_names_the_line():
    msg = error_of(BASE + '\n[[step]]\nname = "a\nrole = "thru"\n')
    assert msg.startswith("p.toml, line 15: not valid TOML")


def test_no_steps():
    assert "no steps" in error_of(BASE)


def test_enr_table_interpolates_linearly():
    text = BASE + """
[noise_source]
enr_table = [[26e6, 15.4], [28e6, 15.2], [30e6, 14.8]]

[[step]]
name = "hot"
role = "hot"
center_hz = 29.3e6
"""
    plan = parse_plan(text, "p.toml")
    table = np.array(plan.enr_table)
    for f in (26e6, 27.1e6, 28e6, 29.3e6, 30e6):
        # reference: numpy's piecewise-linear interpolation
        assert plan.enr_at(f) == pytest.approx(np.interp(f, table[:, 0], table[:, 1]))
    assert plan.expand()[0].enr_db == pytest.approx(np.interp(29.3e6, table[:, 0], table[:, 1]))
    bad = text.replace("[[26e6, 15.4], [28e6, 15.2]", "[[28e6, 15.4], [26e6, 15.2]")
    assert "ascending" in error_of(bad)


def test_warnings_for_questionable_but_valid_plans():
    no_level = BASE.replace("level_dbm = -40.0", "offset_hz = 10000")
    plan = parse_plan(no_level + '[[step]]\nname="a"\nrole="thru"\ncenter_hz = 7.1e6\n', "p.toml")
    text = " ".join(plan.warnings)
    assert "level_dbm" in text and "24 MHz" in text
    plan = parse_plan(BASE.replace("level_dbm = -40.0", "level_dbm = -40.0\noffset_hz = 0")
                      + '[[step]]\nname="a"\nrole="thru"\n', "p.toml")
    assert any("line 9" in w and "DC spike" in w for w in plan.warnings)
    plan = parse_plan(BASE.replace("[dongle]", "[dongle]\nbias_tee = true") + '[[step]]\nname="a"\nrole="load"\n',
                      "p.toml")
    assert any("bias tee" in w for w in plan.warnings)


def test_load_plan_missing_file_and_cli_message(tmp_path, capsys):
    with pytest.raises(PlanError, match="no such plan file"):
        load_plan(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text(BASE + '\n[[step]]\nname = "a"\nrole = "thru"\nattenuation_db = -3\n')
    code = main(["capture", str(bad), "--out", str(tmp_path / "s"), "--device", "simulated", "--yes"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert err[-1] == (f"rxbench capture: error: {bad}, line 17: step 1 ('a') attenuation_db: "
                       "must be >= 0, got -3")
    assert not (tmp_path / "s").exists()


def test_match_table_goes_with_the_tone_captures():
    p = plan_with('[match]\nsource_swr = 1.1\nload_swr = 2\n\n[[step]]\nname = "t"\nrole = "thru"\n'
                  '[[step]]\nname = "h"\nrole = "hot"\n\n[noise_source]\nenr_db = 15\n')
    thru, hot = p.expand()
    assert dict(thru.swr) == {"source_swr": 1.1, "load_swr": 2.0} and hot.swr == ()
    assert not any("[match]" in w for w in p.warnings)
    half = plan_with('[match]\ndut_swr = 1.4\n\n[[step]]\nname = "t"\nrole = "thru"\n')
    assert any("[match] needs both source_swr and load_swr" in w for w in half.warnings)


@pytest.mark.parametrize("value, words", [("0.9", "must be >= 1"), ('"low"', "must be a number"),
                                          ("nan", "must be finite")])
def test_match_errors_name_line_and_field(value, words):
    msg = error_of(BASE + f'[match]\nload_swr = {value}\n\n[[step]]\nname = "t"\nrole = "thru"\n')
    assert "p.toml" in msg and "load_swr" in msg and words in msg and "line 14" in msg
