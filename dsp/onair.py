"""A simulated on-air band seen through two receive paths, with the truth the comparison must find.

Several carriers fade independently (Rayleigh or Rician) and ride on a common propagation trend;
the antenna also delivers external (band) noise. Path A feeds the antenna straight into dongle A;
path B puts a passive loss at a known physical temperature in front of dongle B. Captures are taken
alternately A, B, A, B, ... (a relay switching one antenna between the paths) or simultaneously (an
ideal splitter feeding two dongles). :func:`expected_snr_difference_db` gives the true SNR difference
B - A from the SNR-cost formula; the comparison in :mod:`dsp.compare` must recover it.

Invented data: nothing here is a measurement. The scenario is a club's field station comparing its
receiver fed straight from the antenna with the same antenna fed through a band-pass filter and a
length of coax.

Notes
-----
Fading model. Each carrier's scattered component is a unit-power complex Gauss-Markov
(Ornstein-Uhlenbeck) process h(t) with autocorrelation E[h(t) h*(t + tau)] = exp(-|tau|/Tc); Tc is the
*coherence time* as used here: the lag at which the correlation of the complex amplitude falls to 1/e
(the power |h|**2 then decorrelates as exp(-2|tau|/Tc)). It is generated exactly on a grid of step
dt as h[k+1] = rho*h[k] + sqrt(1 - rho**2)*w[k], rho = exp(-dt/Tc), and interpolated linearly to the
sample times. A Rician carrier with K-factor K has gain sqrt(K/(K+1))*exp(j*phi) + sqrt(1/(K+1))*h(t);
K = 0 is Rayleigh. The Doppler spectrum of this process is Lorentzian rather than the classical
U-shape of Clarke's model; for SNR readings over captures much shorter than Tc the difference does
not matter.

References
----------
Clarke, R. H., "A statistical theory of mobile-radio reception", Bell Syst. Tech. J. 47, 1968
(Rayleigh fading); Rice, S. O., "Mathematical analysis of random noise", Bell Syst. Tech. J. 23/24,
1944-45 (Rician distribution). ITU-R Recommendation P.372 (external noise figure Fa).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rxbench.dsp import synth
from rxbench.dsp.environment import snr_degradation_db
from rxbench.dsp.units import K_B, T0_K, db_from_power, power_from_db, w_from_dbm


@dataclass(frozen=True)
class Carrier:
    """One narrowband on-air signal.

    Attributes
    ----------
    offset_hz : float
        Frequency relative to the tuned centre, Hz.
    power_dbm : float
        Mean received power at the antenna port over the fading (before the trend), dBm.
    rician_k_db : float or None
        Rician K-factor (steady over scattered power), dB; None for Rayleigh fading.
    """

    offset_hz: float
    power_dbm: float
    rician_k_db: float | None = None

    @property
    def rician_k(self) -> float:
        return 0.0 if self.rician_k_db is None else float(power_from_db(self.rician_k_db))


def _default_dongle() -> synth.Dongle:
    return synth.Dongle(gain_db=75.0, noise_figure_db=8.0, center_hz=14.1e6)


@dataclass(frozen=True)
class OnAirBand:
    """The simulated band and the two paths.

    Attributes
    ----------
    carriers : tuple of Carrier
    sample_rate_hz, center_hz : float
    external_fa_db : float
        External noise figure of the antenna Fa, dB above kT0 (antenna temperature
        Ta = T0 * 10**(Fa/10)), as ITU-R P.372 defines it.
    coherence_time_s : float
        Coherence time Tc of every carrier's fading (1/e decorrelation of the complex amplitude), s.
    trend_db_per_min : float
        Common propagation trend applied to all carriers (not to the local external noise), dB/min.
    swell_db, swell_period_s : float
        A slow common sinusoidal swell on top of the trend: amplitude (dB) and period (s).
    loss_b_db : float
        Loss of the device in path B, dB.
    loss_temperature_k : float
        Physical temperature of that loss, K.
    dongle_a, dongle_b : synth.Dongle
        The receivers of paths A and B (the same model, or two dongles with their own NF, gain and
        tuning error).
    """

    carriers: tuple = ()
    sample_rate_hz: float = 250e3
    center_hz: float = 14.1e6
    external_fa_db: float = 10.0
    coherence_time_s: float = 20.0
    trend_db_per_min: float = 0.0
    swell_db: float = 0.0
    swell_period_s: float = 300.0
    loss_b_db: float = 6.0
    loss_temperature_k: float = T0_K
    dongle_a: synth.Dongle = field(default_factory=_default_dongle)
    dongle_b: synth.Dongle = field(default_factory=_default_dongle)

    def __post_init__(self):
        if not self.carriers:
            raise ValueError("an on-air band needs at least one carrier")
        if not self.sample_rate_hz > 0:
            raise ValueError(f"sample_rate_hz={self.sample_rate_hz!r} must be positive")
        if not self.coherence_time_s > 0:
            raise ValueError(f"coherence_time_s={self.coherence_time_s!r} must be positive")
        if not self.loss_b_db >= 0:
            raise ValueError(f"loss_b_db={self.loss_b_db!r} must be >= 0 (a passive loss)")
        for c in self.carriers:
            if abs(c.offset_hz) >= self.sample_rate_hz / 2:
                raise ValueError(f"carrier at {c.offset_hz!r} Hz lies outside ±{self.sample_rate_hz / 2:g} Hz")

    @property
    def antenna_temperature_k(self) -> float:
        return T0_K * float(power_from_db(self.external_fa_db))


def demo_band(**changes) -> OnAirBand:
    """The invented scenario: six carriers across a 250 kHz slice of the 20 m band, residential-like
    external noise 10 dB above kT0 at the antenna, a 6 dB filter-and-coax path B, NF 8 dB dongles."""
    carriers = (
        Carrier(-88e3, -104.0),
        Carrier(-52e3, -110.0, rician_k_db=3.0),
        Carrier(-21e3, -100.0),
        Carrier(27e3, -108.0),
        Carrier(58e3, -103.0, rician_k_db=6.0),
        Carrier(91e3, -111.0),
    )
    params = dict(carriers=carriers, trend_db_per_min=1.5, swell_db=2.0, swell_period_s=240.0)
    params.update(changes)
    return OnAirBand(**params)


def fading_gains(times_s, band: OnAirBand, rng: np.random.Generator, *, grid_step_s: float | None = None):
    """Complex fading gains of every carrier at ``times_s`` (unit mean power), shape (n_carriers, n_times).

    Parameters
    ----------
    times_s : array_like
        Sample times, s (any order; may span many captures).
    band : OnAirBand
        Gives the carriers' K-factors and the coherence time.
    rng : numpy.random.Generator
    grid_step_s : float, optional
        Step of the generating grid, s; default Tc/50.

    Notes
    -----
    See the module notes: an exact Gauss-Markov recursion on a grid, interpolated linearly.
    """
    t = np.asarray(times_s, dtype=float)
    tc = band.coherence_time_s
    dt = tc / 50.0 if grid_step_s is None else float(grid_step_s)
    t0, t1 = float(t.min()), float(t.max())
    n_grid = int(np.ceil((t1 - t0) / dt)) + 2
    grid = t0 + dt * np.arange(n_grid)
    import scipy.signal  # here, not at the top: a slow import

    rho = np.exp(-dt / tc)
    c = np.sqrt(1.0 - rho**2)
    out = np.empty((len(band.carriers), t.size), dtype=np.complex128)
    for i, carrier in enumerate(band.carriers):
        w = (rng.standard_normal(n_grid) + 1j * rng.standard_normal(n_grid)) / np.sqrt(2.0)
        h0 = (rng.standard_normal() + 1j * rng.standard_normal()) / np.sqrt(2.0)
        h = scipy.signal.lfilter([c], [1.0, -rho], w, zi=np.array([rho * h0]))[0]
        scattered = np.interp(t, grid, h.real) + 1j * np.interp(t, grid, h.imag)
        k = carrier.rician_k
        steady = np.sqrt(k / (k + 1.0)) * np.exp(1j * rng.uniform(0, 2 * np.pi))
        out[i] = steady + np.sqrt(1.0 / (k + 1.0)) * scattered
    return out


def trend_db(times_s, band: OnAirBand, swell_phase_rad: float = 0.0):
    """Common propagation trend at ``times_s``, dB (zero at t = 0)."""
    t = np.asarray(times_s, dtype=float)
    return band.trend_db_per_min * t / 60.0 + band.swell_db * np.sin(
        2 * np.pi * t / band.swell_period_s + swell_phase_rad) - band.swell_db * np.sin(swell_phase_rad)


@dataclass(frozen=True)
class OnAirSession:
    """Captures of both paths and their start times.

    Attributes
    ----------
    a, b : tuple of ndarray
        Full-scale complex64 captures of paths A and B, in the order taken.
    times_a_s, times_b_s : ndarray
        Start time of each capture, s from the start of the session.
    band : OnAirBand
    simultaneous : bool
        True when A and B were taken at the same time (a splitter and two dongles).
    """

    a: tuple
    b: tuple
    times_a_s: np.ndarray
    times_b_s: np.ndarray
    band: OnAirBand
    simultaneous: bool


def simulate_session(
    band: OnAirBand,
    rng: np.random.Generator,
    *,
    n_pairs: int = 10,
    capture_s: float = 0.05,
    interval_s: float = 1.0,
    simultaneous: bool = False,
) -> OnAirSession:
    """Simulate ``n_pairs`` A/B pairs of captures of the band.

    Parameters
    ----------
    band : OnAirBand
    rng : numpy.random.Generator
    n_pairs : int
        Number of A captures (and of B captures).
    capture_s : float
        Length of each capture, s.
    interval_s : float
        Alternating: time between the starts of consecutive captures (A to B, B to next A), s.
        Simultaneous: time between pairs, s.
    simultaneous : bool
        Take A and B at the same time from one antenna through an ideal splitter (the antenna
        waveform, fading and external noise included, is then common to both paths).

    Returns
    -------
    OnAirSession
    """
    if n_pairs < 1:
        raise ValueError(f"{n_pairs=} must be >= 1")
    if not 0 < capture_s <= interval_s:
        raise ValueError(f"{capture_s=} must be positive and no longer than {interval_s=}")
    fs = band.sample_rate_hz
    n = int(round(capture_s * fs))
    if n < 16:
        raise ValueError(f"{capture_s=} s at {fs:g} Hz gives only {n} samples")
    if simultaneous:
        starts_a = interval_s * np.arange(n_pairs)
        starts_b = starts_a.copy()
    else:
        starts_a = 2 * interval_s * np.arange(n_pairs)
        starts_b = starts_a + interval_s
    local_t = np.arange(n) / fs
    starts = np.concatenate([starts_a, [] if simultaneous else starts_b])
    all_t = (starts[:, None] + local_t[None, :]).ravel()
    # The generating grid must be fine against the captures, or the interpolation would make the
    # fading of neighbouring captures move in lock-step.
    grid = min(band.coherence_time_s / 50.0, capture_s / 4.0)
    gains = fading_gains(all_t, band, rng, grid_step_s=grid).reshape(len(band.carriers), starts.size, n)
    swell_phase = rng.uniform(0, 2 * np.pi)
    ta_k = band.antenna_temperature_k

    def antenna(k: int, t0: float) -> np.ndarray:
        t = t0 + local_t
        level = power_from_db(trend_db(t, band, swell_phase))
        x = synth.thermal_noise(n, fs, ta_k, rng)
        for j, carrier in enumerate(band.carriers):
            amp = np.sqrt(w_from_dbm(carrier.power_dbm) * level)
            x += amp * gains[j, k] * np.exp(2j * np.pi * carrier.offset_hz * t)
        return x

    def path_b(x: np.ndarray) -> np.ndarray:
        lossy = synth.passive_loss(x, fs, band.loss_b_db, rng, temperature_k=band.loss_temperature_k)
        return band.dongle_b.receive(lossy, fs, rng)

    a, b = [], []
    for i in range(n_pairs):
        xa = antenna(i, starts_a[i])
        a.append(band.dongle_a.receive(xa, fs, rng))
        xb = xa if simultaneous else antenna(n_pairs + i, starts_b[i])
        b.append(path_b(xb))
    return OnAirSession(tuple(a), tuple(b), starts_a, starts_b, band, simultaneous)


def receiver_temperature_k(dongle: synth.Dongle, sample_rate_hz: float) -> float:
    """Noise temperature of a simulated dongle referred to its input, K: its own noise
    T0*(F - 1) plus, for 8-bit output, the quantisation noise referred back through its gain.

    Notes
    -----
    Quantisation of a busy signal adds white noise of variance step**2/12 per rail (Bennett 1948);
    with dBFS = dBm + G, its input-referred temperature is P_q / (1e3 * 10**(G/10) * k * fs).
    """
    t = dongle.noise_temperature_k
    if dongle.bits is not None:
        p_q_w = synth.CU8_QUANTISATION_POWER / (1e3 * power_from_db(dongle.gain_db))
        t += p_q_w / (K_B * sample_rate_hz)
    return float(t)


def expected_snr_difference_db(band: OnAirBand) -> float:
    """True SNR difference B - A of every carrier, dB (negative: path B hears worse).

    Notes
    -----
    Referred to the antenna port, path A's system temperature is Ta + Trx_A and path B's is
    Ta + (L - 1)*T + L*Trx_B (Friis; Bedrosian for the loss's own noise), so

        dSNR = -10*log10[(Ta + (L - 1)*T + L*Trx_B) / (Ta + Trx_A)]
             = -[snr_degradation_db(L, Ta, Trx_B) + 10*log10((Ta + Trx_B)/(Ta + Trx_A))],

    the SNR-cost formula of :func:`dsp.environment.snr_degradation_db` plus the difference of the two
    receivers (zero when they are alike). Trx includes 8-bit quantisation noise
    (:func:`receiver_temperature_k`). Fading and the trend change the signals, not this expectation.
    """
    fs = band.sample_rate_hz
    ta = band.antenna_temperature_k
    trx_a = receiver_temperature_k(band.dongle_a, fs)
    trx_b = receiver_temperature_k(band.dongle_b, fs)
    cost = snr_degradation_db(band.loss_b_db, ta, trx_b, loss_temperature_k=band.loss_temperature_k)
    return float(-(cost + db_from_power((ta + trx_b) / (ta + trx_a))))


def expected_noise_difference_db(band: OnAirBand) -> float:
    """True noise-density difference B - A at the dongles' outputs, dB (includes any gain difference).

    Notes
    -----
    N_B/N_A = [G_B * (Ta/L + T*(1 - 1/L) + Trx_B)] / [G_A * (Ta + Trx_A)] (Bedrosian 1960).
    """
    fs = band.sample_rate_hz
    ta, t = band.antenna_temperature_k, band.loss_temperature_k
    big_l = power_from_db(band.loss_b_db)
    n_b = ta / big_l + t * (1 - 1 / big_l) + receiver_temperature_k(band.dongle_b, fs)
    n_a = ta + receiver_temperature_k(band.dongle_a, fs)
    return float(db_from_power(n_b / n_a) + band.dongle_b.gain_db - band.dongle_a.gain_db)


def expected_signal_difference_db(band: OnAirBand) -> float:
    """True signal-power difference B - A at the dongles' outputs, dB: -loss + gain difference."""
    return float(-band.loss_b_db + band.dongle_b.gain_db - band.dongle_a.gain_db)


def expected_frequency_offset_hz(band: OnAirBand) -> float:
    """Frequency offset of path B's spectrum relative to path A's from the dongles' tuning errors, Hz."""
    a, b = band.dongle_a, band.dongle_b
    return float(b.freq_offset_ppm * 1e-6 * b.center_hz - a.freq_offset_ppm * 1e-6 * a.center_hz)
