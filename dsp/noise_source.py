"""A noise-source measurement at one tuning from its spectra: the Y-factor noise figure per
sub-band, and with captures through a DUT its gain (insertion loss) and own noise figure.

References
----------
Pozar, D. M., *Microwave Engineering*, noise chapter (Y-factor method) [from memory].
Friis, H. T., "Noise figures of radio receivers", Proc. IRE 32(7), 1944.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.noisefig import DutFromNoise, YFactor, dut_from_noise, y_factor
from rxbench.dsp.spectrum import Psd
from rxbench.dsp.subbands import N_SUB_BANDS, sub_band_densities
from rxbench.dsp.units import T0_K


def _where(func: Callable, valid: np.ndarray, n_out: int, *arrays) -> list:
    """``func`` applied to the elements where ``valid`` (arrays indexed, scalars passed as they are);
    NaN elsewhere. Returns ``n_out`` arrays shaped like ``valid``."""
    outs = [np.full(valid.shape, np.nan) for _ in range(n_out)]
    if valid.any():
        res = func(*[np.asarray(a)[valid] if np.ndim(a) else a for a in arrays])
        for o, r in zip(outs, res):
            o[valid] = r
    return outs


@dataclass(frozen=True)
class NoiseSourceResult:
    """A noise-source measurement at one tuning, per sub-band; the last entry of every array is the
    whole usable band.

    Attributes
    ----------
    low_hz, high_hz, center_hz : ndarray
        Sub-band limits and centres, offsets from the centre frequency, Hz.
    enr : ndarray
        ENR of each sub-band, linear.
    t_cold_k, u_enr_db : float
        Cold-state temperature (K) and the ENR's standard uncertainty (dB) used.
    n_cold, n_hot : ndarray
        Mean density of the pooled cold and hot captures (FS**2/Hz).
    dof_cold, dof_hot : ndarray
        Their degrees of freedom.
    valid : ndarray of bool
        Sub-bands where the cold reading is above zero and the hot one above it: the Y-factor
        exists there.
    receiver : YFactor
        The receive system's Y-factor and noise factor, arrays; NaN where not ``valid``.
    n_cold_dut, n_hot_dut, dof_cold_dut, dof_hot_dut : ndarray or None
        The same for the captures through the DUT (None without them).
    valid_dut : ndarray of bool or None
        Sub-bands ``valid`` where the hot reading through the DUT is also above the cold one.
    dut : DutFromNoise or None
        The DUT's gain and noise factor, arrays; NaN where not ``valid_dut``. Its ``system`` is the
        Y-factor through the DUT.
    """

    low_hz: np.ndarray
    high_hz: np.ndarray
    center_hz: np.ndarray
    enr: np.ndarray
    t_cold_k: float
    u_enr_db: float
    n_cold: np.ndarray
    n_hot: np.ndarray
    dof_cold: np.ndarray
    dof_hot: np.ndarray
    valid: np.ndarray
    receiver: YFactor
    n_cold_dut: np.ndarray | None = None
    n_hot_dut: np.ndarray | None = None
    dof_cold_dut: np.ndarray | None = None
    dof_hot_dut: np.ndarray | None = None
    valid_dut: np.ndarray | None = None
    dut: DutFromNoise | None = None


def noise_source_analysis(cold: Sequence[Psd], hot: Sequence[Psd], cold_dut: Sequence[Psd] = (),
                          hot_dut: Sequence[Psd] = (), *, enr_db, n_sub_bands: int = N_SUB_BANDS, t_cold_k=T0_K,
                          u_enr_db: float = 0.0, dc_halfwidth_hz: float | None = None,
                          edge_fraction: float = 0.1, exclude_hz=()) -> NoiseSourceResult:
    """Y-factor noise figure per sub-band, and with captures through a DUT its gain and noise figure.

    Parameters
    ----------
    cold, hot : sequence of Psd
        Spectra of the receiver alone with the source off and on; repeated captures of one state
        are pooled.
    cold_dut, hot_dut : sequence of Psd, optional
        Spectra with the DUT between the source and the receiver; both or neither.
    enr_db : float or callable
        ENR in dB, constant or a function of offset frequency (Hz, array) -> dB
        (:func:`sub_band_densities`).
    n_sub_bands : int
        Sub-bands across the common usable band.
    t_cold_k : float
        Physical temperature of the source when off, K.
    u_enr_db : float
        Standard uncertainty of the ENR, dB.
    dc_halfwidth_hz, edge_fraction
        DC spike and band edges left out (:func:`dsp.floor.usable_mask`).
    exclude_hz : array_like of (low, high), optional
        Frequency intervals left out of every spectrum (narrow lines, :func:`sub_band_densities`).

    Returns
    -------
    NoiseSourceResult

    Raises
    ------
    ValueError
        A sub-band holds no usable bin (too many sub-bands), a state has no spectrum, or only one of
        the two DUT states is given.

    Notes
    -----
    Each spectrum's mean density per sub-band comes from :func:`sub_band_densities` (ENR weighted
    by the first cold spectrum's density). Repeats of one state are pooled as the mean density,
    whose degrees of freedom are the sum of theirs (independent chi-squared estimates of one
    density). Then :func:`y_factor`, F = [ENR - Y*(T_cold/T0 - 1)]/(Y - 1), and with the DUT
    :func:`dut_from_noise`, G = (Nh,dut - Nc,dut)/(Nh - Nc) and F1 = F12 - (F2 - 1)/G, each in the
    sub-bands where its excess is positive; NaN elsewhere.

    References
    ----------
    Pozar, *Microwave Engineering*, noise chapter (Y-factor method) [from memory].
    Friis, "Noise figures of radio receivers", Proc. IRE 32, 1944.
    """
    groups = [list(cold), list(hot), list(cold_dut), list(hot_dut)]
    if not groups[0] or not groups[1]:
        raise ValueError(f"need at least one cold and one hot spectrum, got {len(groups[0])} and {len(groups[1])}")
    with_dut = bool(groups[2]) or bool(groups[3])
    if with_dut and not (groups[2] and groups[3]):
        raise ValueError(f"the DUT needs both cold and hot spectra, got {len(groups[2])} and {len(groups[3])}")
    if enr_db is None:
        raise ValueError("enr_db is needed")
    sb = sub_band_densities([s for g in groups for s in g], n_sub_bands=n_sub_bands, edge_fraction=edge_fraction,
                            dc_halfwidth_hz=dc_halfwidth_hz, enr_db=enr_db, exclude_hz=exclude_hz)
    if not np.all(np.isfinite(sb.enr) & (sb.enr > 0)):
        raise ValueError(f"enr_db={enr_db!r} gives a non-finite ENR")
    pooled, start = [], 0
    for g in groups:
        idx = range(start, start + len(g))
        start += len(g)
        pooled.append((np.mean([sb.density[i] for i in idx], axis=0), np.sum([sb.dof[i] for i in idx], axis=0))
                      if g else (None, None))
    (n_c, d_c), (n_h, d_h), (n_cd, d_cd), (n_hd, d_hd) = pooled
    t_cold_k, u_enr_db = float(t_cold_k), float(u_enr_db)

    def y_fn(h, c, e, dh, dc):
        r = y_factor(h, c, e, t_cold_k=t_cold_k, dof_hot=dh, dof_cold=dc, u_enr_db=u_enr_db)
        return r.y, r.noise_factor, r.u_noise_factor

    valid = (n_c > 0) & (n_h > n_c)
    y, f, u_f = _where(y_fn, valid, 3, n_h, n_c, sb.enr, d_h, d_c)
    receiver = YFactor(y=y, enr=sb.enr, t_cold_k=t_cold_k, noise_factor=f, u_noise_factor=u_f)
    dut = valid_d = None
    if with_dut:
        def dut_fn(h, c, hd, cd, e, d0, d1, d2, d3):
            d = dut_from_noise(h, c, hd, cd, e, t_cold_k=t_cold_k, dof=(d0, d1, d2, d3), u_enr_db=u_enr_db)
            s = d.system
            return d.gain, d.u_gain, d.noise_factor, d.u_noise_factor, s.y, s.noise_factor, s.u_noise_factor

        valid_d = valid & (n_cd > 0) & (n_hd > n_cd)
        gain, u_gain, f1, u_f1, y12, f12, u_f12 = _where(dut_fn, valid_d, 7, n_h, n_c, n_hd, n_cd, sb.enr,
                                                         d_h, d_c, d_hd, d_cd)
        dut = DutFromNoise(gain=gain, u_gain=u_gain, noise_factor=f1, u_noise_factor=u_f1,
                           system=YFactor(y=y12, enr=sb.enr, t_cold_k=t_cold_k, noise_factor=f12,
                                          u_noise_factor=u_f12))
    return NoiseSourceResult(
        low_hz=sb.low_hz, high_hz=sb.high_hz, center_hz=sb.center_hz, enr=sb.enr, t_cold_k=t_cold_k,
        u_enr_db=u_enr_db, n_cold=n_c, n_hot=n_h, dof_cold=d_c, dof_hot=d_h, valid=valid, receiver=receiver,
        n_cold_dut=n_cd, n_hot_dut=n_hd, dof_cold_dut=d_cd, dof_hot_dut=d_hd, valid_dut=valid_d, dut=dut)
