"""Pure numerics for comparing group means: numpy arrays in, frozen results out.

Every function takes k groups as separate arrays shaped ``(..., n_i)``; the leading axes are a
batch and results come back shaped ``(...)``. See :mod:`planrunner.stats._core` for the
conventions on degenerate input. This package imports nothing from the rest of planrunner.
"""

from ._core import DegenerateError, DomainError, InputError, StatsError

__all__ = ["DegenerateError", "DomainError", "InputError", "StatsError"]
