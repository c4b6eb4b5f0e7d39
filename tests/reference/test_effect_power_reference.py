"""Effect sizes and power checked against certified values, reference libraries and tables.

Sources, named beside each check:
- NIST StRD ANOVA certified R^2 (= eta squared), data in tests/reference/data/nist_strd_anova/.
- statsmodels.stats.oneway.effectsize_oneway and confint_effectsize_oneway.
- The noncentral F cdf as a Poisson mixture of regularized incomplete beta functions
  (Johnson, Kotz & Balakrishnan 1995, Continuous Univariate Distributions vol. 2, ch. 30),
  evaluated here independently of scipy.stats.ncf.
- statsmodels.stats.power.FTestAnovaPower (effect_size is Cohen's f, nobs is the TOTAL n).
- scipy.stats.ncf / scipy.stats.f computed directly for unequal n.
- Cohen (1988), Statistical Power Analysis, sample-size tables (values from memory).
"""

from __future__ import annotations

import csv
import json
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest
from scipy import special, stats

from planrunner.stats.effect import effect_sizes
from planrunner.stats.power import anova_power, anova_sample_size

DATA = Path(__file__).parent / "data"


def _load(name: str, group: str, value: str) -> list[np.ndarray]:
    with open(DATA / "open_datasets" / name, newline="") as fh:
        rows = list(csv.DictReader(fh))
    levels = list(dict.fromkeys(r[group] for r in rows))
    return [np.array([float(r[value]) for r in rows if r[group] == lv]) for lv in levels]


def _rng_groups():
    rng = np.random.default_rng(99)
    return [rng.normal(0.4 * i, 1.0, n) for i, n in enumerate((6, 9, 7, 11))]


DATASETS = {
    "PlantGrowth": _load("PlantGrowth.csv", "group", "weight"),
    "InsectSprays": _load("InsectSprays.csv", "spray", "count"),
    "poisons-by-treat": _load("poisons.csv", "treat", "time"),
    "poisons-by-poison": _load("poisons.csv", "poison", "time"),
    "random-unequal-n": _rng_groups(),
}


def _lre(x: float, c: float) -> float:
    """Log relative error, -log10(|x - c| / |c|) (NIST StRD scoring)."""
    if x == c:
        return 16.0
    return -np.log10(abs(x - c) / abs(c))


# ---------------------------------------------------------------------------------------------
# Point estimates
# ---------------------------------------------------------------------------------------------


# SmLs07-09 (13 constant leading digits) are left out: read into float64 their values carry
# representation errors of about 1e-4 relative to their spread, which caps any float64 method
# at about 4-5 correct digits there.
@pytest.mark.parametrize(
    "name", ["SiRstv", "AtmWtAg", "SmLs01", "SmLs02", "SmLs03", "SmLs04", "SmLs05", "SmLs06"]
)
def test_eta_squared_matches_nist_certified_r_squared(name):
    base = DATA / "nist_strd_anova"
    cert = json.loads((base / f"{name}.certified.json").read_text())["certified"]
    with open(base / f"{name}.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    levels = list(dict.fromkeys(r["group"] for r in rows))
    groups = [np.array([float(r["response"]) for r in rows if r["group"] == lv]) for lv in levels]
    res = effect_sizes(*groups)
    # NIST StRD ANOVA: certified R-squared = SS_between / SS_total = eta squared; certified F.
    assert _lre(float(res.eta_squared), float(Decimal(cert["r_squared"]))) >= 9
    assert _lre(float(res.statistic), float(Decimal(cert["F"]))) >= 9
    # omega^2 and f from the certified sums of squares (definitions in effect_sizes' Notes).
    ssb, ssw = float(Decimal(cert["ss_between"])), float(Decimal(cert["ss_within"]))
    msw = float(Decimal(cert["ms_within"]))
    omega = (ssb - cert["df_between"] * msw) / (ssb + ssw + msw)
    assert _lre(float(res.omega_squared), max(omega, 0.0)) >= 8 or (omega < 0 and res.omega_squared == 0)
    assert _lre(float(res.cohens_f), np.sqrt(ssb / ssw)) >= 9


@pytest.mark.parametrize("name", list(DATASETS))
def test_point_estimates_match_statsmodels_effectsize_oneway(name):
    from statsmodels.stats.oneway import effectsize_oneway

    groups = DATASETS[name]
    res = effect_sizes(*groups)
    n = np.array([g.size for g in groups], dtype=float)
    means = np.array([g.mean() for g in groups])
    vars_ = np.array([g.var(ddof=1) for g in groups])
    # statsmodels effectsize_oneway(use_var="equal") returns f^2 = SSb / (N MSw); ours is
    # f^2 = SSb / SSw = that * N / (N - k).
    f2_sm = effectsize_oneway(means, vars_, n, use_var="equal")
    np.testing.assert_allclose(res.cohens_f**2, f2_sm * n.sum() / (n.sum() - n.size), rtol=1e-11)
    # Identities with scipy.stats.f_oneway's F: eta^2 = df1 F / (df1 F + df2);
    # omega^2 = df1 (F - 1) / (df1 F + df2 + 1).
    F = stats.f_oneway(*groups).statistic
    d1, d2 = n.size - 1, n.sum() - n.size
    np.testing.assert_allclose(res.statistic, F, rtol=1e-12)
    np.testing.assert_allclose(res.eta_squared, d1 * F / (d1 * F + d2), rtol=1e-12)
    np.testing.assert_allclose(res.omega_squared, max(d1 * (F - 1) / (d1 * F + d2 + 1), 0.0), rtol=1e-11)


def test_omega_squared_clipped_and_interval_at_zero_for_small_f():
    # Groups with nearly equal means: F < 1 gives a negative raw omega^2 (reported as 0 and
    # flagged) and a lower lambda limit clipped at 0. Data: poisons, treatments A and C.
    g = DATASETS["poisons-by-treat"]
    rng = np.random.default_rng(5)
    groups = [x - x.mean() + rng.normal(0, 1e-3) for x in g]  # means nearly equal
    res = effect_sizes(*groups)
    assert res.statistic < 1
    assert bool(res.omega_squared_clipped) and res.omega_squared == 0.0
    assert bool(res.ci_low_at_zero) and res.eta_squared_ci.low == 0.0 and res.cohens_f_ci.low == 0.0
    # When F is below the alpha/2 point of the central F, both limits are zero
    # (scipy.special.fdtr is the central F cdf).
    alpha_half_point = special.fdtri(res.df1, res.df2, 0.025)
    assert bool(res.ci_high_at_zero) == bool(res.statistic <= alpha_half_point)


# ---------------------------------------------------------------------------------------------
# Intervals
# ---------------------------------------------------------------------------------------------


def _ncf_cdf_poisson_mixture(x, d1, d2, lam, terms=4000):
    # Johnson, Kotz & Balakrishnan (1995), ch. 30: P(F' <= x) =
    # sum_j Poisson(j; lam/2) I_{d1 x / (d1 x + d2)}(d1/2 + j, d2/2).
    j = np.arange(terms)
    w = stats.poisson.pmf(j, lam / 2.0)
    z = d1 * x / (d1 * x + d2)
    return float(np.sum(w * special.betainc(d1 / 2.0 + j, d2 / 2.0, z)))


@pytest.mark.parametrize("name", list(DATASETS))
@pytest.mark.parametrize("confidence_level", [0.90, 0.95])
def test_noncentrality_limits_solve_the_noncentral_f_equations(name, confidence_level):
    groups = DATASETS[name]
    res = effect_sizes(*groups, confidence_level=confidence_level)
    alpha = 1 - confidence_level
    F, d1, d2 = float(res.statistic), res.df1, res.df2
    for lam, target, at_zero in (
        (res.noncentrality_ci.low, 1 - alpha / 2, res.ci_low_at_zero),
        (res.noncentrality_ci.high, alpha / 2, res.ci_high_at_zero),
    ):
        if at_zero:
            assert lam == 0.0 and stats.f.cdf(F, d1, d2) <= target
        else:
            assert _ncf_cdf_poisson_mixture(F, d1, d2, float(lam)) == pytest.approx(target, abs=1e-10)


@pytest.mark.parametrize("name", list(DATASETS))
def test_intervals_match_statsmodels_confint_effectsize_oneway(name):
    from statsmodels.stats.oneway import confint_effectsize_oneway

    groups = DATASETS[name]
    res = effect_sizes(*groups, confidence_level=0.95)
    # statsmodels divides by f2 = 0 when a limit is 0 (its eta2 is then 0): silence that only.
    with np.errstate(divide="ignore"):
        ref = confint_effectsize_oneway(res.statistic, (res.df1, res.df2), alpha=0.05, nobs=res.n_total)
    # statsmodels inverts the cdf with scipy.special.ncfdtrinc, which is accurate to about
    # 1e-5 in probability here (the Poisson-mixture check above holds ours to 1e-10), so the
    # limits agree to about 1e-3 relative.
    lam = [res.noncentrality_ci.low, res.noncentrality_ci.high]
    np.testing.assert_allclose(lam, ref.ci_nc, rtol=2e-3, atol=1e-6)
    # statsmodels eta2 = f2 / (1 + f2) with f2 = lambda / N: the population proportion of
    # variance explained, lambda / (lambda + N) (Steiger 2004), our eta^2 and omega^2 interval.
    np.testing.assert_allclose([res.eta_squared_ci.low, res.eta_squared_ci.high], ref.eta2, rtol=2e-3, atol=1e-7)
    omega = [res.omega_squared_ci.low, res.omega_squared_ci.high]
    np.testing.assert_allclose(omega, ref.eta2, rtol=2e-3, atol=1e-7)
    np.testing.assert_allclose([res.cohens_f_ci.low, res.cohens_f_ci.high], ref.ci_f, rtol=2e-3, atol=1e-6)


def test_point_estimates_lie_inside_their_intervals():
    for groups in DATASETS.values():
        res = effect_sizes(*groups)
        assert res.eta_squared_ci.low <= res.eta_squared <= res.eta_squared_ci.high
        assert res.cohens_f_ci.low <= res.cohens_f <= res.cohens_f_ci.high


# ---------------------------------------------------------------------------------------------
# Power
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("f", [0.1, 0.25, 0.4, 0.8])
@pytest.mark.parametrize("n, k", [(5, 3), (12, 4), (30, 2), (8, 6)])
@pytest.mark.parametrize("alpha", [0.05, 0.01])
def test_power_matches_statsmodels_ftestanovapower(f, n, k, alpha):
    from statsmodels.stats.power import FTestAnovaPower

    res = anova_power(effect_size_f=f, n=n, k=k, alpha=alpha)
    # statsmodels FTestAnovaPower: effect_size is Cohen's f and nobs is the TOTAL sample size.
    ref = FTestAnovaPower().power(effect_size=f, nobs=n * k, alpha=alpha, k_groups=k)
    np.testing.assert_allclose(res.power, ref, rtol=1e-12)
    assert res.noncentrality == pytest.approx(f * f * n * k, rel=1e-14)
    assert (res.df1, res.df2) == (k - 1, n * k - k)


def test_power_unequal_n_matches_direct_noncentral_f():
    means, sd, n = np.array([10.0, 10.5, 11.2, 10.1]), 1.3, np.array([6, 11, 8, 15])
    res = anova_power(means=means, sd=sd, n=n, alpha=0.05)
    # Direct scipy.stats computation: lambda = sum n_i (mu_i - mu_w)^2 / sigma^2 with the
    # weighted mean; power = ncf.sf(f.isf(alpha, k-1, N-k), k-1, N-k, lambda).
    mu_w = (n * means).sum() / n.sum()
    lam = (n * (means - mu_w) ** 2).sum() / sd**2
    d1, d2 = 3, n.sum() - 4
    np.testing.assert_allclose(res.noncentrality, lam, rtol=1e-13)
    np.testing.assert_allclose(res.power, stats.ncf.sf(stats.f.isf(0.05, d1, d2), d1, d2, lam), rtol=1e-10)


def test_power_unequal_n_matches_statsmodels_effectsize_then_power():
    from statsmodels.stats.oneway import effectsize_oneway
    from statsmodels.stats.power import FTestAnovaPower

    # statsmodels docstring scenario (nobs 10, 12, 13, 15; means (-1, 0, 0, 1) * 0.5), with a
    # common variance of 1: effectsize_oneway(use_var="equal") is f^2 with weights n_i / N.
    n = np.array([10, 12, 13, 15])
    means = np.array([-1.0, 0.0, 0.0, 1.0]) * 0.5
    f2 = effectsize_oneway(means, np.ones(4), n, use_var="equal")
    ref = FTestAnovaPower().power(effect_size=np.sqrt(f2), nobs=n.sum(), alpha=0.05, k_groups=4)
    res = anova_power(means=means, sd=1.0, n=n)
    np.testing.assert_allclose(res.effect_size_f, np.sqrt(f2), rtol=1e-13)
    np.testing.assert_allclose(res.power, ref, rtol=1e-12)


def test_power_of_no_effect_is_alpha():
    # Under H0 (lambda = 0) the rejection rate is alpha by construction of the critical value.
    assert anova_power(effect_size_f=0.0, n=7, k=3, alpha=0.05).power == pytest.approx(0.05, abs=1e-15)


def test_power_is_batched_over_effect_sizes():
    fs = np.array([[0.1, 0.2], [0.3, 0.5]])
    res = anova_power(effect_size_f=fs, n=10, k=4)
    assert res.power.shape == (2, 2)
    for idx in np.ndindex(fs.shape):
        assert res.power[idx] == anova_power(effect_size_f=fs[idx], n=10, k=4).power


@pytest.mark.parametrize("f, k", [(0.1, 3), (0.25, 4), (0.4, 5), (0.6, 2)])
@pytest.mark.parametrize("target", [0.8, 0.9])
def test_sample_size_is_smallest_n_by_statsmodels_power(f, k, target):
    from statsmodels.stats.power import FTestAnovaPower

    res = anova_sample_size(effect_size_f=f, k=k, target_power=target)
    n = res.n[0]
    assert res.n == (n,) * k and res.multiplier == n
    power = FTestAnovaPower()
    # statsmodels FTestAnovaPower.power with TOTAL n: the target is reached at n, not at n - 1.
    assert power.power(effect_size=f, nobs=n * k, alpha=0.05, k_groups=k) >= target
    assert power.power(effect_size=f, nobs=(n - 1) * k, alpha=0.05, k_groups=k) < target
    # statsmodels solve_power gives the continuous total; ours is its ceiling per group.
    n_cont = power.solve_power(effect_size=f, nobs=None, alpha=0.05, power=target, k_groups=k) / k
    assert n == int(np.ceil(n_cont - 1e-6))


@pytest.mark.parametrize("f, k, n_expected", [(0.25, 2, 64), (0.25, 4, 45), (0.10, 4, 274)])
def test_sample_size_cohen_1988_tables(f, k, n_expected):
    # Cohen (1988), Table 8.4.4 (and Table 2.4.1 for k = 2, d = 0.5): n per group for
    # alpha = 0.05, power 0.80. Values from memory.
    assert anova_sample_size(effect_size_f=f, k=k, target_power=0.8).n == (n_expected,) * k


def test_sample_size_with_allocation_is_smallest_multiplier():
    means, sd, alloc = [0.0, 0.4, 0.8], 1.0, (2, 1, 1)
    res = anova_sample_size(means=means, sd=sd, allocation=alloc, target_power=0.8)
    m = res.multiplier
    assert res.n == tuple(m * a for a in alloc)

    def direct(mult):
        # Direct scipy.stats.ncf computation, weighted mean with weights n_i.
        n = mult * np.array(alloc)
        mu = np.array(means)
        mu_w = (n * mu).sum() / n.sum()
        lam = (n * (mu - mu_w) ** 2).sum() / sd**2
        d1, d2 = 2, n.sum() - 3
        return stats.ncf.sf(stats.f.isf(0.05, d1, d2), d1, d2, lam)

    assert direct(m) >= 0.8 > direct(m - 1)
    np.testing.assert_allclose(res.power, direct(m), rtol=1e-10)
    np.testing.assert_allclose(res.power_one_less, direct(m - 1), rtol=1e-10)
