"""Property tests of the one-way tests (hypothesis).

Properties checked, each a mathematical fact about the statistic:
* F (classic, Welch, Brown-Forsythe) and Kruskal-Wallis H do not change when the groups are
  relabelled (permuted);
* F and Welch F do not change under y -> a * y + b (a != 0), H does not change for a > 0;
* p-values lie in [0, 1];
* a batch gives the same result as a loop over its elements.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as hs

from planrunner.stats.anova import brown_forsythe_anova, kruskal_wallis, oneway_anova, welch_anova
from planrunner.stats.variance import bartlett, fligner_killeen, levene

SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Integer-valued data of moderate size: differences are exact, so ties and zero spread are
# recognised exactly and relative tolerances are meaningful.
group = hs.lists(hs.integers(-50, 50), min_size=2, max_size=9).map(lambda v: np.array(v, dtype=float))
layouts = hs.lists(group, min_size=2, max_size=5)


def _spread_in_every_group(groups):
    return all(np.ptp(g) > 0 for g in groups)


@SETTINGS
@given(layouts, hs.randoms(use_true_random=False))
def test_relabelling_groups_changes_nothing(groups, rnd):
    assume(_spread_in_every_group(groups))
    order = list(range(len(groups)))
    rnd.shuffle(order)
    permuted = [groups[i] for i in order]
    for f in (oneway_anova, welch_anova, brown_forsythe_anova, kruskal_wallis):
        a, b = f(*groups), f(*permuted)
        np.testing.assert_allclose(a.statistic, b.statistic, rtol=1e-10, atol=1e-12, err_msg=f.__name__)
        np.testing.assert_allclose(a.pvalue, b.pvalue, rtol=1e-9, atol=1e-14, err_msg=f.__name__)


@SETTINGS
@given(
    layouts,
    hs.sampled_from([0.001, 0.37, 3.0, -2.5, 1e3]),
    hs.floats(-1e4, 1e4, allow_nan=False),
)
def test_affine_invariance(groups, a, b):
    assume(_spread_in_every_group(groups))
    moved = [a * g + b for g in groups]
    for f in (oneway_anova, welch_anova, brown_forsythe_anova):
        r0, r1 = f(*groups), f(*moved)
        np.testing.assert_allclose(r0.statistic, r1.statistic, rtol=1e-8, atol=1e-10, err_msg=f.__name__)


@SETTINGS
@given(layouts, hs.sampled_from([2.0, 3.0, 1e3]), hs.integers(-10_000, 10_000))
def test_kruskal_unchanged_by_increasing_map(groups, a, b):
    # Integer data, integer a and b: a * y + b is exact, so the ranks (ties included) are
    # exactly those of y and H must agree to rounding.
    moved = [a * g + b for g in groups]
    r0, r1 = kruskal_wallis(*groups), kruskal_wallis(*moved)
    assert r0.computable == r1.computable
    np.testing.assert_allclose(r0.statistic, r1.statistic, rtol=1e-12)


@SETTINGS
@given(layouts)
def test_pvalues_in_unit_interval_or_flagged(groups):
    for f in (oneway_anova, welch_anova, brown_forsythe_anova, kruskal_wallis, levene, bartlett, fligner_killeen):
        r = f(*groups)
        if r.computable:
            assert 0.0 <= r.pvalue <= 1.0, f.__name__
            assert np.isfinite(r.statistic) and r.statistic >= 0.0
        else:
            assert np.isnan(r.pvalue) and r.reason != ""


@SETTINGS
@given(
    hs.lists(hs.integers(2, 7), min_size=2, max_size=4),
    hs.integers(1, 6),
    hs.integers(0, 2**31 - 1),
)
def test_batch_equals_loop(sizes, batch, seed):
    rng = np.random.default_rng(seed)
    groups = [rng.normal(rng.uniform(-3, 3), rng.uniform(0.5, 2), size=(batch, n)) for n in sizes]
    for f in (oneway_anova, welch_anova, brown_forsythe_anova, kruskal_wallis, levene, bartlett, fligner_killeen):
        whole = f(*groups)
        for i in range(batch):
            one = f(*[g[i] for g in groups])
            assert whole.computable[i] == one.computable
            np.testing.assert_allclose(whole.statistic[i], one.statistic, rtol=1e-12, err_msg=f.__name__)
            np.testing.assert_allclose(whole.pvalue[i], one.pvalue, rtol=1e-11, atol=1e-300, err_msg=f.__name__)
