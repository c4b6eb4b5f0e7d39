"""Power and sample size of the classic one-way F test, for equal or unequal group sizes.

Under the alternative the F statistic follows the noncentral F distribution on (k-1, N-k)
degrees of freedom with noncentrality ``lambda = sum n_i (mu_i - mu_w)^2 / sigma^2``, where
``mu_w = sum n_i mu_i / N`` is the weighted mean (Cohen 1988, ch. 8; Scheffe 1959, sec. 2.8).
With Cohen's effect size ``f^2 = sum (n_i/N)(mu_i - mu_w)^2 / sigma^2`` this is
``lambda = f^2 N``. Power is ``P(F' > F_crit)`` with ``F_crit`` the upper-alpha point of the
central F.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ._core import InputError, scalarize

__all__ = ["AnovaPower", "AnovaSampleSize", "anova_power", "anova_sample_size"]


@dataclass(frozen=True, slots=True, kw_only=True)
class AnovaPower:
    """Power of the classic one-way F test.

    ``power`` and ``noncentrality`` have the broadcast shape of the effect inputs (numpy
    scalars for scalar input); ``n`` are the group sizes used.
    """

    power: np.ndarray
    noncentrality: np.ndarray
    df1: float
    df2: float
    alpha: float
    n: tuple[int, ...]
    n_total: int
    effect_size_f: np.ndarray


@dataclass(frozen=True, slots=True, kw_only=True)
class AnovaSampleSize:
    """Smallest group sizes that give the one-way F test at least the target power.

    ``n`` is the group sizes, ``multiplier`` the factor applied to ``allocation`` (for equal
    groups ``allocation`` is all ones and ``multiplier`` equals the common n); ``power`` is the
    power actually reached, ``power_one_less`` the power with ``multiplier - 1`` (below the
    target; None when ``multiplier - 1`` leaves no error degrees of freedom).
    """

    n: tuple[int, ...]
    multiplier: int
    allocation: tuple[int, ...]
    n_total: int
    power: float
    power_one_less: float | None
    target_power: float
    noncentrality: float
    df1: float
    df2: float
    alpha: float
    effect_size_f: float


def _validate_alpha(alpha: float) -> float:
    try:
        a = float(alpha)
    except (TypeError, ValueError):
        raise InputError(f"alpha must be a number between 0 and 1; got {alpha!r}") from None
    if not 0.0 < a < 1.0:
        raise InputError(f"alpha must lie strictly between 0 and 1; got {a!r}")
    return a


def _effect_f2(effect_size_f, means, sd, weights: np.ndarray) -> np.ndarray:
    """Squared Cohen's f from f itself or from means and sd, with relative weights n_i/N."""
    if (effect_size_f is None) == (means is None):
        raise InputError("give either effect_size_f, or means together with sd (not both)")
    if effect_size_f is not None:
        if sd is not None:
            raise InputError("sd is used with means only; effect_size_f is already standardised")
        f = np.asarray(effect_size_f, dtype=np.float64)
        if not np.all(np.isfinite(f)) or np.any(f < 0):
            raise InputError(
                f"effect_size_f must be finite and non-negative; got {effect_size_f!r}"
            )
        return f * f
    if sd is None:
        raise InputError("means need the common within-group standard deviation sd")
    mu = np.asarray(means, dtype=np.float64)
    s = np.asarray(sd, dtype=np.float64)
    if not np.all(np.isfinite(mu)) or not np.all(np.isfinite(s)) or np.any(s <= 0):
        raise InputError("means must be finite and sd finite and positive")
    w = weights / weights.sum()
    # Weighted mean mu_w = sum (n_i/N) mu_i; f^2 = sum (n_i/N)(mu_i - mu_w)^2 / sigma^2.
    mu_w = (w * mu).sum(axis=-1, keepdims=True)
    return (w * (mu - mu_w) ** 2).sum(axis=-1) / (s * s)


def _n_groups(means, n, k, allow_scalar_n=True) -> int:
    counts = []
    if means is not None:
        counts.append(("means", np.shape(means)[-1] if np.ndim(means) else 0))
    if n is not None and np.ndim(n):
        counts.append(("n", len(n)))
    if k is not None:
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)):
            raise InputError(f"k must be an integer number of groups; got {k!r}")
        counts.append(("k", int(k)))
    if not counts:
        raise InputError("the number of groups is unknown: give k, means, or one n per group")
    values = {c for _, c in counts}
    if len(values) > 1:
        said = ", ".join(f"{name} gives {c}" for name, c in counts)
        raise InputError(f"the number of groups is inconsistent: {said}")
    kk = values.pop()
    if kk < 2:
        raise InputError(f"a one-way F test needs at least 2 groups; got {kk}")
    return kk


def _power(f2, n_total, k, alpha):
    from scipy import special

    df1, df2 = float(k - 1), float(n_total - k)
    lam = f2 * n_total  # lambda = f^2 N
    fcrit = special.fdtri(df1, df2, 1.0 - alpha)  # upper-alpha point of the central F
    # P(F' > F_crit) = 1 - ncfdtr(df1, df2, lambda, F_crit) (noncentral F cdf, scipy.stats.ncf).
    power = np.where(
        lam > 0,
        1.0 - special.ncfdtr(df1, df2, np.maximum(lam, 0.0), fcrit),
        alpha,
    )
    return np.clip(power, 0.0, 1.0), lam, df1, df2


def anova_power(
    effect_size_f: float | np.ndarray | None = None,
    means: Sequence[float] | np.ndarray | None = None,
    sd: float | np.ndarray | None = None,
    n: int | Sequence[int] | None = None,
    alpha: float = 0.05,
    k: int | None = None,
) -> AnovaPower:
    """Power of the classic one-way F test for given group sizes.

    Parameters
    ----------
    effect_size_f : float or array, optional
        Cohen's f, ``sqrt(sum (n_i/N)(mu_i - mu_w)^2) / sigma``. Give this, or ``means`` and
        ``sd``.
    means : array_like, shape (..., k), optional
        Group means under the alternative; leading axes broadcast as a batch.
    sd : float or array, optional
        Common within-group standard deviation (with ``means``).
    n : int or sequence of int
        Size of every group (equal n; then k comes from ``means`` or ``k``) or one size per
        group.
    alpha : float
        Level of the test.
    k : int, optional
        Number of groups, needed with ``effect_size_f`` and a single ``n``.

    Returns
    -------
    AnovaPower

    Notes
    -----
    ``lambda = sum n_i (mu_i - mu_w)^2 / sigma^2`` with the weighted mean mu_w, equal to
    ``f^2 N``; power ``= P(F'(k-1, N-k, lambda) > F_{1-alpha}(k-1, N-k))`` [1]_. With unequal
    n, Cohen's f depends on the allocation through the weights n_i/N.

    References
    ----------
    .. [1] Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.,
       chapter 8.
    """
    a = _validate_alpha(alpha)
    if n is None:
        raise InputError("n is required: the size of every group, or one size per group")
    kk = _n_groups(means, n, k)
    sizes = _validate_sizes(n, kk)
    n_total = int(sum(sizes))
    if n_total - kk < 1:
        raise InputError(
            f"{n_total} observations in {kk} groups leave no error degrees of freedom"
        )
    weights = np.asarray(sizes, dtype=np.float64)
    f2 = _effect_f2(effect_size_f, means, sd, weights)
    power, lam, df1, df2 = _power(f2, n_total, kk, a)
    return AnovaPower(
        power=scalarize(power),
        noncentrality=scalarize(lam),
        df1=df1,
        df2=df2,
        alpha=a,
        n=sizes,
        n_total=n_total,
        effect_size_f=scalarize(np.sqrt(f2)),
    )


def _validate_sizes(n, k) -> tuple[int, ...]:
    arr = np.atleast_1d(np.asarray(n))
    numeric = np.issubdtype(arr.dtype, np.number) and not np.issubdtype(arr.dtype, np.bool_)
    if arr.ndim != 1 or not numeric:
        raise InputError(f"n must be a whole number or one whole number per group; got {n!r}")
    if np.any(arr != np.round(arr)) or np.any(arr < 1):
        raise InputError(f"group sizes must be whole numbers of at least 1; got {n!r}")
    if arr.size == 1:
        arr = np.repeat(arr, k)
    return tuple(int(x) for x in arr)


def anova_sample_size(
    effect_size_f: float | None = None,
    means: Sequence[float] | None = None,
    sd: float | None = None,
    k: int | None = None,
    alpha: float = 0.05,
    target_power: float = 0.8,
    allocation: Sequence[int] | None = None,
    max_n_total: int = 10_000_000,
) -> AnovaSampleSize:
    """Smallest group sizes giving the classic one-way F test at least ``target_power``.

    Parameters
    ----------
    effect_size_f : float, optional
        Cohen's f under the planned allocation. Give this, or ``means`` and ``sd``.
    means : sequence of float, optional
        Group means under the alternative (one per group).
    sd : float, optional
        Common within-group standard deviation.
    k : int, optional
        Number of groups (needed with ``effect_size_f`` unless ``allocation`` is given).
    alpha : float
        Level of the test.
    target_power : float
        Required power, ``alpha < target_power < 1``.
    allocation : sequence of int, optional
        Relative group sizes, e.g. ``(2, 1, 1)`` for a control twice the size of each
        treatment; the result is the smallest whole multiplier m with ``n = m * allocation``.
        Default: equal groups.
    max_n_total : int
        Give up (InputError) beyond this total.

    Returns
    -------
    AnovaSampleSize

    Notes
    -----
    Power increases with the multiplier (both lambda and the error df grow), so the search
    doubles the multiplier until the target is reached and then bisects over whole numbers.
    The result is the exact smallest multiplier, not a rounded-up continuous solution.
    This function takes one scenario at a time (no batch axes).
    """
    a = _validate_alpha(alpha)
    try:
        target = float(target_power)
    except (TypeError, ValueError):
        raise InputError(f"target_power must be a number; got {target_power!r}") from None
    if not a < target < 1.0:
        raise InputError(
            f"target_power must lie between alpha ({a}) and 1; got {target_power!r}"
        )
    kk = _n_groups(means, allocation, k)
    if np.ndim(means) > 1:
        raise InputError("anova_sample_size takes one scenario: means must be one-dimensional")
    alloc = (1,) * kk if allocation is None else _validate_sizes(allocation, kk)
    weights = np.asarray(alloc, dtype=np.float64)
    f2 = _effect_f2(effect_size_f, means, sd, weights)
    if np.ndim(f2) != 0:
        raise InputError("anova_sample_size takes one scenario: effect_size_f must be a number")
    f2 = float(f2)
    if f2 <= 0:
        raise InputError("the effect is zero, so no sample size reaches a power above alpha")
    unit = int(sum(alloc))

    def power_at(mult: int) -> float:
        return float(_power(np.float64(f2), mult * unit, kk, a)[0])

    lo = 1 if unit - kk >= 1 else 2  # smallest multiplier with error degrees of freedom
    if power_at(lo) >= target:
        best = lo
    else:
        hi = lo
        while power_at(hi) < target:
            lo = hi
            hi *= 2
            if hi * unit > max_n_total:
                raise InputError(
                    f"the target power {target} is not reached with up to {max_n_total} "
                    "observations; the effect is too small for a practical study"
                )
        # power_at(lo) < target <= power_at(hi)
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if power_at(mid) >= target:
                hi = mid
            else:
                lo = mid
        best = hi
    n_total = best * unit
    power, lam, df1, df2 = _power(np.float64(f2), n_total, kk, a)
    less = power_at(best - 1) if (best - 1) * unit - kk >= 1 else None
    return AnovaSampleSize(
        n=tuple(best * x for x in alloc),
        multiplier=best,
        allocation=alloc,
        n_total=n_total,
        power=float(power),
        power_one_less=less,
        target_power=target,
        noncentrality=float(lam),
        df1=df1,
        df2=df2,
        alpha=a,
        effect_size_f=float(np.sqrt(f2)),
    )
