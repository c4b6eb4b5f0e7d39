"""Studentized range distribution: Harter (1960) table, scipy reference, exact identities."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from scipy import special, stats

from planrunner.stats import InputError
from planrunner.stats.distributions import (
    studentized_range_cdf,
    studentized_range_ppf,
    studentized_range_sf,
)

DATA = Path(__file__).parent / "data" / "studentized_range" / "harter1960_cells.csv"


def _harter():
    with DATA.open(newline="") as fh:
        return [(float(r["alpha"]), int(r["k"]), float(r["df"]), r["q_crit"])
                for r in csv.DictReader(fh)]


@pytest.mark.parametrize("alpha,k,df,printed", _harter())
def test_harter_1960_table3(alpha, k, df, printed):
    # Harter (1960), Ann. Math. Statist. 31, Table 3 (upper alpha points of q(k, df), as
    # transcribed in scipy's test suite), printed to 2-4 significant figures. Several cells
    # differ from the exact quantile by about one unit in the last printed digit (e.g. k = 2,
    # df = 1, alpha = 0.01: exact sqrt(2) * t_{0.995, 1} = 90.0242 is printed 90.03), so the
    # check allows 1.5 units in the last digit.
    q = studentized_range_ppf(1 - alpha, k, df)
    decimals = len(printed.split(".")[1]) if "." in printed else 0
    assert abs(q - float(printed)) <= 1.5 * 10.0 ** -decimals


# Reference grid for scipy.stats.studentized_range (its own adaptive quadrature). scipy loses
# the far tail at small df (it returns 0 at p = 1e-4 for df = 1 and at p = 1e-7 for df = 2,
# k >= 5; see test_exact_two_means for those regions), so at df = 2 the grid stops at
# p = 1e-6. Measured max |dp| on this grid: 1.6e-11.
_GRID_K = (2, 3, 5, 10, 20)
_GRID_DF = (2.0, 5.0, 10.0, 28.0, 100.0, 1000.0, np.inf)
_GRID_P = np.array([0.995, 0.9, 0.5, 0.1, 0.01, 1e-4, 1e-6, 1e-9, 1e-12])


@pytest.mark.parametrize("k", _GRID_K)
def test_sf_matches_scipy_on_grid(k):
    for df in _GRID_DF:
        p = _GRID_P[_GRID_P >= 1e-6] if df <= 2 else _GRID_P
        q = studentized_range_ppf(1 - p, k, df)           # q spanning p from 1e-12 to ~1
        mine = studentized_range_sf(q, k, df)
        reference = np.array([stats.studentized_range.sf(x, k, df) for x in q])
        assert np.max(np.abs(mine - reference)) <= 1e-9, (k, df)


def test_ppf_matches_scipy():
    # scipy.stats.studentized_range.ppf (root of its cdf) at a few cells.
    for p, k, df in ((0.95, 4, 28.0), (0.99, 10, 12.0), (0.9, 3, 60.0)):
        ref = stats.studentized_range.ppf(p, k, df)
        assert studentized_range_ppf(p, k, df) == pytest.approx(ref, rel=1e-8)


@pytest.mark.parametrize("df", [1.0, 2.0, 3.0, 7.5, 28.0, 400.0, 1e5])
def test_exact_two_means(df):
    # Exact identity: the range of two means is |difference|, so Q / sqrt(2) = |t_df| and
    # P(Q > q) = 2 P(t_df > q / sqrt(2)) (scipy.stats.t as the reference), here down to p=1e-12.
    p = np.array([0.999, 0.9, 0.5, 0.05, 1e-3, 1e-6, 1e-9, 1e-12])
    q = np.sqrt(2) * stats.t.isf(p / 2, df)
    reference = 2 * stats.t.sf(q / np.sqrt(2), df)
    np.testing.assert_allclose(studentized_range_sf(q, 2, df), reference, rtol=1e-8, atol=0)
    np.testing.assert_allclose(studentized_range_cdf(q, 2, df), 1 - reference, rtol=0,
                               atol=1e-14)


def test_known_variance_limit():
    # df = inf: k = 2 gives P(|Z1 - Z2| > q) = 2 Phi(-q / sqrt(2)) (exact), relative accuracy
    # kept far into the tail.
    q = np.array([0.1, 1.0, 2.77, 5.0, 8.0, 12.0])
    exact = 2 * special.ndtr(-q / np.sqrt(2))
    np.testing.assert_allclose(studentized_range_sf(q, 2, np.inf), exact, rtol=1e-12)
    # Large finite df approach the limit at rate 1/df: ten times the df, a tenth of the gap.
    q5 = np.array([1.0, 2.77, 5.0])
    limit = studentized_range_sf(q5, 5, np.inf)
    gap6 = studentized_range_sf(q5, 5, 1e6) - limit
    gap7 = studentized_range_sf(q5, 5, 1e7) - limit
    np.testing.assert_allclose(gap6 / gap7, 10.0, rtol=0.01)


def test_shapes_broadcasting_and_edges():
    q = np.linspace(0.5, 6.0, 12).reshape(3, 4)
    out = studentized_range_sf(q, np.array([[3], [4], [5]]), 20)
    assert out.shape == (3, 4)
    for i, k in enumerate((3, 4, 5)):
        np.testing.assert_allclose(out[i], studentized_range_sf(q[i], k, 20), rtol=1e-15)
    scalar = studentized_range_sf(3.5, 4, 28)
    assert np.ndim(scalar) == 0 and isinstance(scalar, np.floating)
    edge = studentized_range_sf(np.array([-1.0, 0.0, np.inf, np.nan]), 4, 10)
    np.testing.assert_array_equal(edge[:3], [1.0, 1.0, 0.0])
    assert np.isnan(edge[3])
    assert studentized_range_ppf(0.0, 4, 10) == 0.0 and studentized_range_ppf(1.0, 4, 10) == np.inf
    with pytest.raises(InputError):
        studentized_range_sf(3.0, 1, 10)
    with pytest.raises(InputError):
        studentized_range_sf(3.0, 2.5, 10)
    with pytest.raises(InputError):
        studentized_range_sf(3.0, 3, 0)
    with pytest.raises(InputError):
        studentized_range_ppf(1.2, 3, 10)


def test_complement_monotone_and_round_trip():
    q = np.linspace(0.05, 12, 300)
    for k, df in ((3, 4.0), (8, 30.0), (20, np.inf)):
        sf = studentized_range_sf(q, k, df)
        cdf = studentized_range_cdf(q, k, df)
        np.testing.assert_allclose(sf + cdf, 1.0, rtol=0, atol=1e-13)
        assert np.all(np.diff(sf) <= 0)
        p = np.array([1e-6, 0.05, 0.5, 0.95, 1 - 1e-8])
        np.testing.assert_allclose(studentized_range_cdf(studentized_range_ppf(p, k, df), k, df),
                                   p, rtol=1e-11)


def test_many_distinct_df_path_agrees_and_is_deterministic():
    # Values with their own df (as in Games-Howell) take a per-value node path; it must agree
    # with the shared-node path and repeat bit for bit.
    rng = np.random.default_rng(3)
    q = rng.uniform(0.5, 7.0, 40)
    df = rng.uniform(2.5, 60.0, 40)
    many = studentized_range_sf(q, 4, df)
    single = np.array([studentized_range_sf(a, 4, b) for a, b in zip(q, df)])
    np.testing.assert_allclose(many, single, rtol=1e-13, atol=1e-16)
    np.testing.assert_array_equal(many, studentized_range_sf(q, 4, df))
    big = np.repeat(q, 5)
    np.testing.assert_array_equal(studentized_range_sf(big, 4, 28), studentized_range_sf(big, 4, 28))
