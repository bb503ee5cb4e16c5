"""rxbench excess: antenna noise over a 50-ohm load, and the knee fit of a ladder, on synthetic captures.

Truth comes from the synthetic bench (dsp.synth): an antenna of known noise temperature, passive
losses at T0 that add their own thermal noise (Bedrosian 1960), and a dongle of known gain and noise
figure. The expectations are the published formulas evaluated on that truth.
"""

import json
import math

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.recordings import write_sigmf
from rxbench.dsp.synth import CU8_QUANTISATION_POWER, Dongle, passive_loss, thermal_noise
from rxbench.dsp.units import K_B, T0_K

FS_HZ = 250e3
N = 100_000  # 0.4 s
CENTER_HZ = 14.1e6
NF_DB = 8.0
TRX_K = T0_K * (10 ** (NF_DB / 10) - 1)  # Te = T0*(F - 1) (IEEE)
TA_K = 100 * (T0_K + TRX_K) - TRX_K  # antenna noise 20 dB above the load's


def _fs_per_w(gain_db):
    # dBFS = dBm + gain_db (dsp.synth.Dongle)
    return 1e3 * 10 ** (gain_db / 10)


def _write(tmp_path, name, x_w, dongle, rng, *, datatype="cu8", rate_hz=FS_HZ, center_hz=CENTER_HZ,
           gain_db=None, extra=None):
    if datatype == "cu8":
        samples = dongle.receive_cu8(x_w, FS_HZ, rng)
    else:
        samples = dongle.receive(x_w, FS_HZ, rng)
    meta = {"gain_db": dongle.gain_db if gain_db is None else gain_db, **(extra or {})}
    path = write_sigmf(tmp_path / name, samples, sample_rate_hz=rate_hz, center_hz=center_hz,
                       datatype=datatype, extra=meta)
    return str(path)


def _run(capsys, *argv):
    code = main(["excess", *argv, "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out), captured.err


def test_antenna_over_load_cu8(tmp_path, capsys):
    # 8-bit captures: the quantisation noise of the converter adds to the dongle's own noise
    # (Bennett 1948: step**2/12 per rail), so it belongs to the truth of the "internal" noise.
    rng = np.random.default_rng(11)
    dongle = Dongle(gain_db=79.0, noise_figure_db=NF_DB, bits=8)
    ant = _write(tmp_path, "ant", thermal_noise(N, FS_HZ, TA_K, rng), dongle, rng, extra={"role": "antenna"})
    load = _write(tmp_path, "load", thermal_noise(N, FS_HZ, T0_K, rng), dongle, rng, extra={"role": "load"})
    r, err = _run(capsys, "--antenna", ant, "--load", load, "--rx-nf-db", str(NF_DB))
    g = _fs_per_w(dongle.gain_db)
    q = CU8_QUANTISATION_POWER / FS_HZ  # FS^2/Hz
    truth_db = 10 * math.log10((g * K_B * (TA_K + TRX_K) + q) / (g * K_B * (T0_K + TRX_K) + q))
    assert r["measured_excess_db"] == pytest.approx(truth_db, abs=0.15)
    assert r["excess_db"] == r["measured_excess_db"]
    assert 0 < r["u_measured_excess_db"] < 0.1
    # Ta from the excess: Ta = X*(T0 + Trx) - Trx; Fa = 10*log10(Ta/T0) (ITU-R P.372 definition).
    x = 10 ** (r["excess_db"] / 10)
    assert r["antenna_temperature_k"] == pytest.approx(x * (T0_K + TRX_K) - TRX_K, rel=1e-9)
    assert r["fa_db"] == pytest.approx(10 * math.log10(TA_K / T0_K), abs=0.25)
    # The SNR cost of 6 dB behind a 20 dB excess: 10*log10(1 + (L - 1)/X) = 0.128 dB [calc].
    six = [c for c in r["snr_cost"] if c["loss_db"] == 6.0][0]
    assert six["snr_degradation_db"] == pytest.approx(0.128, abs=0.01)
    assert r["p372_fa_db"]["residential"] == pytest.approx(72.5 - 27.7 * math.log10(14.1), abs=1e-9)  # ITU-R P.372
    assert r["ladder"] is None and r["warnings"] == []
    assert err == ""


def _ladder(tmp_path, rng, dongle, steps_db, *, datatype="cf32_le", label=None):
    argv = []
    for db in steps_db:
        x = passive_loss(thermal_noise(N, FS_HZ, TA_K, rng), FS_HZ, db, rng)
        path = _write(tmp_path, f"step{db:g}", x, dongle, rng, datatype=datatype,
                      extra={"role": "antenna", "attenuation_db": db})
        argv += ["--antenna-step", f"{(label or {}).get(db, db):g}={path}"]
    load = _write(tmp_path, "load", thermal_noise(N, FS_HZ, T0_K, rng), dongle, rng, datatype=datatype)
    return argv + ["--load", load]


def test_knee_fit_recovers_external_and_internal_noise(tmp_path, capsys):
    rng = np.random.default_rng(23)
    dongle = Dongle(gain_db=70.0, noise_figure_db=NF_DB, bits=None)
    argv = _ladder(tmp_path, rng, dongle, (0, 5, 10, 15, 20, 25, 30))
    r, _ = _run(capsys, *argv, "--rx-nf-db", str(NF_DB))
    g = _fs_per_w(dongle.gain_db)
    external_db = 10 * math.log10(g * K_B * TA_K)
    internal_db = 10 * math.log10(g * K_B * TRX_K)
    lad = r["ladder"]
    assert lad["external_density_dbfs_per_hz"] == pytest.approx(external_db, abs=0.3)
    assert lad["internal_density_dbfs_per_hz"] == pytest.approx(internal_db, abs=0.3)
    assert lad["residual_rms_db"] < 0.2
    assert len(lad["steps"]) == 7
    # Affordable loss from the truth, inverting dSNR = 10*log10[(Ta + (L-1)T0 + L*Trx)/(Ta + Trx)]
    # (REFERENCES.md): L = (r*(Ta + Trx) - Ta + T0)/(T0 + Trx).
    for cost, key in ((0.5, "snr_cost_0.5_db"), (1.0, "snr_cost_1_db")):
        rr = 10 ** (cost / 10)
        truth = 10 * math.log10((rr * (TA_K + TRX_K) - TA_K + T0_K) / (T0_K + TRX_K))
        assert r["loss_budget_db"][key] == pytest.approx(truth, abs=0.3)
    assert r["loss_budget_db"]["snr_cost_0.5_db"] < 30  # inside the ladder: no extrapolation warning
    assert not any("extrapolated" in w for w in r["warnings"])


def test_knee_without_noise_figure_still_gives_the_budget(tmp_path, capsys):
    rng = np.random.default_rng(5)
    dongle = Dongle(gain_db=70.0, noise_figure_db=NF_DB, bits=None)
    argv = _ladder(tmp_path, rng, dongle, (0, 10, 20, 30))
    r, _ = _run(capsys, *argv)
    assert r["fa_db"] is None and r["ladder"]["external_density_dbfs_per_hz"] is None
    assert r["excess_db"] == pytest.approx(20.0, abs=0.2)
    # 20 dB excess: L(0.5 dB) = 10*log10(1 + 100*(10**0.05 - 1)) = 11.20 dB [calc].
    assert r["loss_budget_db"]["snr_cost_0.5_db"] == pytest.approx(11.20, abs=0.25)


def test_short_ladder_warns_of_extrapolation(tmp_path, capsys):
    rng = np.random.default_rng(9)
    dongle = Dongle(gain_db=70.0, noise_figure_db=NF_DB, bits=None)
    argv = _ladder(tmp_path, rng, dongle, (0, 3, 6))
    r, err = _run(capsys, *argv, "--rx-nf-db", str(NF_DB))
    assert any("beyond the ladder's largest step" in w for w in r["warnings"])
    assert "extrapolated" in err


def test_mislabelled_ladder_is_flagged(tmp_path, capsys):
    # The 20 dB capture labelled 5 dB: the readings no longer follow the model.
    rng = np.random.default_rng(3)
    dongle = Dongle(gain_db=70.0, noise_figure_db=NF_DB, bits=None)
    argv = _ladder(tmp_path, rng, dongle, (0, 10, 20, 30), label={20: 5})
    r, _ = _run(capsys, *argv)
    assert r["ladder"]["residual_rms_db"] > 0.5
    assert any("depart from the lossy-network model" in w for w in r["warnings"])


def test_step_attenuation_from_metadata(tmp_path, capsys):
    rng = np.random.default_rng(2)
    dongle = Dongle(gain_db=70.0, noise_figure_db=NF_DB, bits=None)
    argv = _ladder(tmp_path, rng, dongle, (0, 10, 20))
    bare = [a.split("=", 1)[1] if a.count("=") and a[0].isdigit() else a for a in argv]
    r, _ = _run(capsys, *bare)
    assert [s["loss_db"] for s in r["ladder"]["steps"]] == [0, 10, 20]


def test_quiet_antenna_warns(tmp_path, capsys):
    # An antenna barely noisier than the load: every dB of loss costs about a dB.
    rng = np.random.default_rng(4)
    dongle = Dongle(gain_db=79.0, noise_figure_db=NF_DB, bits=None)
    ant = _write(tmp_path, "ant", thermal_noise(N, FS_HZ, 400.0, rng), dongle, rng, datatype="cf32_le")
    load = _write(tmp_path, "load", thermal_noise(N, FS_HZ, T0_K, rng), dongle, rng, datatype="cf32_le")
    r, _ = _run(capsys, "--antenna", ant, "--load", load)
    assert r["excess_db"] < 1.0
    assert any("only" in w and "above the dongle's own" in w for w in r["warnings"])
    three = [c for c in r["snr_cost"] if c["loss_db"] == 3.0][0]["snr_degradation_db"]
    assert 2.0 < three <= 3.0


def _pair(tmp_path, rng, **load_kw):
    dongle = Dongle(gain_db=79.0, noise_figure_db=NF_DB, bits=None)
    ant = _write(tmp_path, "ant", thermal_noise(N, FS_HZ, TA_K, rng), dongle, rng, datatype="cf32_le")
    load = _write(tmp_path, "load", thermal_noise(N, FS_HZ, T0_K, rng), dongle, rng, datatype="cf32_le",
                  **load_kw)
    return ant, load


@pytest.mark.parametrize(
    "load_kw, needle",
    [
        ({"rate_hz": 2 * FS_HZ}, "sample rate"),
        ({"center_hz": 7.1e6}, "centre frequency"),
        ({"gain_db": 30.0}, "gain"),
    ],
)
def test_captures_that_cannot_be_compared_are_refused(tmp_path, capsys, load_kw, needle):
    ant, load = _pair(tmp_path, np.random.default_rng(1), **load_kw)
    assert main(["excess", "--antenna", ant, "--load", load]) == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert captured.out == "" and len(lines) == 1 and needle in lines[0] and "ant" in lines[0]


def test_bad_usage_is_one_line(tmp_path, capsys):
    ant, load = _pair(tmp_path, np.random.default_rng(1))
    cases = [
        (["--antenna", ant], "--load"),
        ([], "--antenna"),
        (["--antenna", ant, "--load", str(tmp_path / "missing.sigmf-meta")], "missing"),
        ([f"--antenna-step=-3={ant}", "--load", load], ">= 0 dB"),
        (["--antenna", ant, "--load", load, "--rx-nf-db", "-1"], "--rx-nf-db"),
    ]
    for argv, needle in cases:
        assert main(["excess", *argv]) == 2, argv
        captured = capsys.readouterr()
        lines = captured.err.strip().splitlines()
        assert len(lines) == 1 and needle in lines[0], captured.err


def test_noise_figure_too_high_for_the_reading(tmp_path, capsys):
    # A cold "antenna" (0 K) reads Trx/(T0 + Trx) of the load; claiming NF 20 dB would make Ta < 0.
    rng = np.random.default_rng(6)
    dongle = Dongle(gain_db=79.0, noise_figure_db=NF_DB, bits=None)
    ant = _write(tmp_path, "ant", np.zeros(N, complex), dongle, rng, datatype="cf32_le")
    load = _write(tmp_path, "load", thermal_noise(N, FS_HZ, T0_K, rng), dongle, rng, datatype="cf32_le")
    assert main(["excess", "--antenna", ant, "--load", load, "--rx-nf-db", "20"]) == 1  # exit 1: unmeasurable
    assert "negative antenna temperature" in capsys.readouterr().err


def test_human_output(tmp_path, capsys):
    ant, load = _pair(tmp_path, np.random.default_rng(8))
    assert main(["excess", "--antenna", ant, "--load", load, "--rx-nf-db", "8"]) == 0
    out = capsys.readouterr().out
    assert "affordable loss" in out and "Fa" in out and "rxbench predict --antenna-excess-db" in out
