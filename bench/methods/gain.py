"""The gain method: the receive system's noise figure from a tone of known absolute level at its input,
NF = P_in - C/N0 - kT0 (REFERENCES.md, "Gain method and known-signal method").

``rxbench nf --tone C --level-dbm X`` calls :func:`gain_method`; the formula is
:func:`rxbench.dsp.noisefig.nf_gain_method_db`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from rxbench.dsp.noisefig import nf_gain_method_db
from rxbench.dsp.tone import tone_shape
from rxbench.dsp.units import T0_K
from rxbench.errors import MeasurementError
from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.methods.tone import read_tone

#: A tone level above this (dBm at the dongle) gets a compression/damage caution.
LEVEL_CAUTION_DBM = -30.0

_DB_PER_NEPER = 10.0 / math.log(10.0)


@dataclass(frozen=True, eq=False)
class GainMethodResult:
    """The noise figure by the gain method.

    Attributes
    ----------
    capture : str
        The tone capture's path.
    level_dbm : float
        The tone's level at the dongle's input, dBm (as given).
    tone_offset_hz, cn0_dbhz, snr_db, snr_bandwidth_hz : float
        The tone reading.
    noise_figure_db, u_noise_figure_db : float
        The noise figure and its standard uncertainty (tone and noise reading only; the generator's
        level accuracy is not in it).
    warnings : tuple of str
    """

    capture: str
    level_dbm: float
    tone_offset_hz: float
    cn0_dbhz: float
    snr_db: float
    snr_bandwidth_hz: float
    noise_figure_db: float
    u_noise_figure_db: float
    warnings: tuple = ()

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.u_noise_figure_db

    @property
    def noise_temperature_k(self) -> float:
        return T0_K * (10 ** (self.noise_figure_db / 10) - 1.0)

    def to_dict(self) -> dict:
        return {
            "method": "gain", "capture": self.capture, "level_dbm": self.level_dbm,
            "tone_offset_hz": self.tone_offset_hz, "cn0_dbhz": self.cn0_dbhz, "snr_db": self.snr_db,
            "snr_bandwidth_hz": self.snr_bandwidth_hz, "noise_figure_db": self.noise_figure_db,
            "noise_figure_u_db": self.u_noise_figure_db, "expanded_uncertainty_db": self.expanded_uncertainty_db,
            "coverage_factor": COVERAGE_FACTOR, "noise_temperature_k": self.noise_temperature_k,
            "warnings": list(self.warnings),
        }


def gain_method(reading, level_dbm: float, *, level_from: str | None = None) -> GainMethodResult:
    """The noise figure from one reading of a tone of level ``level_dbm`` (dBm at the dongle's input,
    the source terminated at T0).

    ``level_from`` says where a level that was not measured at the input comes from (a session: the
    generator's nominal level less the attenuator setting); the result then carries a warning that
    its error is not in the uncertainty.

    Raises
    ------
    MeasurementError
        No tone above the noise, or one that is not steady (intermittent, or keyed faster than the
        time track resolves): its average C/N0 is not that of the level given.
    UnlikeCapturesError
        The tone is the DC spike (:func:`rxbench.methods.tone.read_tone`).
    """
    cap = reading.capture
    t = reading.tone
    if t is None or not t.power > 0:
        raise MeasurementError(f"{cap.path}: no tone found above the noise; the gain method needs one")
    warnings = list(read_tone(reading, "tone").warnings)  # one capture: its tone must not be the DC spike
    shape = tone_shape(reading.psd, reading.floor, t)
    if shape.on_fraction is not None or shape.varies_within_slots:
        # The level given is the generator's while on; the capture's C/N0 averages its off time in.
        present = ("keyed faster than the time slots" if shape.varies_within_slots
                   else f"present in only {100 * shape.on_fraction:.0f} % of the capture")
        raise MeasurementError(f"{cap.path}: the tone is {present} (a loose connector, a keyed generator?): "
                               "the gain method needs a steady tone")
    nf_db = float(nf_gain_method_db(level_dbm, t.cn0_dbhz))
    u_n0_db = _DB_PER_NEPER * reading.floor.u_density / reading.floor.density
    u_db = float(math.hypot(t.u_power_db, u_n0_db))
    if level_dbm > LEVEL_CAUTION_DBM:
        warnings.append(f"--level-dbm {level_dbm:g}: a strong tone compresses the dongle and reads low "
                        "(NF high); the dongle's input is damaged at a few milliwatts (about +10 dBm) — "
                        "never connect a transmitter without attenuation rated for its power")
    if level_from is not None:
        warnings.append(f"the tone's level at the input ({level_dbm:g} dBm) is {level_from}: its error (the "
                        "generator's accuracy, cable loss) moves the noise figure dB for dB and is not in the "
                        "uncertainty; give the measured level to rxbench nf --tone --level-dbm")
    if nf_db < 0:
        warnings.append(f"gain method gives NF {nf_db:.2f} dB, below 0 dB, which no receiver has: "
                        "check --level-dbm (cable loss, generator calibration)")
    return GainMethodResult(str(cap.path), float(level_dbm), t.offset_hz, t.cn0_dbhz, t.snr_db, t.snr_bandwidth_hz,
                            nf_db, u_db, tuple(warnings))
