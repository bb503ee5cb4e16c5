"""Uncertainty of measurement after the GUM: Type A, Type B, combination and expansion.

Every result that rxbench states in dB carries a :class:`Budget`: a list of :class:`Component`
(name, standard uncertainty, sensitivity coefficient, degrees of freedom, where it came from),
combined in quadrature and expanded with a coverage factor k (2 by default, about 95 %).

References
----------
JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of uncertainty in
measurement* (GUM): 4.2 (Type A), 4.3.7 (rectangular), 5.1.2 (law of propagation), 6.2-6.3
(expanded uncertainty), G.4.1 (Welch-Satterthwaite).
JCGM 101:2008, *Propagation of distributions using a Monte Carlo method* (arcsine / U-shaped).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from rxbench.dsp.units import scalar_or_array

#: Coverage factor used throughout rxbench (GUM 6.3.3: k = 2 gives about 95 %).
DEFAULT_K = 2.0


def _finite_nonnegative(value, name):
    a = np.asarray(value, dtype=float)
    if np.any(~np.isfinite(a)) or np.any(a < 0):
        raise ValueError(f"{name} must be finite and >= 0, got {value!r}")
    return a




def type_a(values, axis=None):
    """Type A standard uncertainty of the mean of repeated readings.

    Parameters
    ----------
    values : array_like
        Repeated readings of one quantity (any unit, e.g. dB).
    axis : int, optional
        Axis along which the readings repeat; None flattens.

    Returns
    -------
    mean : float or ndarray
        Arithmetic mean of the readings (same unit).
    u : float or ndarray
        Experimental standard deviation of the mean, s/sqrt(n) (same unit).
    dof : int
        Degrees of freedom, n - 1.

    Notes
    -----
    s^2 = sum (x_i - mean)^2 / (n - 1);  u = s/sqrt(n);  nu = n - 1.

    References
    ----------
    JCGM 100:2008, 4.2.2-4.2.3 and 4.2.6.
    """
    x = np.asarray(values, dtype=float)
    n = x.size if axis is None else x.shape[axis]
    if n < 2:
        raise ValueError(f"a Type A evaluation needs at least 2 readings, got {n}")
    if np.any(~np.isfinite(x)):
        raise ValueError(f"readings must be finite, got {values!r}")
    mean = x.mean(axis=axis)
    u = x.std(axis=axis, ddof=1) / math.sqrt(n)
    return scalar_or_array(mean), scalar_or_array(u), n - 1


def u_rectangular(half_width):
    """Standard uncertainty of a rectangular distribution of half-width ``a``: a/sqrt(3).

    Use for a manufacturer's tolerance "+/- a" with nothing else known (GUM 4.3.7).
    E.g. +/-0.2 dB -> 0.1155 dB.
    """
    return scalar_or_array(_finite_nonnegative(half_width, "half_width") / math.sqrt(3.0))


def u_u_shaped(half_width):
    """Standard uncertainty of a U-shaped (arcsine) distribution of half-width ``a``: a/sqrt(2).

    Mismatch errors vary as the cosine of an unknown phase, so they are U-shaped
    (JCGM 101:2008, 6.4.6). E.g. 0.58 dB -> 0.41 dB.
    """
    return scalar_or_array(_finite_nonnegative(half_width, "half_width") / math.sqrt(2.0))


def combine(u, sensitivity=None):
    """Combined standard uncertainty of uncorrelated inputs: sqrt(sum (c_i*u_i)^2).

    Parameters
    ----------
    u : array_like
        Standard uncertainties u(x_i) of the inputs.
    sensitivity : array_like, optional
        Sensitivity coefficients c_i = df/dx_i (default 1).

    Returns
    -------
    float
        u_c(y) in the unit of the result.

    References
    ----------
    JCGM 100:2008, 5.1.2, equation (10).
    """
    u = _finite_nonnegative(u, "u")
    c = np.ones_like(u) if sensitivity is None else np.asarray(sensitivity, dtype=float)
    return float(np.sqrt(np.sum((c * u) ** 2)))


def welch_satterthwaite(contributions, dof):
    """Effective degrees of freedom of a combined uncertainty.

    Parameters
    ----------
    contributions : array_like
        |c_i|*u_i of each input.
    dof : array_like
        Degrees of freedom of each input (``inf`` for Type B known well).

    Returns
    -------
    float
        nu_eff = u_c^4 / sum(u_i(y)^4 / nu_i); inf when every input has infinite dof, and also
        when every contribution is zero.

    References
    ----------
    JCGM 100:2008, G.4.1, equation (G.2b).
    """
    ui = _finite_nonnegative(contributions, "contributions")
    nu = np.asarray(dof, dtype=float)
    if ui.shape != nu.shape:
        raise ValueError(f"contributions and dof differ in shape: {ui.shape} vs {nu.shape}")
    if np.any(nu <= 0) or np.any(np.isnan(nu)):
        raise ValueError(f"degrees of freedom must be > 0, got {dof!r}")
    uc4 = np.sum(ui**2) ** 2
    finite = np.isfinite(nu)
    denominator = np.sum(ui[finite] ** 4 / nu[finite])
    if uc4 == 0 or denominator == 0:
        return math.inf
    return float(uc4 / denominator)


def coverage_factor(dof=math.inf, p: float = 0.9545):
    """Student-t coverage factor t_p(nu) for coverage probability ``p`` (GUM G.3, Table G.2).

    With infinite dof and p = 0.9545 it is 2.00; rxbench states U with k = 2 (GUM 6.3.3) and
    reports this factor only as a caution when the effective dof are few.
    """
    if not 0 < p < 1:
        raise ValueError(f"coverage probability must be in (0, 1), got {p!r}")
    if dof <= 0:
        raise ValueError(f"degrees of freedom must be > 0, got {dof!r}")
    return float(special.stdtrit(dof, 0.5 + p / 2))


@dataclass(frozen=True)
class Component:
    """One line of an uncertainty budget.

    Attributes
    ----------
    name : str
        What the input is ("thru reading", "attenuator step", ...).
    u : float
        Standard uncertainty of the input, in its own unit (dB throughout rxbench).
    sensitivity : float
        c_i = df/dx_i; the contribution to the result is |c_i|*u.
    dof : float
        Degrees of freedom (inf for a Type B input taken as exactly known).
    kind : str
        "A" or "B".
    distribution : str
        "normal", "rectangular" or "U-shaped".
    half_width : float or None
        The half-width a of a Type B distribution (None for normal).
    note : str
        Free text for the reader of the budget (e.g. "not assessed").
    """

    name: str
    u: float
    sensitivity: float = 1.0
    dof: float = math.inf
    kind: str = "A"
    distribution: str = "normal"
    half_width: float | None = None
    note: str = ""

    def __post_init__(self):
        if not math.isfinite(self.u) or self.u < 0:
            raise ValueError(f"{self.name}: standard uncertainty must be finite and >= 0, got {self.u!r}")
        if not math.isfinite(self.sensitivity):
            raise ValueError(f"{self.name}: sensitivity must be finite, got {self.sensitivity!r}")
        if not self.dof > 0:
            raise ValueError(f"{self.name}: degrees of freedom must be > 0, got {self.dof!r}")

    @property
    def contribution(self) -> float:
        """|c_i|*u_i, in the unit of the result."""
        return abs(self.sensitivity) * self.u

    @classmethod
    def not_assessed(cls, name, how):
        """A zero Type B line for an input nobody assessed, saying ``how`` it could be: the budget
        shows what it leaves out rather than dropping it silently."""
        return cls.normal(name, 0.0, kind="B", note=f"not assessed ({how})")

    @classmethod
    def normal(cls, name, u, *, sensitivity=1.0, dof=math.inf, kind="A", note=""):
        """An input with a normal (or Student-t) standard uncertainty ``u``."""
        return cls(name, float(u), float(sensitivity), float(dof), kind, "normal", None, note)

    @classmethod
    def repeats(cls, name, values, *, sensitivity=1.0, note=""):
        """Type A from repeated readings (:func:`type_a`); returns ``(mean, component)``."""
        mean, u, dof = type_a(values)
        return mean, cls(name, float(u), float(sensitivity), float(dof), "A", "normal", None, note)

    @classmethod
    def rectangular(cls, name, half_width, *, sensitivity=1.0, note=""):
        """Type B, rectangular of half-width ``a`` (:func:`u_rectangular`)."""
        a = float(half_width)
        return cls(name, u_rectangular(a), float(sensitivity), math.inf, "B", "rectangular", a, note)

    @classmethod
    def u_shaped(cls, name, half_width, *, sensitivity=1.0, note=""):
        """Type B, U-shaped of half-width ``a`` (:func:`u_u_shaped`)."""
        a = float(half_width)
        return cls(name, u_u_shaped(a), float(sensitivity), math.inf, "B", "U-shaped", a, note)


@dataclass(frozen=True)
class Budget:
    """An uncertainty budget: components combined in quadrature and expanded with ``k``.

    Attributes
    ----------
    components : tuple of Component
    k : float
        Coverage factor (2 by default).

    Notes
    -----
    u_c = sqrt(sum (c_i*u_i)^2) (GUM 5.1.2), U = k*u_c (GUM 6.2.1), nu_eff by Welch-Satterthwaite
    (GUM G.4.1). Inputs are taken as uncorrelated; a correlated pair must be entered as one
    component of its own.

    Examples
    --------
    >>> b = Budget((Component.normal("repeats", 0.05, dof=9),
    ...             Component.rectangular("attenuator", 0.2),
    ...             Component.u_shaped("mismatch", 0.2744)))
    >>> round(b.combined_u, 3), round(b.expanded_u, 2)
    (0.231, 0.46)
    """

    components: tuple[Component, ...]
    k: float = DEFAULT_K

    def __post_init__(self):
        object.__setattr__(self, "components", tuple(self.components))
        if not self.k > 0:
            raise ValueError(f"coverage factor k must be > 0, got {self.k!r}")

    @property
    def combined_u(self) -> float:
        """Combined standard uncertainty u_c (unit of the result)."""
        return combine([c.u for c in self.components], [c.sensitivity for c in self.components])

    @property
    def expanded_u(self) -> float:
        """Expanded uncertainty U = k*u_c."""
        return self.k * self.combined_u

    @property
    def dof_eff(self) -> float:
        """Effective degrees of freedom (Welch-Satterthwaite); inf for an empty budget."""
        if not self.components:
            return math.inf
        return welch_satterthwaite([c.contribution for c in self.components],
                                   [c.dof for c in self.components])

    def scaled(self, factor: float) -> "Budget":
        """The budget of ``factor`` times the result (every sensitivity multiplied by ``factor``).

        Used for the per-device loss of a back-to-back pair (factor 1/2).
        """
        return Budget(tuple(Component(c.name, c.u, c.sensitivity * factor, c.dof, c.kind,
                                      c.distribution, c.half_width, c.note)
                            for c in self.components), self.k)

    def __add__(self, other: "Budget") -> "Budget":
        if not isinstance(other, Budget):
            return NotImplemented
        return Budget(self.components + other.components, self.k)
