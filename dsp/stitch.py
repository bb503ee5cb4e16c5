"""Stitching curves measured at several tunings into one across frequency: each frequency from the
capture tuned closest to it, overlapping edges trimmed at the midpoint between centres."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np


#: Distances to two tunings that differ by less than this are a tie, Hz (float64 rounding of a GHz
#: frequency is about 1e-7 Hz).
TIE_HZ = 1e-3


def stitch_masks(center_hz: Sequence[float], frequency_hz: Sequence, coverage_hz: Sequence) -> list:
    """Which points of several curves to keep when stitching them into one across frequency.

    Parameters
    ----------
    center_hz : sequence of float
        Centre (tuning) frequency of each capture, Hz.
    frequency_hz : sequence of array_like
        Absolute frequencies of each curve's points, Hz.
    coverage_hz : sequence of (low_hz, high_hz)
        Usable range of each capture, absolute Hz.

    Returns
    -------
    list of ndarray of bool
        Per curve, the points to keep: a point is dropped when another capture that also covers it
        is tuned closer to it (ties, within :data:`TIE_HZ`, go to the earlier capture: a point at the
        midpoint of two tunings whose centres are not whole hertz must not be dropped by both for a
        rounding error). Overlapping edges are thereby
        trimmed at the midpoint between neighbouring centres, where each capture is furthest from
        its own band edge.
    """
    centers = np.asarray(center_hz, dtype=float)
    if not (len(centers) == len(frequency_hz) == len(coverage_hz)):
        raise ValueError("center_hz, frequency_hz and coverage_hz must have one entry per capture")
    keep = []
    for i, f in enumerate(frequency_hz):
        f = np.asarray(f, dtype=float)
        mask = np.ones(f.shape, dtype=bool)
        di = np.abs(f - centers[i])
        for j, (lo, hi) in enumerate(coverage_hz):
            if j == i:
                continue
            covered = (f >= lo) & (f <= hi)
            dj = np.abs(f - centers[j])
            closer = (dj < di - TIE_HZ) | ((np.abs(dj - di) <= TIE_HZ) & (j < i))
            mask &= ~(covered & closer)
        keep.append(mask)
    return keep


def stitch_offsets(center_hz: Sequence[float], offset_hz: Sequence, band_hz: Sequence) -> tuple[list, list]:
    """Absolute frequencies of sub-bands measured at several tunings, and which to keep in one curve.

    Parameters
    ----------
    center_hz : sequence of float
        Centre (tuning) frequency of each capture, Hz.
    offset_hz : sequence of array_like
        Per tuning, the sub-band centres as offsets from its centre frequency, Hz.
    band_hz : sequence of (low_hz, high_hz)
        Per tuning, its usable band as offsets from its centre frequency, Hz.

    Returns
    -------
    frequency_hz : list of ndarray
        Per tuning, the absolute sub-band centres, Hz.
    keep : list of ndarray of bool
        Per tuning, the sub-bands to keep (:func:`stitch_masks`: each frequency from the capture tuned
        closest to it).
    """
    centers = [float(c) for c in center_hz]
    freqs = [c + np.asarray(o, dtype=float) for c, o in zip(centers, offset_hz)]
    cover = [(c + float(lo), c + float(hi)) for c, (lo, hi) in zip(centers, band_hz)]
    return freqs, stitch_masks(centers, freqs, cover)
