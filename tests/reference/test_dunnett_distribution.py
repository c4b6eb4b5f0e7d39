"""Dunnett's many-to-one distribution: 1955 tables, exact special cases, scipy cross-check."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from scipy import special, stats

from planrunner.stats import InputError
from planrunner.stats.distributions import (
    dunnett_adjusted_pvalues,
    dunnett_cdf,
    dunnett_critical,
    dunnett_sf,
)

DATA = Path(__file__).parent / "data" / "dunnett" / "dunnett1955_critical_values.csv"


def _cells():
    with DATA.open(newline="") as fh:
        return [(int(r["n_treatments_excl_control"]), float(r["df_error"]), float(r["alpha"]),
                 r["sidedness"], float(r["d_crit"]), r["dunnett1955_table"])
                for r in csv.DictReader(fh)]


@pytest.mark.parametrize("m,df,alpha,side,printed,table", _cells())
def test_dunnett_1955_tables(m, df, alpha, side, printed, table):
    # Dunnett (1955), JASA 50, Tables 1a/1b (one-sided) and 2a/2b (two-sided), equal
    # allocation (rho = 0.5; any common n gives lambda = 1/2), printed to two decimals.
    alternative = "greater" if side == "one-sided" else "two-sided"
    n = 10
    p = dunnett_sf(printed, n, [n] * m, df, alternative)
    if alternative == "greater" or m <= 2:
        # One-sided cells (and two-sided cells with one or two treatments) agree with exact
        # computation to within 0.0006 in alpha.
        assert abs(p - alpha) <= 6e-4
    else:
        # The 1955 two-sided cells for three or more treatments were computed with an
        # approximation and are conservative: the exact alpha at the tabled 0.05 points is
        # about 0.045-0.047 (and 0.008-0.0095 at the 0.01 points).
        assert 0.8 * alpha <= p < alpha
        assert dunnett_critical(alpha, n, [n] * m, df, alternative) < printed


def test_one_treatment_is_student_t():
    # Exact identity: with a single treatment, T_1 ~ t_df (scipy.stats.t as the reference).
    c = np.array([0.5, 1.0, 2.0, 3.5, 6.0])
    for df in (4.0, 17.0, 250.0):
        np.testing.assert_allclose(dunnett_sf(c, 6, [9], df), 2 * stats.t.sf(c, df), rtol=1e-9)
        np.testing.assert_allclose(dunnett_sf(c, 6, [9], df, "greater"), stats.t.sf(c, df),
                                   rtol=1e-9)
    np.testing.assert_allclose(dunnett_sf(c, 6, [9], np.inf), 2 * special.ndtr(-c), rtol=1e-10)


def test_independent_limit():
    # A control of (practically) infinite size makes the T_i independent: with known variance,
    # P(max |T_i| <= c) = (2 Phi(c) - 1)^m exactly.
    c = np.array([1.0, 2.0, 2.5, 3.0])
    expected = (2 * special.ndtr(c) - 1) ** 3
    np.testing.assert_allclose(dunnett_cdf(c, 1e14, [4, 8, 5], np.inf), expected, rtol=1e-10)


def test_matches_scipy_dunnett_on_data():
    # scipy.stats.dunnett computes its p-values by randomised quasi-Monte Carlo (rng pinned);
    # its stated accuracy is about 1e-3 absolute, so agreement is checked to 1e-3 (measured
    # below 5e-5). Invented data, unequal allocation.
    rng = np.random.default_rng(5)
    control = rng.normal(size=7)
    sizes = (5, 9, 6)
    treatments = [rng.normal(loc=mu, size=n) for mu, n in zip((0.8, 0.3, 1.2), sizes)]
    df = 7 + sum(sizes) - 4
    for alternative in ("two-sided", "greater", "less"):
        ref = stats.dunnett(*treatments, control=control, alternative=alternative,
                            rng=np.random.default_rng(1))
        mine = dunnett_adjusted_pvalues(ref.statistic, 7, sizes, df, alternative)
        np.testing.assert_allclose(mine, ref.pvalue, rtol=0, atol=1e-3)


def test_critical_value_and_adjusted_pvalues_agree():
    sizes, n0, df = (6, 6, 12, 8), 10, 37.0
    for alternative in ("two-sided", "greater", "less"):
        c = dunnett_critical(0.05, n0, sizes, df, alternative)
        assert dunnett_sf(c, n0, sizes, df, alternative) == pytest.approx(0.05, rel=1e-10)
        sign = -1.0 if alternative == "less" else 1.0
        p = dunnett_adjusted_pvalues(sign * np.array([c, c * 1.01, c * 0.99]), n0, sizes, df,
                                     alternative)
        assert p[0] == pytest.approx(0.05, rel=1e-10) and p[1] < 0.05 < p[2]


def test_deterministic_and_shaped():
    t = np.array([[0.3, -2.1, 2.8], [1.7, 0.0, -3.3]])
    first = dunnett_adjusted_pvalues(t, 8, [8, 5, 11], 26.0)
    second = dunnett_adjusted_pvalues(t, 8, [8, 5, 11], 26.0)
    assert first.shape == (2, 3)
    np.testing.assert_array_equal(first, second)      # bit-identical: no randomness
    np.testing.assert_allclose(first[0], dunnett_sf(np.abs(t[0]), 8, [8, 5, 11], 26.0), rtol=1e-14)
    sf = dunnett_sf(np.linspace(0, 5, 50), 8, [8, 5, 11], 26.0)
    assert np.all(np.diff(sf) <= 0) and sf[0] == 1.0
    both = dunnett_sf(2.0, 8, [8, 5, 11], 26.0) + dunnett_cdf(2.0, 8, [8, 5, 11], 26.0)
    assert both == pytest.approx(1.0, abs=1e-13)


def test_bad_arguments_raise():
    with pytest.raises(InputError):
        dunnett_sf(2.0, 5, [5, 5], 10.0, alternative="both")
    with pytest.raises(InputError):
        dunnett_sf(2.0, 0, [5, 5], 10.0)
    with pytest.raises(InputError):
        dunnett_sf(2.0, 5, [], 10.0)
    with pytest.raises(InputError):
        dunnett_critical(0.0, 5, [5], 10.0)
