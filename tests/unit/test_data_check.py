"""Checking data against the plan: every problem collected, with file row and column."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from planrunner.data import (
    DataSpec,
    check_data,
    check_domain,
    data_error,
    read_table,
)
from planrunner.data.check import MAX_LISTED_PROBLEMS
from planrunner.errors import DataError

FIXTURES = Path(__file__).parents[1] / "data"
LEVELS = ("tap", "chlorine", "ozone")


def make_spec(path: Path, **kw) -> DataSpec:
    base = dict(file=path, group="protocol", responses=("y",), levels=LEVELS, min_n=1,
                label="data.csv")
    base.update(kw)
    return DataSpec(**base)


def csv(tmp_path: Path, rows: list[str], header: str = "protocol,y") -> Path:
    p = tmp_path / "data.csv"
    p.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8")
    return p


def checked(tmp_path, rows, header="protocol,y", **kw):
    spec = make_spec(csv(tmp_path, rows, header), **kw)
    return check_data(spec, read_table(spec))


def problems(tmp_path, rows, header="protocol,y", **kw) -> tuple[str, ...]:
    spec = make_spec(csv(tmp_path, rows, header), **kw)
    with pytest.raises(DataError) as info:
        check_data(spec, read_table(spec))
    assert info.value.exit_code == 3
    return info.value.problems


BASE = ["tap,1", "chlorine,2", "ozone,3"]


# --------------------------------------------------------------------------- columns, groups


def test_missing_columns_with_suggestions(tmp_path):
    got = problems(tmp_path, ["tap,1"], header="Protocol,yy")
    assert got == (
        "data.csv: group column 'protocol' is not in the file (did you mean 'Protocol'?); "
        "the file has columns 'Protocol', 'yy'",
        "data.csv: response column 'y' is not in the file (did you mean 'yy'?); the file has "
        "columns 'Protocol', 'yy'",
    )


def test_unknown_group_with_close_match(tmp_path):
    got = problems(tmp_path, BASE + ["ozon,4"])
    assert got == (
        "data.csv row 5, column 'protocol': group 'ozon' is not in the plan's levels "
        "(did you mean 'ozone'?)",
    )


def test_case_near_duplicate_is_an_unknown_level(tmp_path):
    got = problems(tmp_path, BASE + ["Tap,4", "CHLORINE,5", "peracid,6"])
    assert got == (
        "data.csv row 5, column 'protocol': group 'Tap' is not in the plan's levels "
        "(did you mean 'tap'?)",
        "data.csv row 6, column 'protocol': group 'CHLORINE' is not in the plan's levels "
        "(did you mean 'chlorine'?)",
        "data.csv row 7, column 'protocol': group 'peracid' is not in the plan's levels",
    )


def test_surrounding_whitespace_of_labels_and_values_is_removed(tmp_path):
    data = checked(tmp_path, [" tap , 1.5 ", "chlorine,\t2", "ozone,3"])
    assert data.endpoint("y").group("tap").values.tolist() == [1.5]
    assert data.endpoint("y").group("tap").exact == ("1.5",)


def test_level_without_rows(tmp_path):
    got = problems(tmp_path, ["tap,1", "chlorine,2"])
    assert got == ("data.csv: level 'ozone' of column 'protocol' has no rows in the file",)


def test_numeric_levels_match_text_labels(tmp_path):
    data = checked(tmp_path, ["1,5", "2,6", "2,7"], levels=(1, 2))
    assert data.levels == ("1", "2")
    assert data.endpoint("y").group(2).values.tolist() == [6.0, 7.0]


# --------------------------------------------------------------------------- response text


@pytest.mark.parametrize(
    "cell, message",
    [
        ('"3,5"', "'3,5' looks like a decimal comma; write 3.5"),
        ('",5"', "',5' looks like a decimal comma; write 0.5"),
        ("12 mg", "'12 mg' has a unit or other text after the number; write the number only (12)"),
        ("45%", "'45%' has a unit or other text after the number; write the number only (45)"),
        ('"1,234,567"', "'1,234,567' has thousands separators; write 1234567"),
        ("1 234.5", "'1 234.5' has thousands separators; write 1234.5"),
        ('"1,234"', "'1,234' has a comma: write 1234 if it separates thousands, or 1.234 if "
                    "it is a decimal comma"),
        ('"1.234,5"', "'1.234,5' uses '.' between thousands and a decimal comma; write 1234.5"),
        ("abc", "'abc' is not a number"),
        ("inf", "'inf' is not a finite number"),
        ("-Infinity", "'-Infinity' is not a finite number"),
        ("\u22123.5", "'\u22123.5' starts with a typographic dash, not a minus sign; write -3.5"),
        ("1e", "'1e' has a unit or other text after the number; write the number only (1)"),
        ("0x1A", "'0x1A' is not a number"),
        ("1e400", "'1e400' is too large for a 64-bit floating-point number"),
        ("5 x10^3", "'5 x10^3' is not a number"),
        ("2.5 mg/L", "'2.5 mg/L' has a unit or other text after the number; write the number "
                     "only (2.5)"),
    ],
)
def test_non_numeric_text_is_reported_not_coerced(tmp_path, cell, message):
    got = problems(tmp_path, BASE + [f"ozone,{cell}"])
    assert got == (f"data.csv row 5, column 'y': {message}",)


def test_accepted_number_forms_and_exact_text(tmp_path):
    data = checked(tmp_path, ["tap,-3", "tap,4.", "tap,.5", "tap,+1.2e-3", "tap,1E2",
                              "chlorine,0", "ozone,7"])
    g = data.endpoint("y").group("tap")
    assert g.values.tolist() == [-3.0, 4.0, 0.5, 0.0012, 100.0]
    assert g.exact == ("-3", "4.", ".5", "+1.2e-3", "1E2")
    assert g.rows.tolist() == [2, 3, 4, 5, 6]


def test_problems_sorted_by_row_then_column_and_all_collected(tmp_path):
    got = problems(tmp_path, ["tap,1,x", "ozon,abc,2", "chlorine,,3", "ozone,3,"],
                   header="protocol,y,z", responses=("z", "y"))
    assert got == (
        "data.csv row 2, column 'z': 'x' is not a number",
        "data.csv row 3, column 'protocol': group 'ozon' is not in the plan's levels "
        "(did you mean 'ozone'?)",
        "data.csv row 3, column 'y': 'abc' is not a number",
        "data.csv row 4, column 'y': the value is missing (the plan's missing rule is reject)",
        "data.csv row 5, column 'z': the value is missing (the plan's missing rule is reject)",
    )


def test_problem_list_is_capped(tmp_path):
    rows = BASE + [f"tap,bad{i}" for i in range(MAX_LISTED_PROBLEMS + 7)]
    spec = make_spec(csv(tmp_path, rows))
    with pytest.raises(DataError) as info:
        check_data(spec, read_table(spec))
    err = info.value
    assert len(err.problems) == MAX_LISTED_PROBLEMS + 1
    assert err.problems[-1] == "... and 7 more"
    assert err.problems[0] == "data.csv row 5, column 'y': 'bad0' is not a number"
    assert err.message == ("data.csv: the data were rejected: 57 problems found; no statistics "
                           "were computed.")
    assert str(err).startswith(err.message + "\n  data.csv row 5")


def test_fixture_unquoted_decimal_comma_breaks_the_row():
    spec = DataSpec(file=FIXTURES / "wash_counts_problems.csv", label="wash.csv",
                    group="protocol", responses=("cfu_per_g", "log_reduction"), levels=LEVELS,
                    missing="reject", non_detect_rule="reject", min_n=2)
    with pytest.raises(DataError) as info:
        read_table(spec)
    # row 5 has an unquoted decimal comma, so it has one field too many
    assert str(info.value) == (
        "wash.csv row 5: the row has 4 fields but the header has 3 (an unquoted delimiter "
        "inside a value, such as a decimal comma?).")


def test_fixture_problems_after_quoting(tmp_path):
    text = (FIXTURES / "wash_counts_problems.csv").read_text(encoding="utf-8")
    p = tmp_path / "wash.csv"
    p.write_text(text.replace("chlorine,3,5,", 'chlorine,"3,5",'), encoding="utf-8")
    spec = DataSpec(file=p, label="wash.csv", group="protocol",
                    responses=("cfu_per_g", "log_reduction"), levels=LEVELS,
                    missing="reject", non_detect_rule="reject", min_n=2)
    with pytest.raises(DataError) as info:
        check_data(spec, read_table(spec))
    assert info.value.problems == (
        "wash.csv row 3, column 'protocol': group 'Tap' is not in the plan's levels "
        "(did you mean 'tap'?)",
        "wash.csv row 4, column 'cfu_per_g': '1,020' has a comma: write 1020 if it separates "
        "thousands, or 1.020 if it is a decimal comma",
        "wash.csv row 5, column 'cfu_per_g': '3,5' looks like a decimal comma; write 3.5",
        "wash.csv row 6, column 'cfu_per_g': '260 cfu' has a unit or other text after the "
        "number; write the number only (260)",
        "wash.csv row 7, column 'cfu_per_g': the value is missing (the plan's missing rule is "
        "reject)",
        "wash.csv row 8, column 'protocol': group 'ozon' is not in the plan's levels (did you "
        "mean 'ozone'?)",
        "wash.csv row 9, column 'cfu_per_g': 'ND' is a non-detect; the plan's non-detect rule "
        "is reject",
        "wash.csv row 10, column 'log_reduction': 'inf' is not a finite number",
    )


# --------------------------------------------------------------------------- missing values


def test_missing_reject_reports_each_cell(tmp_path):
    got = problems(tmp_path, BASE + ["tap,", "ozone,NA", "chlorine,nan", "tap,N/A"])
    assert [p.split(":")[0] for p in got] == [
        "data.csv row 5, column 'y'", "data.csv row 6, column 'y'",
        "data.csv row 7, column 'y'", "data.csv row 8, column 'y'",
    ]
    assert all(p.endswith("the value is missing (the plan's missing rule is reject)")
               for p in got)


def test_missing_drop_counts_per_group_and_lists_rows(tmp_path):
    data = checked(tmp_path, BASE + ["tap,", "ozone,NA", "tap,null", "tap,5"], missing="drop")
    ep = data.endpoint("y")
    assert ep.missing_dropped == {"tap": 2, "chlorine": 0, "ozone": 1}
    assert ep.group("tap").missing_rows == (5, 7)
    assert ep.group("tap").values.tolist() == [1.0, 5.0]
    assert ep.rows_used == 4 and data.rows_read == 7
    assert [(e.row, e.column, e.reason) for e in data.excluded] == [
        (5, "y", "missing value dropped"), (6, "y", "missing value dropped"),
        (7, "y", "missing value dropped"),
    ]
    counts = data.counts()
    assert counts["endpoints"]["y"]["missing_rows"] == {"tap": [5, 7], "chlorine": [],
                                                        "ozone": [6]}


def test_missing_group_label_drop_and_reject(tmp_path):
    data = checked(tmp_path, BASE + [",9"], missing="drop")
    assert [(e.row, e.column) for e in data.excluded] == [(5, "protocol")]
    assert data.endpoint("y").rows_used == 3
    got = problems(tmp_path, BASE + [",9"])
    assert got == ("data.csv row 5, column 'protocol': the group label is missing (the plan's "
                   "missing rule is reject)",)


def test_blank_rows_are_excluded_not_problems(tmp_path):
    data = checked(tmp_path, ["tap,1", "", "chlorine,2", ",", "ozone,3"])
    assert data.blank_rows == (3, 5)
    assert [(e.row, e.reason) for e in data.excluded] == [(3, "blank row"), (5, "blank row")]


# --------------------------------------------------------------------------- non-detects


@pytest.mark.parametrize("cell", ["<0.5", "< 0.5", "ND", "nd", "n.d.", "N.D.", "BDL", "<LOD",
                                  "< loq", "not detected"])
def test_non_detect_reject(tmp_path, cell):
    got = problems(tmp_path, BASE + [f"ozone,{cell}"])
    assert got == (f"data.csv row 5, column 'y': {cell!r} is a non-detect; the plan's "
                   "non-detect rule is reject",)


def test_non_detect_substitute_counts_and_lists(tmp_path):
    data = checked(tmp_path, BASE + ["ozone,<0.5", "ozone,ND", "tap,< 2", "ozone,<LOD"],
                   non_detect_rule="substitute", non_detect_fraction=0.5, non_detect_limit=0.2)
    ep = data.endpoint("y")
    assert ep.non_detects_substituted == {"tap": 1, "chlorine": 0, "ozone": 3}
    oz = ep.group("ozone")
    assert oz.values.tolist() == [3.0, 0.25, 0.1, 0.1]
    assert [(nd.row, nd.text, nd.limit, nd.value) for nd in oz.non_detects] == [
        (5, "<0.5", "0.5", "0.25"), (6, "ND", "0.2", "0.1"), (8, "<LOD", "0.2", "0.1")]
    assert ep.group("tap").non_detects[0].value == "1"
    assert data.counts()["endpoints"]["y"]["non_detect_rows"]["ozone"] == [5, 6, 8]


def test_non_detect_substitute_needs_a_limit(tmp_path):
    got = problems(tmp_path, BASE + ["ozone,ND", "ozone,<0"], non_detect_rule="substitute")
    assert got == (
        "data.csv row 5, column 'y': 'ND' is a non-detect without a limit; substituting a "
        "fraction of the limit needs the limit, so the plan must give non_detect_limit",
        "data.csv row 6, column 'y': '<0' gives a limit of 0; a limit must be > 0",
    )


def test_non_detect_with_decimal_comma(tmp_path):
    got = problems(tmp_path, BASE + ['ozone,"<0,5"'], non_detect_rule="substitute")
    assert got == ("data.csv row 5, column 'y': '<0,5' looks like a decimal comma; write <0.5",)


# --------------------------------------------------------------------------- min_n, kinds


def test_min_n_after_dropping(tmp_path):
    got = problems(tmp_path, ["tap,1", "tap,2", "chlorine,3", "chlorine,", "ozone,4",
                              "ozone,5"], missing="drop", min_n=2)
    assert got == ("data.csv, column 'y': group 'chlorine' has 1 value after missing values "
                   "and non-detects are handled; the plan needs at least 2 (min_n)",)


def test_min_n_not_reported_when_fixing_cells_could_cure_it(tmp_path):
    got = problems(tmp_path, ["tap,1", "tap,2", "chlorine,3", "chlorine,x", "ozone,4",
                              "ozone,5"], min_n=2)
    assert got == ("data.csv row 5, column 'y': 'x' is not a number",)


def test_count_kind(tmp_path):
    got = problems(tmp_path, BASE + ["tap,2.5", "tap,-1", "tap,3.0", "tap,1e1"],
                   response_kind="count")
    assert got == (
        "data.csv row 5, column 'y': count 2.5 is not a whole number >= 0",
        "data.csv row 6, column 'y': count -1 is not a whole number >= 0",
    )


def test_proportion_kind(tmp_path):
    got = problems(tmp_path, ["tap,0", "chlorine,1", "ozone,1.2", "ozone,-0.1", "tap,0.5"],
                   response_kind="proportion")
    assert got == (
        "data.csv row 4, column 'y': proportion 1.2 is outside [0, 1]",
        "data.csv row 5, column 'y': proportion -0.1 is outside [0, 1]",
    )


# --------------------------------------------------------------------------- result shape


def test_several_endpoints_patterns_and_batches(tmp_path):
    rows = ["tap,1,10,5", "tap,2,,6", "chlorine,3,30,7", "chlorine,4,40,8", "ozone,5,50,",
            "ozone,6,60,9"]
    data = checked(tmp_path, rows, header="protocol,a,b,c", responses=("a", "b", "c"),
                   missing="drop")
    assert data.responses == ("a", "b", "c")
    assert data.endpoint("a").used.tolist() == [True] * 6
    assert data.endpoint("b").used.tolist() == [True, False, True, True, True, True]
    assert data.batches() == (("a",), ("b",), ("c",))
    rows2 = ["tap,1,10,5", "tap,2,,", "chlorine,3,30,7", "chlorine,4,40,8", "ozone,5,50,4",
             "ozone,6,60,9"]
    data = checked(tmp_path, rows2, header="protocol,a,b,c", responses=("a", "b", "c"),
                   missing="drop")
    assert data.batches() == (("a",), ("b", "c"))


def test_groups_follow_plan_order_and_arrays_are_read_only(tmp_path):
    data = checked(tmp_path, ["ozone,3", "tap,1", "chlorine,2", "tap,4"])
    ep = data.endpoint("y")
    assert ep.levels == LEVELS
    assert [g.values.tolist() for g in ep.groups] == [[1.0, 4.0], [2.0], [3.0]]
    assert ep.group("tap").rows.tolist() == [3, 5]
    assert ep.group("tap").values.dtype == np.float64
    with pytest.raises(ValueError):
        ep.group("tap").values[0] = 9.0
    with pytest.raises(ValueError, match="not one of"):
        ep.group("peracid")


def test_offset_is_lower_median_removed_exactly(tmp_path):
    data = checked(tmp_path, ["tap,100000000000.3", "tap,100000000000.1",
                              "chlorine,100000000000.2", "ozone,100000000000.4"])
    ep = data.endpoint("y")
    assert ep.offset == "100000000000.2" and ep.offset_applied
    assert ep.group("tap").offset_removed.tolist() == [0.1, -0.1]
    assert ep.group("ozone").offset_removed.tolist() == [0.2]
    assert ep.group("tap").values.tolist() == [100000000000.3, 100000000000.1]


def test_sha256_is_carried(tmp_path):
    import hashlib

    data = checked(tmp_path, BASE)
    assert data.sha256 == hashlib.sha256((tmp_path / "data.csv").read_bytes()).hexdigest()


def test_nist_sized_file_checks(tmp_path):
    # 18,009 rows like NIST StRD SmLs09 (the real file is checked in tests/reference)
    rows = [f"{LEVELS[i % 3]},{1000000000000 + (i % 7) / 10:.1f}" for i in range(18009)]
    data = checked(tmp_path, rows)
    assert data.endpoint("y").rows_used == 18009


# --------------------------------------------------------------------------- domains


def test_check_domain_log_of_zero(tmp_path):
    data = checked(tmp_path, ["tap,1", "chlorine,0", "ozone,3", "tap,-2", "ozone,0.0"])
    got = check_domain(data, "y", "positive", 0, transform="log")
    assert got == (
        "data.csv row 3, column 'y': value 0 is outside the domain of log (values must be "
        "> 0); the plan's shift is 0",
        "data.csv row 5, column 'y': value -2 is outside the domain of log (values must be "
        "> 0); the plan's shift is 0",
        "data.csv row 6, column 'y': value 0.0 is outside the domain of log (values must be "
        "> 0); the plan's shift is 0",
    )
    assert check_domain(data, "y", "positive", 1.5, transform="log") == (
        "data.csv row 5, column 'y': value -2 is outside the domain of log (values must be "
        "> 0); the plan's shift is 1.5",
    )
    assert check_domain(data, "y", "positive", 3) == ()
    assert check_domain(data, "y", "nonnegative", 2) == ()
    assert check_domain(data, "y", "any", 0) == ()
    err = data_error(data.label, got, "values outside the transformation's domain")
    assert err.exit_code == 3 and err.problems == got


def test_check_domain_unit_interval(tmp_path):
    data = checked(tmp_path, ["tap,1", "chlorine,0", "ozone,0.5"])
    assert check_domain(data, "y", "unit_interval", 0) == ()
    got = check_domain(data, "y", "open_unit_interval", 0, transform="logit")
    assert [p.split(":")[0] for p in got] == ["data.csv row 2, column 'y'",
                                              "data.csv row 3, column 'y'"]
    with pytest.raises(ValueError, match="not one of"):
        check_domain(data, "y", "positive-ish", 0)


# --------------------------------------------------------------------------- spec


@pytest.mark.parametrize(
    "kw, text",
    [
        (dict(missing="skip"), "DataSpec.missing is 'skip'"),
        (dict(responses=()), "at least one column"),
        (dict(responses=("y", "y")), "more than once"),
        (dict(responses=("protocol",)), "both the group and a response"),
        (dict(levels=("a", "a")), "a level more than once"),
        (dict(levels=(1, "1")), "a level more than once"),
        (dict(non_detect_fraction=0), "non_detect_fraction"),
        (dict(non_detect_limit=-1.0), "non_detect_limit"),
        (dict(min_n=0), "min_n"),
        (dict(format="xml"), "DataSpec.format"),
    ],
)
def test_spec_rejects_inconsistent_values(tmp_path, kw, text):
    with pytest.raises(ValueError, match=text):
        make_spec(tmp_path / "x.csv", **kw)


def test_spec_accepts_single_response_string(tmp_path):
    spec = make_spec(tmp_path / "x.csv", responses="y")
    assert spec.responses == ("y",)
