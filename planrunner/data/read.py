"""Read a data file into a :class:`RawTable`: every cell as written, with its file row number.

Formats
-------
* CSV / TSV (``.csv``, ``.tsv``, ``.tab``; ``.txt`` and other extensions are sniffed for a
  comma, tab, semicolon or bar delimiter): read with pandas as text only (``dtype=str``, no
  NA conversion), so every cell is exactly the text written in the file. The file must be
  UTF-8 (a byte-order mark is allowed). Row numbers are record numbers as a spreadsheet shows
  them: the header is row 1 and the first data row is row 2. (A quoted cell spanning several
  lines counts as one row.)
* Parquet (``.parquet``, ``.pq``; needs the optional package pyarrow): numeric columns arrive
  as numbers, text columns as text, decimal columns as exact :class:`decimal.Decimal`. A
  Parquet file has no header row, so the first record is row 1. The pandas index stored in the
  file's metadata is not restored; an index written as a column stays a column.
* Excel (``.xlsx``, ``.xlsm``; needs the optional package openpyxl): numeric cells arrive as
  numbers, text cells as text; row numbers are the sheet's row numbers. The header is the
  first non-empty row of the sheet (``DataSpec.sheet``, or the first sheet). Formulas are read
  as the value Excel last saved with them; a formula never calculated reads as empty.

Column names have surrounding whitespace removed. Rows in which every cell is empty are
skipped and listed in :attr:`RawTable.blank_rows`. The SHA-256 of the file is computed while
the bytes are read, and the table is parsed from exactly those bytes.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import DataError
from .spec import DataSpec

if TYPE_CHECKING:  # pragma: no cover
    import pandas

__all__ = ["RawTable", "read_table", "sha256_of_file"]

_CHUNK = 1 << 20
_CSV_EXT = {".csv": ","}
_TSV_EXT = {".tsv": "\t", ".tab": "\t"}
_PARQUET_EXT = {".parquet", ".pq"}
_EXCEL_EXT = {".xlsx", ".xlsm"}
_SNIFF_DELIMITERS = ",\t;|"


@dataclass(frozen=True, slots=True, kw_only=True)
class RawTable:
    """A data file as read, before any checks.

    Attributes
    ----------
    file : Path
        The file read.
    label : str
        How messages name the file.
    format : str
        ``"csv"``, ``"tsv"``, ``"parquet"`` or ``"excel"``.
    columns : tuple of str
        Column names in file order (surrounding whitespace removed; ``""`` for an unnamed one).
    frame : pandas.DataFrame
        One column per file column, labelled by position ``0 .. len(columns) - 1``. CSV/TSV
        cells are ``str``; Parquet/Excel cells are ``str``, ``int``, ``float``, ``Decimal``,
        other Python objects, or None / NaN for an empty cell.
    rows : ndarray of int64
        The file row number of each frame row.
    blank_rows : tuple of int
        Rows skipped because every cell was empty.
    sha256 : str
        SHA-256 of the file's bytes (hex).
    delimiter : str or None
        The CSV/TSV delimiter used.
    sheet : str or None
        The Excel sheet read.
    text_only : bool
        True when every cell is the exact text written in the file (CSV/TSV).
    """

    file: Path
    label: str
    format: str
    columns: tuple[str, ...]
    frame: "pandas.DataFrame"
    rows: np.ndarray
    blank_rows: tuple[int, ...]
    sha256: str
    delimiter: str | None = None
    sheet: str | None = None
    text_only: bool = False

    @property
    def n_rows(self) -> int:
        """Number of data rows read (blank rows not included)."""
        return int(self.rows.shape[0])

    def position(self, name: str) -> int | None:
        """Position of column ``name``, or None when the file has no such column."""
        try:
            return self.columns.index(name)
        except ValueError:
            return None

    def column(self, name: str) -> "pandas.Series":
        """The cells of column ``name``; raises :class:`DataError` if there is none."""
        pos = self.position(name)
        if pos is None:
            raise DataError(f"{self.label}: {column_not_found(name, self.columns)}")
        return self.frame[pos]


def column_not_found(name: str, columns: tuple[str, ...]) -> str:
    """One sentence: the column is absent, a close match, and the columns there are."""
    named = [c for c in columns if c]
    hint = _close(name, named)
    listing = ", ".join(repr(c) for c in named[:20]) + (" ..." if len(named) > 20 else "")
    return f"column {name!r} is not in the file{hint}; the file has columns {listing}"


def _close(word: str, choices: list[str]) -> str:
    lower = {c.lower(): c for c in choices}
    if word.lower() in lower and lower[word.lower()] != word:
        return f" (did you mean {lower[word.lower()]!r}?)"
    match = difflib.get_close_matches(word, choices, n=1)
    return f" (did you mean {match[0]!r}?)" if match else ""


def sha256_of_file(path: Path) -> str:
    """SHA-256 of a file, read in 1 MiB chunks."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(_CHUNK), b""):
            digest.update(chunk)
    return digest.hexdigest()


def read_table(spec: DataSpec) -> RawTable:
    """Read ``spec.file`` into a :class:`RawTable`.

    Raises
    ------
    DataError
        The file is missing, unreadable, empty, not UTF-8 (CSV/TSV), has duplicate column
        names or no data rows, or needs an optional package that is not installed.
    """
    path = Path(spec.file)
    label = spec.display_name
    fmt, delimiter = _choose_format(spec, path, label)
    data, digest = _read_bytes(path, label)
    if not data.strip():
        raise DataError(f"{label}: the file is empty.")
    if fmt in ("csv", "tsv"):
        header, frame, rows, delimiter = _parse_text(data, delimiter, path, label)
        sheet = None
    elif fmt == "parquet":
        header, frame, rows = _parse_parquet(data, label)
        sheet = None
    else:
        header, frame, rows, sheet = _parse_excel(data, spec.sheet, label)
    _check_header(header, label)
    frame, rows, blank = _drop_blank_rows(frame, rows, fmt in ("csv", "tsv"))
    if frame.shape[0] == 0:
        raise DataError(f"{label}: the file has a header row but no data rows.")
    rows = np.asarray(rows, dtype=np.int64)
    rows.setflags(write=False)
    return RawTable(
        file=path,
        label=label,
        format=fmt,
        columns=tuple(header),
        frame=frame,
        rows=rows,
        blank_rows=blank,
        sha256=digest,
        delimiter=delimiter,
        sheet=sheet,
        text_only=fmt in ("csv", "tsv"),
    )


def _choose_format(spec: DataSpec, path: Path, label: str) -> tuple[str, str | None]:
    ext = path.suffix.lower()
    fmt = spec.format
    if fmt == "csv":
        return "csv", ","
    if fmt == "tsv":
        return "tsv", "\t"
    if fmt in ("parquet", "excel"):
        return fmt, None
    if ext in _CSV_EXT:
        return "csv", _CSV_EXT[ext]
    if ext in _TSV_EXT:
        return "tsv", _TSV_EXT[ext]
    if ext in _PARQUET_EXT:
        return "parquet", None
    if ext in _EXCEL_EXT:
        return "excel", None
    if ext == ".xls":
        raise DataError(
            f"{label}: the old Excel .xls format is not supported; save the sheet as .xlsx "
            "or as CSV (UTF-8)."
        )
    return "csv", None  # delimiter sniffed from the text


def _read_bytes(path: Path, label: str) -> tuple[bytes, str]:
    digest = hashlib.sha256()
    parts: list[bytes] = []
    try:
        with open(path, "rb") as fh:
            for chunk in iter(lambda: fh.read(_CHUNK), b""):
                digest.update(chunk)
                parts.append(chunk)
    except FileNotFoundError:
        raise DataError(f"{label}: the data file does not exist.") from None
    except IsADirectoryError:
        raise DataError(f"{label}: this is a folder, not a data file.") from None
    except OSError as exc:
        raise DataError(f"{label}: the data file cannot be read ({exc.strerror}).") from None
    return b"".join(parts), digest.hexdigest()


def _parse_text(
    data: bytes, delimiter: str | None, path: Path, label: str
) -> tuple[list[str], "pandas.DataFrame", np.ndarray, str]:
    import pandas as pd

    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise DataError(
            f"{label}: the file is not valid UTF-8 text (first invalid byte on line {line}); "
            "save it with UTF-8 encoding."
        ) from None
    first_line = text.split("\n", 1)[0]
    if delimiter is None:
        delimiter = _sniff(text, label)
    elif delimiter == "," and "," not in first_line:
        for other, name in ((";", "semicolons"), ("\t", "tabs")):
            if other in first_line:
                raise DataError(
                    f"{label}: the header row has no commas but has {name}; this looks like "
                    f"a file separated by {name}. Save it as comma-separated CSV"
                    + (" (or name it .tsv)." if other == "\t" else ".")
                )
    try:
        frame = pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            header=None,
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=False,
            engine="c",
        )
    except pd.errors.EmptyDataError:
        raise DataError(f"{label}: the file is empty.") from None
    except (pd.errors.ParserError, ValueError) as exc:
        ragged = _ragged_row(text, delimiter)
        if ragged is not None:
            row, fields, width = ragged
            raise DataError(
                f"{label} row {row}: the row has {fields} fields but the header has {width}"
                + (" (an unquoted delimiter inside a value, such as a decimal comma?)"
                   if fields > width else "")
                + "."
            ) from None
        reason = str(exc).strip()
        raise DataError(f"{label}: the file cannot be read as delimited text ({reason}).") from None
    header = [str(v).strip() for v in frame.iloc[0].tolist()]
    body = frame.iloc[1:].reset_index(drop=True)
    body.columns = range(body.shape[1])
    rows = np.arange(2, body.shape[0] + 2, dtype=np.int64)
    return header, body, rows, delimiter


def _ragged_row(text: str, delimiter: str) -> tuple[int, int, int] | None:
    """The first row with more fields than the header (row number, fields, header width)."""
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    width = None
    try:
        for number, record in enumerate(reader, start=1):
            if width is None:
                width = len(record)
            elif len(record) > width:
                return number, len(record), width
    except csv.Error:
        return None
    return None


def _sniff(text: str, label: str) -> str:
    sample = text[:65536]
    try:
        dialect = csv.Sniffer().sniff(sample, delimiters=_SNIFF_DELIMITERS)
    except csv.Error:
        first = sample.split("\n", 1)[0]
        counts = {d: first.count(d) for d in _SNIFF_DELIMITERS}
        best = max(counts, key=lambda d: counts[d])
        if counts[best] == 0:
            raise DataError(
                f"{label}: cannot tell which delimiter separates the columns; name the file "
                ".csv (commas) or .tsv (tabs)."
            ) from None
        return best
    return dialect.delimiter


def _parse_parquet(data: bytes, label: str) -> tuple[list[str], "pandas.DataFrame", np.ndarray]:
    try:
        import pyarrow.parquet as pq
    except ImportError:
        raise DataError(
            f"{label}: reading Parquet files needs the optional package 'pyarrow', which is "
            "not installed (pip install pyarrow)."
        ) from None
    import pyarrow as pa

    try:
        parquet = pq.ParquetFile(pa.BufferReader(data))
        header = [str(n).strip() for n in parquet.schema_arrow.names]
        _check_header(header, label)
        table = parquet.read()
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise DataError(f"{label}: the file is not a readable Parquet file ({exc}).") from None
    import pandas as pd

    columns = {}
    for i, col in enumerate(table.columns):
        series = col.to_pandas()
        if isinstance(series.dtype, pd.CategoricalDtype):
            series = series.astype(object)
        columns[i] = series.reset_index(drop=True)
    frame = pd.DataFrame(columns) if columns else pd.DataFrame()
    rows = np.arange(1, frame.shape[0] + 1, dtype=np.int64)
    return header, frame, rows


def _parse_excel(
    data: bytes, sheet: str | None, label: str
) -> tuple[list[str], "pandas.DataFrame", np.ndarray, str]:
    try:
        import openpyxl
    except ImportError:
        raise DataError(
            f"{label}: reading Excel files needs the optional package 'openpyxl', which is "
            "not installed (pip install openpyxl)."
        ) from None
    import zipfile

    import pandas as pd

    try:
        workbook = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError) as exc:
        raise DataError(f"{label}: the file is not a readable .xlsx workbook ({exc}).") from None
    except Exception as exc:  # openpyxl raises its own InvalidFileException and others
        raise DataError(f"{label}: the file is not a readable .xlsx workbook ({exc}).") from None
    try:
        names = list(workbook.sheetnames)
        if sheet is None:
            if not names:
                raise DataError(f"{label}: the workbook has no sheets.")
            sheet = names[0]
        elif sheet not in names:
            raise DataError(
                f"{label}: sheet {sheet!r} is not in the workbook{_close(sheet, names)}; "
                f"the sheets are {', '.join(repr(n) for n in names)}."
            )
        ws = workbook[sheet]
        header: list[str] | None = None
        width = 0
        body: list[tuple[Any, ...]] = []
        rows: list[int] = []
        for number, values in enumerate(ws.iter_rows(min_row=1, values_only=True), start=1):
            if header is None:
                if all(_empty(v) for v in values):
                    continue
                cells = list(values)
                while cells and _empty(cells[-1]):
                    cells.pop()
                header = ["" if v is None else str(v).strip() for v in cells]
                width = len(header)
                continue
            row = tuple(values[:width]) + (None,) * max(0, width - len(values))
            body.append(row)
            rows.append(number)
    finally:
        workbook.close()
    if header is None:
        raise DataError(f"{label}: sheet {sheet!r} is empty.")
    frame = pd.DataFrame(body, columns=range(width), dtype=object)
    return header, frame, np.asarray(rows, dtype=np.int64), sheet


def _empty(value: Any) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


def _check_header(header: list[str], label: str) -> None:
    seen: dict[str, int] = {}
    dups: list[str] = []
    for i, name in enumerate(header):
        if not name:
            continue
        if name in seen and name not in dups:
            dups.append(name)
        seen.setdefault(name, i)
    if dups:
        listing = ", ".join(repr(d) for d in dups)
        raise DataError(
            f"{label}: the header names column{'s' if len(dups) > 1 else ''} {listing} more "
            "than once; every column needs its own name."
        )


def _drop_blank_rows(
    frame: "pandas.DataFrame", rows: np.ndarray, text_only: bool
) -> tuple["pandas.DataFrame", np.ndarray, tuple[int, ...]]:
    import pandas as pd

    if frame.shape[1] == 0 or frame.shape[0] == 0:
        return frame, rows, ()
    blank = np.ones(frame.shape[0], dtype=bool)
    for pos in frame.columns:
        col = frame[pos]
        if text_only:
            empty = col.str.strip().eq("").to_numpy(bool)
        elif pd.api.types.is_object_dtype(col.dtype) or pd.api.types.is_string_dtype(col.dtype):
            empty = np.fromiter((_empty_cell(v) for v in col), dtype=bool, count=col.shape[0])
        else:
            empty = col.isna().to_numpy(bool)
        blank &= empty
        if not blank.any():
            return frame, rows, ()
    keep = ~blank
    skipped = tuple(int(r) for r in rows[blank])
    return frame.loc[keep].reset_index(drop=True), rows[keep], skipped


def _empty_cell(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, float):
        return value != value
    if isinstance(value, str):
        return value.strip() == ""
    try:
        import pandas as pd

        return bool(pd.isna(value)) if not hasattr(value, "__len__") else False
    except (TypeError, ValueError):
        return False
