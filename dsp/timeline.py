"""What the capture pass's fine time track tells about a tone: when it is present, its power while
present, and how its level changes over the capture.

Notes
-----
The track (:class:`dsp.spectrum.Psd` ``track``) holds the PSD summed into sub-bands for each time
slot of the capture. Per slot, the floor is the median over the noise-only sub-bands of each
sub-band's level relative to its own average (so the band's shape cancels), times the capture's
floor density; the tone's power is the excess over that floor in the sub-bands that hold the tone's
band, less the average excess of whatever else shares those sub-bands (taken as steady). The
per-slot noise is measured, not modelled: a robust spread (1.4826 MAD) of the noise-only sub-bands'
relative levels (those of at most SPREAD_SLOTS evenly spaced slots: a few hundred thousand values).

The decision "present in a slot" is made at the finest time resolution (slots merged 1, 2, 4, ...)
at which the tone's strong slots (98th percentile) stand at least DETECT_MARGIN deviations above
the floor (the larger of the noise's and the on-slots' own slot-to-slot scatter); then a slot counts as "on" when its tone power exceeds ON_THRESHOLD deviations.
A tone too weak for even the coarsest resolution (8 slots) gets no on-fraction (None); so does a
tone that stands well clear of the noise in single slots but whose level jumps from slot to slot
beyond that even when they are merged (keying or pulses faster than the slots: a slot holds part
of a burst), which is said (``varies_within_slots``).

The level change is read over the on-time, in up to 16 blocks of equal duration (at least four
on-slots each on average): the spread of the block means (dB) counts when it is at least
LEVEL_CHANGE_DB and five times their combined standard error (from the slots' scatter within the
blocks, pooled); a straight line through the block means that explains it (residuals below a
tenth of the change, or twice the blocks' standard error) makes it a drift, reported in dB/s.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: A slot counts as "on" when the tone's power in it exceeds this many noise deviations.
ON_THRESHOLD = 5.0
#: The time resolution is fine enough when the strong slots stand this many deviations clear.
DETECT_MARGIN = 10.0
#: Level changes below this (dB) are not reported (a dongle's gain wanders by tenths of a dB).
LEVEL_CHANGE_DB = 1.0
#: Sub-bands whose average level is within this of the median sub-band's (dB) count as noise-only.
NOISE_SUBBAND_DB = 0.5
#: Slots worked at a time, and the most (evenly spaced) whose noise levels give the noise's
#: robust spread: the work arrays stay a few MB at any capture length (DEVELOPERS.md, Memory).
CHUNK_SLOTS = 2048
SPREAD_SLOTS = 2048
#: Blocks the on-time is cut into for the level change (fewer when there are fewer than
#: MIN_BLOCK_SLOTS on-slots per block).
LEVEL_BLOCKS = 16
MIN_BLOCK_SLOTS = 4
#: A change is a drift when a straight line leaves residuals (RMS) below this fraction of it (a
#: step half-way leaves a quarter).
DRIFT_RESIDUAL = 0.1


@dataclass(frozen=True)
class Timeline:
    """A tone's time-resolved reading.

    Attributes
    ----------
    on_fraction : float or None
        Fraction of the capture's (non-zero) time in which the tone stands above the noise; None
        when the tone is too weak to resolve in time.
    on_power : float
        Mean tone power while on, FS**2 (the whole-capture power when ``on_fraction`` is None).
    slot_s : float
        Time resolution of the on/off decision, s.
    level_change_db : float
        Spread of the tone's level over its on-time, dB (0 when within the readings' scatter or
        below LEVEL_CHANGE_DB).
    drift_db_per_s : float or None
        Slope of the level, dB/s, when the change is a steady drift; None for steps or no change.
    varies_within_slots : bool
        The tone stands clear of the noise in the finest slots, but its level there scatters far
        beyond the noise at every resolution tried: keyed or pulsed faster than the slots resolve
        (``on_fraction`` is then None, ``on_power`` the whole-capture power).
    """

    on_fraction: float | None
    on_power: float
    slot_s: float
    level_change_db: float = 0.0
    drift_db_per_s: float | None = None
    varies_within_slots: bool = False


def _weighted_mean(values: np.ndarray, counts: np.ndarray, rows: int = 1024) -> np.ndarray:
    """The counts-weighted mean of the rows of a float32 array, summed in float64 a few rows at a
    time (no float64 copy of the whole array)."""
    total = np.zeros(values.shape[1])
    for i in range(0, len(values), rows):
        total += counts[i : i + rows].astype(float) @ values[i : i + rows].astype(float)
    return total / float(counts.sum(dtype=float))


def _merge(values: np.ndarray, counts: np.ndarray, g: int):
    """Merge consecutive rows of ``values`` (weighted by ``counts``) in groups of ``g``. ``values``
    is a work array of the caller's: it is scaled in place for g > 1."""
    if g == 1:
        return values, counts
    starts = np.arange(0, len(counts), g)
    c = np.add.reduceat(counts, starts)
    values *= counts[:, None]
    v = np.add.reduceat(values, starts, axis=0)
    v /= c[:, None]
    return v, c


def _noise_levels(track: np.ndarray, rows, counts: np.ndarray, noise_cols: np.ndarray,
                  noise_mean: np.ndarray, g: int):
    """The noise at resolution ``g`` (the live slots, ``rows`` of the track or all when None, merged
    ``g`` at a time): per merged slot, the floor's level relative to the capture's (the median over
    the noise-only sub-bands of each one's level relative to its mean); the robust spread (1.4826
    MAD) of those relative levels, each divided by its slot's floor; and the merged counts.

    Worked CHUNK_SLOTS slots at a time, and the spread taken from at most SPREAD_SLOTS evenly spaced
    merged slots, so the work arrays stay a few MB whatever the capture's length."""
    n = len(counts)
    n_merged = -(-n // g)
    every = -(-n_merged // SPREAD_SLOTS)
    floor_ratio = np.empty(n_merged)
    merged_counts = np.empty(n_merged, np.float32)
    picked = []
    chunk = max(1, CHUNK_SLOTS // g) * g
    m = len(noise_cols)
    for start in range(0, n, chunk):
        stop = min(n, start + chunk)
        part = track[start:stop] if rows is None else track.take(rows[start:stop], axis=0)
        rel, c = _merge(part.take(noise_cols, axis=1), counts[start:stop], g)  # take: 3x a mask's speed
        rel /= noise_mean
        rel.sort(axis=1)  # the per-slot median (numpy's vectorised sort: 5x np.median's partition)
        ratio = 0.5 * (rel[:, (m - 1) // 2].astype(float) + rel[:, m // 2])
        first = start // g
        floor_ratio[first : first + len(c)] = ratio
        merged_counts[first : first + len(c)] = c
        pick = np.arange((-first) % every, len(c), every)
        if pick.size:
            picked.append(rel[pick] / ratio[pick, None].astype(np.float32))
    rel = np.concatenate(picked)
    rel -= np.float32(np.median(rel))
    sigma_sub = 1.4826 * float(np.median(np.abs(rel, out=rel)))
    return floor_ratio, sigma_sub, merged_counts


def tone_timeline(spectrum, floor_density: float, usable: np.ndarray, tone_bins: tuple[int, int],
                  power: float) -> Timeline:
    """The time-resolved reading of a tone whose band is bins ``tone_bins`` (first, one past last)
    and whose whole-capture power is ``power`` (FS**2); ``usable`` marks the bins clear of the DC
    spike and the band edges (:func:`dsp.floor.usable_mask`).

    Noise-only sub-bands are those wholly usable, apart from the tone's, whose average level is
    within NOISE_SUBBAND_DB of the median sub-band's (a signal raises its sub-band's level)."""
    track = spectrum.track
    unknown = Timeline(None, float(power), 0.0)
    if track is None or len(track) < 8:
        return unknown
    bins = spectrum.track_bins
    widths = np.diff(bins, axis=1)[:, 0]
    inside = np.add.reduceat(usable.astype(np.int64), bins[:, 0]) == widths
    lo, hi = tone_bins
    sel = (bins[:, 1] > lo) & (bins[:, 0] < hi)
    counts = spectrum.track_counts.astype(np.float32)
    live = np.flatnonzero(counts > 0)  # slots wholly in runs of exactly-zero samples are left out
    if len(live) < 8:
        return unknown
    mean = _weighted_mean(track, counts)  # (a dead slot weighs nothing)
    candidates = inside & ~sel & (mean > 0)
    if candidates.sum() < 4:
        return unknown
    noise = candidates & (mean <= np.median(mean[candidates]) * 10 ** (NOISE_SUBBAND_DB / 10))
    if noise.sum() < 4:
        return unknown
    bw = spectrum.bin_width_hz
    sel_width_hz = float(widths[sel].sum() * bw)
    rows = None if len(live) == len(counts) else live
    tone_cols = track.take(np.flatnonzero(sel), axis=1).astype(float)
    if rows is not None:
        tone_cols, counts = tone_cols[rows], counts[rows]
    noise_cols = np.flatnonzero(noise)
    noise_mean = mean[noise].astype(np.float32)
    g = 1
    strong = False  # in the finest slots, the tone's strong ones stand clear of the noise alone
    while len(counts) // g >= 8:
        floor_ratio, sigma_sub, c = _noise_levels(track, rows, counts, noise_cols, noise_mean, g)
        tone_v, _ = _merge(tone_cols.copy() if g > 1 else tone_cols, counts, g)
        c = c.astype(float)
        excess = (tone_v * widths[sel]).sum(axis=1) * bw - floor_density * floor_ratio * sel_width_hz
        mean_excess = c @ excess / c.sum()
        tone_power = excess - (mean_excess - power)
        sigma = sigma_sub * np.sqrt(sel.sum()) * floor_density * floor_ratio * widths[sel].mean() * bw
        # While on, the tone's slots scatter more than the noise alone (the tone-noise cross term,
        # the signal's own fluctuation): measured from differences of neighbouring on-slots, which
        # slow changes of level do not enter; of the slots on with both neighbours on, when there
        # are enough (short bursts: a slot at a burst's edge is on for part of its time only).
        maybe_on = tone_power > ON_THRESHOLD * sigma
        spread = np.median(sigma)
        inner = _inner(maybe_on)
        steady = inner if inner.sum() >= 8 else maybe_on
        if steady.sum() >= 8:
            steps = np.diff(tone_power[steady])
            spread = max(spread, 1.4826 * np.median(np.abs(steps - np.median(steps))) / np.sqrt(2.0))
        if np.quantile(tone_power, 0.98) >= DETECT_MARGIN * spread:
            break
        if g == 1:
            strong = bool(np.quantile(tone_power, 0.98) >= DETECT_MARGIN * np.median(sigma))
        g *= 2
    else:
        return Timeline(None, float(power), spectrum.slot_s, varies_within_slots=True) if strong else unknown
    on = tone_power > ON_THRESHOLD * sigma
    slot_s = spectrum.slot_s * g
    if not on.any():
        return Timeline(0.0, float(power), slot_s)
    # A slot next to an "off" one may be on for part of its time only: it counts by its power
    # relative to the fully-on slots' median, and the on-power is read from the fully-on slots.
    inner = _inner(on)
    full = tone_power[inner] if inner.any() else tone_power[on]
    level = float(np.median(full))
    weight = np.where(inner, 1.0, np.clip(tone_power / level, 0.0, 1.0)) * on
    on_fraction = float(min(1.0, c @ weight / c.sum()))
    on_power = float(c[inner] @ tone_power[inner] / c[inner].sum()) if inner.any() else level
    change, drift = _level_change(tone_power[on], np.flatnonzero(on) * slot_s)
    return Timeline(on_fraction, on_power, slot_s, change, drift)


def _inner(on: np.ndarray) -> np.ndarray:
    """The slots that are on with both neighbours on (the capture's ends count as on)."""
    return on & np.concatenate([[True], on[:-1]]) & np.concatenate([on[1:], [True]])


def _level_change(power: np.ndarray, t: np.ndarray) -> tuple[float, float | None]:
    """(level change in dB, drift in dB/s or None) over the on-slots (their power and times), cut
    into at most LEVEL_BLOCKS blocks of equal duration holding MIN_BLOCK_SLOTS slots each on
    average. The block means' standard errors come from the slots' relative scatter about their
    block's mean, pooled over the blocks (the signal's own fluctuation included): a block of a few
    slots alone would give an error that is itself uncertain by a factor of two or more."""
    n_blocks = min(LEVEL_BLOCKS, len(power) // MIN_BLOCK_SLOTS)
    if n_blocks < 3 or t[-1] <= t[0]:
        return 0.0, None
    edges = np.linspace(t[0], t[-1], n_blocks + 1)
    block = np.clip(np.searchsorted(edges, t, side="right") - 1, 0, n_blocks - 1)
    n = np.bincount(block, minlength=n_blocks)
    full = n > 0
    p = np.bincount(block, power, n_blocks)[full] / n[full]
    squares = np.bincount(block, power**2, n_blocks)[full] / n[full]
    tb = np.bincount(block, t, n_blocks)[full] / n[full]
    if len(p) < 3 or not np.all(p > 0):
        return 0.0, None
    # The slots' relative scatter about their block's mean, pooled: a level that changes (a ramp
    # of tens of dB) scatters alike in relative terms at every level.
    relative = np.sum(n[full] * np.maximum(squares - p**2, 0.0) / p**2) / max(int(np.sum(n[full] - 1)), 1)
    db = 10 * np.log10(p)
    u_db = 10 / np.log(10) * np.sqrt(relative / n[full])
    i, j = int(np.argmax(db)), int(np.argmin(db))
    change = float(db[i] - db[j])
    if change < LEVEL_CHANGE_DB or change < 5.0 * np.hypot(u_db[i], u_db[j]):
        return 0.0, None
    slope, intercept = np.polyfit(tb, db, 1)
    residual = db - (slope * tb + intercept)
    if np.sqrt(np.mean(residual**2)) < max(DRIFT_RESIDUAL * change, 2.0 * float(np.median(u_db))):
        return change, float(slope)
    return change, None
