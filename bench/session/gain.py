"""The gain method in a session: each ``thru`` capture (no DUT in the path) whose metadata gives the
generator's level (``rxbench:generator_dbm``) is a tone of known level at the dongle's input, the
generator's level less the attenuator setting, and goes to the method ``rxbench nf --tone`` calls
(:func:`rxbench.methods.gain.gain_method`). The level is nominal, so each result says so."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rxbench.errors import MeasurementError, UnlikeCapturesError
from rxbench.methods.gain import GainMethodResult, gain_method

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


def _gain_methods(entries, readings, analysis: Analysis) -> list[GainMethodResult]:
    out = []
    for e in entries:
        if e.role != "thru" or e.through_dut or e.generator_dbm is None or e not in readings:
            continue
        level = e.generator_dbm - e.attenuation_or_zero
        try:
            res = gain_method(readings[e], level, level_from=f"the generator's nominal {e.generator_dbm:g} dBm less "
                                                             f"the attenuator's {e.attenuation_or_zero:g} dB")
        except (MeasurementError, UnlikeCapturesError) as exc:
            analysis.warnings.append(f"gain method on {e.name}: {exc}; no noise figure from it")
            continue
        analysis.warnings.extend(f"gain method on {e.name}: {w}" for w in res.warnings
                                 if not w.startswith(e.capture.path.name))  # the reading's own are said already
        out.append(res)
    return out
