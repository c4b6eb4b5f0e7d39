"""One-way tests of equal group means: classic F, Welch, Brown-Forsythe and Kruskal-Wallis.

Every function takes k groups shaped ``(..., n_i)`` and returns a frozen result whose fields
have the batch shape ``(...)``. Sums of squares are formed from deviations about a pivot, so
data with many constant leading digits keep their accuracy, and adding a constant to every
value (for example an offset removed exactly when the data were read) changes nothing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ._core import InputError, Moments, as_groups, concat_groups, flag_cases, group_moments, scalarize

__all__ = [
    "BrownForsytheResult",
    "KruskalWallisResult",
    "OnewayResult",
    "WelchResult",
    "brown_forsythe_anova",
    "kruskal_wallis",
    "oneway_anova",
    "welch_anova",
]


def _full(batch: tuple[int, ...], value: float) -> np.ndarray:
    return np.full(batch, value, dtype=np.float64)


def _masked(x: np.ndarray, ok: np.ndarray) -> np.ndarray:
    """NaN where not computable; the value elsewhere."""
    return np.where(ok, x, np.nan)


def _safe(den: np.ndarray, ok: np.ndarray) -> np.ndarray:
    """A denominator with 1 where the result will be masked, so no warning is raised."""
    return np.where(ok, den, 1.0)


# --------------------------------------------------------------------------- classic F


@dataclass(frozen=True, slots=True, kw_only=True)
class OnewayResult:
    """Classic one-way analysis of variance (equal variances assumed).

    ``statistic`` and ``pvalue`` are NaN only where ``computable`` is False; ``r_squared`` is
    NaN only where all values are equal. Sums of squares, mean squares, degrees of freedom
    and ``residual_sd`` are always finite.
    """

    statistic: np.ndarray
    pvalue: np.ndarray
    df_between: np.ndarray
    df_within: np.ndarray
    ss_between: np.ndarray
    ss_within: np.ndarray
    ms_between: np.ndarray
    ms_within: np.ndarray
    r_squared: np.ndarray
    residual_sd: np.ndarray
    n_groups: int
    n_total: int
    computable: np.ndarray
    reason: np.ndarray


def _validate_classic(groups, name: str):
    arrays, batch = as_groups(groups, min_groups=2, min_n=1, name=name)
    n_total = sum(a.shape[-1] for a in arrays)
    if n_total - len(arrays) < 1:
        raise InputError(
            f"{name} needs more values than groups (within-group degrees of freedom N - k >= 1);"
            f" got N = {n_total} values in k = {len(arrays)} groups"
        )
    return arrays, batch


def _statistic_oneway(mom: Moments) -> dict[str, np.ndarray]:
    """Sums of squares of the one-way layout from stable group moments.

    The grand mean is the n-weighted mean of the group means, all taken as deviations from
    one pivot; ss_between = sum n_i (mean_i - grand)^2 and ss_within = sum of the centred
    within-group sums of squares (the one-way decomposition ss_total = ss_between +
    ss_within; Fisher 1925, Scheffe 1959).
    """
    n = mom.n
    k = n.shape[0]
    n_total = n.sum()
    _, cm = mom.deviations()
    grand = (n * cm).sum(axis=-1) / n_total
    ss_between = (n * (cm - grand[..., None]) ** 2).sum(axis=-1)
    ss_within = mom.ss.sum(axis=-1)
    df_b = float(k - 1)
    df_w = float(n_total - k)
    return {
        "ss_between": ss_between,
        "ss_within": ss_within,
        "df_between": df_b,
        "df_within": df_w,
        "ms_between": ss_between / df_b,
        "ms_within": ss_within / df_w,
    }


def _pvalue_f(stat: np.ndarray, df1, df2, ok: np.ndarray) -> np.ndarray:
    # Upper tail of the F(df1, df2) distribution (regularised incomplete beta, scipy.special).
    p = special.fdtrc(df1, df2, np.where(ok, stat, 0.0))
    return np.clip(p, 0.0, 1.0)


def _pvalue_chi2(stat: np.ndarray, df, ok: np.ndarray) -> np.ndarray:
    # Upper tail of the chi-squared(df) distribution (scipy.special.chdtrc).
    p = special.chdtrc(df, np.where(ok, stat, 0.0))
    return np.clip(p, 0.0, 1.0)


def _oneway_from_moments(mom: Moments, batch: tuple[int, ...]) -> OnewayResult:
    s = _statistic_oneway(mom)
    ss_b, ss_w = s["ss_between"], s["ss_within"]
    computable, reason = flag_cases(
        batch,
        (
            ss_w == 0.0,
            "every group has zero spread, so the within-group variance is zero and the F ratio"
            " is undefined",
        ),
    )
    stat = s["ms_between"] / _safe(s["ms_within"], computable)
    ss_total = ss_b + ss_w
    has_total = ss_total > 0.0
    r2 = np.where(has_total, ss_b / np.where(has_total, ss_total, 1.0), np.nan)
    return OnewayResult(
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_f(stat, s["df_between"], s["df_within"], computable), computable)),
        df_between=scalarize(_full(batch, s["df_between"])),
        df_within=scalarize(_full(batch, s["df_within"])),
        ss_between=scalarize(ss_b),
        ss_within=scalarize(ss_w),
        ms_between=scalarize(s["ms_between"]),
        ms_within=scalarize(s["ms_within"]),
        r_squared=scalarize(r2),
        residual_sd=scalarize(np.sqrt(s["ms_within"])),
        n_groups=int(mom.n.shape[0]),
        n_total=int(mom.n.sum()),
        computable=scalarize(computable),
        reason=scalarize(reason),
    )


def oneway_anova(*groups) -> OnewayResult:
    """Classic one-way analysis of variance F test of equal group means.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``
        The k >= 2 groups; leading axes are a batch and must broadcast.

    Returns
    -------
    OnewayResult
        ``statistic`` (F), ``pvalue``, degrees of freedom, sums of squares, mean squares,
        ``r_squared`` (ss_between / ss_total) and ``residual_sd`` (sqrt of ms_within), each
        of the batch shape, with ``computable`` and ``reason``.

    Notes
    -----
    Assumptions: independent observations; normal errors; equal variances in all groups.
    Needs N - k >= 1. Where every group has zero spread the F ratio is undefined and the
    element is marked not computable.

    The sums are centred: group means and the grand mean are formed as deviations from a
    common pivot, and within-group sums of squares from deviations about each group's mean
    with a rounding correction. The result is therefore unchanged (to rounding) by adding a
    constant to all values; a caller that removes a common offset exactly (from decimal
    text) recovers digits that binary parsing of the raw values would lose.

    References
    ----------
    .. [1] Fisher, R. A. (1925). Statistical Methods for Research Workers. Oliver & Boyd.
    .. [2] Scheffe, H. (1959). The Analysis of Variance. Wiley.
    .. [3] Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the
           sample variance. The American Statistician 37, 242-247.
    """
    arrays, batch = _validate_classic(groups, "the one-way analysis of variance")
    return _oneway_from_moments(group_moments(arrays), batch)


# --------------------------------------------------------------------------- Welch


@dataclass(frozen=True, slots=True, kw_only=True)
class WelchResult:
    """Welch's heteroscedastic one-way test of equal means."""

    statistic: np.ndarray
    pvalue: np.ndarray
    df1: np.ndarray
    df2: np.ndarray
    computable: np.ndarray
    reason: np.ndarray


def _validate_unequal(groups, name: str):
    return as_groups(groups, min_groups=2, min_n=2, name=name)


def _statistic_welch(mom: Moments, ok: np.ndarray) -> tuple[np.ndarray, float, np.ndarray]:
    """Welch's F with its degrees of freedom; elements where ``ok`` is False get stand-ins."""
    n = mom.n
    k = float(n.shape[0])
    var = np.where(ok[..., None], mom.var, 1.0)
    _, cm = mom.deviations()
    # Welch (1951): w_i = n_i / s_i^2, weighted mean, A / B with B the small-sample correction,
    # df2 = (k^2 - 1) / (3 * sum (1 - w_i/W)^2 / (n_i - 1)).
    w = n / var
    w_sum = w.sum(axis=-1)
    mean_w = (w * cm).sum(axis=-1) / w_sum
    a = (w * (cm - mean_w[..., None]) ** 2).sum(axis=-1) / (k - 1.0)
    lam = ((1.0 - w / w_sum[..., None]) ** 2 / (n - 1.0)).sum(axis=-1)
    b = 1.0 + 2.0 * (k - 2.0) / (k * k - 1.0) * lam
    return a / b, k - 1.0, (k * k - 1.0) / (3.0 * lam)


def welch_anova(*groups) -> WelchResult:
    """Welch's (1951) one-way test of equal means without assuming equal variances.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)`` with n_i >= 2

    Returns
    -------
    WelchResult
        ``statistic``, ``pvalue``, ``df1`` (= k - 1) and ``df2`` (fractional), batch-shaped.

    Notes
    -----
    Assumptions: independent observations; normal errors within each group; variances may
    differ. Weights are w_i = n_i / s_i^2, so a group with zero variance makes the element not
    computable. For two groups the statistic equals the square of Welch's t.

    References
    ----------
    .. [1] Welch, B. L. (1951). On the comparison of several mean values: an alternative
           approach. Biometrika 38, 330-336.
    """
    arrays, batch = _validate_unequal(groups, "Welch's test")
    mom = group_moments(arrays)
    computable, reason = flag_cases(
        batch,
        (
            np.any(mom.var == 0.0, axis=-1),
            "a group has zero variance, so Welch's weights n_i / s_i^2 are undefined",
        ),
    )
    stat, df1, df2 = _statistic_welch(mom, computable)
    return WelchResult(
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_f(stat, df1, df2, computable), computable)),
        df1=scalarize(_full(batch, df1)),
        df2=scalarize(_masked(df2, computable)),
        computable=scalarize(computable),
        reason=scalarize(reason),
    )


# --------------------------------------------------------------------------- Brown-Forsythe


@dataclass(frozen=True, slots=True, kw_only=True)
class BrownForsytheResult:
    """Brown & Forsythe's (1974) test of equal *means* under unequal variances.

    ``pvalue`` uses the 1974 degrees of freedom (df1 = k - 1, Satterthwaite df2);
    ``pvalue_mehrotra`` uses Mehrotra's (1997) corrected numerator degrees of freedom
    ``df1_mehrotra`` with the same df2.
    """

    statistic: np.ndarray
    pvalue: np.ndarray
    df1: np.ndarray
    df2: np.ndarray
    df1_mehrotra: np.ndarray
    pvalue_mehrotra: np.ndarray
    computable: np.ndarray
    reason: np.ndarray


def _statistic_brown_forsythe(mom: Moments, ok: np.ndarray):
    """F*, df1 = k - 1, Satterthwaite df2 and Mehrotra's df1; stand-ins where not ``ok``."""
    n = mom.n
    k = float(n.shape[0])
    n_total = n.sum()
    var = mom.var
    ss_between = _statistic_oneway(mom)["ss_between"]
    # Brown & Forsythe (1974): F* = ss_between / sum (1 - n_i/N) s_i^2.
    c = _safe(((1.0 - n / n_total) * var).sum(axis=-1), ok)
    stat = ss_between / c
    # Satterthwaite df: 1/f = sum f_i^2 / (n_i - 1), f_i = (1 - n_i/N) s_i^2 / c.
    f_i = (1.0 - n / n_total) * var / c[..., None]
    df2 = 1.0 / _safe((f_i**2 / (n - 1.0)).sum(axis=-1), ok)
    # Mehrotra (1997): df1 = c^2 / (sum s_i^4 + (sum n_i s_i^2 / N)^2 - 2 sum n_i s_i^4 / N).
    den1 = (var**2).sum(axis=-1) + ((n / n_total) * var).sum(axis=-1) ** 2 - 2.0 * (
        (n / n_total) * var**2
    ).sum(axis=-1)
    df1_m = c**2 / _safe(den1, ok)
    return stat, k - 1.0, df2, df1_m


def brown_forsythe_anova(*groups) -> BrownForsytheResult:
    """Brown & Forsythe's (1974) F* test of equal means (not their test of variances).

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)`` with n_i >= 2

    Returns
    -------
    BrownForsytheResult

    Notes
    -----
    F* = sum n_i (mean_i - grand)^2 / sum (1 - n_i / N) s_i^2. The numerator is the classic
    between-group sum of squares; the denominator weights each group's variance by its share
    of the data, so F* does not assume equal variances. The reference distribution is
    F(k - 1, f) with f from Satterthwaite's approximation. Assumptions: independent
    observations; normal errors within each group. Not computable where every group has zero
    variance.

    References
    ----------
    .. [1] Brown, M. B. & Forsythe, A. B. (1974). The small sample behavior of some statistics
           which test the equality of several means. Technometrics 16, 129-132.
    .. [2] Mehrotra, D. V. (1997). Improving the Brown-Forsythe solution to the generalized
           Behrens-Fisher problem. Communications in Statistics - Simulation and Computation
           26, 1139-1145.
    """
    arrays, batch = _validate_unequal(groups, "the Brown-Forsythe test of means")
    mom = group_moments(arrays)
    computable, reason = flag_cases(
        batch,
        (
            np.all(mom.var == 0.0, axis=-1),
            "every group has zero variance, so the Brown-Forsythe denominator is zero",
        ),
    )
    stat, df1, df2, df1_m = _statistic_brown_forsythe(mom, computable)
    return BrownForsytheResult(
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_f(stat, df1, df2, computable), computable)),
        df1=scalarize(_full(batch, df1)),
        df2=scalarize(_masked(df2, computable)),
        df1_mehrotra=scalarize(_masked(df1_m, computable)),
        pvalue_mehrotra=scalarize(_masked(_pvalue_f(stat, df1_m, df2, computable), computable)),
        computable=scalarize(computable),
        reason=scalarize(reason),
    )


# --------------------------------------------------------------------------- Kruskal-Wallis


@dataclass(frozen=True, slots=True, kw_only=True)
class KruskalWallisResult:
    """Kruskal-Wallis rank test, tie-corrected; ``mean_rank`` is shaped ``(..., k)``."""

    statistic: np.ndarray
    pvalue: np.ndarray
    df: np.ndarray
    mean_rank: np.ndarray
    computable: np.ndarray
    reason: np.ndarray


def _statistic_kruskal(arrays):
    """H, df, mean ranks and the total sum of squares of the ranks (0 where all tie)."""
    from scipy.stats import rankdata

    values, bounds = concat_groups(arrays)
    n_total = values.shape[-1]
    ranks = rankdata(values, axis=-1)  # mid-ranks for ties, per batch element
    n = np.diff(bounds).astype(np.float64)
    centre = (n_total + 1) / 2.0
    mean_rank = np.stack(
        [ranks[..., bounds[i] : bounds[i + 1]].mean(axis=-1) for i in range(len(arrays))], axis=-1
    )
    ss_total = ((ranks - centre) ** 2).sum(axis=-1)
    ss_between = (n * (mean_rank - centre) ** 2).sum(axis=-1)
    # Kruskal & Wallis (1952), tie-corrected H in its one-way-on-ranks form:
    # H = (N - 1) * ss_between(ranks) / ss_total(ranks).
    ok = ss_total > 0.0
    stat = (n_total - 1.0) * ss_between / _safe(ss_total, ok)
    return stat, float(len(arrays) - 1), mean_rank, ss_total


def kruskal_wallis(*groups) -> KruskalWallisResult:
    """Kruskal-Wallis H test that all groups come from one distribution (tie-corrected).

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``

    Returns
    -------
    KruskalWallisResult
        ``statistic`` (H), ``pvalue`` from chi-squared(k - 1), ``df`` and per-group
        ``mean_rank``.

    Notes
    -----
    Ranks (mid-ranks for ties) are taken over all N values of each batch element. H is
    computed as (N - 1) * sum n_i (Rbar_i - Rbar)^2 / sum (R - Rbar)^2, the one-way layout
    on the ranks; this form already contains the usual tie correction. The chi-squared
    reference distribution is a large-sample approximation. Assumptions: independent
    observations; it compares locations when the group distributions have the same shape.
    Not computable where all values are equal.

    References
    ----------
    .. [1] Kruskal, W. H. & Wallis, W. A. (1952). Use of ranks in one-criterion variance
           analysis. Journal of the American Statistical Association 47, 583-621.
    """
    arrays, batch = as_groups(groups, min_groups=2, min_n=1, name="the Kruskal-Wallis test")
    stat, df, mean_rank, ss_total = _statistic_kruskal(arrays)
    computable, reason = flag_cases(
        batch, (ss_total == 0.0, "all values are equal, so the ranks carry no information")
    )
    return KruskalWallisResult(
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_chi2(stat, df, computable), computable)),
        df=scalarize(_full(batch, df)),
        mean_rank=scalarize(mean_rank),
        computable=scalarize(computable),
        reason=scalarize(reason),
    )
