"""The ladder check: each attenuator step against its nominal value, and the dongle's linear range.

``rxbench ladder`` and a session's ``step`` captures call :func:`ladder_check`; the numerics are
:func:`rxbench.dsp.ladder.check_ladder`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from rxbench.dsp import ladder as ladder_mod
from rxbench.errors import MeasurementError
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.methods.common import PooledTone, require_comparable_tones

#: Defaults of the check, defined once (:mod:`rxbench.dsp.ladder`).
DEFAULT_TOLERANCE_DB = ladder_mod.DEFAULT_TOLERANCE_DB
DEFAULT_LINEARITY_DB = ladder_mod.DEFAULT_LINEARITY_DB
#: A level within this of the ladder's linear readings counts as inside them, dB.
LINEAR_MARGIN_DB = 1.0


def _steps_text(values) -> str:
    return ", ".join(f"{v:g}" for v in values) + " dB"


@dataclass(frozen=True, eq=False)
class LadderResult:
    """A ladder check with the readings behind it.

    Attributes
    ----------
    check : rxbench.dsp.ladder.LadderCheck
    steps : tuple of PooledTone
        The pooled readings of each step, in the check's (ascending) order.
    center_hz : float or None
    warnings : tuple of str
    """

    check: ladder_mod.LadderCheck
    steps: tuple
    center_hz: float | None
    settings: dict = field(default_factory=dict)
    warnings: tuple = ()

    @property
    def frequency_hz(self) -> float | None:
        if self.center_hz is None:
            return None
        return self.center_hz + float(np.nanmean([p.offset_hz for p in self.steps]))

    def linearity_between(self, low_dbfs: float, high_dbfs: float) -> float | None:
        """The linearity half-width (dB) between two levels when the check found the dongle linear
        over them (within :data:`LINEAR_MARGIN_DB`), else None."""
        c = self.check
        lin = [r for r, reg in zip(c.reading_dbfs, c.region) if reg == ladder_mod.LINEAR]
        if lin and min(lin) <= low_dbfs + LINEAR_MARGIN_DB and high_dbfs - LINEAR_MARGIN_DB <= max(lin):
            return c.linearity_db
        return None

    def to_dict(self) -> dict:
        c = self.check
        rows = []
        for i, p in enumerate(self.steps):
            t = p.readings[0].tone
            rows.append({
                "nominal_db": float(c.nominal_db[i]), "reading_dbfs": float(c.reading_dbfs[i]),
                "u_reading_db": float(c.u_reading_db[i]), "measured_db": float(c.measured_db[i]),
                "error_db": float(c.error_db[i]), "u_error_db": float(c.u_error_db[i]),
                "expanded_error_uncertainty_db": float(c.k * c.u_error_db[i]),
                "flagged": bool(c.flagged[i]), "region": c.region[i],
                "snr_db": None if t is None else t.snr_db,
                "capture": p.paths[0], "captures": p.names,
            })
        return {
            "center_hz": self.center_hz, "frequency_hz": self.frequency_hz, "steps": rows,
            "offset_dbfs": c.offset_dbfs, "u_offset_db": c.u_offset_db, "reference": c.reference,
            "compression_db": c.compression_db, "usable_top_db": c.usable_top_db,
            "usable_bottom_db": c.usable_bottom_db, "usable_range_db": c.usable_range_db,
            "top_limited_by": c.top_limited_by, "bottom_limited_by": c.bottom_limited_by,
            "tolerance_db": c.tolerance_db, "linearity_db": c.linearity_db, "coverage_factor": c.k, "k": c.k,
            "n_flagged": int(np.sum(c.flagged)), "settings": self.settings, "warnings": list(self.warnings),
        }


def ladder_check(steps: Mapping[float, PooledTone], *, tolerance_db: float = DEFAULT_TOLERANCE_DB,
                 linearity_db: float = DEFAULT_LINEARITY_DB, reference_db: float | None = None,
                 drift_ppm: float = DEFAULT_PPM) -> LadderResult:
    """Check a ladder: attenuator setting (dB) -> pooled thru readings, three settings or more.

    Raises UnlikeCapturesError when the steps' tones are not one signal (3 bins + ``drift_ppm``;
    a step lost in the noise is allowed), MeasurementError when the readings allow no check.
    """
    require_comparable_tones(*steps.values(), drift_ppm=drift_ppm)
    steps = dict(sorted(steps.items()))
    if len(steps) < 3:
        raise MeasurementError(f"{len(steps)} attenuator setting(s); the ladder check needs 3 or more")
    try:
        c = ladder_mod.check_ladder(list(steps), [p.dbfs for p in steps.values()], [p.u_db for p in steps.values()],
                                    tolerance_db=tolerance_db, linearity_db=linearity_db, reference_db=reference_db)
    except ValueError as exc:
        raise MeasurementError(f"ladder check: {exc}") from None
    warnings = []
    compressed = [db for db, reg in zip(c.nominal_db, c.region) if reg == ladder_mod.COMPRESSED]
    noisy = [db for db, reg in zip(c.nominal_db, c.region) if reg == ladder_mod.NOISE_LIMITED]
    if compressed:
        warnings.append(f"step(s) {_steps_text(compressed)}: the dongle compresses at the top of the ladder "
                        f"({c.compression_db:.2f} dB short at {compressed[0]:g} dB); these steps say nothing "
                        "about the attenuator")
    if noisy:
        warnings.append(f"step(s) {_steps_text(noisy)}: too close to the noise to check to "
                        f"+/-{c.tolerance_db:g} dB")
    for db, err, flagged in zip(c.nominal_db, c.error_db, c.flagged):
        if flagged:
            warnings.append(f"the {db:g} dB step reads {err:+.2f} dB off its nominal value (tolerance "
                            f"{c.tolerance_db:g} dB) in the dongle's linear range: the attenuator, not the dongle")
    first = next(iter(steps.values()))
    return LadderResult(c, tuple(steps[float(db)] for db in c.nominal_db), first.center_hz,
                        settings={"tolerance_db": tolerance_db, "linearity_db": linearity_db,
                                  "reference_db": reference_db, "drift_ppm": drift_ppm},
                        warnings=tuple(warnings))
