"""Shared plumbing of the statistics package: input checks, stable moments, result utilities.

Conventions used by every public function in :mod:`planrunner.stats`:

* Groups are passed as separate arrays shaped ``(..., n_i)``. The leading axes are a batch
  (endpoints or simulated replicates); they must broadcast against each other. A single
  analysis is the batch of shape ``()``.
* Results are frozen dataclasses. Batch-shaped fields are numpy arrays of the batch shape;
  for a batch of shape ``()`` they are numpy scalars (``arr[()]``).
* Structurally invalid input (fewer than two groups, a group with too few values, NaN or
  infinite values, batch shapes that do not broadcast) raises :class:`InputError`.
* A statistic that cannot be computed for some batch elements (for example zero variance in
  every group) is *not* a silent NaN: the result's ``computable`` mask is False there, the
  affected numeric fields hold NaN there only, and ``reason`` (a batch-shaped array of
  strings, empty where computable) says why in one plain sentence.

This module imports numpy only; the package never imports pandas, pydantic, yaml or the rest
of planrunner.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

__all__ = [
    "DegenerateError",
    "DomainError",
    "InputError",
    "Interval",
    "Moments",
    "StatsError",
    "as_groups",
    "concat_groups",
    "flag_cases",
    "group_moments",
    "scalarize",
]


class StatsError(ValueError):
    """Base class of the errors raised by :mod:`planrunner.stats`."""


class InputError(StatsError):
    """The input is structurally invalid (too few groups or values, NaN, bad shapes)."""


class DegenerateError(StatsError):
    """The data are degenerate for the method (e.g. zero variance where it must be positive)."""


class DomainError(StatsError):
    """Values lie outside a transformation's domain (e.g. log of zero without a shift)."""


def as_groups(
    groups: Sequence[object], *, min_groups: int = 2, min_n: int = 1, name: str = "this test"
) -> tuple[list[np.ndarray], tuple[int, ...]]:
    """Convert groups to float64 arrays with one common batch shape.

    Returns the broadcast arrays and the batch shape. Raises :class:`InputError` with a plain
    sentence when the input cannot be analysed.
    """
    if len(groups) < min_groups:
        raise InputError(f"{name} needs at least {min_groups} groups; got {len(groups)}")
    arrays = []
    for i, g in enumerate(groups):
        try:
            a = np.asarray(g, dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError(f"group {i} is not an array of numbers") from None
        if a.ndim == 0:
            raise InputError(f"group {i} is a single number; pass an array of observations")
        if a.shape[-1] < min_n:
            raise InputError(
                f"{name} needs at least {min_n} values per group; group {i} has {a.shape[-1]}"
            )
        if not np.all(np.isfinite(a)):
            raise InputError(f"group {i} contains NaN or infinite values; remove or resolve them first")
        arrays.append(a)
    try:
        batch = np.broadcast_shapes(*(a.shape[:-1] for a in arrays))
    except ValueError:
        shapes = ", ".join(str(a.shape) for a in arrays)
        raise InputError(f"the groups' batch shapes do not broadcast: {shapes}") from None
    arrays = [np.broadcast_to(a, batch + a.shape[-1:]) for a in arrays]
    return arrays, batch


@dataclass(frozen=True, slots=True, kw_only=True)
class Moments:
    """Per-group sample sizes, means and centred sums of squares.

    ``n`` has shape ``(k,)``; ``mean``, ``ss`` and ``var`` have shape ``(..., k)``.

    ``pivot`` (batch shape) and ``centred_mean`` (``(..., k)``) carry the group means as
    deviations from one common pivot, ``mean = pivot + centred_mean``. Differences between
    group means should be taken from ``centred_mean``: it keeps the digits that adding the
    pivot back would round away (data with many constant leading digits).
    """

    n: np.ndarray
    mean: np.ndarray
    ss: np.ndarray
    pivot: np.ndarray | None = None
    centred_mean: np.ndarray | None = None

    @property
    def var(self) -> np.ndarray:
        """Unbiased variances ``ss / (n - 1)``; NaN (without a warning) for groups of one value."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return self.ss / (self.n - 1)

    def deviations(self) -> tuple[np.ndarray, np.ndarray]:
        """Return ``(pivot, centred_mean)``, falling back to pivot 0 when not recorded."""
        if self.pivot is None or self.centred_mean is None:
            return np.zeros(self.mean.shape[:-1]), self.mean
        return self.pivot, self.centred_mean


def _centred(a: np.ndarray, pivot: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (first value, mean of deviations from it, centred sum of squares) of one group.

    Two passes with the correction term of Chan, Golub & LeVeque (1983), The American
    Statistician 37, 242-247: ss = sum(e^2) - (sum e)^2 / n with e the deviations from the
    first-pass mean, computed on deviations from the group's first value so that constant
    leading digits cancel exactly before any sum is formed.
    """
    first = a[..., 0]
    d = a - first[..., None]
    n = a.shape[-1]
    mean_d = d.mean(axis=-1)
    e = d - mean_d[..., None]
    ss = (e * e).sum(axis=-1) - e.sum(axis=-1) ** 2 / n
    # A group with zero range has ss exactly 0 (rounding in the mean must not make it 1e-34).
    constant = np.all(d == 0.0, axis=-1)
    ss = np.where(constant, 0.0, np.maximum(ss, 0.0))
    mean_d = np.where(constant, 0.0, mean_d)
    # Mean relative to the common pivot: (first - pivot) is one rounding, then the small part.
    return first, (first - pivot) + mean_d, ss


def group_moments(groups: Sequence[np.ndarray]) -> Moments:
    """Stable per-group moments of arrays already passed through :func:`as_groups`.

    The common pivot is the first value of the first group (per batch element), so the
    centred means are unchanged by adding a constant to every value.
    """
    n = np.array([g.shape[-1] for g in groups], dtype=np.float64)
    pivot = np.asarray(groups[0][..., 0], dtype=np.float64)
    parts = [_centred(g, pivot) for g in groups]
    centred = np.stack([p[1] for p in parts], axis=-1)
    ss = np.stack([p[2] for p in parts], axis=-1)
    mean = pivot[..., None] + centred
    return Moments(n=n, mean=mean, ss=ss, pivot=pivot, centred_mean=centred)


def concat_groups(groups: Sequence[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Concatenate groups along the last axis; return the values and the group boundaries.

    ``bounds`` has length k + 1: group i occupies ``values[..., bounds[i]:bounds[i + 1]]``.
    """
    sizes = [g.shape[-1] for g in groups]
    bounds = np.concatenate([[0], np.cumsum(sizes)]).astype(np.intp)
    return np.concatenate(list(groups), axis=-1), bounds


@dataclass(frozen=True, slots=True, kw_only=True)
class Interval:
    """A confidence interval ``(low, high)``; each bound has the batch shape of its result."""

    low: np.ndarray
    high: np.ndarray

    def __iter__(self):
        yield self.low
        yield self.high


def flag_cases(
    batch: tuple[int, ...], *cases: tuple[np.ndarray | bool, str]
) -> tuple[np.ndarray, np.ndarray]:
    """Build the ``computable`` mask and ``reason`` strings from degenerate-case conditions.

    Each case is ``(condition, sentence)``; ``condition`` broadcasts to ``batch`` and is True
    where the statistic cannot be computed. The first matching case gives the reason. Returns
    ``(computable, reason)`` as arrays of the batch shape (``reason`` is ``""`` where
    computable).
    """
    width = max([1] + [len(msg) for _, msg in cases])
    reason = np.full(batch, "", dtype=f"<U{width}")
    bad = np.zeros(batch, dtype=bool)
    for cond, msg in cases:
        c = np.broadcast_to(np.asarray(cond, dtype=bool), batch)
        new = c & ~bad
        reason[new] = msg
        bad |= c
    return ~bad, reason


def scalarize(x: np.ndarray) -> np.ndarray:
    """Return a numpy scalar for a 0-d array, the array itself otherwise."""
    return np.asarray(x)[()]
