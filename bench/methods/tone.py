"""Reading a tone: the tone of one role pooled over its repeated captures, with the warnings its
readings carry, as a method result.

:func:`read_tone` refuses readings that hold no tone (MeasurementError, the capture named) or whose
tones are not one signal (UnlikeCapturesError: another frequency, or the DC spike). The gain method
(``rxbench nf --tone``, :mod:`rxbench.methods.gain`) and the Python API (``rxbench.tone``) read
their tones through it; the loss and ladder methods pool their roles with the same
:func:`rxbench.methods.common.pool`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.errors import UsageError
from rxbench.methods.common import COVERAGE_FACTOR, PooledTone, pool, require_comparable_tones
from rxbench.reading import tone_dict


@dataclass(frozen=True, eq=False)
class ToneResult:
    """The tone of one role, pooled over its captures.

    Attributes
    ----------
    role : str
        What the captures are (``thru``, ``dut``, ...; "" when not said).
    pooled : PooledTone
        The mean reading (dBFS), its standard uncertainty and degrees of freedom, the readings.
    warnings : tuple of str
        The readings' own warnings (low SNR, clipping, an intermittent or drifting tone, a broad
        signal, ...), each said once.
    """

    role: str
    pooled: PooledTone
    warnings: tuple = ()

    @property
    def readings(self) -> tuple:
        return self.pooled.readings

    @property
    def power_dbfs(self) -> float:
        return self.pooled.dbfs

    @property
    def u_power_db(self) -> float:
        return self.pooled.u_db

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.pooled.u_db

    @property
    def offset_hz(self) -> float:
        return self.pooled.offset_hz

    @property
    def center_hz(self) -> float | None:
        return self.pooled.center_hz

    @property
    def frequency_hz(self) -> float | None:
        return None if self.center_hz is None else self.center_hz + self.offset_hz

    @property
    def snr_db(self) -> float:
        """Mean SNR of the captures (dB, in each reading's SNR bandwidth)."""
        return float(np.mean([r.tone.snr_db for r in self.readings]))

    @property
    def cn0_dbhz(self) -> float:
        """Mean C/N0 of the captures, dB-Hz."""
        return float(np.mean([r.tone.cn0_dbhz for r in self.readings]))

    def to_dict(self) -> dict:
        return {
            "role": self.role, "center_hz": self.center_hz, "frequency_hz": self.frequency_hz,
            "offset_hz": self.offset_hz, "power_dbfs": self.power_dbfs, "u_power_db": self.u_power_db,
            "dof": None if math.isinf(self.pooled.dof) else self.pooled.dof,
            "expanded_uncertainty_db": self.expanded_uncertainty_db, "coverage_factor": COVERAGE_FACTOR,
            "snr_db": self.snr_db, "cn0_dbhz": self.cn0_dbhz, "captures": self.pooled.names,
            "readings": [{"capture": str(r.capture.path), **tone_dict(r.tone, r.capture.center_hz),
                          "clip_fraction": r.health.clip_fraction} for r in self.readings],
            "warnings": list(self.warnings),
        }


def read_tone(readings, role: str = "", *, drift_ppm: float = DEFAULT_PPM) -> ToneResult:
    """The tone of ``readings`` (one :class:`~rxbench.reading.Reading` or repeats of one role), pooled.

    Raises
    ------
    UsageError
        No readings.
    MeasurementError
        A reading without a tone above the noise (named).
    UnlikeCapturesError
        Tones that are not one signal (beyond 3 bins + ``drift_ppm``), or a tone on the DC spike.
    """
    readings = [readings] if hasattr(readings, "tone") else list(readings)
    if not readings:
        raise UsageError(f"no {role or 'tone'} reading given")
    pooled = pool(readings, role)
    require_comparable_tones(pooled, drift_ppm=drift_ppm)
    warnings = tuple(dict.fromkeys(w for r in readings for w in r.warnings))
    return ToneResult(role, pooled, warnings)
