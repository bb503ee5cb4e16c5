"""Capture sources: the dongle through pyrtlsdr, behind a small interface the simulated bench shares.

A capture source is opened, configured (sample rate, fixed gain, ppm, direct sampling or upconverter,
bias tee, centre frequency), read as raw interleaved cu8 bytes exactly as the dongle delivers them,
and closed::

    src.open()
    applied = src.configure(settings, center_hz)    # -> Applied (what the dongle really did)
    src.arrange(capture)                             # the simulated bench sets itself up; a dongle ignores it
    raw = src.read_bytes(n)                          # n a multiple of 512; a fresh uint8 array
    src.close()

pyrtlsdr is imported only when a dongle is opened. Its pitfalls, found by reading its source, are
handled here:

- importing it fails with ImportError, but also with AttributeError or OSError when the system
  librtlsdr is too old or broken: any failure becomes one clear :class:`DeviceError`;
- ``RtlSdr()`` with no dongle raises LibUSBError saying "Input/output error": the device count is
  checked first and the message says "no dongle found";
- every failed setter closes the device: the source notes it and says so;
- setting the frequency correction already in effect fails (and so closes the device): it is set only
  when it differs;
- ``read_bytes`` and the async callback hand out a buffer the library reuses: it is copied at once;
- async buffer lengths must be multiples of 512 bytes;
- its asyncio ``stream()`` silently drops chunks when its queue fills: the source runs its own reader
  thread and queue and counts every byte it had to drop (:attr:`RtlSdrSource.dropped_bytes`);
- the sample rate must lie in 225001-300000 or 900001-3200000 Hz;
- the centre frequency reads back rounded to the kHz: it is checked to within that rounding, and the
  requested frequency is recorded.
"""

from __future__ import annotations

import queue
import threading
from dataclasses import dataclass
from typing import Protocol

import numpy as np

from rxbench.errors import DeviceError
from rxbench.plan import VALID_RATE_RANGES_HZ, DongleSettings, PlannedCapture

#: Bytes per USB transfer (and so per async chunk); must be a multiple of 512.
CHUNK_BYTES = 16 * 16384
#: Chunks buffered between the reader thread and the writer (about 2 s at 2.048 MS/s).
QUEUE_CHUNKS = 32
#: Seconds to wait for data before giving up on the dongle.
READ_TIMEOUT_S = 5.0
#: The centre frequency reads back rounded to the kHz (pyrtlsdr rounds it): tolerance, Hz.
READBACK_TOLERANCE_HZ = 1000.0

_NO_LIBRARY = (
    "the dongle's library cannot be loaded ({problem}); install the bundled one with "
    "`pip install 'pyrtlsdr[lib]'` (or rxbench's `live` extra), or use --device simulated"
)


@dataclass(frozen=True)
class Applied:
    """What the capture source really did on :meth:`CaptureSource.configure`."""

    sample_rate_hz: float  # the rate the dongle really runs at
    center_hz: float  # the RF frequency received (upconverter offset removed)
    gain_db: float  # the tuner gain in effect
    changed: bool  # anything retuned or re-gained: the next samples need settling


class CaptureSource(Protocol):
    """The interface :func:`bench.capture.run_session` drives."""

    name: str
    dropped_bytes: int

    def open(self) -> None: ...

    def configure(self, settings: DongleSettings, center_hz: float) -> Applied: ...

    def arrange(self, capture: PlannedCapture) -> None: ...

    def read_bytes(self, n: int) -> np.ndarray: ...

    def close(self) -> None: ...


def check_rate(sample_rate_hz: float) -> None:
    """Raise DeviceError unless the RTL2832U accepts ``sample_rate_hz``."""
    if not any(lo < sample_rate_hz <= hi for lo, hi in VALID_RATE_RANGES_HZ):
        raise DeviceError(
            f"sample rate {sample_rate_hz:g} Hz is not accepted by the dongle "
            "(225001-300000 Hz or 900001-3200000 Hz)"
        )


def check_read_size(n: int) -> int:
    n = int(n)
    if n <= 0 or n % 512:
        raise DeviceError(f"read size {n} bytes must be a positive multiple of 512")
    return n


def import_rtlsdr():
    """Import pyrtlsdr; any failure (ImportError, AttributeError, OSError, ...) -> DeviceError."""
    import importlib

    try:
        module = importlib.import_module("rtlsdr")
    except ModuleNotFoundError as exc:
        if exc.name in ("rtlsdr", None):
            raise DeviceError("pyrtlsdr is not installed: `pip install 'pyrtlsdr[lib]'` "
                              "(rxbench's `live` extra), or use --device simulated") from None
        raise DeviceError(_NO_LIBRARY.format(problem=f"missing module {exc.name}")) from None
    except ImportError as exc:
        raise DeviceError(_NO_LIBRARY.format(problem=str(exc).strip() or "ImportError")) from None
    except AttributeError as exc:  # librtlsdr lacks a function this pyrtlsdr declares: too old
        raise DeviceError(_NO_LIBRARY.format(problem=f"librtlsdr is too old: {exc}")) from None
    except Exception as exc:  # OSError from the loader, or anything else the import raises
        raise DeviceError(_NO_LIBRARY.format(problem=f"{type(exc).__name__}: {exc}")) from None
    if getattr(module, "RtlSdr", None) is None:
        raise DeviceError("pyrtlsdr is in client-only mode (RTLSDR_CLIENT_MODE is set): unset it to use a "
                          "local dongle")
    return module


_OPEN_ERRORS = {
    -3: "permission denied: the dongle's USB device is not accessible to this user (udev rules?)",
    -4: "the dongle was disconnected",
    -6: "the dongle is busy: another program (or the DVB-T kernel driver) has it",
}


class RtlSdrSource:
    """An RTL2832U dongle through pyrtlsdr (imported on :meth:`open`).

    Parameters
    ----------
    device_index : int
        Which dongle, when several are attached.
    chunk_bytes, queue_chunks : int
        Async transfer size (a multiple of 512) and how many transfers may wait in the queue.
    """

    name = "rtlsdr"

    def __init__(self, device_index: int = 0, *, chunk_bytes: int = CHUNK_BYTES,
                 queue_chunks: int = QUEUE_CHUNKS, timeout_s: float = READ_TIMEOUT_S):
        self.device_index = int(device_index)
        self.chunk_bytes = check_read_size(chunk_bytes)
        self.queue_chunks = int(queue_chunks)
        self.timeout_s = float(timeout_s)
        self.sdr = None
        self.dropped_bytes = 0
        self._settings: DongleSettings | None = None
        self._tuned_hz: float | None = None
        self._queue: queue.Queue | None = None
        self._thread: threading.Thread | None = None
        self._thread_error: BaseException | None = None
        self._leftover = np.zeros(0, np.uint8)

    # -- opening and closing ---------------------------------------------------------------------

    def open(self) -> None:
        rtlsdr = import_rtlsdr()
        try:
            count = int(rtlsdr.librtlsdr.rtlsdr_get_device_count())
        except Exception as exc:
            raise DeviceError(f"cannot list dongles: {exc}") from None
        if count == 0:
            raise DeviceError("no dongle found: plug in an RTL2832U dongle (check `lsusb`), or use "
                              "--device simulated")
        if not 0 <= self.device_index < count:
            raise DeviceError(f"--device-index {self.device_index}: only {count} dongle(s) found "
                              f"(indices 0-{count - 1})")
        try:
            self.sdr = rtlsdr.RtlSdr(device_index=self.device_index)
        except Exception as exc:
            self.sdr = None
            errno = getattr(exc, "errno", None)
            reason = _OPEN_ERRORS.get(errno, f"{exc}")
            raise DeviceError(f"cannot open dongle {self.device_index}: {reason}") from None
        self._settings = None
        self._tuned_hz = None

    def close(self) -> None:
        self._stop_stream()
        if self.sdr is not None:
            try:
                self.sdr.close()
            except Exception:
                pass
            self.sdr = None

    def _require_open(self):
        if self.sdr is None or not getattr(self.sdr, "device_opened", True):
            self.sdr = None
            raise DeviceError("the dongle is not open (it was closed after an error)")
        return self.sdr

    def _setter(self, what: str, func, *args):
        """Call a pyrtlsdr setter; a failure (which closes the device) becomes a DeviceError."""
        try:
            return func(*args)
        except Exception as exc:
            closed = not getattr(self.sdr, "device_opened", False)
            self._stop_stream()
            if closed:
                self.sdr = None
            raise DeviceError(f"the dongle refused {what}: {exc}" + ("; the device was closed" if closed else "")) from None

    # -- settings --------------------------------------------------------------------------------

    def configure(self, settings: DongleSettings, center_hz: float) -> Applied:
        sdr = self._require_open()
        check_rate(settings.sample_rate_hz)
        old = self._settings
        changed = False
        if old is None or old != settings:
            self._stop_stream()
        if old is None or old.direct_sampling != settings.direct_sampling:
            mode = {"off": 0, "i": 1, "q": 2}[settings.direct_sampling]
            self._setter(f"direct sampling {settings.direct_sampling!r}", sdr.set_direct_sampling, mode)
            changed = True
        if old is None or old.sample_rate_hz != settings.sample_rate_hz:
            self._setter(f"sample rate {settings.sample_rate_hz:g} Hz", sdr.set_sample_rate, settings.sample_rate_hz)
            changed = True
        if old is None:  # the RTL2832's digital AGC stays off: levels are compared between captures
            self._setter("digital AGC off", sdr.set_agc_mode, False)
        if old is None or old.gain_db != settings.gain_db:
            # a number (never 'auto') also turns the tuner's AGC off
            self._setter(f"gain {settings.gain_db:g} dB", sdr.set_gain, settings.gain_db)
            changed = True
        # Setting the correction already in effect fails (and closes the device): compare first.
        current_ppm = self._setter("reading the frequency correction", sdr.get_freq_correction)
        if int(current_ppm) != int(settings.ppm):
            self._setter(f"frequency correction {settings.ppm} ppm", sdr.set_freq_correction, int(settings.ppm))
            changed = True
        if old is None or old.bias_tee != settings.bias_tee:
            self._setter(f"bias tee {'on' if settings.bias_tee else 'off'}", sdr.set_bias_tee, bool(settings.bias_tee))
        self._settings = settings
        tuned = center_hz + settings.upconverter_hz
        if self._tuned_hz != tuned or changed:
            self._stop_stream()
            self._setter(f"centre frequency {tuned:.0f} Hz", sdr.set_center_freq, tuned)
            self._tuned_hz = tuned
            changed = True
        readback = float(self._setter("reading the centre frequency", sdr.get_center_freq))
        if abs(readback - tuned) > READBACK_TOLERANCE_HZ:
            raise DeviceError(f"the dongle reports {readback:.0f} Hz after tuning to {tuned:.0f} Hz "
                              "(outside the tuner's range?)")
        rate = float(self._setter("reading the sample rate", sdr.get_sample_rate))
        gain = float(self._setter("reading the gain", sdr.get_gain))
        return Applied(sample_rate_hz=rate, center_hz=float(center_hz), gain_db=gain, changed=changed)

    def arrange(self, capture: PlannedCapture) -> None:
        """The operator arranges the real bench; here the stream stops, so that the capture starts
        on fresh samples rather than on what queued up while the operator was busy."""
        self._stop_stream()

    # -- reading ---------------------------------------------------------------------------------

    def _callback(self, values, context) -> None:
        # The library reuses ``values``: copy before anything else.
        data = np.frombuffer(values, dtype=np.uint8).copy()
        seq = self._seq_in
        self._seq_in += 1
        try:
            self._queue.put_nowait((seq, data))
        except queue.Full:
            pass  # counted by read_bytes as a gap in the sequence numbers

    def _run(self) -> None:
        try:
            self.sdr.read_bytes_async(self._callback, self.chunk_bytes)
        except BaseException as exc:  # reported to the reading thread
            self._thread_error = exc

    def start(self) -> None:
        """Start streaming now (:meth:`read_bytes` starts it when needed)."""
        self._start_stream()

    def _start_stream(self) -> None:
        if self._thread is not None:
            return
        self._require_open()
        self._queue = queue.Queue(maxsize=self.queue_chunks)
        self._leftover = np.zeros(0, np.uint8)
        self._seq_in = 0  # chunks the library delivered
        self._seq_out = None  # sequence number of the last chunk handed out
        self._thread_error = None
        self._thread = threading.Thread(target=self._run, name="rxbench-dongle-reader", daemon=True)
        self._thread.start()

    def _stop_stream(self) -> None:
        if self._thread is None:
            return
        try:
            if self.sdr is not None:
                self.sdr.cancel_read_async()
        except Exception:
            pass
        self._thread.join(timeout=self.timeout_s)
        self._thread = None
        self._queue = None
        self._leftover = np.zeros(0, np.uint8)

    def read_bytes(self, n: int) -> np.ndarray:
        """The next ``n`` raw bytes (interleaved I/Q, unsigned 8-bit), a fresh array.

        Chunks the reader thread had to drop (queue full) between two chunks handed out are counted
        in :attr:`dropped_bytes`: the bytes returned then have a gap. (Chunks dropped before the first
        one handed out, or after the last, leave no gap in what was read and are not counted.)
        """
        n = check_read_size(n)
        self._require_open()
        self._start_stream()
        parts = [self._leftover] if self._leftover.size else []
        have = self._leftover.size
        while have < n:
            try:
                chunk = self._queue.get(timeout=self.timeout_s)
            except queue.Empty:
                err = self._thread_error
                self._stop_stream()
                if err is not None:
                    raise DeviceError(f"reading from the dongle failed: {err}") from None
                raise DeviceError(f"no samples from the dongle for {self.timeout_s:g} s") from None
            seq, chunk = chunk
            if self._seq_out is not None and seq != self._seq_out + 1:
                # chunks were dropped between the last one handed out and this one: a gap in the data
                self.dropped_bytes += (seq - self._seq_out - 1) * chunk.size
            self._seq_out = seq
            parts.append(chunk)
            have += chunk.size
        data = np.concatenate(parts) if len(parts) > 1 else parts[0]
        self._leftover = data[n:].copy()
        return data[:n].copy()


def open_source(kind: str, *, device_index: int = 0, truth=None, seed: int | None = None):
    """A capture source by name: ``rtlsdr`` or ``simulated`` (not yet opened)."""
    if kind == "rtlsdr":
        return RtlSdrSource(device_index)
    if kind == "simulated":
        from rxbench.simulated import SimulatedBench

        return SimulatedBench(truth=truth, seed=seed)
    raise DeviceError(f"unknown device {kind!r}: use rtlsdr or simulated")
