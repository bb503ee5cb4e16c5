"""The check after every capture, and the level reading the live readout shares with it.

Right after a capture is written, while the set-up is still on the bench, it is read once (the same
reading ``inspect`` and ``analyze`` take) and set against what the plan expects:

- tone roles (``thru``/``step``/``dut``): the tone's level in dBFS and, with ``[dongle]
  full_scale_dbm``, in dBm at the dongle's input; its SNR; the clip fraction; and the level against
  the plan's estimate (generator minus attenuation; with the DUT in the path only an upper bound);
- the other roles: the noise density and the clip fraction; a ``hot`` capture must read at least
  :data:`MIN_Y_DB` above the ``cold`` one of the same set-up (a noise source left off or unpowered).

A check fails (a *problem*) when no tone stands above the noise (generator off, wrong frequency),
when the level is more than ``[check] level_tolerance_db`` off the estimate (wrong attenuator
setting, wrong generator level), or when the capture clips. It also fails when the capture is not
the steady signal a measurement needs (the same findings ``inspect`` warns of, said while the
set-up is still there): a tone present for only part of the capture (a loose connector, a keyed
generator), a tone whose level changes during it, a broad signal instead of a line (the
generator's modulation left on), a second line of about the same power, a tone on the DC spike, a
tone at another frequency than the earlier tone captures of the run at that tuning (another
signal, or the generator retuned), or a noise floor that moves during the capture (a gain step). Without ``full_scale_dbm`` the dBFS
reading is set against the earlier tone captures of the same run instead: the first clean one fixes
the dongle's conversion, and every later one must agree with it within the tolerance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from rxbench.errors import RxbenchError
from rxbench.dsp.same_signal import tolerance_hz
from rxbench.reading import (CLIP_NOTE_BELOW, LOW_SNR_DB, Reading, noise_density_dbfs_per_hz, read_capture,
                             tone_shape)
from rxbench.plan import NOISE_SOURCE_ROLES, TONE_ROLES, PlannedCapture
from rxbench.style import fmt_hz

#: Default allowed difference between the level read and the level the plan expects, dB.
LEVEL_TOLERANCE_DB = 3.0
#: A hot capture must read at least this much above its cold one (Y-factor, dB): a 5 dB-ENR source
#: into a 10 dB-NF receiver still gives about 1.2 dB (Y = (ENR + F) / F), so 0.5 dB means "off".
MIN_Y_DB = 0.5


@dataclass(frozen=True)
class Level:
    """The numbers an operator looks at: one reading of a capture or of a stretch of live samples."""

    tone_dbfs: float | None  # None: no tone stands above the noise
    snr_db: float | None
    snr_bandwidth_hz: float | None
    tone_offset_hz: float | None
    noise_dbfs_per_hz: float
    clip_fraction: float
    full_scale_dbm: float | None = None
    tone_sought: bool = True  # False for noise captures (hot, cold, antenna, load)

    @property
    def tone_dbm(self) -> float | None:
        """The tone's level at the dongle's input, dBm (needs ``full_scale_dbm``)."""
        if self.tone_dbfs is None or self.full_scale_dbm is None:
            return None
        return self.tone_dbfs + self.full_scale_dbm

    @property
    def clipped(self) -> bool:
        return bool(self.clip_fraction >= CLIP_NOTE_BELOW)

    def to_dict(self) -> dict:
        return {"tone_dbfs": self.tone_dbfs, "tone_dbm": self.tone_dbm, "snr_db": self.snr_db,
                "snr_bandwidth_hz": self.snr_bandwidth_hz, "tone_offset_hz": self.tone_offset_hz,
                "noise_density_dbfs_per_hz": self.noise_dbfs_per_hz, "clip_fraction": self.clip_fraction,
                "clipped": self.clipped}


def level_of(reading: Reading, full_scale_dbm: float | None = None, want_tone: bool = True) -> Level:
    """The :class:`Level` of a reading (a tone only when it stands above the noise)."""
    t = reading.tone
    has_tone = t is not None and t.power > 0
    return Level(
        tone_dbfs=t.power_dbfs if has_tone else None,
        snr_db=t.snr_db if has_tone else None,
        snr_bandwidth_hz=t.snr_bandwidth_hz if has_tone else None,
        tone_offset_hz=t.offset_hz if has_tone else None,
        noise_dbfs_per_hz=noise_density_dbfs_per_hz(reading),
        clip_fraction=reading.clip_fraction,
        full_scale_dbm=full_scale_dbm,
        tone_sought=want_tone,
    )


def level_text(level: Level) -> str:
    """``tone -32.1 dBFS (-112.1 dBm), SNR 41.0 dB in 1 kHz, clip 0 %`` (or the noise for no tone)."""
    parts = []
    if not level.tone_sought:
        pass
    elif level.tone_dbfs is not None:
        dbm = f" ({level.tone_dbm:+.1f} dBm)" if level.tone_dbm is not None else ""
        parts.append(f"tone {level.tone_dbfs:+.1f} dBFS{dbm}, SNR {level.snr_db:.1f} dB in "
                     f"{fmt_hz(level.snr_bandwidth_hz)}")
    else:
        parts.append("no tone")
    if math.isfinite(level.noise_dbfs_per_hz):
        parts.append(f"noise {level.noise_dbfs_per_hz:.1f} dBFS/Hz")
    if math.isfinite(level.clip_fraction):
        parts.append(f"clip {100 * level.clip_fraction:.3g} %")
    return ", ".join(parts) or "not read"


@dataclass(frozen=True)
class CaptureCheck:
    """What the check after one capture found."""

    name: str  # the capture's base name
    level: Level
    expected_dbm: float | None  # the plan's estimate at the dongle's input (tone roles)
    expected_is_upper_bound: bool  # the DUT's loss is not in the estimate
    problems: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def passed(self) -> bool:
        return not self.problems

    def line(self) -> str:
        """One line for the operator and the log."""
        text = f"check {self.name}: {level_text(self.level)}"
        if self.expected_dbm is not None:
            read = self.level.tone_dbm
            what = "at most" if self.expected_is_upper_bound else "about"
            text += f"; expected {what} {self.expected_dbm:+.1f} dBm at the dongle"
            if read is not None:
                text += f", read {read:+.1f}"
        text += " -- " + ("OK" if self.passed else "CHECK FAILED: " + "; ".join(self.problems))
        return text

    def to_dict(self) -> dict:
        return {"capture": self.name, **self.level.to_dict(), "expected_dbm": self.expected_dbm,
                "expected_is_upper_bound": self.expected_is_upper_bound, "passed": self.passed,
                "problems": list(self.problems), "notes": list(self.notes)}


@dataclass
class Checker:
    """Checks the captures of one run in order (it remembers the dongle's conversion, dBFS minus dBm,
    from the first clean tone capture when the plan gives no ``full_scale_dbm``)."""

    full_scale_dbm: float | None = None
    tolerance_db: float = LEVEL_TOLERANCE_DB
    conversion_db: float | None = field(default=None, init=False)  # dBFS minus the estimated dBm
    _noise: dict = field(default_factory=dict, init=False)  # (centre, DUT, attenuation) -> {role: dBFS/Hz}
    _tone_at: dict = field(default_factory=dict, init=False)  # (centre, planned offset) -> (offset, capture) read first

    def check(self, cap: PlannedCapture, capture) -> CaptureCheck:
        """Read ``capture`` (a :class:`bench.recordings.Capture`, just written for ``cap``) and check it."""
        tone_role = cap.role in TONE_ROLES
        expected = cap.input_dbm if tone_role else None
        upper = bool(tone_role and cap.with_dut)
        try:
            reading = read_capture(capture, near_hz=cap.tone_offset_hz if tone_role else None, want_tone=tone_role)
        except (RxbenchError, ValueError) as exc:  # the recording stays; the check says why it failed
            blank = Level(None, None, None, None, math.nan, math.nan, self.full_scale_dbm, tone_sought=False)
            return CaptureCheck(cap.base_name, blank, expected, upper, (f"could not be read: {exc}",))
        level = level_of(reading, self.full_scale_dbm, want_tone=tone_role)
        problems: list[str] = []
        notes: list[str] = []
        if level.clipped:
            problems.append(f"{100 * level.clip_fraction:.3g} % of samples clip: add attenuation or lower the gain")
        if tone_role:
            if level.tone_dbfs is None:
                where = (f" near {fmt_hz(cap.tone_offset_hz)} from the centre"
                         if cap.tone_offset_hz is not None else "")
                problems.append(f"no tone{where}: is the generator on, at the right frequency, and connected?")
            else:
                if level.snr_db is not None and reading.tone.peak_to_floor_db < LOW_SNR_DB:
                    notes.append("the tone is close to the noise: its level is uncertain")
                problems += self._level_problems(level, expected, upper)
                problems += self._shape_problems(cap, reading)
        elif cap.role in NOISE_SOURCE_ROLES:
            problems += self._noise_source_problems(cap, level)
        if reading.floor.steady_fraction < 1.0:
            moved = f"the noise floor moved by {reading.floor.time_range_db:.1f} dB during the capture"
            if cap.role == "antenna":  # band noise comes and goes; that is what is being measured
                notes.append(moved + " (band noise varies; the steady, quietest time is used)")
            else:
                problems.append(moved + " (a gain step, AGC on, a noise source switching): capture it again")
        return CaptureCheck(cap.base_name, level, expected, upper, tuple(problems), tuple(notes))

    def _shape_problems(self, cap: PlannedCapture, reading: Reading) -> list[str]:
        """Is the tone the steady line a measurement needs (:func:`rxbench.reading.tone_shape`, the same
        findings a reading warns of), and the one the run has been reading?"""
        tone, psd, out = reading.tone, reading.psd, []
        shape = tone_shape(psd, reading.floor, tone)
        if shape.on_fraction is not None:
            out.append(f"the tone is present in only {100 * shape.on_fraction:.0f} % of the capture: a loose "
                       "connector, or the generator keyed or pulsed?")
        if shape.varies_within_slots:
            out.append("the tone's level jumps from one time slot to the next: the generator keyed or pulsed, or a "
                       "loose connector?")
        if shape.level_change_db > 0:
            out.append(f"the tone's level changed by {shape.level_change_db:.1f} dB during the capture: let the "
                       "generator settle and check the cables")
        if shape.broad:
            out.append(f"a broad signal, not a tone (-3 dB width {fmt_hz(tone.width_hz)}): is the generator's "
                       "modulation off?")
        if shape.second_offset_hz is not None:
            out.append(f"a second line at {fmt_hz(shape.second_offset_hz)} from the centre within "
                       f"{abs(shape.second_db):.1f} dB of the tone: which one is the generator?")
        if shape.on_dc:
            out.append("the tone sits on the dongle's DC spike: tune the generator or the dongle away from it")
            return out
        first = self._tone_at.setdefault((cap.center_hz, cap.tone_offset_hz), (tone.offset_hz, cap.base_name))
        tol = tolerance_hz(psd.bin_width_hz, cap.center_hz if reading.capture.is_complex else tone.offset_hz)
        if abs(tone.offset_hz - first[0]) > tol:
            out.append(f"the tone is at {fmt_hz(tone.offset_hz)} from the centre, but {first[1]} read it at "
                       f"{fmt_hz(first[0])}: another signal, or the generator was retuned?")
        return out

    def _noise_source_problems(self, cap: PlannedCapture, level: Level) -> list[str]:
        """A hot capture must read clearly above the cold one of the same set-up (either order)."""
        key = (cap.center_hz, cap.with_dut, cap.attenuation_db)
        seen = self._noise.setdefault(key, {})
        seen[cap.role] = level.noise_dbfs_per_hz
        if len(seen) < 2:
            return []
        y_db = seen["hot"] - seen["cold"]
        if y_db < MIN_Y_DB:
            return [f"hot reads only {y_db:+.2f} dB against cold: is the noise source powered (and off for "
                    "cold), and connected?"]
        return []

    def _level_problems(self, level: Level, expected: float | None, upper: bool) -> list[str]:
        if expected is None:
            return []
        tol = self.tolerance_db
        if level.tone_dbm is not None:
            diff = level.tone_dbm - expected
            against = "the plan's estimate"
        elif self.conversion_db is None:
            if not upper and not level.clipped:
                self.conversion_db = level.tone_dbfs - expected
            return []
        else:
            diff = level.tone_dbfs - self.conversion_db - expected
            against = "the earlier captures of this run"
        if diff > tol:
            return [f"{diff:+.1f} dB stronger than {against}: check the attenuator setting and the generator level"]
        if diff < -tol and not upper:
            return [f"{diff:+.1f} dB weaker than {against}: check the attenuator setting, the generator level "
                    "and the cables"]
        return []


__all__ = ["Level", "level_of", "level_text", "CaptureCheck", "Checker", "LEVEL_TOLERANCE_DB"]
