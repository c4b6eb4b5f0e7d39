"""Hartley's Fmax test of equal variances: the largest sample variance over the smallest.

The p-value and critical value come from the exact distribution of the ratio, integrated
numerically in :mod:`planrunner.stats.distributions` (no table look-up), for equal or unequal
group sizes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from ._core import InputError, as_groups, flag_cases, group_moments, scalarize
from .distributions import fmax_critical, fmax_sf

__all__ = ["FmaxResult", "hartley_fmax"]

_ZERO_VARIANCE = ("a group has zero variance, so the ratio of the largest to the smallest "
                  "variance is undefined")


@dataclass(frozen=True, slots=True, kw_only=True)
class FmaxResult:
    """Result of :func:`hartley_fmax`.

    Attributes
    ----------
    statistic : batch-shaped array
        ``max_i s_i**2 / min_i s_i**2`` (NaN where not computable).
    pvalue : batch-shaped array
        ``P(Fmax > statistic)`` under equal variances (NaN where not computable, and
        everywhere when the p-value was not asked for).
    critical_value : float
        Upper ``alpha`` point of Fmax for these degrees of freedom.
    alpha : float
        Level used for ``critical_value``.
    df : tuple of int
        Degrees of freedom ``n_i - 1`` of each group's variance, in group order.
    reference_df : tuple of int
        Degrees of freedom of the Fmax distribution used for ``pvalue`` and
        ``critical_value``: ``df`` itself (``unequal_n="exact"``) or the smallest of them for
        every group (``"smallest_group"``).
    unequal_n : str
        ``"exact"`` or ``"smallest_group"``.
    k : int
        Number of groups.
    computable : batch-shaped bool array
        False where the smallest variance is zero.
    reason : batch-shaped str array
        Why an element is not computable, in one sentence; ``""`` where computable.
    """

    statistic: np.ndarray
    pvalue: np.ndarray
    critical_value: float
    alpha: float
    df: tuple[int, ...]
    reference_df: tuple[int, ...]
    unequal_n: str
    k: int
    computable: np.ndarray
    reason: np.ndarray


def _validate_hartley(groups: tuple[object, ...], alpha: float) -> tuple[list[np.ndarray], tuple[int, ...]]:
    if not (0.0 < float(alpha) < 1.0):
        raise InputError(f"alpha must lie strictly between 0 and 1; got {alpha!r}")
    return as_groups(groups, min_groups=2, min_n=2, name="Hartley's Fmax test")


def _statistic_hartley(groups: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    moments = group_moments(groups)
    var = moments.var                                            # (..., k), centred sums
    largest = var.max(axis=-1)
    smallest = var.min(axis=-1)
    computable = smallest > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        # Hartley (1950), eq. (1): Fmax = s2_max / s2_min.
        statistic = np.where(computable, largest / np.where(computable, smallest, 1.0), np.nan)
    return statistic, computable, moments.n


def _pvalue_hartley(statistic: np.ndarray, computable: np.ndarray, k: int,
                    df: tuple[int, ...]) -> np.ndarray:
    pvalue = np.full(statistic.shape, np.nan)
    if np.any(computable):
        # Pearson & Hartley (1954), Table 31: P(Fmax > c) for k variances on df_i, here exact.
        pvalue[computable] = fmax_sf(statistic[computable], k, df)
    return pvalue


def hartley_fmax(*groups: object, alpha: float = 0.05,
                 unequal_n: Literal["exact", "smallest_group"] = "exact",
                 pvalues: bool = True) -> FmaxResult:
    """Hartley's Fmax test that k normal populations have equal variances.

    Parameters
    ----------
    *groups : array_like
        k >= 2 arrays shaped ``(..., n_i)`` with ``n_i >= 2``; leading axes are a batch.
    alpha : float
        Level for the critical value.
    unequal_n : {"exact", "smallest_group"}
        With unequal group sizes: ``"exact"`` refers Fmax to its exact distribution for the
        groups' own degrees of freedom; ``"smallest_group"`` to the equal-df distribution
        with the smallest group's df (the conservative use of Hartley's table, common
        practice). Equal sizes give the same result either way.
    pvalues : bool
        Default True; False leaves ``pvalue`` NaN (the decision ``statistic > critical_value``
        needs only the cached critical value).

    Returns
    -------
    FmaxResult

    Notes
    -----
    Assumptions: independent samples from normal populations; the test is very sensitive to
    non-normality. Hartley's tables assume equal group sizes; here the exact distribution for
    the actual degrees of freedom ``n_i - 1`` is used, equal or not (the smallest variance may
    fall in any group). A zero variance makes the ratio undefined: that element is marked not
    computable.

    References
    ----------
    1. Hartley, H. O. (1950). The maximum F-ratio as a short-cut test for heterogeneity of
       variance. Biometrika 37, 308-312.
    2. Pearson, E. S. and Hartley, H. O. (1954). Biometrika Tables for Statisticians, Table 31.
    """
    arrays, batch = _validate_hartley(groups, alpha)
    if unequal_n not in ("exact", "smallest_group"):
        raise InputError(
            f"unequal_n {unequal_n!r} is not allowed; use one of exact, smallest_group")
    statistic, computable, n = _statistic_hartley(arrays)
    df = tuple(int(x) - 1 for x in n)
    k = len(df)
    reference = df if unequal_n == "exact" else (min(df),) * k
    if pvalues:
        pvalue = _pvalue_hartley(statistic, computable, k, reference)
    else:
        pvalue = np.full(statistic.shape, np.nan)
    _, reason = flag_cases(batch, (~computable, _ZERO_VARIANCE))
    return FmaxResult(
        statistic=scalarize(statistic),
        pvalue=scalarize(pvalue),
        critical_value=fmax_critical(k, reference, alpha),
        alpha=float(alpha),
        df=df,
        reference_df=reference,
        unequal_n=unequal_n,
        k=k,
        computable=scalarize(computable),
        reason=scalarize(reason),
    )
