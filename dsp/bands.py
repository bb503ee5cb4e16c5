"""Loss (or noise figure) per amateur band from a stitched curve of sub-bands, its continuity across
retunes, and the per-band difference of two devices measured against the same reference; the
amateur band table and the one lookup of a frequency's band; a curve read at one frequency.

Pure numerics: arrays of sub-band centres, widths, values (dB) and standard uncertainties in; frozen
dataclasses out.

The mean over a band weights each sub-band by how much of it lies in the band. Sub-band
uncertainties from independent captures (the chi-squared scatter of their readings) average down as
sqrt(sum (w*u)**2)/sum(w); a term every sub-band shares (``shared_u_db``, e.g. the ENR's in a noise
figure) does not, and is added in quadrature at full size (JCGM 100:2008, fully correlated inputs).
The worst value is the largest sub-band value touching the band, with that sub-band's U; being the
largest of several noisy values it errs high by up to about its U.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Amateur bands by their widest regional limits, Hz (common practice: IARU band plans).
AMATEUR_BANDS = (
    ("160 m", 1.8e6, 2.0e6),
    ("80 m", 3.5e6, 4.0e6),
    ("60 m", 5.25e6, 5.45e6),
    ("40 m", 7.0e6, 7.3e6),
    ("30 m", 10.1e6, 10.15e6),
    ("20 m", 14.0e6, 14.35e6),
    ("17 m", 18.068e6, 18.168e6),
    ("15 m", 21.0e6, 21.45e6),
    ("12 m", 24.89e6, 24.99e6),
    ("10 m", 28.0e6, 29.7e6),
    ("6 m", 50.0e6, 54.0e6),
    ("2 m", 144.0e6, 148.0e6),
)


@dataclass(frozen=True)
class BandValue:
    """A curve summarised over one band.

    ``mean_db``/``u_mean_db`` and ``worst_db``/``u_worst_db`` are values and standard uncertainties;
    ``expanded_*`` are k times those. ``coverage`` is the fraction of the band the curve's sub-bands
    cover (below 1: the curve stops inside the band); ``n_sub_bands`` how many sub-bands touch it.
    """

    band: str
    low_hz: float
    high_hz: float
    n_sub_bands: int
    coverage: float
    mean_db: float
    u_mean_db: float
    worst_db: float
    u_worst_db: float
    worst_at_hz: float
    k: float

    @property
    def expanded_mean_db(self) -> float:
        return self.k * self.u_mean_db

    @property
    def expanded_worst_db(self) -> float:
        return self.k * self.u_worst_db

    @property
    def significant(self) -> bool:
        """The mean differs from zero by more than its expanded uncertainty (for a difference)."""
        return abs(self.mean_db) > self.expanded_mean_db

    def to_dict(self) -> dict:
        return {"band": self.band, "low_hz": self.low_hz, "high_hz": self.high_hz, "mean_db": self.mean_db,
                "u_mean_db": self.u_mean_db, "expanded_uncertainty_mean_db": self.expanded_mean_db,
                "worst_db": self.worst_db, "u_worst_db": self.u_worst_db,
                "expanded_uncertainty_worst_db": self.expanded_worst_db, "worst_at_hz": self.worst_at_hz,
                "n_sub_bands": self.n_sub_bands, "coverage": self.coverage, "k": self.k}


def per_band(frequency_hz, width_hz, value_db, u_db, *, bands=AMATEUR_BANDS, shared_u_db: float = 0.0,
             k: float = 2.0) -> tuple[BandValue, ...]:
    """Mean and worst of a curve over every band its sub-bands touch.

    Parameters
    ----------
    frequency_hz, width_hz : array_like
        Sub-band centres and widths, Hz (a stitched curve's points).
    value_db, u_db : array_like
        Values and standard uncertainties, dB; NaN points are left out.
    bands : sequence of (name, low_hz, high_hz)
    shared_u_db : float
        A standard uncertainty every point shares fully (not averaged down).
    k : float
        Coverage factor of the expanded uncertainties.
    """
    f, w = np.asarray(frequency_hz, dtype=float), np.asarray(width_hz, dtype=float)
    v, u = np.asarray(value_db, dtype=float), np.asarray(u_db, dtype=float)
    if not (f.shape == w.shape == v.shape == u.shape):
        raise ValueError("frequency_hz, width_hz, value_db and u_db must have one entry per sub-band")
    ok = np.isfinite(f) & np.isfinite(w) & np.isfinite(v) & np.isfinite(u)
    f, w, v, u = f[ok], w[ok], v[ok], u[ok]
    lo, hi = f - w / 2, f + w / 2
    out = []
    for name, b_lo, b_hi in bands:
        overlap = np.clip(np.minimum(hi, b_hi) - np.maximum(lo, b_lo), 0.0, None)
        touch = (overlap > 0) | ((w == 0) & (f >= b_lo) & (f <= b_hi))
        if not touch.any():
            continue
        wt = np.where(overlap > 0, overlap, 1.0)[touch]
        vv, uu = v[touch], u[touch]
        mean = float(np.sum(wt * vv) / np.sum(wt))
        u_mean = float(np.hypot(np.sqrt(np.sum((wt * uu) ** 2)) / np.sum(wt), shared_u_db))
        j = int(np.argmax(vv))
        # coverage: the union of the touching sub-bands within the band
        iv = sorted(zip(np.maximum(lo[touch], b_lo), np.minimum(hi[touch], b_hi)))
        covered, end = 0.0, b_lo
        for a, b in iv:
            a = max(a, end)
            if b > a:
                covered += b - a
                end = b
        out.append(BandValue(band=name, low_hz=float(b_lo), high_hz=float(b_hi), n_sub_bands=int(touch.sum()),
                             coverage=float(min(1.0, covered / (b_hi - b_lo))), mean_db=mean, u_mean_db=u_mean,
                             worst_db=float(vv[j]), u_worst_db=float(np.hypot(uu[j], shared_u_db)),
                             worst_at_hz=float(f[touch][j]), k=float(k)))
    return tuple(out)


@dataclass(frozen=True)
class RetuneStep:
    """Where two neighbouring tunings measured the same frequencies: their disagreement."""

    frequency_hz: float
    difference_db: float  # later tuning minus earlier, at overlapping sub-bands
    u_db: float
    k: float

    @property
    def significant(self) -> bool:
        return abs(self.difference_db) > self.k * self.u_db


def retune_steps(center_hz, frequency_hz, value_db, u_db, width_hz, *, k: float = 2.0) -> tuple[RetuneStep, ...]:
    """Continuity of a curve across retunes: for each pair of neighbouring tunings, the mean difference
    of their sub-bands in the strip both cover (each sub-band of the higher tuning paired with the
    nearest of the lower), with its standard uncertainty (different captures: independent).

    Parameters are per tuning (sequences of arrays), absolute frequencies in Hz."""
    order = np.argsort(np.asarray(center_hz, dtype=float))
    out = []
    for a, b in zip(order[:-1], order[1:]):
        fa, va, ua, wa = (np.asarray(x[a], dtype=float) for x in (frequency_hz, value_db, u_db, width_hz))
        fb, vb, ub, wb = (np.asarray(x[b], dtype=float) for x in (frequency_hz, value_db, u_db, width_hz))
        ka, kb = np.isfinite(va) & np.isfinite(ua), np.isfinite(vb) & np.isfinite(ub)
        fa, va, ua, wa = fa[ka], va[ka], ua[ka], wa[ka]
        fb, vb, ub, wb = fb[kb], vb[kb], ub[kb], wb[kb]
        if not fa.size or not fb.size:
            continue
        top_a, bottom_b = np.max(fa + wa / 2), np.min(fb - wb / 2)
        in_b = fb <= top_a
        diffs, us = [], []
        for f, v, uv in zip(fb[in_b], vb[in_b], ub[in_b]):
            j = int(np.argmin(np.abs(fa - f)))
            if fa[j] < bottom_b:
                continue
            diffs.append(v - va[j])
            us.append(np.hypot(uv, ua[j]))
        if diffs:
            n = len(diffs)
            out.append(RetuneStep(frequency_hz=float(0.5 * (top_a + bottom_b)), difference_db=float(np.mean(diffs)),
                                  u_db=float(np.sqrt(np.sum(np.square(us))) / n), k=float(k)))
    return tuple(out)


def difference_curve(value_a_db, own_u_a_db, value_b_db, own_u_b_db):
    """Per sub-band difference a - b of two devices measured on the same sub-bands against the same
    reference captures, and its standard uncertainty from each device's own captures only (the shared
    reference, attenuator and source cancel in the difference and are not counted)."""
    a, b = np.asarray(value_a_db, dtype=float), np.asarray(value_b_db, dtype=float)
    return a - b, np.hypot(np.asarray(own_u_a_db, dtype=float), np.asarray(own_u_b_db, dtype=float))


def band_of(frequency_hz) -> str | None:
    """The amateur band (:data:`AMATEUR_BANDS`, edges included) holding ``frequency_hz``, or None
    (also for None or a frequency that is not finite)."""
    if frequency_hz is None or not np.isfinite(frequency_hz):
        return None
    for name, low, high in AMATEUR_BANDS:
        if low <= frequency_hz <= high:
            return name
    return None


@dataclass(frozen=True)
class CurvePoint:
    """A curve of sub-bands read at one frequency (see :func:`curve_at`).

    ``value_db`` and its standard uncertainty ``u_db``; ``at_hz`` is the centre of the sub-band that
    holds the frequency, or the frequency itself when the value is interpolated between two
    neighbouring sub-bands (``interpolated``).
    """

    value_db: float
    u_db: float
    at_hz: float
    interpolated: bool


def curve_at(frequency_hz: float, centre_hz, width_hz, value_db, u_db) -> CurvePoint | None:
    """The value of a curve of sub-bands at ``frequency_hz``, or None where the curve does not say.

    The sub-band whose centre lies within half its width of the frequency gives its own value. A
    frequency between two neighbouring sub-bands whose centres are at most the sum of their widths
    apart is read on the straight line between them, v = (1 - w)*v0 + w*v1 with
    w = (f - f0)/(f1 - f0), and the two values' uncertainties taken as independent (each sub-band is
    read from captures of its own): u = sqrt(((1 - w)*u0)**2 + (w*u1)**2) (JCGM 100:2008, 5.1.2).
    Never extrapolated beyond the curve's ends, nor across a wider gap. Points whose value is not
    finite (no value there) are left out; the points may come in any order.
    """
    f, width, v, u = (np.atleast_1d(np.asarray(a, dtype=float)) for a in (centre_hz, width_hz, value_db, u_db))
    if not f.shape == width.shape == v.shape == u.shape or f.ndim != 1:
        raise ValueError(f"centre, width, value and u must be 1-D and alike, got {f.shape}, {width.shape}, "
                         f"{v.shape}, {u.shape}")
    keep = np.isfinite(v)
    f, width, v, u = f[keep], width[keep], v[keep], u[keep]
    order = np.argsort(f, kind="stable")
    f, width, v, u = f[order], width[order], v[order], u[order]
    i = int(np.searchsorted(f, frequency_hz))
    for j in (i - 1, i):
        if 0 <= j < f.size and abs(f[j] - frequency_hz) < width[j] / 2:
            return CurvePoint(float(v[j]), float(u[j]), float(f[j]), False)
    if 0 < i < f.size and f[i] - f[i - 1] <= width[i] + width[i - 1]:
        w = (frequency_hz - f[i - 1]) / (f[i] - f[i - 1])
        return CurvePoint(float((1 - w) * v[i - 1] + w * v[i]), float(np.hypot((1 - w) * u[i - 1], w * u[i])),
                          float(frequency_hz), True)
    return None


@dataclass(frozen=True)
class NearbyValue:
    """A value taken from tunings near a frequency (see :func:`near_tunings`): ``value_db`` and its
    standard uncertainty ``u_db``, from the tuning at ``low_hz`` alone (``high_hz`` None) or on the line
    between the tunings at ``low_hz`` and ``high_hz``."""

    value_db: float
    u_db: float
    low_hz: float
    high_hz: float | None


def near_tunings(frequency_hz: float, centre_hz, value_db, u_db, *, max_distance_hz: float) -> NearbyValue | None:
    """A value at ``frequency_hz`` from tunings within ``max_distance_hz`` of it, or None.

    With a tuning either side, the straight line between the nearest two, v = (1 - w)*v0 + w*v1; its
    uncertainty is the larger of the two, u = max(u0, u1): a bound for inputs that are fully
    correlated (a noise figure's shares the one noise source's ENR), where the line's own would be
    (1 - w)*u0 + w*u1 (JCGM 100:2008, 5.2.2). With tunings on one side only, the nearest one's own
    value. Tunings whose value is not finite are left out; any order.
    """
    f, v, u = (np.atleast_1d(np.asarray(a, dtype=float)) for a in (centre_hz, value_db, u_db))
    if not f.shape == v.shape == u.shape or f.ndim != 1:
        raise ValueError(f"centre, value and u must be 1-D and alike, got {f.shape}, {v.shape}, {u.shape}")
    keep = np.isfinite(f) & np.isfinite(v) & (np.abs(f - frequency_hz) <= max_distance_hz)
    f, v, u = f[keep], v[keep], u[keep]
    if not f.size:
        return None
    below, above = np.flatnonzero(f < frequency_hz), np.flatnonzero(f > frequency_hz)
    if below.size and above.size:
        i, j = below[np.argmax(f[below])], above[np.argmin(f[above])]
        w = (frequency_hz - f[i]) / (f[j] - f[i])
        return NearbyValue(float(v[i] + w * (v[j] - v[i])), float(max(u[i], u[j])), float(f[i]), float(f[j]))
    i = int(np.argmin(np.abs(f - frequency_hz)))
    return NearbyValue(float(v[i]), float(u[i]), float(f[i]), None)
