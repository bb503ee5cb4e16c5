"""Headline caveats: tags drawn from a result's own budget and captures."""

from rxbench.caveats import capture_names, headline_tags, not_assessed

LOSS = {
    "captures": {"dut": ["03-dut"], "ladder": {"0": ["01-l0"], "10": ["02-l10", "04-l10"]}},
    "budget": [
        {"name": "readings", "note": ""},
        {"name": "mismatch", "note": "not assessed (give [match] source_swr, load_swr, dut_swr)"},
        {"name": "generator drift", "note": "not assessed (capture a ladder step again after the DUT)"},
    ],
}


def test_names_and_unassessed_lines():
    assert capture_names(LOSS["captures"]) == ["03-dut", "01-l0", "02-l10", "04-l10"]
    assert not_assessed(LOSS["budget"]) == ["mismatch", "generator drift"]


def test_tags():
    assert headline_tags(LOSS, {}) == "  (readings only: mismatch, generator drift not assessed)"
    clipped = headline_tags(LOSS, {"02-l10": 0.01})
    assert clipped.startswith("  [clipped]")
    assert "[outside the linear range]" in headline_tags(LOSS, {}, linear=False)
    assert headline_tags({"captures": ["a"], "budget": [{"name": "x", "note": ""}]}, {"a": 0.0}) == ""


PLAN = """\
[dongle]
sample_rate_hz = 250000
gain_db = 30.0
settle_s = 0.02
full_scale_dbm = -80.0

[generator]
level_dbm = -40.0
offset_hz = 20000

[defaults]
center_hz = 28.4e6
duration_s = 0.1

[[step]]
name = "thru"
role = "thru"
attenuation_db = {thru_db}

[[step]]
name = "dut"
role = "dut"
attenuation_db = {thru_db}
"""


def _summary(tmp_path, thru_db):
    from rxbench.capture import run_session
    from rxbench.plan import parse_plan
    from rxbench.report import summary_lines
    from rxbench.session import analyze_session, open_session
    from rxbench.simulated import SimulatedBench

    run_session(parse_plan(PLAN.format(thru_db=thru_db), "p.toml"), tmp_path / "s", SimulatedBench(seed=5), yes=True)
    return [line for line in summary_lines(analyze_session(open_session(tmp_path / "s"))) if "insertion loss" in line]


def test_clipped_session_headline_says_so(tmp_path):
    # generator -40 dBm through 30 dB reaches -70 dBm: 10 dB over the simulated dongle's full scale
    (line,) = _summary(tmp_path, 30)
    assert "[clipped]" in line
    assert "readings only: dongle linearity" in line and "mismatch not assessed" in line


def test_clean_session_headline_has_no_clipped_tag(tmp_path):
    (line,) = _summary(tmp_path, 50)
    assert "[clipped]" not in line and "mismatch not assessed" in line
