"""The special-function distributions agree with scipy.stats (reference library)."""

import numpy as np
import pytest
from scipy import stats

from dsp.distributions import chi2_isf, chi2_pdf, chi2_ppf, t_ppf


@pytest.mark.parametrize("dof", [1.0, 2.0, 7.5, 38.0, 441.6, 1e5])
def test_chi2_against_scipy_stats(dof):
    for q in (1e-9, 0.025, 0.5, 0.975):
        assert chi2_ppf(q, dof) == pytest.approx(stats.chi2.ppf(q, dof), rel=1e-9)
        assert chi2_isf(q, dof) == pytest.approx(stats.chi2.isf(q, dof), rel=1e-9)
    x = stats.chi2.ppf([0.1, 0.5, 0.9], dof)
    assert np.allclose(chi2_pdf(x, dof), stats.chi2.pdf(x, dof), rtol=1e-9)


@pytest.mark.parametrize("dof", [1.0, 3.0, 15.0, 200.0, np.inf])
def test_t_against_scipy_stats(dof):
    assert t_ppf(0.975, dof) == pytest.approx(stats.t.ppf(0.975, dof), rel=1e-9)
