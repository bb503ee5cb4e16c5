"""rxbench predict: SNR cost of a loss from the ITU-R P.372 model or a measured antenna-noise excess."""

import json
import math

import pytest

from rxbench.cli import main

# ITU-R P.372 median man-made noise, Fam = c - d*log10(f/MHz) dB above kT0b (coefficients as
# tabulated in REFERENCES.md), and the galactic line 52.0 - 23.0*log10(f/MHz).
P372 = {"city": (76.8, 27.7), "residential": (72.5, 27.7), "rural": (67.2, 27.7),
        "quiet-rural": (53.6, 28.6)}
GALACTIC = (52.0, 23.0)
HF_MHZ = (1.8, 3.5, 5.3, 7.0, 10.1, 14.0, 18.068, 21.0, 24.89, 28.0)


def _expected(environment, f_mhz, loss_db, nf_db, galactic=False):
    """The published formulas written out independently of dsp.environment."""
    c, d = P372[environment]
    ta_over_t0 = 10 ** ((c - d * math.log10(f_mhz)) / 10)
    if galactic:
        ta_over_t0 += 10 ** ((GALACTIC[0] - GALACTIC[1] * math.log10(f_mhz)) / 10)
    big_l = 10 ** (loss_db / 10)
    trx_over_t0 = 10 ** (nf_db / 10) - 1  # Te = T0*(F - 1) (IEEE)
    # dSNR = 10*log10[(Ta + (L-1)*T0 + L*Trx)/(Ta + Trx)] (REFERENCES.md, SNR cost)
    cost = 10 * math.log10((ta_over_t0 + big_l - 1 + big_l * trx_over_t0) / (ta_over_t0 + trx_over_t0))
    return 10 * math.log10(ta_over_t0), cost


def _run_json(capsys, *argv):
    code = main(["predict", *argv, "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out)


@pytest.mark.parametrize("environment", sorted(P372))
@pytest.mark.parametrize("galactic", [False, True])
def test_table_matches_formula_all_environments_and_bands(capsys, environment, galactic):
    # Whole HF table against ITU-R P.372 and the SNR-cost formula, within 0.05 dB.
    argv = ["--loss-db", "4", "--rx-nf-db", "9", "--environment", environment]
    doc = _run_json(capsys, *argv, *(["--galactic"] if galactic else []))
    rows = doc["rows"]
    assert isinstance(doc["warnings"], list) and len(rows) == len(HF_MHZ)
    for row, f_mhz in zip(rows, HF_MHZ):
        fa, cost = _expected(environment, f_mhz, 4.0, 9.0, galactic)
        assert row["frequency_hz"] == pytest.approx(f_mhz * 1e6)
        assert row["fa_db"] == pytest.approx(fa, abs=0.05)
        assert row["snr_degradation_db"] == pytest.approx(cost, abs=0.05)
        assert row["band"].endswith(" m")


@pytest.mark.parametrize(
    "environment, f_hz, loss_db, nf_db, fa_db, cost_db",
    [
        # REFERENCES.md worked values [calc] (ITU-R P.372 Fa; SNR-cost formula).
        ("residential", 14e6, 3.0, 8.0, 40.75, 0.002),
        ("quiet-rural", 28e6, 3.0, 8.0, 12.21, 1.09),
        ("quiet-rural", 14e6, 6.0, 15.0, 20.82, 2.10),
        ("city", 3.5e6, 3.0, 8.0, 61.73, None),
        ("rural", 7e6, 3.0, 8.0, 43.79, None),
    ],
)
def test_single_frequency_is_one_object(capsys, environment, f_hz, loss_db, nf_db, fa_db, cost_db):
    r = _run_json(capsys, "--loss-db", str(loss_db), "--frequency", str(f_hz),
                  "--environment", environment, "--rx-nf-db", str(nf_db))
    assert isinstance(r, dict)
    assert r["rows"] == [{k: v for k, v in r.items() if k != "rows"}]  # today's keys at the top, and the row
    assert r["fa_db"] == pytest.approx(fa_db, abs=0.006)
    if cost_db is not None:
        assert r["snr_degradation_db"] == pytest.approx(cost_db, abs=0.006)
    assert r["galactic"] is False and r["fa_galactic_db"] is None


def test_several_frequencies_give_rows_with_band_names(capsys):
    doc = _run_json(capsys, "--loss-db", "3", "--rx-nf-db", "8", "--environment", "quiet-rural",
                    "--frequency", "3.5e6", "--frequency", "28e6", "--frequency", "27e6")
    assert doc["warnings"] == [] and "fa_db" not in doc
    rows = doc["rows"][:2]
    # band edges: IARU band plans (common practice); 27 MHz lies in no amateur band
    assert [r["band"] for r in doc["rows"]] == ["80 m", "10 m", ""]
    assert all("fa_db" in r and "snr_degradation_db" in r for r in rows)
    # REFERENCES.md [calc]: quiet rural 3.5 MHz 38.04 dB, 28 MHz 12.21 dB (ITU-R P.372).
    assert [r["fa_db"] for r in rows] == pytest.approx([38.04, 12.21], abs=0.006)


def test_galactic_added_on_request(capsys):
    r = _run_json(capsys, "--loss-db", "3", "--rx-nf-db", "8", "--environment", "quiet-rural",
                  "--frequency", "28e6", "--galactic")
    # ITU-R P.372 [calc]: 12.21 dB man-made + 18.72 dB galactic power-added -> 19.60 dB.
    assert r["fa_galactic_db"] == pytest.approx(18.72, abs=0.006)
    assert r["fa_db"] == pytest.approx(19.60, abs=0.01)
    assert any("critical frequency" in c for c in r["caveats"])


def test_caveats_in_json_and_text(capsys):
    r = _run_json(capsys, "--loss-db", "3", "--rx-nf-db", "8", "--frequency", "7e6")
    text = " ".join(r["caveats"])
    assert "several dB" in text and "Atmospheric noise" in text and "not modelled" in text
    assert main(["predict", "--loss-db", "3", "--rx-nf-db", "8"]) == 0
    out = capsys.readouterr().out
    assert "several dB" in out and "not modelled" in out
    assert "40 m" in out and "10 m" in out


def test_default_environment_is_residential(capsys):
    r = _run_json(capsys, "--loss-db", "3", "--rx-nf-db", "8", "--frequency", "14e6")
    assert r["environment"] == "residential"
    assert r["fa_db"] == pytest.approx(40.75, abs=0.006)  # ITU-R P.372 [calc]


def test_loss_budget_reaches_the_stated_costs(capsys):
    r = _run_json(capsys, "--loss-db", "0", "--rx-nf-db", "8", "--frequency", "28e6",
                  "--environment", "quiet-rural")
    assert r["snr_degradation_db"] == pytest.approx(0.0, abs=1e-12)
    for key, cost in (("snr_cost_0.5_db", 0.5), ("snr_cost_1_db", 1.0)):
        loss = r["loss_budget_db"][key]
        _, got = _expected("quiet-rural", 28.0, loss, 8.0)
        assert got == pytest.approx(cost, abs=1e-6)


def test_antenna_excess_replaces_the_model(capsys):
    # Excess 0 dB means the antenna is as noisy as a 50-ohm load: Ta = T0, so the cost equals the
    # loss whatever the receiver (sanity check [calc], REFERENCES.md).
    r = _run_json(capsys, "--loss-db", "3", "--rx-nf-db", "8", "--antenna-excess-db", "0")
    assert r["source"] == "measured excess"
    assert r["fa_db"] == pytest.approx(0.0, abs=1e-9)
    assert r["snr_degradation_db"] == pytest.approx(3.0, abs=1e-9)
    # 20 dB excess, 6 dB loss: dSNR = 10*log10(1 + (L - 1)/X) = 0.1276 dB [calc], for any NF.
    for nf in ("3", "8", "15"):
        r = _run_json(capsys, "--loss-db", "6", "--rx-nf-db", nf, "--antenna-excess-db", "20")
        assert r["snr_degradation_db"] == pytest.approx(0.1276, abs=1e-4)
        assert r["predicted_excess_db"] == pytest.approx(20.0, abs=1e-9)


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["--loss-db", "3", "--rx-nf-db", "8", "--frequency", "300e6"], "--frequency"),
        (["--loss-db", "3", "--rx-nf-db", "8", "--frequency", "0.1e6"], "0.3-250 MHz"),
        (["--loss-db", "-3", "--rx-nf-db", "8"], "--loss-db"),
        (["--loss-db", "3", "--rx-nf-db", "nan"], "--rx-nf-db"),
        (["--loss-db", "3", "--rx-nf-db", "8", "--antenna-excess-db", "10", "--environment", "city"],
         "replaces the model"),
        (["--loss-db", "3", "--rx-nf-db", "8", "--antenna-excess-db", "-3"], "negative antenna temperature"),
        (["--loss-db", "3", "--rx-nf-db", "8", "--environment", "suburban"], "suburban"),
    ],
)
def test_bad_input_is_one_line_exit_2(capsys, argv, needle):
    assert main(["predict", *argv]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0]
