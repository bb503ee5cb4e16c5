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
