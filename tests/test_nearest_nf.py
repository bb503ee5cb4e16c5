"""Band-noise tables use the nearest measured receiver noise figure, interpolated and said so,
instead of "n/a" when the noise figure was measured at other tunings."""

import pytest

from rxbench.capture import run_session
from rxbench.plan import parse_plan
from rxbench.session import analyze_session, open_session
from rxbench.simulated import SimulatedBench

PLAN = """\
[dongle]
sample_rate_hz = 250000
gain_db = 30.0
settle_s = 0.02

[noise_source]
enr_db = 15.0

[defaults]
duration_s = 0.1

[[step]]
name = "cold-a"
role = "cold"
center_hz = 28.2e6
[[step]]
name = "hot-a"
role = "hot"
center_hz = 28.2e6
[[step]]
name = "cold-b"
role = "cold"
center_hz = {far_hz}
[[step]]
name = "hot-b"
role = "hot"
center_hz = {far_hz}
[[step]]
name = "load"
role = "load"
center_hz = 28.4e6
[[step]]
name = "antenna"
role = "antenna"
center_hz = 28.4e6
"""


def _external(tmp_path, far_hz):
    run_session(parse_plan(PLAN.format(far_hz=far_hz), "p.toml"), tmp_path / "s", SimulatedBench(seed=8), yes=True)
    a = analyze_session(open_session(tmp_path / "s"))
    (ex,) = a.external_noise
    return a, ex


def test_interpolated_between_the_tunings_either_side(tmp_path):
    a, ex = _external(tmp_path, 29.2e6)
    nfs = {n.center_hz: n.noise_figure_db for n in a.noise_figure}
    # linear interpolation, 0.2 of the way from 28.2 to 29.2 MHz
    assert ex.receiver_noise_figure_db == pytest.approx(nfs[28.2e6] + 0.2 * (nfs[29.2e6] - nfs[28.2e6]))
    assert "interpolated between 28.2 MHz and 29.2 MHz" in ex.receiver_noise_figure_note
    assert ex.fa_db is not None
    assert any("interpolated" in w for w in a.warnings)


def test_the_nearest_alone_when_the_other_is_too_far(tmp_path):
    # 28.2 MHz is 200 kHz away (within 10 %) and is used alone; 50 MHz is beyond 10 % of 28.4 MHz
    a, ex = _external(tmp_path, 50.0e6)
    assert "measured at 28.2 MHz, 200 kHz away" in ex.receiver_noise_figure_note
