"""Parsing and validating a plan's TOML text (every field against the schema of :mod:`bench.plan`;
an error names the file, the line and the field, and repeats the value received), and reading a
plan file."""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

from rxbench import keys
from rxbench.errors import CaptureError, PlanError
from rxbench.files import read_text_input
from rxbench.keys import ROLES
from rxbench.plan.model import (DIRECT_SAMPLING_HIGH_HZ, MAX_STEPS, NAME_RE, NOISE_SOURCE_ROLES, PLAN_LIMIT_BYTES,
                                RELIABLE_RATE_HZ, TONE_ROLES, TUNER_LOW_HZ, VALID_RATE_RANGES_HZ, DongleSettings,
                                Plan, Step)
from rxbench.quantities import QuantityError, check as check_quantity

_DEFAULT_INSTRUCTIONS = {
    "thru": "Connect the generator through the step attenuator ({att}) and a thru adapter to the dongle.",
    "dut": "Insert the device under test between the step attenuator ({att}) and the dongle.",
    "step": "Set the step attenuator to {att}; generator -> attenuator -> thru -> dongle.",
    "hot": "Connect the noise source{dut} to the dongle and switch it ON.",
    "cold": "Connect the noise source{dut} to the dongle and switch it OFF.",
    "antenna": "Connect the antenna{dut} to the dongle (attenuator at {att}).",
    "load": "Replace the antenna by a 50-ohm load{dut} on the dongle's input.",
}


class _Lines:
    """Where keys sit in the TOML text, for error messages (tomllib gives no positions)."""

    _HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\"' ]+?)\s*\]\]?\s*(#.*)?$")
    _KEY = re.compile(r"^\s*([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=")

    def __init__(self, text: str):
        self.tables: dict[tuple[str, int], tuple[int, dict[str, int]]] = {}
        counts: dict[str, int] = {}
        current = ("", 0)
        self.tables[current] = (1, {})
        for lineno, line in enumerate(text.splitlines(), start=1):
            m = self._HEADER.match(line)
            if m:
                name = m.group(2).strip().strip("\"'")
                if m.group(1) == "[[":
                    counts[name] = counts.get(name, 0) + 1
                    current = (name, counts[name])
                else:
                    current = (name, 0)
                self.tables[current] = (lineno, {})
                continue
            k = self._KEY.match(line)
            if k:
                self.tables[current][1].setdefault(k.group(1).strip('"'), lineno)

    def line(self, table: str, key: str | None = None, number: int = 0) -> int:
        header, keys = self.tables.get((table, number), (1, {}))
        if key is not None and key in keys:
            return keys[key]
        return header


class _Checker:
    def __init__(self, source: str, text: str):
        self.source = source
        self.lines = _Lines(text)

    def fail(self, table: str, key: str | None, problem: str, number: int = 0, label: str | None = None):
        line = self.lines.line(table, key, number)
        where = label or (f"[{table}]" if table else "top level")
        fieldname = f"{where} {key}" if key else where
        raise PlanError(f"{self.source}, line {line}: {fieldname}: {problem}")

    def known(self, table: str, data: dict, allowed: tuple[str, ...], number: int = 0, label=None):
        for key in data:
            if key not in allowed:
                self.fail(table, key, f"unknown field (known fields: {', '.join(allowed)})", number, label)

    def number(self, table, data, key, *, default=None, required=False, low=None, high=None,
               low_open=False, integer=False, number=0, label=None, quantity=None):
        if key not in data:
            if required:
                self.fail(table, None, f"missing required field {key!r}", number, label)
            return default
        value = data[key]
        kind = "a whole number" if integer else "a number"
        if isinstance(value, bool) or not isinstance(value, (int, float)) or (integer and not isinstance(value, int)):
            self.fail(table, key, f"must be {kind}, got {value!r}", number, label)
        if not math.isfinite(value):
            self.fail(table, key, f"must be finite, got {value!r}", number, label)
        if low is not None and (value <= low if low_open else value < low):
            self.fail(table, key, f"must be {'>' if low_open else '>='} {low:g}, got {value!r}", number, label)
        if high is not None and value > high:
            self.fail(table, key, f"must be <= {high:g}, got {value!r}", number, label)
        if quantity is not None:  # the range every source of this quantity shares
            try:
                check_quantity(value, quantity, key)
            except QuantityError as exc:
                self.fail(table, key, str(exc).split(": ", 1)[1], number, label)
        return int(value) if integer else float(value)

    def string(self, table, data, key, *, default=None, choices=None, number=0, label=None):
        if key not in data:
            return default
        value = data[key]
        if not isinstance(value, str):
            self.fail(table, key, f"must be a string, got {value!r}", number, label)
        if choices is not None and value not in choices:
            self.fail(table, key, f"must be one of {', '.join(choices)}; got {value!r}", number, label)
        return value

    def boolean(self, table, data, key, *, default=False, number=0, label=None):
        if key not in data:
            return default
        value = data[key]
        if not isinstance(value, bool):
            self.fail(table, key, f"must be true or false, got {value!r}", number, label)
        return value

    def table(self, data: dict, key: str, required=False) -> dict:
        if key not in data:
            if required:
                self.fail("", None, f"missing required table [{key}]")
            return {}
        value = data[key]
        if not isinstance(value, dict):
            self.fail("", key, f"must be a table ([{key}]), got {value!r}")
        return value


_TOP = ("title", "description", "dongle", "generator", "attenuator", "match", "noise_source", "check", "defaults",
        "step", "sweep")
_DONGLE = ("sample_rate_hz", "gain_db", "ppm", "direct_sampling", "upconverter_hz", "bias_tee",
           "settle_s", "full_scale_dbm")
_GENERATOR = ("level_dbm", "offset_hz")
_NOISE = ("enr_db", "enr_table", "u_enr_db")
_ATTENUATOR = ("tolerance_db",)
_CHECK = ("level_tolerance_db", "stop_on_failure")
_MATCH = keys.SWRS
_STEP_COMMON = ("attenuation_db", "center_hz", "duration_s", "repeats", "with_dut")
_STEP = ("name", "role", "instruction", "devices", "device") + _STEP_COMMON


def _valid_rate(rate_hz: float) -> bool:
    return any(lo < rate_hz <= hi for lo, hi in VALID_RATE_RANGES_HZ)


def parse_plan(text: str, name: str = "<plan>") -> Plan:
    """Parse and validate a plan's TOML text; ``name`` (usually the file name) labels errors.

    Raises
    ------
    PlanError
        Malformed TOML, an unknown or missing field, or a value out of range; the message names
        ``name``, the line and the field.
    """
    try:
        data = tomllib.loads(text)
    except RecursionError:
        raise PlanError(f"{name}: nested too deeply to be a plan") from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        if m:
            msg = msg[: m.start()].strip()
            raise PlanError(f"{name}, line {m.group(1)}: not valid TOML: {msg}") from None
        raise PlanError(f"{name}: not valid TOML: {msg}") from None
    c = _Checker(name, text)
    c.known("", data, _TOP)
    title = c.string("", data, "title", default="") or ""
    description = c.string("", data, "description", default="") or ""
    warnings: list[str] = []

    d = c.table(data, "dongle", required=True)
    c.known("dongle", d, _DONGLE)
    rate = c.number("dongle", d, "sample_rate_hz", required=True, quantity="sample_rate", low=0, low_open=True)
    if not _valid_rate(rate):
        c.fail("dongle", "sample_rate_hz",
               f"{rate:g} Hz is not a rate the dongle accepts (225001-300000 Hz or 900001-3200000 Hz)")
    if rate > RELIABLE_RATE_HZ:
        warnings.append(f"{name}: sample rate {rate:g} Hz is above {RELIABLE_RATE_HZ:g} Hz, where USB "
                        "transfers commonly lose samples")
    if "gain_db" in d and isinstance(d["gain_db"], str):
        c.fail("dongle", "gain_db", f"must be a fixed gain in dB (automatic gain spoils comparisons), got {d['gain_db']!r}")
    gain = c.number("dongle", d, "gain_db", required=True, low=0, high=60)
    ppm = c.number("dongle", d, "ppm", default=0, integer=True, low=-500, high=500)
    ds = c.string("dongle", d, "direct_sampling", default="off", choices=("off", "i", "q"))
    up = c.number("dongle", d, "upconverter_hz", default=0.0, low=0, quantity="frequency")
    if ds != "off" and up:
        c.fail("dongle", "upconverter_hz", "direct sampling and an upconverter exclude each other")
    if ds != "off":
        warnings.append(f"{name}: direct sampling: the converter's input has no protection of its own (no tuner "
                        "in front of it): never let a transmitter near it; the gain setting has no effect")
    dongle = DongleSettings(
        sample_rate_hz=rate,
        gain_db=gain,
        ppm=ppm,
        direct_sampling=ds,
        upconverter_hz=up,
        bias_tee=c.boolean("dongle", d, "bias_tee"),
        settle_s=c.number("dongle", d, "settle_s", default=0.1, low=0, high=10),
        full_scale_dbm=c.number("dongle", d, "full_scale_dbm", default=None, low=-150, high=20, quantity="level_dbm"),
    )
    if dongle.bias_tee:
        warnings.append(f"{name}: bias tee ON: DC is put on the antenna input; make sure what is "
                        "connected there expects it (a generator, filter or attenuator can be damaged)")

    g = c.table(data, "generator")
    c.known("generator", g, _GENERATOR)
    level = c.number("generator", g, "level_dbm", default=None, low=-200, high=60, quantity="level_dbm")
    offset = c.number("generator", g, "offset_hz", default=10_000.0, quantity="offset")
    if abs(offset) >= rate / 2:
        c.fail("generator", "offset_hz", f"{offset:g} Hz lies outside the captured band (±{rate / 2:g} Hz)")
    if abs(offset) < 1000.0:
        warnings.append(f"{name}, line {c.lines.line('generator', 'offset_hz')}: a tone {offset:g} Hz from the "
                        "centre sits on the dongle's DC spike; put it a few kHz away")

    at = c.table(data, "attenuator")
    c.known("attenuator", at, _ATTENUATOR)
    tolerance = c.number("attenuator", at, "tolerance_db", default=None, low=0, high=20, quantity="tolerance_db")

    ck = c.table(data, "check")
    c.known("check", ck, _CHECK)
    check_tol = c.number("check", ck, "level_tolerance_db", default=3.0, low=0.1, high=60)
    check_stop = c.boolean("check", ck, "stop_on_failure")

    match = c.table(data, "match")
    c.known("match", match, _MATCH)
    swr = {key: c.number("match", match, key, default=None, low=1, high=100, quantity="swr") for key in _MATCH}
    swr = {key: value for key, value in swr.items() if value is not None}
    if swr and not {keys.SOURCE_SWR, keys.LOAD_SWR} <= swr.keys():
        warnings.append(f"{name}: [match] needs both source_swr and load_swr for a mismatch term; "
                        "the loss budgets will show mismatch as not assessed")

    ns = c.table(data, "noise_source")
    c.known("noise_source", ns, _NOISE)
    enr = c.number("noise_source", ns, "enr_db", default=None, low=-10, high=60, quantity="enr_db")
    u_enr = c.number("noise_source", ns, "u_enr_db", default=None, low=0, high=10, quantity="tolerance_db")
    enr_table: list[tuple[float, float]] = []
    if "enr_table" in ns:
        rows = ns["enr_table"]
        bad = not isinstance(rows, list) or not rows
        for row in rows if isinstance(rows, list) else ():
            if (not isinstance(row, list) or len(row) != 2
                    or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in row)):
                bad = True
                break
            enr_table.append((float(row[0]), float(row[1])))
        if bad:
            c.fail("noise_source", "enr_table", "must be a list of [frequency_hz, enr_db] pairs of numbers")
        for k, (f_hz, e_db) in enumerate(enr_table, start=1):
            try:
                check_quantity(f_hz, "positive_frequency", f"row {k} frequency_hz")
                check_quantity(e_db, "enr_db", f"row {k} enr_db")
            except QuantityError as exc:
                c.fail("noise_source", "enr_table", str(exc))
        if any(b[0] <= a[0] for a, b in zip(enr_table, enr_table[1:])):
            c.fail("noise_source", "enr_table", "frequencies must be strictly ascending")
        if enr is not None:
            c.fail("noise_source", "enr_table", "give enr_db or enr_table, not both")

    defaults = c.table(data, "defaults")
    c.known("defaults", defaults, _STEP_COMMON)

    raw_steps = data.get("step")
    if raw_steps is None and "sweep" in data:
        raw_steps = []
    if raw_steps is None:
        c.fail("", None, "the plan has no steps (add one or more [[step]] or [[sweep]] tables)")
    if not isinstance(raw_steps, list) or not all(isinstance(s, dict) for s in raw_steps):
        c.fail("", "step", "must be written as [[step]] tables")
    steps: list[Step] = []
    seen: dict[str, int] = {}
    for i, s in enumerate(raw_steps, start=1):
        label = f"step {i}"
        if isinstance(s.get("name"), str):
            label = f"step {i} ({s['name']!r})"
        kw = dict(number=i, label=label)
        c.known("step", s, _STEP, **kw)
        nm = c.string("step", s, "name", **kw)
        if nm is None:
            c.fail("step", None, "missing required field 'name'", **kw)
        if not NAME_RE.fullmatch(nm) or len(nm) > 64:
            c.fail("step", "name", f"must be 1-64 letters, digits, '-', '_' or '.', starting with a letter "
                                   f"or digit; got {nm!r}", **kw)
        if nm in seen:
            c.fail("step", "name", f"{nm!r} is already the name of step {seen[nm]}", **kw)
        seen[nm] = i
        role = c.string("step", s, "role", choices=ROLES, **kw)
        if role is None:
            c.fail("step", None, f"missing required field 'role' (one of {', '.join(ROLES)})", **kw)

        def field_(key, **opts):
            src = s if key in s else defaults
            tbl, num, lab = ("step", i, label) if key in s else ("defaults", 0, None)
            return c.number(tbl, src, key, number=num, label=lab, **opts)

        att = field_("attenuation_db", default=0.0, low=0, high=200, quantity="attenuation_db")
        center = field_("center_hz", default=None, low=0, low_open=True, high=6e9, quantity="positive_frequency")
        if center is None:
            c.fail("step", None, "missing required field 'center_hz' (in the step or in [defaults])", **kw)
        duration = field_("duration_s", default=1.0, low=0, low_open=True, high=3600, quantity="duration_s")
        repeats = int(field_("repeats", default=1, integer=True, low=1, high=100))
        with_dut_src = s if "with_dut" in s else defaults
        with_dut = c.boolean("step" if "with_dut" in s else "defaults", with_dut_src, "with_dut",
                             number=i if "with_dut" in s else 0, label=label if "with_dut" in s else None)
        if role == "dut":
            with_dut = True
        instruction = c.string("step", s, "instruction", **kw)
        devices = c.number("step", s, "devices", default=1, integer=True, low=1, high=100, **kw)
        if devices != 1 and role != "dut":
            c.fail("step", "devices", f"only a 'dut' step holds devices in series; this one is {role!r}", **kw)
        device = c.string("step", s, "device", default="", **kw)
        if device and (not NAME_RE.match(device) or len(device) > 64):
            c.fail("step", "device", f"must be 1-64 letters, digits, '-', '_' or '.'; got {device!r}", **kw)
        if device and not with_dut:
            c.fail("step", "device", "names the device in the path, but the device is not in it (with_dut = "
                                     "false)", **kw)
        if role in NOISE_SOURCE_ROLES and enr is None and not enr_table:
            c.fail("step", "role", f"{role!r} needs the noise source's ENR: add [noise_source] enr_db "
                                   "or enr_table", **kw)
        if not instruction:
            instruction = _DEFAULT_INSTRUCTIONS[role].format(
                att=f"{att:g} dB", dut=" through the device under test" if with_dut else "")
        n_samples = duration * rate
        if n_samples < 16384:
            c.fail("step", "duration_s", f"{duration:g} s at {rate:g} Hz is only {n_samples:.0f} samples; "
                                         "take at least 16384", **kw)
        line = c.lines.line("step", None, i)
        steps.append(Step(i, nm, role, att, center, duration, repeats, instruction, with_dut, line, devices, device))
        tuned = center + dongle.upconverter_hz
        if ds == "off" and tuned < TUNER_LOW_HZ:
            warnings.append(f"{name}, line {line}: step {nm!r} tunes {tuned / 1e6:g} MHz, below what most "
                            "tuners reach (about 24 MHz): use direct_sampling or an upconverter")
        if ds != "off" and center > DIRECT_SAMPLING_HIGH_HZ:
            warnings.append(f"{name}, line {line}: step {nm!r} at {center / 1e6:g} MHz is above the "
                            f"{DIRECT_SAMPLING_HIGH_HZ / 1e6:g} MHz Nyquist limit of direct sampling (aliased)")
        if enr_table and role in NOISE_SOURCE_ROLES and not enr_table[0][0] <= center <= enr_table[-1][0]:
            warnings.append(f"{name}, line {line}: step {nm!r} at {center / 1e6:g} MHz is outside the ENR "
                            "table; its end value is used")
    if "sweep" in data:
        from rxbench.sweep import expand_sweeps, merge_and_order

        sweeps = expand_sweeps(c, data, defaults, dongle, offset, set(seen), warnings, name)
        steps = merge_and_order(steps, sweeps, dongle, offset)
        if len(steps) > MAX_STEPS:
            c.fail("sweep", None, f"the plan expands to {len(steps)} steps, more than {MAX_STEPS}")
    if any(s.role in TONE_ROLES for s in steps) and level is None:
        warnings.append(f"{name}: no [generator] level_dbm: the level at the dongle's input cannot be "
                        "checked before capture")
    return Plan(
        source=name,
        text=text,
        title=title,
        description=description,
        dongle=dongle,
        steps=tuple(steps),
        generator_dbm=level,
        tone_offset_hz=offset,
        enr_db=enr,
        enr_table=tuple(enr_table),
        u_enr_db=u_enr,
        attenuator_tolerance_db=tolerance,
        swr=tuple(swr.items()),
        warnings=tuple(warnings),
        check_tolerance_db=check_tol,
        stop_on_failed_check=check_stop,
    )


def load_plan(path) -> Plan:
    """Read and validate a plan file; errors name the file (and the line and field)."""
    p = Path(path)
    try:
        text = read_text_input(p, "plan file", limit=PLAN_LIMIT_BYTES)
    except CaptureError as exc:
        raise PlanError(str(exc)) from None
    return parse_plan(text, str(p))
