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
with :mod:`dsp.synth`.

HF reaches the dongle two ways, as the plan's ``[dongle]`` says:

- direct sampling (``direct_sampling = "i"`` or ``"q"``): the tuner is bypassed, so its gain setting
  does nothing; the converter's own noise (:attr:`BenchTruth.direct_sampling_nf_db`) is the receiver's
  noise; the converter digitises the input at :attr:`BenchTruth.adc_rate_hz`, so what sits at that
  rate minus f lands on f, mirrored, weakened only by the anti-alias filter the operator fitted
  (:attr:`BenchTruth.alias_rejection_db`; None for a bare input); no I/Q pair, so no I/Q imbalance;
- an upconverter (``upconverter_hz``): its own conversion loss and noise figure in front of the
  tuner, which tunes ``upconverter_hz`` higher.

Either way the dongle's IF response (ripple, roll-off toward the band edges) shapes the captured
band after the receiver's noise, as on a real dongle. A step's ``device`` label picks which device
is in the path (:attr:`BenchTruth.device_loss_tables`). Invented data: the default truth is a club's field station that shares one
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
from rxbench.dsp.units import T0_K, amplitude_from_db, power_from_db, w_from_dbm

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


def transformer_pair_loss(frequency_hz, *, flat_db: float, low_corner_hz: float, high_corner_hz: float,
                          order: int = 2) -> np.ndarray:
    """Loss (dB) of a pair of matching transformers back to back: ``flat_db`` in the passband, rising
    below ``low_corner_hz`` (magnetising inductance, first order) and steeply above
    ``high_corner_hz`` (leakage inductance and winding capacitance, ``order``). Invented model."""
    f = np.asarray(frequency_hz, dtype=float)
    return (flat_db + 10 * np.log10(1 + (low_corner_hz / f) ** 2)
            + 10 * np.log10(1 + (f / high_corner_hz) ** (2 * order)))


def _table(func, low_hz=1e6, high_hz=60e6, step_hz=0.25e6):
    f = np.arange(low_hz, high_hz + step_hz / 2, step_hz)
    return tuple((float(a), round(float(b), 6)) for a, b in zip(f, func(f)))


#: The example sweep's invented pair of matching transformers back to back, two variants: "variant-a"
#: bare, "variant-b" with a compensating capacitor that moves the upper roll-off from 20 to 24 MHz.
TRANSFORMER_PAIRS = (
    ("variant-a", _table(lambda f: transformer_pair_loss(f, flat_db=0.5, low_corner_hz=1.0e6,
                                                          high_corner_hz=20e6))),
    ("variant-b", _table(lambda f: transformer_pair_loss(f, flat_db=0.6, low_corner_hz=1.0e6,
                                                          high_corner_hz=24e6))),
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
    device_loss_tables : tuple of (label, table)
        The loss tables of devices a step names by its ``device`` label; a step without a label gets
        ``dut_loss_table``.
    direct_sampling_gain_db, direct_sampling_nf_db : float
        Conversion gain (dBFS per dBm) and noise figure in direct sampling, whatever the gain setting.
    adc_rate_hz : float
        The converter's sample rate: in direct sampling, adc_rate_hz - f lands on f.
    alias_rejection_db : float or None
        How much the anti-alias filter in front weakens that alias, dB; None: a bare input (none).
    upconverter_loss_db, upconverter_nf_db : float
        The upconverter's conversion loss and noise figure, dB.
    if_ripple_db, if_ripple_period_hz, if_rolloff_db : float
        The dongle's IF response (:func:`dsp.synth.if_response_db`).
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
    device_loss_tables: tuple = TRANSFORMER_PAIRS
    direct_sampling_gain_db: float = 55.0
    direct_sampling_nf_db: float = 30.0
    adc_rate_hz: float = 28.8e6
    alias_rejection_db: float | None = 60.0
    upconverter_loss_db: float = 6.0
    upconverter_nf_db: float = 6.5
    if_ripple_db: float = 0.0
    if_ripple_period_hz: float = 200e3
    if_rolloff_db: float = 0.0

    def attenuation_db(self, nominal_db: float) -> float:
        """The attenuator's true attenuation at a nominal setting, dB."""
        for nom, err in self.attenuator_errors_db:
            if abs(nom - nominal_db) < 1e-9:
                return nominal_db + err
        return nominal_db

    def dut_loss_db(self, frequency_hz, device: str = ""):
        """The true insertion loss at ``frequency_hz`` (scalar or array) of the device labelled
        ``device`` (the DUT when unlabelled), dB."""
        table = self.dut_loss_table
        if device:
            tables = dict(self.device_loss_tables)
            if device not in tables:
                raise DeviceError(f"the simulated bench has no device {device!r} (it has: "
                                  f"{', '.join(tables) or 'none'})")
            table = tables[device]
        f, loss = zip(*table)
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

    def dongle(self, gain_setting_db: float, direct_sampling: str = "off") -> synth.Dongle:
        """The :class:`dsp.synth.Dongle` this truth stands for (frequency error applied separately);
        in direct sampling the converter alone: its gain and noise, no I/Q pair to be imbalanced."""
        direct = direct_sampling != "off"
        return synth.Dongle(
            gain_db=self.direct_sampling_gain_db if direct else self.conversion_gain_db(gain_setting_db),
            noise_figure_db=self.direct_sampling_nf_db if direct else self.dongle_nf_db,
            dc_offset=0.1 * self.dc_offset if direct else self.dc_offset,
            iq_gain_db=0.0 if direct else self.iq_gain_db,
            iq_phase_deg=0.0 if direct else self.iq_phase_deg,
            compression_dbfs=self.compression_dbfs,
            bits=8,
            if_ripple_db=self.if_ripple_db,
            if_ripple_period_hz=self.if_ripple_period_hz,
            if_rolloff_db=self.if_rolloff_db,
        )

    def full_scale_dbm(self, gain_setting_db: float, direct_sampling: str = "off") -> float:
        """Input level of a tone that reaches 0 dBFS at this gain setting, dBm."""
        return -self.dongle(gain_setting_db, direct_sampling).gain_db


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

    def _source(self, n: int, fs: float, center_hz: float, *, with_tone: bool = True) -> np.ndarray:
        """What the source delivers around ``center_hz`` (the tone only when ``with_tone``)."""
        cap, truth = self.capture, self.truth
        if cap.role in TONE_ROLES:
            if not with_tone:
                return synth.thermal_noise(n, fs, T0_K, self.rng)
            level = truth.generator_dbm if truth.generator_dbm is not None else cap.generator_dbm
            # the dongle's frequency error (less the plan's correction) moves the tone; the drift
            # moves it through the session
            ppm = truth.freq_offset_ppm - self.settings.ppm
            f0 = cap.tone_offset_hz + ppm * 1e-6 * center_hz + truth.drift_hz_per_s * self._t_s
            dur = n / fs
            drift = truth.drift_hz_per_s * dur
            x = synth.tone(n, fs, power_w=w_from_dbm(level), offset_hz=f0, drift_hz=drift, phase_rad=self._phase_rad)
            self._phase_rad = math.fmod(self._phase_rad + 2 * math.pi * (f0 * dur + 0.5 * drift * dur), 2 * math.pi)
            return x + synth.thermal_noise(n, fs, T0_K, self.rng)
        if cap.role in NOISE_SOURCE_ROLES:
            enr = truth.enr_db if truth.enr_db is not None else cap.enr_db
            return synth.noise_source(n, fs, enr, cap.role == "hot", self.rng)
        if cap.role == "antenna":
            return synth.antenna_noise(n, fs, truth.fa_db(center_hz), self.rng)
        if cap.role == "load":
            return synth.thermal_noise(n, fs, T0_K, self.rng)
        raise DeviceError(f"the simulated bench has no set-up for role {cap.role!r}")

    def _path(self, x: np.ndarray, fs: float, center_hz: float) -> np.ndarray:
        """The passive parts between the source and the dongle's input, around ``center_hz``."""
        cap = self.capture
        if cap.attenuation_db:
            x = synth.passive_loss(x, fs, self.truth.attenuation_db(cap.attenuation_db), self.rng)
        if cap.with_dut:
            device = cap.step.device
            self.truth.dut_loss_db(center_hz, device)  # an unknown device label fails here
            x = synth.passive_loss(x, fs, lambda f: self.truth.dut_loss_db(center_hz + f, device), self.rng)
        return x

    def read_bytes(self, n: int) -> np.ndarray:
        """``n`` bytes of interleaved cu8 I/Q, as the dongle would deliver them."""
        n = check_read_size(n)
        if not self.is_open or self.settings is None:
            raise DeviceError("the simulated dongle is not open and configured")
        if self.capture is None:
            raise DeviceError("nothing is connected to the simulated dongle (arrange a capture first)")
        fs, truth, settings = self.settings.sample_rate_hz, self.truth, self.settings
        n_samples = n // 2
        x = self._path(self._source(n_samples, fs, self.center_hz), fs, self.center_hz)
        if settings.direct_sampling != "off":
            # the converter samples the real input at adc_rate_hz: what sits at adc_rate_hz - f lands
            # on f, mirrored (complex conjugate), through the same path and the anti-alias filter
            alias_hz = truth.adc_rate_hz - self.center_hz
            if alias_hz > 0:
                y = self._path(self._source(n_samples, fs, alias_hz, with_tone=False), fs, alias_hz)
                rejection = truth.alias_rejection_db or 0.0
                x = x + np.conj(y) * amplitude_from_db(-rejection)
        elif settings.upconverter_hz:
            # the upconverter's own noise (referred to its input), then its conversion loss
            t_up = T0_K * (power_from_db(truth.upconverter_nf_db) - 1.0)
            x = (x + synth.thermal_noise(n_samples, fs, t_up, self.rng)) * amplitude_from_db(-truth.upconverter_loss_db)
        if self._settle_left:
            k = min(self._settle_left, n_samples)
            x[:k] *= amplitude_from_db(self.truth.settle_error_db)
            self._settle_left -= k
        self._t_s += n_samples / fs
        return truth.dongle(settings.gain_db, settings.direct_sampling).receive_cu8(x, fs, self.rng)
