"""Shared plumbing of the statistics package: input checks, stable moments, result helpers.

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
  numeric fields hold NaN there only, and ``reason`` says why in one plain sentence.

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
    "Moments",
    "StatsError",
    "as_groups",
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
        a = np.asarray(g, dtype=np.float64)
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
    """

    n: np.ndarray
    mean: np.ndarray
    ss: np.ndarray

    @property
    def var(self) -> np.ndarray:
        """Unbiased variances ``ss / (n - 1)`` (inf-free: groups of one give NaN-free 0/0 guards)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return self.ss / (self.n - 1)


def _centred(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    # Two-pass with the Bjorck/Chan-Golub-LeVeque correction: mean of deviations from a pivot,
    # then the centred sum of squares with the rounding-error correction term (sum d)^2 / n.
    pivot = a[..., :1]
    d = a - pivot
    n = a.shape[-1]
    mean_d = d.mean(axis=-1, keepdims=True)
    e = d - mean_d
    ss = (e * e).sum(axis=-1) - e.sum(axis=-1) ** 2 / n
    return (pivot + mean_d)[..., 0], np.maximum(ss, 0.0)


def group_moments(groups: Sequence[np.ndarray]) -> Moments:
    """Stable per-group moments of arrays already passed through :func:`as_groups`."""
    n = np.array([g.shape[-1] for g in groups], dtype=np.float64)
    means, sss = zip(*(_centred(g) for g in groups))
    return Moments(n=n, mean=np.stack(means, axis=-1), ss=np.stack(sss, axis=-1))


def scalarize(x: np.ndarray) -> np.ndarray:
    """Return a numpy scalar for a 0-d array, the array itself otherwise."""
    return np.asarray(x)[()]
