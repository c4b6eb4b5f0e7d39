"""Variance tests and the residual normality check against scipy.stats, open and random data.

Open datasets (tests/reference/data/open_datasets/): PlantGrowth (Dobson 1983), InsectSprays
(Beall 1942), poisons (Box & Cox 1964; 12 poison x treatment cells). Expected values come
from the scipy functions named beside each check.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
import scipy.stats as st

from planrunner.stats import InputError
from planrunner.stats.normality import shapiro_wilk
from planrunner.stats.variance import bartlett, fligner_killeen, levene

OPEN = Path(__file__).parent / "data" / "open_datasets"


def _groups(file: str, response: str, *labels: str) -> list[np.ndarray]:
    with open(OPEN / file, newline="") as fh:
        rows = list(csv.DictReader(fh))
    keys = sorted({tuple(r[c] for c in labels) for r in rows})
    return [np.array([float(r[response]) for r in rows if tuple(r[c] for c in labels) == k]) for k in keys]


DATASETS = {
    "PlantGrowth": _groups("PlantGrowth.csv", "weight", "group"),
    "InsectSprays": _groups("InsectSprays.csv", "count", "spray"),
    "poisons": _groups("poisons.csv", "time", "poison", "treat"),
}


def random_batch(seed=0, sizes=(5, 9, 7), batch=(5, 2)):
    # Odd group sizes: with continuous data the only tied absolute deviations from the
    # median are the exact zeros, so rounding cannot decide any rank.
    rng = np.random.default_rng(seed)
    return [rng.gamma(2.0, 1.0 + i, size=batch + (n,)) for i, n in enumerate(sizes)]


def _numpy_residuals(groups):
    # Independent reference: x - mean(x) per group with plain numpy, concatenated
    return np.concatenate([g - g.mean(axis=-1, keepdims=True) for g in groups], axis=-1)


@pytest.mark.parametrize("name", list(DATASETS))
@pytest.mark.parametrize("center", ["median", "mean"])
def test_levene_matches_scipy(name, center):
    groups = DATASETS[name]
    res = levene(*groups, center=center)
    ref = st.levene(*groups, center=center)  # scipy.stats.levene
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-11)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)
    assert res.center == center and res.distribution == "F"
    assert (res.df, res.df2) == (len(groups) - 1, sum(map(len, groups)) - len(groups))


@pytest.mark.parametrize("name", list(DATASETS))
def test_bartlett_matches_scipy(name):
    groups = DATASETS[name]
    res = bartlett(*groups)
    ref = st.bartlett(*groups)  # scipy.stats.bartlett
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-11)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)
    assert res.df == len(groups) - 1 and res.df2 is None


# Factors that make every value and every group mean an integer (values given to 2 decimals;
# groups of 10, 12 and 4), so |x - mean| is exact in float64 and no rounding can break a tie.
EXACT_SCALE = {"PlantGrowth": 100 * 10, "InsectSprays": 12, "poisons": 100 * 4}


@pytest.mark.parametrize("name", list(DATASETS))
@pytest.mark.parametrize("center", ["median", "mean"])
def test_fligner_matches_scipy(name, center):
    # scipy.stats.fligner on data scaled to exact integers (the statistic is scale-free), so
    # ties between absolute deviations are exact for both implementations.
    groups = [np.round(g * EXACT_SCALE[name]) for g in DATASETS[name]]
    res = fligner_killeen(*groups, center=center)
    ref = st.fligner(*groups, center=center)  # scipy.stats.fligner
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-11)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-10)


@pytest.mark.parametrize("name", list(DATASETS))
@pytest.mark.parametrize("center", ["median", "mean"])
def test_fligner_ties_survive_rounding(name, center):
    # Scale invariance (a property of the test): on the unscaled decimal data, deviations that
    # are mathematically tied differ by rounding; they must still rank as ties, giving the
    # same statistic as the exactly scaled data above.
    exact = fligner_killeen(*[np.round(g * EXACT_SCALE[name]) for g in DATASETS[name]], center=center)
    raw = fligner_killeen(*DATASETS[name], center=center)
    np.testing.assert_allclose(raw.statistic, exact.statistic, rtol=1e-12)


@pytest.mark.parametrize("name", list(DATASETS))
def test_shapiro_on_residuals_matches_scipy(name):
    groups = DATASETS[name]
    res = shapiro_wilk(*groups)
    ref = st.shapiro(_numpy_residuals(groups))  # scipy.stats.shapiro on numpy residuals
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-10)
    np.testing.assert_allclose(res.pvalue, ref.pvalue, rtol=1e-8)
    n = sum(map(len, groups))
    assert res.n == n and res.df_residual == n - len(groups)


def test_random_batch_matches_scipy_axis():
    groups = random_batch()
    # scipy.stats functions with axis=-1 on the same (5, 2) batch
    for center in ("median", "mean"):
        np.testing.assert_allclose(
            levene(*groups, center=center).pvalue, st.levene(*groups, center=center, axis=-1).pvalue, rtol=1e-10
        )
    np.testing.assert_allclose(bartlett(*groups).pvalue, st.bartlett(*groups, axis=-1).pvalue, rtol=1e-10)
    np.testing.assert_allclose(fligner_killeen(*groups).pvalue, st.fligner(*groups, axis=-1).pvalue, rtol=1e-10)
    sw = shapiro_wilk(*groups)
    assert sw.statistic.shape == (5, 2)
    np.testing.assert_allclose(sw.pvalue, st.shapiro(_numpy_residuals(groups), axis=-1).pvalue, rtol=1e-8)


def test_fligner_even_sizes_integer_data_matches_scipy():
    # Even group sizes tie the two middle deviations from the median. On integer data the
    # median is a multiple of 0.5, the ties are exact in float64, and scipy.stats.fligner
    # (axis=-1) gives the same statistic.
    rng = np.random.default_rng(8)
    groups = [rng.integers(0, 40, size=(20, n)).astype(float) for n in (6, 8, 10)]
    np.testing.assert_allclose(
        fligner_killeen(*groups).statistic, st.fligner(*groups, axis=-1).statistic, rtol=1e-11
    )


def test_batched_equals_one_at_a_time():
    # Internal consistency: batch results equal single-analysis results element by element.
    groups = random_batch(seed=4, batch=(6,))
    funcs = (levene, bartlett, fligner_killeen, shapiro_wilk)
    for f in funcs:
        batch = f(*groups)
        for i in range(6):
            one = f(*[g[i] for g in groups])
            np.testing.assert_allclose(batch.statistic[i], one.statistic, rtol=1e-13, err_msg=f.__name__)
            np.testing.assert_allclose(batch.pvalue[i], one.pvalue, rtol=1e-12, err_msg=f.__name__)


def test_degenerate_levene_two_values_per_group():
    # With two values per group both deviations from the median are equal, so the absolute
    # deviations never vary within a group: flagged, not NaN from a silent 0/0.
    res = levene([0.1, 0.7], [1.3, 2.2], [5.0, 5.3])
    assert not res.computable
    assert "do not vary" in res.reason and np.isnan(res.statistic)


def test_degenerate_variance_tests_batch():
    # Element 0: every group constant; element 1: ordinary data.
    a = np.array([[2.0, 2.0, 2.0], [1.0, 2.0, 4.0]])
    b = np.array([[5.0, 5.0, 5.0], [3.0, 7.0, 8.0]])
    for f in (levene, bartlett, fligner_killeen):
        res = f(a, b)
        assert res.computable.tolist() == [False, True], f.__name__
        assert res.reason[0] != "" and res.reason[1] == ""
        assert np.isnan(res.pvalue[0]) and 0.0 <= res.pvalue[1] <= 1.0
    # Bartlett needs every variance positive: one constant group is enough to flag it.
    assert not bartlett([1.0, 1.0, 1.0], [1.0, 2.0, 3.0]).computable


def test_shapiro_flags():
    # Fewer than 3 residuals, zero-range residuals, and more than 5000 residuals.
    assert not shapiro_wilk([1.0, 2.0]).computable
    flat = shapiro_wilk([1.0, 1.0], [4.0, 4.0])
    assert not flat.computable and "all equal" in flat.reason
    big = shapiro_wilk(np.arange(2600.0), np.arange(2600.0) ** 1.5)
    assert not big.computable and "5000" in big.reason and np.isnan(big.pvalue)


def test_bad_center_suggests_close_match():
    with pytest.raises(InputError, match="did you mean 'median'"):
        levene([1.0, 2.0], [3.0, 5.0], center="medain")
