"""Named transformations of the response, with their domains, shifts and back-transforms.

Every transformation here is monotone, continuous and invertible on its domain, and is
applied to every value of an analysis (or to none). A transformation that cannot take some
values (log of zero, say) is never applied to "most" values: the caller either adds one
recorded shift constant to every value, or does not transform.

Shift rule (deterministic; see :meth:`Transform.default_shift`)
----------------------------------------------------------------
For ``log``, ``log10``, ``reciprocal`` and ``boxcox`` (domain x > 0), when the smallest value
is zero or negative:

* if every value is a whole number and none is negative (counts), the shift is 1;
* otherwise the shift is ``h - min(x)``, where ``h`` is half the smallest positive value of
  ``x - min(x)``; so the smallest shifted value is h, half the smallest step above the
  minimum. For data with zeros and positive values this is half the smallest positive value.
* if all values are equal (no positive step), the shift is ``1 - min(x)``.

For ``sqrt`` (domain x >= 0) with negative values the shift is ``-min(x)``. ``identity``
never needs a shift, and ``arcsine_sqrt`` (domain [0, 1], proportions) cannot be repaired
by a shift: values outside [0, 1] raise :class:`DomainError`.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from ._core import DomainError, InputError, StatsError

__all__ = [
    "TRANSFORMS",
    "ArcsineSqrt",
    "BoxCox",
    "Identity",
    "Log",
    "Log10",
    "Reciprocal",
    "Sqrt",
    "Transform",
    "get_transform",
]

_MEAN_ON_SCALE = (
    "back-transformed mean (estimates the original-scale median when the transformed values"
    " are symmetric)"
)


def _values(x) -> np.ndarray:
    a = np.asarray(x, dtype=np.float64)
    if not np.all(np.isfinite(a)):
        raise InputError("the values contain NaN or infinite entries; resolve them before transforming")
    return a


def _fmt(v: float) -> str:
    return f"{float(v):.6g}"


@dataclass(frozen=True, slots=True, kw_only=True)
class Transform:
    """A named monotone transformation ``y = f(x + shift)``.

    Attributes
    ----------
    name : str
        Registry name (``"log"``, ``"boxcox"``, ...).
    lmbda : float or None
        The Box-Cox parameter; None for the other transformations.
    monotone : {"increasing", "decreasing"}
        Direction of f; a decreasing f swaps the ends of an interval when back-transformed.
    back_transform_label : str
        What ``inverse(mean of transformed values)`` estimates on the original scale.
    contrast_label : str or None
        What a back-transformed difference of transformed means is (``"ratio of geometric
        means"`` for the log family), or None when a difference has no original-scale
        meaning.
    domain : str
        The domain in words, used in error messages.
    """

    name: str
    lmbda: float | None = None
    monotone: str = "increasing"
    back_transform_label: str = _MEAN_ON_SCALE
    contrast_label: str | None = None
    domain: str = "all real numbers"

    #: Whether values outside the domain can be repaired by adding a constant.
    shiftable: ClassVar[bool] = True

    # -- subclass hooks ------------------------------------------------------------------
    def _f(self, x: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def _finv(self, y: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def _outside(self, x: np.ndarray) -> np.ndarray:
        """Boolean mask of values outside the domain."""
        return np.zeros(x.shape, dtype=bool)

    # -- public --------------------------------------------------------------------------
    @property
    def label(self) -> str:
        """Name with its parameter, e.g. ``"boxcox(lambda=-0.5)"``."""
        return self.name if self.lmbda is None else f"{self.name}(lambda={_fmt(self.lmbda)})"

    def check_domain(self, x, shift: float = 0.0) -> None:
        """Raise :class:`DomainError` unless every ``x + shift`` lies in the domain."""
        raw = _values(x)
        a = raw + float(shift)
        bad = self._outside(a)
        if np.any(bad):
            count = int(bad.sum())
            offending = a[bad]
            below = offending[offending < self._lower_edge()]
            worst = below.min() if below.size else offending.max()
            side = "smallest" if below.size else "largest"
            shifted = f" after adding the shift {_fmt(shift)}" if shift else ""
            values = "value is" if count == 1 else "values are"
            hint = (
                f"; add a shift (the default rule gives {_fmt(self.default_shift(raw))}) or choose"
                " another transformation"
                if self.shiftable
                else "; this transformation cannot be repaired by a shift"
            )
            raise DomainError(
                f"{self.label} needs {self.domain}; {count} {values} outside it{shifted}"
                f" ({side} offending value {_fmt(worst)}){hint}"
            )

    def _lower_edge(self) -> float:
        return -np.inf

    def forward(self, x, shift: float = 0.0) -> np.ndarray:
        """Transform every value: ``f(x + shift)``; raises :class:`DomainError` if any is outside."""
        self.check_domain(x, shift)
        return self._f(_values(x) + float(shift))

    def inverse(self, y, shift: float = 0.0) -> np.ndarray:
        """Back-transform: ``f^{-1}(y) - shift`` (the exact inverse of :meth:`forward`)."""
        return self._finv(_values(y)) - float(shift)

    def back_transform_ci(self, low, high, shift: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
        """Back-transform an interval (low, high) on the transformed scale to (lo, hi) on the
        original scale, swapping the ends when the transformation is decreasing."""
        lo = self.inverse(low, shift)
        hi = self.inverse(high, shift)
        if self.monotone == "decreasing":
            lo, hi = hi, lo
        return lo, hi

    def back_transform_contrast(self, d) -> np.ndarray:
        """Back-transform a difference of transformed means (log family: a ratio)."""
        raise StatsError(
            f"a difference on the {self.label} scale has no original-scale counterpart; report"
            " it on the transformed scale"
        )

    def requires_shift(self, x, axis: int | None = None) -> np.ndarray:
        """True where some value lies outside the domain and a shift could repair it."""
        a = _values(x)
        bad = self._outside(a)
        if not self.shiftable:
            return np.zeros(np.any(bad, axis=axis).shape, dtype=bool)[()]
        return np.any(bad, axis=axis)

    def default_shift(self, x, axis: int | None = None) -> np.ndarray:
        """The recorded shift constant by the module's deterministic rule (0 when not needed)."""
        return np.zeros(np.min(_values(x), axis=axis).shape)[()]


def _positive_shift(x: np.ndarray, axis: int | None) -> np.ndarray:
    """Shift rule for transformations that need x > 0 (see the module docstring)."""
    lo = np.min(x, axis=axis, keepdims=True)
    step = x - lo
    smallest_step = np.min(np.where(step > 0, step, np.inf), axis=axis, keepdims=True)
    counts = np.all((x == np.round(x)) & (x >= 0), axis=axis, keepdims=True)
    general = np.where(np.isfinite(smallest_step), smallest_step / 2.0 - lo, 1.0 - lo)
    shift = np.where(counts, 1.0, general)
    shift = np.where(lo > 0, 0.0, shift)
    return np.squeeze(shift, axis=axis) if axis is not None else shift.reshape(())[()]


@dataclass(frozen=True, slots=True, kw_only=True)
class _PositiveDomain(Transform):
    domain: str = "values > 0"

    def _outside(self, x):
        return x <= 0

    def _lower_edge(self):
        return np.inf  # every offending value is at or below zero

    def default_shift(self, x, axis=None):
        return _positive_shift(_values(x), axis)


@dataclass(frozen=True, slots=True, kw_only=True)
class Identity(Transform):
    """No transformation."""

    name: str = "identity"
    back_transform_label: str = "mean"
    contrast_label: str | None = "difference of means"

    def _f(self, x):
        return x.copy()

    def _finv(self, y):
        return y.copy()

    def back_transform_contrast(self, d):
        return _values(d).copy()


@dataclass(frozen=True, slots=True, kw_only=True)
class Sqrt(Transform):
    """Square root; for counts whose variance grows in proportion to the mean."""

    name: str = "sqrt"
    domain: str = "values >= 0"

    def _f(self, x):
        return np.sqrt(x)

    def _finv(self, y):
        # The inverse of sqrt on [0, inf): a transformed bound below 0 maps to 0.
        return np.square(np.maximum(y, 0.0))

    def _outside(self, x):
        return x < 0

    def _lower_edge(self):
        return np.inf

    def default_shift(self, x, axis=None):
        a = _values(x)
        return np.maximum(-np.min(a, axis=axis), 0.0)[()]


@dataclass(frozen=True, slots=True, kw_only=True)
class Log(_PositiveDomain):
    """Natural logarithm; for data whose spread grows in proportion to the mean."""

    name: str = "log"
    back_transform_label: str = "geometric mean"
    contrast_label: str | None = "ratio of geometric means"

    def _f(self, x):
        return np.log(x)

    def _finv(self, y):
        return np.exp(y)

    def back_transform_contrast(self, d):
        return np.exp(_values(d))


@dataclass(frozen=True, slots=True, kw_only=True)
class Log10(_PositiveDomain):
    """Base-10 logarithm (same analysis as ``log``, different units on the transformed scale)."""

    name: str = "log10"
    back_transform_label: str = "geometric mean"
    contrast_label: str | None = "ratio of geometric means"

    def _f(self, x):
        return np.log10(x)

    def _finv(self, y):
        return np.power(10.0, y)

    def back_transform_contrast(self, d):
        return np.power(10.0, _values(d))


@dataclass(frozen=True, slots=True, kw_only=True)
class Reciprocal(_PositiveDomain):
    """Reciprocal 1/x (decreasing); for rates such as times to an event."""

    name: str = "reciprocal"
    monotone: str = "decreasing"
    back_transform_label: str = "harmonic mean (the reciprocal of the mean of 1/x)"

    def _f(self, x):
        return 1.0 / x

    def _finv(self, y):
        # 1/y on (0, inf); a transformed bound at or below 0 means "unbounded" on the
        # original scale.
        y = np.asarray(y)
        with np.errstate(divide="ignore"):
            return np.where(y > 0, 1.0 / np.where(y > 0, y, 1.0), np.inf)


@dataclass(frozen=True, slots=True, kw_only=True)
class ArcsineSqrt(Transform):
    """arcsin(sqrt(p)) for proportions in [0, 1]."""

    name: str = "arcsine_sqrt"
    domain: str = "proportions in [0, 1]"
    shiftable: ClassVar[bool] = False

    def _f(self, x):
        return np.arcsin(np.sqrt(x))

    def _finv(self, y):
        # Inverse on [0, pi/2]; transformed bounds beyond the ends map to 0 or 1.
        return np.square(np.sin(np.clip(y, 0.0, np.pi / 2.0)))

    def _outside(self, x):
        return (x < 0) | (x > 1)

    def _lower_edge(self):
        return 0.0


@dataclass(frozen=True, slots=True, kw_only=True)
class BoxCox(_PositiveDomain):
    """Box-Cox power transformation (x^lambda - 1) / lambda, log x at lambda = 0.

    Increasing for every lambda. Computed as expm1(lambda * log x) / lambda, which is
    accurate for lambda near 0. The inverse is exp(log1p(lambda * y) / lambda); a
    transformed value with 1 + lambda * y <= 0 lies beyond the image of (0, inf) and maps to
    0 (lambda > 0) or +inf (lambda < 0).
    """

    name: str = "boxcox"
    lmbda: float | None = 1.0

    def __post_init__(self):
        if self.lmbda is None or not np.isfinite(self.lmbda):
            raise InputError("boxcox needs a finite lambda, e.g. get_transform('boxcox', lmbda=0.5)")
        object.__setattr__(self, "lmbda", float(self.lmbda))
        if self.lmbda == 0.0:  # the log transformation: means back-transform to geometric means
            object.__setattr__(self, "back_transform_label", "geometric mean")
            object.__setattr__(self, "contrast_label", "ratio of geometric means")

    def _f(self, x):
        lam = float(self.lmbda)
        lx = np.log(x)
        if lam == 0.0:
            return lx
        return np.expm1(lam * lx) / lam

    def _finv(self, y):
        lam = float(self.lmbda)
        if lam == 0.0:
            return np.exp(y)
        u = lam * y
        inside = u > -1.0
        with np.errstate(divide="ignore", over="ignore"):
            val = np.exp(np.log1p(np.where(inside, u, 0.0)) / lam)
        edge = 0.0 if lam > 0 else np.inf
        return np.where(inside, val, edge)

    def back_transform_contrast(self, d):
        if self.lmbda == 0.0:
            return np.exp(_values(d))
        return Transform.back_transform_contrast(self, d)


TRANSFORMS: dict[str, type[Transform]] = {
    "identity": Identity,
    "sqrt": Sqrt,
    "log": Log,
    "log10": Log10,
    "reciprocal": Reciprocal,
    "arcsine_sqrt": ArcsineSqrt,
    "boxcox": BoxCox,
}


def get_transform(name: str, lmbda: float | None = None) -> Transform:
    """Return the transformation registered under ``name`` (``lmbda`` only for ``boxcox``)."""
    if name not in TRANSFORMS:
        close = difflib.get_close_matches(str(name), list(TRANSFORMS), n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise InputError(
            f"transformation {name!r} is not known; use one of {', '.join(TRANSFORMS)}{hint}"
        )
    if name == "boxcox":
        if lmbda is None:
            raise InputError("boxcox needs lmbda, e.g. get_transform('boxcox', lmbda=-0.5)")
        return BoxCox(lmbda=float(lmbda))
    if lmbda is not None:
        raise InputError(f"{name} takes no lambda; only boxcox does")
    return TRANSFORMS[name]()
