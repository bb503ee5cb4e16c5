"""Narrow lines in a noise spectrum: spurs and carriers that a band power must leave out.

A noise-source measurement compares band powers of broadband noise (hot against cold, with and
without the DUT). A real dongle adds lines of its own (clock harmonics, the reference's spurs), and
an open bench picks up carriers; each adds the same power to the hot and the cold reading, so Y
reads low and the noise figure high, by an amount that depends on how strong the line is against
the noise in its sub-band. This module finds such lines so that the band powers can leave them out,
the same frequencies in every spectrum compared.

Notes
-----
A bin is a line's when its density stands above the *local* level of the noise (a running median
over :data:`LOCAL_BINS` bins, corrected for the median's bias for a chi-square with the spectrum's
degrees of freedom, :func:`rxbench.dsp.floor.median_bias`) by more than the chi-square tail allows
for noise at a false-alarm probability of :data:`FALSE_ALARM` over all the bins looked at
(:func:`rxbench.dsp.floor.detection_threshold`). The running median follows the slow shape of the
noise (the dongle's IF response, an ENR slope), so only what is narrow stands out. A run of such
bins wider than :data:`MAX_LINE_BINS` is not a line but a slope (a filter's skirt) and is left in.
Each line is widened by :data:`GUARD_BINS` either side: a Hann window spreads a line over its main
lobe of +/-2 bins.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from rxbench.dsp.floor import detection_threshold, median_bias
from rxbench.dsp.spectrum import Psd

__all__ = ["FALSE_ALARM", "LOCAL_BINS", "GUARD_BINS", "MAX_LINE_BINS", "Lines", "find_lines", "in_intervals",
           "merge_intervals"]

#: Probability that noise alone shows a line anywhere among the bins looked at.
FALSE_ALARM = 1e-3
#: Width of the running median that gives the noise's local level, bins (odd).
LOCAL_BINS = 65
#: Bins added either side of a line (the Hann window's main lobe is +/-2 bins).
GUARD_BINS = 2
#: A run of bins above the threshold wider than this is a slope, not a line.
MAX_LINE_BINS = 9


@dataclass(frozen=True)
class Lines:
    """The narrow lines found in a spectrum.

    Attributes
    ----------
    intervals_hz : ndarray
        ``(n, 2)``: each line's low and high frequency (bin centres, guard included), Hz.
    peak_hz : ndarray
        Each line's strongest bin, Hz.
    excess_db : ndarray
        Each line's strongest bin over the local noise level, dB.
    """

    intervals_hz: np.ndarray
    peak_hz: np.ndarray
    excess_db: np.ndarray

    def __len__(self) -> int:
        return int(self.peak_hz.size)


def find_lines(spectrum: Psd, mask: np.ndarray | None = None, *, false_alarm: float = FALSE_ALARM) -> Lines:
    """Narrow lines standing above the local noise level of ``spectrum``.

    Parameters
    ----------
    spectrum : Psd
        A Welch spectrum of noise (with whatever lines it holds).
    mask : ndarray of bool, optional
        The bins to look in (default: all); lines are reported only where a bin of theirs is in it.
    false_alarm : float
        Probability that noise alone gives a line anywhere in the bins looked at.

    Returns
    -------
    Lines

    Examples
    --------
    >>> from rxbench.dsp.spectrum import psd
    >>> rng = np.random.default_rng(1)
    >>> n = 1 << 18
    >>> x = (rng.standard_normal(n) + 1j * rng.standard_normal(n)) / np.sqrt(2)
    >>> x += 0.1 * np.exp(2j * np.pi * 0.1 * np.arange(n))   # a spur at fs/10, about 8 dB above the noise
    >>> lines = find_lines(psd(x, 1.0, nperseg=1024))
    >>> len(lines), round(float(lines.peak_hz[0]), 3)
    (1, 0.1)
    """
    d = np.asarray(spectrum.density, dtype=float)
    look = np.ones(d.size, bool) if mask is None else np.asarray(mask, bool)
    if not 0 < false_alarm < 1:
        raise ValueError(f"{false_alarm=} must be in (0, 1)")
    empty = Lines(np.zeros((0, 2)), np.zeros(0), np.zeros(0))
    if look.sum() < LOCAL_BINS:
        return empty
    local = ndimage.median_filter(d, size=LOCAL_BINS, mode="nearest") / median_bias(spectrum.dof)
    threshold = detection_threshold(spectrum.dof, int(look.sum()), false_alarm)
    above = look & (d > threshold * local)
    labels, n = ndimage.label(above)
    if n == 0:
        return empty
    f = spectrum.frequency_hz
    intervals, peaks, excess = [], [], []
    for run in ndimage.find_objects(labels):
        lo, hi = run[0].start, run[0].stop  # bins [lo, hi)
        if hi - lo > MAX_LINE_BINS:
            continue
        peak = lo + int(np.argmax(d[lo:hi]))
        a, b = max(lo - GUARD_BINS, 0), min(hi - 1 + GUARD_BINS, d.size - 1)
        intervals.append((f[a], f[b]))
        peaks.append(f[peak])
        excess.append(10 * np.log10(d[peak] / local[peak]))
    if not peaks:
        return empty
    return Lines(np.array(intervals, float), np.array(peaks, float), np.array(excess, float))


def merge_intervals(*interval_sets) -> np.ndarray:
    """The union of several ``(n, 2)`` sets of [low, high] intervals, as sorted, disjoint intervals.

    Examples
    --------
    >>> merge_intervals(np.array([[1.0, 3.0]]), np.array([[2.0, 4.0], [6.0, 7.0]])).tolist()
    [[1.0, 4.0], [6.0, 7.0]]
    """
    rows = [np.asarray(s, float).reshape(-1, 2) for s in interval_sets]
    all_rows = np.concatenate(rows) if rows else np.zeros((0, 2))
    if all_rows.size == 0:
        return np.zeros((0, 2))
    all_rows = all_rows[np.argsort(all_rows[:, 0])]
    out = [list(all_rows[0])]
    for lo, hi in all_rows[1:]:
        if lo <= out[-1][1]:
            out[-1][1] = max(out[-1][1], hi)
        else:
            out.append([lo, hi])
    return np.array(out, float)


def in_intervals(frequency_hz, intervals_hz) -> np.ndarray:
    """Which of ``frequency_hz`` fall in any of the ``(n, 2)`` closed intervals ``intervals_hz``."""
    f = np.asarray(frequency_hz, float)
    out = np.zeros(f.shape, bool)
    for lo, hi in np.asarray(intervals_hz, float).reshape(-1, 2):
        out |= (f >= lo) & (f <= hi)
    return out
