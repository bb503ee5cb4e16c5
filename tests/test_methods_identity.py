"""One method, two front ends: the same captures through the command-line flags and through a
session folder give identical ``to_dict()`` numbers (issue 13, "What must hold").

The captures are written once into a session folder (invented data, ``dsp.synth`` through a
linear simulated dongle, as in test_session.py); the command line is then pointed at the same
files, with flags saying what the session's metadata says. Every number of the two results is
compared exactly; only the warnings may differ (a session prefixes them with where they arose).
"""

from __future__ import annotations

import json
import math

import pytest

from test_session import analyse, lossy, noise_in, tone_in, write_capture

from rxbench.cli import main
from rxbench.output import json_safe
from rxbench.dsp.units import T0_K


def _numbers(value, path=""):
    """Every number (and None) in a JSON value, by its path; the warnings are left out."""
    out = {}
    if isinstance(value, dict):
        for k, v in value.items():
            if k != "warnings":
                out.update(_numbers(v, f"{path}.{k}"))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            out.update(_numbers(v, f"{path}[{i}]"))
    elif value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
        out[path] = value
    return out


def _same(cli: dict, session: dict, min_numbers: int = 12) -> None:
    """``cli`` as printed by --json; ``session`` the result's to_dict(), put through the same JSON
    view (infinite degrees of freedom print as null)."""
    a, b = _numbers(cli), _numbers(json.loads(json.dumps(json_safe(session))))
    assert a.keys() == b.keys()
    differ = {k: (a[k], b[k]) for k in a
              if not (a[k] == b[k] or (isinstance(a[k], float) and math.isnan(a[k]) and math.isnan(b[k])))}
    assert not differ
    assert len(a) > min_numbers  # the comparison covers the whole result, not a handful of keys


def _cli(capsys, *argv) -> dict:
    capsys.readouterr()
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_direct_loss_same_from_flags_and_session(tmp_path, capsys):
    swr = {"source_swr": 1.2, "load_swr": 1.5}
    thru = write_capture(tmp_path, "01-thru", tone_in(-90, 1), role="thru", seed=501, time_s=0, **swr)
    dut = write_capture(tmp_path, "02-dut", lossy(tone_in(-90, 2), 3.0, 2), role="dut", seed=502, time_s=5,
                        with_dut=True, **swr)
    after = write_capture(tmp_path, "03-thru", tone_in(-90, 3), role="thru", seed=503, time_s=10, **swr)
    (session,) = [x.to_dict() for x in analyse(tmp_path).losses]
    cli = _cli(capsys, "loss", "--thru", str(thru), "--dut", str(dut), "--thru-after", str(after),
               "--source-swr", "1.2", "--load-swr", "1.5")
    assert cli["method"] == session["method"] == "direct"
    assert cli["insertion_loss_db"] == pytest.approx(3.0, abs=0.2)  # the loss put in (common practice)
    assert any(c["name"].startswith("mismatch") and c["u_db"] > 0 for c in cli["budget"])
    _same(cli, session)


def _ladder_session(tmp_path, steps_db=(0.0, 2.0, 4.0, 6.0, 10.0), tolerance_db=0.1):
    paths = {}
    for i, db in enumerate(steps_db):
        paths[db] = write_capture(tmp_path, f"{i:02d}-step", tone_in(-80 - db, 10 + i), role="step", seed=500 + 10 + i,
                                  time_s=i, attenuation_db=db, attenuator_tolerance_db=tolerance_db)
    return paths


def test_substitution_loss_same_from_flags_and_session(tmp_path, capsys):
    steps = _ladder_session(tmp_path)
    dut = write_capture(tmp_path, "20-dut", lossy(tone_in(-80, 30), 3.0, 30), role="dut", seed=530, time_s=20,
                        with_dut=True, attenuator_tolerance_db=0.1)
    (session,) = [x.to_dict() for x in analyse(tmp_path).losses if x.method == "substitution"]
    cli = _cli(capsys, "loss", *(a for db, p in steps.items() for a in ("--step", f"{db:g}={p}")), "--dut", str(dut),
               "--atten-tolerance-db", "0.1")
    assert cli["insertion_loss_db"] == pytest.approx(3.0, abs=0.2)  # the loss put in (common practice)
    _same(cli, session)


def test_ladder_check_same_from_flags_and_session(tmp_path, capsys):
    steps = _ladder_session(tmp_path)
    (session,) = [x.to_dict() for x in analyse(tmp_path).ladders]
    cli = _cli(capsys, "ladder", *(a for db, p in steps.items() for a in ("--step", f"{db:g}={p}")))
    assert [s["nominal_db"] for s in cli["steps"]] == list(steps)
    assert max(abs(s["error_db"]) for s in cli["steps"]) < 0.1  # ideal steps read as ideal (common practice)
    _same(cli, session)


def test_excess_and_knee_same_from_flags_and_session(tmp_path, capsys):
    # Antenna noise at 4000 K over a 290 K load; 10 dB of attenuation (a passive loss at T0) for the knee.
    ant = write_capture(tmp_path, "01-antenna", noise_in(4000.0, 1), role="antenna", seed=501, time_s=0)
    step = write_capture(tmp_path, "02-antenna", lossy(noise_in(4000.0, 2), 10.0, 2), role="antenna", seed=502,
                         time_s=1, attenuation_db=10.0)
    load = write_capture(tmp_path, "03-load", noise_in(T0_K, 3), role="load", seed=503, time_s=2)
    (res,) = analyse(tmp_path).external_noise
    assert res.band == "10 m"
    session = res.to_dict()
    cli = _cli(capsys, "excess", "--antenna", str(ant), "--load", str(load), "--antenna-step", f"10={step}")
    assert cli["excess_db"] == cli["measured_excess_db"]
    assert cli["knee"]["steps_db"] == [0.0, 10.0]
    _same(cli, session)


def test_snr_cost_same_from_flags_and_session(tmp_path, capsys):
    # A direct loss, a noise figure (hot at ENR 15 dB: 290*(1 + 10**1.5) K), and the antenna over a load.
    write_capture(tmp_path, "01-thru", tone_in(-90.0, 1), role="thru", seed=801, time_s=0)
    write_capture(tmp_path, "02-dut", lossy(tone_in(-90.0, 2), 4.0, 2), role="dut", seed=802, time_s=1)
    write_capture(tmp_path, "03-cold", noise_in(T0_K, 3), role="cold", seed=803, time_s=2)
    write_capture(tmp_path, "04-hot", noise_in(T0_K * (1 + 10 ** 1.5), 4), role="hot", seed=804, time_s=3,
                  enr_db=15.0)
    write_capture(tmp_path, "05-antenna", noise_in(T0_K * 30, 5), role="antenna", seed=805, time_s=4)
    write_capture(tmp_path, "06-load", noise_in(T0_K, 6), role="load", seed=806, time_s=5)
    (res,) = analyse(tmp_path).snr_cost
    session = res.to_dict()
    assert session["predicted"] is not None  # the measured noise figure gives the P.372 predictions
    cli = _cli(capsys, "predict", "--loss-db", repr(session["loss_db"]), "--loss-u-db", repr(session["u_loss_db"]),
               "--antenna-excess-db", repr(session["excess_db"]),
               "--antenna-excess-u-db", repr(session["u_excess_db"]),
               "--rx-nf-db", repr(session["receiver_noise_figure_db"]), "--frequency", repr(session["frequency_hz"]))
    # The method's own keys; the loss's provenance (where it was measured) differs by nature.
    keys = set(session) - {"loss_source", "loss_frequency_hz"}
    _same({k: cli[k] for k in keys}, {k: session[k] for k in keys})


# ----------------------------------------------------------------------------------- noise source

ENR_DB = 15.0
T_HOT_K = T0_K * (1 + 10 ** (ENR_DB / 10))  # a source of 15 dB ENR when on (ENR = T_hot/T0 - 1)


def _noise_pairs(folder, centers, *, loss_db=None, repeats=1):
    """Hot/cold captures at each centre (and through a passive loss at T0), named in the order a
    session lists them; returns the nf flags for the same files in that order."""
    argv, seed = [], 900
    for c in centers:
        for rep in range(repeats):
            for with_dut in (False, True) if loss_db is not None else (False,):
                for role, temp in (("cold", T0_K), ("hot", T_HOT_K)):
                    x = noise_in(temp, seed)
                    if with_dut:
                        x = lossy(x, loss_db, seed)
                    name = f"{c / 1e6:.3f}-{rep}-{'dut' if with_dut else 'ref'}-{role}"
                    path = write_capture(folder, name, x, role=role, seed=seed + 1, time_s=seed, center_hz=c,
                                         enr_db=ENR_DB, with_dut=with_dut)
                    argv += [f"--{role}{'-dut' if with_dut else ''}", str(path)]
                    seed += 10
    return argv


def test_y_factor_same_from_flags_and_session(tmp_path, capsys):
    argv = _noise_pairs(tmp_path, [28.4e6], repeats=2)
    a = analyse(tmp_path)
    (session,) = [r.to_dict() for r in a.noise_source]
    cli = _cli(capsys, "nf", *argv, "--enr-db", repr(ENR_DB))
    # The dongle's noise figure is 6.0 dB (test_session.DONGLE; Y-factor, cold at T0: Pozar [from memory]).
    assert cli["method"] == "y-factor" and abs(cli["noise_figure_db"] - 6.0) < 0.15 + cli[
        "noise_figure_expanded_uncertainty_db"]
    assert len(cli["bands"][0]["captures"]["hot"]) == 2  # repeats at one tuning are pooled
    assert [b.to_dict() for b in a.noise_figure] == session["bands"]  # the session's entries are the method's bands
    _same(cli, session)


def test_dut_curve_same_from_flags_and_session(tmp_path, capsys):
    # Two tunings one usable band minus one sub-band apart (the sweep planner's spacing), a 3 dB
    # passive DUT at T0: its loss across the stitched curve, and its noise figure equal to its loss
    # (Friis 1944; Bedrosian 1960).
    argv = _noise_pairs(tmp_path, [28.4e6, 28.575e6], loss_db=3.0)
    a = analyse(tmp_path)
    (session,) = [r.to_dict() for r in a.noise_source]
    cli = _cli(capsys, "nf", *argv, "--enr-db", repr(ENR_DB))
    assert cli["insertion_loss_db"] == pytest.approx(3.0, abs=0.2)
    assert {row["tuned_hz"] for row in cli["curve"]} == {28.4e6, 28.575e6}
    assert cli["per_band"] and cli["per_band_noise_figure"]  # 10 m holds the curve
    assert a.per_band == session["per_band"] and a.per_band_noise_figure == session["per_band_noise_figure"]
    _same(cli, session)


def test_gain_method_same_from_flags_and_session(tmp_path, capsys):
    # A generator tone of -100 dBm with its 50-ohm source's T0 noise into the dongle of noise figure
    # 6.0 dB: C/N0 = -100 + 173.975 - 6.0 dB-Hz, NF = P_in - C/N0 - kT0 (REFERENCES.md, gain method).
    # (The source's noise and the dongle's own come from different seeds: the same seed would make
    # them one waveform, added coherently.)
    thru = write_capture(tmp_path, "01-thru", tone_in(-100.0, 1, duration_s=0.4), role="thru", seed=101,
                         generator_dbm=-100.0)
    a = analyse(tmp_path)
    (session,) = [g.to_dict() for g in a.gain_method]
    assert any("nominal -100 dBm" in w for w in session["warnings"])  # the level is the generator's word
    cli = _cli(capsys, "nf", "--tone", str(thru), "--level-dbm", "-100")
    assert cli["method"] == "gain" and cli["noise_figure_db"] == cli["gain_method"]["noise_figure_db"]
    assert abs(cli["noise_figure_db"] - 6.0) < 0.2 + cli["gain_method"]["expanded_uncertainty_db"]
    _same(cli["gain_method"], session, min_numbers=9)  # every number of this small result
