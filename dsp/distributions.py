"""The few probability functions rxbench needs, from scipy.special.

``scipy.stats`` would give the same numbers but costs about half a second to import, which matters
for a command-line tool run once per capture. Tests check these against ``scipy.stats``.
"""

from __future__ import annotations

import numpy as np
from scipy import special


def chi2_ppf(q, dof):
    """Quantile of the chi-square distribution: 2 * P^-1(dof/2, q)."""
    return 2.0 * special.gammaincinv(np.asarray(dof) / 2.0, q)


def chi2_isf(p, dof):
    """Upper-tail quantile of the chi-square distribution: 2 * Q^-1(dof/2, p)."""
    return 2.0 * special.gammainccinv(np.asarray(dof) / 2.0, p)


def chi2_pdf(x, dof):
    """Density of the chi-square distribution."""
    k = np.asarray(dof) / 2.0
    x = np.asarray(x, dtype=float)
    return np.exp((k - 1.0) * np.log(x) - x / 2.0 - k * np.log(2.0) - special.gammaln(k))


def t_ppf(q, dof):
    """Quantile of Student's t distribution (infinite dof gives the normal quantile)."""
    dof = np.asarray(dof, dtype=float)
    return np.where(np.isinf(dof), special.ndtri(q), special.stdtrit(np.where(np.isinf(dof), 1.0, dof), q))
