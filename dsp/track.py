"""The capture pass's fine time track: the PSD summed into sub-bands for each time slot, its
arithmetic on each batch of spectra and its storage while the pass runs.

Used by :class:`dsp.spectrum.PsdAccumulator`; the readings made from the result live in
:mod:`dsp.timeline`. DEVELOPERS.md (the pass) gives the figures behind the choices below.

- A slot is a whole number of segments, chosen from the capture's length so that there are at most
  MAX_SLOTS of them, merged pairwise when a stream of unknown length outgrows them.
- A batch of spectra is summed slot by slot and bin by bin in one read when a slot holds three or
  more segments (:func:`batch_sums`); the PSD's column sums and the slots' sub-band sums come from
  those few rows.
- The slots are stored as bfloat16 (the top half of a float32: 8 significant bits) while the pass
  runs: half float32's memory, rounded to nearest, each slot once (the slot a batch ends in the
  middle of is held in float32 for the next).
"""

from __future__ import annotations

import numpy as np

#: At most this many time slots (merged pairwise beyond it; a file's length sets the slot length at
#: the start), each holding the PSD summed into at most TRACK_SUBBANDS sub-bands: 4 MiB as bfloat16
#: while the pass runs, 8 MiB as the result's float32, whatever the capture's length.
MAX_SLOTS = 16384
TRACK_SUBBANDS = 128
#: From this many segments per slot (long captures) the spectra are summed per slot first, in one
#: read, and the column and sub-band sums taken from those; below it, each is its own read.
GROUPED_SLOTS = 3


def to_bfloat16(x: np.ndarray, ties_to_even: bool = True) -> np.ndarray:
    """Non-negative float32 -> bfloat16 (the top 16 bits of a float32: its exponent and 8 bits of
    significand, relative step 2**-8), rounded to nearest; as a uint16 view. Ties go to even: sums
    of bfloat16 values, as in the pairwise merges, often fall on one, and rounding those up would
    bias them. ``ties_to_even=False`` rounds them up, in one operation instead of four: for sums
    of many products, where a tie (the low 16 bits exactly 0x8000) has a chance of 2**-16."""
    u = np.ascontiguousarray(x, np.float32).view(np.uint32)
    if ties_to_even:
        u = u + ((u >> 16) & np.uint32(1)) + np.uint32(0x7FFF)
    else:
        u = u + np.uint32(0x8000)
    return u.view(np.uint16)[..., 1::2] if np.little_endian else u.view(np.uint16)[..., 0::2]


def from_bfloat16(b: np.ndarray) -> np.ndarray:
    """bfloat16 held as uint16 -> float32 (exact), in one new array."""
    return np.left_shift(b, np.uint32(16), dtype=np.uint32).view(np.float32)


def subband_sums(rails: np.ndarray, n_sub: int, width: int, squared: bool = True) -> np.ndarray:
    """Each row of ``rails`` summed over the track's sub-bands (``width`` rails each; the rails
    past the last whole one join it): of ``rails`` as they are, or (``squared=False``) of their
    squares."""
    n_rows = len(rails)
    whole = rails[:, : n_sub * width].reshape(n_rows, n_sub, width)
    rows = np.einsum("isk->is", whole) if squared else np.einsum("isk,isk->is", whole, whole)
    if n_sub * width < rails.shape[1]:
        rest = rails[:, n_sub * width :]
        rows[:, -1] += rest.sum(axis=1) if squared else np.einsum("ij,ij->i", rest, rest)
    return rows


def slot_bins(rails: np.ndarray, head: int, slot_len: int, scratch: np.ndarray) -> np.ndarray:
    """Sum of ``rails**2`` over the rows of each slot: the first ``head`` rows (the end of a slot
    begun in an earlier batch), then every ``slot_len`` rows, then what is left; written into the
    first rows of ``scratch``."""
    n_rows = len(rails)
    whole = (n_rows - head) // slot_len
    tail = n_rows - head - whole * slot_len
    out = scratch[: int(head > 0) + whole + int(tail > 0)]
    row = 0
    if head:
        np.einsum("ij,ij->j", rails[:head], rails[:head], out=out[0])
        row = 1
    if whole:
        mid = rails[head : head + whole * slot_len].reshape(whole, slot_len, -1)
        np.einsum("sij,sij->sj", mid, mid, out=out[row : row + whole])
    if tail:
        np.einsum("ij,ij->j", rails[n_rows - tail :], rails[n_rows - tail :], out=out[-1])
    return out


class SlotTrack:
    """The track's slots while a pass runs (bfloat16), and the result's track (float32).

    Parameters
    ----------
    nperseg : int
        Segment (FFT) length.
    one_sided : bool
        Real input: bins 0..nperseg/2 (the Nyquist bin joins the last sub-band).
    expected_segments : int, optional
        The capture's length in segments, when known: the slots start at their final length.
    """

    def __init__(self, nperseg: int, one_sided: bool, expected_segments: int | None = None):
        self.one_sided = bool(one_sided)
        self.n_bins = nperseg // 2 + 1 if one_sided else nperseg
        # Sub-bands of equal width in FFT order.
        split = nperseg // 2 if one_sided else nperseg
        n_sub = TRACK_SUBBANDS
        while n_sub > 1 and (split % n_sub or split // n_sub < 8):
            n_sub //= 2
        self.n_sub, self.sub_width = n_sub, split // n_sub
        self.slot_len = 1
        capacity = 256
        if expected_segments:
            expected_segments = max(1, int(expected_segments))
            self.slot_len = -(-expected_segments // MAX_SLOTS)
            capacity = -(-expected_segments // self.slot_len)
        self._slots = np.zeros((capacity, n_sub), np.uint16)
        self._open: tuple[int, np.ndarray] | None = None  # (slot, float32 part) held for the next batch
        self._dead = np.zeros(capacity, np.int64)  # segments in runs of zeros, per slot

    def batch_sums(self, rails: np.ndarray, first_segment: int, slot_len: int, scratch):
        """(column sums of ``rails**2``, float32; the slots' sub-band sums, float32, one row per
        slot the batch touches) of a batch of spectra as interleaved real and imaginary parts
        whose first row is segment ``first_segment``. ``scratch(rows, columns)`` gives this
        thread's work array."""
        n_rows, n_sub, width = len(rails), self.n_sub, 2 * self.sub_width
        first_break = (-first_segment) % slot_len  # first row that starts a new slot
        if slot_len >= GROUPED_SLOTS:
            per_slot = slot_bins(rails, min(first_break, n_rows), slot_len,
                                 scratch(2 + n_rows // slot_len, rails.shape[1]))
            return per_slot.sum(axis=0), subband_sums(per_slot, n_sub, width)
        columns = np.einsum("ij,ij->j", rails, rails)
        rows = subband_sums(rails, n_sub, width, squared=False)
        if first_break == 0 and n_rows % slot_len == 0:  # whole slots (every row of a short capture)
            return columns, rows.reshape(n_rows // slot_len, slot_len, n_sub).sum(axis=1) if slot_len > 1 else rows
        starts = np.arange(first_break, n_rows, slot_len)
        if first_break:
            starts = np.concatenate([[0], starts])
        return columns, np.add.reduceat(rows, starts, axis=0)

    def store(self, first_slot: int, slot_sums: np.ndarray, rounded: np.ndarray, ends_slot: bool,
              dead: np.ndarray | None = None) -> None:
        """Store one batch's slot sums (the batches' results arrive in order): ``rounded``, their
        bfloat16 values, as they are; the slot a batch begins in the middle of gets the sum of its
        parts, rounded once here. A batch that ends in the middle of a slot (not ``ends_slot``)
        leaves that slot's float32 part held for the next. ``dead``: segments per slot in runs of
        zeros."""
        self._slots[first_slot : first_slot + len(rounded)] = rounded
        if self._open is not None and self._open[0] == first_slot:
            slot_sums[0] += self._open[1]
            self._slots[first_slot] = to_bfloat16(slot_sums[0])
        self._open = None if ends_slot else (first_slot + len(slot_sums) - 1, slot_sums[-1])
        if dead is not None:
            self._dead[first_slot : first_slot + len(dead)] += dead

    def make_room(self, n_segments: int, count: int, drain) -> None:
        """Make sure there are slots for segments ``n_segments .. n_segments + count - 1``: grow, or
        merge the slots pairwise (doubling their length) when they would pass MAX_SLOTS, after
        ``drain()`` has stored every batch so far."""
        last = (n_segments + count - 1) // self.slot_len
        while last >= MAX_SLOTS:
            drain()  # the slots about to merge must be complete
            used = -(-n_segments // self.slot_len)
            slots = self._slots[: used + used % 2]
            if len(slots) < used + used % 2:
                slots = np.vstack([slots, np.zeros((1, self.n_sub), np.uint16)])
            merged = to_bfloat16(from_bfloat16(slots[0::2]) + from_bfloat16(slots[1::2]))
            self._slots = np.zeros((MAX_SLOTS, self.n_sub), np.uint16)
            self._slots[: len(merged)] = merged
            # The last merged slot may be completed by the next batch: held in float32 again.
            self._open = (len(merged) - 1, from_bfloat16(merged[-1]))
            dead = np.concatenate([self._dead[:used], [0] * (used % 2)])
            self._dead = np.zeros(MAX_SLOTS, np.int64)
            self._dead[: len(merged)] = dead[0::2] + dead[1::2]
            self.slot_len *= 2
            last = (n_segments + count - 1) // self.slot_len
        if last >= len(self._slots):
            grown = np.zeros((min(MAX_SLOTS, max(2 * len(self._slots), last + 1)), self.n_sub), np.uint16)
            grown[: len(self._slots)] = self._slots
            self._slots = grown
            self._dead = np.concatenate([self._dead, np.zeros(len(grown) - len(self._dead), np.int64)])

    def result(self, n_segments: int, scale: float):
        """The track as densities in the PSD's bin order: (track, live segments per slot, bins).
        ``scale`` turns a segment's |FFT|**2 into a density (1 / (fs * sum(w**2))). The slots'
        storage is freed: the track takes no more batches."""
        n_slots = -(-n_segments // self.slot_len)
        slot_counts = np.full(n_slots, self.slot_len, np.int64)
        slot_counts[-1] = n_segments - (n_slots - 1) * self.slot_len
        slot_counts -= self._dead[:n_slots]  # live segments: a slot of none reads zero
        n_sub, width = self.n_sub, self.sub_width
        edges = np.arange(n_sub + 1) * width
        edges[-1] = self.n_bins
        widths = np.diff(edges)
        # Real input: every bin but DC and Nyquist is folded (x2); the two outer sub-bands hold one
        # unfolded bin each, so their density reads low by at most 1/width (they are never used).
        scale = (2.0 if self.one_sided else 1.0) * scale
        # Widened to float32 (for complex input their sub-bands put in the PSD's order) a few
        # thousand rows at a time: no copy of the whole.
        slots = self._slots[:n_slots]
        track = np.empty(slots.shape, np.float32)
        order = np.roll(np.arange(n_sub), 0 if self.one_sided else n_sub // 2)  # each column's sub-band
        bits = track.view(np.uint32)
        for i in range(0, n_slots, 4096):
            np.left_shift(slots[i : i + 4096].take(order, axis=1), np.uint32(16), out=bits[i : i + 4096],
                          dtype=np.uint32)
        self._slots = None
        track *= (scale / np.maximum(slot_counts, 1)).astype(np.float32)[:, None]
        track *= (1.0 / widths).astype(np.float32)
        track.setflags(write=False)
        return track, slot_counts, np.stack([edges[:-1], edges[1:]], axis=1)
