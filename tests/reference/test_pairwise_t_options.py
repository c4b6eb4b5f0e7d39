"""pairwise_t options: Welch error term per pair, pairs against a control, one-sided tests.

References: scipy.stats.ttest_ind (equal_var=False for Welch's t, equal_var=True for the
two-group pooled t, alternative= for one-sided p-values) and statsmodels'
multipletests with the adjustment named explicitly. Data: InsectSprays and PlantGrowth (open
data sets copied into tests/reference/data/open_datasets) and seeded invented groups.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from planrunner.stats import InputError
from planrunner.stats.comparisons import pairwise_t

DATA = Path(__file__).parent / "data" / "open_datasets"


def _load(name: str, group: str, value: str) -> list[np.ndarray]:
    with open(DATA / name, newline="") as fh:
        rows = list(csv.DictReader(fh))
    levels = list(dict.fromkeys(r[group] for r in rows))
    return [np.array([float(r[value]) for r in rows if r[group] == lv]) for lv in levels]


_rng = np.random.default_rng(31)
DATASETS = {
    "InsectSprays-unequal-n": [g[d:] for g, d in zip(_load("InsectSprays.csv", "spray", "count"),
                                                     (0, 3, 0, 5, 2, 1))],
    "PlantGrowth": _load("PlantGrowth.csv", "group", "weight"),
    "random-unequal-spread": [_rng.normal(5.0 + 0.6 * i, 0.5 + 0.7 * i, n)
                              for i, n in enumerate((6, 9, 5, 11))],
}
_SCIPY_ALT = {"two-sided": "two-sided", "greater": "greater", "less": "less"}


@pytest.mark.parametrize("name", list(DATASETS))
@pytest.mark.parametrize("pairs", ["all", "control"])
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
@pytest.mark.parametrize("adjust", ["bonferroni", "holm", "sidak"])
def test_per_pair_matches_welch_ttest_ind_and_multipletests(name, pairs, alternative, adjust):
    from statsmodels.stats.multitest import multipletests

    groups = DATASETS[name]
    control = 1 if pairs == "control" else 0
    res = pairwise_t(*groups, adjust=adjust, pairs=pairs, control=control,
                     error_term="per_pair", alternative=alternative, alpha=0.05)
    k = len(groups)
    expected_pairs = (tuple((a, b) for a in range(k) for b in range(a + 1, k)) if pairs == "all"
                      else tuple((i, control) for i in range(k) if i != control))
    assert res.pairs == expected_pairs
    raw, t, df, diff = [], [], [], []
    for a, b in res.pairs:
        # scipy.stats.ttest_ind(equal_var=False): Welch's t with Welch-Satterthwaite df,
        # statistic for mean_a - mean_b (our sign convention)
        ref = stats.ttest_ind(groups[a], groups[b], equal_var=False,
                              alternative=_SCIPY_ALT[alternative])
        raw.append(ref.pvalue)
        t.append(ref.statistic)
        df.append(ref.df)
        diff.append(groups[a].mean() - groups[b].mean())
    np.testing.assert_allclose(res.statistic, t, rtol=1e-11)
    np.testing.assert_allclose(res.df, df, rtol=1e-11)
    np.testing.assert_allclose(res.difference, diff, rtol=1e-12, atol=1e-13)
    # statsmodels.stats.multitest.multipletests, method named (its default is Holm-Sidak)
    rejected, p_adj, _, _ = multipletests(raw, alpha=0.05, method=adjust)
    np.testing.assert_allclose(res.pvalue_adjusted, p_adj, rtol=1e-10, atol=1e-14)
    np.testing.assert_array_equal(res.rejected, rejected)
    assert res.alternative == alternative


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_one_sided_intervals_and_pooled_control_pairs(alternative):
    groups = DATASETS["PlantGrowth"]
    res = pairwise_t(*groups, adjust="bonferroni", pairs="control", control=0,
                     alternative=alternative, confidence_level=0.9)
    n = np.array([g.size for g in groups])
    df = n.sum() - n.size
    msw = sum(((g - g.mean()) ** 2).sum() for g in groups) / df
    m = len(res.pairs)
    sides = 2 if alternative == "two-sided" else 1
    for j, (a, b) in enumerate(res.pairs):
        se = np.sqrt(msw * (1 / n[a] + 1 / n[b]))
        t = (groups[a].mean() - groups[b].mean()) / se
        # Student t with the pooled df (scipy.stats.t); raw p one- or two-sided
        raw = {"two-sided": 2 * stats.t.sf(abs(t), df), "greater": stats.t.sf(t, df),
               "less": stats.t.cdf(t, df)}[alternative]
        assert res.statistic[j] == pytest.approx(t, rel=1e-11)
        assert res.pvalue_adjusted[j] == pytest.approx(min(1.0, m * raw), rel=1e-10)
        half = stats.t.ppf(1 - 0.1 / m / sides, df) * se
        lo, hi = res.ci_low[j], res.ci_high[j]
        if alternative == "greater":
            assert hi == np.inf and lo == pytest.approx(res.difference[j] - half, rel=1e-10)
        elif alternative == "less":
            assert lo == -np.inf and hi == pytest.approx(res.difference[j] + half, rel=1e-10)
        else:
            assert [lo, hi] == pytest.approx([res.difference[j] - half,
                                              res.difference[j] + half], rel=1e-10)


def test_two_groups_pooled_is_ttest_ind_equal_var():
    g = DATASETS["InsectSprays-unequal-n"]
    for alternative in ("two-sided", "greater", "less"):
        ref = stats.ttest_ind(g[0], g[3], equal_var=True, alternative=alternative)
        res = pairwise_t(g[0], g[3], alternative=alternative)
        assert res.pvalue_adjusted[0] == pytest.approx(ref.pvalue, rel=1e-10)


def test_batched_per_pair_equals_one_at_a_time_and_degenerate_pairs():
    rng = np.random.default_rng(4)
    groups = [rng.normal(0.2 * i, 1.0 + i, (30, 7)) for i in range(3)]
    groups[0][5] = 2.0                                       # constant in replicate 5 ...
    groups[1][5] = 3.0                                       # ... in both groups of pair (0, 1)
    res = pairwise_t(*groups, adjust="holm", error_term="per_pair")
    for j in (0, 5, 17):
        one = pairwise_t(*[g[j] for g in groups], adjust="holm", error_term="per_pair")
        np.testing.assert_allclose(res.pvalue_adjusted[j], one.pvalue_adjusted, rtol=1e-12,
                                   equal_nan=True)
    assert not res.computable[5, 0] and res.computable[5, 1:].all()
    assert np.isnan(res.pvalue_adjusted[5, 0]) and "zero variance" in res.reason[5, 0]


def test_bad_options_raise():
    g = DATASETS["PlantGrowth"]
    with pytest.raises(InputError):
        pairwise_t(*g, pairs="some")
    with pytest.raises(InputError):
        pairwise_t(*g, error_term="welch")
    with pytest.raises(InputError):
        pairwise_t(*g, pairs="control", control=3)
    with pytest.raises(InputError):
        pairwise_t(*g, alternative="two_sided")
    with pytest.raises(InputError):
        pairwise_t(g[0], g[1][:1], error_term="per_pair")   # a group of one value
