"""Sessions: finding the captures of a folder and running every method their roles support.

Sessions are built here by writing SigMF captures directly (``bench.recordings.write_sigmf``) from
``dsp.synth`` signals with a known truth (invented data). The checks rest on physical invariants
and published formulas: a known attenuation is recovered as insertion loss (common practice;
STYLE.md "physical invariants"); the substitution method is immune to the receiver's compression
(Kaylie, IEEE Trans. Instrum. Meas. 15(4), 1966, from memory); the Y-factor noise figure
F = (ENR - Y*(T_cold/T0 - 1))/(Y - 1) (Pozar, Microwave Engineering, from memory); a passive loss at
T0 has F = L (Friis 1944; Bedrosian, RAND 1960); the excess X = (Ta + Trx)/(T0 + Trx) and the SNR
cost 10*log10(1 + (L - 1)/X) (ITU-R P.372; REFERENCES.md "SNR cost of a loss").
"""

from __future__ import annotations

import datetime as dt
import json
import math

import numpy as np
import pytest

from rxbench import session as sess
from rxbench.cli import main
from rxbench.errors import UsageError
from rxbench.recordings import SigmfWriter, write_sigmf
from rxbench.dsp import synth
from rxbench.dsp.loss import mismatch_components
from rxbench.dsp.units import T0_K, power_from_db, w_from_dbm

FS = 250e3
CENTER = 28.4e6
#: A linear dongle without quantisation: its noise figure is then the whole truth.
DONGLE = synth.Dongle(gain_db=80.0, noise_figure_db=6.0, bits=None)
T_START = dt.datetime(2026, 3, 1, 10, 0, 0, tzinfo=dt.timezone.utc)


def write_capture(folder, name, x_w, *, role, seed, time_s=0.0, rate=FS, center_hz=CENTER, dongle=DONGLE,
                  **extra):
    """One capture through ``dongle`` into ``folder/name`` (cf32, so no quantisation)."""
    samples = dongle.receive(x_w, rate, np.random.default_rng(seed))
    when = (T_START + dt.timedelta(seconds=time_s)).isoformat().replace("+00:00", "Z")
    return write_sigmf(folder / name, samples, sample_rate_hz=rate, center_hz=center_hz, datatype="cf32_le",
                       extra={"role": role, **extra}, datetime=when)


def tone_in(level_dbm, seed, *, duration_s=0.15, rate=FS, offset_hz=20e3):
    """A generator tone with the thermal noise of its 50-ohm source, sqrt(W)."""
    rng = np.random.default_rng(seed)
    n = int(duration_s * rate)
    return synth.tone(n, rate, power_w=w_from_dbm(level_dbm), offset_hz=offset_hz,
                      phase_rad=rng.uniform(0, 2 * np.pi)) + synth.thermal_noise(n, rate, T0_K, rng)


def lossy(x, loss_db, seed, rate=FS):
    """``x`` through a passive loss at T0 (its own noise from a stream apart from the source's)."""
    return synth.passive_loss(x, rate, loss_db, np.random.default_rng(seed + 100_000))


def noise_in(temperature_k, seed, *, duration_s=0.1, rate=FS):
    return synth.thermal_noise(int(duration_s * rate), rate, temperature_k, np.random.default_rng(seed))


def analyse(folder):
    return sess.analyze_session(sess.open_session(folder))


# --------------------------------------------------------------------------------------------
# Opening a session


def test_open_session_reads_roles_and_sorts_by_time(tmp_path):
    write_capture(tmp_path, "b-thru", tone_in(-90, 1), role="thru", seed=1, time_s=0, attenuation_db=10.0)
    write_capture(tmp_path, "a-dut", lossy(tone_in(-90, 2), 3.0, 2), role="dut", seed=2, time_s=5,
                  attenuation_db=10.0, with_dut=True, devices=2)
    write_capture(tmp_path, "c-hot", noise_in(5000, 3), role="hot", seed=3, time_s=9, enr_db=15.0, with_dut=True)
    (tmp_path / "plan.toml").write_text('title = "x"\n')
    s = sess.open_session(tmp_path)
    assert [e.name for e in s.entries] == ["b-thru", "a-dut", "c-hot"]
    thru, dut, hot = s.entries
    assert (thru.role, thru.attenuation_db, thru.through_dut) == ("thru", 10.0, False)
    assert (dut.role, dut.through_dut, dut.n_devices) == ("dut", True, 2)
    assert (hot.role, hot.enr_db, hot.through_dut) == ("hot", 15.0, True)
    assert hot.time_s - thru.time_s == pytest.approx(9.0)
    assert s.plan_path.name == "plan.toml"
    assert s.incomplete == () and s.skipped == ()


def test_incomplete_unreadable_and_roleless_captures_are_listed_and_skipped(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90, 1), role="thru", seed=1)
    # An interrupted capture: kept as .partial, marked incomplete.
    w = SigmfWriter(tmp_path / "02-dut", sample_rate_hz=FS, datatype="cf32_le", extra={"role": "dut"})
    w.write(np.zeros(1000, np.complex64))
    kept = w.abandon(keep_partial=True)
    assert ".partial" in kept.name
    write_capture(tmp_path, "03-norole", tone_in(-90, 3), role="thru", seed=3)
    meta = tmp_path / "03-norole.sigmf-meta"
    doc = json.loads(meta.read_text())
    del doc["global"]["rxbench:role"]
    meta.write_text(json.dumps(doc))
    (tmp_path / "04-broken.sigmf-meta").write_text("{ not json")
    # Reports and recordings moved aside by --redo are not part of the session.
    for sub in ("report", "report-2", "replaced"):
        (tmp_path / sub).mkdir()
        write_capture(tmp_path / sub, "99-thru", tone_in(-90, 9), role="thru", seed=9)
    s = sess.open_session(tmp_path)
    assert [e.name for e in s.entries] == ["01-thru"]
    assert [p.name for p in s.incomplete] == [kept.name]
    skipped = {p.name: why for p, why in s.skipped}
    assert "no rxbench:role" in skipped["03-norole.sigmf-meta"]
    assert "04-broken.sigmf-meta" in skipped
    text = " ".join(s.warnings)
    assert "incomplete" in text and "03-norole" in text and "04-broken" in text


def test_bad_metadata_value_names_the_key(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90, 1), role="thru", seed=1)
    write_capture(tmp_path, "02-thru", tone_in(-90, 2), role="thru", seed=2, attenuation_db="ten")
    write_capture(tmp_path, "03-hot", noise_in(5000, 3), role="hot", seed=3, enr_db=1e300)
    s = sess.open_session(tmp_path)
    (path, why), (path3, why3) = s.skipped
    assert path.name == "02-thru.sigmf-meta" and "rxbench:attenuation_db" in why
    assert path3.name == "03-hot.sigmf-meta" and why3 == "rxbench:enr_db: an ENR must be >= -10 dB and <= 60 dB, got 1e+300"


def test_a_folder_that_is_not_a_session_is_a_clear_error(tmp_path, capsys):
    with pytest.raises(UsageError, match="no such session folder"):
        sess.open_session(tmp_path / "missing")
    (tmp_path / "file.txt").write_text("x")
    with pytest.raises(UsageError, match="is a file"):
        sess.open_session(tmp_path / "file.txt")
    with pytest.raises(UsageError, match="no usable capture"):
        sess.open_session(tmp_path)
    # Through the command line: one line on stderr, exit code 2, no traceback.
    assert main(["analyze", str(tmp_path / "missing")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no such session folder" in err and "Traceback" not in err


# --------------------------------------------------------------------------------------------
# Tone methods


def test_direct_loss_recovers_a_known_attenuation_and_removes_drift(tmp_path):
    # The generator creeps up 0.2 dB over the session; thru before, device, thru after.
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=11, time_s=0)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-89.9, 2), 3.0, 2), role="dut", seed=12, time_s=10)
    write_capture(tmp_path, "03-thru", tone_in(-89.8, 3), role="thru", seed=13, time_s=20)
    a = analyse(tmp_path)
    (loss,) = [x.to_dict() for x in a.losses]
    assert loss["method"] == "direct"
    assert loss["captures"] == {"thru": ["01-thru"], "dut": ["02-dut"], "thru_after": ["03-thru"]}
    assert loss["drift_db"] == pytest.approx(0.2, abs=0.03)
    # A 3 dB passive attenuation is read back as 3 dB (physical invariant), within U.
    assert abs(loss["insertion_loss_db"] - 3.0) <= loss["expanded_uncertainty_db"]
    assert loss["expanded_uncertainty_db"] < 0.1
    assert loss["per_device_db"] == loss["insertion_loss_db"]
    # Without a ladder the dongle's linearity is not assessed, and the budget says so.
    lin = [c for c in loss["budget"] if c["name"] == "dongle linearity"][0]
    assert "not assessed" in lin["note"]
    # Each capture's entry carries the time-resolved and band keys of `rxbench inspect --json`.
    for entry in a.captures:
        assert entry["tone"]["on_fraction"] >= 0.95 and isinstance(entry["tone"]["width_hz"], float)
        for key in ("time_range_db", "band_range_db", "zero_fraction", "density_dbfs_per_hz", "u_density_db"):
            assert isinstance(entry["noise"][key], float)


def test_mismatch_terms_from_the_plan_enter_the_loss_budget(tmp_path):
    # The SWRs a plan's [match] table records with the captures give the first-order mismatch terms
    # of Harris & Warner (REFERENCES.md; dsp.loss.mismatch_components is checked against them in
    # test_ladder), added in quadrature to the readings' uncertainty (GUM 5.1.2).
    swr = {"source_swr": 1.1, "load_swr": 2.0, "dut_swr": 1.5}
    for folder, extra in ((tmp_path / "plain", {}), (tmp_path / "matched", swr)):
        folder.mkdir()
        write_capture(folder, "01-thru", tone_in(-90.0, 1), role="thru", seed=11, time_s=0, **extra)
        write_capture(folder, "02-dut", lossy(tone_in(-90.0, 2), 3.0, 2), role="dut", seed=12, time_s=10, **extra)
    (plain,) = [x.to_dict() for x in analyse(tmp_path / "plain").losses]
    (matched,) = [x.to_dict() for x in analyse(tmp_path / "matched").losses]
    assert matched["insertion_loss_db"] == pytest.approx(plain["insertion_loss_db"], abs=1e-12)
    names = [c["name"] for c in matched["budget"]]
    expected = mismatch_components(1.1, 2.0, 1.5, matched["insertion_loss_db"])
    assert [c.name for c in expected] == [n for n in names if n.startswith("mismatch")]
    u_mismatch = math.sqrt(sum(c.u ** 2 for c in expected))
    assert matched["u_db"] == pytest.approx(math.hypot(plain["u_db"], u_mismatch), rel=1e-6)
    # Without SWRs the budget keeps a line that says mismatch was not assessed, and where to give it.
    (line,) = [c for c in plain["budget"] if c["name"].startswith("mismatch")]
    assert line["u_db"] == 0 and "[match] source_swr" in line["note"]


def test_bad_swr_in_metadata_names_the_key(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=11, load_swr=0.5)
    with pytest.raises(UsageError, match=r"rxbench:load_swr: an SWR must be >= 1 and <= 100, got 0.5"):
        sess.open_session(tmp_path)


def test_back_to_back_pair_halves_the_loss(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=21)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90.0, 2), 1.0, 2), role="dut", seed=22, devices=2)
    (loss,) = [x.to_dict() for x in analyse(tmp_path).losses]
    assert loss["n_devices"] == 2
    assert loss["per_device_db"] == pytest.approx(loss["insertion_loss_db"] / 2)
    assert abs(loss["per_device_db"] - 0.5) <= loss["expanded_uncertainty_per_device_db"]


def test_different_sample_rates_are_not_compared(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=31)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90.0, 2, rate=240e3), 3.0, 2, rate=240e3), role="dut",
                  seed=32, rate=240e3)
    a = analyse(tmp_path)
    assert a.losses == []
    assert any("sample rate" in w and "01-thru" in w for w in a.warnings)


def test_different_gains_are_not_compared(tmp_path):
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=41, gain_db=30.0)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90.0, 2), 3.0, 2), role="dut", seed=42, gain_db=20.0)
    a = analyse(tmp_path)
    assert a.losses == []
    assert any("gain" in w for w in a.warnings)


def test_substitution_is_immune_to_compression_where_direct_is_not(tmp_path):
    # A dongle that compresses near full scale (Rapp, saturation at 0 dBFS); a tone at -4 dBFS.
    squash = synth.Dongle(gain_db=80.0, noise_figure_db=6.0, bits=None, compression_dbfs=0.0)
    for i, att in enumerate((0, 2, 4, 6, 8, 10, 14)):
        x = tone_in(-84.0, 100 + i)
        if att:
            x = lossy(x, float(att), 200 + i)
        write_capture(tmp_path, f"{i:02d}-step", x, role="step", seed=300 + i, time_s=i, dongle=squash,
                      attenuation_db=float(att), attenuator_tolerance_db=0.02)
    write_capture(tmp_path, "10-thru", tone_in(-84.0, 7), role="thru", seed=310, time_s=10, dongle=squash,
                  attenuation_db=0.0)
    write_capture(tmp_path, "11-dut", lossy(tone_in(-84.0, 8), 3.0, 8), role="dut", seed=311, time_s=11,
                  dongle=squash, attenuation_db=0.0)
    a = analyse(tmp_path)
    (lad,) = [x.to_dict() for x in a.ladders]
    assert lad["steps"][0]["region"] == "compressed" and lad["compression_db"] > 0.1
    by = {x["method"]: x for x in [x.to_dict() for x in a.losses]}
    sub, direct = by["substitution"], by["direct"]
    assert sub["bracket_db"] == [2.0, 4.0]
    assert abs(sub["insertion_loss_db"] - 3.0) <= sub["expanded_uncertainty_db"]
    # The thru is compressed more than the device reading: the direct loss comes out short, and
    # the analysis says why rather than counting it as linear.
    assert direct["insertion_loss_db"] < 3.0 - 0.1
    assert any("not show the dongle linear" in w for w in a.warnings)
    # The stated attenuator tolerance enters the substitution budget (rectangular, a/sqrt(3)).
    att = [c for c in sub["budget"] if c["name"] == "attenuator setting (ladder)"][0]
    assert att["u_db"] == pytest.approx(0.02 / math.sqrt(3))


def test_a_step_re_read_after_the_dut_puts_the_drift_in_the_substitution_budget(tmp_path):
    # The generator creeps up 0.3 dB between the ladder and a re-read of its 4 dB step after the
    # DUT. The change seen bounds the drift in the DUT's reading: a rectangular term of that
    # half-width (GUM 4.3.7), and a warning, since 0.3 dB is far beyond the readings' scatter.
    for i, att in enumerate((0, 2, 4, 6)):
        write_capture(tmp_path, f"{i:02d}-step", lossy(tone_in(-90.0, 10 + i), float(att), 10 + i) if att
                      else tone_in(-90.0, 10), role="step", seed=20 + i, time_s=i, attenuation_db=float(att))
    write_capture(tmp_path, "10-dut", lossy(tone_in(-89.85, 30), 3.0, 30), role="dut", seed=31, time_s=10)
    a_plain = analyse(tmp_path)
    (sub,) = [x for x in [x.to_dict() for x in a_plain.losses] if x["method"] == "substitution"]
    (line,) = [c for c in sub["budget"] if c["name"] == "generator drift"]
    assert line["u_db"] == 0 and "not assessed" in line["note"]
    write_capture(tmp_path, "11-step-again", lossy(tone_in(-89.7, 40), 4.0, 40), role="step", seed=41, time_s=20,
                  attenuation_db=4.0)
    a = analyse(tmp_path)
    (sub,) = [x for x in [x.to_dict() for x in a.losses] if x["method"] == "substitution"]
    (line,) = [c for c in sub["budget"] if c["name"] == "generator drift"]
    assert line["half_width_db"] == pytest.approx(0.3, abs=0.03)
    assert line["u_db"] == pytest.approx(line["half_width_db"] / math.sqrt(3))
    assert abs(sub["insertion_loss_db"] - 3.0) <= sub["expanded_uncertainty_db"]
    assert any("4 dB step reads +0.3" in w for w in a.warnings)


def test_dut_outside_the_ladder_is_not_extrapolated(tmp_path):
    for i, att in enumerate((0, 1, 2)):
        x = tone_in(-90.0, 400 + i)
        if att:
            x = lossy(x, float(att), 410 + i)
        write_capture(tmp_path, f"{i:02d}-step", x, role="step", seed=420 + i, attenuation_db=float(att))
    write_capture(tmp_path, "10-dut", lossy(tone_in(-90.0, 9), 6.0, 9), role="dut", seed=430)
    a = analyse(tmp_path)
    assert not [x for x in [x.to_dict() for x in a.losses] if x["method"] == "substitution"]
    assert any("extrapolated" in w for w in a.warnings)


# --------------------------------------------------------------------------------------------
# Noise source


def _hot_cold(folder, center, seed, *, loss=None, enr_db=15.0):
    t_hot = T0_K * (power_from_db(enr_db) + 1.0)
    for role, temp in (("cold", T0_K), ("hot", t_hot)):
        for with_dut in ((False, True) if loss is not None else (False,)):
            x = noise_in(temp, seed)
            if with_dut:
                x = lossy(x, loss, seed + 1)
            name = f"{role}{'-dut' if with_dut else ''}-{center / 1e6:.1f}"
            write_capture(folder, name, x, role=role, seed=seed + 2, center_hz=center, enr_db=enr_db,
                          with_dut=with_dut)
            seed += 10


def test_y_factor_noise_figure_and_loss_across_frequency(tmp_path):
    def loss_db(f):  # rises across each capture: 2 dB at the low edge to 4 dB at the high edge
        return 3.0 + np.asarray(f) / 125e3

    _hot_cold(tmp_path, 28.0e6, 500, loss=loss_db)
    _hot_cold(tmp_path, 28.2e6, 600, loss=loss_db)
    a = analyse(tmp_path)
    assert len(a.noise_figure) == 2
    for n in a.noise_figure:
        # The receiver is the dongle alone: NF 6.0 dB (Y-factor, cold at T0).
        assert abs(n.noise_figure_db - 6.0) <= n.expanded_uncertainty_db
        assert n.expanded_uncertainty_db < 0.3
    curve = a.loss_vs_frequency
    f = np.array(curve["frequency_hz"])
    assert np.all(np.diff(f) > 0) and curve["has_loss"]
    offset = f - np.where(f < 28.1e6, 28.0e6, 28.2e6)
    truth = 3.0 + offset / 125e3
    loss = np.array(curve["insertion_loss_db"])
    u = np.array(curve["u_insertion_loss_db"])
    within = np.abs(loss - truth) <= 2 * u
    assert within.mean() >= 0.8 and np.all(np.abs(loss - truth) <= 4 * u)
    # A passive loss at T0 has a noise figure equal to its loss (Friis 1944; Bedrosian 1960).
    dnf = np.array(curve["dut_noise_figure_db"])
    udnf = np.array(curve["u_dut_noise_figure_db"])
    assert np.mean(np.abs(dnf - truth) <= 2 * udnf) >= 0.8


def test_a_sub_band_without_excess_is_left_out_not_the_whole_noise_figure(tmp_path):
    # A broad interferer (a modulated signal 6 kHz wide, not a line: a narrow carrier would be left out
    # of the band powers, tests/test_nf_real_signals.py) in the cold capture lifts one sub-band above
    # the hot reading: Y <= 1 has no noise figure (Pozar, from memory), so that sub-band is left out
    # with a warning while the others, and the DUT's loss in them, stand.
    enr_db = 15.0
    t_hot = T0_K * (power_from_db(enr_db) + 1.0)
    n = int(0.1 * FS)
    # 2.8 excess-powers of its 28 kHz sub-band, within 62-78 kHz (+/-3 sigma of the hump)
    hum = synth.broad_hump(n, FS, power=1e-14, center_hz=70e3, width_hz=6e3, rng=np.random.default_rng(70))
    for role, temp, extra in (("cold", T0_K, hum), ("hot", t_hot, 0.0)):
        for i, with_dut in enumerate((False, True)):
            x = noise_in(temp, 40 + i) + extra
            if with_dut:
                x = lossy(x, 3.0, 50 + i)
            write_capture(tmp_path, f"{role}{'-dut' if with_dut else ''}", x, role=role, seed=60 + i + 2 * len(role),
                          enr_db=enr_db, with_dut=with_dut)
    a = analyse(tmp_path)
    (nf,) = a.noise_figure
    sub = nf.sub_bands()
    bad = [i for i, v in enumerate(sub["noise_figure_db"]) if math.isnan(v)]
    assert bad == [6]  # 56.25 .. 84.375 kHz holds the 70 kHz interferer
    assert any("1 sub-band(s) the hot reading is not above" in w for w in a.warnings)
    assert nf.insertion_loss_db is not None
    curve = a.loss_vs_frequency
    assert len(curve["frequency_hz"]) == sess.N_SUB_BANDS - 1
    assert all(v is not None and math.isfinite(v) for v in curve["noise_figure_db"] + curve["insertion_loss_db"])
    assert all(abs(v - 3.0) < 0.6 for v in curve["insertion_loss_db"])


def test_noise_figure_needs_an_enr(tmp_path):
    write_capture(tmp_path, "cold", noise_in(T0_K, 1), role="cold", seed=1)
    write_capture(tmp_path, "hot", noise_in(5000.0, 2), role="hot", seed=2)
    a = analyse(tmp_path)
    assert a.noise_figure == [] and a.loss_vs_frequency is None
    assert any("no ENR" in w for w in a.warnings)


# --------------------------------------------------------------------------------------------
# External noise and the SNR cost


def test_excess_and_snr_cost_match_the_formulas(tmp_path):
    fa_db, loss = 15.0, 4.0
    ta = T0_K * power_from_db(fa_db)
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=701, time_s=0)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90.0, 2), loss, 2), role="dut", seed=702, time_s=1)
    write_capture(tmp_path, "03-antenna", noise_in(ta, 33), role="antenna", seed=733, time_s=2)
    write_capture(tmp_path, "04-antenna-dut", lossy(noise_in(ta, 4), loss, 4), role="antenna", seed=704,
                  time_s=3, with_dut=True)
    write_capture(tmp_path, "05-antenna-6", lossy(noise_in(ta, 5), 6.0, 5), role="antenna", seed=705,
                  time_s=4, attenuation_db=6.0)
    write_capture(tmp_path, "06-load", noise_in(T0_K, 36), role="load", seed=736, time_s=5)
    a = analyse(tmp_path)
    trx = DONGLE.noise_temperature_k
    x_true = (ta + trx) / (T0_K + trx)
    (ex,) = a.external_noise
    assert ex.band == "10 m"
    assert abs(ex.excess_db - 10 * math.log10(x_true)) <= ex.expanded_uncertainty_db
    assert ex.knee is not None and ex.knee["residual_rms_db"] < 0.2
    (cost,) = a.snr_cost
    true_cost = 10 * math.log10(1 + (power_from_db(loss) - 1) / x_true)
    assert abs(cost.snr_degradation_db - true_cost) <= cost.expanded_uncertainty_db
    assert abs(cost.through_dut_db - true_cost) <= cost.expanded_uncertainty_through_dut_db
    # Far less than the loss itself: the band noise dominates.
    assert cost.snr_degradation_db < loss / 2
    assert cost.predicted is None  # no receiver noise figure measured: no ITU predictions


def test_excess_without_a_loss_reports_no_cost(tmp_path):
    write_capture(tmp_path, "03-antenna", noise_in(3000.0, 3), role="antenna", seed=801)
    write_capture(tmp_path, "06-load", noise_in(T0_K, 6), role="load", seed=802)
    a = analyse(tmp_path)
    assert len(a.external_noise) == 1 and a.snr_cost == []
    assert any("no loss measured" in w for w in a.warnings)


def test_stated_excess_uncertainty_covers_the_truth_about_95_percent_of_the_time():
    # Coverage of U = 2u over independent repeats (GUM 6.2: k = 2 for about 95 %).
    from rxbench.reading import read_capture
    from rxbench.recordings import memory_capture

    ta = T0_K * power_from_db(15.0)
    trx = DONGLE.noise_temperature_k
    x_true = 10 * math.log10((ta + trx) / (T0_K + trx))
    hits = []
    for s in range(40):
        rng = np.random.default_rng(9000 + s)
        readings = [read_capture(memory_capture(DONGLE.receive(noise_in(t, 9100 + 2 * s + i), FS, rng), FS),
                                 want_tone=False).floor for i, t in enumerate((ta, T0_K))]
        x = 10 * math.log10(readings[0].density / readings[1].density)
        u = 10 / math.log(10) * math.hypot(*(r.u_density / r.density for r in readings))
        hits.append(abs(x - x_true) <= 2 * u)
    assert 0.85 <= np.mean(hits) <= 1.0


def _curve_analysis(freqs, losses, width):
    a = sess.Analysis(session=None)
    a.loss_vs_frequency = {"frequency_hz": list(freqs), "width_hz": [width] * len(freqs),
                           "insertion_loss_db": list(losses), "u_insertion_loss_db": [0.1] * len(freqs),
                           "has_loss": True}
    return a


def test_loss_at_interpolates_but_never_extrapolates():
    a = _curve_analysis([28.00e6, 28.01e6, 28.02e6], [4.0, 5.0, 6.0], 10e3)
    assert sess.loss_at(a, 28.001e6, 0.0)[0] == pytest.approx(4.0)  # inside a sub-band
    assert sess.loss_at(a, 28.015e6, 0.0)[0] == pytest.approx(5.5)  # between neighbours
    assert sess.loss_at(a, 27.99e6, 0.0) is None
    assert sess.loss_at(a, 28.03e6, 0.0) is None
    gap = _curve_analysis([28.0e6, 29.0e6], [4.0, 5.0], 10e3)
    assert sess.loss_at(gap, 28.5e6, 0.0) is None  # a gap wider than two sub-bands


@pytest.mark.parametrize("f, name", [(28.4e6, "10 m"), (14.2e6, "20 m"), (3.6e6, "80 m"), (30.0e6, "30.000 MHz"),
                                     (None, "unknown frequency")])
def test_band_name(f, name):
    # Band edges as in the IARU band plans (common practice).
    assert sess.band_name(f) == name


def test_a_bad_capture_is_skipped_with_its_reason_and_the_rest_analysed(tmp_path):
    """Its data a folder, core:header_bytes negative or not a number: listed as skipped, named, the
    rest of the session analysed. (core:header_bytes is a capture-segment field in the SigMF
    specification, so it is set there.)"""
    write_capture(tmp_path, "01-thru", tone_in(-90, 1), role="thru", seed=1, attenuation_db=10.0)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90, 2), 3.0, 2), role="dut", seed=2, time_s=5,
                  attenuation_db=10.0, with_dut=True)
    for name, header in (("03-folder", None), ("04-negative", -8), ("05-text", "x")):
        write_capture(tmp_path, name, tone_in(-90, 3), role="thru", seed=3, attenuation_db=10.0)
        meta = tmp_path / f"{name}.sigmf-meta"
        if header is None:
            (tmp_path / f"{name}.sigmf-data").unlink()
            (tmp_path / f"{name}.sigmf-data").mkdir()
        else:
            doc = json.loads(meta.read_text())
            doc["captures"][0]["core:header_bytes"] = header
            meta.write_text(json.dumps(doc))
    a = analyse(tmp_path)
    skipped = {p.name: why for p, why in a.session.skipped}
    assert skipped["03-folder.sigmf-meta"] == "the recording's data file is a folder, not a capture"
    assert "core:header_bytes" in skipped["04-negative.sigmf-meta"] and "-8" in skipped["04-negative.sigmf-meta"]
    assert "core:header_bytes" in skipped["05-text.sigmf-meta"] and "'x'" in skipped["05-text.sigmf-meta"]
    assert [e.name for e in a.session.entries] == ["01-thru", "02-dut"]
    [loss] = [x.to_dict() for x in a.losses]
    assert loss["insertion_loss_db"] == pytest.approx(3.0, abs=0.3)
