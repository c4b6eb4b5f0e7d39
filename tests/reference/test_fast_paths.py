"""Fast paths of the distributions against their direct computation and against scipy.

Batches with many values take interpolated routes: outer nodes interpolated in df**-0.5
(studentized range with a df per value, as in Games-Howell), quantile tables per df class
(Games-Howell critical values) and known-variance tables per allocation (Dunnett). Each is
checked against the direct quadrature it replaces (|dp| <= 1e-9 required; measured about 1e-15
absolute, 1e-13 relative) and against scipy on a subset.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from planrunner.stats import distributions as D
from planrunner.stats.distributions import (
    dunnett_adjusted_pvalues,
    dunnett_cdf,
    dunnett_sf,
    studentized_range_ppf,
    studentized_range_sf,
)


def _direct_srange(q, k, df, upper=True):
    # the per-value path with exact nodes: fewer values than the fast-path threshold each time
    step = D._MANY_VALUES - 1
    return np.concatenate([D._srange_many_df(q[i:i + step], k, df[i:i + step], upper)
                           for i in range(0, q.size, step)])


def _direct_dunnett(c, n0, sizes, df, alternative, upper=True):
    step = D._MANY_VALUES - 1
    df = np.broadcast_to(df, np.shape(c))
    return np.concatenate([D._dunnett(c[i:i + step], n0, sizes, df[i:i + step], alternative,
                                      upper) for i in range(0, c.size, step)])


def test_node_tables_exist_for_every_bounded_class():
    # Without them the fast path would silently be the direct one; df < 1.5 stays direct.
    assert all(D._log_s_table(c) is not None for c in range(len(D._OUTER_RULES) - 1))
    assert D._log_s_table(len(D._OUTER_RULES) - 1) is None


@pytest.mark.parametrize("k", [2, 4, 7])
def test_many_df_sf_matches_direct_nodes(k):
    rng = np.random.default_rng(11)
    q = rng.uniform(0.05, 12.0, 1500)
    df = np.exp(rng.uniform(np.log(1.2), np.log(3e5), 1500))    # every class, both table ends
    for upper in (True, False):
        fast = D._srange_many_df(q, k, df, upper)
        direct = _direct_srange(q, k, df, upper)
        assert np.max(np.abs(fast - direct)) <= 1e-9
        big = direct > 1e-12
        # measured: 1.5e-15 absolute, 8e-14 relative
        assert np.max(np.abs(fast[big] / direct[big] - 1.0)) <= 1e-11


def test_many_df_sf_matches_scipy_subset():
    # scipy.stats.studentized_range (its own adaptive quadrature), Welch-type df of 4 x 8 data
    rng = np.random.default_rng(4)
    q = rng.uniform(1.0, 6.0, 400)
    df = rng.uniform(3.5, 14.0, 400)
    fast = studentized_range_sf(q, 4, df)
    for i in range(0, 400, 40):
        assert abs(fast[i] - stats.studentized_range.sf(q[i], 4, df[i])) <= 1e-9


def test_many_df_ppf_matches_exact_solution_and_scipy():
    rng = np.random.default_rng(8)
    df = np.exp(rng.uniform(np.log(1.6), np.log(2e5), 600))
    for k, p in ((3, 0.95), (4, 0.99), (5, 0.05)):
        fast = studentized_range_ppf(p, k, df)
        exact = D._srange_ppf_solve(p, k, df)
        assert np.max(np.abs(fast / exact - 1.0)) <= 1e-12       # measured 2e-14
    few = studentized_range_ppf(0.95, 4, df[:5])                  # direct route, one by one
    np.testing.assert_allclose(studentized_range_ppf(0.95, 4, df)[:5], few, rtol=1e-12)
    # scipy switches to its known-variance limit for very large df (at df = 1.7e5 its
    # quantile is that of df = inf), so the comparison keeps to df <= 1e4.
    for d in df[df <= 1e4][:3]:
        assert studentized_range_ppf(0.95, 4, d) == pytest.approx(
            stats.studentized_range.ppf(0.95, 4, d), rel=1e-8)


_ALLOCATIONS = [(8, (8, 8, 8), 28.0), (7, (5, 9, 6), 23.0), (10, (6, 6, 12, 8), 37.0),
                (3, (3,), 4.0), (20, (5, 5), np.inf), (8, (8, 8, 8), 2.0)]


@pytest.mark.parametrize("n0,sizes,df", _ALLOCATIONS)
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_dunnett_batch_matches_direct(n0, sizes, df, alternative):
    rng = np.random.default_rng(2)
    t = np.concatenate([rng.normal(0.0, 2.0, 300), rng.uniform(-12.0, 12.0, 100),
                        [1e-7, 5e-6, 30.0, 45.0]])
    c = np.abs(t) if alternative == "two-sided" else t
    check = np.r_[0:400:8, 400:404]            # the direct quadrature on a subset (it is slow)
    for upper in (True, False):
        fast = D._dunnett(c, n0, sizes, df, alternative, upper)[check]
        direct = _direct_dunnett(c[check], n0, sizes, df, alternative, upper)
        assert np.max(np.abs(fast - direct)) <= 1e-9
        # measured: 2e-15 absolute, 7e-14 relative. Two-sided lower tail at x < 1e-4: the
        # direct quadrature loses digits to Phi(x) - Phi(-x) there (the table's small-x limit
        # does not), so its relative error is not a reference.
        big = (direct > 1e-15) & ((np.abs(c[check]) > 1e-4) | upper)
        assert np.max(np.abs(fast[big] / direct[big] - 1.0)) <= 1e-10


def test_dunnett_batch_is_deterministic_and_shaped():
    rng = np.random.default_rng(6)
    t = rng.normal(0.0, 2.5, (1000, 3))
    first = dunnett_adjusted_pvalues(t, 8, (8, 8, 8), 28.0)
    assert first.shape == (1000, 3)
    np.testing.assert_array_equal(first, dunnett_adjusted_pvalues(t, 8, (8, 8, 8), 28.0))
    both = dunnett_sf(np.abs(t), 8, (8, 8, 8), 28.0) + dunnett_cdf(np.abs(t), 8, (8, 8, 8), 28.0)
    np.testing.assert_allclose(both, 1.0, atol=1e-13)


def test_dunnett_per_element_df_matches_one_df_at_a_time():
    # Welch-type statistics carry their own df; the batch path interpolates the outer nodes.
    rng = np.random.default_rng(9)
    c = rng.uniform(0.2, 5.0, 600)
    df = rng.uniform(3.0, 40.0, 600)
    fast = dunnett_sf(c, 8, (8, 8, 8), df)
    one = np.array([dunnett_sf(a, 8, (8, 8, 8), b) for a, b in zip(c[:25], df[:25])])
    assert np.max(np.abs(fast[:25] - one)) <= 1e-9
    np.testing.assert_allclose(fast[:25], one, rtol=1e-11)


def test_dunnett_batch_matches_scipy_subset():
    # scipy.stats.dunnett (randomised quasi-Monte Carlo, rng pinned; about 1e-3 absolute).
    # Our values come from the batch path: the 300 statistics are computed together.
    rng = np.random.default_rng(12)
    stats_all, refs = [], []
    for rep in range(100):
        control = rng.normal(size=8)
        treatments = [rng.normal(loc=mu, size=8) for mu in (0.0, 0.6, 1.2)]
        if rep % 20 == 0:
            ref = stats.dunnett(*treatments, control=control, rng=np.random.default_rng(1))
            refs.append((rep, ref.pvalue))
            stats_all.append(ref.statistic)
        else:
            stats_all.append(stats.ttest_ind(treatments[0], control).statistic * np.ones(3))
    p = dunnett_adjusted_pvalues(np.array(stats_all), 8, (8, 8, 8), 28.0)
    for rep, ref in refs:
        np.testing.assert_allclose(p[rep], ref, rtol=0, atol=1e-3)
