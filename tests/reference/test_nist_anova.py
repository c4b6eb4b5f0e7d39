"""NIST StRD one-way ANOVA: all 11 datasets against their certified values.

Source of every certified value: NIST Statistical Reference Datasets, Analysis of Variance
section (https://www.itl.nist.gov/div898/strd/anova/), copied with the data into
tests/reference/data/nist_strd_anova/ (NAME.csv and NAME.certified.json, 15 significant
digits). SmLs01-09 are from Simon & Lesage (1989), Computational Statistics & Data Analysis 8,
325-332.

Accuracy is scored as the log relative error LRE = -log10(|x - c| / |c|), capped at 15.

Three input paths are checked:

* float: the CSV text parsed with float(). Binary rounding of the inputs limits what any
  float method can reach; the bounds below are what exact rational arithmetic on the parsed
  doubles reaches (SmLs05/06 ss_between: 9.94; SmLs07-09: about 4).
* float vs exact rational arithmetic on the same doubles: isolates the error our algorithm
  adds (>= 13 digits on every set).
* decimal offset: the CSV text read with decimal.Decimal, the first value subtracted exactly,
  then converted to float (what the data layer does). >= 13 digits on all 11 sets.

Run this file as a script to print the LRE tables.
"""

from __future__ import annotations

import csv
import json
import math
from decimal import Decimal
from fractions import Fraction
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest

from planrunner.stats.anova import oneway_anova

DATA = Path(__file__).parent / "data" / "nist_strd_anova"
DATASETS = ["SiRstv", "AtmWtAg"] + [f"SmLs{i:02d}" for i in range(1, 10)]
# Lower and average difficulty (NIST grading): the 10-digit target applies from float input.
TEN_DIGIT_SETS = ["SiRstv", "AtmWtAg"] + [f"SmLs{i:02d}" for i in range(1, 7)]
HIGHER = ["SmLs07", "SmLs08", "SmLs09"]
QUANTITIES = {
    "F": "statistic",
    "ss_between": "ss_between",
    "ss_within": "ss_within",
    "ms_between": "ms_between",
    "ms_within": "ms_within",
    "r_squared": "r_squared",
    "residual_sd": "residual_sd",
}


def lre(x: float, c: float) -> float:
    """Log relative error -log10(|x - c| / |c|), capped at 15 (NIST prints 15 digits)."""
    x, c = float(x), float(c)
    if x == c:
        return 15.0
    return min(15.0, -math.log10(abs(x - c) / abs(c)))


@lru_cache(maxsize=None)
def _rows(name: str) -> tuple[tuple[str, str], ...]:
    with open(DATA / f"{name}.csv", newline="") as fh:
        return tuple((r["group"], r["response"]) for r in csv.DictReader(fh))


@lru_cache(maxsize=None)
def _certified(name: str) -> dict[str, float]:
    cert = json.loads((DATA / f"{name}.certified.json").read_text())["certified"]
    return {k: float(cert[k]) for k in QUANTITIES}


def _labels(name: str) -> list[str]:
    return sorted({g for g, _ in _rows(name)}, key=int)


def float_groups(name: str) -> list[np.ndarray]:
    rows = _rows(name)
    return [np.array([float(v) for g, v in rows if g == lab]) for lab in _labels(name)]


def decimal_offset_groups(name: str) -> list[np.ndarray]:
    """Read the decimal text exactly, subtract the first value exactly, then convert."""
    rows = _rows(name)
    offset = Decimal(rows[0][1])
    return [np.array([float(Decimal(v) - offset) for g, v in rows if g == lab]) for lab in _labels(name)]


@lru_cache(maxsize=None)
def exact_on_doubles(name: str) -> dict[str, float]:
    """The ANOVA quantities in exact rational arithmetic on the parsed float64 values."""
    groups = [[Fraction(x) for x in g.tolist()] for g in float_groups(name)]
    n_total = sum(len(g) for g in groups)
    k = len(groups)
    means = [sum(g) / len(g) for g in groups]
    grand = sum(sum(g) for g in groups) / n_total
    ssb = sum(len(g) * (m - grand) ** 2 for g, m in zip(groups, means))
    ssw = sum(sum((x - m) ** 2 for x in g) for g, m in zip(groups, means))
    msb, msw = ssb / (k - 1), ssw / (n_total - k)
    return {
        "F": float(msb / msw),
        "ss_between": float(ssb),
        "ss_within": float(ssw),
        "ms_between": float(msb),
        "ms_within": float(msw),
        "r_squared": float(ssb / (ssb + ssw)),
        "residual_sd": math.sqrt(float(msw)),
    }


def lre_row(result, reference: dict[str, float]) -> dict[str, float]:
    return {q: lre(getattr(result, attr), reference[q]) for q, attr in QUANTITIES.items()}


def lre_table(path: str) -> list[tuple[str, dict[str, float]]]:
    """LRE of every quantity on every dataset for one input path ("float" or "decimal")."""
    load = float_groups if path == "float" else decimal_offset_groups
    return [(name, lre_row(oneway_anova(*load(name)), _certified(name))) for name in DATASETS]


def format_lre_table(title: str, table) -> str:
    head = f"{'dataset':<9}" + "".join(f"{q:>12}" for q in QUANTITIES)
    lines = [title, head]
    for name, row in table:
        lines.append(f"{name:<9}" + "".join(f"{row[q]:>12.1f}" for q in QUANTITIES))
    return "\n".join(lines)


# --------------------------------------------------------------------------- float input

# Float-path bounds. 10 digits is the target for the lower- and average-difficulty sets. Exceptions,
# each the limit of the input itself (exact rational arithmetic on the parsed doubles, see
# exact_on_doubles, reaches 9.94 for ss_between/ms_between on SmLs05 and SmLs06).
FLOAT_BOUND = {name: dict.fromkeys(QUANTITIES, 10.0) for name in TEN_DIGIT_SETS}
for _name in ("SmLs05", "SmLs06"):
    FLOAT_BOUND[_name]["ss_between"] = FLOAT_BOUND[_name]["ms_between"] = 9.9
# SmLs07-09 have 13 constant leading digits (values like 1000000000000.4): float64 keeps
# only about 3-4 digits of the deviations, so any float method stops near 4 (measured here:
# 3.9-4.7). Documented lower bound:
HIGHER_FLOAT_BOUND = 3.5


@pytest.mark.parametrize("name", TEN_DIGIT_SETS)
def test_float_input_lower_and_average_sets(name):
    # NIST StRD ANOVA certified values (see module docstring)
    row = lre_row(oneway_anova(*float_groups(name)), _certified(name))
    print(format_lre_table("float input", [(name, row)]))
    for q, bound in FLOAT_BOUND[name].items():
        assert row[q] >= bound, (name, q, row[q])


@pytest.mark.parametrize("name", HIGHER)
def test_float_input_higher_difficulty_sets(name):
    # NIST StRD ANOVA certified values; bound limited by float64 parsing (module docstring)
    row = lre_row(oneway_anova(*float_groups(name)), _certified(name))
    assert min(row.values()) >= HIGHER_FLOAT_BOUND, (name, row)


@pytest.mark.parametrize("name", DATASETS)
def test_float_input_matches_exact_arithmetic_on_the_doubles(name):
    # Reference: exact rational arithmetic (fractions.Fraction) on the same float64 inputs,
    # so the remaining error is the algorithm's own; it stays below 1e-13 on every set.
    row = lre_row(oneway_anova(*float_groups(name)), exact_on_doubles(name))
    assert min(row.values()) >= 13.0, (name, row)


# --------------------------------------------------------------------------- decimal offset


@pytest.mark.parametrize("name", DATASETS)
def test_decimal_offset_input_all_sets(name):
    # NIST StRD ANOVA certified values; input read as Decimal with the first value removed
    row = lre_row(oneway_anova(*decimal_offset_groups(name)), _certified(name))
    assert min(row.values()) >= 13.0, (name, row)


def test_degrees_of_freedom_all_sets():
    # NIST StRD ANOVA certified degrees of freedom (between, within)
    for name in DATASETS:
        cert = json.loads((DATA / f"{name}.certified.json").read_text())["certified"]
        res = oneway_anova(*float_groups(name))
        assert (res.df_between, res.df_within) == (cert["df_between"], cert["df_within"])


def test_offset_invariance_on_smls07():
    # Cross-check of two inputs that differ by an exactly representable constant. The SmLs07
    # deviations are rounded to multiples of 2**-20 so that adding 2**30 is exact in float64;
    # the results must then agree to 13 digits (the algorithm is offset-invariant).
    groups = [np.round(g * 2.0**20) / 2.0**20 for g in decimal_offset_groups("SmLs07")]
    moved_groups = [g + 2.0**30 for g in groups]
    assert all(np.array_equal(m - 2.0**30, g) for m, g in zip(moved_groups, groups))
    base = oneway_anova(*groups)
    moved = oneway_anova(*moved_groups)
    for q, attr in QUANTITIES.items():
        assert lre(getattr(moved, attr), getattr(base, attr)) >= 13.0, q


def test_print_lre_tables():
    # Prints both tables (shown with pytest -s, or run this file as a script); asserts the
    # headline bounds once more. NIST StRD ANOVA certified values.
    float_table = lre_table("float")
    decimal_table = lre_table("decimal")
    print()
    print(format_lre_table("LRE, float input", float_table))
    print(format_lre_table("LRE, decimal input with the first value removed exactly", decimal_table))
    assert min(min(r.values()) for _, r in decimal_table) >= 13.0
    assert min(r["F"] for n, r in float_table if n in TEN_DIGIT_SETS) >= 10.0


if __name__ == "__main__":
    print(format_lre_table("LRE, float input", lre_table("float")))
    print(format_lre_table("LRE, decimal input with the first value removed exactly", lre_table("decimal")))
