"""One-way tests of means against scipy.stats and statsmodels, on open data and random data.

Open datasets (tests/reference/data/open_datasets/): PlantGrowth (Dobson 1983), InsectSprays
(Beall 1942), poisons (Box & Cox 1964; 3 poisons x 4 treatments used as 12 groups). Only
the data are stored; the expected values come from the reference libraries named beside
each check.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
import scipy.stats as st
from statsmodels.stats.oneway import anova_oneway

from planrunner.stats import InputError
from planrunner.stats.anova import brown_forsythe_anova, kruskal_wallis, oneway_anova, welch_anova

OPEN = Path(__file__).parent / "data" / "open_datasets"


def _groups(file: str, response: str, *labels: str) -> list[np.ndarray]:
    with open(OPEN / file, newline="") as fh:
        rows = list(csv.DictReader(fh))
    keys = sorted({tuple(r[c] for c in labels) for r in rows})
    return [np.array([float(r[response]) for r in rows if tuple(r[c] for c in labels) == k]) for k in keys]


def open_datasets() -> dict[str, list[np.ndarray]]:
    return {
        "PlantGrowth": _groups("PlantGrowth.csv", "weight", "group"),
        "InsectSprays": _groups("InsectSprays.csv", "count", "spray"),
        "poisons": _groups("poisons.csv", "time", "poison", "treat"),
    }


DATASETS = open_datasets()


def random_batch(seed=0, sizes=(5, 8, 6, 11), batch=(7,)):
    rng = np.random.default_rng(seed)
    return [rng.normal(10.0 * i, 1.0 + i, size=batch + (n,)) for i, n in enumerate(sizes)]


def test_open_datasets_loaded():
    # Group counts as published: PlantGrowth 3 x 10, InsectSprays 6 x 12, poisons 12 cells x 4
    assert [len(g) for g in DATASETS["PlantGrowth"]] == [10] * 3
    assert [len(g) for g in DATASETS["InsectSprays"]] == [12] * 6
    assert [len(g) for g in DATASETS["poisons"]] == [4] * 12


@pytest.mark.parametrize("name", list(DATASETS))
def test_classic_matches_scipy_and_statsmodels(name):
    groups = DATASETS[name]
    res = oneway_anova(*groups)
    ref = st.f_oneway(*groups)  # scipy.stats.f_oneway
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)
    sm = anova_oneway(groups, use_var="equal")  # statsmodels.stats.oneway.anova_oneway
    np.testing.assert_allclose(res.statistic, sm.statistic, rtol=1e-12)
    assert (res.df_between, res.df_within) == pytest.approx(sm.df)
    # ss_total from numpy on the pooled data (independent two-pass sum)
    pooled = np.concatenate(groups)
    ss_total = ((pooled - pooled.mean()) ** 2).sum()
    np.testing.assert_allclose(res.ss_between + res.ss_within, ss_total, rtol=1e-12)


@pytest.mark.parametrize("name", list(DATASETS))
def test_welch_matches_scipy_and_statsmodels(name):
    groups = DATASETS[name]
    res = welch_anova(*groups)
    ref = st.f_oneway(*groups, equal_var=False)  # scipy.stats.f_oneway(equal_var=False)
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)
    sm = anova_oneway(groups, use_var="unequal")  # statsmodels anova_oneway, Welch
    np.testing.assert_allclose([res.df1, res.df2], sm.df, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, sm.pvalue, rtol=1e-10)


@pytest.mark.parametrize("name", list(DATASETS))
def test_brown_forsythe_matches_statsmodels(name):
    groups = DATASETS[name]
    res = brown_forsythe_anova(*groups)
    sm = anova_oneway(groups, use_var="bf")  # statsmodels anova_oneway(use_var="bf")
    np.testing.assert_allclose(res.statistic, sm.statistic, rtol=1e-12)
    # Brown & Forsythe (1974) degrees of freedom: statsmodels' df2 / pvalue2
    np.testing.assert_allclose([res.df1, res.df2], sm.df2, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, sm.pvalue2, rtol=1e-10)
    # Mehrotra (1997) numerator df: statsmodels' df / pvalue
    np.testing.assert_allclose([res.df1_mehrotra, res.df2], sm.df, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue_mehrotra, sm.pvalue, rtol=1e-10)


@pytest.mark.parametrize("name", list(DATASETS))
def test_kruskal_matches_scipy(name):
    groups = DATASETS[name]  # InsectSprays has many ties: the tie correction matters
    res = kruskal_wallis(*groups)
    ref = st.kruskal(*groups)  # scipy.stats.kruskal (tie-corrected)
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)


def test_random_batch_matches_scipy_axis():
    groups = random_batch()
    # scipy.stats with axis=-1 on the same batch
    np.testing.assert_allclose(oneway_anova(*groups).statistic, st.f_oneway(*groups, axis=-1).statistic, rtol=1e-12)
    np.testing.assert_allclose(
        welch_anova(*groups).pvalue, st.f_oneway(*groups, axis=-1, equal_var=False).pvalue, rtol=1e-10
    )
    np.testing.assert_allclose(kruskal_wallis(*groups).pvalue, st.kruskal(*groups, axis=-1).pvalue, rtol=1e-10)


def test_random_batch_brown_forsythe_matches_statsmodels_per_element():
    groups = random_batch(seed=3)
    res = brown_forsythe_anova(*groups)
    for i in range(groups[0].shape[0]):
        sm = anova_oneway([g[i] for g in groups], use_var="bf")  # statsmodels, one at a time
        np.testing.assert_allclose(res.statistic[i], sm.statistic, rtol=1e-12)
        np.testing.assert_allclose(res.pvalue[i], sm.pvalue2, rtol=1e-10)


def test_two_groups_f_equals_pooled_t_squared():
    # Identity: with two groups the one-way F is the square of the pooled two-sample t
    # (scipy.stats.ttest_ind) and the p-values agree.
    a, b = DATASETS["PlantGrowth"][1:]
    t = st.ttest_ind(a, b)
    res = oneway_anova(a, b)
    np.testing.assert_allclose(res.statistic, t.statistic**2, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, t.pvalue, rtol=1e-10)


def test_two_groups_welch_f_equals_welch_t_squared():
    # Identity: two-group Welch F = Welch t^2, df2 = Welch-Satterthwaite df
    # (scipy.stats.ttest_ind(equal_var=False)).
    a, b = DATASETS["InsectSprays"][2], DATASETS["InsectSprays"][5]
    t = st.ttest_ind(a, b, equal_var=False)
    res = welch_anova(a, b)
    np.testing.assert_allclose(res.statistic, t.statistic**2, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue, t.pvalue, rtol=1e-10)
    np.testing.assert_allclose(res.df2, t.df, rtol=1e-12)


def test_batched_equals_one_at_a_time():
    # Internal consistency: the (7,)-batch equals seven single analyses.
    groups = random_batch(seed=5)
    funcs = (oneway_anova, welch_anova, brown_forsythe_anova, kruskal_wallis)
    for f in funcs:
        batch = f(*groups)
        for i in range(7):
            one = f(*[g[i] for g in groups])
            np.testing.assert_allclose(batch.statistic[i], one.statistic, rtol=1e-13, err_msg=f.__name__)
            np.testing.assert_allclose(batch.pvalue[i], one.pvalue, rtol=1e-12, err_msg=f.__name__)


def test_broadcasting_batch_axes():
    # A group shaped (n,) broadcasts against groups shaped (3, n): same as repeating it.
    rng = np.random.default_rng(11)
    a = rng.normal(size=6)
    b = rng.normal(size=(3, 5))
    res = oneway_anova(a, b)
    rep = oneway_anova(np.broadcast_to(a, (3, 6)), b)
    np.testing.assert_array_equal(res.statistic, rep.statistic)
    assert res.statistic.shape == (3,)
    # scipy.stats.f_oneway on the repeated arrays
    np.testing.assert_allclose(res.statistic, st.f_oneway(np.broadcast_to(a, (3, 6)), b, axis=-1).statistic, rtol=1e-12)


def test_large_batch_shape():
    # (10000, 8) groups, four of them: shapes and agreement with scipy's axis= version.
    rng = np.random.default_rng(1)
    groups = [rng.normal(size=(10_000, 8)) for _ in range(4)]
    res = oneway_anova(*groups)
    assert res.statistic.shape == (10_000,)
    np.testing.assert_allclose(res.statistic, st.f_oneway(*groups, axis=-1).statistic, rtol=1e-10)
    wel = welch_anova(*groups)
    np.testing.assert_allclose(wel.statistic, st.f_oneway(*groups, axis=-1, equal_var=False).statistic, rtol=1e-10)


def test_degenerate_cases_are_flagged_not_nan():
    # Zero spread in every group: F undefined -> computable False with a reason (STYLE 10)
    res = oneway_anova([[1.0, 1.0], [1.0, 2.0]], [[3.0, 3.0], [4.0, 6.0]])
    assert res.computable.tolist() == [False, True]
    assert "zero spread" in str(res.reason[0]) and res.reason[1] == ""
    assert np.isnan(res.statistic[0]) and np.isfinite(res.statistic[1])
    # hand computation: means 1 and 3, grand mean 2, ss_between = 2 * 1 + 2 * 1 = 4
    assert res.ss_between[0] == 4.0 and res.ss_within[0] == 0.0
    wel = welch_anova([1.0, 1.0, 1.0], [2.0, 3.0, 4.0])
    assert not wel.computable and "zero variance" in wel.reason
    bf = brown_forsythe_anova([1.0, 1.0], [2.0, 2.0])
    assert not bf.computable
    kw = kruskal_wallis([5.0, 5.0], [5.0])
    assert not kw.computable and np.isnan(kw.pvalue)


def test_structural_errors():
    with pytest.raises(InputError, match="at least 2 groups"):
        oneway_anova([1.0, 2.0])
    with pytest.raises(InputError, match="N - k >= 1"):
        oneway_anova([1.0], [2.0])
    with pytest.raises(InputError, match="NaN"):
        oneway_anova([1.0, np.nan], [2.0, 3.0])
    with pytest.raises(InputError, match="at least 2 values"):
        welch_anova([1.0], [2.0, 3.0])
    with pytest.raises(InputError, match="do not broadcast"):
        oneway_anova(np.ones((3, 4)), np.ones((2, 4)))


def test_pvalues_in_unit_interval_on_extremes():
    # Huge separation gives p = 0.0 exactly representable, identical groups give F = 0, p = 1
    far = oneway_anova([0.0, 1.0, 2.0], [1e6, 1e6 + 1.0, 1e6 + 2.0])
    same = oneway_anova([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    assert 0.0 <= far.pvalue < 1e-12
    assert same.statistic == 0.0 and same.pvalue == 1.0
