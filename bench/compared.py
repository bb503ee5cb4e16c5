"""Captures compared with each other (a loss, a ladder, a gain-method noise figure, a session's
groups): taken alike (sample rate, sample type, tuning, recorded gain) and holding the same signal
(tones that agree in frequency, none absent or on the DC spike, present alike in time). The
numerics of "the same signal" are :mod:`dsp.same_signal`; this module reads the captures and words
the findings.
"""

from __future__ import annotations

import math

from rxbench import keys
from rxbench.errors import MeasurementError, UnlikeCapturesError, UsageError
from rxbench.reading import choose_nperseg, read_capture
from rxbench.recordings import Capture
from rxbench.dsp.same_signal import DEFAULT_BINS, DEFAULT_PPM, SameSignal, same_signal
from rxbench.dsp.tone import measure_tone

#: Captures compared with each other must agree in sample rate to this fraction...
RATE_TOLERANCE = 1e-6
#: ...and in centre frequency to this many hertz.
CENTER_TOLERANCE_HZ = 1.0


def _gain(capture: Capture):
    g = capture.extra.get(keys.GAIN_DB)
    try:
        return None if g is None else float(g)
    except (TypeError, ValueError):
        return None


def setup_difference(a: Capture, b: Capture, *, tuning: bool = True, gain: bool = True) -> str | None:
    """Why two captures cannot be compared with each other, or None when they were taken alike.

    Sample rate and sample type must agree; with ``tuning`` the centre frequencies (where both are
    known), with ``gain`` the dongle gains (where both are recorded).
    """
    if abs(a.sample_rate_hz - b.sample_rate_hz) > RATE_TOLERANCE * b.sample_rate_hz:
        return (f"sample rate {a.sample_rate_hz:g} Hz of {a.path.name} differs from {b.sample_rate_hz:g} Hz "
                f"of {b.path.name}")
    if a.is_complex != b.is_complex:
        return f"{a.path.name} and {b.path.name}: one holds complex IQ, the other real samples"
    if tuning and a.center_hz is not None and b.center_hz is not None \
            and abs(a.center_hz - b.center_hz) > CENTER_TOLERANCE_HZ:
        return (f"centre frequency {a.center_hz:.0f} Hz of {a.path.name} differs from {b.center_hz:.0f} Hz "
                f"of {b.path.name}")
    ga, gb = _gain(a), _gain(b)
    if gain and ga is not None and gb is not None and ga != gb:
        return f"gain {ga:g} dB of {a.path.name} differs from {gb:g} dB of {b.path.name}"
    return None


def require_comparable(captures, *, tuning: bool = True, gain: bool = True) -> list[str]:
    """Refuse captures that were not taken alike (:func:`setup_difference`) with an UnlikeCapturesError
    naming both files; return warnings for what the metadata does not let us check."""
    captures = list(captures)
    for cap in captures[1:]:
        why = setup_difference(cap, captures[0], tuning=tuning, gain=gain)
        if why:
            raise UnlikeCapturesError(f"{why}: compared captures must be taken with the same settings")
    warnings = []
    if len(captures) > 1:
        if tuning and any(c.center_hz is None for c in captures):
            unknown = [c.path.name for c in captures if c.center_hz is None]
            warnings.append(f"no centre frequency on {', '.join(unknown)}: cannot check the captures were "
                            "tuned alike (give --center HZ)")
        if gain and any(_gain(c) is None for c in captures):
            warnings.append("the gain is not recorded in every capture: make sure it was fixed (AGC off) "
                            "and the same for all")
    return warnings


def _offset(hz: float) -> str:
    return f"{hz:+.0f} Hz"


def signal_differences(readings, *, drift_ppm: float = DEFAULT_PPM) -> tuple[SameSignal, list[str]]:
    """Which readings are not of the same signal as the others (:func:`dsp.same_signal.same_signal`),
    and one sentence per such capture naming it, the reference capture and both tone offsets.

    The tolerance is 3 bins plus ``drift_ppm`` of the centre frequency (of the tone's own frequency
    for real captures; left out where the centre is unknown).
    """
    if not (math.isfinite(drift_ppm) and drift_ppm >= 0):
        raise UsageError(f"--drift-ppm must be a finite number >= 0, got {drift_ppm}")
    readings = list(readings)
    offsets = [None if r.tone is None else r.tone.offset_hz for r in readings]
    first = readings[0]
    bin_hz = max(r.psd.bin_width_hz for r in readings)
    if first.capture.is_complex:
        ref_hz = first.capture.center_hz
    else:
        ref_hz = max((abs(o) for o in offsets if o is not None), default=None)
    tl = [None if r.tone is None else r.tone.timeline for r in readings]
    check = same_signal(offsets, bin_hz, ref_hz, dc_halfwidth_hz=max(r.floor.dc_halfwidth_hz for r in readings),
                        ppm=drift_ppm, on_fractions=[t and t.on_fraction for t in tl],
                        keyed_fast=[bool(t and t.varies_within_slots) for t in tl])
    ref = None if check.reference is None else readings[check.reference]
    named = "" if ref is None else f"the signal of {ref.capture.path.name} at {_offset(ref.tone.offset_hz)}"
    problems = {}
    for i in check.absent:
        r = readings[i]
        try:
            strongest = f"; its strongest peak is at {_offset(measure_tone(r.psd, r.floor).offset_hz)}"
        except ValueError:
            strongest = ""
        near = "" if ref is None else f" near {_offset(ref.tone.offset_hz)}, {named}"
        problems[i] = f"{r.capture.path.name}: no tone{near}{strongest}"
    for i in check.on_dc:
        r = readings[i]
        problems[i] = f"{r.capture.path.name}: its tone at {_offset(r.tone.offset_hz)} is the DC spike" + \
            ("" if ref is None else f", not {named}")
    for i, diff in check.disagree:
        r = readings[i]
        problems[i] = (f"{r.capture.path.name}: tone at {_offset(r.tone.offset_hz)} is not {named} "
                       f"({abs(diff):.0f} Hz apart; tolerance {check.tolerance_hz:.0f} Hz = {DEFAULT_BINS:g} bins "
                       f"+ {drift_ppm:g} ppm)")
    for i in check.unlike_in_time:
        problems[i] = (f"{readings[i].capture.path.name}: {_presence(tl[i])}, {ref.capture.path.name}: "
                       f"{_presence(tl[check.reference])}: not present alike in time (an intermittent connector, a "
                       "keyed generator?)")
    return check, [problems[i] for i in sorted(problems)]


def _presence(timeline) -> str:
    if timeline.varies_within_slots:
        return "tone keyed faster than the time slots"
    return "tone present " + ("at all times" if timeline.on_fraction is None else f"{100 * timeline.on_fraction:.0f} % of the time")


def require_same_signal(readings, *, drift_ppm: float = DEFAULT_PPM) -> None:
    """Refuse compared readings whose tones are not one signal (:func:`signal_differences`) with a
    UnlikeCapturesError naming each such capture, the reference capture and their offsets."""
    check, problems = signal_differences(readings, drift_ppm=drift_ppm)
    if problems:
        hint = " (a dongle still warming up drifts more: widen with --drift-ppm)" if check.disagree else ""
        raise UnlikeCapturesError("; ".join(problems) + ": compared captures must hold the same signal" + hint)


def read_tones(captures, *, near_hz: float | None = None, nperseg: int | None = None,
               drift_ppm: float = DEFAULT_PPM, noise_band_hz: tuple[float, float] | None = None):
    """Read the tone of every capture alike (one FFT length, one noise band, the tone of the first
    capture), and refuse captures that are not the same signal (:func:`require_same_signal`).

    Returns ``(readings, warnings)``. A first capture without a tone is an error (nothing to follow).
    """
    warnings = require_comparable(captures)
    if nperseg is not None and nperseg < 16:
        raise UsageError(f"--nperseg must be at least 16, got {nperseg}")
    nperseg = choose_nperseg(min(c.n_samples for c in captures), nperseg)

    def read(cap, near):
        try:
            return read_capture(cap, near_hz=near, nperseg=nperseg, noise_band_hz=noise_band_hz)
        except ValueError as exc:
            raise UsageError(f"{cap.path}: {exc}") from None

    first = read(captures[0], near_hz)
    if first.tone is None:
        where = "; give --near HZ" if near_hz is None else f" near {near_hz:g} Hz"
        raise MeasurementError(f"{captures[0].path}: no tone found above the noise{where}")
    near = first.tone.offset_hz
    readings = [first] + [read(cap, near) for cap in captures[1:]]
    require_same_signal(readings, drift_ppm=drift_ppm)
    for r in readings:
        warnings.extend(r.warnings)
    return readings, warnings
