"""Synthetic captures with known truth: tones, thermal noise, a noise source, passive losses, and a
dongle with its impairments.

Signals before the dongle are in sqrt(W) (|x|**2 averages to watts into the matched input); the
dongle turns them into full-scale complex64 samples. Invented data lives here and in ``recordings/``
only; nothing in this module is a measurement.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from rxbench.dsp.units import K_B, T0_K, amplitude_from_db, power_from_db

LossSpec = float | Callable[[np.ndarray], np.ndarray]


def tone(
    n: int,
    sample_rate_hz: float,
    *,
    power_w: float,
    offset_hz: float,
    drift_hz: float = 0.0,
    phase_rad: float = 0.0,
    start: int = 0,
    total: int | None = None,
) -> np.ndarray:
    """A complex tone of ``power_w`` at ``offset_hz``, drifting linearly by ``drift_hz`` over the capture.

    ``start``/``total`` generate samples ``start .. start+n`` of a ``total``-sample capture, so long
    captures can be made block by block with a continuous phase.
    """
    t = (start + np.arange(n)) / sample_rate_hz
    duration = (total or n) / sample_rate_hz
    phase = 2 * np.pi * (offset_hz * t + 0.5 * drift_hz / duration * t**2) + phase_rad
    return np.sqrt(power_w) * np.exp(1j * phase)


def thermal_noise(n: int, sample_rate_hz: float, temperature_k: float, rng: np.random.Generator) -> np.ndarray:
    """Complex white Gaussian noise of available power k*T*fs (W)."""
    if temperature_k < 0:
        raise ValueError(f"{temperature_k=} must be >= 0 K")
    sigma = np.sqrt(K_B * temperature_k * sample_rate_hz / 2.0)
    return sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def noise_source(n: int, sample_rate_hz: float, enr_db: float, hot: bool, rng: np.random.Generator) -> np.ndarray:
    """A noise source's output: T0*(ENR + 1) when on (hot), T0 when off (cold)."""
    temperature = T0_K * (power_from_db(enr_db) + 1.0) if hot else T0_K
    return thermal_noise(n, sample_rate_hz, temperature, rng)


def antenna_noise(n: int, sample_rate_hz: float, fa_db: float, rng: np.random.Generator) -> np.ndarray:
    """Band noise from an antenna whose external noise factor is ``fa_db`` (Ta = T0 * 10**(Fa/10))."""
    return thermal_noise(n, sample_rate_hz, T0_K * power_from_db(fa_db), rng)


def passive_loss(
    x: np.ndarray,
    sample_rate_hz: float,
    loss_db: LossSpec,
    rng: np.random.Generator,
    temperature_k: float = T0_K,
) -> np.ndarray:
    """Pass ``x`` through a matched passive device at ``temperature_k``.

    ``loss_db`` is a number, or a callable of offset frequency (Hz, array) returning dB. The device
    adds its own thermal noise, T*(1 - |H(f)|**2) per frequency (Bedrosian 1960), so a passive loss at
    T0 in front of a T0 source leaves the noise density unchanged.
    """
    x = np.asarray(x, dtype=np.complex128)
    if callable(loss_db):
        import scipy.fft  # here, not at the top: a slow import

        f = scipy.fft.fftfreq(x.size, 1.0 / sample_rate_hz)
        h2 = power_from_db(-np.asarray(loss_db(f), dtype=float))
        if np.any(h2 > 1):
            raise ValueError("a passive device cannot have negative loss")
        out = scipy.fft.ifft(scipy.fft.fft(x) * np.sqrt(h2))
        noise = scipy.fft.fft(thermal_noise(x.size, sample_rate_hz, temperature_k, rng))
        return out + scipy.fft.ifft(noise * np.sqrt(1.0 - h2))
    if loss_db < 0:
        raise ValueError(f"a passive device cannot have negative loss, got {loss_db=}")
    h2 = power_from_db(-loss_db)
    return x * np.sqrt(h2) + thermal_noise(x.size, sample_rate_hz, temperature_k * (1 - h2), rng)


def if_response_db(offset_hz, sample_rate_hz: float, ripple_db: float = 0.0, ripple_period_hz: float = 200e3,
                   rolloff_db: float = 0.0) -> np.ndarray:
    """A dongle's IF response (gain, dB) at ``offset_hz`` from the centre: a passband ripple of
    ``ripple_db`` peak-to-peak and a roll-off growing as the eighth power of the offset to
    ``-rolloff_db`` at the band edges (+/- half the sample rate). Invented shape, for the simulated
    bench; what matters is that it is not flat."""
    u = np.abs(np.asarray(offset_hz, dtype=float)) / (sample_rate_hz / 2.0)
    ripple = 0.5 * ripple_db * np.cos(2 * np.pi * np.asarray(offset_hz, dtype=float) / ripple_period_hz)
    return ripple - rolloff_db * u**8


def rapp(x: np.ndarray, saturation: float, p: float = 2.0) -> np.ndarray:
    """Rapp AM/AM compression: |y| = |x| / (1 + (|x|/saturation)**(2p))**(1/(2p)), phase kept."""
    r = np.abs(x)
    return x / (1.0 + (r / saturation) ** (2 * p)) ** (1.0 / (2 * p))


@dataclass(frozen=True)
class Dongle:
    """A simulated RTL2832U-class receiver.

    Attributes
    ----------
    gain_db : float
        Conversion gain: dBFS = dBm at the input + ``gain_db``.
    noise_figure_db : float
        Noise figure of the receiver, dB (its own noise, referred to the input, T0*(F - 1)).
    dc_offset : complex
        Added at the output, full-scale units.
    iq_gain_db, iq_phase_deg : float
        I/Q amplitude and phase imbalance.
    compression_dbfs : float or None
        Output amplitude saturation of the Rapp model (dBFS); None for a linear receiver.
    rapp_p : float
        Smoothness of the Rapp knee.
    bits : int or None
        ADC resolution (8 as the RTL2832U delivers); None leaves samples unquantised.
    freq_offset_ppm, center_hz : float
        Tuning error (ppm of ``center_hz``) shifts everything by ppm*1e-6*center_hz.
    if_ripple_db, if_ripple_period_hz, if_rolloff_db : float
        The IF response after the receiver's own noise (:func:`if_response_db`): passband ripple
        (peak-to-peak, dB, one cycle per period) and the roll-off reached at the band edges (dB).
    """

    gain_db: float = 40.0
    noise_figure_db: float = 6.0
    dc_offset: complex = 0.0
    iq_gain_db: float = 0.0
    iq_phase_deg: float = 0.0
    compression_dbfs: float | None = None
    rapp_p: float = 2.0
    bits: int | None = 8
    freq_offset_ppm: float = 0.0
    center_hz: float = 100e6
    if_ripple_db: float = 0.0
    if_ripple_period_hz: float = 200e3
    if_rolloff_db: float = 0.0

    @property
    def noise_temperature_k(self) -> float:
        return T0_K * (power_from_db(self.noise_figure_db) - 1.0)

    def _analog(self, x_w: np.ndarray, sample_rate_hz: float, rng: np.random.Generator) -> np.ndarray:
        x = np.asarray(x_w, dtype=np.complex128) + thermal_noise(
            np.size(x_w), sample_rate_hz, self.noise_temperature_k, rng
        )
        x = x * np.sqrt(1e3) * amplitude_from_db(self.gain_db)
        if self.if_ripple_db or self.if_rolloff_db:
            import scipy.fft  # here, not at the top: a slow import

            f = scipy.fft.fftfreq(x.size, 1.0 / sample_rate_hz)
            h = amplitude_from_db(if_response_db(f, sample_rate_hz, self.if_ripple_db, self.if_ripple_period_hz,
                                                 self.if_rolloff_db))
            x = scipy.fft.ifft(scipy.fft.fft(x) * h)
        if self.freq_offset_ppm:
            shift = self.freq_offset_ppm * 1e-6 * self.center_hz
            x = x * np.exp(2j * np.pi * shift * np.arange(x.size) / sample_rate_hz)
        if self.compression_dbfs is not None:
            x = rapp(x, amplitude_from_db(self.compression_dbfs), self.rapp_p)
        if self.iq_gain_db or self.iq_phase_deg:
            g, phi = amplitude_from_db(self.iq_gain_db), np.deg2rad(self.iq_phase_deg)
            x = x.real + 1j * g * (x.imag * np.cos(phi) - x.real * np.sin(phi))
        return x + self.dc_offset

    def receive_cu8(self, x_w: np.ndarray, sample_rate_hz: float, rng: np.random.Generator) -> np.ndarray:
        """Interleaved unsigned 8-bit I/Q codes, as the dongle delivers them."""
        x = self._analog(x_w, sample_rate_hz, rng)
        out = np.empty(2 * x.size, dtype=np.uint8)
        out[0::2] = np.clip(np.rint(x.real * 127.5 + 127.5), 0, 255)
        out[1::2] = np.clip(np.rint(x.imag * 127.5 + 127.5), 0, 255)
        return out

    def receive(self, x_w: np.ndarray, sample_rate_hz: float, rng: np.random.Generator) -> np.ndarray:
        """Full-scale complex64 samples (quantised to 8 bits unless ``bits`` is None)."""
        if self.bits is None:
            return self._analog(x_w, sample_rate_hz, rng).astype(np.complex64)
        if self.bits != 8:
            raise ValueError(f"only 8-bit quantisation is modelled, got bits={self.bits}")
        return cu8_to_complex(self.receive_cu8(x_w, sample_rate_hz, rng))

    def noise_density_dbfs_per_hz(self, source_temperature_k: float = T0_K) -> float:
        """Expected output noise density with a matched source at ``source_temperature_k`` (no quantisation)."""
        return float(
            10 * np.log10(K_B * (source_temperature_k + self.noise_temperature_k) * 1e3) + self.gain_db
        )


def cu8_to_complex(raw: np.ndarray) -> np.ndarray:
    """Interleaved cu8 codes -> complex64 at +/-1 full scale: (u - 127.5)/127.5 per rail."""
    raw = np.asarray(raw, dtype=np.uint8)
    x = (raw.astype(np.float32) - np.float32(127.5)) / np.float32(127.5)
    return x.view(np.complex64)


#: Quantisation noise density of an ideal 8-bit cu8 converter, FS**2 per sample (both rails):
#: step 1/127.5, variance step**2/12 per rail (Bennett 1948).
CU8_QUANTISATION_POWER = 2.0 * (1.0 / 127.5) ** 2 / 12.0


# --------------------------------------------------------------------------------------------
# Signals that are not a steady tone in white noise (each with its truth in closed form)


def white_noise(n: int, power: float, rng: np.random.Generator, *, real: bool = False) -> np.ndarray:
    """White Gaussian noise of mean power ``power`` (FS**2): complex, or real with ``real``."""
    if real:
        return np.sqrt(power) * rng.standard_normal(n)
    return np.sqrt(power / 2.0) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def keyed(n: int, sample_rate_hz: float, *, duty: float, period_s: float, start_s: float = 0.0) -> np.ndarray:
    """On-off keying gate (0 or 1 per sample): on for the first ``duty`` of every ``period_s``,
    starting ``start_s`` into the capture. The fraction of samples on is ``duty`` exactly when the
    capture holds whole periods."""
    t = np.arange(n) / sample_rate_hz - start_s
    return ((t % period_s) < duty * period_s).astype(float)


def two_line_keying(n: int, sample_rate_hz: float, *, power: float, offsets_hz: tuple[float, float],
                    period_s: float) -> np.ndarray:
    """Frequency-shift keying between two lines with a continuous phase: half of each ``period_s``
    on each offset, so each line holds ``power`` for half the time (average power/2 each)."""
    t = np.arange(n) / sample_rate_hz
    first = (t % period_s) < period_s / 2
    freq = np.where(first, offsets_hz[0], offsets_hz[1])
    phase = 2 * np.pi * np.cumsum(freq) / sample_rate_hz
    return np.sqrt(power) * np.exp(1j * phase)


def level_ramp(n: int, sample_rate_hz: float, *, start_dbfs: float, end_dbfs: float, offset_hz: float) -> np.ndarray:
    """A tone whose power goes linearly in dB from ``start_dbfs`` to ``end_dbfs`` over the capture
    (a drift of (end - start) / duration dB/s)."""
    level_db = np.linspace(start_dbfs, end_dbfs, n)
    t = np.arange(n) / sample_rate_hz
    return amplitude_from_db(level_db) * np.exp(2j * np.pi * offset_hz * t)


def floor_step(n: int, *, power: float, step_db: float, at: float, rng: np.random.Generator) -> np.ndarray:
    """Complex white noise of ``power`` that rises by ``step_db`` from the fraction ``at`` of the
    capture to the end (a gain step, an interferer switching on)."""
    x = white_noise(n, power, rng)
    x[int(at * n):] *= amplitude_from_db(step_db)
    return x


def broad_hump(n: int, sample_rate_hz: float, *, power: float, center_hz: float, width_hz: float,
               rng: np.random.Generator) -> np.ndarray:
    """Gaussian noise of ``power`` whose spectrum is a Gaussian hump at ``center_hz`` with -3 dB
    width ``width_hz`` (a pulsed or digitally modulated signal, not a line)."""
    spec = np.fft.fft(white_noise(n, 1.0, rng))
    f = np.fft.fftfreq(n, 1.0 / sample_rate_hz)
    sigma = width_hz / (2.0 * np.sqrt(2.0 * np.log(2.0)))  # FWHM of a Gaussian, power in frequency
    x = np.fft.ifft(spec * np.sqrt(np.exp(-0.5 * ((f - center_hz) / sigma) ** 2)))
    return x * np.sqrt(power / np.mean(np.abs(x) ** 2))


def band_limited(x: np.ndarray, sample_rate_hz: float, low_hz: float, high_hz: float) -> np.ndarray:
    """``x`` (real) with everything outside ``low_hz`` .. ``high_hz`` removed (an ideal band-pass:
    an audio passband with an empty stopband)."""
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1.0 / sample_rate_hz)
    spec[(f < low_hz) | (f > high_hz)] = 0.0
    return np.fft.irfft(spec, x.size)


def band_limited_complex(x: np.ndarray, sample_rate_hz: float, low_hz: float, high_hz: float) -> np.ndarray:
    """Complex ``x`` with everything outside offsets ``low_hz`` .. ``high_hz`` removed (an ideal
    band-pass in front of the dongle)."""
    spec = np.fft.fft(x)
    f = np.fft.fftfreq(x.size, 1.0 / sample_rate_hz)
    spec[(f < low_hz) | (f > high_hz)] = 0.0
    return np.fft.ifft(spec)


def zero_runs(x: np.ndarray, *, fraction: float, runs: int = 3) -> np.ndarray:
    """``x`` with ``runs`` equal runs of exactly-zero samples (dropped transfers) covering
    ``fraction`` of it, evenly spread."""
    y = np.array(x, copy=True)
    length = int(fraction * y.size / runs)
    gap = (y.size - runs * length) / (runs + 1)
    for i in range(runs):
        start = int(gap * (i + 1)) + i * length
        y[start:start + length] = 0
    return y
