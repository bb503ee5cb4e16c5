"""The few probability functions rxbench needs: chi-square and Student t quantiles, chi-square density.

They are written out here (regularised incomplete gamma and beta functions by series and continued
fraction, inverted by safeguarded Newton iteration) because the reference libraries that have them
cost 0.1 to 0.5 s to import, and every command pays that on every run. Tests check them against
``scipy.stats`` to 1e-9 or better over the degrees of freedom rxbench meets (1 to 1e7, fractional
included).

Methods: W. H. Press et al., *Numerical Recipes*, 3rd ed. (2007), sections 6.2 (incomplete gamma
function: series for x < a + 1, Lentz continued fraction above), 6.4 (incomplete beta function,
continued fraction) and 9.4 (Newton-Raphson kept inside a bracket).
"""

from __future__ import annotations

import functools
import math

import numpy as np

_EPS = 2.0**-53
_TINY = 1e-300
_MAX_TERMS = 100_000


def _stirling_tail(a: float) -> float:
    """log Gamma(a) - [(a - 1/2) log a - a + log(2 pi)/2], for a >= 10 (Stirling series, error < 1e-17)."""
    r = 1.0 / (a * a)
    return (1.0 / 12.0 - r * (1.0 / 360.0 - r * (1.0 / 1260.0 - r / 1680.0))) / a


def _log_gamma_ratio(b: float, a: float) -> float:
    """log Gamma(b + a) - log Gamma(b), without the cancellation of two large lgamma values."""
    if b < 10.0 or b + a < 10.0:
        return math.lgamma(b + a) - math.lgamma(b)
    return ((b - 0.5) * math.log1p(a / b) + a * math.log(b + a) - a
            + _stirling_tail(b + a) - _stirling_tail(b))


def _log_gamma_kernel(a: float, x: float) -> float:
    """log of x**a * exp(-x) / Gamma(a), the prefactor of both incomplete gamma expansions. For
    large a it is written about x = a so that nothing of size a cancels."""
    if a < 10.0:
        return a * math.log(x) - x - math.lgamma(a)
    t = (x - a) / a
    return a * (math.log1p(t) - t) + 0.5 * math.log(a / (2.0 * math.pi)) - _stirling_tail(a)


def gamma_tails(a: float, x: float) -> tuple[float, float]:
    """Regularised incomplete gamma functions (P(a, x), Q(a, x)), each to full relative precision
    where it is the smaller of the two."""
    if x <= 0.0:
        return 0.0, 1.0
    if math.isinf(x):
        return 1.0, 0.0
    if x < a + 1.0:
        term = total = 1.0 / a
        n = a
        for _ in range(_MAX_TERMS):
            n += 1.0
            term *= x / n
            total += term
            if term < total * _EPS:
                break
        p = total * math.exp(_log_gamma_kernel(a, x))
        return p, 1.0 - p
    b = x + 1.0 - a
    c = 1.0 / _TINY
    d = 1.0 / b
    h = d
    for i in range(1, _MAX_TERMS):
        an = -i * (i - a)
        b += 2.0
        d = an * d + b
        d = d if abs(d) > _TINY else _TINY
        c = b + an / c
        c = c if abs(c) > _TINY else _TINY
        d = 1.0 / d
        step = d * c
        h *= step
        if abs(step - 1.0) < _EPS:
            break
    q = h * math.exp(_log_gamma_kernel(a, x))
    return 1.0 - q, q


def _beta_fraction(a: float, b: float, x: float) -> float:
    """Continued fraction of the incomplete beta function (converges fast for x < (a+1)/(a+b+2))."""
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c = 1.0
    d = 1.0 - qab * x / qap
    d = 1.0 / (d if abs(d) > _TINY else _TINY)
    h = d
    for m in range(1, _MAX_TERMS):
        m2 = 2 * m
        for aa in (m * (b - m) * x / ((qam + m2) * (a + m2)),
                   -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2))):
            d = 1.0 + aa * d
            d = 1.0 / (d if abs(d) > _TINY else _TINY)
            c = 1.0 + aa / c
            c = c if abs(c) > _TINY else _TINY
            h *= d * c
        if abs(d * c - 1.0) < _EPS:
            break
    return h


def beta_tails(a: float, b: float, x: float, one_minus_x: float) -> tuple[float, float]:
    """Regularised incomplete beta functions (I_x(a, b), 1 - I_x(a, b)); ``one_minus_x`` is passed
    separately so that it keeps its precision when x is close to 1."""
    if x <= 0.0:
        return 0.0, 1.0
    if one_minus_x <= 0.0:
        return 1.0, 0.0
    log_x = math.log(x) if x < 0.5 else math.log1p(-one_minus_x)
    log_1mx = math.log(one_minus_x) if one_minus_x < 0.5 else math.log1p(-x)
    big, small = (a, b) if a >= b else (b, a)
    log_front = _log_gamma_ratio(big, small) - math.lgamma(small) + a * log_x + b * log_1mx
    if x < (a + 1.0) / (a + b + 2.0):
        lower = math.exp(log_front) * _beta_fraction(a, b, x) / a
        return lower, 1.0 - lower
    upper = math.exp(log_front) * _beta_fraction(b, a, one_minus_x) / b
    return 1.0 - upper, upper


def _falling_root(tail, slope, target: float, start: float, low: float = 0.0) -> float:
    """The x > low at which the decreasing function ``tail`` equals ``target``: Newton steps kept
    inside a bracket, bisection when a step would leave it (Numerical Recipes 9.4)."""
    hi = max(start, low + 1.0)
    while tail(hi) > target:
        hi = 2.0 * hi - low
    lo, x = low, min(max(start, low), hi)
    for _ in range(400):
        g = tail(x) - target
        if g > 0.0:
            lo = x
        else:
            hi = x
        d = slope(x)
        new = x - g / d if d < 0.0 else math.nan
        if not lo < new < hi:
            new = 0.5 * (lo + hi)
        if abs(new - x) <= 4.0 * _EPS * abs(new) or hi - lo <= 4.0 * _EPS * abs(hi):
            return new
        x = new
    return x


def _normal_upper(z: float) -> float:
    """P(Z > z) for the standard normal, to full relative precision in the upper tail."""
    return 0.5 * math.erfc(z / math.sqrt(2.0))


def normal_ppf(q: float) -> float:
    """Quantile of the standard normal distribution (Newton on the complementary error function)."""
    if not 0.0 < q < 1.0:
        return -math.inf if q == 0.0 else math.inf if q == 1.0 else math.nan
    if q == 0.5:
        return 0.0
    upper = min(q, 1.0 - q)
    z = _falling_root(_normal_upper,
                      lambda v: -math.exp(-0.5 * v * v) / math.sqrt(2.0 * math.pi),
                      upper, math.sqrt(-2.0 * math.log(upper)))
    return z if q > 0.5 else -z


def _chi2_start(lower_q: float, dof: float) -> float:
    """Wilson-Hilferty approximation to the chi-square quantile (Numerical Recipes 6.14), kept positive."""
    z = normal_ppf(lower_q)
    h = 2.0 / (9.0 * dof)
    return dof * max(1.0 - h + z * math.sqrt(h), 0.1) ** 3


def _chi2_slope(a: float, x: float) -> float:
    """Minus the chi-square density with 2a degrees of freedom at x."""
    return -math.exp(_log_gamma_kernel(a, x / 2.0) - math.log(x)) if x > 0.0 else -math.inf


@functools.lru_cache(maxsize=1024)  # readings in a run share a few (p, dof): solve each once
def _chi2_quantile(p: float, dof: float, upper: bool) -> float:
    """x with P(chi2(dof) > x) = p (``upper``) or P(chi2(dof) <= x) = p. Solved on the smaller
    tail, which the expansions give to full relative precision."""
    if not (dof > 0.0 and 0.0 <= p <= 1.0):
        return math.nan
    if p > 0.5:
        return _chi2_quantile(1.0 - p, dof, not upper)
    if p == 0.0:
        return math.inf if upper else 0.0
    a = dof / 2.0
    if upper:
        return _falling_root(lambda x: gamma_tails(a, x / 2.0)[1], lambda x: _chi2_slope(a, x), p,
                             _chi2_start(1.0 - p, dof))
    # -P(a, x/2) falls as x grows: find where it reaches -p.
    return _falling_root(lambda x: -gamma_tails(a, x / 2.0)[0], lambda x: _chi2_slope(a, x), -p,
                         _chi2_start(p, dof))


def _t_upper(t: float, dof: float) -> float:
    """P(T > t) for Student's t with ``dof`` degrees of freedom, t >= 0."""
    t2 = t * t
    _, upper = beta_tails(0.5, dof / 2.0, t2 / (dof + t2), dof / (dof + t2))
    return 0.5 * upper


@functools.lru_cache(maxsize=1024)
def _t_quantile(q: float, dof: float) -> float:
    if not (dof > 0.0 and 0.0 <= q <= 1.0):
        return math.nan
    if math.isinf(dof):
        return normal_ppf(q) if 0.0 < q < 1.0 else math.copysign(math.inf, q - 0.5)
    if q == 0.5:
        return 0.0
    upper = min(q, 1.0 - q)
    if upper == 0.0:
        return math.copysign(math.inf, q - 0.5)
    z = -normal_ppf(upper)
    start = z + (z**3 + z) / (4.0 * dof)  # Cornish-Fisher, first term
    log_norm = _log_gamma_ratio(dof / 2.0, 0.5) - 0.5 * math.log(dof * math.pi)

    def slope(t):
        return -math.exp(log_norm - (dof + 1.0) / 2.0 * math.log1p(t * t / dof))

    t = _falling_root(lambda s: _t_upper(s, dof), slope, upper, start)
    return t if q > 0.5 else -t


def _elementwise(fn, *args):
    """Apply a scalar function over broadcast arguments; a float for scalar input."""
    arrays = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in args))
    if arrays[0].ndim == 0:
        return float(fn(*(float(a) for a in arrays)))
    out = np.empty(arrays[0].shape)
    for index in np.ndindex(out.shape):
        out[index] = fn(*(float(a[index]) for a in arrays))
    return out


def chi2_ppf(q, dof):
    """Quantile of the chi-square distribution: x with P(chi2(dof) <= x) = q."""
    return _elementwise(lambda q_, d: _chi2_quantile(q_, d, upper=False), q, dof)


def chi2_isf(p, dof):
    """Upper-tail quantile of the chi-square distribution: x with P(chi2(dof) > x) = p."""
    return _elementwise(lambda p_, d: _chi2_quantile(p_, d, upper=True), p, dof)


def _chi2_density(x: float, dof: float) -> float:
    if not dof > 0.0:
        return math.nan
    if x > 0.0:
        return -_chi2_slope(dof / 2.0, x)
    return math.inf if dof < 2.0 else 0.5 if dof == 2.0 else 0.0  # the limit at x = 0


def chi2_pdf(x, dof):
    """Density of the chi-square distribution."""
    return _elementwise(_chi2_density, x, dof)


def t_sf(t, dof):
    """Upper tail of Student's t distribution, P(T > t) (infinite dof gives the normal tail)."""
    def upper(t_: float, d: float) -> float:
        if not d > 0.0 or math.isnan(t_):
            return math.nan
        if math.isinf(d):
            return _normal_upper(t_)
        tail = _t_upper(abs(t_), d) if not math.isinf(t_) else 0.0
        return tail if t_ >= 0.0 else 1.0 - tail

    return _elementwise(upper, t, dof)


def t_ppf(q, dof):
    """Quantile of Student's t distribution (infinite dof gives the normal quantile)."""
    return _elementwise(_t_quantile, q, dof)
