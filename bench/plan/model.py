"""The plan's types: the dongle's settings, a step as written, a concrete capture, the validated
:class:`Plan` (with its ENR at a frequency and its expansion into captures), and the limits every
plan is checked against."""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from rxbench.errors import PlanError

#: Sample rates the RTL2832U accepts (Hz): (low, high] intervals, as librtlsdr checks them.
VALID_RATE_RANGES_HZ = ((225_000.0, 300_000.0), (900_000.0, 3_200_000.0))
#: Above this rate USB transfers commonly start to lose samples (common practice).
RELIABLE_RATE_HZ = 2_400_000.0
#: Roles whose input is the signal generator's tone.
TONE_ROLES = ("thru", "dut", "step")
#: Roles whose input is the noise source.
NOISE_SOURCE_ROLES = ("hot", "cold")
#: Lowest frequency most dongle tuners reach without direct sampling or an upconverter, Hz
#: (about 24 MHz for the common R820T-family tuners; from memory).
TUNER_LOW_HZ = 24e6
#: Highest useful frequency in direct sampling: the Nyquist frequency of the 28.8 MHz ADC clock.
DIRECT_SAMPLING_HIGH_HZ = 14.4e6

#: Largest plan file read, bytes (a plan of a hundred steps is about 10 kB).
PLAN_LIMIT_BYTES = 1024 * 1024
#: Most steps a plan may expand to.
MAX_STEPS = 5000

NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


@dataclass(frozen=True)
class DongleSettings:
    """How the dongle is set up for the whole plan."""

    sample_rate_hz: float
    gain_db: float
    ppm: int = 0
    direct_sampling: str = "off"
    upconverter_hz: float = 0.0
    bias_tee: bool = False
    settle_s: float = 0.1
    full_scale_dbm: float | None = None


@dataclass(frozen=True)
class Step:
    """One step of a plan, as written (defaults applied)."""

    index: int  # 1-based, in plan order
    name: str
    role: str
    attenuation_db: float
    center_hz: float
    duration_s: float
    repeats: int
    instruction: str
    with_dut: bool
    line: int  # line of the step's [[step]] header
    devices: int = 1  # identical devices in series (back-to-back pair: 2)
    device: str = ""  # which device is in the path (a label of the plan's choosing), when named
    sweep: str = ""  # the [[sweep]] this step was expanded from, if any


@dataclass(frozen=True)
class PlannedCapture:
    """One concrete capture of a plan: a step at one repeat."""

    number: int  # 1-based position in the session
    step: Step
    repeat: int  # 1-based
    base_name: str  # file name without suffix, unique in the session
    generator_dbm: float | None  # nominal generator level (tone roles only)
    tone_offset_hz: float | None  # tone minus centre frequency (tone roles only)
    enr_db: float | None  # noise-source ENR at the centre frequency (hot/cold only)
    u_enr_db: float | None = None  # its standard uncertainty (hot/cold only, when given)
    attenuator_tolerance_db: float | None = None  # the attenuator's stated accuracy, when given
    swr: tuple[tuple[str, float], ...] = ()  # (source_swr/load_swr/dut_swr, value) given (tone roles)

    @property
    def role(self) -> str:
        return self.step.role

    @property
    def center_hz(self) -> float:
        return self.step.center_hz

    @property
    def attenuation_db(self) -> float:
        return self.step.attenuation_db

    @property
    def duration_s(self) -> float:
        return self.step.duration_s

    @property
    def with_dut(self) -> bool:
        return self.step.with_dut

    @property
    def input_dbm(self) -> float | None:
        """Estimated tone level at the dongle's input (generator minus attenuation; the DUT's loss
        is not counted, so the estimate errs high), or None when the generator level is unknown."""
        if self.generator_dbm is None:
            return None
        return self.generator_dbm - self.attenuation_db


@dataclass(frozen=True)
class Plan:
    """A validated measurement plan."""

    source: str  # file name (or label) the plan came from
    text: str  # the TOML text, kept verbatim for the session's copy
    title: str
    description: str
    dongle: DongleSettings
    steps: tuple[Step, ...]
    generator_dbm: float | None = None
    tone_offset_hz: float = 10_000.0
    enr_db: float | None = None
    enr_table: tuple[tuple[float, float], ...] = ()
    u_enr_db: float | None = None
    attenuator_tolerance_db: float | None = None
    swr: tuple[tuple[str, float], ...] = ()  # [match]: (source_swr/load_swr/dut_swr, value) given
    warnings: tuple[str, ...] = field(default=())
    check_tolerance_db: float = 3.0  # [check] level_tolerance_db
    stop_on_failed_check: bool = False  # [check] stop_on_failure

    def step_named(self, name: str) -> Step:
        for s in self.steps:
            if s.name == name:
                return s
        known = ", ".join(s.name for s in self.steps)
        raise PlanError(f"{self.source}: no step named {name!r} (the plan has: {known})")

    def enr_at(self, frequency_hz: float) -> float | None:
        """ENR (dB) at ``frequency_hz``: the table interpolated linearly, or the constant value.

        Outside the table's range the nearest end value is used and :meth:`expand` records a warning.
        """
        if self.enr_table:  # linear in dB between points, held at the ends: numpy.interp, as bench.enr
            return float(np.interp(frequency_hz, [r[0] for r in self.enr_table], [r[1] for r in self.enr_table]))
        return self.enr_db

    def expand(self) -> list[PlannedCapture]:
        """The concrete captures, in order: each step once per repeat."""
        out: list[PlannedCapture] = []
        for step in self.steps:
            for r in range(1, step.repeats + 1):
                number = len(out) + 1
                base = f"{number:02d}-{step.name}"
                tone = step.role in TONE_ROLES
                out.append(PlannedCapture(
                    number=number,
                    step=step,
                    repeat=r,
                    base_name=base,
                    generator_dbm=self.generator_dbm if tone else None,
                    tone_offset_hz=self.tone_offset_hz if tone else None,
                    enr_db=self.enr_at(step.center_hz) if step.role in NOISE_SOURCE_ROLES else None,
                    u_enr_db=self.u_enr_db if step.role in NOISE_SOURCE_ROLES else None,
                    attenuator_tolerance_db=self.attenuator_tolerance_db,
                    swr=self.swr if tone else (),
                ))
        return out
