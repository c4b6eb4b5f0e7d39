"""Group summaries, residuals and the shared utilities of planrunner.stats._core."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
import scipy.stats as st

from planrunner.stats import InputError
from planrunner.stats._core import as_groups, flag_cases, group_moments, scalarize
from planrunner.stats.summary import describe_groups, residuals


def test_describe_matches_numpy_and_scipy():
    rng = np.random.default_rng(0)
    a, b = rng.normal(3.0, 2.0, 9), rng.normal(-1.0, 0.5, 14)
    res = describe_groups(a, b, confidence_level=0.9)
    np.testing.assert_array_equal(res.n, [9, 14])
    np.testing.assert_allclose(res.mean, [a.mean(), b.mean()], rtol=1e-14)
    np.testing.assert_allclose(res.sd, [a.std(ddof=1), b.std(ddof=1)], rtol=1e-13)  # numpy
    np.testing.assert_allclose(res.se, [st.sem(a), st.sem(b)], rtol=1e-13)  # scipy.stats.sem
    for i, g in enumerate((a, b)):
        # scipy.stats.t.interval with the group's own df and standard error
        lo, hi = st.t.interval(0.9, len(g) - 1, loc=g.mean(), scale=st.sem(g))
        np.testing.assert_allclose([res.ci.low[i], res.ci.high[i]], [lo, hi], rtol=1e-12)
    assert res.confidence_level == 0.9 and res.computable.all()


def test_describe_batched_shapes_and_single_value_group():
    x = np.arange(12.0).reshape(3, 4)
    res = describe_groups(x, np.ones((3, 1)))
    assert res.mean.shape == (3, 2) and res.n.shape == (3, 2)
    assert res.computable.tolist() == [[True, False]] * 3
    assert np.isnan(res.sd[:, 1]).all() and np.isfinite(res.sd[:, 0]).all()
    assert "one value" in res.reason[0, 1] and res.reason[0, 0] == ""
    np.testing.assert_allclose(res.sd[:, 0], x.std(axis=-1, ddof=1), rtol=1e-14)  # numpy


def test_describe_rejects_bad_level():
    with pytest.raises(InputError, match="strictly between 0 and 1"):
        describe_groups([1.0, 2.0], confidence_level=95)


def test_residuals_match_numpy_and_sum_to_zero():
    rng = np.random.default_rng(1)
    groups = [rng.normal(size=(4, n)) for n in (3, 5, 2)]
    r = residuals(*groups)
    ref = np.concatenate([g - g.mean(axis=-1, keepdims=True) for g in groups], axis=-1)  # numpy
    np.testing.assert_allclose(r, ref, atol=1e-14)
    assert r.shape == (4, 10)
    np.testing.assert_allclose(r[..., :3].sum(axis=-1), 0.0, atol=1e-14)


def test_residuals_with_constant_leading_digits():
    # Values like 1e12 + small: residuals must equal exact rational arithmetic on the doubles
    x = np.array([1e12 + 0.25, 1e12 + 0.5, 1e12 + 1.25])
    exact_mean = sum(Fraction(v) for v in x.tolist()) / 3
    ref = [float(Fraction(v) - exact_mean) for v in x.tolist()]
    np.testing.assert_allclose(residuals(x), ref, rtol=1e-12)


def test_group_moments_accuracy_and_offset_invariance():
    # Centred means are exact for an exactly representable offset (2**40 + dyadic values)
    base = [np.array([0.5, 0.75, 1.0]), np.array([2.0, 2.25])]
    moved = [g + 2.0**40 for g in base]
    m0, m1 = group_moments(base), group_moments(moved)
    np.testing.assert_array_equal(m0.ss, m1.ss)
    np.testing.assert_array_equal(np.diff(m0.centred_mean), np.diff(m1.centred_mean))
    np.testing.assert_array_equal(m1.mean, [2.0**40 + 0.75, 2.0**40 + 2.125])
    # var is NaN for a group of one value, without a warning (tests run with warnings as errors)
    one = group_moments([np.array([3.0])])
    assert np.isnan(one.var[0]) and one.ss[0] == 0.0


def test_group_moments_constant_group_has_exact_zero_ss():
    # 0.1 * 7 / 7 rounds; the ss of a constant group must still be exactly zero
    m = group_moments([np.full(7, 0.1), np.array([1.0, 2.0])])
    assert m.ss[0] == 0.0 and m.mean[0] == 0.1


def test_as_groups_errors():
    with pytest.raises(InputError, match="single number"):
        as_groups([1.0, [1.0, 2.0]])
    with pytest.raises(InputError, match="not an array of numbers"):
        as_groups([["a", "b"], [1.0, 2.0]])
    with pytest.raises(InputError, match="at least 3 values"):
        as_groups([[1.0, 2.0], [1.0, 2.0, 3.0]], min_n=3)
    arrays, batch = as_groups([np.ones((2, 3)), np.ones((1, 4))])
    assert batch == (2,) and arrays[1].shape == (2, 4)


def test_flag_cases_first_reason_wins_and_scalar_batch():
    comp, reason = flag_cases((3,), (np.array([True, False, False]), "first"), (np.array([True, True, False]), "second"))
    assert comp.tolist() == [False, False, True]
    assert reason.tolist() == ["first", "second", ""]
    comp0, reason0 = flag_cases((), (True, "why"))
    assert scalarize(comp0) == np.False_ and scalarize(reason0) == "why"
