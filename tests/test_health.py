"""Data the way it really arrives: float data not normalised to full scale, clipping only at rail values,
a handful of rail samples as a note (dsp/health.py and its warnings).

The generators are invented (closed-form truth): Gaussian noise and a tone written as float in raw
converter counts (12-bit, values up to about two thousand), the same clipped at the converter's rails
(+/-2047, the extreme codes of a 12-bit signed converter: a fact of the format), and a cu8 capture with
exactly three samples forced to the codes 0 and 255 (cu8's rails: a fact of the format).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.reading import CLIP_NOTE_BELOW, health_warnings, read_capture
from rxbench.cli import main
from rxbench.recordings import memory_capture, write_sigmf
from rxbench.dsp.health import PILEUP_MIN_SAMPLES, HealthAccumulator

FS = 250e3
N = 1 << 17  # 131 072 samples, as in the case that was overstated


def _counts(rng, n=N, rms=600.0, tone=1500.0, offset_hz=21e3):
    """Complex samples in converter counts: a tone of amplitude ``tone`` counts in Gaussian noise."""
    t = np.arange(n) / FS
    x = tone * np.exp(2j * np.pi * offset_hz * t + 1j * rng.uniform(0, 2 * np.pi))
    x = x + rms / np.sqrt(2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return x.astype(np.complex64)


def _rails_clipped(x, rail):
    return (np.clip(x.real, -rail, rail) + 1j * np.clip(x.imag, -rail, rail)).astype(np.complex64)


def _health(x, clip_level=1.0, float_samples=True, blocks=4):
    acc = HealthAccumulator(clip_level, float_samples)
    for part in np.array_split(x, blocks):
        acc.update(part)
    return acc.result()


# --------------------------------------------------------------------------------------------
# The numerics


def test_unnormalised_float_is_not_clipping(rng):
    x = _counts(rng)
    h = _health(x)
    assert not h.normalised and h.n_clipped == 0 and h.clip_fraction == 0.0
    # the peak is the largest rail magnitude, exactly
    assert h.peak_magnitude == pytest.approx(float(np.max(np.abs(x.view(np.float32)))), rel=0)
    # the old rule (|rail| >= 1 is clipping) called nearly every sample clipped
    assert np.mean(np.abs(x.view(np.float32)) >= 1.0) > 0.99


def test_unnormalised_float_clipped_at_a_rail_is_clipping(rng):
    x = _rails_clipped(_counts(rng, rms=900.0), 2047.0)
    expected = int(np.count_nonzero((np.abs(x.real) >= 2047) | (np.abs(x.imag) >= 2047)))
    assert expected > 100 * PILEUP_MIN_SAMPLES
    h = _health(x, blocks=7)  # the pile-up is counted across blocks
    assert not h.normalised and h.peak_magnitude == 2047.0 and h.n_clipped == expected


def test_normalised_float_and_integer_rails_unchanged(rng):
    x = _counts(rng) / np.float32(4096)
    h = _health(x)
    assert h.normalised and h.n_clipped == 0 and h.peak_magnitude < 1
    y = _rails_clipped(x * np.float32(3), 1.0)  # clipped at full scale, as a float pipeline would
    h = _health(y)
    assert h.normalised and h.n_clipped == int(np.count_nonzero((np.abs(y.real) >= 1) | (np.abs(y.imag) >= 1)))
    # integer data (float_samples False) keeps its rails at the format's extreme codes
    h = _health(y, clip_level=127 / 128, float_samples=False)
    assert h.n_clipped > 0 and h.normalised


# --------------------------------------------------------------------------------------------
# The warnings and the commands


def test_warnings_name_the_peak_and_the_full_scale_taken(rng):
    r = read_capture(memory_capture(_counts(rng), FS, name="counts.cf32"))
    text = " | ".join(r.warnings)
    assert "not normalised to full scale" in text and "clipping" not in text and "at the rails" not in text
    peak = r.health.peak_magnitude
    assert f"{peak:.4g}" in text and "dBFS figures take 1.0 as full scale" in text
    assert f"{20 * np.log10(peak):.1f} dB below the peak" in text
    # a tone of 1500 counts reads 20 log10(1500) dBFS with 1.0 taken as full scale
    assert r.tone.power_dbfs == pytest.approx(20 * np.log10(1500.0), abs=0.1)
    clipped = read_capture(memory_capture(_rails_clipped(_counts(rng, rms=900.0), 2047.0), FS, name="c.cf32"))
    text = " | ".join(clipped.warnings)
    assert "not normalised" in text and "piled up at the peak magnitude 2047" in text and "(clipping)" in text


def _cu8_with_rail_samples(tmp_path, rng, n_rail):
    """A cu8 capture (noise about 20 codes rms around 127.5, a tone) with exactly ``n_rail`` samples at codes
    0 or 255."""
    x = _counts(rng, rms=20.0, tone=30.0) + np.complex64(127.5 + 127.5j)
    codes = np.clip(np.rint(x.view(np.float32)), 1, 254).astype(np.uint8)
    where = rng.choice(N, size=n_rail, replace=False)
    codes[2 * where] = rng.choice([0, 255], size=n_rail).astype(np.uint8)
    return str(write_sigmf(tmp_path / f"rails{n_rail}", codes, sample_rate_hz=FS, center_hz=50.2e6, datatype="cu8"))


def test_a_handful_of_rail_samples_is_a_note(tmp_path, rng, capsys):
    path = _cu8_with_rail_samples(tmp_path, rng, 3)
    assert main(["inspect", path, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clip_fraction"] == pytest.approx(3 / N)
    notes = [w for w in out["warnings"] if "at the rails" in w]
    assert len(notes) == 1 and "note: 3 of 131072 samples at the rails" in notes[0]
    assert "compressed" not in notes[0]


def test_many_rail_samples_are_clipping(tmp_path, rng, capsys):
    n = int(3 * CLIP_NOTE_BELOW * N)
    path = _cu8_with_rail_samples(tmp_path, rng, n)
    assert main(["inspect", path, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clip_fraction"] == pytest.approx(n / N)
    assert any("(clipping): readings are compressed" in w for w in out["warnings"])


def test_unnormalised_float_file_through_inspect(tmp_path, rng, capsys):
    x = _counts(rng)
    path = write_sigmf(tmp_path / "counts", x, sample_rate_hz=FS, center_hz=7.1e6, datatype="cf32_le")
    assert main(["inspect", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clip_fraction"] == 0.0
    assert any("not normalised to full scale" in w for w in out["warnings"])


def test_health_warnings_effect_text():
    from rxbench.dsp.health import Health

    h = Health(n_samples=1000, clip_fraction=0.01, dc_offset=0j, power=0.1, n_nonfinite=0, n_clipped=10,
               peak_magnitude=1.0)
    (w,) = health_warnings("x", h, "the hot reading is wrong")
    assert w == "x: 1 % of samples at the rails (clipping): the hot reading is wrong"


# --------------------------------------------------------------------------------------------
# The health keys of `rxbench inspect --json` and the session's per-capture entries


def _cu8_known_rails(rng, n_i, n_q, n_both, top_code=None):
    """cu8 codes of noise (about 20 codes rms) kept off the rails (codes 10 .. 240), with exactly
    ``n_i`` samples whose I code, ``n_q`` whose Q code and ``n_both`` whose two codes are at a rail (0
    or 255: cu8's extreme codes, a fact of the format), and optionally one I code ``top_code``."""
    x = _counts(rng, rms=20.0, tone=30.0) + np.complex64(127.5 + 127.5j)
    codes = np.clip(np.rint(x.view(np.float32)), 10, 240).astype(np.uint8)
    where = rng.choice(N, size=n_i + n_q + n_both + 1, replace=False)
    i_only, q_only, both, top = np.split(where, np.cumsum([n_i, n_q, n_both]))
    rail = lambda k: rng.choice([0, 255], size=k).astype(np.uint8)  # noqa: E731
    codes[2 * i_only] = rail(n_i)
    codes[2 * q_only + 1] = rail(n_q)
    codes[2 * both], codes[2 * both + 1] = rail(n_both), rail(n_both)
    if top_code is not None:
        codes[2 * top] = top_code
    return codes


@pytest.mark.parametrize("n_i, n_q, n_both", [(3, 0, 0), (20, 17, 5)])
def test_inspect_json_gives_the_clip_count_and_the_peak(tmp_path, rng, capsys, n_i, n_q, n_both):
    codes = _cu8_known_rails(rng, n_i, n_q, n_both)
    path = write_sigmf(tmp_path / "rails", codes, sample_rate_hz=FS, center_hz=50.2e6, datatype="cu8")
    assert main(["inspect", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    # A sample with both codes at a rail is one sample at a rail.
    assert out["clip_count"] == n_i + n_q + n_both
    assert out["clip_fraction"] == pytest.approx((n_i + n_q + n_both) / N)
    # Codes 0 and 255 decode to -1 and +1: full scale (cu8's (code - 127.5) / 127.5).
    assert out["peak_magnitude"] == pytest.approx(1.0, rel=1e-6)


def test_inspect_json_peak_without_rails(tmp_path, rng, capsys):
    codes = _cu8_known_rails(rng, 0, 0, 0, top_code=250)
    path = write_sigmf(tmp_path / "norails", codes, sample_rate_hz=FS, center_hz=50.2e6, datatype="cu8")
    assert main(["inspect", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clip_count"] == 0 and out["clip_fraction"] == 0.0
    assert out["peak_magnitude"] == pytest.approx((250 - 127.5) / 127.5, rel=1e-6)


def test_unnormalised_float_peak_and_pile_up_count_in_json(tmp_path, rng, capsys):
    # 12-bit counts clipped at +/-2047 (a signed 12-bit converter's extreme codes): the pile-up is
    # counted, the peak is the rail.
    x = _counts(rng, rms=1500.0, tone=0.0)
    clipped = _rails_clipped(x, 2047.0)
    at_rail = int(np.count_nonzero((np.abs(clipped.real) >= 2047.0) | (np.abs(clipped.imag) >= 2047.0)))
    assert at_rail >= PILEUP_MIN_SAMPLES
    path = write_sigmf(tmp_path / "counts", clipped, sample_rate_hz=FS, center_hz=7.1e6, datatype="cf32_le")
    assert main(["inspect", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clip_count"] == at_rail
    assert out["peak_magnitude"] == 2047.0


def test_session_entries_carry_the_clip_count_and_the_peak(tmp_path, rng):
    from rxbench import session as sess

    codes = _cu8_known_rails(rng, 4, 2, 1)
    write_sigmf(tmp_path / "01-thru", codes, sample_rate_hz=FS, center_hz=50.2e6, datatype="cu8",
                extra={"role": "thru"}, datetime="2026-03-01T10:00:00Z")
    a = sess.analyze_session(sess.open_session(tmp_path))
    (entry,) = a.captures
    assert entry["clip_count"] == 7
    assert entry["clip_fraction"] == pytest.approx(7 / N)
    assert entry["peak_magnitude"] == pytest.approx(1.0, rel=1e-6)


@pytest.mark.parametrize("n", [5, 1024, 1 << 19, (1 << 19) + 7])
@pytest.mark.parametrize("complex_", [True, False])
def test_block_sums_match_numpy_in_double_precision(rng, n, complex_):
    # Reference: numpy's sums of the samples and of |x|**2 converted to float64 (the reference
    # library). The row sums are single precision: within 1e-8 of the sum of magnitudes, and 1e-6
    # of the power (2e-8 seen), far inside a DC reading's own scatter (which is of order 1/sqrt(n) of it).
    from rxbench.dsp.health import _sums

    x = rng.standard_normal(n) + 0.01
    if complex_:
        x = x + 1j * rng.standard_normal(n)
    x = x.astype(np.complex64 if complex_ else np.float32)
    wide = x.astype(np.complex128 if complex_ else np.float64)
    total, power = _sums(x)
    assert abs(total - wide.sum()) <= 1e-8 * np.abs(wide).sum()
    assert power == pytest.approx(np.sum(np.abs(wide) ** 2), rel=1e-6)  # (BLAS's vdot: 2e-6)
