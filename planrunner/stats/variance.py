"""Tests of equal variances across groups: Levene / Brown-Forsythe, Bartlett, Fligner-Killeen.

All take k groups shaped ``(..., n_i)`` and return a :class:`VarianceTestResult` whose
fields have the batch shape. Hartley's Fmax lives in :mod:`planrunner.stats.hartley`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ._core import InputError, as_groups, concat_groups, flag_cases, group_moments, scalarize
from .anova import _full, _masked, _oneway_from_moments, _pvalue_chi2, _safe

__all__ = ["VarianceTestResult", "bartlett", "fligner_killeen", "levene"]

_CENTERS = ("median", "mean")


@dataclass(frozen=True, slots=True, kw_only=True)
class VarianceTestResult:
    """Result of a test of equal variances.

    ``distribution`` is ``"F"`` (Levene: degrees of freedom ``df``, ``df2``) or ``"chi2"``
    (Bartlett, Fligner-Killeen: ``df``; ``df2`` is None). ``center`` records the location
    the deviations were taken from (Bartlett always uses the group means).
    """

    method: str
    statistic: np.ndarray
    pvalue: np.ndarray
    df: np.ndarray
    df2: np.ndarray | None
    distribution: str
    center: str
    computable: np.ndarray
    reason: np.ndarray


def _validate_center(center: str) -> str:
    if center not in _CENTERS:
        import difflib

        close = difflib.get_close_matches(str(center), _CENTERS, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise InputError(f"center {center!r} is not allowed; use one of median, mean{hint}")
    return center


def _merge_near_ties(z: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """Make values that differ only by rounding exactly equal (along the last axis).

    Deviations that are mathematically equal, such as |x1 - m| and |x2 - m| for two values
    and their median, or |x - m_i| and |y - m_j| in two groups with means of the same
    fractional part, can differ in the last bits after rounding. Left alone, those bits
    would decide ranks (Fligner-Killeen) or turn a zero within-group spread into noise
    (Levene). Deterministic rule: after sorting, neighbours closer than 8 units in the last
    place of the data's largest magnitude join one run, and every member takes the run's
    smallest value.
    """
    n = z.shape[-1]
    tol = 8.0 * np.finfo(np.float64).eps * scale[..., None]
    order = np.argsort(z, axis=-1, kind="stable")
    s = np.take_along_axis(z, order, axis=-1)
    start = np.concatenate(
        [np.ones(s.shape[:-1] + (1,), dtype=bool), np.diff(s, axis=-1) > tol], axis=-1
    )
    run_start = np.maximum.accumulate(np.where(start, np.arange(n), 0), axis=-1)
    merged = np.take_along_axis(s, run_start, axis=-1)
    out = np.empty_like(z)
    np.put_along_axis(out, order, merged, axis=-1)
    return out


def _median(g: np.ndarray) -> np.ndarray:
    """Median along the last axis, keepdims (same values as np.median; sorting short rows is
    several times faster than np.median's partition for batches of small groups)."""
    s = np.sort(g, axis=-1)
    n = g.shape[-1]
    mid = s[..., n // 2] if n % 2 else 0.5 * (s[..., n // 2 - 1] + s[..., n // 2])
    return mid[..., None]


def _abs_deviations(
    arrays, center: str, *, merge_ties: bool
) -> tuple[list[np.ndarray], np.ndarray | None, np.ndarray | None]:
    """|x - centre_i| per group; returns (groups, concatenated, bounds).

    The concatenated values and bounds are returned only with ``merge_ties``.

    Rounding that separates mathematically equal deviations is removed: with
    ``merge_ties`` all near-ties are merged (needed for ranks, see ``_merge_near_ties``);
    otherwise only groups whose deviations are all equal up to rounding are made exactly
    constant (all that matters for Levene's sums of squares).
    """
    eps = np.finfo(np.float64).eps
    parts = []
    for g in arrays:
        if center == "median":
            z = np.abs(g - _median(g))
        else:
            d = g - g[..., :1]
            z = np.abs(d - d.mean(axis=-1, keepdims=True))
        if not merge_ties:
            # Same rule as _merge_near_ties, applied to whole groups: a span of at most 8 ulps
            # of the group's largest magnitude means "no spread".
            zmax = z.max(axis=-1, keepdims=True)
            tol = 8.0 * eps * np.abs(g).max(axis=-1, keepdims=True)
            z = np.where(zmax - z.min(axis=-1, keepdims=True) <= tol, zmax, z)
        parts.append(z)
    if not merge_ties:
        return parts, None, None
    z, bounds = concat_groups(parts)
    scale = np.max(np.abs(concat_groups(arrays)[0]), axis=-1)
    z = _merge_near_ties(z, scale)
    parts = [z[..., bounds[i] : bounds[i + 1]] for i in range(len(arrays))]
    return parts, z, bounds


def levene(*groups, center: str = "median") -> VarianceTestResult:
    """Levene's test of equal variances; with ``center="median"`` the Brown-Forsythe variant.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)`` with n_i >= 2
    center : {"median", "mean"}
        Location about which absolute deviations are taken. The median (Brown & Forsythe
        1974) is robust to skewed data; the mean is Levene's original (1960) choice.

    Returns
    -------
    VarianceTestResult
        W (the one-way F statistic of the absolute deviations), F(k - 1, N - k) p-value.

    Notes
    -----
    Assumptions: independent observations. The test is approximate; it does not need
    normality in the way Bartlett's test does. Not computable where the absolute deviations
    do not vary within any group (for example when every group has two values and the
    median is the centre, or no group has any spread). Absolute deviations that differ only
    by rounding are made exactly equal first, so such a group
    is recognised as having no spread instead of yielding a huge statistic from noise
    (rule: a group whose deviations span at most 8 units in the last place of its largest
    value).

    References
    ----------
    .. [1] Levene, H. (1960). Robust tests for equality of variances. In Contributions to
           Probability and Statistics (I. Olkin, ed.), Stanford University Press, 278-292.
    .. [2] Brown, M. B. & Forsythe, A. B. (1974). Robust tests for the equality of variances.
           Journal of the American Statistical Association 69, 364-367.
    """
    center = _validate_center(center)
    arrays, batch = as_groups(groups, min_groups=2, min_n=2, name="Levene's test")
    z, _, _ = _abs_deviations(arrays, center, merge_ties=False)
    # Levene (1960): W is the one-way ANOVA F of z_ij = |x_ij - centre_i|.
    res = _oneway_from_moments(group_moments(z), batch)
    ok = np.asarray(res.computable)
    _, reason = flag_cases(
        batch,
        (
            ~ok,
            f"the absolute deviations from the group {center}s do not vary within any group,"
            " so Levene's statistic is undefined",
        ),
    )
    return VarianceTestResult(
        method="levene",
        statistic=res.statistic,
        pvalue=res.pvalue,
        df=res.df_between,
        df2=res.df_within,
        distribution="F",
        center=center,
        computable=res.computable,
        reason=scalarize(reason),
    )


def bartlett(*groups) -> VarianceTestResult:
    """Bartlett's test of equal variances (normal theory).

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)`` with n_i >= 2

    Returns
    -------
    VarianceTestResult
        T with a chi-squared(k - 1) p-value.

    Notes
    -----
    Assumptions: independent observations; normal data within each group. The test is very
    sensitive to non-normality (heavy tails look like unequal variances). Not computable
    where any group has zero variance (its logarithm is undefined).

    References
    ----------
    .. [1] Bartlett, M. S. (1937). Properties of sufficiency and statistical tests.
           Proceedings of the Royal Society of London A 160, 268-282.
    """
    arrays, batch = as_groups(groups, min_groups=2, min_n=2, name="Bartlett's test")
    mom = group_moments(arrays)
    n = mom.n
    k = float(n.shape[0])
    n_total = n.sum()
    var = mom.var
    computable, reason = flag_cases(
        batch,
        (
            np.any(var == 0.0, axis=-1),
            "a group has zero variance, so Bartlett's statistic (which takes its logarithm) is"
            " undefined",
        ),
    )
    var_safe = np.where(computable[..., None], var, 1.0)
    pooled = (mom.ss.sum(axis=-1) / (n_total - k))
    pooled = np.where(computable, pooled, 1.0)
    # Bartlett (1937): T = sum (n_i - 1) ln(s_p^2 / s_i^2) / C, written scale-free,
    # C = 1 + (sum 1/(n_i - 1) - 1/(N - k)) / (3 (k - 1)).
    num = ((n - 1.0) * np.log(pooled[..., None] / var_safe)).sum(axis=-1)
    c = 1.0 + ((1.0 / (n - 1.0)).sum() - 1.0 / (n_total - k)) / (3.0 * (k - 1.0))
    stat = np.maximum(num / c, 0.0)  # T >= 0 exactly (Jensen); clip rounding below zero
    return VarianceTestResult(
        method="bartlett",
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_chi2(stat, k - 1.0, computable), computable)),
        df=scalarize(_full(batch, k - 1.0)),
        df2=None,
        distribution="chi2",
        center="mean",
        computable=scalarize(computable),
        reason=scalarize(reason),
    )


def fligner_killeen(*groups, center: str = "median") -> VarianceTestResult:
    """Fligner-Killeen test of equal variances (median-centred, normal scores of ranks).

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)`` with n_i >= 2
    center : {"median", "mean"}
        Location subtracted within each group before ranking absolute deviations.

    Returns
    -------
    VarianceTestResult
        X^2 with a chi-squared(k - 1) p-value.

    Notes
    -----
    The absolute deviations |x_ij - median_i| of all groups are ranked together (mid-ranks
    for ties); each rank r becomes the normal score a = Phi^{-1}(1/2 + r / (2 (N + 1))).
    X^2 = sum n_i (abar_i - abar)^2 / var(a), with the variance over all N scores (divisor
    N - 1). Deviations that are mathematically tied but differ by rounding are merged before
    ranking (``_merge_near_ties``), so ties are ranked as ties; libraries that rank the
    rounded values can differ in the third or fourth digit on data with such ties.
    Assumptions: independent observations; robust to non-normality. Not computable where all
    absolute deviations are equal.

    References
    ----------
    .. [1] Fligner, M. A. & Killeen, T. J. (1976). Distribution-free two-sample tests for
           scale. Journal of the American Statistical Association 71, 210-213.
    .. [2] Conover, W. J., Johnson, M. E. & Johnson, M. M. (1981). A comparative study of
           tests for homogeneity of variances. Technometrics 23, 351-361.
    """
    from scipy.stats import rankdata

    center = _validate_center(center)
    arrays, batch = as_groups(groups, min_groups=2, min_n=2, name="the Fligner-Killeen test")
    _, z, bounds = _abs_deviations(arrays, center, merge_ties=True)
    n_total = z.shape[-1]
    ranks = rankdata(z, axis=-1)
    # Conover, Johnson & Johnson (1981): normal scores Phi^{-1}(1/2 + r / (2(N + 1))).
    a = special.ndtri(0.5 + ranks / (2.0 * (n_total + 1.0)))
    n = np.diff(bounds).astype(np.float64)
    k = float(len(arrays))
    abar_i = np.stack(
        [a[..., bounds[i] : bounds[i + 1]].mean(axis=-1) for i in range(len(arrays))], axis=-1
    )
    abar = a.mean(axis=-1)
    var_a = ((a - abar[..., None]) ** 2).sum(axis=-1) / (n_total - 1.0)
    const = np.all(z == z[..., :1], axis=-1)
    computable, reason = flag_cases(
        batch,
        (
            const | (var_a == 0.0),
            "all absolute deviations are equal, so their ranks carry no information",
        ),
    )
    stat = (n * (abar_i - abar[..., None]) ** 2).sum(axis=-1) / _safe(var_a, computable)
    return VarianceTestResult(
        method="fligner_killeen",
        statistic=scalarize(_masked(stat, computable)),
        pvalue=scalarize(_masked(_pvalue_chi2(stat, k - 1.0, computable), computable)),
        df=scalarize(_full(batch, k - 1.0)),
        df2=None,
        distribution="chi2",
        center=center,
        computable=scalarize(computable),
        reason=scalarize(reason),
    )
