"""Properties of the follow-up comparisons and effect sizes, and their degenerate cases.

Properties (common practice for location-scale procedures): p-values in [0, 1]; relabelling
groups permutes the pairs and flips the sign of a difference whose pair is reversed; a batch
gives the same numbers as one analysis at a time; y -> a*y + b leaves statistics (up to the
sign of a) and p-values unchanged and scales differences by a.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planrunner.stats import InputError
from planrunner.stats.comparisons import dunnett, games_howell, pairwise_t, tukey_kramer
from planrunner.stats.effect import effect_sizes
from planrunner.stats.power import anova_power, anova_sample_size

SETTINGS = settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])

METHODS = {
    "tukey_kramer": tukey_kramer,
    "games_howell": games_howell,
    "pairwise_t_holm": lambda *g, **kw: pairwise_t(*g, adjust="holm", **kw),
    "pairwise_t_sidak": lambda *g, **kw: pairwise_t(*g, adjust="sidak", **kw),
    "dunnett": dunnett,
}


@st.composite
def layouts(draw, max_k=4, batch=()):
    """k groups (2 <= n_i <= 7) of seeded normal data with group-specific means and spreads."""
    k = draw(st.integers(2, max_k))
    sizes = draw(st.lists(st.integers(2, 7), min_size=k, max_size=k))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    centre = draw(st.floats(-1e3, 1e3))
    return [
        centre + rng.normal(rng.normal(0, 2), rng.uniform(0.2, 3.0), batch + (n,)) for n in sizes
    ]


# ---------------------------------------------------------------------------------------------
# p in [0, 1]; intervals contain the difference
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("method", list(METHODS))
@SETTINGS
@given(groups=layouts())
def test_pvalues_in_unit_interval_and_ci_brackets_difference(method, groups):
    res = METHODS[method](*groups)
    assert res.computable.all()
    assert np.all((res.pvalue_adjusted >= 0) & (res.pvalue_adjusted <= 1))
    assert np.all(res.ci_low <= res.difference) and np.all(res.difference <= res.ci_high)
    assert np.all(res.se > 0) and np.all(res.df > 0)


# ---------------------------------------------------------------------------------------------
# Relabelling
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("method", ["tukey_kramer", "games_howell", "pairwise_t_holm"])
@SETTINGS
@given(groups=layouts(), data=st.data())
def test_differences_antisymmetric_under_group_reordering(method, groups, data):
    k = len(groups)
    perm = data.draw(st.permutations(range(k)))
    fn = METHODS[method]
    base = fn(*groups)
    moved = fn(*[groups[p] for p in perm])
    index = {pair: j for j, pair in enumerate(base.pairs)}
    for j, (a, b) in enumerate(moved.pairs):
        oa, ob = perm[a], perm[b]
        sign = 1.0 if oa < ob else -1.0
        i = index[(min(oa, ob), max(oa, ob))]
        np.testing.assert_allclose(moved.difference[j], sign * base.difference[i], rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(moved.se[j], base.se[i], rtol=1e-12)
        np.testing.assert_allclose(moved.pvalue_adjusted[j], base.pvalue_adjusted[i], rtol=1e-9, atol=1e-13)
        lo, hi = (moved.ci_low[j], moved.ci_high[j]) if sign > 0 else (-moved.ci_high[j], -moved.ci_low[j])
        np.testing.assert_allclose([lo, hi], [base.ci_low[i], base.ci_high[i]], rtol=1e-9, atol=1e-9)


@SETTINGS
@given(groups=layouts(max_k=3))
def test_dunnett_control_choice_flips_sign_of_the_shared_pair(groups):
    # The pair (1, 0) with control 0 and the pair (0, 1) with control 1 are the same two groups.
    a = dunnett(*groups, control=0)
    b = dunnett(*groups, control=1)
    np.testing.assert_allclose(a.difference[0], -b.difference[0], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(a.statistic[0], -b.statistic[0], rtol=1e-12, atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Batch == one at a time
# ---------------------------------------------------------------------------------------------


FIELDS = ("difference", "se", "statistic", "df", "critical_value", "ci_low", "ci_high", "pvalue_adjusted")


@pytest.mark.parametrize("method", list(METHODS))
@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(groups=layouts(batch=(2, 2)))
def test_batched_equals_one_at_a_time(method, groups):
    fn = METHODS[method]
    batched = fn(*groups)
    for idx in np.ndindex(2, 2):
        one = fn(*[g[idx] for g in groups])
        assert one.pairs == batched.pairs
        for name in FIELDS:
            np.testing.assert_allclose(
                getattr(batched, name)[idx], getattr(one, name), rtol=1e-12, atol=1e-14, err_msg=name
            )


@settings(max_examples=6, deadline=None)
@given(groups=layouts(batch=(3,)))
def test_effect_sizes_batched_equals_one_at_a_time(groups):
    batched = effect_sizes(*groups)
    for i in range(3):
        one = effect_sizes(*[g[i] for g in groups])
        for f in dataclasses.fields(one):
            v = getattr(one, f.name)
            if f.name in ("df1", "df2", "n_total", "confidence_level"):
                assert getattr(batched, f.name) == v
            elif f.name == "reason":
                assert batched.reason[i] == v
            elif f.name.endswith("_ci"):
                got = getattr(batched, f.name)
                np.testing.assert_allclose([got.low[i], got.high[i]], [v.low, v.high], rtol=1e-12)
            else:
                np.testing.assert_allclose(getattr(batched, f.name)[i], v, rtol=1e-12, atol=1e-14)


# ---------------------------------------------------------------------------------------------
# y -> a y + b
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("method", ["tukey_kramer", "games_howell", "pairwise_t_sidak", "dunnett"])
@SETTINGS
@given(
    groups=layouts(),
    a=st.one_of(st.floats(0.01, 100.0), st.floats(-100.0, -0.01)),
    b=st.floats(-1e4, 1e4),
)
def test_affine_invariance(method, groups, a, b):
    fn = METHODS[method]
    base = fn(*groups)
    moved = fn(*[a * g + b for g in groups])
    np.testing.assert_allclose(moved.difference, a * base.difference, rtol=1e-8, atol=1e-9 * abs(a))
    np.testing.assert_allclose(moved.se, abs(a) * base.se, rtol=1e-8)
    np.testing.assert_allclose(moved.statistic, np.sign(a) * base.statistic, rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(moved.pvalue_adjusted, base.pvalue_adjusted, rtol=1e-6, atol=1e-9)


@SETTINGS
@given(groups=layouts(), a=st.floats(-50.0, 50.0).filter(lambda x: abs(x) > 0.01), b=st.floats(-1e4, 1e4))
def test_effect_sizes_affine_invariance(groups, a, b):
    base = effect_sizes(*groups)
    moved = effect_sizes(*[a * g + b for g in groups])
    for name in ("statistic", "eta_squared", "omega_squared", "cohens_f"):
        np.testing.assert_allclose(
            getattr(moved, name), getattr(base, name), rtol=1e-7, atol=1e-10, err_msg=name
        )
    np.testing.assert_allclose(
        [moved.noncentrality_ci.low, moved.noncentrality_ci.high],
        [base.noncentrality_ci.low, base.noncentrality_ci.high],
        rtol=1e-7,
        atol=1e-10,
    )


# ---------------------------------------------------------------------------------------------
# Degenerate input: recorded, not silent NaN
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("method", ["tukey_kramer", "pairwise_t_holm", "dunnett"])
def test_zero_pooled_variance_is_not_computable(method):
    fn = METHODS[method]
    rng = np.random.default_rng(1)
    groups = [rng.normal(i, 1.0, (3, 4)) for i in range(3)]
    for g, v in zip(groups, (1.0, 2.0, 4.0)):
        g[1] = v  # batch element 1: every group constant
    res = fn(*groups)
    assert not res.computable[1].any() and res.computable[[0, 2]].all()
    assert all("pooled within-group variance is zero" in r for r in res.reason[1])
    assert (res.reason[[0, 2]] == "").all()
    for name in FIELDS[1:]:
        assert np.isnan(getattr(res, name)[1]).all(), name
        assert np.isfinite(getattr(res, name)[[0, 2]]).all() or name in ("ci_low", "ci_high")
    assert np.isfinite(res.difference).all()  # mean differences stay defined


def test_games_howell_zero_variance_group_blocks_only_its_pairs():
    rng = np.random.default_rng(2)
    groups = [rng.normal(0, 1, 5), np.full(4, 3.0), rng.normal(1, 2, 6)]
    res = games_howell(*groups)
    involves = np.array([1 in p for p in res.pairs])
    np.testing.assert_array_equal(res.computable, ~involves)
    assert np.isnan(res.pvalue_adjusted[involves]).all()
    assert np.isfinite(res.pvalue_adjusted[~involves]).all()
    assert all("zero variance" in r for r in res.reason[involves])
    assert (res.reason[~involves] == "").all()


def test_all_computable_has_empty_reason_and_frozen_result():
    rng = np.random.default_rng(3)
    res = tukey_kramer(rng.normal(size=5), rng.normal(size=6))
    assert (res.reason == "").all() and res.computable.all()
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.method = "other"


def test_effect_sizes_zero_within_variance_not_computable():
    res = effect_sizes(np.full((2, 3), 1.0), np.array([[2.0, 2.0, 2.0], [1.0, 2.0, 3.0]]))
    np.testing.assert_array_equal(res.computable, [False, True])
    assert np.isnan(res.eta_squared[0]) and np.isfinite(res.eta_squared[1])
    assert "within-group variance is zero" in res.reason[0] and res.reason[1] == ""


def test_effect_sizes_single_analysis_gives_numpy_scalars():
    res = effect_sizes([1.0, 2.0, 3.0], [2.0, 3.5, 4.0])
    assert isinstance(res.eta_squared, np.floating) and isinstance(res.computable, np.bool_)


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda: tukey_kramer([1.0, 2.0]), "at least 2 groups"),
        (lambda: tukey_kramer([1.0], [2.0]), "degrees of freedom"),
        (lambda: tukey_kramer([1.0, np.nan], [2.0, 3.0]), "NaN"),
        (lambda: tukey_kramer([1.0, 2.0], [2.0, 3.0], confidence_level=1.5), "between 0 and 1"),
        (lambda: games_howell([1.0, 2.0], [2.0]), "at least 2 values"),
        (lambda: pairwise_t([1.0, 2.0], [2.0, 3.0], adjust="holm-sidak"), "not allowed"),
        (lambda: dunnett([1.0, 2.0], [2.0, 3.0], control=2), "not a group index"),
        (lambda: dunnett([1.0, 2.0], [2.0, 3.0], alternative="bigger"), "not allowed"),
        (lambda: effect_sizes([1.0], [2.0]), "degrees of freedom"),
        (lambda: anova_power(effect_size_f=0.25, n=10), "number of groups is unknown"),
        (lambda: anova_power(effect_size_f=0.25, means=[0, 1], sd=1, n=10), "either effect_size_f"),
        (lambda: anova_power(means=[0, 1, 2], sd=1, n=[5, 5]), "inconsistent"),
        (lambda: anova_sample_size(effect_size_f=0.0, k=3), "effect is zero"),
        (lambda: anova_sample_size(effect_size_f=0.3, k=3, target_power=0.01), "between alpha"),
    ],
)
def test_invalid_input_raises_input_error(call, message):
    with pytest.raises(InputError, match=message):
        call()
