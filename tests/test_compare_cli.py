"""``rxbench compare``: the on-air A/B comparison from saved captures (simulated band, invented data)."""

import datetime as dt
import json

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.errors import UnlikeCapturesError, UsageError
from rxbench.methods import compare as method
from rxbench.output import json_safe
from rxbench.recordings import open_capture, write_sigmf
from rxbench.dsp import onair, synth
from rxbench.dsp.onair import Carrier

FS = 250e3
CENTER = 14.1e6
T_START = dt.datetime(2026, 6, 13, 18, 0, 0, tzinfo=dt.timezone.utc)
CARRIERS = (Carrier(-70e3, -104.0), Carrier(-20e3, -100.0, rician_k_db=3.0), Carrier(45e3, -106.0))


def _band(**changes):
    return onair.demo_band(**{"carriers": CARRIERS, "coherence_time_s": 60.0, **changes})


def _stamp(t_s: float) -> str:
    return (T_START + dt.timedelta(seconds=float(t_s))).isoformat().replace("+00:00", "Z")


def _write(folder, session, *, prefix="", gain_a=30.0, gain_b=30.0, rate_b=FS, center_b=CENTER,
           timestamps=True):
    """Write a simulated session as SigMF recordings; returns (A metadata paths, B metadata paths)."""
    paths = {"a": [], "b": []}
    for path, xs, ts, gain, rate, center in (("a", session.a, session.times_a_s, gain_a, FS, CENTER),
                                              ("b", session.b, session.times_b_s, gain_b, rate_b, center_b)):
        for i, (x, t) in enumerate(zip(xs, ts)):
            meta = write_sigmf(folder / f"{prefix}{path}{i:02d}", x, sample_rate_hz=rate, center_hz=center,
                               datatype="cu8", datetime=_stamp(t) if timestamps else None,
                               extra={"gain_db": gain, "role": "antenna"})
            paths[path].append(str(meta))
    return paths["a"], paths["b"]


def _simulate(band=None, seed=1, **kw):
    params = dict(n_pairs=10, capture_s=0.02, interval_s=0.5)
    params.update(kw)
    return onair.simulate_session(band or _band(), np.random.default_rng(seed), **params)


@pytest.fixture(scope="module")
def session(tmp_path_factory):
    folder = tmp_path_factory.mktemp("onair")
    band = _band()
    a, b = _write(folder, _simulate(band))
    return folder, a, b, band


def _json(capsys, argv):
    code = main(argv + ["--json"])
    out, err = capsys.readouterr()
    return code, json.loads(out), err


def test_json_result_holds_the_truth(session, capsys):
    folder, a, b, band = session
    code, r, err = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert code == 0
    truth = onair.expected_snr_difference_db(band)  # SNR-cost formula, dsp.environment
    lo, hi = r["snr_difference_ci_db"]
    assert lo <= truth <= hi
    assert r["classification"] == "snr-cost"
    assert r["method"] == "hodges-lehmann"
    assert r["pairs"] == 10 and r["pairing"] == "alternating, by timestamp"
    assert r["signals_found"]["both"] == 3
    assert len(r["signals"]) == 3 and len(r["per_pair"]) == 10
    np.testing.assert_allclose([s["frequency_hz"] for s in r["signals"]],
                               [CENTER + c.offset_hz for c in CARRIERS], atol=FS / 128)
    t = r["pooled"]["snr"]["paired_t"]
    assert t["ci_db"][0] <= truth <= t["ci_db"][1]
    nlo, nhi = r["noise_difference_ci_db"]
    assert nlo - 0.1 <= onair.expected_noise_difference_db(band) <= nhi + 0.1
    assert r["summary"].startswith("Path B costs")
    assert r["confidence"] == 0.95 and r["false_alarm"] == 0.01
    assert isinstance(r["warnings"], list)


def test_method_result_is_what_the_command_prints(session, capsys):
    # The command is a renderer of the method's result: the same captures through the method give
    # the same JSON document (the command adds only the plot's name when it draws one).
    folder, a, b, _ = session
    code, printed, _ = _json(capsys, ["compare", "--a", *a, "--b", *b, "--alpha", "0.1"])
    ra, rb = method.read_paths([open_capture(x) for x in a], [open_capture(x) for x in b])
    res = method.compare_paths(ra, rb, alpha=0.1)
    assert code == 0
    assert json.loads(json.dumps(json_safe(res.to_dict()))) == printed
    assert isinstance(res.warnings, tuple) and printed["warnings"] == list(res.warnings)
    assert res.headline.method == printed["method"] and res.classification == printed["classification"]
    with pytest.raises(AttributeError):  # frozen
        res.alpha = 0.2


def test_method_refuses_bad_settings_and_unlike_captures(session, tmp_path):
    folder, a, b, _ = session
    ra, rb = method.read_paths([open_capture(x) for x in a[:2]], [open_capture(x) for x in b[:2]])
    for bad in (dict(alpha=0.7), dict(false_alarm=0.0), dict(tolerance_hz=-1.0), dict(method="mean")):
        with pytest.raises(UsageError):
            method.compare_paths(ra, rb, **bad)
    with pytest.raises(UsageError):
        method.read_paths([], [open_capture(b[0])])
    s = _simulate(n_pairs=1)
    a2, b2 = _write(tmp_path, s, prefix="rate-", rate_b=2 * FS)
    with pytest.raises(UnlikeCapturesError, match="sample rate"):
        method.read_paths([open_capture(x) for x in a2], [open_capture(x) for x in b2])


def test_human_table_and_alpha(session, capsys):
    folder, a, b, _ = session
    assert main(["compare", "--a", *a, "--b", *b, "--alpha", "0.1", "--method", "paired-t"]) == 0
    out, _ = capsys.readouterr()
    assert "90 % interval" in out
    assert "Path B costs" in out and "dB of SNR on the signals heard" in out
    assert "pooled SNR" in out and "14.03000" in out  # the carrier at -70 kHz from 14.1 MHz


def test_plot_written_and_never_overwritten(session, capsys, tmp_path):
    folder, a, b, _ = session
    png = tmp_path / "compare.png"
    assert main(["compare", "--a", *a, "--b", *b, "--plot", str(png)]) == 0
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000
    capsys.readouterr()
    assert main(["compare", "--a", *a, "--b", *b, "--plot", str(png)]) == 2
    _, err = capsys.readouterr()
    assert "already exists" in err and "--overwrite" in err and "Traceback" not in err
    assert png.read_bytes() == data
    assert main(["compare", "--a", *a, "--b", *b, "--plot", str(png), "--overwrite"]) == 0
    # a capture is never a plot target
    capsys.readouterr()
    assert main(["compare", "--a", *a, "--b", *b, "--plot", a[0]]) == 2


def _one_line_error(capsys, argv, *needles):
    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    for n in needles:
        assert n in err


def test_mismatched_sample_rate_or_centre_is_an_error(tmp_path, capsys):
    s = _simulate(n_pairs=2)
    a, b = _write(tmp_path, s, prefix="rate-", rate_b=2 * FS)
    _one_line_error(capsys, ["compare", "--a", *a, "--b", *b], "sample rate", "rate-b00")
    a, b = _write(tmp_path, s, prefix="centre-", center_b=CENTER + 5e3)
    _one_line_error(capsys, ["compare", "--a", *a, "--b", *b], "centre frequency", "centre-b00")


def test_bad_options(session, capsys, tmp_path):
    folder, a, b, _ = session
    _one_line_error(capsys, ["compare", "--a", *a, "--b", *b, "--alpha", "0.7"], "--alpha")
    _one_line_error(capsys, ["compare", "--a", *a, "--b", *b, "--plot", str(tmp_path / "x.jpg")], ".png")
    _one_line_error(capsys, ["compare", "--a", *a, "--b", str(tmp_path / "missing.sigmf-meta")], "missing")


def test_gain_and_dwell_mismatch_warn(tmp_path, capsys):
    s = _simulate(n_pairs=6)
    a, b = _write(tmp_path, s, prefix="g-", gain_b=35.0)
    code, r, err = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert code == 0
    assert any("gain differs between the paths" in w for w in r["warnings"])
    assert "gain differs" in err
    # B captures half as long as A captures
    short = onair.OnAirSession(s.a, tuple(x[: x.size // 2] for x in s.b), s.times_a_s, s.times_b_s, s.band, False)
    a, b = _write(tmp_path, short, prefix="d-")
    code, r, _ = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert any("same dwell time" in w for w in r["warnings"])


def test_uneven_alternation_warns(tmp_path, capsys):
    s = _simulate(n_pairs=6)
    tb = s.times_b_s.copy()
    tb[3] += 0.9  # one B capture taken late
    late = onair.OnAirSession(s.a, s.b, s.times_a_s, tb, s.band, False)
    a, b = _write(tmp_path, late)
    code, r, _ = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert any("alternate at an even pace" in w for w in r["warnings"])


def test_too_few_pairs_and_signals_warn(tmp_path, capsys):
    band = _band(carriers=CARRIERS[1:2])
    a, b = _write(tmp_path, _simulate(band, n_pairs=4))
    code, r, _ = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert code == 0
    assert any("too few for a distribution-free 95 % interval (need at least 6)" in w for w in r["warnings"])
    assert any("only 1 signal(s)" in w for w in r["warnings"])
    assert r["method"] == "paired-t"  # the headline falls back
    assert r["pooled"]["snr"]["hodges_lehmann"] is None


def test_raw_files_without_timestamps_pair_by_order(tmp_path, capsys):
    s = _simulate(n_pairs=6)
    paths = {"a": [], "b": []}
    for path, xs in (("a", s.a), ("b", s.b)):
        for i, x in enumerate(xs):
            p = tmp_path / f"{path}{i}.cu8"
            raw = np.empty(2 * x.size, np.uint8)
            raw[0::2] = np.rint(x.real * 127.5 + 127.5)
            raw[1::2] = np.rint(x.imag * 127.5 + 127.5)
            p.write_bytes(raw.tobytes())
            paths[path].append(str(p))
    code, r, _ = _json(capsys, ["compare", "--a", *paths["a"], "--b", *paths["b"], "--format", "cu8",
                                "--rate", str(FS), "--center", str(CENTER)])
    assert code == 0
    assert r["pairing"] == "by the order given"
    assert any("pairing the captures by the order given" in w for w in r["warnings"])
    assert r["snr_difference_ci_db"][0] <= onair.expected_snr_difference_db(s.band) <= r["snr_difference_ci_db"][1]


def test_two_dongles_simultaneous_with_tuning_error(tmp_path, capsys):
    da = synth.Dongle(gain_db=75.0, noise_figure_db=8.0, center_hz=CENTER)
    db = synth.Dongle(gain_db=75.0, noise_figure_db=8.0, center_hz=CENTER, freq_offset_ppm=-30.0)
    band = _band(dongle_a=da, dongle_b=db, loss_b_db=0.0)
    a, b = _write(tmp_path, _simulate(band, simultaneous=True, n_pairs=8))
    code, r, _ = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert code == 0
    assert r["pairing"] == "simultaneous, by timestamp"
    # -30 ppm of 14.1 MHz = -423 Hz (Dongle tuning model, dsp.synth)
    assert r["frequency_offset_hz"] == pytest.approx(-423.0, abs=FS / 128 / 2)
    assert r["signals_found"]["both"] == 3
    lo, hi = r["snr_difference_ci_db"]
    assert lo <= 0.0 <= hi
    assert r["classification"] == "no-significant-difference"


def test_noise_only_fails_cleanly(tmp_path, capsys):
    rng = np.random.default_rng(0)
    rx = synth.Dongle(gain_db=75.0, noise_figure_db=8.0)
    n = 5000
    xs = tuple(rx.receive(synth.thermal_noise(n, FS, 2900.0, rng), FS, rng) for _ in range(12))
    s = onair.OnAirSession(xs[:6], xs[6:], np.arange(6) * 1.0, np.arange(6) + 0.5, _band(), False)
    a, b = _write(tmp_path, s)
    code, r, err = _json(capsys, ["compare", "--a", *a, "--b", *b])
    assert code == 1
    assert r["snr_difference_db"] is None and r["classification"] == "undetermined"
    assert any("no signal stands above the noise in both paths" in w for w in r["warnings"])
