"""The guards a plan passes before anything is captured: the tone's estimated level at the dongle's
input (refused near damage, warned near full scale) and DC from the bias tee on what cannot take it.
"""

from __future__ import annotations

from rxbench.errors import UsageError
from rxbench.plan import Plan

#: Damage level of a dongle's input, dBm (about +10 dBm; from memory, common practice).
DAMAGE_DBM = 10.0
#: Estimated input levels above this are refused unless forced, dBm (10 dB below damage).
REFUSE_ABOVE_DBM = 0.0
#: A tone within this much of full scale is warned about (noise peaks ride on it), dB.
CLIP_MARGIN_DB = 3.0
#: Without a known full-scale level, tone levels above this are warned about as likely to clip, dBm:
#: dongles commonly reach full scale somewhere between about -50 and -10 dBm depending on the gain
#: (common practice).
UNKNOWN_CLIP_WARN_DBM = -40.0


def check_levels(plan: Plan, *, force: bool = False) -> list[str]:
    """The input-level guard: estimate each tone capture's level at the dongle's input.

    Returns warnings (likely clipping, unknown level); raises UsageError for any level above
    :data:`REFUSE_ABOVE_DBM` unless ``force``.
    """
    warnings: list[str] = []
    fs_dbm = plan.dongle.full_scale_dbm
    worst: dict[str, float] = {}
    for cap in plan.expand():
        level = cap.input_dbm
        if level is not None and cap.step.name not in worst:
            worst[cap.step.name] = level
    for name, level in worst.items():
        if level > REFUSE_ABOVE_DBM:
            msg = (f"step {name!r}: about {level:+.1f} dBm would reach the dongle's input (generator "
                   f"{plan.generator_dbm:+.1f} dBm minus the attenuation); its input is damaged near "
                   f"{DAMAGE_DBM:+.0f} dBm")
            if not force:
                raise UsageError(f"{plan.source}: {msg}. Add attenuation; --force only if you know the "
                                 "real level is lower")
            warnings.append(msg + " (forced)")
        elif fs_dbm is not None and level > fs_dbm - CLIP_MARGIN_DB:
            warnings.append(f"step {name!r}: about {level:+.1f} dBm at the input is within "
                            f"{CLIP_MARGIN_DB:g} dB of full scale ({fs_dbm:+.1f} dBm): it will clip")
        elif fs_dbm is None and level > UNKNOWN_CLIP_WARN_DBM:
            warnings.append(f"step {name!r}: about {level:+.1f} dBm at the input may clip the dongle "
                            "(give [dongle] full_scale_dbm, e.g. from a ladder check, for a firmer check)")
    return warnings


def check_bias_tee(plan: Plan, *, force: bool = False) -> list[str]:
    """The bias-tee guard: with ``[dongle] bias_tee`` on, DC (about 4.5-5 V, from memory, common
    practice) sits on the dongle's input. A generator's output, a noise source, a 50-ohm load or a
    DUT (a transformer shorts it, a filter may not like it) is refused unless ``force``; only an
    antenna step (an active antenna or a masthead amplifier that wants the DC) is let through."""
    if not plan.dongle.bias_tee:
        return []
    exposed = [s.name for s in plan.steps if s.role != "antenna" or s.with_dut]
    if not exposed:
        return []
    msg = (f"bias tee ON with a generator, noise source, load or DUT on the input (steps "
           f"{', '.join(exposed)}): its DC would flow into them (a transformer DUT shorts it; a generator "
           "output can be damaged)")
    if not force:
        raise UsageError(f"{plan.source}: {msg}. Set [dongle] bias_tee = false, or add a DC block and use "
                         "--force")
    return [msg + " (forced: put a DC block in front of them)"]
