"""Check a :class:`RawTable` against a :class:`DataSpec` before any statistics.

Every problem in the file is collected first; then one :class:`DataError` is raised whose
``problems`` list each one as ``<file> row R, column 'C': message`` (file-level problems such
as a missing column come first, then cell problems sorted by row, then per-group problems).
Nothing is coerced: a value that is not plainly a number is reported, not guessed.

Rules (these are the documented behaviour; tests pin each one)
--------------------------------------------------------------
Cells
    Surrounding whitespace is removed from every cell (group labels and responses) before it
    is read; case is kept.
Numbers
    Plain decimal text: optional sign, digits with an optional ``.`` fraction, optional
    exponent (``-3``, ``4.``, ``.5``, ``1.2e-3``). Reported, with a hint: a decimal comma
    (``3,5``), thousands separators (``1,234,567``, ``1 234``, ``1'234``), a unit or other
    text after the number (``12 mg``, ``45%``), a typographic minus sign, infinity
    (``inf``, ``Infinity``), true/false and date cells, and any other text.
Missing values
    An empty cell or, ignoring case, ``NA``, ``N/A``, ``NaN``, ``null``, ``None``,
    ``missing``. With ``missing="drop"`` each is dropped and counted per endpoint and group
    (rows listed); with ``"reject"`` each is a problem. A missing *group label* follows the
    same rule (dropped rows are excluded from every endpoint).
Non-detects
    Ignoring case and inner spaces after ``<``: ``<x`` with a number x (the limit), the bare
    forms ``ND``, ``N.D.``, ``n.d``, ``BDL``, ``not detected``, and ``<LOD``, ``<LOQ``,
    ``<DL``, ``<MDL``, ``<MQL``, ``<QL``, ``<RL``. (Values below a quantitation limit are
    treated as left-censored like non-detects.) Rule ``reject``: each is a problem. Rule
    ``substitute``: the value becomes ``fraction x limit`` computed exactly in decimal, with
    the limit from ``<x`` or else ``non_detect_limit`` (a bare non-detect without either is a
    problem); each substitution is listed with its row.
Group labels
    Compared as text with the plan's levels (numbers in the plan become text, ``1 -> "1"``).
    Case matters: ``Tap`` is not the level ``tap``; it is reported as an unknown group with
    the suggestion. Every level must have at least one row.
Response kinds
    ``count``: measured values must be whole numbers >= 0 (``3.0`` is 3); ``proportion``:
    in [0, 1]. Substituted non-detects are not subject to these checks.
min_n
    Each group of each endpoint needs ``min_n`` values after missing values are dropped and
    non-detects handled. Cells reported as problems (including missing values under
    ``missing="reject"``) count as potential values here, so a shortfall is only reported
    when fixing those cells could not cure it.
Speed
    Cells are classified with vectorised pandas string operations; only cells that are not
    plain numbers or missing tokens (usually few) are examined one by one. An 18,009-row
    file checks in about 0.05 s.
"""

from __future__ import annotations

import decimal
import difflib
import math
import re
from dataclasses import dataclass, field
from decimal import Decimal
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable

import numpy as np

from ..errors import DataError
from .decimal_exact import exact_offset_values
from .read import RawTable, column_not_found
from .spec import DataSpec, level_label

if TYPE_CHECKING:  # pragma: no cover
    import pandas

__all__ = [
    "CheckedData",
    "DOMAINS",
    "EndpointData",
    "ExcludedRow",
    "GroupData",
    "MAX_LISTED_PROBLEMS",
    "MISSING_TOKENS",
    "NonDetect",
    "check_data",
    "check_domain",
    "data_error",
]

#: Cell texts read as a missing value (compared ignoring case, after stripping whitespace).
MISSING_TOKENS = frozenset({"", "na", "n/a", "nan", "null", "none", "missing"})
#: Problems listed in a DataError before "... and N more".
MAX_LISTED_PROBLEMS = 50
#: Domains accepted by :func:`check_domain`, with the condition shown in messages.
DOMAINS = {
    "positive": "> 0",
    "nonnegative": ">= 0",
    "unit_interval": "in [0, 1]",
    "open_unit_interval": "in (0, 1)",
    "any": "finite",
}

_UNSIGNED = r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_NUM = r"[+-]?" + _UNSIGNED
_NUM_RE = re.compile(_NUM)
_ND_LIMIT_RE = re.compile(r"<\s*(" + _NUM + r")")
_ND_LIMIT_COMMA_RE = re.compile(r"<\s*(\d+),(\d+)")
_ND_BARE_RE = re.compile(
    r"(?:nd|n\.\s?d\.?|bdl|not\s+detected|<\s*(?:lod|loq|dl|mdl|mql|ql|rl))", re.IGNORECASE
)
_INF_RE = re.compile(r"[+-]?(?:inf|infinity|\u221e)", re.IGNORECASE)
_DEC_COMMA_RE = re.compile(r"([+-]?\d*),(\d+)")
_THOUSANDS_RE = re.compile(r"([+-]?\d{1,3})((?:[,\u00a0\u202f\u2009 ']\d{3})+)(\.\d+)?")
_EURO_RE = re.compile(r"([+-]?\d{1,3})((?:\.\d{3})+),(\d+)")
_UNIT_RE = re.compile(r"(" + _NUM + r")\s*([^\d\s.,+-][^\d]*)")  # a suffix without digits
_MINUS_RE = re.compile(r"[\u2212\u2013\u2014](" + _UNSIGNED + ")")

_USED, _MISSING, _ND, _BAD = 0, 1, 2, 3


# --------------------------------------------------------------------------- result objects


@dataclass(frozen=True, slots=True, kw_only=True)
class NonDetect:
    """A non-detect replaced by a fraction of its limit."""

    row: int
    text: str  #: the cell as written
    limit: str  #: the limit used, decimal text
    value: str  #: the substituted value, decimal text


@dataclass(frozen=True, slots=True, kw_only=True)
class ExcludedRow:
    """A row (or one cell of it) left out, and why. ``column`` None means the whole row."""

    row: int
    column: str | None
    reason: str


@dataclass(frozen=True, slots=True, kw_only=True)
class GroupData:
    """The values of one group for one endpoint, in file order.

    Attributes
    ----------
    level : str
    values : ndarray of float64
        Plain values (each correctly rounded from the file's text).
    offset_removed : ndarray of float64
        ``value - offset`` computed exactly, then rounded (see
        :mod:`planrunner.data.decimal_exact`); equals ``values`` when the offset is ``"0"``.
    rows : ndarray of int64
        The file row of each value.
    exact : tuple of str
        Each value as decimal text: as written for text cells, the substituted value for
        non-detects, the shortest round-trip text for binary floats.
    missing_rows : tuple of int
        Rows of this group whose value was missing and dropped.
    non_detects : tuple of NonDetect
        Substituted non-detects (their values are included in ``values``).
    """

    level: str
    values: np.ndarray
    offset_removed: np.ndarray
    rows: np.ndarray
    exact: tuple[str, ...]
    missing_rows: tuple[int, ...]
    non_detects: tuple[NonDetect, ...]

    @property
    def n(self) -> int:
        return int(self.values.shape[0])


@dataclass(frozen=True, slots=True, kw_only=True)
class EndpointData:
    """One response column, split into the plan's groups (in the plan's level order).

    ``offset`` is the decimal text removed exactly from every value to give
    ``offset_removed`` (``"0"`` and ``offset_applied`` False when some value arrived as a
    binary float). ``used`` marks, over :attr:`CheckedData.rows`, the rows this endpoint uses
    (its complete-case pattern).
    """

    name: str
    groups: tuple[GroupData, ...]
    offset: str
    offset_applied: bool
    used: np.ndarray

    @property
    def levels(self) -> tuple[str, ...]:
        return tuple(g.level for g in self.groups)

    @property
    def rows_used(self) -> int:
        return sum(g.n for g in self.groups)

    @property
    def missing_dropped(self) -> dict[str, int]:
        return {g.level: len(g.missing_rows) for g in self.groups}

    @property
    def non_detects_substituted(self) -> dict[str, int]:
        return {g.level: len(g.non_detects) for g in self.groups}

    @property
    def pattern_key(self) -> bytes:
        """A hashable key of :attr:`used`: endpoints with equal keys use the same rows."""
        return np.packbits(self.used).tobytes() + self.used.shape[0].to_bytes(8, "little")

    def values(self) -> tuple[np.ndarray, ...]:
        """Plain float64 values per group (for transformations)."""
        return tuple(g.values for g in self.groups)

    def offset_removed(self) -> tuple[np.ndarray, ...]:
        """Offset-removed float64 values per group (for location-invariant analyses)."""
        return tuple(g.offset_removed for g in self.groups)

    def group(self, level: object) -> GroupData:
        label = level_label(level)
        for g in self.groups:
            if g.level == label:
                return g
        raise ValueError(f"level {label!r} is not one of {', '.join(self.levels)}")


@dataclass(frozen=True, slots=True, kw_only=True)
class CheckedData:
    """The data after every check passed: arrays per endpoint and group, and the counts.

    Attributes
    ----------
    file, label, format, sha256, delimiter, sheet
        Where the data came from (``sha256`` of the file's bytes, hex).
    group : str
        The group column.
    levels : tuple of str
        The plan's levels, in report order.
    response_kind : str
    rows : ndarray of int64
        File row numbers of all data rows read (blank rows not included).
    blank_rows : tuple of int
    endpoints : tuple of EndpointData
        In the plan's order of responses.
    excluded : tuple of ExcludedRow
        Every row or cell left out, with the reason, sorted by row.
    """

    file: Path
    label: str
    format: str
    sha256: str
    group: str
    levels: tuple[str, ...]
    response_kind: str
    rows: np.ndarray
    blank_rows: tuple[int, ...]
    endpoints: tuple[EndpointData, ...]
    excluded: tuple[ExcludedRow, ...]
    delimiter: str | None = None
    sheet: str | None = None

    @property
    def rows_read(self) -> int:
        """Data rows read (blank rows not included)."""
        return int(self.rows.shape[0])

    @property
    def responses(self) -> tuple[str, ...]:
        return tuple(e.name for e in self.endpoints)

    def endpoint(self, name: str) -> EndpointData:
        for e in self.endpoints:
            if e.name == name:
                return e
        raise ValueError(f"{name!r} is not an endpoint; the endpoints are {self.responses}")

    def batches(self) -> tuple[tuple[str, ...], ...]:
        """Endpoints grouped by complete-case pattern (first appearance order)."""
        groups: dict[tuple[bytes, tuple[int, ...]], list[str]] = {}
        for e in self.endpoints:
            key = (e.pattern_key, tuple(g.n for g in e.groups))
            groups.setdefault(key, []).append(e.name)
        return tuple(tuple(v) for v in groups.values())

    def counts(self) -> dict[str, Any]:
        """Plain counts for the log: rows read and, per endpoint, used / dropped / substituted."""
        return {
            "rows_read": self.rows_read,
            "blank_rows": list(self.blank_rows),
            "endpoints": {
                e.name: {
                    "rows_used": e.rows_used,
                    "n": {g.level: g.n for g in e.groups},
                    "missing_dropped": e.missing_dropped,
                    "missing_rows": {g.level: list(g.missing_rows) for g in e.groups},
                    "non_detects_substituted": e.non_detects_substituted,
                    "non_detect_rows": {
                        g.level: [nd.row for nd in g.non_detects] for g in e.groups
                    },
                    "offset": e.offset,
                }
                for e in self.endpoints
            },
        }


# --------------------------------------------------------------------------- problems


@dataclass
class _Problems:
    label: str
    columns: tuple[str, ...]
    _file: list[str] = field(default_factory=list)
    _cells: list[tuple[int, int, int, str]] = field(default_factory=list)
    _groups: list[str] = field(default_factory=list)

    def file(self, text: str) -> None:
        self._file.append(f"{self.label}: {text}")

    def column(self, column: str, text: str) -> None:
        self._groups.append(f"{self.label}, column {column!r}: {text}")

    def cell(self, row: int, pos: int, text: str) -> None:
        self._cells.append((row, pos, len(self._cells), text))

    def __len__(self) -> int:
        return len(self._file) + len(self._cells) + len(self._groups)

    def sorted(self) -> list[str]:
        cells = [
            f"{self.label} row {r}, column {self.columns[p]!r}: {t}"
            for r, p, _, t in sorted(self._cells)
        ]
        return self._file + cells + self._groups


def data_error(
    label: str, problems: Iterable[str], what: str = "the data were rejected"
) -> DataError:
    """One DataError listing ``problems`` (at most :data:`MAX_LISTED_PROBLEMS`, then a count)."""
    items = list(problems)
    shown = items[:MAX_LISTED_PROBLEMS]
    if len(items) > MAX_LISTED_PROBLEMS:
        shown.append(f"... and {len(items) - MAX_LISTED_PROBLEMS} more")
    n = len(items)
    return DataError(
        f"{label}: {what}: {n} problem{'s' if n != 1 else ''} found; no statistics were "
        "computed.",
        problems=shown,
    )


# --------------------------------------------------------------------------- cell reading


def _decimal_comma_hint(text: str) -> str | None:
    m = _EURO_RE.fullmatch(text)
    if m:
        fixed = m.group(1) + m.group(2).replace(".", "") + "." + m.group(3)
        return f"{text!r} uses '.' between thousands and a decimal comma; write {fixed}"
    m = _THOUSANDS_RE.fullmatch(text)
    if m:
        digits = m.group(1) + re.sub(r"\D", "", m.group(2)) + (m.group(3) or "")
        groups = m.group(2)
        if groups.count(",") == 1 and groups.startswith(",") and m.group(3) is None:
            comma = m.group(1) + "." + groups[1:]
            return (
                f"{text!r} has a comma: write {digits} if it separates thousands, or {comma} "
                "if it is a decimal comma"
            )
        return f"{text!r} has thousands separators; write {digits}"
    m = _DEC_COMMA_RE.fullmatch(text)
    if m:
        whole = m.group(1) if m.group(1) not in ("", "+", "-") else m.group(1) + "0"
        return f"{text!r} looks like a decimal comma; write {whole}.{m.group(2)}"
    return None


def _bad_text(text: str) -> str:
    """The message for text that is neither a number, missing nor a non-detect."""
    if _INF_RE.fullmatch(text):
        return f"{text!r} is not a finite number"
    hint = _decimal_comma_hint(text)
    if hint:
        return hint
    m = _MINUS_RE.fullmatch(text)
    if m:
        return f"{text!r} starts with a typographic dash, not a minus sign; write -{m.group(1)}"
    m = _UNIT_RE.fullmatch(text)
    if m:
        return (
            f"{text!r} has a unit or other text after the number; write the number only "
            f"({m.group(1)})"
        )
    return f"{text!r} is not a number"


@dataclass
class _Column:
    """Per-cell reading of one response column, over all table rows."""

    status: np.ndarray  # int8 _USED/_MISSING/_ND/_BAD
    plain: np.ndarray  # float64, NaN unless used
    exact: list[Decimal | None]  # exact value where known
    text: list[str | None]  # decimal text of used values
    binary: np.ndarray  # bool: value arrived as a binary float
    nd_text: dict[int, tuple[str, str]]  # index -> (cell text, limit text)
    bad: dict[int, str]  # index -> message


def _classify_text(text: str) -> tuple[int, Any]:
    """Status and payload for one stripped text cell that is not a plain number or missing."""
    m = _ND_LIMIT_RE.fullmatch(text)
    if m:
        return _ND, m.group(1)
    if _ND_BARE_RE.fullmatch(text):
        return _ND, None
    m = _ND_LIMIT_COMMA_RE.fullmatch(text)
    if m:
        return _BAD, f"{text!r} looks like a decimal comma; write <{m.group(1)}.{m.group(2)}"
    return _BAD, _bad_text(text)


def _read_column(series: "pandas.Series", text_only: bool) -> _Column:
    n = series.shape[0]
    status = np.full(n, _BAD, dtype=np.int8)
    plain = np.full(n, np.nan)
    exact: list[Decimal | None] = [None] * n
    texts: list[str | None] = [None] * n
    binary = np.zeros(n, dtype=bool)
    nd: dict[int, str | None] = {}
    bad: dict[int, str] = {}
    other: list[tuple[int, str]] = []

    import pandas as pd

    if text_only or pd.api.types.is_object_dtype(series.dtype) or pd.api.types.is_string_dtype(
        series.dtype
    ):
        if text_only:
            stripped = series.str.strip()
            is_text = np.ones(n, dtype=bool)
        else:
            is_text = np.fromiter((isinstance(v, str) for v in series), bool, count=n)
            stripped = series.where(is_text, "").astype(str).str.strip()
        low = stripped.str.lower()
        missing = low.isin(MISSING_TOKENS).to_numpy(bool) & is_text
        number = stripped.str.fullmatch(_NUM).to_numpy(bool) & is_text
        status[missing] = _MISSING
        idx = np.flatnonzero(number)
        if idx.size:
            vals = stripped.to_numpy(dtype=object)[idx]
            for i, t in zip(idx.tolist(), vals.tolist()):
                d = Decimal(t)
                exact[i] = d
                texts[i] = t
            plain[idx] = np.fromiter((float(t) for t in vals), np.float64, count=idx.size)
            status[idx] = _USED
            for i in idx[np.isinf(plain[idx])].tolist():  # e.g. 1e400
                status[i] = _BAD
                plain[i] = np.nan
                bad[i] = f"{texts[i]!r} is too large for a 64-bit floating-point number"
        rest = np.flatnonzero(is_text & ~missing & ~number)
        svals = stripped.to_numpy(dtype=object)
        other = [(int(i), svals[i]) for i in rest]
        if not text_only:
            for i in np.flatnonzero(~is_text).tolist():
                _read_object(series.iat[i], i, status, plain, exact, texts, binary, bad)
    else:
        _read_numeric_array(series, status, plain, exact, texts, binary, bad)

    for i, t in other:
        kind, payload = _classify_text(t)
        if kind == _ND:
            status[i] = _ND
            nd[i] = payload
            texts[i] = t
        else:
            bad[i] = payload
    nd_text = {i: (texts[i] or "", lim) for i, lim in nd.items()}  # type: ignore[misc]
    return _Column(status, plain, exact, texts, binary, nd_text, bad)  # type: ignore[arg-type]


def _read_numeric_array(series, status, plain, exact, texts, binary, bad) -> None:
    arr = series.to_numpy()
    if np.issubdtype(arr.dtype, np.integer):
        status[:] = _USED
        plain[:] = arr.astype(np.float64)
        for i, v in enumerate(arr.tolist()):
            exact[i] = Decimal(int(v))
            texts[i] = str(int(v))
        return
    if arr.dtype == bool:
        for i, v in enumerate(arr.tolist()):
            bad[i] = f"{'TRUE' if v else 'FALSE'} is a true/false value, not a number"
        return
    if not np.issubdtype(arr.dtype, np.floating):
        for i in range(arr.shape[0]):
            _read_object(series.iat[i], i, status, plain, exact, texts, binary, bad)
        return
    arr = arr.astype(np.float64)
    nan = np.isnan(arr)
    inf = np.isinf(arr)
    ok = ~nan & ~inf
    status[nan] = _MISSING
    status[ok] = _USED
    plain[ok] = arr[ok]
    binary[ok] = True
    for i in np.flatnonzero(ok).tolist():
        texts[i] = repr(float(arr[i]))
    for i in np.flatnonzero(inf).tolist():
        bad[i] = f"{float(arr[i])!r} is not a finite number"


def _read_object(v, i, status, plain, exact, texts, binary, bad) -> None:
    """One non-text cell of an object column (Parquet/Excel)."""
    import datetime as _dt

    if v is None:
        status[i] = _MISSING
    elif isinstance(v, (bool, np.bool_)):
        bad[i] = f"{'TRUE' if v else 'FALSE'} is a true/false value, not a number"
    elif isinstance(v, (int, np.integer)):
        status[i] = _USED
        exact[i] = Decimal(int(v))
        texts[i] = str(int(v))
        plain[i] = float(v)
    elif isinstance(v, Decimal):
        if v.is_nan():
            status[i] = _MISSING
        elif v.is_infinite():
            bad[i] = f"'{v}' is not a finite number"
        else:
            status[i] = _USED
            exact[i] = v
            texts[i] = str(v)
            plain[i] = float(v)
    elif isinstance(v, (float, np.floating)):
        f = float(v)
        if math.isnan(f):
            status[i] = _MISSING
        elif math.isinf(f):
            bad[i] = f"{f!r} is not a finite number"
        else:
            status[i] = _USED
            binary[i] = True
            texts[i] = repr(f)
            plain[i] = f
    elif isinstance(v, (_dt.date, _dt.time, _dt.timedelta)):
        bad[i] = f"'{v}' is a date or time, not a number"
    else:
        try:
            import pandas as pd

            if pd.isna(v):
                status[i] = _MISSING
                return
        except (TypeError, ValueError):
            pass
        bad[i] = f"{str(v)!r} is not a number"


def _group_labels(series: "pandas.Series", text_only: bool) -> tuple[np.ndarray, np.ndarray]:
    """Stripped group labels as an object array, and a mask of missing labels."""
    if text_only:
        labels = series.str.strip().to_numpy(dtype=object)
    else:
        out = []
        for v in series.tolist():
            if v is None or (isinstance(v, float) and math.isnan(v)):
                out.append("")
            elif isinstance(v, str):
                out.append(v.strip())
            else:
                out.append(level_label(v.item() if isinstance(v, np.generic) else v).strip())
        labels = np.array(out, dtype=object)
    low = np.char.lower(labels.astype(str)) if labels.size else labels.astype(str)
    missing = np.isin(low, list(MISSING_TOKENS))
    return labels, missing


def _suggest(label: str, levels: tuple[str, ...]) -> str:
    by_lower = {lv.lower(): lv for lv in levels}
    if label.lower() in by_lower:
        return f" (did you mean {by_lower[label.lower()]!r}?)"
    match = difflib.get_close_matches(label, list(levels), n=1)
    return f" (did you mean {match[0]!r}?)" if match else ""


# --------------------------------------------------------------------------- main check


def check_data(spec: DataSpec, table: RawTable) -> CheckedData:
    """Check ``table`` against ``spec``; return the arrays per endpoint and group.

    Raises
    ------
    DataError
        With every problem found listed in ``.problems`` (see the module docstring for the
        rules).
    """
    label = table.label
    problems = _Problems(label, table.columns)
    levels = spec.level_labels
    n = table.n_rows
    rows = table.rows

    # Columns -------------------------------------------------------------------------
    gpos = table.position(spec.group)
    if gpos is None:
        problems.file(f"group {column_not_found(spec.group, table.columns)}")
    rpos: dict[str, int] = {}
    for name in spec.responses:
        pos = table.position(name)
        if pos is None:
            problems.file(f"response {column_not_found(name, table.columns)}")
        else:
            rpos[name] = pos

    # Group labels ----------------------------------------------------------------------
    codes = np.full(n, -1, dtype=np.int64)
    group_ok = np.zeros(n, dtype=bool)
    present = np.zeros(len(levels), dtype=np.int64)
    excluded: list[ExcludedRow] = [ExcludedRow(row=r, column=None, reason="blank row")
                                   for r in table.blank_rows]
    if gpos is not None:
        labels, gmissing = _group_labels(table.frame[gpos], table.text_only)
        index = {lv: k for k, lv in enumerate(levels)}
        codes = np.fromiter((index.get(s, -1) for s in labels), np.int64, count=n)
        group_ok = codes >= 0
        for i in np.flatnonzero(gmissing).tolist():
            if spec.missing == "drop":
                excluded.append(ExcludedRow(row=int(rows[i]), column=spec.group,
                                            reason="group label missing; row dropped"))
            else:
                problems.cell(int(rows[i]), gpos,
                              "the group label is missing (the plan's missing rule is reject)")
        unknown = np.flatnonzero(~group_ok & ~gmissing)
        hints: dict[str, str] = {}
        for i in unknown.tolist():
            s = labels[i]
            if s not in hints:
                hints[s] = _suggest(s, levels)
            problems.cell(int(rows[i]), gpos,
                          f"group {s!r} is not in the plan's levels{hints[s]}")
        present[:] = np.bincount(codes[group_ok], minlength=len(levels))
        for k, lv in enumerate(levels):
            if present[k] == 0:
                problems.file(f"level {lv!r} of column {spec.group!r} has no rows in the file")

    # Responses -------------------------------------------------------------------------
    limit_default = (
        Decimal(repr(float(spec.non_detect_limit))) if spec.non_detect_limit is not None else None
    )
    fraction = Decimal(repr(float(spec.non_detect_fraction)))
    columns: dict[str, _Column] = {}
    for name, pos in rpos.items():
        col = _read_column(table.frame[pos], table.text_only)
        for i, msg in col.bad.items():
            problems.cell(int(rows[i]), pos, msg)
        _handle_missing(col, spec, rows, pos, problems)
        _handle_non_detects(col, spec, rows, pos, problems, fraction, limit_default)
        _check_kind(col, spec, rows, pos, problems)
        columns[name] = col

    # min_n per group per endpoint (cells with problems count as potential values) --------
    if gpos is not None:
        for name, col in columns.items():
            usable = (col.status == _USED) | (col.status == _ND)
            potential = usable | (col.status == _BAD)
            if spec.missing == "reject":
                potential |= col.status == _MISSING
            n_used = np.bincount(codes[group_ok & usable], minlength=len(levels))
            n_pot = np.bincount(codes[group_ok & potential], minlength=len(levels))
            for k, lv in enumerate(levels):
                if present[k] and n_pot[k] < spec.min_n:
                    problems.column(
                        name,
                        f"group {lv!r} has {n_used[k]} value{'s' if n_used[k] != 1 else ''} "
                        "after missing values and non-detects are handled; the plan needs at "
                        f"least {spec.min_n} (min_n)",
                    )

    if len(problems):
        raise data_error(label, problems.sorted())

    # Assemble ---------------------------------------------------------------------------
    endpoints = []
    for name in spec.responses:
        col = columns[name]
        pos = rpos[name]
        used = group_ok & ((col.status == _USED) | (col.status == _ND))
        for i in np.flatnonzero(group_ok & (col.status == _MISSING)).tolist():
            excluded.append(ExcludedRow(row=int(rows[i]), column=name,
                                        reason="missing value dropped"))
        endpoints.append(_assemble(name, col, used, codes, levels, rows))
    excluded.sort(key=lambda e: (e.row, "" if e.column is None else e.column))
    rows_ro = rows.copy()
    rows_ro.setflags(write=False)
    return CheckedData(
        file=table.file,
        label=label,
        format=table.format,
        sha256=table.sha256,
        group=spec.group,
        levels=levels,
        response_kind=spec.response_kind,
        rows=rows_ro,
        blank_rows=table.blank_rows,
        endpoints=tuple(endpoints),
        excluded=tuple(excluded),
        delimiter=table.delimiter,
        sheet=table.sheet,
    )


def _handle_missing(col: _Column, spec: DataSpec, rows, pos, problems: _Problems) -> None:
    if spec.missing == "reject":
        for i in np.flatnonzero(col.status == _MISSING).tolist():
            problems.cell(int(rows[i]), pos,
                          "the value is missing (the plan's missing rule is reject)")


def _handle_non_detects(col, spec, rows, pos, problems, fraction, limit_default) -> None:
    for i, (text, limit_text) in sorted(col.nd_text.items()):
        row = int(rows[i])
        if spec.non_detect_rule == "reject":
            problems.cell(row, pos,
                          f"{text!r} is a non-detect; the plan's non-detect rule is reject")
            col.status[i] = _BAD
            continue
        if limit_text is not None:
            limit = Decimal(limit_text)
        elif limit_default is not None:
            limit = limit_default
        else:
            problems.cell(
                row, pos,
                f"{text!r} is a non-detect without a limit; substituting a fraction of the "
                "limit needs the limit, so the plan must give non_detect_limit",
            )
            col.status[i] = _BAD
            continue
        if not limit > 0:
            problems.cell(row, pos, f"{text!r} gives a limit of {limit}; a limit must be > 0")
            col.status[i] = _BAD
            continue
        value = decimal.Context(prec=200).multiply(fraction, limit)
        col.exact[i] = value
        col.plain[i] = float(value)
        col.text[i] = f"{value.normalize():f}"
        col.nd_text[i] = (text, f"{limit.normalize():f}")


def _check_kind(col: _Column, spec: DataSpec, rows, pos, problems: _Problems) -> None:
    if spec.response_kind == "continuous":
        return
    measured = np.flatnonzero(col.status == _USED)
    v = col.plain[measured]
    if spec.response_kind == "proportion":
        bad = measured[(v < 0) | (v > 1)]
        for i in bad.tolist():
            problems.cell(int(rows[i]), pos, f"proportion {col.text[i]} is outside [0, 1]")
            col.status[i] = _BAD
        return
    # count: whole numbers >= 0, judged on the exact value where there is one
    for i in measured.tolist():
        d = col.exact[i]
        whole = (d == d.to_integral_value()) if d is not None else float(col.plain[i]).is_integer()
        if not whole or col.plain[i] < 0:
            problems.cell(int(rows[i]), pos,
                          f"count {col.text[i]} is not a whole number >= 0")
            col.status[i] = _BAD


def _assemble(name, col: _Column, used, codes, levels, rows) -> EndpointData:
    idx_used = np.flatnonzero(used)
    all_exact = not bool(col.binary[idx_used].any())
    decimals = [col.exact[i] for i in idx_used.tolist()] if all_exact else None
    ev = exact_offset_values(decimals, col.plain[idx_used])
    shifted_all = np.full(codes.shape[0], np.nan)
    shifted_all[idx_used] = ev.shifted
    groups = []
    for k, lv in enumerate(levels):
        sel = np.flatnonzero(used & (codes == k))
        miss = np.flatnonzero((codes == k) & (col.status == _MISSING))
        nds = tuple(
            NonDetect(row=int(rows[i]), text=col.nd_text[i][0], limit=col.nd_text[i][1],
                      value=col.text[i] or "")
            for i in sel.tolist() if col.status[i] == _ND
        )
        values = col.plain[sel].copy()
        shifted = shifted_all[sel].copy()
        grows = rows[sel].astype(np.int64)
        for a in (values, shifted, grows):
            a.setflags(write=False)
        groups.append(GroupData(
            level=lv,
            values=values,
            offset_removed=shifted,
            rows=grows,
            exact=tuple(col.text[i] or "" for i in sel.tolist()),
            missing_rows=tuple(int(r) for r in rows[miss]),
            non_detects=nds,
        ))
    used_ro = used.copy()
    used_ro.setflags(write=False)
    return EndpointData(name=name, groups=tuple(groups), offset=ev.offset,
                        offset_applied=ev.exact and bool(idx_used.size), used=used_ro)


# --------------------------------------------------------------------------- domains


def check_domain(
    checked: CheckedData,
    endpoint: str,
    domain: str,
    shift: float = 0.0,
    *,
    transform: str | None = None,
) -> tuple[str, ...]:
    """Problems with values outside a transformation's domain, one per cell, sorted by row.

    Parameters
    ----------
    checked : CheckedData
    endpoint : str
        The response column.
    domain : {"positive", "nonnegative", "unit_interval", "open_unit_interval", "any"}
        Where ``value + shift`` must lie (``unit_interval`` is closed, [0, 1]).
    shift : float
        The constant the plan adds before transforming.
    transform : str, optional
        The transformation's name, used in messages (e.g. ``"log10"``).

    Returns
    -------
    tuple of str
        Empty when every value is inside the domain. Pass a non-empty result to
        :func:`data_error` to raise.
    """
    if domain not in DOMAINS:
        raise ValueError(f"domain {domain!r} is not one of {', '.join(DOMAINS)}")
    ep = checked.endpoint(endpoint)
    what = f"the domain of {transform}" if transform else f"the domain {domain}"
    out: list[tuple[int, str]] = []
    for g in ep.groups:
        x = g.values + shift
        if domain == "positive":
            bad = ~(x > 0)
        elif domain == "nonnegative":
            bad = ~(x >= 0)
        elif domain == "unit_interval":
            bad = ~((x >= 0) & (x <= 1))
        elif domain == "open_unit_interval":
            bad = ~((x > 0) & (x < 1))
        else:
            bad = ~np.isfinite(x)
        for j in np.flatnonzero(bad).tolist():
            out.append((
                int(g.rows[j]),
                f"{checked.label} row {int(g.rows[j])}, column {endpoint!r}: value "
                f"{g.exact[j]} is outside {what} (values must be {DOMAINS[domain]}); the "
                f"plan's shift is {_fmt_shift(shift)}",
            ))
    out.sort(key=lambda t: t[0])
    return tuple(t for _, t in out)


def _fmt_shift(shift: float) -> str:
    return str(int(shift)) if float(shift).is_integer() else repr(float(shift))
