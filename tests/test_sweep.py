"""Sweeps in plans: centres covering the band with the left-out edges overlapped, the capture order
with the fewest operator actions, prompts that say only what changes, and the dry run."""

from __future__ import annotations

import itertools
import json

import pytest

from rxbench.cli import main
from rxbench.errors import PlanError
from rxbench.plan import parse_plan
from rxbench import sweep

NOISE_PLAN = """
[dongle]
sample_rate_hz = 1024000
gain_db = 30
direct_sampling = "q"
[noise_source]
enr_db = 35
[defaults]
duration_s = 0.05
[[sweep]]
name = "a"
roles = ["cold", "hot"]
start_hz = 3e6
stop_hz = 30e6
with_dut = [false, true]
device = "variant-a"
devices = 2
[[sweep]]
name = "b"
roles = ["cold", "hot"]
start_hz = 3e6
stop_hz = 30e6
with_dut = true
device = "variant-b"
devices = 2
"""


def usable(center, fs):
    half = (1 - sweep.EDGE_FRACTION) * fs / 2
    return center - half, center + half


@pytest.mark.parametrize("fs, start, stop, split", [(2.4e6, 3e6, 30e6, None), (1.024e6, 3e6, 30e6, 14.4e6),
                                                    (250e3, 28e6, 29.7e6, None), (2.048e6, 7e6, 7.3e6, None)])
def test_centres_cover_the_band_and_each_others_left_out_edges(fs, start, stop, split):
    centres = sweep.sweep_centers(start, stop, fs, split_hz=split)
    spans = [usable(c, fs) for c in centres]
    # every frequency of the band lies in some capture's usable band
    for f in [start + (stop - start) * k / 2000 for k in range(2001)]:
        assert any(lo - 1e-6 <= f <= hi + 1e-6 for lo, hi in spans), f
    # a capture's left-out edges inside the band are inside a neighbour's usable band
    for i, c in enumerate(centres):
        for edge in (c - fs / 2, c + fs / 2):
            if start < edge < stop and (split is None or abs(edge - split) > 1):
                assert any(j != i and lo <= edge <= hi for j, (lo, hi) in enumerate(spans)), (c, edge)
    if split is not None:  # direct sampling: no capture straddles half the converter's rate
        assert all(hi <= split + 1e-6 or lo >= split - 1e-6 for lo, hi in spans)


def test_centre_count_for_hf_at_2_4_msps():
    # The figure: about a dozen centres cover 3-30 MHz at 2.4 MS/s (four roles: about 50 steps).
    # Lower bound: 27 MHz / usable 2.16 MHz = 12.5 -> 13 centres; overlap adds a few.
    n = len(sweep.sweep_centers(3e6, 30e6, 2.4e6))
    assert 13 <= n <= 16


def test_action_count_is_the_fewest_possible():
    plan = parse_plan(NOISE_PLAN)
    states = [sweep.state(plan, s, plan.tone_offset_hz) for s in plan.steps]
    distinct = {json.dumps(s, sort_keys=True) for s in states}
    # Every distinct physical state must be entered at least once, each entry costing an action:
    # distinct - 1 is a lower bound for any order, and the plan's order reaches it.
    assert sweep.operator_actions(plan) == len(distinct) - 1 == 11
    # The order a person would write (per centre: cold, hot, cold and hot through each device) costs
    # many more.
    by_centre = sorted(plan.steps, key=lambda s: (s.center_hz, s.sweep, s.with_dut, s.role))
    naive = sweep.count_actions([sweep.state(plan, s, plan.tone_offset_hz) for s in by_centre])
    assert naive > 10 * sweep.operator_actions(plan)


def test_prompts_say_only_what_changes():
    plan = parse_plan(NOISE_PLAN)
    steps = plan.steps
    assert steps[0].instruction.startswith("Set up: noise source switched OFF")
    said = [s.instruction for s in steps[1:] if s.instruction]
    assert len(said) == sweep.operator_actions(plan)  # here every action is a step of its own
    assert any(t == "Switch the noise source ON." for t in said)
    assert any(t.startswith("Insert variant-a (2 in series)") for t in said)
    assert any(t.startswith("Replace") or t.startswith("Insert variant-b") for t in said)
    # a step with nothing to change says nothing (the capture proceeds without waiting)
    assert sum(1 for s in steps if not s.instruction) == len(steps) - 1 - len(said)


def test_tone_sweep_direct_and_substitution():
    text = """
[dongle]
sample_rate_hz = 250000
gain_db = 30
upconverter_hz = 125e6
[generator]
level_dbm = -60
offset_hz = 20000
[[sweep]]
name = "t"
roles = ["step", "dut"]
generator_hz = [3.6e6, 7.1e6, 14.2e6]
ladder_db = [0, 2]
attenuation_db = 2
duration_s = 0.1
"""
    plan = parse_plan(text)
    assert len(plan.steps) == 3 * 3
    assert {s.center_hz for s in plan.steps} == {3.58e6, 7.08e6, 14.18e6}
    # generator retunes: every capture's tone is at the listed frequency
    retunes = [s.instruction for s in plan.steps if "Retune the generator" in s.instruction]
    assert retunes and all("MHz" in r for r in retunes)
    states = [sweep.state(plan, s, plan.tone_offset_hz) for s in plan.steps]
    # the best of all orders of these nine captures (checked by brute force over every permutation
    # of the three frequencies within the nesting the search considers is not enough: compare with a
    # few hand-written orders)
    best = sweep.count_actions(states)
    for key in (lambda s: (s.center_hz, s.role, s.attenuation_db), lambda s: (s.role, s.attenuation_db, s.center_hz)):
        alt = sorted(plan.steps, key=key)
        assert best <= sweep.count_actions([sweep.state(plan, s, plan.tone_offset_hz) for s in alt])


def test_small_sweep_order_is_optimal_by_brute_force():
    text = NOISE_PLAN.replace("start_hz = 3e6\nstop_hz = 30e6", "start_hz = 7.0e6\nstop_hz = 7.3e6")
    plan = parse_plan(text.split("[[sweep]]\nname = \"b\"")[0])
    states = [sweep.state(plan, s, plan.tone_offset_hz) for s in plan.steps]
    assert len(states) == 4
    best = min(sweep.count_actions(list(p)) for p in itertools.permutations(states))
    assert sweep.operator_actions(plan) == best == 3


@pytest.mark.parametrize("change, problem", [
    ('roles = ["cold", "hot"]', 'roles = ["cold", "thru"]'),
    ("stop_hz = 30e6", "stop_hz = 2e6"),
    ('roles = ["cold", "hot"]', 'roles = ["cold", "bogus"]'),
    ("devices = 2\n[[sweep]]", "devices = 2\nladder_db = [1]\n[[sweep]]"),
])
def test_bad_sweeps_name_the_field(change, problem):
    with pytest.raises(PlanError) as e:
        parse_plan(NOISE_PLAN.replace(change, problem, 1), "p.toml")
    assert "p.toml, line" in str(e.value) and "sweep" in str(e.value)


def test_dry_run_lists_steps_count_time_size_and_actions(tmp_path, capsys):
    path = tmp_path / "p.toml"
    path.write_text(NOISE_PLAN)
    assert main(["capture", str(path), "--dry-run", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    plan = parse_plan(NOISE_PLAN)
    assert d["step_count"] == len(plan.steps) == len(d["steps"])
    assert d["operator_actions"] == 11
    assert d["capture_time_s"] == pytest.approx(len(plan.steps) * (0.05 + 0.1))
    assert d["size_bytes"] == pytest.approx(len(plan.steps) * 0.05 * 1024000 * 2, rel=0.01)  # cu8: 2 bytes a sample
    assert not list(tmp_path.iterdir())[1:]  # nothing but the plan: no session was made
    assert main(["capture", str(path), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "11 operator actions" in out and f"{len(plan.steps)} steps" in out


def test_overlap_is_one_sub_band_of_the_analysis():
    from rxbench.session import N_SUB_BANDS

    assert sweep.OVERLAP_FRACTION == pytest.approx(1.0 / N_SUB_BANDS)
