"""The simulated bench at HF: direct sampling, an upconverter, the dongle's IF response, a device whose
loss rises steeply above 20 MHz, and swept loss curves that must recover that device's loss."""

from __future__ import annotations

import numpy as np
import pytest

from rxbench.capture import run_session
from rxbench.errors import DeviceError
from rxbench.plan import DongleSettings, parse_plan
from rxbench.session import analyze_session, open_session
from rxbench.simulated import TRANSFORMER_PAIRS, BenchTruth, SimulatedBench
from rxbench.dsp import synth
from rxbench.dsp.units import K_B, T0_K, db_from_power

FS = 1_024_000.0
PAIR = dict(TRANSFORMER_PAIRS)["variant-a"]
HF_TRUTH = BenchTruth(dut_loss_table=PAIR, if_ripple_db=0.6, if_rolloff_db=3.0, settle_s=0.0)


def noise_plan(dongle: str, start: float, stop: float, duration: float = 0.05, gain: float = 30) -> str:
    return f"""
[dongle]
sample_rate_hz = {FS:.0f}
gain_db = {gain}
settle_s = 0.01
{dongle}
[noise_source]
enr_db = 35
[[sweep]]
name = "s"
roles = ["cold", "hot"]
start_hz = {start}
stop_hz = {stop}
with_dut = [false, true]
duration_s = {duration}
"""


def read(bench: SimulatedBench, settings: DongleSettings, center: float, step_text: str, n=1 << 16):
    plan = parse_plan(f"[dongle]\nsample_rate_hz = {FS:.0f}\ngain_db = 30\n[noise_source]\nenr_db = 35\n"
                      f"[generator]\nlevel_dbm = -90\n[[step]]\nname = 'x'\ncenter_hz = {center}\n{step_text}")
    bench.open()
    bench.configure(settings, center)
    bench.arrange(plan.expand()[0])
    return synth.cu8_to_complex(bench.read_bytes(n))


def power_db(x):
    return float(db_from_power(np.mean(np.abs(x - x.mean()) ** 2)))


def test_direct_sampling_ignores_the_gain_setting_and_has_the_converters_noise():
    truth = BenchTruth(settle_s=0.0)
    a = read(SimulatedBench(truth, seed=1), DongleSettings(FS, 10.0, direct_sampling="q"), 7e6, "role = 'cold'")
    b = read(SimulatedBench(truth, seed=2), DongleSettings(FS, 40.0, direct_sampling="q"), 7e6, "role = 'cold'")
    assert power_db(a) == pytest.approx(power_db(b), abs=0.1)  # no tuner gain stage
    # cold input: kT0 (F) per Hz referred to the input, times the converter's gain (Friis; F = 30 dB)
    expected = 10 * np.log10(K_B * T0_K * 10 ** (truth.direct_sampling_nf_db / 10) * FS * 1e3) + truth.direct_sampling_gain_db
    assert power_db(a) == pytest.approx(expected, abs=0.3)


def test_direct_sampling_alias_lands_on_f_without_a_filter():
    # hot noise source through the device: what sits at 28.8 MHz - f (here 21.8 MHz, where the pair
    # loses several dB more than at 7 MHz) adds to f when nothing in front rejects it
    bare = BenchTruth(dut_loss_table=PAIR, settle_s=0.0, alias_rejection_db=None)
    filt = BenchTruth(dut_loss_table=PAIR, settle_s=0.0, alias_rejection_db=60.0)
    s = DongleSettings(FS, 30.0, direct_sampling="q")
    step = "role = 'hot'\nwith_dut = true"
    p_bare = power_db(read(SimulatedBench(bare, seed=3), s, 7e6, step, 1 << 18))
    p_filt = power_db(read(SimulatedBench(filt, seed=3), s, 7e6, step, 1 << 18))
    # the bare input receives both: about 10*log10(1 + G(21.8)/G(7)) more excess noise
    assert p_bare - p_filt > 0.5


def test_upconverter_adds_its_loss_and_noise():
    truth = BenchTruth(settle_s=0.0)
    plain = read(SimulatedBench(truth, seed=4), DongleSettings(FS, 8.0), 28e6, "role = 'hot'")
    up = read(SimulatedBench(truth, seed=4), DongleSettings(FS, 8.0, upconverter_hz=125e6), 28e6, "role = 'hot'")
    # a strong hot source (35 dB ENR) dominates both noises: the level drops by about the conversion loss
    assert power_db(plain) - power_db(up) == pytest.approx(truth.upconverter_loss_db, abs=0.6)


def test_if_response_shapes_the_band():
    truth = BenchTruth(if_ripple_db=0.0, if_rolloff_db=6.0, settle_s=0.0)
    x = read(SimulatedBench(truth, seed=5), DongleSettings(FS, 30.0), 28e6, "role = 'hot'", 1 << 19)
    import scipy.signal

    f, p = scipy.signal.welch(x, fs=FS, nperseg=1024, return_onesided=False)
    mid = np.mean(p[np.abs(f) < 0.1 * FS])
    edge = np.mean(p[(np.abs(f) > 0.44 * FS) & (np.abs(f) < 0.46 * FS)])
    # -6 dB * (0.9)**8 = -2.6 dB near the edges (the model's roll-off)
    assert 10 * np.log10(edge / mid) == pytest.approx(-6.0 * 0.9**8, abs=0.4)


def test_unknown_device_label_is_an_error():
    with pytest.raises(DeviceError, match="no device 'variant-z'"):
        read(SimulatedBench(BenchTruth(), seed=6), DongleSettings(FS, 30.0), 7e6,
             "role = 'hot'\nwith_dut = true\ndevice = 'variant-z'")


def test_transformer_pair_rolls_off_above_20_mhz():
    t = BenchTruth()
    a = [t.dut_loss_db(f, "variant-a") for f in (7e6, 14e6, 21e6, 28e6)]
    assert a[0] < 0.8 and a[3] - a[0] > 5  # flat below, steep above 20 MHz


def swept(tmp_path, dongle: str, start: float, stop: float, seed: int, gain: float = 30):
    plan = parse_plan(noise_plan(dongle, start, stop, gain=gain))
    run_session(plan, tmp_path / "s", SimulatedBench(HF_TRUTH, seed=seed), yes=True)
    a = analyze_session(open_session(tmp_path / "s"))
    c = a.loss_vs_frequency
    f, w = np.array(c["frequency_hz"]), np.array(c["width_hz"])
    loss, u = np.array(c["insertion_loss_db"], float), np.array(c["u_insertion_loss_db"], float)
    truth = np.array([np.mean(HF_TRUTH.dut_loss_db(np.linspace(fi - wi / 2, fi + wi / 2, 64))) for fi, wi in zip(f, w)])
    return f, loss, c["k"] * u, truth, a


@pytest.mark.parametrize("dongle, gain", [('direct_sampling = "q"', 30), ("upconverter_hz = 125e6", 8)])
def test_swept_curve_covers_the_truth_across_retunes(tmp_path, dongle, gain):
    # 17-23 MHz: the pair's steep roll-off, several retunes, IF ripple and roll-off on the dongle.
    f, loss, U, truth, a = swept(tmp_path, dongle, 17e6, 23e6, seed=11, gain=gain)
    assert len(f) >= 40
    # the sub-bands of neighbouring tunings tile the band: no gap between one and the next
    w = np.array(a.loss_vs_frequency["width_hz"])
    assert np.all(f[1:] - w[1:] / 2 <= f[:-1] + w[:-1] / 2 + 1.0)
    assert f[0] - w[0] / 2 <= 17e6 + 1.0 and f[-1] + w[-1] / 2 >= 23e6 - 1.0
    inside = np.abs(loss - truth) <= U
    # about 95 % of the sub-bands within their U (k = 2); with ~50 sub-bands allow down to 85 %
    assert inside.mean() >= 0.85
    assert abs(np.mean(loss - truth)) < 0.1  # no bias from the IF response (the per-bin ratio cancels it)


@pytest.mark.slow
@pytest.mark.parametrize("dongle, gain", [('direct_sampling = "q"', 30), ("upconverter_hz = 125e6", 8)])
def test_swept_curve_coverage_over_hf(tmp_path, dongle, gain):
    inside = []
    for seed in range(3):
        f, loss, U, truth, a = swept(tmp_path / str(seed), dongle, 3e6, 30e6, seed=seed, gain=gain)
        inside += list(np.abs(loss - truth) <= U)
    assert 0.90 <= np.mean(inside) <= 0.99


def test_tone_sweep_through_an_upconverter_gives_a_loss_per_frequency(tmp_path):
    text = """
[dongle]
sample_rate_hz = 250000
gain_db = 10
settle_s = 0.01
upconverter_hz = 125e6
[generator]
level_dbm = -68
offset_hz = 20000
[[sweep]]
name = "t"
roles = ["thru", "dut"]
generator_hz = [3.6e6, 14.2e6, 21.2e6, 28.4e6]
device = "variant-a"
devices = 2
duration_s = 0.1
"""
    plan = parse_plan(text)
    # the generator is retuned once per frequency and the device goes in once
    assert sum("Retune" in s.instruction for s in plan.steps) == 2 * 3
    assert sum("Insert" in s.instruction or "Take" in s.instruction for s in plan.steps) == 1
    truth = BenchTruth(settle_s=0.0, drift_hz_per_s=0.0)
    run_session(plan, tmp_path / "s", SimulatedBench(truth, seed=31), yes=True)
    a = analyze_session(open_session(tmp_path / "s"))
    direct = {round(x["frequency_hz"] / 1e5): x for x in (y.to_dict() for y in a.losses) if x["method"] == "direct"}
    assert len(direct) == 4
    for f in (3.6e6, 14.2e6, 21.2e6, 28.4e6):
        x = direct[round(f / 1e5)]
        true = truth.dut_loss_db(f, "variant-a")
        assert abs(x["insertion_loss_db"] - true) <= x["expanded_uncertainty_db"] + 0.05, (f, x["insertion_loss_db"], true)
        assert x["per_device_db"] == pytest.approx(x["insertion_loss_db"] / 2)


def test_tone_sweep_of_two_devices_gives_each_its_own_loss(tmp_path):
    text = """
[dongle]
sample_rate_hz = 250000
gain_db = 10
settle_s = 0.01
upconverter_hz = 125e6
[generator]
level_dbm = -68
offset_hz = 20000
[[sweep]]
name = "a"
roles = ["thru", "dut"]
generator_hz = [7.1e6, 28.4e6]
device = "variant-a"
duration_s = 0.1
[[sweep]]
name = "b"
roles = ["dut"]
generator_hz = [7.1e6, 28.4e6]
device = "variant-b"
duration_s = 0.1
"""
    truth = BenchTruth(settle_s=0.0, drift_hz_per_s=0.0)
    run_session(parse_plan(text), tmp_path / "s", SimulatedBench(truth, seed=32), yes=True)
    a = analyze_session(open_session(tmp_path / "s"))
    direct = {(x.device, round(x.frequency_hz / 1e5)): x.to_dict() for x in a.losses if x.method == "direct"}
    assert len(direct) == 4  # the two devices' captures at one frequency are not pooled
    for (device, f10), x in direct.items():
        true = truth.dut_loss_db(f10 * 1e5, device)
        assert abs(x["insertion_loss_db"] - true) <= x["expanded_uncertainty_db"] + 0.05, (device, f10, x, true)
