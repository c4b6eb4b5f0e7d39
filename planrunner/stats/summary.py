"""Per-group descriptive statistics and residuals from the group means."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ._core import InputError, Interval, as_groups, concat_groups, flag_cases, group_moments, scalarize

__all__ = ["GroupSummary", "describe_groups", "residuals"]


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
