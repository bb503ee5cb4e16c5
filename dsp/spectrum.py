"""The one spectral path: a streaming Welch PSD accumulator with its time track, and a
band-integration helper.

Every reading rxbench makes (tone power, noise density, SNR, the noise-source methods) stands on the
averaged power spectral density this module produces. The windows and their figures live in
:mod:`dsp.windows` (re-exported here), the time track's arithmetic and storage in
:mod:`dsp.track`, its readings in :mod:`dsp.timeline`.

References
----------
Welch, P. D., "The use of fast Fourier transform for the estimation of power spectra", IEEE Trans.
Audio Electroacoust. AU-15(2), 1967.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np
import scipy.fft

from rxbench.dsp.track import MAX_SLOTS, TRACK_SUBBANDS, SlotTrack, to_bfloat16  # noqa: F401  (re-exported)
from rxbench.dsp.windows import (  # noqa: F401  (kernel, window_properties: re-exported)
    COSINE_WINDOWS, WindowProperties, get_window, kernel, welch_dof, window_properties)


class Inline:
    """The runner an accumulator uses unless given another: every job computed at once, in order.
    (A runner has ``submit(apply, fn, *args, inline=False)`` and ``drain()``; the command line's
    runs the jobs on worker threads and applies their results in the order submitted.)"""

    def submit(self, apply, fn, *args, inline: bool = False) -> None:
        apply(fn(*args))

    def drain(self) -> None:
        pass


#: Number of time-ordered sub-averages kept for Type A scatter (between N_BATCHES and 2*N_BATCHES).
N_BATCHES = 16
#: Segments transformed per FFT call (bounds memory: 64 x nperseg complex64).
_SEGMENTS_PER_CALL = 64
#: FFT calls per job handed to a worker: each hand-off costs the pass a thread wake-up and a
#: result applied by the main thread, which two calls share (DEVELOPERS.md, the pass).
_CALLS_PER_JOB = 2
#: Calls of fewer segments are computed by the thread that makes them (not worth a hand-off);
#: larger ones go to a worker, the joins of long captures' blocks (a slot's worth) among them.
_INLINE_BELOW = 4
#: A segment that starts or ends with this many exactly-zero samples is in or across a run of them.
DEAD_RUN = 16


def call_rows(slot_len: int) -> int:
    """Segments per FFT call: _SEGMENTS_PER_CALL, rounded up to whole slots when a slot is shorter
    (a call that starts on a slot boundary then ends on one)."""
    return -(-_SEGMENTS_PER_CALL // slot_len) * slot_len if slot_len <= _SEGMENTS_PER_CALL else _SEGMENTS_PER_CALL


@dataclass(frozen=True)
class Psd:
    """An averaged power spectral density in full-scale units.

    Attributes
    ----------
    frequency_hz : ndarray
        Bin centres, ascending: offsets from the centre frequency (-fs/2..fs/2) for complex input,
        0..fs/2 for real input.
    density : ndarray
        Averaged PSD, full-scale power per Hz (FS**2/Hz); ``density.sum() * bin_width_hz`` equals the
        mean power ``mean(|x|**2)``.
    batch_density : ndarray
        ``(n_batches, n_bins)`` time-ordered sub-averages of ``density`` (for Type A scatter).
    batch_counts : ndarray
        Segments behind each row of ``batch_density``.
    bin_width_hz, enbw_hz : float
        DFT bin width, and the window's equivalent noise bandwidth in Hz.
    dof : float
        Equivalent degrees of freedom of each bin of ``density`` (Welch 1967).
    n_segments : int
        Periodograms averaged.
    sample_rate_hz : float
    one_sided : bool
        True for real input (density folded onto positive frequencies).
    window : tuple
        The window samples (for kernels), as a tuple-free ndarray held read-only.
    track : ndarray or None
        ``(n_slots, n_subbands)`` float32: the fine time track, mean density (FS**2/Hz) of each
        sub-band in each time slot, in capture order (slots of exactly-zero samples included).
    track_counts : ndarray or None
        Live segments behind each slot (0: the slot lies in a run of exactly-zero samples).
    track_bins : ndarray or None
        ``(n_subbands, 2)``: first and one-past-last bin (indices into ``density``) of each sub-band.
    slot_s : float
        Time from one slot's start to the next, s.
    zero_fraction : float
        Fraction of the segments in or across runs of exactly-zero samples (dropped transfers,
        digital silence; so the runs' share of the capture to within a segment per run); they are
        left out of ``density``, ``batch_density``, ``track`` and ``dof``.
    """

    frequency_hz: np.ndarray
    density: np.ndarray
    batch_density: np.ndarray
    batch_counts: np.ndarray
    bin_width_hz: float
    enbw_hz: float
    dof: float
    n_segments: int
    sample_rate_hz: float
    one_sided: bool
    window: np.ndarray
    track: np.ndarray | None = None
    track_counts: np.ndarray | None = None
    track_bins: np.ndarray | None = None
    slot_s: float = 0.0
    zero_fraction: float = 0.0

    @property
    def nperseg(self) -> int:
        return int(self.window.size)

    def index_of(self, frequency_hz: float) -> int:
        """Index of the bin whose centre is nearest ``frequency_hz``."""
        return int(np.argmin(np.abs(self.frequency_hz - frequency_hz)))


class PsdAccumulator:
    """Streaming Welch estimator: feed blocks of any length, get the averaged PSD.

    Parameters
    ----------
    sample_rate_hz : float
        Sample rate, Hz.
    nperseg : int
        Segment (FFT) length, samples.
    window : str or tuple
        Any window ``scipy.signal.get_window`` knows; periodic form.
    overlap : float
        Fraction of ``nperseg`` by which consecutive segments overlap, 0 <= overlap < 1.
    one_sided : bool
        Real input: fold the spectrum onto positive frequencies.
    expected_samples : int, optional
        Length of the whole stream, when known (a file): the sub-averages then start at their final
        size instead of growing by merges, which gives the same sub-averages with the work in
        full-size batches from the first block.
    runner : optional
        Where the work runs (:class:`Inline` by default; the command line's spreads it over worker
        threads and applies the results in submission order, so the numbers are the same).

    Notes
    -----
    Segments run continuously across block boundaries, so the result does not depend on how the
    capture was cut into blocks. Complex64 input is transformed in single precision (``scipy.fft``,
    batches of up to 64 segments per call, handed to the runner); each call sums at most 64 segments
    in that precision (relative error below 1e-5), and
    the running sums are kept in float64. Time-ordered sub-averages (``N_BATCHES`` to ``2*N_BATCHES``
    of them, merged pairwise as the capture grows) give the Type A scatter of any reading.
    """

    def __init__(
        self,
        sample_rate_hz: float,
        nperseg: int = 4096,
        window: str | tuple = "hann",
        overlap: float = 0.5,
        one_sided: bool = False,
        expected_samples: int | None = None,
        runner=None,
    ):
        if not np.isfinite(sample_rate_hz) or sample_rate_hz <= 0:
            raise ValueError(f"{sample_rate_hz=} must be a positive number of Hz")
        if not 0.0 <= overlap < 1.0:
            raise ValueError(f"{overlap=} must be in [0, 1)")
        self.sample_rate_hz = float(sample_rate_hz)
        self.nperseg = int(nperseg)
        self.window = get_window(window, self.nperseg)
        self._window32 = self.window.astype(np.float32)
        self.step = max(1, int(round(self.nperseg * (1.0 - overlap))))
        self.one_sided = bool(one_sided)
        self._tail = None
        self._work = Inline() if runner is None else runner
        self._scratch = threading.local()  # per worker thread: reused windowed-segment arrays
        self._batches: list[np.ndarray] = []
        self._counts: list[int] = []
        self._batch_len = 1
        expected_segments = None
        if expected_samples:
            expected_segments = max(1, 1 + (int(expected_samples) - self.nperseg) // self.step)
            while 2 * N_BATCHES * self._batch_len < expected_segments:
                self._batch_len *= 2
        self._nbins = self.nperseg // 2 + 1 if self.one_sided else self.nperseg
        self.n_segments = 0
        self._track = SlotTrack(self.nperseg, self.one_sided, expected_segments)
        self._dead: list[int] = []  # per sub-average
        self._finished = False  # result() taken: the track's slots are gone

    def update(self, block) -> None:
        """Add a block of samples (complex for two-sided, real for one-sided)."""
        if self._finished:
            raise ValueError("the accumulator's result() was taken: it takes no more blocks")
        x = np.ascontiguousarray(block)  # (the segments are strided views of it)
        if x.ndim != 1:
            raise ValueError(f"block must be one-dimensional, got shape {x.shape}")
        if self.one_sided and np.iscomplexobj(x):
            raise ValueError("one-sided accumulator takes real samples")
        if self._tail is not None and self._tail.size:
            x = x.astype(self._tail.dtype, copy=False)
            t = self._tail.size
            joins = -(-t // self.step)  # segments that start in the tail
            joins += (-(self.n_segments + joins)) % self._track.slot_len  # and on to a slot's end
            inside = joins * self.step  # the next segment's start, from the tail's
            used = inside - self.step + self.nperseg - t  # block samples the joined segments need
            if x.size >= used:
                # Only the segments across the join need a joined copy; the rest are views of x.
                self._segments(np.concatenate([self._tail, x[:used]]), whole_slots=False)
                x = x[inside - t :]
            else:
                x = np.concatenate([self._tail, x])
        n_seg = self._segments(x)
        self._tail = x[n_seg * self.step :].copy()

    def _segments(self, x: np.ndarray, whole_slots: bool = True) -> int:
        """Add the whole segments of ``x`` (starting at 0, every ``step``); return how many. With
        ``whole_slots``, only up to the last time slot they complete: the rest wait (in the tail) for
        the next block, so that every call but those at joins holds whole slots."""
        n_seg = 0 if x.size < self.nperseg else 1 + (x.size - self.nperseg) // self.step
        if whole_slots and self._track.slot_len > 1:
            n_seg -= (self.n_segments + n_seg) % self._track.slot_len
        if n_seg <= 0:
            return 0
        # Segments whose first or last sample is exactly zero, found once for the whole block: only
        # calls holding one look for runs of zeros (see DEAD_RUN).
        span = (n_seg - 1) * self.step
        zero_ends = x[: span + 1 : self.step] == 0
        zero_ends |= x[self.nperseg - 1 : span + self.nperseg : self.step] == 0
        if not zero_ends.any():
            zero_ends = None
        first = 0
        while first < n_seg:
            self._open_batch()
            count = min(_CALLS_PER_JOB * call_rows(self._track.slot_len), n_seg - first,
                        self._batch_len - self._counts[-1])
            start = first * self.step
            stop = start + (count - 1) * self.step + self.nperseg
            # The segments as a strided view of x (what sliding_window_view makes, at 1/20 its cost).
            view = np.ndarray((count, self.nperseg), x.dtype, buffer=x[start:stop],
                              strides=(self.step * x.itemsize, x.itemsize))
            view.flags.writeable = False
            self._track.make_room(self.n_segments, count, self._work.drain)
            self._add(len(self._batches) - 1, view,
                      zero_ends is not None and bool(zero_ends[first : first + count].any()))
            self._counts[-1] += count
            self.n_segments += count
            first += count
        return n_seg

    def _add(self, batch: int, segments: np.ndarray, zero_ends: bool = True) -> None:
        """Add the periodograms of ``segments`` to sub-average ``batch``, on a worker thread unless
        the batch is too small to be worth the hand-off; ``zero_ends``: some segment begins or ends
        with an exactly-zero sample (else none can lie in a run of zeros)."""

        ends_slot = (self.n_segments + len(segments)) % self._track.slot_len == 0

        def add(sums, batch=batch):
            total, first_slot, slot_sums, rounded, slot_dead = sums
            self._batches[batch] += total
            self._track.store(first_slot, slot_sums, rounded, ends_slot, slot_dead)
            if slot_dead is not None:
                self._dead[batch] += int(slot_dead.sum())

        self._work.submit(add, self._periodogram_sum, segments, self.n_segments, self._track.slot_len, zero_ends,
                          inline=len(segments) < _INLINE_BELOW)

    def _periodogram_sum(self, segments: np.ndarray, first_segment: int, slot_len: int, zero_ends: bool = True):
        """Sum over segments of the squares of FFT(w * segment)'s real and imaginary parts
        (interleaved; float64 over calls of single-precision sums for complex64); and |FFT|**2
        summed into the track's sub-bands (in FFT order) and time slots: ``(sums, first slot, slot
        sums, their bfloat16 values, dead segments per slot or None)``. The segments are
        transformed :func:`call_rows` at a time, in one scratch array.

        A segment that begins or ends with DEAD_RUN exactly-zero samples lies in or across a run of
        them (a dropped transfer, digital silence): it is left out of every sum and counted (looked
        for only when ``zero_ends``: some segment's first or last sample is zero).
        """
        edge = min(DEAD_RUN, self.nperseg // 2)
        dead = None
        if zero_ends:
            dead = ~(segments[:, :edge].any(axis=1) & segments[:, -edge:].any(axis=1))
        if dead is not None and dead.any():
            segments = segments.copy()
            segments[dead] = 0
        n_rows, rows = len(segments), call_rows(slot_len)
        columns, first_slot, slot_sums = self._call_sums(segments[:rows], first_segment, slot_len)
        for start in range(rows, n_rows, rows):
            more, first, sums = self._call_sums(segments[start : start + rows], first_segment + start, slot_len)
            columns = np.add(columns, more, dtype=np.float64)
            if first == first_slot + len(slot_sums) - 1:  # the calls share a slot
                sums[0] += slot_sums[-1]
                slot_sums = slot_sums[:-1]
            slot_sums = np.concatenate([slot_sums, sums])
        slot_dead = None
        if dead is not None and dead.any():
            first_break = (-first_segment) % slot_len
            starts = np.unique(np.concatenate([[0], np.arange(first_break, n_rows, slot_len)]))
            slot_dead = np.add.reduceat(dead.astype(np.int64), starts)
        return columns, first_slot, slot_sums, to_bfloat16(slot_sums, ties_to_even=False), slot_dead

    def _call_sums(self, segments: np.ndarray, first_segment: int, slot_len: int):
        """One FFT call's sums: (the squares of the spectra's real and imaginary parts summed over
        the segments, first slot, sub-band sums of each slot touched)."""
        single = segments.dtype in (np.complex64, np.float32)
        win = self._window32 if single else self.window
        dtype = np.result_type(segments.dtype, win.dtype)
        work = self._work_buffer(dtype, len(segments))
        windowed = np.multiply(segments, win, out=work[: len(segments)])
        # One thread per call: the runner spreads the calls over the cores.
        if self.one_sided:
            spec = scipy.fft.rfft(windowed, axis=-1, workers=1)
        else:
            spec = scipy.fft.fft(windowed, axis=-1, overwrite_x=True, workers=1)
        rails = spec.view(np.float32 if spec.dtype == np.complex64 else np.float64)
        columns, slot_sums = self._track.batch_sums(
            rails, first_segment, slot_len, lambda rows, cols: self._work_buffer(rails.dtype, rows, cols))
        return columns, first_segment // slot_len, slot_sums

    def _work_buffer(self, dtype, rows: int, columns: int | None = None) -> np.ndarray:
        """This thread's scratch array of ``dtype`` with ``columns`` (default nperseg) per row: for
        windowed segments or per-slot sums, reused from call to call (fresh arrays of this size cost
        a page fault per 4 kB, which was a fifth of the whole pass)."""
        buffers = self._scratch.__dict__.setdefault("buffers", {})
        columns = self.nperseg if columns is None else columns
        key = (dtype, columns)
        buf = buffers.get(key)
        if buf is None or len(buf) < rows:
            # As large as the largest call seen: a worker's holds a full batch (2 MiB at 4096
            # points), the main thread's only the calls of a few segments it computes itself.
            buf = buffers[key] = np.empty((rows if rows < _SEGMENTS_PER_CALL // 2 else max(rows, _SEGMENTS_PER_CALL),
                                           columns), dtype)
        return buf

    def _open_batch(self) -> None:
        """Make sure the last sub-average has room; merge pairs when there are 2*N_BATCHES full ones."""
        if self._batches and self._counts[-1] < self._batch_len:
            return
        if len(self._batches) == 2 * N_BATCHES:
            self._work.drain()  # the sub-averages about to merge must be complete
            self._batches = [a + b for a, b in zip(self._batches[::2], self._batches[1::2])]
            self._counts = [a + b for a, b in zip(self._counts[::2], self._counts[1::2])]
            self._dead = [a + b for a, b in zip(self._dead[::2], self._dead[1::2])]
            self._batch_len *= 2
            if self._counts[-1] < self._batch_len:
                return
        self._batches.append(np.zeros(2 * self._nbins))  # (real and imaginary parts' squares)
        self._counts.append(0)
        self._dead.append(0)

    def result(self) -> Psd:
        """The averaged PSD of every block fed. Raises ValueError when no complete segment was seen.

        The time track's slots become the result's float32 ``track`` (:class:`dsp.track.SlotTrack`):
        the accumulator takes no more blocks after a result.
        """
        if self._finished:
            raise ValueError("result() was already taken from this accumulator")
        if self._tail is not None and self._tail.size >= self.nperseg:  # segments left waiting
            done = self._segments(self._tail, whole_slots=False)
            self._tail = self._tail[done * self.step :].copy()
        self._work.drain()
        self._scratch = threading.local()  # the worker threads' scratch arrays: no longer needed
        if self.n_segments == 0:
            raise ValueError(
                f"fewer samples than one segment ({self.nperseg=}): the capture is too short"
            )
        fs, n = self.sample_rate_hz, self.nperseg
        scale = 1.0 / (fs * np.sum(self.window**2))
        sums = np.array(self._batches)
        sums = sums[:, 0::2] + sums[:, 1::2]
        counts = np.array(self._counts)
        if self.one_sided:
            freq = np.fft.rfftfreq(n, 1.0 / fs)
            fold = np.full(freq.size, 2.0)
            fold[0] = 1.0
            if n % 2 == 0:
                fold[-1] = 1.0
            scale = scale * fold
        else:
            freq = np.fft.fftshift(np.fft.fftfreq(n, 1.0 / fs))
            sums = np.fft.fftshift(sums, axes=-1)
        # Segments in or across runs of exactly-zero samples are left out of every average: they
        # are missing data, not a quiet signal.
        active = counts - np.array(self._dead)
        n_active = int(active.sum())
        if n_active == 0:
            raise ValueError("every segment is exactly zero: there is no signal or noise to measure")
        keep = active > 0
        track, slot_counts, track_bins = self._track.result(self.n_segments, 1.0 / (fs * np.sum(self.window**2)))
        self._finished = True
        batch_density = sums[keep] * scale / active[keep, None]
        density = sums.sum(axis=0) * scale / n_active
        props_enbw = n * np.sum(self.window**2) / self.window.sum() ** 2
        window = self.window.copy()
        window.setflags(write=False)
        return Psd(
            frequency_hz=freq,
            density=density,
            batch_density=batch_density,
            batch_counts=active[keep],
            bin_width_hz=fs / n,
            enbw_hz=float(props_enbw * fs / n),
            dof=welch_dof(n_active, self.window, self.step),
            n_segments=n_active,
            sample_rate_hz=fs,
            one_sided=self.one_sided,
            window=window,
            track=track,
            track_counts=slot_counts,
            track_bins=track_bins,
            slot_s=self._track.slot_len * self.step / fs,
            zero_fraction=1.0 - n_active / self.n_segments,
        )

def psd(x, sample_rate_hz: float, **kwargs) -> Psd:
    """Averaged PSD of one array (see :class:`PsdAccumulator` for the parameters)."""
    x = np.asarray(x)
    kwargs.setdefault("one_sided", not np.iscomplexobj(x))
    acc = PsdAccumulator(sample_rate_hz, **kwargs)
    acc.update(x)
    return acc.result()


def band_power(spectrum: Psd, low_hz: float, high_hz: float, density=None) -> float:
    """Power in [low_hz, high_hz]: the density integrated over the bins whose centres lie there.

    ``density`` defaults to ``spectrum.density``; pass a row of ``batch_density`` or a
    noise-subtracted density to integrate that instead. Units: FS**2 (or the density's units * Hz).
    """
    if not high_hz >= low_hz:
        raise ValueError(f"{high_hz=} must be >= {low_hz=}")
    d = spectrum.density if density is None else np.asarray(density)
    sel = (spectrum.frequency_hz >= low_hz) & (spectrum.frequency_hz <= high_hz)
    total = np.sum(d[..., sel], axis=-1) * spectrum.bin_width_hz
    return float(total) if np.ndim(total) == 0 else total
