"""Deciding by critical values gives exactly the rejections of p <= alpha.

With ``pvalues=False`` the quadrature methods compare each statistic with the critical value at
alpha and compute adjusted p-values only next to it; a rehearsal (no detailed record) uses that
route. Simulated replicates (seeded normal data, effects chosen so that many statistics fall
near the critical values) must give identical rejections on both routes, for each method.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pytest

from planrunner.engine import CountingRecorder, decide_batch
from planrunner.plan.load import load_plan_bytes
from planrunner.stats import InputError
from planrunner.stats.comparisons import dunnett, games_howell, pairwise_t, tukey_kramer

B = 3000


def _replicates(seed: int, sizes=(8, 8, 8, 8), spread=(1.0, 1.0, 1.0, 1.0)):
    rng = np.random.default_rng(seed)
    # effects vary by replicate so that p-values spread over (0, 1), many near 0.05
    shift = rng.uniform(0.0, 1.6, (B, 1))
    return [rng.normal(shift * (i == len(sizes) - 1) + 0.3 * shift * (i == 1), s, (B, n))
            for i, (n, s) in enumerate(zip(sizes, spread))]


def _both(fn, groups, **kw):
    full = fn(*groups, alpha=0.05, **kw)
    fast = fn(*groups, alpha=0.05, pvalues=False, **kw)
    return full, fast


@pytest.mark.parametrize("sizes", [(8, 8, 8, 8), (5, 9, 7, 12)])
def test_tukey_kramer_routes_agree(sizes):
    full, fast = _both(tukey_kramer, _replicates(1, sizes))
    np.testing.assert_array_equal(full.rejected, np.nan_to_num(full.pvalue_adjusted, nan=1) <= 0.05)
    np.testing.assert_array_equal(fast.rejected, full.rejected)
    assert 0.05 < full.rejected.mean() < 0.95          # both outcomes are well represented
    assert np.isnan(fast.pvalue_adjusted).mean() > 0.99


def test_games_howell_routes_agree():
    groups = _replicates(2, (6, 8, 10, 7), (1.0, 2.0, 0.5, 1.5))
    full, fast = _both(games_howell, groups)
    np.testing.assert_array_equal(fast.rejected, full.rejected)
    assert 0.02 < full.rejected.mean() < 0.95
    # a confidence level other than 1 - alpha takes its own critical values
    other = games_howell(*groups, confidence_level=0.9, alpha=0.05, pvalues=False)
    np.testing.assert_array_equal(other.rejected, full.rejected)


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_dunnett_routes_agree(alternative):
    groups = _replicates(3, (8, 6, 8, 10))
    full, fast = _both(dunnett, groups, control=0, alternative=alternative)
    np.testing.assert_array_equal(fast.rejected, full.rejected)
    if alternative != "less":
        assert 0.02 < full.rejected.mean() < 0.95


def test_statistics_at_the_critical_value_are_decided_by_their_p_value():
    # Build replicates whose statistic is the critical value itself (to rounding): the route
    # then computes the p-value and decides p <= alpha, exactly as the p-value route.
    rng = np.random.default_rng(5)
    base = [rng.normal(0.0, 1.0, (200, 8)) for _ in range(3)]
    res = tukey_kramer(*base, alpha=0.05)
    scale = res.critical_value[..., 0] / np.abs(res.statistic[..., 0])  # same df, equal n
    crit = tukey_kramer(*base).critical_value[0, 0]
    assert crit == pytest.approx(res.critical_value[0, 0])
    # stretch group 0 - group 1 difference so |t_01| equals the 95% critical t
    moved = [base[0] + (scale[:, None] - 1.0) * (base[0].mean(axis=-1, keepdims=True)
                                                 - base[1].mean(axis=-1, keepdims=True)),
             base[1], base[2]]
    full, fast = _both(tukey_kramer, moved)
    np.testing.assert_array_equal(fast.rejected, full.rejected)
    assert np.isfinite(fast.pvalue_adjusted[:, 0]).mean() > 0.5  # computed next to crit


def test_pvalues_false_needs_alpha():
    g = _replicates(1)
    with pytest.raises(InputError):
        tukey_kramer(*g, pvalues=False)
    with pytest.raises(InputError):
        dunnett(*g, alpha=1.5)
    assert tukey_kramer(*[x[:3] for x in g]).rejected is None


PLAN = """\
planrunner: 1
id: routes
title: Decision routes
question: Do the group means differ?
hypotheses: {family: FAMILY, alternative: ALT}
data: {file: d.csv, group: grp, response: y, levels: [a, b, c, d], control: a}
omnibus: OMNI
variance_check: {method: none}
normality_check: {method: none}
comparisons: {method: METHOD, only_after_significant_omnibus: false}
sample_size: {justification: Test only.}
"""


@pytest.mark.parametrize("method,family,alt,omni", [
    ("tukey_kramer", "all_pairs", "two_sided", "classic"),
    ("games_howell", "all_pairs", "two_sided", "welch"),
    ("dunnett", "against_control", "two_sided", "classic"),
    ("dunnett", "against_control", "greater", "classic"),
])
def test_rehearsal_route_matches_detailed_route_in_the_engine(method, family, alt, omni):
    text = (PLAN.replace("METHOD", method).replace("FAMILY", family).replace("ALT", alt)
            .replace("OMNI", omni))
    plan = load_plan_bytes(text.encode("utf-8")).model
    groups = _replicates(7, (8, 8, 8, 8), (1.0, 1.4, 0.8, 1.2))

    class Detailed(CountingRecorder):
        detailed = True

    counted = decide_batch(plan, groups, CountingRecorder())
    detailed = decide_batch(plan, groups, Detailed())
    np.testing.assert_array_equal(counted.comparison_rejected, detailed.comparison_rejected)
    assert counted.comparisons_performed.all()
    assert 0.02 < detailed.comparison_rejected.mean() < 0.95
    assert np.isnan(counted.comparison_pvalues).mean() > 0.99
    assert not np.isnan(detailed.comparison_pvalues).any()
    np.testing.assert_array_equal(counted.compared, np.full(B, "means"))
