"""Externally studentized residuals of the one-way model and Hartley's Fmax options.

Reference: statsmodels OLSInfluence(...).resid_studentized_external on an OLS fit with one
dummy column per group (no intercept), the same one-way model; scipy/numpy for Fmax.
"""

from __future__ import annotations

import numpy as np
import pytest

from planrunner.stats import InputError
from planrunner.stats.distributions import fmax_critical, fmax_sf
from planrunner.stats.hartley import hartley_fmax
from planrunner.stats.summary import studentized_residuals


def _statsmodels_external(groups):
    from statsmodels.regression.linear_model import OLS
    from statsmodels.stats.outliers_influence import OLSInfluence

    y = np.concatenate(groups)
    x = np.zeros((y.size, len(groups)))
    start = 0
    for i, g in enumerate(groups):
        x[start:start + g.size, i] = 1.0
        start += g.size
    return OLSInfluence(OLS(y, x).fit()).resid_studentized_external


@pytest.mark.parametrize("sizes", [(5, 5, 5), (4, 9, 6, 12), (3, 2, 7)])
def test_matches_statsmodels_ols_influence(sizes):
    rng = np.random.default_rng(sum(sizes))
    groups = [rng.normal(10.0 + i, 1.0 + 0.3 * i, n) for i, n in enumerate(sizes)]
    groups[-1][0] += 6.0                                       # one clear outlier
    res = studentized_residuals(*groups)
    np.testing.assert_allclose(np.concatenate(res.residuals), _statsmodels_external(groups),
                               rtol=1e-10)
    assert res.df == sum(sizes) - len(sizes) - 1
    assert all(c.all() for c in res.computable)


def test_batched_large_offset_and_not_computable_cases():
    rng = np.random.default_rng(3)
    groups = [rng.normal(0.0, 1.0, (4, n)) for n in (6, 7, 1)]
    res = studentized_residuals(*groups)
    one = studentized_residuals(*[g[2] for g in groups])
    np.testing.assert_allclose(res.residuals[0][2], one.residuals[0], rtol=1e-13)
    # the group of one value has leverage 1: not computable, with a reason
    assert not res.computable[2].any() and "leverage 1" in str(res.reason[2][0, 0])
    assert np.isnan(res.residuals[2]).all()
    # a constant offset of 1e9 changes the residuals only by the rounding of the shifted
    # inputs themselves (about 1e-7 absolute in each value)
    shifted = studentized_residuals(*[g + 1e9 for g in groups[:2]])
    np.testing.assert_allclose(shifted.residuals[0], studentized_residuals(*groups[:2]).residuals[0],
                               rtol=0, atol=1e-6)
    flat = studentized_residuals(np.full((2, 4), 3.0), np.full((2, 5), 1.0))
    assert not flat.computable[0].any() and "constant" in str(flat.reason[0][0, 0])
    with pytest.raises(InputError):
        studentized_residuals(np.array([]))


def test_hartley_unequal_n_rules_and_skipped_pvalues():
    rng = np.random.default_rng(8)
    groups = [rng.normal(0.0, 1.0, (50, n)) for n in (5, 8, 11)]
    exact = hartley_fmax(*groups, alpha=0.05)
    small = hartley_fmax(*groups, alpha=0.05, unequal_n="smallest_group")
    bare = hartley_fmax(*groups, alpha=0.05, pvalues=False)
    np.testing.assert_array_equal(exact.statistic, bare.statistic)
    assert np.isnan(bare.pvalue).all() and bare.critical_value == exact.critical_value
    assert exact.reference_df == (4, 7, 10) and small.reference_df == (4, 4, 4)
    assert small.critical_value == fmax_critical(3, 4, 0.05)
    np.testing.assert_allclose(small.pvalue, fmax_sf(small.statistic, 3, 4), rtol=1e-14)
    # the statistic is max var / min var (numpy var, ddof = 1)
    var = np.stack([g.var(axis=-1, ddof=1) for g in groups], axis=-1)
    np.testing.assert_allclose(exact.statistic, var.max(axis=-1) / var.min(axis=-1), rtol=1e-12)
    with pytest.raises(InputError):
        hartley_fmax(*groups, unequal_n="largest")
