"""Measurement plans: a TOML file that says what to capture, in what order, and what to tell the operator.

A plan is data, never code: it is parsed with :mod:`tomllib` and every field is checked against the
schema below. An error names the file, the line and the field, and repeats the value received.

Schema (every quantity carries its unit in its name)::

    title = "Direct loss of the band-pass filter"      # optional
    description = "..."                                # optional

    [dongle]                 # required
    sample_rate_hz = 250000  # 225001-300000 or 900001-3200000 (what the RTL2832U accepts)
    gain_db = 30.0           # fixed tuner gain; automatic gain is never used
    ppm = 0                  # frequency correction, whole ppm
    direct_sampling = "off"  # "off", "i" or "q" (HF through the ADC input, no tuner)
    upconverter_hz = 0       # an upconverter in front: the dongle tunes to center_hz + this
    bias_tee = false         # DC on the antenna input: only when something there needs it
    settle_s = 0.1           # discarded after every retune or gain change
    full_scale_dbm = -40.0   # optional: input level that reaches full scale at this gain

    [generator]              # optional: a signal generator's tone
    level_dbm = -30.0        # its output level, when known (the input-level guard uses it)
    offset_hz = 10000        # tone frequency minus the dongle's centre frequency

    [attenuator]             # optional
    tolerance_db = 0.3       # the step attenuator's stated accuracy (per setting), dB

    [match]                  # optional: SWRs for the mismatch terms of the loss budgets
    source_swr = 1.1         # what drives the DUT: generator with its pads and attenuator
    load_swr = 1.2           # what the DUT drives: the dongle's input (behind its pad, if any)
    dut_swr = 1.5            # the device under test, at its ports

    [noise_source]           # optional: needed by hot/cold steps
    enr_db = 15.0            # excess noise ratio; or a table:
    # enr_table = [[26e6, 15.3], [30e6, 15.1]]     # [frequency_hz, enr_db] rows, ascending
    u_enr_db = 0.2           # standard uncertainty of the ENR, dB (from its calibration)

    [check]                  # optional: the check after every capture
    level_tolerance_db = 3.0 # a tone level this far off the plan's estimate fails the check
    stop_on_failure = false  # unattended (--yes) runs stop at a failed check instead of going on

    [defaults]               # optional: values every step takes unless it gives its own
    center_hz = 28.4e6
    duration_s = 0.5
    repeats = 1
    attenuation_db = 0

    [[sweep]]                # optional: many steps across frequency (see bench.sweep)

    [[step]]                 # one or more (or sweeps), captured in order
    name = "thru"            # unique; letters, digits, '-', '_', '.'; used in file names
    role = "thru"            # thru, dut, step, hot, cold, antenna or load
    attenuation_db = 60      # the step attenuator's setting (nominal), dB
    center_hz = 28.4e6       # the dongle's centre frequency (the RF frequency with an upconverter)
    duration_s = 0.5
    repeats = 1
    with_dut = false         # the DUT is in the path (implied by role "dut")
    devices = 1              # identical devices in series (2 for a back-to-back pair)
    instruction = "Connect the generator through the attenuator and a thru adapter."

:func:`Plan.expand` turns the steps into the concrete captures, one per repeat.

The package, by concept: :mod:`.model` (the types and limits) and :mod:`.parsing` (the TOML checked
field by field, a plan file read); the public names of both are re-exported here.
"""

from pathlib import Path

from rxbench.plan.model import (DIRECT_SAMPLING_HIGH_HZ, MAX_STEPS, NOISE_SOURCE_ROLES, PLAN_LIMIT_BYTES,
                                RELIABLE_RATE_HZ, TONE_ROLES, TUNER_LOW_HZ, VALID_RATE_RANGES_HZ, DongleSettings,
                                Plan, PlannedCapture, Step)
from rxbench.plan.parsing import load_plan, parse_plan

#: Folder of the example plans shipped with rxbench.
EXAMPLES_DIR = Path(__file__).parent.parent / "data" / "plans"


def example_plans() -> list[Path]:
    """The example plan files shipped with rxbench, sorted by name."""
    return sorted(EXAMPLES_DIR.glob("*.toml"))


__all__ = ["DIRECT_SAMPLING_HIGH_HZ", "EXAMPLES_DIR", "MAX_STEPS", "NOISE_SOURCE_ROLES", "PLAN_LIMIT_BYTES",
           "RELIABLE_RATE_HZ", "TONE_ROLES", "TUNER_LOW_HZ", "VALID_RATE_RANGES_HZ", "DongleSettings", "Plan",
           "PlannedCapture", "Step", "example_plans", "load_plan", "parse_plan"]
