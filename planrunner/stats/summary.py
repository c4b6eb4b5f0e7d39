"""Per-group descriptive statistics and residuals from the group means."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ._core import InputError, Interval, as_groups, concat_groups, flag_cases, group_moments, scalarize

__all__ = [
    "GroupSummary",
    "StudentizedResiduals",
    "describe_groups",
    "residuals",
    "studentized_residuals",
]


@dataclass(frozen=True, slots=True, kw_only=True)
class GroupSummary:
    """Per-group n, mean, standard deviation, standard error and t-based CI of the mean.

    Every field is shaped ``(..., k)`` (``confidence_level`` is a float). ``sd``, ``se`` and the
    CI are NaN only where ``computable`` is False (a group of one value).
    """

    n: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    se: np.ndarray
    ci: Interval
    confidence_level: float
    computable: np.ndarray
    reason: np.ndarray


def _validate_level(confidence_level: float) -> float:
    level = float(confidence_level)
    if not 0.0 < level < 1.0:
        raise InputError(f"confidence_level must lie strictly between 0 and 1; got {confidence_level!r}")
    return level


def describe_groups(*groups, confidence_level: float = 0.95) -> GroupSummary:
    """Describe each group: n, mean, sd, se and a t-based confidence interval of the mean.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``
        One or more groups; leading axes are a batch.
    confidence_level : float
        Two-sided coverage of the interval mean +/- t_{n-1, (1+level)/2} * se.

    Returns
    -------
    GroupSummary

    Notes
    -----
    The interval assumes independent, normally distributed values within the group; it is
    the interval for one group by itself (its own standard deviation, n - 1 degrees of
    freedom), not one based on a pooled variance. A group of one value has no standard
    deviation; it is marked not computable.

    References
    ----------
    .. [1] Student (1908). The probable error of a mean. Biometrika 6, 1-25.
    """
    level = _validate_level(confidence_level)
    arrays, batch = as_groups(groups, min_groups=1, min_n=1, name="describe_groups")
    mom = group_moments(arrays)
    shape = batch + (len(arrays),)
    n = np.broadcast_to(mom.n, shape)
    single = n < 2
    computable, reason = flag_cases(
        shape, (single, "a group of one value has no standard deviation")
    )
    sd = np.sqrt(np.where(computable, mom.ss / np.where(single, 1.0, n - 1.0), np.nan))
    se = sd / np.sqrt(n)
    # Student t quantile with n - 1 df (scipy.special.stdtrit).
    t = special.stdtrit(np.where(single, 1.0, n - 1.0), 0.5 + level / 2.0)
    half = t * se
    return GroupSummary(
        n=scalarize(n.astype(np.int64)),
        mean=scalarize(mom.mean),
        sd=scalarize(sd),
        se=scalarize(se),
        ci=Interval(low=scalarize(mom.mean - half), high=scalarize(mom.mean + half)),
        confidence_level=level,
        computable=scalarize(computable),
        reason=scalarize(reason),
    )


def residuals(*groups) -> np.ndarray:
    """Values minus their group's mean, concatenated in group order along the last axis.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``

    Returns
    -------
    ndarray shaped ``(..., N)``

    Notes
    -----
    Each residual is formed as (x - first value of the group) - (mean deviation), so data
    with many constant leading digits give accurate residuals. Residuals of a one-way model
    sum to zero within each group and have N - k degrees of freedom, not N.
    """
    arrays, _ = as_groups(groups, min_groups=1, min_n=1, name="residuals")
    parts = []
    for g in arrays:
        first = g[..., :1]
        d = g - first
        mean_d = d.mean(axis=-1, keepdims=True)
        parts.append(d - mean_d)
    values, _ = concat_groups(parts)
    return values


@dataclass(frozen=True, slots=True, kw_only=True)
class StudentizedResiduals:
    """Externally studentized residuals of the one-way model, one array per group.

    Attributes
    ----------
    residuals : tuple of ndarray, each shaped ``(..., n_i)``
        ``t_ij``; NaN exactly where ``computable`` is False, and +/-inf where a single value
        carries all of the within-group variation (the deleted variance is zero).
    df : float
        Degrees of freedom of the deleted variance estimate, ``N - k - 1``.
    computable : tuple of bool ndarray, each shaped ``(..., n_i)``
    reason : tuple of str ndarray, each shaped ``(..., n_i)``
        Why a residual is not computable, in one sentence; ``""`` where it is.
    """

    residuals: tuple[np.ndarray, ...]
    df: float
    computable: tuple[np.ndarray, ...]
    reason: tuple[np.ndarray, ...]


def studentized_residuals(*groups) -> StudentizedResiduals:
    """Externally studentized residuals of the one-way model (group means), per value.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``
        One or more groups; leading axes are a batch.

    Returns
    -------
    StudentizedResiduals

    Notes
    -----
    The one-way model fits each group's mean, so a value's leverage is ``h = 1 / n_i``. With
    ``e`` its residual and ``s**2 = SS_within / (N - k)``, the internally studentized
    residual is ``r = e / (s sqrt(1 - h))`` and the externally studentized one (``s``
    replaced by the estimate without the value) ``t = r sqrt((N - k - 1) / (N - k - r**2))``
    [1]_; under normal errors ``t`` follows Student's t on ``N - k - 1`` df. Not computable:
    every value when ``N - k - 1 < 1`` or every group is constant; a group of one value
    (leverage 1).

    References
    ----------
    .. [1] Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression.
       Chapman and Hall, section 2.2.2.
    """
    arrays, batch = as_groups(groups, min_groups=1, min_n=1, name="studentized_residuals")
    n = np.array([g.shape[-1] for g in arrays], dtype=float)
    res = residuals(*arrays)                                       # (..., N), centred per group
    dfw = float(n.sum() - n.size)
    ss = (res * res).sum(axis=-1)
    h = np.concatenate([np.full(int(ni), 1.0 / ni) for ni in n])
    too_few = bool(dfw - 1.0 < 1.0)
    ok = (not too_few) & (ss > 0)
    s2 = np.where(ok, ss / max(dfw, 1.0), 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = res / np.sqrt(s2[..., None] * np.where(h < 1, 1.0 - h, np.nan))
        den = dfw - r * r
        # Cook & Weisberg (1982), eq. (2.2.9): t = r sqrt((N - k - 1) / (N - k - r^2)).
        t = np.where(den > 0, r * np.sqrt((dfw - 1.0) / np.where(den > 0, den, 1.0)),
                     np.sign(r) * np.inf)
    shape = batch + (h.size,)
    computable, reason = flag_cases(
        shape,
        (too_few, "fewer than two residual degrees of freedom (N - k - 1 < 1)"),
        (~ok[..., None], "every group is constant, so the residual variance is zero"),
        (h >= 1, "a group of one value has leverage 1, so its residual is undefined"),
    )
    t = np.where(computable, t, np.nan)
    bounds = np.concatenate([[0], np.cumsum(n)]).astype(int)
    cut = [slice(bounds[i], bounds[i + 1]) for i in range(len(arrays))]
    return StudentizedResiduals(
        residuals=tuple(t[..., c] for c in cut),
        df=dfw - 1.0,
        computable=tuple(computable[..., c] for c in cut),
        reason=tuple(reason[..., c] for c in cut),
    )
