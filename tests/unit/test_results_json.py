"""results.json: byte-stable serialisation, refusal of NaN, and the shape schemas/ describes.

jsonschema is not a dependency, so a small validator of the keyword subset the hand-written
schema uses lives here; it refuses any keyword it does not implement, so the schema cannot
silently promise more than is checked. The results checked are produced by real runs of small
invented plans (demonstration data) and of the example plans in plans/.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from planrunner.api import run_plan
from planrunner.report.figures import residuals_of
from planrunner.report.results import (
    CAUTIONS,
    RESULTS_FORMAT,
    ResultsError,
    compare_results,
    results_bytes,
)

REPO = Path(__file__).resolve().parents[2]
SCHEMA_PATH = REPO / "schemas" / "results.schema.json"
EXAMPLE_PLANS = sorted((REPO / "plans").glob("*.yaml"))


# --------------------------------------------------------------------------------------------
# a minimal JSON Schema (draft 2020-12) validator for the keywords the schema uses

_ANNOTATIONS = {"$schema", "$id", "title", "description", "$comment", "$defs"}
_TYPES = {
    "object": lambda v: isinstance(v, dict),
    "array": lambda v: isinstance(v, list),
    "string": lambda v: isinstance(v, str),
    "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "number": lambda v: isinstance(v, (int, float)) and not isinstance(v, bool),
    "boolean": lambda v: isinstance(v, bool),
    "null": lambda v: v is None,
}


def _resolve(root: dict, ref: str) -> dict:
    assert ref.startswith("#/"), f"only local $ref is supported: {ref}"
    node = root
    for part in ref[2:].split("/"):
        node = node[part]
    return node


def validate(value, schema: dict, root: dict, where: str = "$") -> list[str]:
    """Errors of ``value`` against ``schema`` (empty list: valid)."""
    errors: list[str] = []
    for key in schema:
        if key not in _ANNOTATIONS and key not in _KEYWORDS:
            raise AssertionError(f"schema keyword {key!r} at {where} is not supported here")
    if "$ref" in schema:
        errors += validate(value, _resolve(root, schema["$ref"]), root, where)
    if "type" in schema:
        types = schema["type"] if isinstance(schema["type"], list) else [schema["type"]]
        if not any(_TYPES[t](value) for t in types):
            return errors + [f"{where}: {value!r:.60} is not of type {types}"]
    if "const" in schema and value != schema["const"]:
        errors.append(f"{where}: {value!r} is not {schema['const']!r}")
    if "enum" in schema and value not in schema["enum"]:
        errors.append(f"{where}: {value!r} is not one of {schema['enum']}")
    if "anyOf" in schema:
        branches = [validate(value, s, root, where) for s in schema["anyOf"]]
        if all(branches):
            errors.append(f"{where}: matches no alternative: {min(branches, key=len)}")
    if isinstance(value, str):
        if len(value) < schema.get("minLength", 0):
            errors.append(f"{where}: {value!r} is shorter than {schema['minLength']}")
        if "pattern" in schema and not re.search(schema["pattern"], value):
            errors.append(f"{where}: {value!r} does not match {schema['pattern']}")
    if _TYPES["number"](value):
        if "minimum" in schema and value < schema["minimum"]:
            errors.append(f"{where}: {value!r} < {schema['minimum']}")
        if "maximum" in schema and value > schema["maximum"]:
            errors.append(f"{where}: {value!r} > {schema['maximum']}")
    if isinstance(value, list):
        if len(value) < schema.get("minItems", 0):
            errors.append(f"{where}: fewer than {schema['minItems']} items")
        if "maxItems" in schema and len(value) > schema["maxItems"]:
            errors.append(f"{where}: more than {schema['maxItems']} items")
        if "items" in schema:
            for i, item in enumerate(value):
                errors += validate(item, schema["items"], root, f"{where}[{i}]")
    if isinstance(value, dict):
        props = schema.get("properties", {})
        for key in schema.get("required", []):
            if key not in value:
                errors.append(f"{where}: lacks required key {key!r}")
        for key, item in value.items():
            if key in props:
                errors += validate(item, props[key], root, f"{where}.{key}")
            elif schema.get("additionalProperties") is False:
                errors.append(f"{where}: unexpected key {key!r}")
            elif isinstance(schema.get("additionalProperties"), dict):
                errors += validate(item, schema["additionalProperties"], root, f"{where}.{key}")
    return errors


_KEYWORDS = {"$ref", "type", "const", "enum", "anyOf", "minLength", "pattern", "minimum",
             "maximum", "minItems", "maxItems", "items", "properties", "required",
             "additionalProperties"}


@pytest.fixture(scope="module")
def schema() -> dict:
    return json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))


def test_validator_catches_what_it_claims(schema):
    # the checker itself, on hand-made documents: a missing key, a wrong type, an extra key
    assert validate({"a": 1}, {"type": "object", "required": ["b"]}, {}) == \
        ["$: lacks required key 'b'"]
    assert validate("x", {"type": ["number", "null"]}, {})
    assert validate({"z": 1}, {"type": "object", "properties": {},
                               "additionalProperties": False}, {})
    assert validate(2.0, {"minimum": 0, "maximum": 1}, {})
    assert not validate(None, {"anyOf": [{"type": "null"}, {"type": "object"}]}, {})
    with pytest.raises(AssertionError, match="not supported"):
        validate(1, {"oneOf": []}, {})


def test_schema_has_its_own_identity(schema):
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["$id"] == "urn:planrunner:schema:results:1"
    assert schema["properties"]["format"]["const"] == RESULTS_FORMAT
    # the file is stored as planrunner writes JSON: sorted keys, two-space indent
    text = SCHEMA_PATH.read_text(encoding="utf-8")
    assert text == json.dumps(schema, indent=2, sort_keys=True) + "\n"


# --------------------------------------------------------------------------------------------
# serialisation


def test_results_bytes_sorted_indented_shortest_floats_final_newline():
    doc = {"b": 0.1 + 0.2, "a": [1, np.float64(2.5), np.int64(3)], "c": "µg/L", "d": (1, 2)}
    out = results_bytes(doc)
    assert out == (
        '{\n  "a": [\n    1,\n    2.5,\n    3\n  ],\n  "b": 0.30000000000000004,\n'
        '  "c": "µg/L",\n  "d": [\n    1,\n    2\n  ]\n}\n'
    ).encode("utf-8")
    assert json.loads(out)["b"] == 0.1 + 0.2  # shortest round-trip text reads back exactly


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf, np.float64("nan")])
def test_results_refuse_non_finite_numbers_and_say_where(bad):
    with pytest.raises(ResultsError, match=r"endpoints\[0\]\.omnibus\.pvalue") as info:
        results_bytes({"endpoints": [{"omnibus": {"pvalue": bad}}]})
    assert info.value.exit_code == 1


def test_results_refuse_unknown_objects():
    with pytest.raises(ResultsError, match="set"):
        results_bytes({"x": {1, 2}})


def test_compare_results_names_endpoint_and_key():
    a = {"endpoints": [{"endpoint": "mass", "omnibus": {"statistic": 4.0}}], "status": "x"}
    b = {"endpoints": [{"endpoint": "mass", "omnibus": {"statistic": 4.5}}], "status": "x"}
    assert compare_results(results_bytes(a), results_bytes(a)) == []
    assert compare_results(results_bytes(a), results_bytes(b)) == [
        "endpoints[0] (mass).omnibus.statistic: 4.0 in the run, 4.5 on rerun"]
    # same values, other bytes
    other = json.dumps(a).encode("utf-8")
    assert compare_results(results_bytes(a), other) == [
        "the values are equal but the bytes differ: results.json was re-encoded"]


def test_build_results_refuses_a_wrong_status_or_endpoint_list(tmp_path):
    from planrunner.api import data_spec
    from planrunner.data import check_data, read_table
    from planrunner.plan.load import load_plan
    from planrunner.report.results import build_results

    plan_path = _write_study(tmp_path)
    loaded = load_plan(plan_path)
    checked = check_data(data_spec(loaded), read_table(data_spec(loaded)))
    good = SimpleNamespace(status="completed", endpoints=[{"endpoint": "thickness_um"}],
                           across_endpoints=None, halted_endpoints=[])
    doc = build_results(loaded, checked, good, data_label="data/c.csv")
    assert doc["cautions"] == list(CAUTIONS)
    with pytest.raises(ResultsError, match="status"):
        build_results(loaded, checked, SimpleNamespace(**{**vars(good), "status": "odd"}),
                      data_label="x")
    with pytest.raises(ResultsError, match="endpoints"):
        build_results(loaded, checked, SimpleNamespace(**{**vars(good), "endpoints": []}),
                      data_label="x")


def test_cautions_cover_judgement_regulation_and_transformed_scale():
    text = " ".join(CAUTIONS)
    assert "qualified statistician" in text
    assert "regulations" in text
    assert "transformed scale" in text


# --------------------------------------------------------------------------------------------
# real runs against the schema

PLAN = """\
planrunner: 1
id: results-demo
title: Invented demo - three coatings
question: Does the mean coating thickness differ between the three coatings?
hypotheses: {{family: against_control, confirmatory: true}}
data:
  file: data/c.csv
  group: coating
  response: {response}
  levels: [alpha, beta, gamma]
  control: alpha
  missing: drop
  non_detects: {{rule: substitute, fraction: 0.5}}
  min_n: 3
alpha: 0.05
omnibus: classic
variance_check: {{method: levene_median, role: describe}}
normality_check: {{method: shapiro_wilk, role: describe}}
outliers: {{rule: studentized_residual, threshold: 3.0, action: flag}}
sensitivity: [always_welch]
comparisons: {{method: dunnett}}
effect_sizes: [eta_squared, omega_squared]
"""

# invented demo values; one missing cell (row 4) and one non-detect (row 9)
CSV = """\
coating,thickness_um,gloss
alpha,10.1,81
alpha,10.4,80
alpha,,83
alpha,10.2,79
alpha,10.0,82
beta,11.0,77
beta,11.3,78
beta,<0.5,76
beta,11.4,75
beta,11.1,77
gamma,10.6,85
gamma,10.2,86
gamma,10.9,84
gamma,10.5,87
gamma,10.7,85
"""


def _write_study(folder: Path, response: str = "thickness_um") -> Path:
    (folder / "data").mkdir(parents=True, exist_ok=True)
    (folder / "data" / "c.csv").write_text(CSV, encoding="utf-8")
    plan = folder / "plan.yaml"
    plan.write_text(PLAN.format(response=response), encoding="utf-8")
    return plan


def test_results_record_missing_values_and_non_detects(tmp_path):
    run_plan(_write_study(tmp_path / "s"), out=tmp_path / "run")
    data = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))["data"]
    endpoint = data["endpoints"][0]
    assert endpoint["rows_used"] == 14
    assert endpoint["missing_dropped"] == {
        "count": 1, "rows": {"alpha": [4], "beta": [], "gamma": []}}
    assert endpoint["non_detects"] == [
        {"level": "beta", "row": 9, "text": "<0.5", "limit": "0.5", "value": "0.25"}]
    assert {"row": 4, "column": "thickness_um"} == {
        k: data["excluded"][0][k] for k in ("row", "column")}


@pytest.mark.parametrize("response", ["thickness_um", "[thickness_um, gloss]"])
def test_results_of_a_run_match_the_schema(tmp_path, schema, response):
    run_plan(_write_study(tmp_path / "s", response), out=tmp_path / "run")
    doc = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    assert validate(doc, schema, schema) == []
    # the parts of the schema this exercises: an outlier (the substituted non-detect, 0.25
    # among values near 11), sensitivity, comparisons, and across endpoints for two endpoints
    first = doc["endpoints"][0]
    assert first["outliers"] and first["sensitivity"] and first["comparisons"]["pairs"]
    assert (doc["across_endpoints"] is not None) == (len(doc["endpoints"]) == 2)


@pytest.mark.parametrize("plan", EXAMPLE_PLANS, ids=lambda p: p.stem)
def test_results_of_the_example_plans_match_the_schema(tmp_path, schema, plan):
    run_plan(plan, out=tmp_path / "run")
    doc = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    assert validate(doc, schema, schema) == []


def test_results_hold_no_timestamps_or_machine_paths(tmp_path):
    run_plan(_write_study(tmp_path / "s"), out=tmp_path / "run")
    text = (tmp_path / "run" / "results.json").read_text(encoding="utf-8")
    assert str(tmp_path) not in text
    assert not re.search(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}", text)


# --------------------------------------------------------------------------------------------
# what the report's figures read: values, residuals, the Box-Cox profile, the plan's settings


def _run_doc(plan: Path, out: Path) -> dict:
    run_plan(plan, out=out)
    return json.loads((out / "results.json").read_text(encoding="utf-8"))


def test_values_are_the_file_values_in_file_order(tmp_path):
    doc = _run_doc(_write_study(tmp_path / "s"), tmp_path / "run")
    groups = doc["endpoints"][0]["groups"]
    # from CSV above: row 4 (alpha) is missing and dropped; '<0.5' becomes 0.5 * 0.5 = 0.25
    assert [g["values"] for g in groups] == [
        [10.1, 10.4, 10.2, 10.0], [11.0, 11.3, 0.25, 11.4, 11.1],
        [10.6, 10.2, 10.9, 10.5, 10.7]]
    assert all(g["analysis_values"] is None for g in groups)  # analysed as measured
    assert all(g["ci_level"] == 0.95 for g in groups)
    # the report's residuals: values minus their group mean (numpy as the reference)
    residuals, scale = residuals_of(doc["endpoints"][0])
    assert scale == "original"
    expected = np.concatenate([np.array(g["values"]) - np.mean(g["values"]) for g in groups])
    assert np.allclose(residuals, expected, rtol=0, atol=1e-12)
    t = doc["endpoints"][0]["transform"]
    assert t["lambda_estimate"] is None and t["lambda_ci"] is None and t["profile"] is None


def test_analysis_values_and_residuals_on_a_fixed_log_scale(tmp_path):
    doc = _run_doc(REPO / "plans" / "soil-remediation-metals.yaml", tmp_path / "run")
    for e in doc["endpoints"]:
        assert e["analysis_scale"] == "log10"
        parts = []
        for g in e["groups"]:
            # reference: numpy.log10 of the values used
            assert np.allclose(g["analysis_values"], np.log10(g["values"]), rtol=1e-15, atol=0)
            assert len(g["values"]) == g["n"]
            a = np.array(g["analysis_values"])
            assert abs(np.mean(a) - g["analysis"]["mean"]) < 1e-12
            parts.append(a - a.mean())
        residuals, scale = residuals_of(e)
        assert scale == "log10"
        assert np.allclose(residuals, np.concatenate(parts), rtol=0, atol=1e-12)


BOXCOX_PLAN = REPO / "plans" / "compost-heating-time-boxcox.yaml"


def test_box_cox_profile_interval_and_estimate(tmp_path):
    from scipy.stats import chi2

    doc = _run_doc(BOXCOX_PLAN, tmp_path / "run")
    e = doc["endpoints"][0]
    t = e["transform"]
    assert t["name"] == "boxcox" and t["lambda"] == -0.5  # snapped (see the decision log)
    lam_hat, (lo, hi) = t["lambda_estimate"], t["lambda_ci"]
    assert lo < lam_hat < hi and lo <= t["lambda"] <= hi
    prof = t["profile"]
    grid, ll = np.array(prof["lambda"]), np.array(prof["loglik"])
    assert 3 <= grid.size <= 121 and grid[0] == -2.0 and grid[-1] == 2.0
    assert np.all(np.diff(grid) > 0)
    # the one-way Box-Cox log-likelihood written out with numpy (Box & Cox 1964, their
    # equation for the maximised likelihood plus the Jacobian): an independent formula
    y = [np.array(g["values"]) for g in e["groups"]]
    n_total = sum(v.size for v in y)
    log_sum = sum(np.log(v).sum() for v in y)

    def loglik(lam: float) -> float:
        z = [np.log(v) if lam == 0 else (v ** lam - 1) / lam for v in y]
        ss = sum(((x - x.mean()) ** 2).sum() for x in z)
        return (-0.5 * n_total * (math.log(2 * math.pi) + 1 + math.log(ss / n_total))
                + (lam - 1) * log_sum)

    assert all(abs(loglik(a) - b) < 1e-9 * abs(b) for a, b in zip(grid, ll))
    assert abs(prof["loglik_max"] - loglik(lam_hat)) < 1e-9 * abs(prof["loglik_max"])
    assert prof["loglik_max"] >= ll.max()
    # reference: scipy.stats.chi2 quantile; the interval ends lie on the cut-off
    assert abs(prof["cutoff"] - (prof["loglik_max"] - chi2.ppf(0.95, 1) / 2)) < 1e-9
    for end in (lo, hi):
        assert abs(loglik(end) - prof["cutoff"]) < 1e-6
    # the analysis values are the Box-Cox values of the values used, with the lambda used
    for g in e["groups"]:
        v = np.array(g["values"])
        assert np.allclose(g["analysis_values"], (v ** -0.5 - 1) / -0.5, rtol=1e-14, atol=0)


def test_box_cox_results_are_byte_identical_on_rerun(tmp_path):
    run_plan(BOXCOX_PLAN, out=tmp_path / "a")
    run_plan(BOXCOX_PLAN, out=tmp_path / "b")
    assert (tmp_path / "a" / "results.json").read_bytes() == \
        (tmp_path / "b" / "results.json").read_bytes()


def test_plan_settings_copy_the_resolved_plan(tmp_path):
    import yaml

    doc = _run_doc(REPO / "plans" / "hatchery-vibrio-counts.yaml", tmp_path / "run")
    resolved = yaml.safe_load((tmp_path / "run" / "plan.resolved.yaml").read_text("utf-8"))
    settings = doc["plan"]["settings"]
    for key in ("transform", "variance_check", "normality_check", "comparisons", "outliers",
                "omnibus", "when_variances_differ", "alpha", "compare"):
        assert settings[key] == resolved[key], key
    assert settings["degenerate_groups"] == resolved["data"]["degenerate_groups"]
    assert settings["transform"]["ladder"] == ["identity", "sqrt", "log10"]
