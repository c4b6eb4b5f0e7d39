"""Transformations: round trips, monotonicity, domains, the shift rule, CI back-transforms."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.special as sp
import scipy.stats as st

from planrunner.stats import DomainError, InputError, StatsError
from planrunner.stats.transforms import TRANSFORMS, get_transform

# Values inside every domain (proportions in (0, 1) so arcsine_sqrt applies too)
INSIDE = np.array([0.013, 0.2, 0.35, 0.5, 0.77, 0.999])
ALL = [get_transform(n, lmbda=(-0.7 if n == "boxcox" else None)) for n in TRANSFORMS] + [
    get_transform("boxcox", lmbda=lam) for lam in (0.0, 1e-12, 0.5, 2.0, -2.5)
]


@pytest.mark.parametrize("t", ALL, ids=lambda t: t.label)
def test_round_trip(t):
    # inverse(forward(x)) == x to rounding, with and without a shift
    np.testing.assert_allclose(t.inverse(t.forward(INSIDE)), INSIDE, rtol=1e-12)
    if t.shiftable:
        np.testing.assert_allclose(t.inverse(t.forward(INSIDE, shift=0.25), shift=0.25), INSIDE, rtol=1e-12)


@pytest.mark.parametrize("t", ALL, ids=lambda t: t.label)
def test_monotone_direction(t):
    y = t.forward(INSIDE)
    steps = np.diff(y)
    if t.monotone == "increasing":
        assert np.all(steps > 0)
    else:
        assert t.monotone == "decreasing" and np.all(steps < 0)


def test_reference_values():
    # numpy / scipy references: log, log10, reciprocal, arcsin(sqrt), scipy.special.boxcox
    x = np.array([0.5, 2.0, 9.0])
    np.testing.assert_allclose(get_transform("log").forward(x), np.log(x), rtol=1e-15)
    np.testing.assert_allclose(get_transform("log10").forward(x), np.log10(x), rtol=1e-15)
    np.testing.assert_allclose(get_transform("reciprocal").forward(x), 1 / x, rtol=1e-15)
    np.testing.assert_allclose(get_transform("sqrt").forward(x), np.sqrt(x), rtol=1e-15)
    p = np.array([0.0, 0.25, 1.0])
    np.testing.assert_allclose(get_transform("arcsine_sqrt").forward(p), [0.0, np.pi / 6, np.pi / 2], rtol=1e-15)
    for lam in (-1.0, -0.3, 0.0, 1e-9, 0.5, 2.0):
        # scipy.special.boxcox
        np.testing.assert_allclose(get_transform("boxcox", lmbda=lam).forward(x), sp.boxcox(x, lam), rtol=1e-12)
        # scipy.special.inv_boxcox
        np.testing.assert_allclose(get_transform("boxcox", lmbda=lam).inverse(sp.boxcox(x, lam)), x, rtol=1e-12)


def test_boxcox_small_lambda_is_continuous_at_zero():
    # expm1 form: (x^lam - 1)/lam -> log x as lam -> 0 without cancellation
    x = np.array([1e-3, 0.5, 7.0, 1e4])
    near = get_transform("boxcox", lmbda=1e-10).forward(x)
    np.testing.assert_allclose(near, np.log(x), rtol=1e-8)


def test_domain_errors_name_count_and_smallest_value():
    with pytest.raises(DomainError, match=r"2 values are outside.*smallest offending value -3"):
        get_transform("log").forward([1.0, 0.0, -3.0, 5.0])
    with pytest.raises(DomainError, match=r"1 value is outside.*smallest offending value -0.5"):
        get_transform("sqrt").forward([-0.5, 4.0])
    with pytest.raises(DomainError, match=r"largest offending value 1.2.*cannot be repaired"):
        get_transform("arcsine_sqrt").forward([0.5, 1.2])
    with pytest.raises(DomainError, match="after adding the shift 0.5"):
        get_transform("reciprocal").forward([-1.0, 2.0], shift=0.5)
    # The message proposes the default shift of the original data
    with pytest.raises(DomainError, match="the default rule gives 0.25"):
        get_transform("log").forward([0.0, 0.5, 2.0])


def test_shift_rule():
    log = get_transform("log")
    # counts (whole numbers >= 0) with a zero: shift 1 (common practice, log(x + 1))
    assert log.requires_shift([0, 3, 7]) and log.default_shift([0, 3, 7]) == 1.0
    # zeros with non-integers: half the smallest positive value
    assert log.default_shift([0.0, 0.4, 2.5]) == 0.2
    # negative values: the smallest shifted value is half the smallest step above the minimum
    assert log.default_shift([-2.0, -1.0, 3.0]) == 2.5
    # all equal and not positive: 1 - min
    assert log.default_shift([-2.0, -2.0]) == 3.0
    # positive data need no shift
    assert not log.requires_shift([0.1, 2.0]) and log.default_shift([0.1, 2.0]) == 0.0
    # sqrt: only negatives need a shift, which brings the minimum to zero
    assert get_transform("sqrt").default_shift([-1.5, 0.0, 2.0]) == 1.5
    assert get_transform("identity").default_shift([-1.0]) == 0.0
    # proportions cannot be shifted
    assert not get_transform("arcsine_sqrt").requires_shift([1.5])
    # after the default shift every value is in the domain, for every shiftable transform
    data = np.array([0.0, 0.0, 0.3, 4.0, -0.2])
    for t in ALL:
        if t.shiftable:
            t.check_domain(data, shift=float(t.default_shift(data)))


def test_shift_rule_per_batch_element():
    log = get_transform("log")
    x = np.array([[0.0, 1.0, 2.0], [0.5, 1.0, 3.0], [0.0, 0.3, 0.9]])
    np.testing.assert_array_equal(log.requires_shift(x, axis=-1), [True, False, True])
    np.testing.assert_allclose(log.default_shift(x, axis=-1), [1.0, 0.0, 0.15])


def test_ci_back_transform_decreasing():
    rec = get_transform("reciprocal")
    # On the 1/x scale the interval (0.2, 0.5) is x in (2, 5): the ends swap
    lo, hi = rec.back_transform_ci(0.2, 0.5)
    assert (lo, hi) == (2.0, 5.0)
    # A lower bound at or below zero on the 1/x scale means no upper limit on the x scale
    lo, hi = rec.back_transform_ci(-0.1, 0.5)
    assert lo == 2.0 and hi == np.inf
    # Increasing transforms keep the order; the shift is removed
    lo, hi = get_transform("log").back_transform_ci(np.log(2.0), np.log(5.0), shift=1.0)
    np.testing.assert_allclose([lo, hi], [1.0, 4.0], rtol=1e-15)
    # Box-Cox with lambda < 0: a bound past the image of (0, inf) maps to +inf
    bc = get_transform("boxcox", lmbda=-1.0)
    lo, hi = bc.back_transform_ci(0.0, 1.5)
    assert lo == 1.0 and hi == np.inf


def test_back_transform_labels_and_contrasts():
    log = get_transform("log")
    assert log.back_transform_label == "geometric mean"
    assert log.contrast_label == "ratio of geometric means"
    np.testing.assert_allclose(log.back_transform_contrast(np.log(3.0)), 3.0, rtol=1e-15)
    np.testing.assert_allclose(get_transform("log10").back_transform_contrast(1.0), 10.0)
    assert get_transform("boxcox", lmbda=0.0).back_transform_label == "geometric mean"
    assert "median" in get_transform("sqrt").back_transform_label
    assert "harmonic" in get_transform("reciprocal").back_transform_label
    with pytest.raises(StatsError, match="no original-scale counterpart"):
        get_transform("sqrt").back_transform_contrast(1.0)
    # the back-transformed mean of 1/x is the harmonic mean (scipy.stats.hmean)
    x = np.array([1.0, 2.0, 4.0])
    rec = get_transform("reciprocal")
    np.testing.assert_allclose(rec.inverse(rec.forward(x).mean()), st.hmean(x), rtol=1e-15)
    # and of log x the geometric mean (scipy.stats.gmean)
    np.testing.assert_allclose(log.inverse(log.forward(x).mean()), st.gmean(x), rtol=1e-15)


def test_registry_and_errors():
    assert sorted(TRANSFORMS) == sorted(
        ["identity", "sqrt", "log", "log10", "reciprocal", "arcsine_sqrt", "boxcox"]
    )
    with pytest.raises(InputError, match="did you mean 'log10'"):
        get_transform("log01")
    with pytest.raises(InputError, match="needs lmbda"):
        get_transform("boxcox")
    with pytest.raises(InputError, match="takes no lambda"):
        get_transform("log", lmbda=0.5)
    assert get_transform("boxcox", lmbda=-0.5).label == "boxcox(lambda=-0.5)"
    with pytest.raises(InputError, match="NaN"):
        get_transform("log").forward([1.0, np.nan])


def test_transforms_are_frozen():
    t = get_transform("log")
    with pytest.raises(AttributeError):
        t.name = "sqrt"  # type: ignore[misc]
