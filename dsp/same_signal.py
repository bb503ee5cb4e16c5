"""Are compared captures the same signal? Tone frequencies that agree, none on the DC spike, none absent.

A loss, a ladder step or a gain-method noise figure compares tone powers across captures; that is
only a measurement when every capture holds the same tone. Two transmitters a few kilohertz apart,
two audio signals, or the dongle's own DC spike read as "the tone" give a number that measures
nothing. This module says which captures disagree, given each capture's tone offset, the bin
width, the tuning and a tolerance; the shell decides what to do about it (refuse, or leave a
capture out).

Notes
-----
The tolerance is ``bins * bin_width_hz + ppm * 1e-6 * reference_hz``. The bins term covers the
frequency estimate itself (a tone well above the noise is located to a small fraction of a bin;
near the noise to about a bin) and a tone that falls between bins; the ppm term covers the
dongle's oscillator moving between captures, which scales with the frequency it is tuned to
(common practice: a temperature-compensated dongle holds about 1 ppm, drifting far less than that
between captures minutes apart; an uncompensated one still warming up can move several ppm).

Which capture is "the odd one" is decided by agreement, not by order: the reference is the capture
whose tone agrees with the most others (ties go to the earliest, so with two captures the first
one, the thru, is the reference).

The same signal is also present alike in time: a tone on for half of one capture and all of the
other (an intermittent connector, a generator keyed for one capture only) gives average powers
that differ by the keying, not by the device. Captures whose on-fractions differ from the
reference's by more than ON_FRACTION_TOLERANCE, or whose tone is keyed faster than the time track
resolves while the reference's is not (or the other way round), are "unlike in time". Captures
keyed alike compare (their averages share the duty cycle).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["DEFAULT_BINS", "DEFAULT_PPM", "DC_GUARD_BINS", "SameSignal", "tolerance_hz", "on_dc", "same_signal"]

#: Default tolerance, bins of the FFT.
DEFAULT_BINS = 3.0
#: Default tolerance, parts per million of the tuned frequency.
DEFAULT_PPM = 1.0
#: A tone within the DC region's half-width plus this many bins of 0 Hz is the DC spike (or its skirt).
DC_GUARD_BINS = 4
#: Compared captures' on-fractions (the time their tone is present) agree to this (absolute).
ON_FRACTION_TOLERANCE = 0.1


@dataclass(frozen=True)
class SameSignal:
    """Which of several captures' tones are not the same signal.

    Attributes
    ----------
    tolerance_hz : float
        Largest frequency difference from the reference's tone still called the same signal, Hz.
    reference : int or None
        Index of the capture the others are compared with (None when no capture has a usable tone).
    absent : tuple of int
        Captures with no tone.
    on_dc : tuple of int
        Captures whose tone is the DC spike.
    disagree : tuple of (int, float)
        Captures whose tone is elsewhere: (index, offset minus the reference's offset, Hz).
    unlike_in_time : tuple of int
        Captures (of the others) whose tone is not present alike in time with the reference's.
    """

    tolerance_hz: float
    reference: int | None
    absent: tuple
    on_dc: tuple
    disagree: tuple
    unlike_in_time: tuple = ()

    @property
    def ok(self) -> bool:
        return not (self.absent or self.on_dc or self.disagree or self.unlike_in_time)

    @property
    def rejected(self) -> tuple:
        """Indices of every capture that is not the same signal, in order."""
        return tuple(sorted(set(self.absent) | set(self.on_dc) | {i for i, _ in self.disagree}
                            | set(self.unlike_in_time)))


def tolerance_hz(bin_width_hz: float, reference_hz: float | None = None, *, bins: float = DEFAULT_BINS,
                 ppm: float = DEFAULT_PPM) -> float:
    """Frequency tolerance between captures of one signal, Hz: ``bins * bin_width_hz + ppm * 1e-6 * |reference_hz|``.

    Parameters
    ----------
    bin_width_hz : float
        Bin width of the spectra the tones were read from, Hz.
    reference_hz : float or None
        The frequency the oscillator's error scales with: the centre (tuned) frequency of complex
        captures, the tone's own frequency for real ones; None or 0 leaves the ppm term out.
    bins, ppm : float
        The two terms of the tolerance (both >= 0).

    Examples
    --------
    >>> tolerance_hz(2.4e6 / 4096, 100e6)   # 3 bins of 585.9 Hz plus 1 ppm of 100 MHz
    1857.8125
    """
    for name, v in (("bin_width_hz", bin_width_hz), ("bins", bins), ("ppm", ppm)):
        if not (math.isfinite(v) and v >= 0):
            raise ValueError(f"{name}={v!r} must be a finite number >= 0")
    ref = 0.0 if reference_hz is None or not math.isfinite(reference_hz) else abs(reference_hz)
    return float(bins * bin_width_hz + ppm * 1e-6 * ref)


def on_dc(offset_hz: float, bin_width_hz: float, dc_halfwidth_hz: float = 0.0) -> bool:
    """Is a tone at ``offset_hz`` (from the centre) the DC spike: within ``dc_halfwidth_hz`` plus
    :data:`DC_GUARD_BINS` bins of 0 Hz?"""
    return bool(abs(offset_hz) <= dc_halfwidth_hz + DC_GUARD_BINS * bin_width_hz)


def same_signal(offsets_hz, bin_width_hz: float, reference_hz: float | None = None, *,
                dc_halfwidth_hz: float = 0.0, bins: float = DEFAULT_BINS, ppm: float = DEFAULT_PPM,
                on_fractions=None, keyed_fast=None) -> SameSignal:
    """Which captures' tones are not the same signal as the others'.

    Parameters
    ----------
    offsets_hz : sequence of float or None
        Each capture's tone offset from its centre, Hz (absolute frequency for real captures);
        None or NaN where no tone was found. Captures are assumed tuned alike (checked elsewhere).
    bin_width_hz : float
        Bin width of the spectra, Hz (the widest, if they differ).
    reference_hz : float or None
        Frequency the ppm term scales with (see :func:`tolerance_hz`).
    dc_halfwidth_hz : float
        Half-width of the DC spike's region, Hz (0 for real captures: only the guard bins count).
    bins, ppm : float
        Tolerance terms (see :func:`tolerance_hz`).
    on_fractions, keyed_fast : sequence, optional
        Each capture's on-fraction (None: not resolved in time) and whether its tone is keyed
        faster than the time track resolves; given, captures not present alike in time with the
        reference are named (``unlike_in_time``).

    Returns
    -------
    SameSignal

    Examples
    --------
    >>> r = same_signal([39.7e3, 41.8e3], 2.4e6 / 4096, 100e6)   # two transmitters 2.1 kHz apart
    >>> r.reference, r.disagree
    (0, ((1, 2100.0),))
    >>> same_signal([39.7e3, None, 100.0], 585.9).rejected       # absent, and the DC spike
    (1, 2)
    """
    tol = tolerance_hz(bin_width_hz, reference_hz, bins=bins, ppm=ppm)
    f = np.array([np.nan if v is None else float(v) for v in offsets_hz], dtype=float)
    absent = tuple(int(i) for i in np.flatnonzero(~np.isfinite(f)))
    dc = tuple(int(i) for i in np.flatnonzero(np.isfinite(f))
               if on_dc(f[i], bin_width_hz, dc_halfwidth_hz))
    usable = [i for i in range(f.size) if i not in absent and i not in dc]
    if not usable:
        return SameSignal(tol, None, absent, dc, ())
    # The reference agrees with the most others; ties go to the earliest capture.
    agree = [sum(abs(f[i] - f[j]) <= tol for j in usable) for i in usable]
    ref = usable[int(np.argmax(agree))]
    disagree = tuple((i, float(f[i] - f[ref])) for i in usable if abs(f[i] - f[ref]) > tol)
    unlike = ()
    if on_fractions is not None:
        fast = list(keyed_fast) if keyed_fast is not None else [False] * f.size
        on, wrong = list(on_fractions), {i for i, _ in disagree}
        unlike = tuple(i for i in usable if i != ref and i not in wrong and (
            bool(fast[i]) != bool(fast[ref])
            or (on[i] is not None and on[ref] is not None and abs(on[i] - on[ref]) > ON_FRACTION_TOLERANCE)))
    return SameSignal(tol, ref, absent, dc, disagree, unlike)
