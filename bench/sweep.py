"""Sweeps in plans: a ``[[sweep]]`` table expanded into steps, put in the order that needs the fewest
operator actions, each step's prompt saying only what to change.

Schema (beside ``[[step]]`` tables; values not given come from ``[defaults]``)::

    [[sweep]]
    name = "pair-a"              # prefix of the expanded steps' names
    roles = ["cold", "hot"]      # noise sweep: hot/cold (or antenna/load); tone sweep: thru/dut/step
    start_hz = 3.0e6             # noise sweep: the band to cover (centres chosen from the sample rate)
    stop_hz = 30.0e6
    # generator_hz = [3.6e6, 7.1e6]   # tone sweep instead: the generator frequencies
    # ladder_db = [0, 2, 4]           # tone sweep with role "step": the ladder's settings
    with_dut = [false, true]     # each role without and/or with the device in the path
    device = "variant-a"         # which device is in the path (a label of our own choosing)
    devices = 2                  # identical devices in series (2: a back-to-back pair)
    attenuation_db = 0
    duration_s = 0.2
    repeats = 1

Centres: the analysis leaves out the outer ``edge_fraction`` of every capture's band
(:func:`dsp.floor.usable_mask`), so neighbouring centres are spaced by the usable width less
:data:`OVERLAP_FRACTION` of it: each capture's left-out edges lie inside its neighbours' usable
bands, and neighbours share a strip in which the stitched curve's continuity can be checked. In
direct sampling the converter receives f and 28.8 MHz - f together: captures never straddle
14.4 MHz, and the two halves are a physical change of their own (a low-pass filter in front below,
a high-pass above).

Order: every capture has a physical state (anti-alias filter, source, noise source on/off, device in
the path, attenuator setting, generator frequency). Within a sweep the captures are nested by these
in the order (and serpentine direction) that changes the state least often, counted from the
previous step; the dongle's retuning is not an operator action.
"""

from __future__ import annotations

import dataclasses
import itertools
import math

from rxbench.dsp.subbands import N_SUB_BANDS
from rxbench.keys import ROLES
from rxbench.plan.model import DIRECT_SAMPLING_HIGH_HZ, NAME_RE, NOISE_SOURCE_ROLES, TONE_ROLES, Plan, Step

#: Fraction of each capture's band the analysis leaves out at each edge (dsp.floor.usable_mask's default).
EDGE_FRACTION = 0.1
#: Neighbouring captures share this fraction of the usable width: one sub-band of the noise-source
#: analysis (:data:`rxbench.dsp.subbands.N_SUB_BANDS` per capture), so that their sub-bands fall on one grid.
OVERLAP_FRACTION = 1.0 / N_SUB_BANDS
#: The components of a capture's physical state, in the nesting order preferred on a tie.
COMPONENTS = ("filter", "source", "path", "noise", "attenuation", "generator")

_SWEEP = ("name", "roles", "start_hz", "stop_hz", "generator_hz", "ladder_db", "with_dut", "device", "devices",
          "attenuation_db", "duration_s", "repeats")
_SOURCE = {"thru": "generator", "dut": "generator", "step": "generator", "hot": "noise source",
           "cold": "noise source", "antenna": "antenna", "load": "50-ohm load"}


def sweep_centers(start_hz: float, stop_hz: float, sample_rate_hz: float, *, split_hz: float | None = None,
                  edge_fraction: float = EDGE_FRACTION, overlap: float = OVERLAP_FRACTION) -> list[float]:
    """Centre frequencies whose usable bands cover ``start_hz``..``stop_hz``.

    Neighbours are ``(1 - overlap)`` usable widths apart (usable width ``(1 - edge_fraction)`` times
    the sample rate; a hair less, so that rounding never opens a gap): with ``overlap`` one sub-band
    of the analysis, neighbouring captures' sub-bands fall on one grid and the stitched curve tiles
    without gaps. The first usable edge sits on ``start_hz``; the last capture may reach beyond
    ``stop_hz``. With ``split_hz`` (direct sampling: half the converter's rate) no capture straddles
    it: below it the centres are counted down from it, above it up from it.
    """
    if not stop_hz > start_hz:
        raise ValueError(f"stop {stop_hz:g} Hz must be above start {start_hz:g} Hz")
    usable = (1.0 - edge_fraction) * sample_rate_hz
    spacing = (1.0 - overlap) * usable * (1.0 - 1e-9)

    def run(lo, hi, from_top):
        n = 1 if hi - lo <= usable else int(math.ceil((hi - lo - usable) / spacing - 1e-9)) + 1
        if from_top:
            return [hi - usable / 2 - i * spacing for i in range(n)][::-1]
        return [lo + usable / 2 + i * spacing for i in range(n)]

    if split_hz is not None and start_hz < split_hz < stop_hz:
        return run(start_hz, split_hz, True) + run(split_hz, stop_hz, False)
    return run(start_hz, stop_hz, split_hz is not None and stop_hz <= split_hz)


# ------------------------------------------------------------------------------------------------
# Physical state and operator actions


def state(plan_or_dongle, step: Step, tone_offset_hz: float) -> dict:
    """The physical state of a step's capture: component -> value (None: not part of this set-up)."""
    dongle = plan_or_dongle.dongle if isinstance(plan_or_dongle, Plan) else plan_or_dongle
    direct = dongle.direct_sampling != "off"
    path = ""
    if step.with_dut:
        what = step.device or "the device under test"
        path = what + (f" ({step.devices} in series)" if step.devices > 1 else "")
    return {
        "filter": (("low-pass (below 14.4 MHz)" if step.center_hz < DIRECT_SAMPLING_HIGH_HZ
                    else "high-pass (above 14.4 MHz)") if direct else None),
        "source": _SOURCE[step.role],
        "path": path,
        "noise": ("ON" if step.role == "hot" else "OFF") if step.role in NOISE_SOURCE_ROLES else None,
        "attenuation": step.attenuation_db,
        "generator": step.center_hz + tone_offset_hz if step.role in TONE_ROLES else None,
    }


def changes(prev: dict | None, cur: dict) -> list[str]:
    """The components an operator changes between two captures (a source swap counts once)."""
    if prev is None:
        return []
    out = []
    for k in COMPONENTS:
        a, b = prev[k], cur[k]
        if a is None or b is None or a == b:
            continue
        if k in ("noise", "generator") and prev["source"] != cur["source"]:
            continue
        out.append(k)
    if prev["source"] != cur["source"]:
        out.append("source")
    return out


def count_actions(states: list[dict], before: dict | None = None) -> int:
    """Operator actions along a sequence of states (after ``before``, when given)."""
    total, prev = 0, before
    for s in states:
        total += len(changes(prev, s))
        prev = s
    return total


def describe(prev: dict | None, cur: dict) -> str:
    """What the operator must do to go from ``prev`` to ``cur`` (the whole set-up when ``prev`` is None);
    empty when nothing changes."""
    if prev is None:
        parts = [cur["source"] + (f" switched {cur['noise']}" if cur["noise"] else "")]
        if cur["attenuation"]:
            parts.append(f"step attenuator at {cur['attenuation']:g} dB")
        if cur["path"]:
            parts.append(cur["path"])
        text = "Set up: " + " -> ".join(parts + ["dongle"]) + "."
        if cur["filter"]:
            text += f" Anti-alias filter in front of the dongle: {cur['filter']}."
        if cur["generator"] is not None:
            text += f" Generator at {cur['generator'] / 1e6:.6f} MHz."
        return text
    said = []
    for k in changes(prev, cur):
        if k == "filter":
            said.append(f"Fit the {cur['filter']} anti-alias filter in front of the dongle.")
        elif k == "source":
            extra = f", switched {cur['noise']}" if cur["noise"] else ""
            said.append(f"Connect the {cur['source']}{extra} in place of the {prev['source']}.")
        elif k == "noise":
            said.append(f"Switch the noise source {cur['noise']}.")
        elif k == "path":
            if not cur["path"]:
                said.append(f"Take {prev['path']} out of the path (thru adapter in its place).")
            elif not prev["path"]:
                said.append(f"Insert {cur['path']} between the {cur['source']} and the dongle.")
            else:
                said.append(f"Replace {prev['path']} by {cur['path']}.")
        elif k == "attenuation":
            said.append(f"Set the step attenuator to {cur['attenuation']:g} dB.")
        elif k == "generator":
            said.append(f"Retune the generator to {cur['generator'] / 1e6:.6f} MHz.")
    return " ".join(said)


def _nested(items: list, dims: tuple, key) -> list:
    """``items`` grouped by ``dims`` (outermost first), each level serpentine; innermost by centre."""
    if not dims:
        return sorted(items, key=lambda it: it[0].center_hz)
    groups: dict = {}
    for it in items:
        groups.setdefault(key(it, dims[0]), []).append(it)
    out = []
    for gi, g in enumerate(groups.values()):
        part = _nested(g, dims[1:], key)
        out += part[::-1] if gi % 2 else part
    return out


def best_order(items: list, before: dict | None) -> list:
    """The order of ``items`` ((step, state) pairs) with the fewest operator actions after ``before``."""
    varying = tuple(k for k in COMPONENTS if len({repr(s[k]) for _, s in items}) > 1)
    best, best_cost = items, None
    for dims in itertools.permutations(varying):
        order = _nested(items, dims, lambda it, k: repr(it[1][k]))
        for cand in (order, order[::-1]):
            cost = count_actions([s for _, s in cand], before)
            if best_cost is None or cost < best_cost:
                best, best_cost = cand, cost
    return best


# ------------------------------------------------------------------------------------------------
# Parsing and expansion (called by bench.plan.parse_plan)


def expand_sweeps(c, data: dict, defaults: dict, dongle, tone_offset_hz: float, taken: set[str],
                  warnings: list[str], source: str) -> list[tuple[int, list[Step]]]:
    """The ``[[sweep]]`` tables of a plan as (header line, steps) pairs, steps in capture order
    (instructions filled in later by :func:`fill_instructions`)."""
    raw = data.get("sweep")
    if raw is None:
        return []
    if not isinstance(raw, list) or not all(isinstance(s, dict) for s in raw):
        c.fail("", "sweep", "must be written as [[sweep]] tables")
    out = []
    for i, sw in enumerate(raw, start=1):
        label = f"sweep {i}" + (f" ({sw['name']!r})" if isinstance(sw.get("name"), str) else "")
        kw = dict(number=i, label=label)
        c.known("sweep", sw, _SWEEP, **kw)
        name = c.string("sweep", sw, "name", **kw)
        if name is None or not NAME_RE.match(name) or len(name) > 40:
            c.fail("sweep", "name", f"needs a name of 1-40 letters, digits, '-', '_' or '.'; got {name!r}", **kw)
        roles = sw.get("roles")
        if (not isinstance(roles, list) or not roles or not all(isinstance(r, str) for r in roles)
                or len(set(roles)) != len(roles)):
            c.fail("sweep", "roles", f"must be a list of distinct roles ({', '.join(ROLES)}); got {roles!r}", **kw)
        for r in roles:
            if r not in ROLES:
                c.fail("sweep", "roles", f"unknown role {r!r} (one of {', '.join(ROLES)})", **kw)
        tone = [r in TONE_ROLES for r in roles]
        if any(tone) and not all(tone):
            c.fail("sweep", "roles", "a sweep takes tone roles (thru, dut, step) or noise roles, not both", **kw)
        tone = all(tone)

        def num(key, **opts):
            src, tbl, n, lab = (sw, "sweep", i, label) if key in sw else (defaults, "defaults", 0, None)
            return c.number(tbl, src, key, number=n, label=lab, **opts)

        def numbers(key, low, high):
            vals = sw.get(key)
            if (not isinstance(vals, list) or not vals
                    or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                               and low <= v <= high for v in vals)):
                c.fail("sweep", key, f"must be a list of numbers in {low:g}..{high:g}; got {vals!r}", **kw)
            if len(set(vals)) != len(vals):
                c.fail("sweep", key, f"lists a value twice: {vals!r}", **kw)
            return [float(v) for v in vals]

        att = num("attenuation_db", default=0.0, low=0, high=200, quantity="attenuation_db")
        duration = num("duration_s", default=1.0, low=0, low_open=True, high=3600, quantity="duration_s")
        repeats = int(num("repeats", default=1, integer=True, low=1, high=100))
        if duration * dongle.sample_rate_hz < 16384:
            c.fail("sweep", "duration_s", f"{duration:g} s at {dongle.sample_rate_hz:g} Hz is under 16384 samples",
                   **kw)
        devices = c.number("sweep", sw, "devices", default=1, integer=True, low=1, high=100, **kw)
        device = c.string("sweep", sw, "device", default="", **kw)
        if device and (not NAME_RE.match(device) or len(device) > 64):
            c.fail("sweep", "device", f"must be 1-64 letters, digits, '-', '_' or '.'; got {device!r}", **kw)
        wd = sw.get("with_dut", [False])
        wd = [wd] if isinstance(wd, bool) else wd
        if not isinstance(wd, list) or not wd or not all(isinstance(v, bool) for v in wd) or len(set(wd)) != len(wd):
            c.fail("sweep", "with_dut", f"must be true, false or [false, true]; got {sw.get('with_dut')!r}", **kw)
        if tone:
            for key in ("start_hz", "stop_hz"):
                if key in sw:
                    c.fail("sweep", key, "a tone sweep lists its generator frequencies in generator_hz instead", **kw)
            gens = numbers("generator_hz", 1e3, 6e9)
            centers = [f - tone_offset_hz for f in gens]
            ladder = numbers("ladder_db", 0, 200) if "step" in roles else None
            if ladder is None and "ladder_db" in sw:
                c.fail("sweep", "ladder_db", "only a sweep with role 'step' takes a ladder", **kw)
        else:
            for key in ("generator_hz", "ladder_db"):
                if key in sw:
                    c.fail("sweep", key, "only a tone sweep (roles thru, dut, step) takes this", **kw)
            start = c.number("sweep", sw, "start_hz", required=True, low=0, low_open=True, high=6e9,
                             quantity="positive_frequency", **kw)
            stop = c.number("sweep", sw, "stop_hz", required=True, low=0, low_open=True, high=6e9,
                            quantity="positive_frequency", **kw)
            if stop <= start:
                c.fail("sweep", "stop_hz", f"must be above start_hz ({start:g}); got {stop:g}", **kw)
            split = DIRECT_SAMPLING_HIGH_HZ if dongle.direct_sampling != "off" else None
            centers = sweep_centers(start, stop, dongle.sample_rate_hz, split_hz=split)
            ladder = None
        if (device or devices > 1) and not (True in wd or "dut" in roles):
            c.fail("sweep", "device", "names a device, but no capture of the sweep has it in the path", **kw)
        combos = []
        for role in roles:
            for with_dut in ([True] if role == "dut" else wd):
                if role == "thru" and with_dut:
                    continue
                for a in (ladder if role == "step" else [att]):
                    combos.append((role, with_dut, a))
        line = c.lines.line("sweep", None, i)
        items = []
        for role, with_dut, a in combos:
            for f in centers:
                tag = role + ("-dut" if with_dut and role != "dut" else "") + (f"-{a:g}dB" if role == "step" else "")
                nm = f"{name}-{tag}-{f / 1e6:.4f}"
                if nm in taken:
                    c.fail("sweep", "name", f"expands to step {nm!r}, which the plan already has", **kw)
                taken.add(nm)
                items.append(Step(0, nm, role, a, f, duration, repeats, "", with_dut, line,
                                  devices if with_dut else 1, device if with_dut else "", sweep=name))
        out.append((line, items))
        lo, hi = min(centers), max(centers)
        if dongle.direct_sampling != "off" and not tone and hi + dongle.sample_rate_hz / 2 > DIRECT_SAMPLING_HIGH_HZ:
            warnings.append(f"{source}, line {line}: sweep {name!r} in direct sampling above 14.4 MHz: the converter "
                            "receives f and 28.8 MHz - f together; the plan asks for a low-pass filter below and a "
                            "high-pass above 14.4 MHz in front of the dongle")
        if dongle.direct_sampling == "off" and lo + dongle.upconverter_hz < 24e6:
            warnings.append(f"{source}, line {line}: sweep {name!r} tunes below 24 MHz, below what most tuners "
                            "reach: use direct_sampling or an upconverter")
    return out


def merge_and_order(plan_steps: list[Step], sweeps: list[tuple[int, list[Step]]], dongle,
                    tone_offset_hz: float) -> list[Step]:
    """Plain steps and expanded sweeps in plan order (by header line); each sweep in its best order;
    indices renumbered; sweep steps' instructions say only what changes."""
    blocks = [(s.line, [s], False) for s in plan_steps] + [(line, items, True) for line, items in sweeps]
    blocks.sort(key=lambda b: b[0])
    ordered: list[Step] = []
    prev_state = None
    for _, items, is_sweep in blocks:
        pairs = [(s, state(dongle, s, tone_offset_hz)) for s in items]
        if is_sweep:
            pairs = best_order(pairs, prev_state)
        for s, st in pairs:
            if is_sweep:
                s = dataclasses.replace(s, instruction=describe(prev_state, st))
            ordered.append(s)
            prev_state = st
    return [dataclasses.replace(s, index=i) for i, s in enumerate(ordered, start=1)]


def operator_actions(plan: Plan) -> int:
    """Operator actions the plan needs in its capture order (the first set-up not counted)."""
    return count_actions([state(plan, s, plan.tone_offset_hz) for s in plan.steps])


def dry_run(plan: Plan) -> dict:
    """What a run of ``plan`` would do: its steps in order, their count, total time and size."""
    from rxbench.capture import round_up_512

    rate = plan.dongle.sample_rate_hz
    steps, total_s, total_bytes, prev = [], 0.0, 0, None
    for s in plan.steps:
        st = state(plan, s, plan.tone_offset_hz)
        seconds = s.repeats * (s.duration_s + plan.dongle.settle_s)
        size = s.repeats * round_up_512(math.ceil(s.duration_s * rate) * 2)
        total_s += seconds
        total_bytes += size
        steps.append({"index": s.index, "name": s.name, "role": s.role, "center_hz": s.center_hz,
                      "attenuation_db": s.attenuation_db, "with_dut": s.with_dut, "device": s.device,
                      "devices": s.devices, "duration_s": s.duration_s, "repeats": s.repeats,
                      "sweep": s.sweep, "operator_actions": len(changes(prev, st)),
                      "instruction": s.instruction})
        prev = st
    return {"plan": plan.source, "steps": steps, "step_count": len(steps),
            "capture_count": sum(s.repeats for s in plan.steps), "capture_time_s": total_s,
            "size_bytes": total_bytes, "operator_actions": operator_actions(plan)}
