"""Hartley's Fmax distribution and test: published table, exact identities, simulation."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from planrunner.stats import InputError
from planrunner.stats.distributions import fmax_cdf, fmax_critical, fmax_sf
from planrunner.stats.hartley import FmaxResult, hartley_fmax

DATA = Path(__file__).parent / "data" / "hartley_fmax" / "fmax_alpha05_df4_df10.csv"


def _table31():
    with DATA.open(newline="") as fh:
        return [(int(r["k"]), int(r["df"]), float(r["alpha"]), r["fmax_crit"])
                for r in csv.DictReader(fh)]


# Pearson & Hartley (1954), Biometrika Tables for Statisticians, Table 31 (upper 5% points of
# Fmax; transcribed from Kanji (1993), 100 Statistical Tests). Printed to three significant
# figures. Exact integration reproduces the printed value to its last digit in the cells not
# listed here; in these cells the classic table (computed with approximations) differs by the
# relative amount given (measured deviation of the exact value, rounded up).
_TABLE_APPROXIMATION = {
    (6, 10): 0.002, (7, 10): 0.0015, (8, 10): 0.0015, (9, 10): 0.0015, (10, 10): 0.002,
    (11, 10): 0.002, (12, 10): 0.0025,
    (9, 4): 0.0035, (10, 4): 0.005, (11, 4): 0.006, (12, 4): 0.0045,
}


@pytest.mark.parametrize("k,df,alpha,printed", _table31())
def test_table31_cells(k, df, alpha, printed):
    exact = fmax_critical(k, df, alpha)
    value = float(printed)
    if (k, df) in _TABLE_APPROXIMATION:
        assert abs(exact / value - 1) <= _TABLE_APPROXIMATION[(k, df)]
    else:
        decimals = len(printed.split(".")[1])
        assert abs(exact - value) <= 0.5 * 10.0 ** -decimals
    # At the printed point the exact tail probability is close to the nominal 5% (all cells
    # within 0.05 +- 0.0006).
    assert abs(fmax_sf(value, k, df) - alpha) <= 6e-4


def test_textbook_cell_k3_df4():
    # Pearson & Hartley Table 31, k = 3, df = 4: 15.5 (also the common textbook value).
    assert round(fmax_critical(3, 4, 0.05), 1) == 15.5


@pytest.mark.parametrize("df", [1, 2, 4, 7, 10, 30, 100])
def test_two_variances_equal_two_sided_f(df):
    # Exact identity: for k = 2, Fmax = max(F, 1/F) with F ~ F(df, df), so
    # P(Fmax > c) = 2 P(F > c) (scipy.stats.f as the reference).
    p = np.logspace(-10, -0.1, 25)
    c = stats.f.isf(p / 2, df, df)
    reference = 2 * stats.f.sf(c, df, df)
    np.testing.assert_allclose(fmax_sf(c, 2, df), reference, rtol=1e-10, atol=0)
    np.testing.assert_allclose(fmax_cdf(c, 2, df), 1 - reference, rtol=0, atol=1e-13)


def test_unequal_df_matches_simulation():
    # Seeded Monte Carlo of max/min of independent chi2_nu/nu variables (invented df);
    # agreement within 4 Monte Carlo standard errors.
    df = (3, 6, 12, 5)
    rng = np.random.default_rng(20240611)
    reps = 400_000
    draws = np.stack([rng.chisquare(d, reps) / d for d in df])
    fmax = draws.max(axis=0) / draws.min(axis=0)
    c = np.array([2.0, 5.0, 10.0, 30.0, 80.0])
    exact = fmax_sf(c, 4, df)
    empirical = (fmax[None, :] > c[:, None]).mean(axis=1)
    se = np.sqrt(exact * (1 - exact) / reps)
    assert np.all(np.abs(empirical - exact) <= 4 * se)


def test_unequal_formula_reduces_to_equal_df():
    # The unequal-df sum over which group holds the minimum is continuous in df: an
    # infinitesimal perturbation reproduces the equal-df (Hartley 1950) integral.
    c = np.array([1.5, 4.0, 15.0, 60.0])
    equal = fmax_sf(c, 3, 4)
    perturbed = fmax_sf(c, 3, (4, 4, 4 + 1e-9))
    np.testing.assert_allclose(perturbed, equal, rtol=1e-7)


def test_cdf_and_sf_are_complements_and_monotone():
    c = np.linspace(1.0, 60.0, 200)
    for df in (4, (3, 5, 9)):
        sf = fmax_sf(c, 3, df)
        cdf = fmax_cdf(c, 3, df)
        np.testing.assert_allclose(sf + cdf, 1.0, rtol=0, atol=1e-13)
        assert np.all(np.diff(sf) <= 0)
    assert fmax_sf(1.0, 4, 5) == 1.0 and fmax_sf(0.3, 4, 5) == 1.0
    assert fmax_sf(np.inf, 4, 5) == 0.0


def test_critical_value_solves_the_tail_equation():
    for k, df, alpha in ((3, 4, 0.05), (6, 9, 0.01), (4, (3, 8, 8, 20), 0.05)):
        c = fmax_critical(k, df, alpha)
        assert fmax_sf(c, k, df) == pytest.approx(alpha, rel=1e-10)
    assert fmax_critical(5, 7, 0.05) == fmax_critical(5, 7, 0.05)


def test_bad_arguments_raise():
    with pytest.raises(InputError):
        fmax_sf(2.0, 1, 4)
    with pytest.raises(InputError):
        fmax_sf(2.0, 3, (4, 5))
    with pytest.raises(InputError):
        fmax_critical(3, 4, alpha=1.5)


def test_hartley_fmax_batch_and_degenerate_cases():
    rng = np.random.default_rng(7)
    a = rng.normal(size=(4, 6))
    b = 2.0 * rng.normal(size=(4, 6))
    c = rng.normal(size=(4, 9))
    c[2] = 5.0                                   # zero variance in element 2
    res = hartley_fmax(a, b, c)
    assert isinstance(res, FmaxResult)
    assert res.df == (5, 5, 8) and res.k == 3
    var = np.stack([a.var(axis=-1, ddof=1), b.var(axis=-1, ddof=1), c.var(axis=-1, ddof=1)])
    ok = np.array([True, True, False, True])
    np.testing.assert_array_equal(res.computable, ok)
    np.testing.assert_allclose(res.statistic[ok], var.max(0)[ok] / var.min(0)[ok], rtol=1e-13)
    assert np.isnan(res.statistic[2]) and np.isnan(res.pvalue[2])
    assert "zero variance" in res.reason[2] and res.reason[0] == ""
    np.testing.assert_allclose(res.pvalue[ok], fmax_sf(res.statistic[ok], 3, (5, 5, 8)))
    assert res.critical_value == fmax_critical(3, (5, 5, 8), 0.05)


def test_hartley_fmax_single_analysis_and_determinism():
    # Invented data, equal n = 5: df = 4 for each of three groups.
    g = ([3.1, 2.9, 3.4, 3.0, 3.3], [2.2, 3.8, 2.9, 4.1, 3.5], [3.0, 3.1, 3.05, 2.95, 3.2])
    first = hartley_fmax(*g)
    second = hartley_fmax(*g)
    assert first.statistic.shape == () and bool(first.computable)
    assert first.pvalue == second.pvalue and first.statistic == second.statistic
    var = [np.var(x, ddof=1) for x in g]
    assert first.statistic == pytest.approx(max(var) / min(var), rel=1e-13)
    # Decision by p-value and by critical value agree (Table 31 point for k = 3, df = 4).
    assert (first.pvalue <= 0.05) == (first.statistic >= first.critical_value)
    with pytest.raises(InputError):
        hartley_fmax([1.0, 2.0], [3.0])
