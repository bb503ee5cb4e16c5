"""The dongle capture source, exercised through pyrtlsdr's real classes on a fake librtlsdr.

pyrtlsdr loads its native library through the optional ``pyrtlsdrlib`` module first, so a stub
module placed in ``sys.modules`` before the import hands it a fake library written in Python: every
call pyrtlsdr makes lands here, and the tests check what was sent and what came back. The fake's
return codes follow librtlsdr's (from memory of its rtl-sdr.h/librtlsdr.c): negative values are
errors, setting the frequency correction already in effect returns -2, and sample rates outside
(225 kHz, 300 kHz] and (900 kHz, 3.2 MHz] are refused with -EINVAL.
"""

from __future__ import annotations

import ctypes
import importlib.util
import sys
import threading
import time
import types

import numpy as np
import pytest

if importlib.util.find_spec("rtlsdr") is None:  # pyrtlsdr is in the `test` extra; skip without it
    pytest.skip("pyrtlsdr is not installed", allow_module_level=True)

from rxbench.capture import run_session  # noqa: E402
from rxbench.device import RtlSdrSource, import_rtlsdr  # noqa: E402
from rxbench.errors import DeviceError  # noqa: E402
from rxbench.plan import DongleSettings, parse_plan  # noqa: E402
from rxbench.recordings import open_capture  # noqa: E402

#: Tuner gains of an R820T in tenths of a dB, as librtlsdr lists them (from memory).
R820T_GAINS = (0, 9, 14, 27, 37, 77, 87, 125, 144, 157, 166, 197, 207, 229, 254, 280, 297, 328, 338, 364,
               372, 386, 402, 421, 434, 439, 445, 480, 496)
PATTERN = 251  # bytes count modulo a prime, so a byte's value tells its position in the stream


class FakeLibrtlsdr:
    """A stand-in for librtlsdr: plain functions (pyrtlsdr sets restype/argtypes on them)."""

    def __init__(self, n_devices=1, *, open_result=0, missing=(), chunks_then_wait=None):
        self.n_devices = n_devices
        self.open_result = open_result
        self.missing = set(missing)
        self.chunks_then_wait = chunks_then_wait  # deliver this many async chunks, then wait for cancel
        self.calls: list[tuple] = []
        self.opened = False
        self.state = {"ppm": 0, "rate": 0, "freq": 0, "gain": 0, "manual": 0, "agc": 0, "direct": 0,
                      "bias_tee": 0}
        self.position = 0  # bytes delivered so far: the pattern continues across streams
        self.cancel = threading.Event()
        self.delivered = threading.Event()
        self.resume = threading.Event()
        self.pace_s = 0.0002  # a fast producer, but not a busy loop
        self.async_lengths: list[int] = []
        self.buffers_seen: set[int] = set()
        self.reject_freq_above_hz = 1_766_000_000
        for name in dir(self):
            if name.startswith("_f_"):
                fn = getattr(self, name)
                setattr(self, "rtlsdr_" + name[3:], self._plain(fn))

    @staticmethod
    def _plain(bound):
        def f(*args):
            return bound(*args)
        return f

    def __getattr__(self, name):
        if name.startswith("rtlsdr_") and name not in self.missing:
            stub = self._plain(lambda *a: 0)  # GPIO, xtal, ... : accepted and ignored
            object.__setattr__(self, name, stub)
            return stub
        raise AttributeError(f"undefined symbol: {name}")

    def __getattribute__(self, name):
        if name.startswith("rtlsdr_") and name in object.__getattribute__(self, "missing"):
            raise AttributeError(f"undefined symbol: {name}")
        return object.__getattribute__(self, name)

    def _log(self, *call):
        self.calls.append(call)

    def set_calls(self, name):
        return [c for c in self.calls if c[0] == name]

    # -- the functions pyrtlsdr calls --
    def _f_get_device_count(self):
        return self.n_devices

    def _f_open(self, dev_p, index):
        self._log("open", index)
        if self.n_devices == 0 or index >= self.n_devices:
            return -1  # what librtlsdr returns when no device matches: pyrtlsdr says "Input/output error"
        if self.open_result < 0:
            return self.open_result
        dev_p.value = 0xD06
        self.opened = True
        return 0

    def _f_close(self, dev):
        self._log("close")
        self.opened = False
        return 0

    def _f_set_testmode(self, dev, on):
        return 0

    def _f_set_dithering(self, dev, on):
        return 0

    def _f_reset_buffer(self, dev):
        return 0

    def _f_get_tuner_gains(self, dev, buf):
        if buf is not None:
            for i, g in enumerate(R820T_GAINS):
                buf[i] = g
        return len(R820T_GAINS)

    def _f_set_sample_rate(self, dev, rate):
        self._log("set_sample_rate", rate)
        if rate <= 225000 or rate > 3200000 or 300000 < rate <= 900000:
            return -22
        self.state["rate"] = rate
        return 0

    def _f_get_sample_rate(self, dev):
        return self.state["rate"]

    def _f_set_center_freq(self, dev, freq):
        self._log("set_center_freq", freq)
        if freq > self.reject_freq_above_hz:
            return -1
        self.state["freq"] = freq
        return 0

    def _f_get_center_freq(self, dev):
        return self.state["freq"] + 37 if self.state["freq"] else 0  # the PLL lands a few Hz off

    def _f_set_freq_correction(self, dev, ppm):
        self._log("set_freq_correction", ppm)
        if ppm == self.state["ppm"]:
            return -2
        self.state["ppm"] = ppm
        return 0

    def _f_get_freq_correction(self, dev):
        return self.state["ppm"]

    def _f_set_tuner_gain_mode(self, dev, manual):
        self._log("set_tuner_gain_mode", manual)
        self.state["manual"] = manual
        return 0

    def _f_set_agc_mode(self, dev, on):
        self._log("set_agc_mode", on)
        self.state["agc"] = on
        return 0

    def _f_set_tuner_gain(self, dev, gain):
        self._log("set_tuner_gain", gain)
        self.state["gain"] = gain
        return 0

    def _f_get_tuner_gain(self, dev):
        return self.state["gain"]

    def _f_set_direct_sampling(self, dev, on):
        self._log("set_direct_sampling", on)
        self.state["direct"] = on
        return 0

    def _f_set_bias_tee(self, dev, on):
        self._log("set_bias_tee", on)
        self.state["bias_tee"] = on
        return 0

    def _f_read_async(self, dev, callback, ctx, buf_num, buf_len):
        self.async_lengths.append(buf_len)
        self.cancel.clear()
        buf = (ctypes.c_ubyte * buf_len)()  # one buffer, reused for every callback, like librtlsdr
        self.buffers_seen.add(ctypes.addressof(buf))
        sent = 0
        while not self.cancel.is_set():
            if self.chunks_then_wait is not None and sent == self.chunks_then_wait:
                self.delivered.set()  # then one more chunk once resumed, then wait for cancel
                if not self.resume.wait(5.0) or self.cancel.is_set():
                    break
            if self.chunks_then_wait is not None and sent > self.chunks_then_wait:
                self.cancel.wait(5.0)
                break
            time.sleep(self.pace_s)
            data = (np.arange(self.position, self.position + buf_len) % PATTERN).astype(np.uint8)
            ctypes.memmove(buf, data.ctypes.data, buf_len)
            self.position += buf_len
            sent += 1
            callback(ctypes.cast(buf, ctypes.POINTER(ctypes.c_ubyte)), buf_len, ctx)
        return 0

    def _f_cancel_async(self, dev):
        self._log("cancel_async")
        self.cancel.set()
        return 0


@pytest.fixture
def fake_lib():
    """Install a fake librtlsdr (through a stub pyrtlsdrlib) for a fresh import of pyrtlsdr."""
    saved = {k: v for k, v in sys.modules.items() if k == "rtlsdr" or k.startswith("rtlsdr.") or k == "pyrtlsdrlib"}
    holder = {"lib": FakeLibrtlsdr()}

    def install(lib):
        holder["lib"] = lib
        for k in [k for k in sys.modules if k == "rtlsdr" or k.startswith("rtlsdr.")]:
            del sys.modules[k]
        stub = types.ModuleType("pyrtlsdrlib")
        stub.load_librtlsdr = lambda: holder["lib"]
        sys.modules["pyrtlsdrlib"] = stub
        return lib

    install(holder["lib"])
    yield install
    for k in [k for k in sys.modules if k == "rtlsdr" or k.startswith("rtlsdr.") or k == "pyrtlsdrlib"]:
        del sys.modules[k]
    sys.modules.update(saved)


def settings(**kw):
    base = dict(sample_rate_hz=250000.0, gain_db=30.0, ppm=0, settle_s=0.0)
    base.update(kw)
    return DongleSettings(**base)


def contiguous(data: np.ndarray) -> bool:
    """True when the bytes are an unbroken run of the fake's position pattern."""
    expected = (int(data[0]) + np.arange(data.size)) % PATTERN
    return bool(np.array_equal(data, expected.astype(np.uint8)))


# ------------------------------------------------------------------------------------------------


def test_settings_reach_the_library(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    src = RtlSdrSource(0)
    src.open()
    applied = src.configure(settings(ppm=5, direct_sampling="q"), 14.2e6)
    st = lib.state
    assert st["rate"] == 250000
    assert st["freq"] == 14_200_000
    assert st["ppm"] == 5
    assert st["direct"] == 2  # librtlsdr: 1 = I branch, 2 = Q branch
    assert st["manual"] == 1 and st["agc"] == 0  # fixed gain, no AGC anywhere
    assert st["gain"] == 297  # the R820T gain nearest 30 dB is 29.7 dB
    assert st["bias_tee"] == 0
    assert applied.gain_db == pytest.approx(29.7)
    # librtlsdr's resampler: ratio = floor(xtal * 2**22 / rate) & ~3, real rate = xtal * 2**22 / ratio
    ratio = (28_800_000 * 2**22 // 250000) & ~3
    assert applied.sample_rate_hz == pytest.approx(28_800_000 * 2**22 / ratio)
    # the centre reads back rounded (37 Hz off here): the requested RF frequency is recorded
    assert applied.center_hz == 14.2e6
    assert applied.changed
    src.close()
    assert not lib.opened


def test_upconverter_offset_is_added_to_the_tuning(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    src = RtlSdrSource(0)
    src.open()
    applied = src.configure(settings(upconverter_hz=125e6), 7.1e6)
    assert lib.state["freq"] == 132_100_000
    assert applied.center_hz == 7.1e6
    src.close()


def test_ppm_already_in_effect_is_not_set_again(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    rtlsdr = import_rtlsdr()
    # the pitfall itself: pyrtlsdr sets the correction blindly, librtlsdr refuses, the device closes
    sdr = rtlsdr.RtlSdr(0)
    with pytest.raises(IOError):
        sdr.freq_correction = 0
    assert not sdr.device_opened
    lib.calls.clear()
    src = RtlSdrSource(0)
    src.open()
    src.configure(settings(ppm=0), 28.4e6)
    src.configure(settings(ppm=0), 28.5e6)
    assert lib.set_calls("set_freq_correction") == []
    assert lib.opened
    src.configure(settings(ppm=3), 28.5e6)
    assert lib.set_calls("set_freq_correction") == [("set_freq_correction", 3)]
    src.close()


def test_failed_setter_closes_and_says_so(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    src = RtlSdrSource(0)
    src.open()
    with pytest.raises(DeviceError, match="refused centre frequency.*closed"):
        src.configure(settings(), 2.0e9)
    assert not lib.opened
    with pytest.raises(DeviceError, match="not open"):
        src.read_bytes(512)


def test_sample_rate_outside_the_dongle_ranges_is_refused_before_the_library(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    src = RtlSdrSource(0)
    src.open()
    lib.calls.clear()
    for rate in (225000.0, 500000.0, 900000.0, 3200001.0):
        with pytest.raises(DeviceError, match="not accepted"):
            src.configure(settings(sample_rate_hz=rate), 28.4e6)
    assert lib.set_calls("set_sample_rate") == []
    for rate in (225001.0, 300000.0, 900001.0, 3200000.0):
        assert src.configure(settings(sample_rate_hz=rate), 28.4e6).changed
    src.close()


def test_no_dongle_gives_a_clear_message(fake_lib):
    fake_lib(FakeLibrtlsdr(n_devices=0))
    rtlsdr = import_rtlsdr()
    with pytest.raises(IOError, match="Input/output error"):  # what pyrtlsdr alone would say
        rtlsdr.RtlSdr(0)
    with pytest.raises(DeviceError, match="no dongle found"):
        RtlSdrSource(0).open()


def test_wrong_index_and_busy_dongle(fake_lib):
    fake_lib(FakeLibrtlsdr(n_devices=1))
    with pytest.raises(DeviceError, match="only 1 dongle"):
        RtlSdrSource(3).open()
    fake_lib(FakeLibrtlsdr(open_result=-6))
    with pytest.raises(DeviceError, match="busy"):
        RtlSdrSource(0).open()
    fake_lib(FakeLibrtlsdr(open_result=-3))
    with pytest.raises(DeviceError, match="permission"):
        RtlSdrSource(0).open()


def test_library_too_old_or_missing_is_a_device_error(fake_lib):
    fake_lib(FakeLibrtlsdr(missing={"rtlsdr_set_bias_tee"}))
    with pytest.raises(DeviceError, match="too old"):
        RtlSdrSource(0).open()

    def broken():
        raise OSError("librtlsdr.so: cannot open shared object file")

    fake_lib(FakeLibrtlsdr())
    sys.modules["pyrtlsdrlib"].load_librtlsdr = broken
    with pytest.raises(DeviceError, match="cannot be loaded.*OSError"):
        RtlSdrSource(0).open()


def test_bytes_are_copied_out_of_the_reused_buffer(fake_lib):
    lib = fake_lib(FakeLibrtlsdr())
    src = RtlSdrSource(0, chunk_bytes=4096, queue_chunks=1000)
    src.open()
    src.configure(settings(), 28.4e6)
    data = src.read_bytes(4096 * 20)
    assert len(lib.buffers_seen) == 1  # the fake reused one buffer for all 20 chunks
    assert contiguous(data)
    assert all(n % 512 == 0 for n in lib.async_lengths)
    with pytest.raises(DeviceError, match="multiple of 512"):
        src.read_bytes(1000)
    src.close()
    assert lib.set_calls("cancel_async")


def test_dropped_chunks_are_counted(fake_lib):
    lib = fake_lib(FakeLibrtlsdr(chunks_then_wait=20))
    src = RtlSdrSource(0, chunk_bytes=1024, queue_chunks=2, timeout_s=1.0)
    src.open()
    src.configure(settings(), 28.4e6)
    src.start()
    assert lib.delivered.wait(5.0)
    # nobody read while 20 chunks arrived: the queue kept the first 2 and had to drop 18
    first = src.read_bytes(2 * 1024)
    assert contiguous(first) and first[0] == 0
    lib.resume.set()
    after = src.read_bytes(1024)  # chunk 21 arrives: the 18 lost chunks are a gap, and are counted
    assert src.dropped_bytes == 18 * 1024
    assert after[0] == (20 * 1024) % PATTERN and not contiguous(np.concatenate([first, after]))
    src.close()


PLAN = """
title = "fake dongle"
[dongle]
sample_rate_hz = 250000
gain_db = 30.0
settle_s = 0.05
[generator]
level_dbm = -40.0
[defaults]
center_hz = 28.4e6
duration_s = 0.2
[[step]]
name = "thru"
role = "thru"
attenuation_db = 60
[[step]]
name = "dut"
role = "dut"
attenuation_db = 60
"""


def test_a_session_stores_the_dongle_bytes_unchanged(fake_lib, tmp_path):
    lib = fake_lib(FakeLibrtlsdr())
    plan = parse_plan(PLAN, "fake.toml")
    metas = run_session(plan, tmp_path / "s", RtlSdrSource(0, chunk_bytes=16384, queue_chunks=1000), yes=True).written
    assert len(metas) == 2
    for meta in metas:
        cap = open_capture(meta)
        raw = np.fromfile(str(meta).replace(".sigmf-meta", ".sigmf-data"), dtype=np.uint8)
        assert contiguous(raw)
        assert cap.n_samples * 2 == raw.size >= 0.2 * 250000 * 2
        assert cap.extra["dropped_samples"] == 0
        assert cap.extra["gain_db"] == pytest.approx(29.7)
        assert cap.center_hz == 28.4e6
    assert not lib.opened


class _InterruptingSource(RtlSdrSource):
    """Ctrl-C arrives during the third read of the second capture."""

    def __init__(self, *a, **kw):
        super().__init__(*a, **kw)
        self.captures = 0
        self.reads = 0

    def arrange(self, capture):
        super().arrange(capture)
        self.captures += 1
        self.reads = 0

    def read_bytes(self, n):
        self.reads += 1
        if self.captures == 2 and self.reads == 5:  # two settling reads, then two kept, then Ctrl-C
            raise KeyboardInterrupt
        return super().read_bytes(n)


def test_interruption_leaves_a_valid_partial_capture(fake_lib, tmp_path):
    lib = fake_lib(FakeLibrtlsdr())
    plan = parse_plan(PLAN, "fake.toml")
    session = tmp_path / "s"
    with pytest.raises(KeyboardInterrupt):
        run_session(plan, session, _InterruptingSource(0, chunk_bytes=16384, queue_chunks=1000), yes=True)
    assert not lib.opened and lib.set_calls("cancel_async")
    assert (session / "01-thru.sigmf-meta").exists()
    assert not (session / "02-dut.sigmf-meta").exists()
    partial = open_capture(session / "02-dut.partial.sigmf-meta")
    assert partial.extra["incomplete"] is True
    raw = np.fromfile(session / "02-dut.partial.sigmf-data", dtype=np.uint8)
    full = np.fromfile(session / "01-thru.sigmf-data", dtype=np.uint8).size
    assert 0 < raw.size < full and raw.size % 16384 == 0 and contiguous(raw)
    assert "interrupted" in (session / "log.txt").read_text()
    # resuming captures the missing step and leaves the partial as it was
    metas = run_session(plan, session, RtlSdrSource(0, chunk_bytes=16384, queue_chunks=1000), yes=True).written
    assert [m.name for m in metas] == ["02-dut.sigmf-meta"]
    assert np.array_equal(np.fromfile(session / "02-dut.partial.sigmf-data", dtype=np.uint8), raw)


def test_cli_without_a_dongle_is_one_clear_line(fake_lib, tmp_path, capsys):
    from rxbench.cli import main

    fake_lib(FakeLibrtlsdr(n_devices=0))
    path = tmp_path / "p.toml"
    path.write_text(PLAN)
    code = main(["capture", str(path), "--out", str(tmp_path / "s"), "--yes"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert err[-1].startswith("rxbench capture: error: no dongle found")
    assert "Traceback" not in "\n".join(err)
    assert not (tmp_path / "s").exists()  # nothing created for a run that could not start
