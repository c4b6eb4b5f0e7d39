"""Follow-up comparisons checked against reference libraries and published tables.

Sources, named beside each check:
- scipy.stats.tukey_hsd (equal_var=True: Tukey-Kramer; equal_var=False: Games-Howell);
  its ``statistic[i, j]`` is ``mean_i - mean_j``, the same sign as ours for pair (i, j).
- statsmodels.stats.multicomp (pairwise_tukeyhsd, MultiComparison.tukeyhsd); its
  ``meandiffs`` are ``mean_b - mean_a`` for pair (a, b): the opposite sign of ours.
- scipy.stats.dunnett (p-values by randomised quasi-Monte Carlo: rng pinned, compared within
  1e-3) and Dunnett (1955), JASA 50, Tables 1a/1b/2a/2b.
- scipy.stats.ttest_ind and statsmodels.stats.multitest.multipletests (method always named).
Real data: PlantGrowth (Dobson 1983), InsectSprays (Beall 1942), poisons (Box & Cox 1964),
copied into tests/reference/data/open_datasets/.
"""

from __future__ import annotations

import csv
import inspect
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from planrunner.stats.comparisons import dunnett, games_howell, pairwise_t, tukey_kramer

DATA = Path(__file__).parent / "data"
# Accuracy asked of our Dunnett probabilities and critical values where an exact value is known
# (deterministic quadrature in planrunner.stats.distributions, about 1e-10 absolute).
DUNNETT_ATOL = 1e-9
DUNNETT_CRIT_ATOL = 1e-8


def _load(name: str, group: str, value: str) -> list[np.ndarray]:
    """Groups of one CSV in order of first appearance."""
    with open(DATA / "open_datasets" / name, newline="") as fh:
        rows = list(csv.DictReader(fh))
    levels = list(dict.fromkeys(r[group] for r in rows))
    return [np.array([float(r[value]) for r in rows if r[group] == lv]) for lv in levels]


def _datasets() -> dict[str, list[np.ndarray]]:
    plant = _load("PlantGrowth.csv", "group", "weight")
    insect = _load("InsectSprays.csv", "spray", "count")
    poisons = _load("poisons.csv", "poison", "time")
    # Unequal n from real data: drop the first few rows of some sprays.
    insect_unequal = [g[d:] for g, d in zip(insect, (0, 3, 0, 5, 2, 1))]
    rng = np.random.default_rng(20240611)
    random_unequal = [rng.normal(10.0 + 0.7 * i, 1.0 + 0.5 * i, n) for i, n in enumerate((5, 9, 6, 12, 7))]
    return {
        "PlantGrowth": plant,
        "InsectSprays": insect,
        "InsectSprays-unequal-n": insect_unequal,
        "poisons-by-poison": poisons,
        "random-unequal-n": random_unequal,
    }


DATASETS = _datasets()
NAMES = list(DATASETS)


def _pair_index(pairs):
    return np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs])


# ---------------------------------------------------------------------------------------------
# Tukey-Kramer
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", NAMES)
def test_tukey_kramer_matches_scipy_tukey_hsd(name):
    groups = DATASETS[name]
    res = tukey_kramer(*groups, confidence_level=0.95)
    ref = stats.tukey_hsd(*groups, equal_var=True)  # scipy.stats.tukey_hsd, Tukey-Kramer
    ci = ref.confidence_interval(confidence_level=0.95)
    a, b = _pair_index(res.pairs)
    assert res.pairs == tuple((i, j) for i in range(len(groups)) for j in range(i + 1, len(groups)))
    # Sign: scipy's statistic[i, j] is mean_i - mean_j, ours is mean_a - mean_b.
    np.testing.assert_allclose(res.difference, ref.statistic[a, b], rtol=1e-13, atol=1e-13)
    np.testing.assert_allclose(res.pvalue_adjusted, ref.pvalue[a, b], rtol=0, atol=1e-9)
    np.testing.assert_allclose(res.ci_low, ci.low[a, b], rtol=1e-8)
    np.testing.assert_allclose(res.ci_high, ci.high[a, b], rtol=1e-8)
    assert res.computable.all() and (res.reason == "").all()
    assert res.method == "tukey_kramer" and res.adjust is None


@pytest.mark.parametrize("name", ["PlantGrowth", "InsectSprays-unequal-n", "random-unequal-n"])
def test_tukey_kramer_matches_statsmodels_pairwise_tukeyhsd(name):
    from statsmodels.stats.multicomp import pairwise_tukeyhsd

    groups = DATASETS[name]
    # Labels that sort in our group order, so statsmodels' pairs are in our order.
    labels = np.repeat([f"g{i:02d}" for i in range(len(groups))], [g.size for g in groups])
    ref = pairwise_tukeyhsd(np.concatenate(groups), labels, alpha=0.05)
    res = tukey_kramer(*groups, confidence_level=0.95)
    # statsmodels: meandiff = mean_b - mean_a, so it is minus our difference and its interval
    # is ours reflected.
    np.testing.assert_allclose(ref.meandiffs, -res.difference, rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(ref.confint[:, 0], -res.ci_high, rtol=1e-8)
    np.testing.assert_allclose(ref.confint[:, 1], -res.ci_low, rtol=1e-8)
    np.testing.assert_allclose(ref.pvalues, res.pvalue_adjusted, rtol=0, atol=1e-9)
    # statsmodels' std_pairs is se / sqrt(2) (the studentized-range scale).
    np.testing.assert_allclose(ref.std_pairs * np.sqrt(2.0), res.se, rtol=1e-12)


def test_tukey_kramer_two_groups_is_the_pooled_t_test():
    # Independent cross-check: with k = 2, P(Q_2 > sqrt(2)|t|) = P(|T| > |t|); scipy.stats.ttest_ind.
    g = DATASETS["PlantGrowth"]
    res = tukey_kramer(g[0], g[2])
    ref = stats.ttest_ind(g[0], g[2], equal_var=True)
    np.testing.assert_allclose(res.statistic[0], ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue_adjusted[0], ref.pvalue, rtol=1e-7)
    ci = ref.confidence_interval(confidence_level=0.95)
    np.testing.assert_allclose([res.ci_low[0], res.ci_high[0]], [ci.low, ci.high], rtol=1e-7)


def test_tukey_kramer_plantgrowth_sign_convention():
    # PlantGrowth group means ctrl 5.032, trt1 4.661, trt2 5.526 (Dobson 1983; from memory,
    # and equal to the means of the stored data): pair (1, 2) reports trt1 - trt2.
    res = tukey_kramer(*DATASETS["PlantGrowth"])
    assert res.pairs == ((0, 1), (0, 2), (1, 2))
    np.testing.assert_allclose(
        res.difference, [5.032 - 4.661, 5.032 - 5.526, 4.661 - 5.526], rtol=0, atol=1e-12
    )


# ---------------------------------------------------------------------------------------------
# Games-Howell
# ---------------------------------------------------------------------------------------------


def test_scipy_tukey_hsd_supports_unequal_variances():
    # The Games-Howell references below need scipy.stats.tukey_hsd(equal_var=False).
    assert "equal_var" in inspect.signature(stats.tukey_hsd).parameters


@pytest.mark.parametrize("name", ["InsectSprays", "poisons-by-poison", "random-unequal-n"])
def test_games_howell_matches_scipy_tukey_hsd_unequal_var(name):
    groups = DATASETS[name]
    res = games_howell(*groups, confidence_level=0.95)
    ref = stats.tukey_hsd(*groups, equal_var=False)  # scipy.stats.tukey_hsd, Games-Howell
    ci = ref.confidence_interval(confidence_level=0.95)
    a, b = _pair_index(res.pairs)
    np.testing.assert_allclose(res.difference, ref.statistic[a, b], rtol=1e-13, atol=1e-13)
    np.testing.assert_allclose(res.pvalue_adjusted, ref.pvalue[a, b], rtol=0, atol=1e-9)
    np.testing.assert_allclose(res.ci_low, ci.low[a, b], rtol=1e-8)
    np.testing.assert_allclose(res.ci_high, ci.high[a, b], rtol=1e-8)


@pytest.mark.parametrize("name", ["poisons-by-poison", "random-unequal-n"])
def test_games_howell_matches_statsmodels_unequal_var(name):
    from statsmodels.stats.multicomp import MultiComparison

    groups = DATASETS[name]
    labels = np.repeat([f"g{i:02d}" for i in range(len(groups))], [g.size for g in groups])
    ref = MultiComparison(np.concatenate(groups), labels).tukeyhsd(alpha=0.05, use_var="unequal")
    res = games_howell(*groups)
    # statsmodels MultiComparison.tukeyhsd(use_var="unequal"): meandiff = mean_b - mean_a;
    # df_total holds the per-pair Welch-Satterthwaite degrees of freedom.
    np.testing.assert_allclose(ref.meandiffs, -res.difference, rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(ref.df_total, res.df, rtol=1e-12)
    np.testing.assert_allclose(ref.pvalues, res.pvalue_adjusted, rtol=0, atol=1e-9)
    np.testing.assert_allclose(ref.confint[:, 0], -res.ci_high, rtol=1e-8)


def test_games_howell_two_groups_is_welch_t_test():
    # Independent cross-check: k = 2 Games-Howell is Welch's t test; scipy.stats.ttest_ind.
    g = DATASETS["poisons-by-poison"]
    res = games_howell(g[0], g[2])
    ref = stats.ttest_ind(g[0], g[2], equal_var=False)
    np.testing.assert_allclose(res.statistic[0], ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.df[0], ref.df, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue_adjusted[0], ref.pvalue, rtol=1e-7)


# ---------------------------------------------------------------------------------------------
# Dunnett
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "name, control, alternative",
    [
        ("PlantGrowth", 0, "two-sided"),
        ("InsectSprays-unequal-n", 2, "two-sided"),
        ("random-unequal-n", 1, "greater"),
        ("random-unequal-n", 4, "less"),
    ],
)
def test_dunnett_matches_scipy_dunnett(name, control, alternative):
    groups = DATASETS[name]
    res = dunnett(*groups, control=control, alternative=alternative)
    others = [g for i, g in enumerate(groups) if i != control]
    # scipy.stats.dunnett: randomised quasi-Monte Carlo p-values; rng pinned for repeatability.
    ref = stats.dunnett(*others, control=groups[control], alternative=alternative, rng=12345)
    assert res.pairs == tuple((i, control) for i in range(len(groups)) if i != control)
    means = np.array([g.mean() for g in groups])
    # Sign: treatment minus control, as scipy's statistic.
    treated = [i for i, _ in res.pairs]
    np.testing.assert_allclose(res.difference, means[treated] - means[control], rtol=1e-12)
    np.testing.assert_allclose(res.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue_adjusted, ref.pvalue, rtol=0, atol=1e-3)
    ci = ref.confidence_interval(confidence_level=0.95)
    # scipy finds its critical value with a noisy minimiser (tol 1e-3 in alpha): compare the
    # implied multiplier within 5e-3.
    if alternative != "less":
        np.testing.assert_allclose(
            (res.difference - ci.low) / res.se, res.critical_value, rtol=0, atol=5e-3
        )
        assert np.all(np.isposinf(res.ci_high)) == (alternative == "greater")
    if alternative != "greater":
        np.testing.assert_allclose(
            (ci.high - res.difference) / res.se, res.critical_value, rtol=0, atol=5e-3
        )
        assert np.all(np.isneginf(res.ci_low)) == (alternative == "less")


def test_dunnett_two_groups_is_the_pooled_t_test():
    # Independent cross-check: one treatment against the control is the pooled t test
    # (scipy.stats.ttest_ind); its critical value is the t quantile (scipy.stats.t.ppf).
    g = DATASETS["PlantGrowth"]
    res = dunnett(g[0], g[1], control=1)
    ref = stats.ttest_ind(g[0], g[1], equal_var=True)
    np.testing.assert_allclose(res.statistic[0], ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.pvalue_adjusted[0], ref.pvalue, rtol=0, atol=DUNNETT_ATOL)
    np.testing.assert_allclose(res.critical_value[0], stats.t.ppf(0.975, 18), atol=DUNNETT_CRIT_ATOL)


def _table_rows():
    with open(DATA / "dunnett" / "dunnett1955_critical_values.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    out = []
    for r in rows:
        p, df = int(r["n_treatments_excl_control"]), int(r["df_error"])
        k = p + 1
        if df % k == 0:  # equal allocation (rho = 0.5) needs N - k = df with N = k n
            out.append((p, df, float(r["alpha"]), r["sidedness"], float(r["d_crit"])))
    return out


@pytest.mark.parametrize("p, df, alpha, sidedness, d_crit", _table_rows())
def test_dunnett_critical_values_match_dunnett_1955(p, df, alpha, sidedness, d_crit):
    k = p + 1
    n = df // k + 1
    rng = np.random.default_rng(p * 1000 + df)
    groups = [rng.normal(size=n) for _ in range(k)]
    alt = "two-sided" if sidedness == "two-sided" else "greater"
    res = dunnett(*groups, control=0, alternative=alt, confidence_level=1.0 - alpha)
    crit = res.critical_value[0]
    if sidedness == "two-sided" and p >= 3:
        # Dunnett (1955) Tables 2a/2b: the two-sided cells for 3+ treatments are known to be
        # conservative (exact alpha about 0.045-0.047 at the tabled 0.05 points), so the exact
        # critical value lies below the table, by at most about 0.1.
        assert d_crit - 0.1 <= crit <= d_crit + 0.006
    else:
        # Dunnett (1955) Tables 1a/1b/2a/2b, printed to two decimals.
        assert crit == pytest.approx(d_crit, abs=0.006)


def test_dunnett_interval_excludes_zero_exactly_when_p_below_alpha():
    # Duality of the single-step test and its simultaneous intervals (Dunnett 1955, sec. 2):
    # p_adjusted <= alpha  <=>  |t| >= c_alpha  <=>  the interval excludes zero.
    rng = np.random.default_rng(7)
    groups = [rng.normal(0.0, 1.0, (60, n)) + d for n, d in zip((6, 5, 7, 6), (0.0, 0.6, 1.0, 1.4))]
    res = dunnett(*groups, control=0, confidence_level=0.95)
    excludes = (res.ci_low > 0) | (res.ci_high < 0)
    clear = np.abs(res.pvalue_adjusted - 0.05) > 1e-9  # away from the boundary (p accuracy)
    assert clear.sum() > 100 and excludes[clear].any() and (~excludes[clear]).any()
    np.testing.assert_array_equal(excludes[clear], res.pvalue_adjusted[clear] <= 0.05)
    np.testing.assert_array_equal(
        excludes[clear], np.abs(res.statistic[clear]) >= res.critical_value[clear]
    )


# ---------------------------------------------------------------------------------------------
# Pairwise t tests with a named adjustment
# ---------------------------------------------------------------------------------------------


def _pooled_reference(groups):
    """Raw pooled-variance t tests from scipy.stats.ttest_ind, rescaled to the all-group MSw."""
    k = len(groups)
    n = np.array([g.size for g in groups])
    df = n.sum() - k
    msw = sum(((g - g.mean()) ** 2).sum() for g in groups) / df
    t, p, se = [], [], []
    for a in range(k):
        for b in range(a + 1, k):
            two = stats.ttest_ind(groups[a], groups[b], equal_var=True)  # scipy.stats.ttest_ind
            ss_a = ((groups[a] - groups[a].mean()) ** 2).sum()
            ss_b = ((groups[b] - groups[b].mean()) ** 2).sum()
            s2_pair = (ss_a + ss_b) / (n[a] + n[b] - 2)
            tt = two.statistic * np.sqrt(s2_pair / msw)  # same difference, all-group variance
            t.append(tt)
            p.append(2 * stats.t.sf(abs(tt), df))
            se.append(np.sqrt(msw * (1 / n[a] + 1 / n[b])))
    return np.array(t), np.array(p), np.array(se), df


@pytest.mark.parametrize("name", ["PlantGrowth", "InsectSprays-unequal-n", "random-unequal-n"])
@pytest.mark.parametrize("adjust", ["bonferroni", "holm", "sidak"])
def test_pairwise_t_matches_ttest_ind_and_multipletests(name, adjust):
    from statsmodels.stats.multitest import multipletests

    groups = DATASETS[name]
    res = pairwise_t(*groups, adjust=adjust, confidence_level=0.95)
    t, p_raw, se, df = _pooled_reference(groups)
    np.testing.assert_allclose(res.statistic, t, rtol=1e-11)
    np.testing.assert_allclose(res.se, se, rtol=1e-12)
    np.testing.assert_allclose(res.df, df)
    # statsmodels.stats.multitest.multipletests, method named explicitly (its default is
    # Holm-Sidak, which is not what "holm" means here).
    _, p_adj, _, _ = multipletests(p_raw, alpha=0.05, method=adjust)
    np.testing.assert_allclose(res.pvalue_adjusted, p_adj, rtol=1e-10, atol=1e-14)
    m = len(res.pairs)
    alpha_each = 1 - 0.95 ** (1 / m) if adjust == "sidak" else 0.05 / m
    half = stats.t.ppf(1 - alpha_each / 2, df) * se  # scipy.stats.t quantile
    np.testing.assert_allclose(res.ci_low, res.difference - half, rtol=1e-10)
    np.testing.assert_allclose(res.ci_high, res.difference + half, rtol=1e-10)
    assert res.adjust == adjust
    if adjust == "holm":
        assert "Bonferroni-level" in res.interval and "Holm" in res.interval


def test_pairwise_t_holm_is_not_holm_sidak():
    # statsmodels multipletests: "holm" and "holm-sidak" differ; ours must equal "holm".
    from statsmodels.stats.multitest import multipletests

    groups = DATASETS["InsectSprays"]
    res = pairwise_t(*groups, adjust="holm")
    _, p_raw, _, _ = _pooled_reference(groups)
    holm = multipletests(p_raw, method="holm")[1]
    holm_sidak = multipletests(p_raw, method="holm-sidak")[1]
    assert not np.allclose(holm, holm_sidak, rtol=1e-6)
    np.testing.assert_allclose(res.pvalue_adjusted, holm, rtol=1e-10, atol=1e-14)


def test_pairwise_t_two_groups_is_ttest_ind_with_its_interval():
    # k = 2: one comparison, no adjustment; scipy.stats.ttest_ind and its confidence_interval.
    g = DATASETS["InsectSprays"]
    ref = stats.ttest_ind(g[0], g[3], equal_var=True)
    ci = ref.confidence_interval(confidence_level=0.9)
    for adjust in ("bonferroni", "holm", "sidak"):
        res = pairwise_t(g[0], g[3], adjust=adjust, confidence_level=0.9)
        np.testing.assert_allclose(res.pvalue_adjusted[0], ref.pvalue, rtol=1e-10)
        np.testing.assert_allclose([res.ci_low[0], res.ci_high[0]], [ci.low, ci.high], rtol=1e-10)


# ---------------------------------------------------------------------------------------------
# Batches (the code path of many endpoints / rehearsal replicates)
# ---------------------------------------------------------------------------------------------


def test_batched_games_howell_and_tukey_kramer_match_scipy_elementwise():
    # 80 endpoints x 3 groups: 240 distinct Welch df, enough that the Games-Howell critical
    # values take the interpolated path; scipy.stats.tukey_hsd checks a few endpoints.
    rng = np.random.default_rng(11)
    groups = [rng.normal(0.3 * i, 1.0 + 0.6 * i, (80, n)) for i, n in enumerate((6, 8, 7))]
    gh = games_howell(*groups)
    tk = tukey_kramer(*groups)
    a, b = _pair_index(gh.pairs)
    for e in (0, 17, 79):
        one = [g[e] for g in groups]
        for res, equal_var in ((gh, False), (tk, True)):
            ref = stats.tukey_hsd(*one, equal_var=equal_var)  # scipy.stats.tukey_hsd
            ci = ref.confidence_interval(confidence_level=0.95)
            np.testing.assert_allclose(res.pvalue_adjusted[e], ref.pvalue[a, b], rtol=0, atol=1e-9)
            np.testing.assert_allclose(res.ci_low[e], ci.low[a, b], rtol=1e-10)
            np.testing.assert_allclose(res.ci_high[e], ci.high[a, b], rtol=1e-10)
    # Critical values against scipy.stats.studentized_range.ppf at a few of the 240 df.
    for e, j in ((3, 0), (41, 2), (66, 1)):
        q = stats.studentized_range.ppf(0.95, 3, gh.df[e, j])
        assert gh.critical_value[e, j] == pytest.approx(q / np.sqrt(2.0), rel=1e-10)
