"""Normality check of a one-way layout: Shapiro-Wilk on the pooled within-group residuals."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._core import as_groups, flag_cases, scalarize
from .summary import residuals

__all__ = ["ShapiroResult", "shapiro_wilk"]

_MAX_N = 5000


@dataclass(frozen=True, slots=True, kw_only=True)
class ShapiroResult:
    """Shapiro-Wilk W of the pooled residuals; ``n`` residuals with ``df_residual`` = N - k."""

    statistic: np.ndarray
    pvalue: np.ndarray
    n: int
    df_residual: int
    computable: np.ndarray
    reason: np.ndarray


def shapiro_wilk(*groups) -> ShapiroResult:
    """Shapiro-Wilk test of normality applied to the residuals from the group means.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``
        One or more groups; leading axes are a batch.

    Returns
    -------
    ShapiroResult

    Notes
    -----
    The residuals x_ij - mean_i of all groups are pooled and tested as one sample, which
    checks the normal-errors assumption of the one-way model. The N residuals are not
    independent: they satisfy k linear constraints (they sum to zero in each group), so they
    carry N - k degrees of freedom. The test treats them as N independent values, which is
    the usual practice and is close when the groups are not tiny; with very small groups
    the test is somewhat conservative. ``df_residual`` records N - k for the report.

    Not computable: fewer than 3 residuals; more than 5000 (the p-value approximation of
    Royston 1995 used by scipy is not validated beyond that); residuals with zero range
    (every group constant).

    References
    ----------
    .. [1] Shapiro, S. S. & Wilk, M. B. (1965). An analysis of variance test for normality
           (complete samples). Biometrika 52, 591-611.
    .. [2] Royston, P. (1995). Remark AS R94: A remark on algorithm AS 181: The W-test for
           normality. Applied Statistics 44, 547-551.
    """
    from scipy.stats import shapiro

    arrays, batch = as_groups(groups, min_groups=1, min_n=1, name="the Shapiro-Wilk check")
    res = residuals(*arrays)
    n_total = res.shape[-1]
    k = len(arrays)
    flat = np.all(res == res[..., :1], axis=-1)
    computable, reason = flag_cases(
        batch,
        (n_total < 3, f"Shapiro-Wilk needs at least 3 residuals; there are {n_total}"),
        (
            n_total > _MAX_N,
            f"Shapiro-Wilk p-values are not validated beyond {_MAX_N} residuals; there are"
            f" {n_total}",
        ),
        (flat, "the residuals are all equal (every group is constant), so W is undefined"),
    )
    stat = np.full(batch, np.nan)
    pval = np.full(batch, np.nan)
    if np.any(computable):
        sub = res[computable] if batch else res
        out = shapiro(sub, axis=-1)
        stat[computable] = out.statistic
        pval[computable] = np.clip(out.pvalue, 0.0, 1.0)
    return ShapiroResult(
        statistic=scalarize(stat),
        pvalue=scalarize(pval),
        n=int(n_total),
        df_residual=int(n_total - k),
        computable=scalarize(computable),
        reason=scalarize(reason),
    )
