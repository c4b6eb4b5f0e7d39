"""What the data layer needs to know about a plan, as one plain frozen dataclass.

The engine fills a :class:`DataSpec` from the validated plan; the data layer never imports the
plan models, so the two can change independently. Values are checked here only for internal
consistency (the plan model is where a user's mistakes are reported with YAML line numbers).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

__all__ = ["DataSpec", "level_label"]

Missing = Literal["drop", "reject"]
NonDetectRule = Literal["reject", "substitute"]
ResponseKind = Literal["continuous", "count", "proportion"]
FileFormat = Literal["auto", "csv", "tsv", "parquet", "excel"]

_MISSING = ("drop", "reject")
_ND_RULES = ("reject", "substitute")
_KINDS = ("continuous", "count", "proportion")
_FORMATS = ("auto", "csv", "tsv", "parquet", "excel")


def level_label(value: object) -> str:
    """The text form of a group level or a group cell, used to compare the two.

    Plans may write levels as numbers (``levels: [1, 2, 3]``) while a CSV holds text; both sides
    are compared as text. Integers (and integer-valued floats, as Parquet or Excel may store
    them) become their decimal digits, ``2.0 -> "2"``; other values use ``str``.
    """
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float) and math.isfinite(value) and value == int(value):
        return str(int(value))
    return str(value)


@dataclass(frozen=True, slots=True, kw_only=True)
class DataSpec:
    """The plan's ``data`` section as the data layer sees it.

    Attributes
    ----------
    file : Path
        The data file (already resolved against the plan's folder by the engine).
    group : str
        Column holding the group label.
    responses : tuple of str
        One column per endpoint.
    levels : tuple
        The expected groups, in report order; compared as text (see :func:`level_label`).
    missing : {"drop", "reject"}
        Empty / NA response cells are dropped and counted, or each one is a problem.
    non_detect_rule : {"reject", "substitute"}
        Non-detects (``<0.5``, ``ND``, ...) are each a problem, or replaced by
        ``non_detect_fraction`` times their limit.
    non_detect_fraction : float
        Fraction of the limit used by ``substitute`` (common practice: 0.5, or 1/sqrt(2)).
    non_detect_limit : float or None
        Limit for bare non-detects (``ND``, ``<LOD``) that carry no number.
    min_n : int
        Fewest values a group may have, per endpoint, after missing / non-detect handling.
    response_kind : {"continuous", "count", "proportion"}
        ``count``: non-negative whole numbers; ``proportion``: values in [0, 1].
    sheet : str or None
        Excel sheet name; None means the first sheet.
    format : {"auto", "csv", "tsv", "parquet", "excel"}
        ``auto`` decides by the file's extension.
    label : str or None
        How messages name the file (e.g. the path as written in the plan); None uses ``file``.
    """

    file: Path
    group: str
    responses: tuple[str, ...]
    levels: tuple[object, ...]
    missing: Missing = "reject"
    non_detect_rule: NonDetectRule = "reject"
    non_detect_fraction: float = 0.5
    non_detect_limit: float | None = None
    min_n: int = 2
    response_kind: ResponseKind = "continuous"
    sheet: str | None = None
    format: FileFormat = "auto"
    label: str | None = field(default=None)

    def __post_init__(self) -> None:
        object.__setattr__(self, "file", Path(self.file))
        if isinstance(self.responses, str):
            object.__setattr__(self, "responses", (self.responses,))
        object.__setattr__(self, "responses", tuple(self.responses))
        object.__setattr__(self, "levels", tuple(self.levels))
        _one_of("missing", self.missing, _MISSING)
        _one_of("non_detect_rule", self.non_detect_rule, _ND_RULES)
        _one_of("response_kind", self.response_kind, _KINDS)
        _one_of("format", self.format, _FORMATS)
        if not self.responses:
            raise ValueError("DataSpec.responses must name at least one column.")
        if len(set(self.responses)) != len(self.responses):
            raise ValueError("DataSpec.responses names a column more than once.")
        if self.group in self.responses:
            raise ValueError(f"column {self.group!r} cannot be both the group and a response.")
        labels = [level_label(v) for v in self.levels]
        if len(labels) < 1:
            raise ValueError("DataSpec.levels must list at least one level.")
        if len(set(labels)) != len(labels):
            raise ValueError("DataSpec.levels lists a level more than once.")
        if not 0 < self.non_detect_fraction <= 1:
            raise ValueError("DataSpec.non_detect_fraction must be in (0, 1].")
        if self.non_detect_limit is not None and not (
            math.isfinite(self.non_detect_limit) and self.non_detect_limit > 0
        ):
            raise ValueError("DataSpec.non_detect_limit must be a positive finite number.")
        if isinstance(self.min_n, bool) or not isinstance(self.min_n, int) or self.min_n < 1:
            raise ValueError("DataSpec.min_n must be a whole number >= 1.")

    @property
    def level_labels(self) -> tuple[str, ...]:
        """The levels as text, in report order."""
        return tuple(level_label(v) for v in self.levels)

    @property
    def display_name(self) -> str:
        """How messages name the data file."""
        return self.label if self.label is not None else str(self.file)


def _one_of(name: str, value: object, allowed: tuple[str, ...]) -> None:
    if value not in allowed:
        raise ValueError(f"DataSpec.{name} is {value!r}; use one of {', '.join(allowed)}.")
