"""Reading data files: formats, row numbers, exact cell text, and read errors."""

from __future__ import annotations

import hashlib
import sys
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest

from planrunner.data import DataSpec, check_data, read_table
from planrunner.errors import DataError

FIXTURES = Path(__file__).parents[1] / "data"


def make_spec(path: Path, **kw) -> DataSpec:
    base = dict(file=path, group="g", responses=("y",), levels=("a", "b"), min_n=1,
                label=path.name)
    base.update(kw)
    return DataSpec(**base)


def write(tmp_path: Path, text: str, name: str = "data.csv") -> Path:
    p = tmp_path / name
    p.write_bytes(text.encode("utf-8"))
    return p


def read_error(spec: DataSpec) -> str:
    with pytest.raises(DataError) as info:
        read_table(spec)
    assert info.value.exit_code == 3
    return str(info.value)


# --------------------------------------------------------------------------- CSV / TSV


def test_csv_cells_are_exact_text_with_file_row_numbers(tmp_path):
    p = write(tmp_path, "g,y\na,1000000000000.4\nb, 0.10 \na,NA\n")
    table = read_table(make_spec(p))
    assert table.format == "csv" and table.delimiter == "," and table.text_only
    assert table.columns == ("g", "y")
    assert table.rows.tolist() == [2, 3, 4]  # header is row 1
    assert table.column("y").tolist() == ["1000000000000.4", " 0.10 ", "NA"]
    assert table.sha256 == hashlib.sha256(p.read_bytes()).hexdigest()


def test_blank_rows_are_skipped_and_listed_row_numbers_kept(tmp_path):
    p = write(tmp_path, "g,y\na,1\n\n,\nb,2\n")
    table = read_table(make_spec(p))
    assert table.rows.tolist() == [2, 5]
    assert table.blank_rows == (3, 4)


def test_byte_order_mark_and_header_whitespace(tmp_path):
    p = tmp_path / "bom.csv"
    p.write_bytes(b"\xef\xbb\xbf g ,y\na,1\nb,2\n")
    table = read_table(make_spec(p))
    assert table.columns == ("g", "y")


def test_tsv_by_extension(tmp_path):
    p = write(tmp_path, "g\ty\na\t1,5\nb\t2\n", "data.tsv")
    table = read_table(make_spec(p))
    assert table.format == "tsv" and table.delimiter == "\t"
    assert table.column("y").tolist() == ["1,5", "2"]  # a comma inside a TSV cell stays text


@pytest.mark.parametrize("delim", ["\t", ";", ","])
def test_txt_delimiter_is_sniffed(tmp_path, delim):
    p = write(tmp_path, f"g{delim}y\na{delim}1.5\nb{delim}2\na{delim}3\n", "data.txt")
    table = read_table(make_spec(p))
    assert table.delimiter == delim
    assert table.column("y").tolist() == ["1.5", "2", "3"]


def test_format_option_overrides_extension(tmp_path):
    p = write(tmp_path, "g\ty\na\t1\nb\t2\n", "export.dat")
    table = read_table(make_spec(p, format="tsv"))
    assert table.columns == ("g", "y")


def test_fixture_file_reads(tmp_path):
    spec = make_spec(FIXTURES / "wash_counts_clean.csv", group="protocol",
                     responses=("cfu_per_g",), levels=("tap", "chlorine", "ozone"))
    table = read_table(spec)
    assert table.n_rows == 9


# --------------------------------------------------------------------------- read errors


def test_missing_file(tmp_path):
    msg = read_error(make_spec(tmp_path / "nope.csv"))
    assert msg == "nope.csv: the data file does not exist."


def test_folder_is_not_a_file(tmp_path):
    d = tmp_path / "folder.csv"
    d.mkdir()
    assert "folder.csv: this is a folder" in read_error(make_spec(d))


@pytest.mark.parametrize("text", ["", "\n\n", "   \n"])
def test_empty_file(tmp_path, text):
    p = write(tmp_path, text)
    assert read_error(make_spec(p)) == "data.csv: the file is empty."


def test_header_only(tmp_path):
    p = write(tmp_path, "g,y\n")
    assert read_error(make_spec(p)) == "data.csv: the file has a header row but no data rows."


def test_duplicate_column_names(tmp_path):
    p = write(tmp_path, "g,y,y\na,1,2\n")
    msg = read_error(make_spec(p))
    assert msg == ("data.csv: the header names column 'y' more than once; every column needs "
                   "its own name.")


def test_not_utf8(tmp_path):
    p = tmp_path / "latin.csv"
    p.write_bytes("g,y\na,1\nb,caf\u00e9\n".encode("latin-1"))
    msg = read_error(make_spec(p))
    assert msg.startswith("latin.csv: the file is not valid UTF-8 text (first invalid byte on "
                          "line 3)")


def test_row_with_too_many_fields(tmp_path):
    p = write(tmp_path, "g,y\na,1\nb,2,3\n")
    msg = read_error(make_spec(p))
    assert msg == ("data.csv row 3: the row has 3 fields but the header has 2 (an unquoted "
                   "delimiter inside a value, such as a decimal comma?).")


def test_semicolon_file_named_csv(tmp_path):
    p = write(tmp_path, "g;y\na;1,5\n")
    msg = read_error(make_spec(p))
    assert "has no commas but has semicolons" in msg


def test_old_xls_is_refused(tmp_path):
    p = tmp_path / "old.xls"
    p.write_bytes(b"\xd0\xcf\x11\xe0")
    assert "old Excel .xls format is not supported" in read_error(make_spec(p))


def test_undetectable_delimiter(tmp_path):
    p = write(tmp_path, "justonecolumn\nvalue\n", "data.txt")
    assert "cannot tell which delimiter" in read_error(make_spec(p))


# --------------------------------------------------------------------------- Parquet


def test_parquet_numbers_arrive_as_numbers(tmp_path):
    import pandas as pd

    p = tmp_path / "data.parquet"
    pd.DataFrame({"g": ["a", "b", "a", "b"], "y": [1.5, 2.25, np.nan, 4.0],
                  "k": [1, 2, 3, 4]}).to_parquet(p, engine="pyarrow", index=False)
    spec = make_spec(p, responses=("y", "k"), missing="drop")
    table = read_table(spec)
    assert table.format == "parquet" and not table.text_only
    assert table.rows.tolist() == [1, 2, 3, 4]  # no header row: first record is row 1
    data = check_data(spec, table)
    y = data.endpoint("y")
    assert y.group("a").values.tolist() == [1.5]
    assert y.group("a").missing_rows == (3,)
    # binary floats: the offset path is a no-op
    assert y.offset == "0" and not y.offset_applied
    assert np.array_equal(y.group("b").offset_removed, y.group("b").values)
    # integers are exact: offset path applies (lower median of 1, 2, 3, 4 is 2)
    k = data.endpoint("k")
    assert k.offset_applied and k.offset == "2"
    assert k.group("a").offset_removed.tolist() == [-1.0, 1.0]


def test_parquet_text_and_decimal_columns(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    p = tmp_path / "data.parquet"
    table = pa.table({
        "g": pa.array(["a", "b", "b"]).dictionary_encode(),
        "y": pa.array(["3,5", "2", "x"]),
        "d": pa.array([Decimal("1000000000000.4"), Decimal("1000000000000.3"),
                       Decimal("1000000000000.5")], type=pa.decimal128(15, 1)),
    })
    pq.write_table(table, p)
    spec = make_spec(p, responses=("y",))
    with pytest.raises(DataError) as info:
        check_data(spec, read_table(spec))
    assert info.value.problems == (
        "data.parquet row 1, column 'y': '3,5' looks like a decimal comma; write 3.5",
        "data.parquet row 3, column 'y': 'x' is not a number",
    )
    spec = make_spec(p, responses=("d",))
    d = check_data(spec, read_table(spec)).endpoint("d")
    assert d.offset_applied and d.offset == "1000000000000.4"
    assert d.group("b").offset_removed.tolist() == [-0.1, 0.1]


def test_parquet_duplicate_names_and_corrupt_file(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    p = tmp_path / "dup.parquet"
    pq.write_table(pa.Table.from_arrays([pa.array(["a"]), pa.array([1.0]), pa.array([2.0])],
                                        names=["g", "y", "y"]), p)
    assert "names column 'y' more than once" in read_error(make_spec(p))
    bad = tmp_path / "bad.parquet"
    bad.write_bytes(b"this is not parquet")
    assert read_error(make_spec(bad)).startswith("bad.parquet: the file is not a readable "
                                                 "Parquet file")


def test_parquet_without_pyarrow_names_the_package(tmp_path, monkeypatch):
    p = tmp_path / "data.parquet"
    p.write_bytes(b"PAR1")
    monkeypatch.setitem(sys.modules, "pyarrow", None)
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    msg = read_error(make_spec(p))
    assert "needs the optional package 'pyarrow'" in msg and msg.startswith("data.parquet:")


# --------------------------------------------------------------------------- Excel


def _workbook(path: Path, rows_at: int = 1, sheet: str = "Sheet1", extra_sheet: bool = False):
    import datetime

    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = sheet
    r = rows_at
    ws.cell(r, 1, "g"), ws.cell(r, 2, "y")
    data = [("a", 1.5), ("b", "2.5"), ("a", None), ("b", 7), ("a", "12 mg"),
            ("b", datetime.datetime(2024, 3, 1)), ("a", True)]
    for i, (g, y) in enumerate(data, start=1):
        ws.cell(r + i, 1, g)
        ws.cell(r + i, 2, y)
    if extra_sheet:
        wb.create_sheet("Batch 2")
    wb.save(path)


def test_excel_sheet_rows_and_cell_types(tmp_path):
    p = tmp_path / "data.xlsx"
    _workbook(p, rows_at=3)
    spec = make_spec(p, missing="drop")
    table = read_table(spec)
    assert table.format == "excel" and table.sheet == "Sheet1"
    assert table.rows.tolist() == [4, 5, 6, 7, 8, 9, 10]  # sheet rows; header on row 3
    cells = table.column("y").tolist()
    assert cells[0] == 1.5 and cells[1] == "2.5" and cells[3] == 7
    with pytest.raises(DataError) as info:
        check_data(spec, table)
    assert info.value.problems == (
        "data.xlsx row 8, column 'y': '12 mg' has a unit or other text after the number; "
        "write the number only (12)",
        "data.xlsx row 9, column 'y': '2024-03-01 00:00:00' is a date or time, not a number",
        "data.xlsx row 10, column 'y': TRUE is a true/false value, not a number",
    )


def test_excel_values_and_missing_sheet(tmp_path):
    p = tmp_path / "data.xlsx"
    _workbook(p, sheet="Results", extra_sheet=True)
    msg = read_error(make_spec(p, sheet="Result"))
    assert msg == ("data.xlsx: sheet 'Result' is not in the workbook (did you mean "
                   "'Results'?); the sheets are 'Results', 'Batch 2'.")
    import openpyxl

    wb = openpyxl.load_workbook(p)
    ws = wb["Results"]
    for r in range(6, 9):
        ws.cell(r, 2, None)
    ws.delete_rows(6, 3)
    wb.save(p)
    spec = make_spec(p, sheet="Results", missing="drop")
    data = check_data(spec, read_table(spec))
    y = data.endpoint("y")
    assert y.group("a").values.tolist() == [1.5]
    assert y.group("a").missing_rows == (4,)
    assert y.group("b").values.tolist() == [2.5, 7.0]
    assert y.group("b").exact == ("2.5", "7")
    # a numeric cell arrived as a binary float: the offset path is a no-op for the endpoint
    assert y.offset == "0" and not y.offset_applied


def test_excel_corrupt_and_missing_openpyxl(tmp_path, monkeypatch):
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"not a zip")
    assert read_error(make_spec(bad)).startswith("bad.xlsx: the file is not a readable .xlsx")
    monkeypatch.setitem(sys.modules, "openpyxl", None)
    msg = read_error(make_spec(bad))
    assert "needs the optional package 'openpyxl'" in msg
