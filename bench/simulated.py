"""The simulated bench: a signal generator, a step attenuator, a device under test, a noise source,
an antenna and a dongle, behind the same capture-source interface as the real dongle.

The bench's hidden truth (:class:`BenchTruth`) is a frozen dataclass, so a demo or a test can compare
what rxbench measured with what the bench really was. The plan's current capture
(:meth:`SimulatedBench.arrange`) decides what is connected, the way an operator would arrange it:

- ``thru``/``step``: generator -> step attenuator -> dongle;
- ``dut``: generator -> step attenuator -> DUT -> dongle;
- ``hot``/``cold``: noise source on/off (-> attenuator) (-> DUT) -> dongle;
- ``antenna``: antenna (external noise Fa) (-> attenuator) (-> DUT) -> dongle;
- ``load``: a 50-ohm load at 290 K (-> attenuator) (-> DUT) -> dongle.

Every passive part (attenuator, DUT) sits at 290 K and adds its own thermal noise. Signals are built
with :mod:`dsp.synth`. Invented data: the default truth is a club's field station that shares one
antenna between two receivers through a splitter and a 10 m band-pass filter.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rxbench.device import Applied, check_rate, check_read_size
from rxbench.errors import DeviceError
from rxbench.plan import NOISE_SOURCE_ROLES, TONE_ROLES, DongleSettings, PlannedCapture
from rxbench.dsp import synth
from rxbench.dsp.environment import external_fa_db
from rxbench.dsp.units import T0_K, amplitude_from_db, w_from_dbm

#: The field station's splitter plus 10 m band-pass filter: (frequency_hz, loss_db). Invented.
FIELD_STATION_DUT_LOSS = (
    (24.0e6, 19.0),
    (26.0e6, 8.0),
    (27.5e6, 4.6),
    (28.0e6, 4.15),
    (28.5e6, 4.0),
    (29.0e6, 4.05),
    (29.7e6, 4.4),
    (31.0e6, 7.5),
    (33.0e6, 16.0),
)
#: The field station's step attenuator: (nominal_db, actual minus nominal, dB). Invented.
FIELD_STATION_ATTENUATOR_ERRORS = ((10.0, 0.05), (20.0, -0.1), (30.0, 0.15), (40.0, 0.1), (50.0, -0.2),
                                   (60.0, 0.25), (70.0, -0.15), (80.0, 0.3), (90.0, 0.35))


@dataclass(frozen=True)
class BenchTruth:
    """What the simulated bench really is (the numbers a measurement should recover).

    Attributes
    ----------
    generator_dbm : float or None
        The generator's true output level, dBm; None uses the plan's nominal level.
    attenuator_errors_db : tuple of (nominal_db, error_db)
        The step attenuator's error (actual minus nominal) at the listed settings; 0 elsewhere.
    dut_loss_table : tuple of (frequency_hz, loss_db)
        The DUT's insertion loss, interpolated linearly in frequency (end values held outside).
    enr_db : float or None
        The noise source's true ENR, dB; None uses the plan's.
    environment, galactic : str, bool
        ITU-R P.372 category (and galactic noise) of the antenna's external noise.
    antenna_fa_db : float or None
        A fixed external noise figure Fa (dB above kT0b) instead of the P.372 model.
    dongle_gain_db : float
        Conversion gain, dBFS = dBm at the input + this, at the tuner gain ``reference_gain_db``;
        it follows the plan's gain setting dB for dB.
    reference_gain_db : float
    dongle_nf_db : float
        The dongle's noise figure, dB.
    dc_offset, iq_gain_db, iq_phase_deg, compression_dbfs, freq_offset_ppm
        Dongle impairments (see :class:`dsp.synth.Dongle`).
    drift_hz_per_s : float
        The generator tone drifts by this much per second of bench time.
    settle_s, settle_error_db : float
        After a retune or gain change the first ``settle_s`` seconds come out ``settle_error_db``
        too strong (the transient a capture must discard).
    """

    generator_dbm: float | None = None
    attenuator_errors_db: tuple[tuple[float, float], ...] = FIELD_STATION_ATTENUATOR_ERRORS
    dut_loss_table: tuple[tuple[float, float], ...] = FIELD_STATION_DUT_LOSS
    enr_db: float | None = None
    environment: str = "rural"
    galactic: bool = False
    antenna_fa_db: float | None = None
    dongle_gain_db: float = 80.0
    reference_gain_db: float = 30.0
    dongle_nf_db: float = 6.5
    dc_offset: complex = complex(0.004, -0.003)
    iq_gain_db: float = 0.05
    iq_phase_deg: float = 0.4
    compression_dbfs: float | None = 0.0
    freq_offset_ppm: float = 1.5
    drift_hz_per_s: float = 0.5
    settle_s: float = 0.02
    settle_error_db: float = 6.0

    def attenuation_db(self, nominal_db: float) -> float:
        """The attenuator's true attenuation at a nominal setting, dB."""
        for nom, err in self.attenuator_errors_db:
            if abs(nom - nominal_db) < 1e-9:
                return nominal_db + err
        return nominal_db

    def dut_loss_db(self, frequency_hz):
        """The DUT's true insertion loss at ``frequency_hz`` (scalar or array), dB."""
        f, loss = zip(*self.dut_loss_table)
        out = np.interp(np.asarray(frequency_hz, dtype=float), f, loss)
        return float(out) if np.ndim(out) == 0 else out

    def fa_db(self, frequency_hz: float) -> float:
        """The antenna's external noise figure Fa at ``frequency_hz``, dB above kT0b."""
        if self.antenna_fa_db is not None:
            return float(self.antenna_fa_db)
        return float(external_fa_db(frequency_hz, self.environment, galactic=self.galactic))

    def conversion_gain_db(self, gain_setting_db: float) -> float:
        """dBFS per dBm at the dongle's input for a tuner gain setting."""
        return self.dongle_gain_db + (gain_setting_db - self.reference_gain_db)

    def dongle(self, gain_setting_db: float) -> synth.Dongle:
        """The :class:`dsp.synth.Dongle` this truth stands for (frequency error applied separately)."""
        return synth.Dongle(
            gain_db=self.conversion_gain_db(gain_setting_db),
            noise_figure_db=self.dongle_nf_db,
            dc_offset=self.dc_offset,
            iq_gain_db=self.iq_gain_db,
            iq_phase_deg=self.iq_phase_deg,
            compression_dbfs=self.compression_dbfs,
            bits=8,
        )

    def full_scale_dbm(self, gain_setting_db: float) -> float:
        """Input level of a tone that reaches 0 dBFS at this gain setting, dBm."""
        return -self.conversion_gain_db(gain_setting_db)


class SimulatedBench:
    """A capture source whose samples come from :mod:`dsp.synth` and a :class:`BenchTruth`.

    Parameters
    ----------
    truth : BenchTruth, optional
        The bench's hidden truth (default: the field-station scenario).
    seed : int, optional
        Seed of the noise generator (fixed seed: repeatable sessions).
    """

    name = "simulated"
    #: Its recordings can be made again at will (the capture skips the fsyncs a real dongle's need).
    repeatable = True
    #: Bytes per read the capture loop asks for (smaller reads: smoother progress, more overhead).
    chunk_bytes = 65536

    def __init__(self, truth: BenchTruth | None = None, *, seed: int | None = 0):
        self.truth = truth if truth is not None else BenchTruth()
        self.rng = np.random.default_rng(seed)
        self.dropped_bytes = 0
        self.is_open = False
        self.settings: DongleSettings | None = None
        self.center_hz: float | None = None
        self.capture: PlannedCapture | None = None
        self._t_s = 0.0  # bench time: drives the generator's drift
        self._phase_rad = 0.0
        self._settle_left = 0

    def open(self) -> None:
        self.is_open = True

    def close(self) -> None:
        self.is_open = False

    def configure(self, settings: DongleSettings, center_hz: float) -> Applied:
        if not self.is_open:
            raise DeviceError("the simulated dongle is not open")
        check_rate(settings.sample_rate_hz)
        changed = (self.settings is None or self.center_hz != center_hz
                   or self.settings.gain_db != settings.gain_db
                   or self.settings.sample_rate_hz != settings.sample_rate_hz
                   or self.settings.direct_sampling != settings.direct_sampling)
        self.settings, self.center_hz = settings, float(center_hz)
        if changed:
            self._settle_left = int(round(self.truth.settle_s * settings.sample_rate_hz))
        return Applied(sample_rate_hz=settings.sample_rate_hz, center_hz=float(center_hz),
                       gain_db=settings.gain_db, changed=changed)

    def arrange(self, capture: PlannedCapture) -> None:
        """Connect what ``capture`` asks for (what the operator does on a real bench)."""
        if capture.role in TONE_ROLES and self.truth.generator_dbm is None and capture.generator_dbm is None:
            raise DeviceError("the simulated generator needs a level: give [generator] level_dbm in the plan")
        if capture.role in NOISE_SOURCE_ROLES and self.truth.enr_db is None and capture.enr_db is None:
            raise DeviceError("the simulated noise source needs an ENR: give [noise_source] enr_db in the plan")
        self.capture = capture

    # -- the signal chain ------------------------------------------------------------------------

    def _source(self, n: int, fs: float) -> np.ndarray:
        cap, truth = self.capture, self.truth
        if cap.role in TONE_ROLES:
            level = truth.generator_dbm if truth.generator_dbm is not None else cap.generator_dbm
            # the dongle's frequency error (less the plan's correction) moves the tone; the drift
            # moves it through the session
            ppm = truth.freq_offset_ppm - self.settings.ppm
            f0 = cap.tone_offset_hz + ppm * 1e-6 * self.center_hz + truth.drift_hz_per_s * self._t_s
            dur = n / fs
            drift = truth.drift_hz_per_s * dur
            x = synth.tone(n, fs, power_w=w_from_dbm(level), offset_hz=f0, drift_hz=drift, phase_rad=self._phase_rad)
            self._phase_rad = math.fmod(self._phase_rad + 2 * math.pi * (f0 * dur + 0.5 * drift * dur), 2 * math.pi)
            return x + synth.thermal_noise(n, fs, T0_K, self.rng)
        if cap.role in NOISE_SOURCE_ROLES:
            enr = truth.enr_db if truth.enr_db is not None else cap.enr_db
            return synth.noise_source(n, fs, enr, cap.role == "hot", self.rng)
        if cap.role == "antenna":
            return synth.antenna_noise(n, fs, truth.fa_db(self.center_hz), self.rng)
        if cap.role == "load":
            return synth.thermal_noise(n, fs, T0_K, self.rng)
        raise DeviceError(f"the simulated bench has no set-up for role {cap.role!r}")

    def read_bytes(self, n: int) -> np.ndarray:
        """``n`` bytes of interleaved cu8 I/Q, as the dongle would deliver them."""
        n = check_read_size(n)
        if not self.is_open or self.settings is None:
            raise DeviceError("the simulated dongle is not open and configured")
        if self.capture is None:
            raise DeviceError("nothing is connected to the simulated dongle (arrange a capture first)")
        fs = self.settings.sample_rate_hz
        n_samples = n // 2
        x = self._source(n_samples, fs)
        cap = self.capture
        if cap.attenuation_db:
            x = synth.passive_loss(x, fs, self.truth.attenuation_db(cap.attenuation_db), self.rng)
        if cap.with_dut:
            center = self.center_hz
            x = synth.passive_loss(x, fs, lambda f: self.truth.dut_loss_db(center + f), self.rng)
        if self._settle_left:
            k = min(self._settle_left, n_samples)
            x[:k] *= amplitude_from_db(self.truth.settle_error_db)
            self._settle_left -= k
        self._t_s += n_samples / fs
        return self.truth.dongle(self.settings.gain_db).receive_cu8(x, fs, self.rng)
