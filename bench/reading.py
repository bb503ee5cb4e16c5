"""From captures to readings: one pass over a capture's blocks feeds the PSD and health accumulators,
then :mod:`dsp` gives the noise floor and the tone. Everything rxbench reports starts here.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field

import numpy as np

from rxbench._engine import InOrder
from rxbench.errors import CaptureError, MeasurementError
from rxbench.recordings import Capture
from rxbench.dsp.floor import BAND_RANGE_DB, NoiseFloor, noise_floor
from rxbench.dsp.health import Health, HealthAccumulator
from rxbench.dsp.spectrum import N_BATCHES, Psd, PsdAccumulator
from rxbench.dsp.tone import (BAND_HALFWIDTH_BINS, DEFAULT_SNR_BANDWIDTH_HZ, INTERMITTENT_BELOW, Tone,  # noqa: F401
                              line_elsewhere, measure_tone, tone_shape)
from rxbench.dsp.units import db_from_power

#: Default FFT length; shorter captures get a shorter one (at least MIN_SEGMENTS segments).
DEFAULT_NPERSEG = 4096
MIN_NPERSEG = 256
MIN_SEGMENTS = 4 * N_BATCHES
#: Samples at a rail below this fraction are a note (a few spikes); from it up, clipping that compresses.
CLIP_NOTE_BELOW = 1e-4
#: A tone closer than this to the noise (peak bin over floor, dB) gets a low-SNR warning.
LOW_SNR_DB = 10.0


@dataclass(frozen=True)
class Reading:
    """Everything read from one capture."""

    capture: Capture
    psd: Psd
    floor: NoiseFloor
    tone: Tone | None
    health: Health
    warnings: list = field(default_factory=list)

    @property
    def clip_fraction(self) -> float:
        return self.health.clip_fraction

    @property
    def dc_offset(self) -> complex:
        return self.health.dc_offset


def choose_nperseg(n_samples: int, requested: int | None = None) -> int:
    """FFT length: ``requested``, or 4096 shortened (powers of two) until the capture holds
    at least MIN_SEGMENTS half-overlapped segments."""
    if requested is not None:
        return int(requested)
    nperseg = DEFAULT_NPERSEG
    while nperseg > MIN_NPERSEG and n_samples < (MIN_SEGMENTS + 1) * nperseg // 2:
        nperseg //= 2
    return nperseg


def accumulate(capture: Capture, nperseg: int | None = None, window: str = "hann",
               progress=None) -> tuple[Psd, Health]:
    """One streaming pass: averaged PSD and health of a capture. Raises CaptureError on bad samples.

    ``progress``, when given, is called as ``progress(samples_done, n_samples)`` after each block.
    """
    n = choose_nperseg(capture.n_samples, nperseg)
    if not 16 <= n <= 1 << 24:
        raise CaptureError(capture.path, f"FFT segment length {n} is outside 16 .. 16777216")
    if capture.n_samples < n:
        raise CaptureError(capture.path, f"{capture.n_samples} samples is shorter than one {n}-point FFT segment")
    runner = InOrder()  # both accumulators' work on the worker threads, applied in order
    acc = PsdAccumulator(capture.sample_rate_hz, nperseg=n, window=window, one_sided=not capture.is_complex,
                         expected_samples=capture.n_samples, runner=runner)
    health = HealthAccumulator(capture.clip_level, capture.float_samples, runner=runner)
    done = 0
    blocks = capture.blocks()
    try:
        for block in blocks:
            health.update(block)
            acc.update(block)
            done += block.size
            if progress is not None:
                progress(done, capture.n_samples)
            del block  # (not held while the next one is read, nor while the result is made)
    except BaseException:  # an interrupt or a bad block: no work left running behind us
        runner.cancel()
        raise
    finally:
        if hasattr(blocks, "close"):
            blocks.close()  # the reader's buffer goes now, not when this frame does
    h = health.result()
    if h.n_nonfinite:
        raise CaptureError(capture.path, f"{h.n_nonfinite} samples are NaN or infinite")
    if h.power - abs(h.dc_offset) ** 2 <= 1e-9 * h.power or h.power == 0:
        raise CaptureError(capture.path, "all samples are equal: there is no signal or noise to measure")
    return acc.result(), h


def read_capture(
    capture: Capture,
    *,
    near_hz: float | None = None,
    nperseg: int | None = None,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
    want_tone: bool = True,
    noise_band_hz: tuple[float, float] | None = None,
    progress=None,
) -> Reading:
    """Read a capture: PSD, noise floor, (optionally) the tone, health and warnings.

    ``noise_band_hz`` (low, high), offsets in Hz, names where the noise floor is taken.
    ``progress`` is passed to :func:`accumulate`.
    """
    psd, health = accumulate(capture, nperseg, progress=progress)
    warnings: list[str] = []
    name = capture.path.name
    warnings.extend(health_warnings(name, health))
    if psd.zero_fraction > 0:
        warnings.append(
            f"{name}: {100 * psd.zero_fraction:.3g} % of the capture is exactly zero (dropped transfers or "
            "digital silence): left out of every reading"
        )
    try:
        floor = noise_floor(psd, dc_halfwidth_hz=None if capture.is_complex else 0.0, band_hz=noise_band_hz,
                            seed_hz=near_hz)
    except ValueError as exc:
        raise CaptureError(capture.path, f"no noise floor: {exc}") from None
    if floor.density <= 0:
        raise CaptureError(capture.path, "the noise floor is zero (constant or digitally generated samples?)")
    tone, missing = None, None
    if want_tone:
        try:
            tone = measure_tone(psd, floor, near_hz=near_hz, snr_bandwidth_hz=snr_bandwidth_hz)
        except ValueError as exc:
            missing = f"{name}: {exc}"
        # A band-limited floor taken at the strongest bins, a noise passband, can hide a weaker line
        # outside it (no tone there, or only the passband read as a broad signal): that line is read
        # with the floor around it.
        if (tone is None or tone.is_broad) and floor.band_limited and near_hz is None:
            line = line_elsewhere(psd, floor)
            if line is not None:
                floor = noise_floor(psd, dc_halfwidth_hz=floor.dc_halfwidth_hz, seed_hz=line)
                tone = measure_tone(psd, floor, near_hz=line, snr_bandwidth_hz=snr_bandwidth_hz)
                missing = (f"{name}: the strongest bins are a band of noise, not a line: the line at {line:+.0f} Hz "
                           "is read with the floor around it (--near HZ chooses)")
    warnings.extend(_floor_warnings(name, floor))
    if missing is not None:
        warnings.append(missing)
    if tone is not None:
        warnings.extend(_tone_warnings(name, psd, floor, tone, chosen=near_hz is not None))
    return Reading(capture, psd, floor, tone, health, warnings)


def health_warnings(name: str, health: Health,
                    effect: str = "readings are compressed; add attenuation or lower the gain") -> list[str]:
    """What a capture's health says about its readings: float data not normalised to full scale (with
    its peak, and the full scale the dBFS figures take), and samples at a rail value: a note with the
    count below :data:`CLIP_NOTE_BELOW` of the samples, else clipping with ``effect``."""
    out = []
    if not health.normalised:
        out.append(f"{name}: float samples reach {health.peak_magnitude:.4g}, beyond +/-1: not normalised to "
                   f"full scale (raw converter counts?); dBFS figures take 1.0 as full scale, "
                   f"{health.peak_dbfs:.1f} dB below the peak")
    if health.n_clipped:
        at = "at the rails" if health.normalised else \
            f"piled up at the peak magnitude {health.peak_magnitude:.4g} (a converter's rail)"
        if health.clip_fraction < CLIP_NOTE_BELOW:
            out.append(f"{name}: note: {health.n_clipped} of {health.n_samples} samples {at}: too few to "
                       "compress the readings")
        else:
            out.append(f"{name}: {100 * health.clip_fraction:.3g} % of samples {at} (clipping): {effect}")
    return out


def _floor_warnings(name: str, floor: NoiseFloor) -> list[str]:
    out = []
    if floor.steady_fraction < 1.0:
        out.append(
            f"{name}: the noise floor moves by {floor.time_range_db:.1f} dB during the capture: it is taken "
            f"from the steady, quietest {100 * floor.steady_fraction:.0f} % of the time"
        )
    if floor.band_limited:
        lo, hi = floor.band_hz
        out.append(
            f"{name}: the noise floor varies by {floor.band_range_db:.1f} dB across the band (band-limited "
            f"recording?): taken where the signals are, {lo:.0f} .. {hi:.0f} Hz (--noise-band LO HI chooses)"
        )
    elif floor.band_hz is None and floor.band_range_db > BAND_RANGE_DB:
        out.append(
            f"{name}: the noise floor varies by {floor.band_range_db:.1f} dB across the band: taken over the "
            "whole band (--noise-band LO HI chooses)"
        )
    return out


def _tone_warnings(name: str, psd: Psd, floor: NoiseFloor, tone: Tone, chosen: bool = False) -> list[str]:
    out = []
    shape = tone_shape(psd, floor, tone)
    if shape.on_fraction is not None:
        out.append(
            f"{name}: intermittent: present in {100 * shape.on_fraction:.0f} % of the capture; power_dbfs "
            f"({tone.power_dbfs:.2f} dBFS) is the average over the whole capture, on_power_dbfs "
            f"({tone.on_power_dbfs:.2f} dBFS) the power while present"
        )
    if shape.varies_within_slots:
        out.append(f"{name}: the tone's level jumps from one {1e3 * tone.timeline.slot_s:.3g} ms time slot to the next "
                   "far beyond the noise (keyed or pulsed faster than that?): power_dbfs is the average over the "
                   "whole capture, not the power while on")
    if shape.level_change_db > 0:
        how = (f"a drift of {shape.drift_db_per_s:+.3g} dB/s" if shape.drift_db_per_s is not None else "in steps")
        out.append(f"{name}: the tone's level changes by {shape.level_change_db:.1f} dB during the capture "
                   f"({how}): its power is an average over that change")
    if tone.peak_to_floor_db < LOW_SNR_DB:
        out.append(
            f"{name}: tone only {tone.peak_to_floor_db:.1f} dB above the noise in one bin; "
            f"its power is uncertain by ±{tone.u_power_db * 2:.2f} dB (95 %)"
        )
    if tone.power <= 0 or (tone.ci95_dbfs[0] == -np.inf and not shape.varies):
        out.append(f"{name}: tone power not distinguishable from the noise")
    if shape.broad:
        out.append(
            f"{name}: a broad signal, not a tone (-3 dB width {tone.width_hz:.4g} Hz, a line here is "
            f"{tone.line_width_hz:.3g} Hz): power reads as a band power over "
            f"{(2 * BAND_HALFWIDTH_BINS + 1) * psd.bin_width_hz:.4g} Hz"
        )
    if shape.second_offset_hz is not None:
        band_hz = BAND_HALFWIDTH_BINS * psd.bin_width_hz
        if abs(tone.second_offset_hz - tone.offset_hz) <= band_hz + 2 * psd.bin_width_hz:  # its main lobe reaches in
            what = (f"it lies within the tone's integration band (+/-{band_hz:.4g} Hz), so part of its power is "
                    "counted: a longer FFT (--nperseg) separates them")
        else:
            what = "both lie near --near; narrow it" if chosen else "give --near HZ to choose"
        out.append(
            f"{name}: a second line at {tone.second_offset_hz:+.0f} Hz within {abs(tone.second_db):.1f} dB of the "
            f"one read at {tone.offset_hz:+.0f} Hz (two-tone keying?): {what}"
        )
    if shape.on_dc:
        out.append(f"{name}: tone at {tone.offset_hz:.0f} Hz sits on the DC spike; tune it away from the centre")
    if not psd.one_sided and abs(tone.offset_hz) > floor.edge_hz:
        out.append(f"{name}: tone at {tone.offset_hz:.0f} Hz is near the band edge (anti-alias roll-off)")
    return out


def _finite(x):
    return None if x is None or not math.isfinite(x) else float(x)


def tone_dict(tone, center_hz) -> dict:
    """The JSON view of a tone reading (shared by every command that reports tones)."""
    if tone is None:
        names = ("offset_hz", "frequency_hz", "power_dbfs", "u_power_db", "ci95_dbfs", "cn0_dbhz", "snr_db",
                 "snr_bandwidth_hz", "on_fraction", "on_power_dbfs", "on_cn0_dbhz", "time_resolution_s",
                 "level_change_db", "drift_db_per_s", "varies_within_slots", "width_hz", "line_width_hz",
                 "second_offset_hz", "second_db")
        return dict.fromkeys(names)
    tl = tone.timeline
    return {
        "offset_hz": tone.offset_hz,
        "frequency_hz": None if center_hz is None else center_hz + tone.offset_hz,
        "power_dbfs": tone.power_dbfs,
        "u_power_db": tone.u_power_db,
        "ci95_dbfs": list(tone.ci95_dbfs),
        "cn0_dbhz": tone.cn0_dbhz,
        "snr_db": tone.snr_db,
        "snr_bandwidth_hz": tone.snr_bandwidth_hz,
        "on_fraction": tone.on_fraction,
        "on_power_dbfs": _finite(tone.on_power_dbfs),
        "on_cn0_dbhz": _finite(tone.on_cn0_dbhz),
        "time_resolution_s": None if tl is None or tl.on_fraction is None else tl.slot_s,
        "level_change_db": None if tl is None else tl.level_change_db,
        "drift_db_per_s": None if tl is None else tl.drift_db_per_s,
        "varies_within_slots": None if tl is None else tl.varies_within_slots,
        "width_hz": _finite(tone.width_hz),
        "line_width_hz": _finite(tone.line_width_hz),
        "second_offset_hz": tone.second_offset_hz,
        "second_db": tone.second_db,
    }


def noise_dict(reading: Reading) -> dict:
    """The JSON view of a reading's noise floor (shared by inspect and the session)."""
    fl = reading.floor
    return {
        "density_dbfs_per_hz": db_from_power(fl.density),
        "u_density_db": 10 / math.log(10) * fl.u_density / fl.density,
        "bins_used": fl.n_bins,
        "time_range_db": fl.time_range_db,
        "steady_fraction": fl.steady_fraction,
        "band_range_db": fl.band_range_db,
        "band_hz": None if fl.band_hz is None else list(fl.band_hz),
        "zero_fraction": reading.psd.zero_fraction,
    }


def health_dict(health: Health) -> dict:
    """The JSON view of a capture's health (shared by inspect and the session): the fraction and
    count of samples at a rail value, and the peak magnitude of any rail (full-scale units; beyond 1
    for float data not normalised to full scale)."""
    return {
        "clip_fraction": health.clip_fraction,
        "clip_count": health.n_clipped,
        "peak_magnitude": health.peak_magnitude,
    }


def tone_db(reading: Reading) -> tuple[float, float, float]:
    """(power dBFS, standard uncertainty dB, dof) of a reading's tone; (nan, nan, inf) when there is none."""
    t = reading.tone
    if t is None or not t.power > 0:
        return math.nan, math.nan, math.inf
    return t.power_dbfs, t.u_power_db, t.dof_u


def pool_tones(readings, role: str = "") -> tuple[float, float, float]:
    """Pool the tones of repeated captures of one role (several thru captures, say).

    Returns the mean reading (dBFS), its Type A standard uncertainty (dB) and degrees of freedom, by
    :func:`dsp.loss.mean_reading` (the larger of the estimators' and the scatter's uncertainty).
    Raises MeasurementError naming a capture whose tone could not be read.
    """
    readings = list(readings)
    values = [tone_db(r) for r in readings]
    for r, (p, _, _) in zip(readings, values):
        if not math.isfinite(p):
            what = f"{role} tone" if role else "tone"
            raise MeasurementError(f"{r.capture.path}: no {what} could be read (none above the noise)")
    p, u, dof = zip(*values)
    from rxbench.dsp.loss import mean_reading  # here: dsp.loss is 4 ms of every inspect's start-up

    return mean_reading(p, u, dof)


def capture_start_s(capture: Capture) -> float | None:
    """Start of a capture from its metadata (ISO 8601; UTC when it names no zone), s since the epoch;
    None when the metadata gives no readable time."""
    text = capture.datetime
    if not isinstance(text, str) or not text:
        return None
    try:
        start = _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        return None
    if start.tzinfo is None:
        start = start.replace(tzinfo=_dt.timezone.utc)
    return start.timestamp()


def noise_density_dbfs_per_hz(reading: Reading) -> float:
    return db_from_power(reading.floor.density)


# --------------------------------------------------------------------------------------------
# Comparing captures with each other
