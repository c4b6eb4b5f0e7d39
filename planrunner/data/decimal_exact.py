"""Exact reading of decimal text, and exact removal of a common offset.

Why: a value such as ``1000000000000.4`` needs 14 significant digits, and float64 keeps about
16, so only two or three digits of the part that varies survive the conversion (the spacing of
float64 near 1e12 is 1.2e-4). Data sets with many constant leading digits (NIST StRD SmLs07-09,
calibrated instrument readings, atomic weights) then lose most of their information before any
statistic is computed, however stable the algorithm.

How: each numeric cell is parsed with :class:`decimal.Decimal`, which is exact. A common offset
is subtracted exactly in decimal arithmetic and only the differences are converted to float64
(each conversion correctly rounded). Location-invariant analyses (the one-way ANOVA on the
identity scale: sums of squares, F, R², residual SD, pairwise differences) are computed on the
differences; means are reported as ``offset + mean(differences)`` with :func:`restore_offset`.
Transformations (log, sqrt, Box-Cox, ...) are not location invariant and use the plain values.

The offset is the *lower median* of the exact values of the endpoint (the middle value of the
sorted values; of the two middle values, the smaller). Reasons: it is an observed value, so it
has no more decimal places than the data and every difference is exact; it does not depend on
row order (the first observation would), and it centres the differences, so their magnitudes
and hence their float64 rounding errors are as small as is practical; an outlier cannot move
it far.

Numbers that arrive already as binary floats (Parquet float columns, Excel numeric cells) have
lost their digits before planrunner sees them; for them the offset path is a no-op (offset
``"0"``, offset-removed values equal to the plain values). Integers that arrive as integers are
exact and use the offset path.
"""

from __future__ import annotations

import decimal
from dataclasses import dataclass
from decimal import Decimal
from typing import Sequence

import numpy as np

__all__ = ["ExactValues", "exact_offset_values", "restore_offset"]

# Wide enough for any realistic data; Inexact is trapped, so a subtraction that would need
# more digits is detected rather than rounded silently.
_EXACT = decimal.Context(prec=200, traps=[decimal.Inexact, decimal.InvalidOperation,
                                          decimal.Overflow])
# For adding an offset back: rounding is allowed (once more, to float64, afterwards).
_WIDE = decimal.Context(prec=800)


@dataclass(frozen=True, slots=True)
class ExactValues:
    """Float64 values of an endpoint, plain and with an exact offset removed.

    Attributes
    ----------
    plain : ndarray of float64
        Each value correctly rounded to float64.
    shifted : ndarray of float64
        ``value - offset`` computed exactly, then correctly rounded to float64.
    offset : str
        The offset as decimal text (``"0"`` when the offset path does not apply).
    exact : bool
        True when every value was exact decimal (or integer) input and the offset path applied.
    """

    plain: np.ndarray
    shifted: np.ndarray
    offset: str
    exact: bool


def exact_offset_values(decimals: Sequence[Decimal] | None, plain: np.ndarray) -> ExactValues:
    """Remove the lower median exactly from exact values; a no-op when they are not exact.

    Parameters
    ----------
    decimals : sequence of Decimal, or None
        The exact values, or None when at least one value arrived as a binary float.
    plain : ndarray of float64
        The same values as float64 (used as they are when ``decimals`` is None).
    """
    plain = np.asarray(plain, dtype=np.float64)
    if decimals is None or len(decimals) == 0:
        return ExactValues(plain, plain.copy(), "0", decimals is not None)
    offset = sorted(decimals)[(len(decimals) - 1) // 2]
    try:
        diffs = [_EXACT.subtract(d, offset) for d in decimals]
    except decimal.DecimalException:  # pragma: no cover - needs > 200 significant digits
        return ExactValues(plain, plain.copy(), "0", False)
    shifted = np.array([float(d) for d in diffs], dtype=np.float64)
    return ExactValues(plain, shifted, _plain_text(offset), True)


def restore_offset(value: float, offset: str) -> float:
    """``offset + value``, added exactly and rounded once to float64.

    Use it to report a mean computed on offset-removed values: ``restore_offset(m, offset)``.
    """
    total = _WIDE.add(Decimal(offset), Decimal(float(value)))
    return float(total)


def _plain_text(d: Decimal) -> str:
    """Decimal text without exponent notation where that is short enough."""
    text = format(d, "f")
    return text if len(text) <= 60 else str(d)
