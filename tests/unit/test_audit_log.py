"""The hash-chained decision log: writing, canonical JSON, tamper detection, schema."""

from __future__ import annotations

import hashlib
import json
import math
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planrunner._files import RunFolder
from planrunner.audit import provenance
from planrunner.audit.log import (
    GENESIS,
    RECORD_FIELDS,
    AuditError,
    Decision,
    DecisionLog,
    canonical_json,
    chain_value,
    sha256_hex,
    verify_log,
)
from planrunner.errors import PlanError, PlanrunnerError

SCHEMA_PATH = Path(__file__).resolve().parents[2] / "schemas" / "decisions.schema.json"
RESULTS = b'{"format":"planrunner.results/1","endpoints":[]}\n'


def _start(log: DecisionLog, **overrides: Any) -> dict[str, Any]:
    args: dict[str, Any] = dict(
        plan_file="plans/wash-trial.yaml",
        plan_sha256="1" * 64,
        plan_raw_sha256="2" * 64,
        data_file="data/wash-trial.csv",
        data_sha256="3" * 64,
        time_utc="2027-03-04T09:15:00Z",
        operator={"name": "A. Analyst", "source": "option"},
        command=["planrunner", "run", "plans/wash-trial.yaml"],
        software={"python": "3.11.7", "planrunner": "0.1.0", "numpy": "2.0.0"},
        plan_id="wash-trial-2027",
    )
    args.update(overrides)
    return log.start(**args)


def build_log(path: Path | None = None) -> DecisionLog:
    """A run's worth of records: start, 4 decisions, a warning, a deviation, finish (8 lines)."""
    log = DecisionLog(path)
    _start(log)
    log.deviation(reason="The laboratory changed its counting method on 3 March.",
                  differs="data.response is cfu_per_ml instead of cfu_per_g",
                  plan_ref="data.response")
    log.decide(stage="variance_check", endpoint="cfu", plan_ref="variance_check.alpha",
               method="hartley_fmax", statistic=3.25, threshold=8.44, p=None,
               outcome="variances_similar", action="keep_scale",
               reason="Fmax 3.25 is below its 5% critical value 8.44, so the raw scale is kept.",
               details={"k": 4, "df": 7})
    log.warn(stage="normality_check", endpoint="cfu", plan_ref="normality_check",
             message="With 8 values per group the normality check has little power.")
    log.decide(stage="omnibus", endpoint="cfu", plan_ref="omnibus", method="classic",
               statistic=12.5, threshold=0.05, p=0.0001234, outcome="significant",
               action="run_comparisons", reason="p = 0.0001234 is below alpha 0.05.")
    log.decide(stage="variance_check", endpoint="ph", plan_ref="variance_check.alpha",
               method="hartley_fmax", statistic=1.5, threshold=8.44, outcome="variances_similar",
               action="keep_scale", reason="Fmax 1.5 is below its critical value 8.44.")
    log.decide(stage="comparisons", endpoint="ph",
               plan_ref="comparisons.only_after_significant_omnibus",
               outcome="skipped", action="no_comparisons",
               reason="The omnibus test was not significant, so no pairs are compared.")
    log.finish(status="completed", exit_code=0, results_sha256=sha256_hex(RESULTS))
    return log


@pytest.fixture
def run_dir(tmp_path: Path) -> Path:
    folder = tmp_path / "run"
    with RunFolder(folder) as run:
        run.write_bytes("results.json", RESULTS)
        build_log(run.file("decisions.jsonl"))
    return folder


def _lines(run_dir: Path) -> list[str]:
    return (run_dir / "decisions.jsonl").read_text(encoding="utf-8").splitlines(keepends=True)


def _write(run_dir: Path, lines: list[str]) -> None:
    (run_dir / "decisions.jsonl").write_text("".join(lines), encoding="utf-8")


def _rechain(lines: list[str], start: int = 0) -> list[str]:
    """Recompute prev/chain from ``start`` on, as a careful forger would."""
    records = [json.loads(line) for line in lines]
    prev = GENESIS if start == 0 else records[start - 1]["chain"]
    for record in records[start:]:
        record["prev"] = prev
        record.pop("chain")
        record["chain"] = chain_value(prev, record)
        prev = record["chain"]
    return [canonical_json(r) + "\n" for r in records]


# --------------------------------------------------------------------------- writing


def test_chain_round_trip(run_dir: Path) -> None:
    report = verify_log(run_dir)
    assert report.ok, report.problems
    assert report.records == 8 and report.status == "completed" and report.results_checked
    records = [json.loads(line) for line in _lines(run_dir)]
    assert [r["kind"] for r in records] == ["start", "deviation", "decision", "warning",
                                            "decision", "decision", "decision", "finish"]
    assert [r["seq"] for r in records] == list(range(8))
    assert records[0]["prev"] == GENESIS == "0" * 64
    for before, record in zip(records, records[1:]):
        assert record["prev"] == before["chain"]
    for record in records:
        body = {k: v for k, v in record.items() if k != "chain"}
        # the chain value, recomputed here with hashlib directly
        text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
        assert record["chain"] == hashlib.sha256((record["prev"] + text).encode()).hexdigest()
    assert report.head == records[-1]["chain"]
    assert records[-1]["counts"] == {"decisions": 4, "deviations": 1, "warnings": 1}
    assert records[-1]["results_sha256"] == hashlib.sha256(RESULTS).hexdigest()
    assert "the chain is intact and results.json matches it" in report.summary()


def test_log_file_is_exactly_its_records(run_dir: Path) -> None:
    log = build_log()
    assert (run_dir / "decisions.jsonl").read_bytes() == log.to_bytes()
    assert log.to_bytes() == build_log().to_bytes()  # deterministic
    assert len(log) == 8 and log.finished


def test_decide_returns_the_record_and_filters_by_endpoint() -> None:
    log = DecisionLog()
    _start(log)
    first = log.decide(stage="omnibus", endpoint="cfu", plan_ref="omnibus", method="welch",
                       statistic=np.float64(4.5), threshold=0.05, p=np.float32(0.25),
                       outcome="not_significant", action="stop_endpoint",
                       reason="p = 0.25 is not below alpha 0.05.",
                       details={"df": (3, np.int64(11)), "scale": "log10"})
    assert isinstance(first, Decision)
    assert first.seq == 1 and first.endpoint == "cfu" and first.p == float(np.float32(0.25))
    assert type(first.statistic) is float and first.details == {"df": [3, 11], "scale": "log10"}
    assert first.prev == log.records[0]["chain"] and first.chain == log.head
    assert first.to_record() == log.records[1]
    log.decide(stage="omnibus", endpoint="ph", plan_ref="omnibus", outcome="x", action="y",
               reason="z.")
    assert [d.endpoint for d in log.decisions()] == ["cfu", "ph"]
    assert [d.seq for d in log.decisions("ph")] == [2]
    assert list(log.decisions("none")) == []
    with pytest.raises(ValueError, match="not a decision record"):
        Decision.from_record(log.records[0])


def test_records_are_copies() -> None:
    log = DecisionLog()
    _start(log)
    log.records[0]["plan"]["sha256"] = "f" * 64
    decision = log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.",
                          details={"x": 1})
    decision.details["x"] = 2
    assert log.records[0]["plan"]["sha256"] == "1" * 64
    assert log.records[1]["details"] == {"x": 1}


def test_no_log_file_until_finish(tmp_path: Path) -> None:
    path = tmp_path / "decisions.jsonl"
    log = DecisionLog(path)
    _start(log)
    log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.")
    assert not path.exists()
    log.finish(status="failed", exit_code=3, reason="The data file has no column 'protocol'.")
    assert verify_log(path).ok
    assert verify_log(path).status == "failed"


def test_failed_run_leaves_no_log(tmp_path: Path) -> None:
    folder = tmp_path / "run"
    with pytest.raises(RuntimeError, match="engine broke"):
        with RunFolder(folder) as run:
            log = DecisionLog(run.file("decisions.jsonl"))
            _start(log)
            log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.")
            raise RuntimeError("engine broke")
    assert list(tmp_path.iterdir()) == []


# --------------------------------------------------------------------------- refusals


@pytest.mark.parametrize("bad", [float("nan"), float("inf"), -math.inf, np.float64("nan"),
                                 np.array(np.nan)])
def test_non_finite_numbers_are_refused(bad: Any) -> None:
    log = DecisionLog()
    _start(log)
    with pytest.raises(AuditError, match=r"statistic is .*finite numbers only") as info:
        log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.",
                   statistic=bad)
    assert isinstance(info.value, PlanrunnerError) and info.value.exit_code == 1
    with pytest.raises(AuditError, match=r"decision\.details\.ci\[1\] is"):
        log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.",
                   details={"ci": [0.5, bad]})
    with pytest.raises(AuditError, match="finite numbers only"):
        canonical_json({"x": bad})
    assert len(log) == 1  # nothing was appended


def test_bad_values_are_refused() -> None:
    log = DecisionLog()
    with pytest.raises(AuditError, match="before the start record"):
        log.decide(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.")
    with pytest.raises(AuditError, match="plan_sha256 must be 64 lowercase hex"):
        _start(log, plan_sha256="ABC")
    with pytest.raises(AuditError, match="time_utc must be ISO 8601 UTC"):
        _start(log, time_utc="2027-03-04 09:15")
    with pytest.raises(AuditError, match="command must be a list"):
        _start(log, command="planrunner run")
    _start(log)
    with pytest.raises(AuditError, match="appear only once"):
        _start(log)
    ok = dict(stage="s", plan_ref="alpha", outcome="o", action="a", reason="r.")
    for change, message in [
        ({"p": 1.5}, "p must lie between 0 and 1"),
        ({"p": "0.01"}, "p must be a number"),
        ({"plan_ref": "variance check"}, "plan_ref must be a dotted path"),
        ({"plan_ref": "alpha..x"}, "plan_ref must be a dotted path"),
        ({"reason": "  "}, "reason must be a non-empty string"),
        ({"endpoint": ""}, "endpoint must be a non-empty string"),
        ({"details": {"s": {1, 2}}}, "decision.details.s is a set"),
        ({"details": {1: "x"}}, "key 1 that is not a string"),
    ]:
        with pytest.raises(AuditError, match=message):
            log.decide(**{**ok, **change})
    for kwargs, message in [
        (dict(status="done", exit_code=0), "status must be one of completed, halted, failed"),
        (dict(status="completed", exit_code=1, results_sha256="a" * 64), "exits with code 0"),
        (dict(status="halted", exit_code=0), "exits with code 4"),
        (dict(status="failed", exit_code=4), "other than 0 and 4"),
        (dict(status="completed", exit_code=0), "must give the SHA-256 of its results.json"),
        (dict(status="completed", exit_code=0, results_sha256="xyz"), "64 lowercase hex"),
        (dict(status="failed", exit_code=True), "exit_code must be an integer"),
    ]:
        with pytest.raises(AuditError, match=message):
            log.finish(**kwargs)
    log.finish(status="halted", exit_code=4, reason="Variances differ and the plan says halt.")
    with pytest.raises(AuditError, match="already has its finish record"):
        log.warn(stage="s", message="late")


# --------------------------------------------------------------------------- canonical JSON


def test_canonical_json_is_deterministic() -> None:
    a = {"b": 1, "a": [1.5, {"y": None, "x": True}], "µ": "ü"}
    b = {"µ": "ü", "a": [1.5, {"x": True, "y": None}], "b": 1}
    expected = '{"a":[1.5,{"x":true,"y":null}],"b":1,"µ":"ü"}'
    assert canonical_json(a) == canonical_json(b) == expected
    # floats: shortest round-trip repr, so the text reproduces the very same double
    for value in (0.1 + 0.2, 1e-300, 2.0**-1074, 1 / 3, 123456789.123456789, -0.0, 1e22):
        text = canonical_json(value)
        assert text == repr(value)
        assert float(text) == value and math.copysign(1, float(text)) == math.copysign(1, value)
    assert canonical_json((1, 2)) == "[1,2]"
    assert canonical_json(np.int64(7)) == "7" and canonical_json(np.bool_(True)) == "true"
    # the same text in a fresh interpreter with another hash seed
    code = ("from planrunner.audit.log import canonical_json;"
            "print(canonical_json({'z': [0.1, 2], 'a': {'q': 1e-7, 'b': 'é'}}))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, check=True,
                         env={"PYTHONHASHSEED": "12345", "PYTHONIOENCODING": "utf-8",
                              "PATH": ""}, timeout=60).stdout.decode("utf-8").strip()
    assert out == canonical_json({"z": [0.1, 2], "a": {"q": 1e-7, "b": "é"}})


def test_chain_value_known_answer() -> None:
    # Computed independently: SHA-256 over 64 zeros followed by '{"a":1}'
    expected = hashlib.sha256(("0" * 64 + '{"a":1}').encode("ascii")).hexdigest()
    assert chain_value(GENESIS, {"a": 1}) == expected


# --------------------------------------------------------------------------- tampering


def _first(report) -> tuple[int | None, str]:
    assert not report.ok
    return report.first_bad_line, report.problems[0].message


def test_edited_field_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    lines[4] = lines[4].replace('"p":0.0001234', '"p":0.0401234')  # line 5, the omnibus decision
    _write(run_dir, lines)
    line, message = _first(verify_log(run_dir))
    assert line == 5
    assert message == ("line 5 was changed after it was written: its chain value does not "
                       "match its contents")
    assert len(verify_log(run_dir).problems) == 1


def test_edited_field_with_its_chain_recomputed_is_found_at_the_next_line(run_dir: Path) -> None:
    lines = _lines(run_dir)
    record = json.loads(lines[4])
    record["p"] = 0.0401234
    record.pop("chain")
    record["chain"] = chain_value(record["prev"], record)
    lines[4] = canonical_json(record) + "\n"
    _write(run_dir, lines)
    line, message = _first(verify_log(run_dir))
    assert line == 6 and message.startswith("line 6 does not follow line 5")


def test_inserted_line_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    lines.insert(3, lines[2])  # a copy of line 3 becomes line 4
    _write(run_dir, lines)
    report = verify_log(run_dir)
    line, message = _first(report)
    assert line == 4 and message == ("line 4 has seq 2 where 3 was expected: a record was "
                                     "inserted, deleted or moved here")
    assert any("counts 4 decisions, but the log holds 5" in m for m in report.messages)


def test_forged_insertion_with_valid_chain_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    fake = {"kind": "decision", "seq": 3, "prev": json.loads(lines[2])["chain"], "stage": "x",
            "endpoint": None, "plan_ref": "alpha", "method": None, "statistic": None,
            "threshold": None, "p": None, "outcome": "o", "action": "a", "reason": "forged.",
            "details": None}
    fake["chain"] = chain_value(fake["prev"], fake)
    lines.insert(3, canonical_json(fake) + "\n")  # a consistent line 4
    _write(run_dir, lines)
    line, message = _first(verify_log(run_dir))
    assert line == 5 and "has seq 3 where 4 was expected" in message


def test_deleted_line_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    del lines[3]  # the warning on line 4
    _write(run_dir, lines)
    report = verify_log(run_dir)
    line, message = _first(report)
    assert line == 4 and "has seq 4 where 3 was expected" in message
    assert "line 4 does not follow line 3" in report.messages[1]
    assert any("counts 1 warnings, but the log holds 0" in m for m in report.messages)


def test_swapped_lines_are_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    lines[4], lines[5] = lines[5], lines[4]
    _write(run_dir, lines)
    line, message = _first(verify_log(run_dir))
    assert line == 5 and "has seq 5 where 4 was expected" in message


def test_truncated_log_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    _write(run_dir, lines[:-1])
    line, message = _first(verify_log(run_dir))
    assert line == 8
    assert message == ("the log ends after line 7 without a finish record: it was cut short, "
                       "or the run did not finish")
    _write(run_dir, lines[:3])
    assert verify_log(run_dir).first_bad_line == 4


def test_partial_last_line_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    _write(run_dir, lines[:-1] + [lines[-1][:40]])
    line, message = _first(verify_log(run_dir))
    assert line == 8 and message.startswith("line 8 is incomplete")
    _write(run_dir, lines[:-1] + [lines[-1].rstrip("\n")])  # only the final newline lost
    assert _first(verify_log(run_dir))[0] == 8


def test_edited_results_are_found(run_dir: Path) -> None:
    (run_dir / "results.json").write_bytes(RESULTS.replace(b"[]", b"[1]"))
    report = verify_log(run_dir)
    line, message = _first(report)
    assert line == 8
    assert message.startswith("results.json does not match the finish record on line 8")
    (run_dir / "results.json").unlink()
    line, message = _first(verify_log(run_dir))
    assert line == 8 and message.startswith("results.json is missing")


def test_results_given_explicitly_or_beside_the_log(run_dir: Path, tmp_path: Path) -> None:
    elsewhere = tmp_path / "copy.jsonl"
    elsewhere.write_bytes((run_dir / "decisions.jsonl").read_bytes())
    alone = verify_log(elsewhere)
    assert alone.ok and not alone.results_checked
    assert verify_log(elsewhere, results=run_dir / "results.json").results_checked
    assert not verify_log(elsewhere, results=tmp_path / "nothing.json").ok


def test_results_present_for_a_run_that_wrote_none(tmp_path: Path) -> None:
    log = DecisionLog(tmp_path / "decisions.jsonl")
    _start(log)
    log.finish(status="halted", exit_code=4, reason="The plan halts when variances differ.")
    assert verify_log(tmp_path / "decisions.jsonl").ok
    (tmp_path / "results.json").write_bytes(b"{}")
    _, message = _first(verify_log(tmp_path / "decisions.jsonl"))
    assert "says the run wrote no results" in message


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("{not json\n", "line 3 is not valid JSON"),
        ("[1, 2]\n", "line 3 is not a JSON object"),
        ('{"p": NaN}\n', "line 3 holds NaN or Infinity"),
        ("\n", "line 3 is empty"),
        ("[" * 100_000 + "\n", "line 3 is not valid JSON"),
    ],
)
def test_malformed_line_is_a_problem_not_a_traceback(
    run_dir: Path, text: str, message: str
) -> None:
    lines = _lines(run_dir)
    lines[2] = text
    _write(run_dir, lines)
    line, first = _first(verify_log(run_dir))
    assert line == 3 and first.startswith(message)


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(garbage=st.one_of(
    st.binary(max_size=200),
    st.recursive(st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False)
                 | st.text(max_size=10),
                 lambda inner: st.lists(inner, max_size=3)
                 | st.dictionaries(st.sampled_from(["kind", "seq", "prev", "chain", "p"]), inner,
                                   max_size=4),
                 max_leaves=20).map(lambda v: json.dumps(v).encode()),
    st.just(b"[" * 900 + b"]" * 900),
    st.just(b'{"kind": ["start"], "seq": 1e999}'),
))
def test_verify_never_raises_on_garbage(run_dir: Path, garbage: bytes) -> None:
    raw = (run_dir / "decisions.jsonl").read_bytes().split(b"\n")
    raw[3] = garbage.replace(b"\n", b" ")
    (run_dir / "decisions.jsonl").write_bytes(b"\n".join(raw))
    report = verify_log(run_dir)
    assert not report.ok and report.first_bad_line is not None and report.first_bad_line >= 4


def test_invalid_utf8_is_a_problem(run_dir: Path) -> None:
    raw = (run_dir / "decisions.jsonl").read_bytes().split(b"\n")
    raw[1] = b"\xff\xfe" + raw[1]
    (run_dir / "decisions.jsonl").write_bytes(b"\n".join(raw))
    assert _first(verify_log(run_dir)) == (2, "line 2 is not valid UTF-8 text")


def test_re_encoded_line_is_found(run_dir: Path) -> None:
    lines = _lines(run_dir)
    lines[2] = json.dumps(json.loads(lines[2]), indent=None) + "\n"  # same data, other spacing
    _write(run_dir, lines)
    line, message = _first(verify_log(run_dir))
    assert line == 3 and "not in the form planrunner writes" in message
    lines = _lines(run_dir)
    lines[2] = _fresh_lines()[2].replace('{"action"', '{"p":0.9,"action"', 1)
    _write(run_dir, lines)  # a repeated key: the parsed record still chains, the text does not
    assert "not in the form planrunner writes" in _first(verify_log(run_dir))[1]


def _fresh_lines() -> list[str]:
    return [line.decode() + "\n" for line in build_log().to_bytes().splitlines()]


def test_records_after_finish_and_wrong_first_line(run_dir: Path) -> None:
    # a copy of line 3 appended after the finish record, chain values recomputed, seq left at 2
    _write(run_dir, _rechain(_lines(run_dir) + [_lines(run_dir)[2]]))
    messages = verify_log(run_dir).messages
    assert "line 9 comes after the finish record on line 8" in messages
    lines = _fresh_lines()
    _write(run_dir, _rechain(lines[1:]))  # the start record removed and everything re-chained
    report = verify_log(run_dir)
    assert report.first_bad_line == 1 and "line 1 is not the start record" in report.messages


def test_full_rewrite_needs_the_kept_head(run_dir: Path) -> None:
    # The limitation the module documents: recomputing every later chain value gives a
    # consistent file; only a final chain value kept elsewhere exposes it.
    kept = verify_log(run_dir).head
    lines = _lines(run_dir)
    record = json.loads(lines[4])
    record["p"] = 0.0401234
    lines[4] = json.dumps(record) + "\n"
    lines = _rechain(lines, start=4)
    _write(run_dir, lines)
    assert verify_log(run_dir).ok
    report = verify_log(run_dir, expected_head=kept)
    assert not report.ok and report.first_bad_line is None
    assert f"not the {kept} kept for it" in report.problems[0].message


def test_shape_problems_are_reported(run_dir: Path) -> None:
    lines = _lines(run_dir)
    record = json.loads(lines[2])
    record.pop("reason")
    record["colour"] = "red"
    record["p"] = "small"
    lines[2] = canonical_json(record) + "\n"
    _write(run_dir, _rechain(lines, start=2))
    messages = verify_log(run_dir).messages
    assert "line 3: the decision record lacks 'reason'" in messages
    assert "line 3: the decision record has unknown keys 'colour'" in messages
    assert "line 3: 'p' should be a number or null; got 'small'" in messages


def test_verify_misuse_raises_plan_error(tmp_path: Path) -> None:
    with pytest.raises(PlanError, match="holds no decisions.jsonl"):
        verify_log(tmp_path)
    with pytest.raises(PlanError, match="does not exist"):
        verify_log(tmp_path / "nothing.jsonl")
    (tmp_path / "decisions.jsonl").write_bytes(b"")
    report = verify_log(tmp_path)
    assert report.problems[0].message.endswith("decisions.jsonl is empty")


# --------------------------------------------------------------------------- schema


def _check(value: Any, schema: dict[str, Any], root: dict[str, Any], where: str = "$") -> list[str]:
    """A small JSON Schema checker for the keywords decisions.schema.json uses (test only)."""
    if "$ref" in schema:
        ref = schema["$ref"]
        assert ref.startswith("#/$defs/"), ref
        errors = _check(value, root["$defs"][ref.removeprefix("#/$defs/")], root, where)
        rest = {k: v for k, v in schema.items() if k not in ("$ref", "description")}
        return errors + (_check(value, rest, root, where) if rest else [])
    known = {"type", "const", "enum", "pattern", "minimum", "maximum", "minLength", "required",
             "properties", "additionalProperties", "items", "oneOf", "description", "title",
             "$schema", "$id", "$defs"}
    assert set(schema) <= known, set(schema) - known
    errors: list[str] = []
    if "oneOf" in schema:
        passing = [s for s in schema["oneOf"] if not _check(value, s, root, where)]
        if len(passing) != 1:
            errors.append(f"{where}: matches {len(passing)} of oneOf")
    if "type" in schema:
        types = schema["type"] if isinstance(schema["type"], list) else [schema["type"]]
        kinds = {"null": value is None, "boolean": isinstance(value, bool),
                 "string": isinstance(value, str), "object": isinstance(value, dict),
                 "array": isinstance(value, list),
                 "number": isinstance(value, (int, float)) and not isinstance(value, bool),
                 "integer": isinstance(value, int) and not isinstance(value, bool)}
        if not any(kinds[t] for t in types):
            return errors + [f"{where}: {value!r} is not {types}"]
    if "const" in schema and value != schema["const"]:
        errors.append(f"{where}: {value!r} is not {schema['const']!r}")
    if "enum" in schema and value not in schema["enum"]:
        errors.append(f"{where}: {value!r} not in {schema['enum']}")
    if isinstance(value, str):
        if "pattern" in schema and not re.search(schema["pattern"], value):
            errors.append(f"{where}: {value!r} does not match {schema['pattern']}")
        if len(value) < schema.get("minLength", 0):
            errors.append(f"{where}: too short")
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if "minimum" in schema and value < schema["minimum"]:
            errors.append(f"{where}: below minimum")
        if "maximum" in schema and value > schema["maximum"]:
            errors.append(f"{where}: above maximum")
    if isinstance(value, dict):
        errors += [f"{where}: lacks {k!r}" for k in schema.get("required", []) if k not in value]
        props = schema.get("properties", {})
        extra = schema.get("additionalProperties", True)
        for key, item in value.items():
            if key in props:
                errors += _check(item, props[key], root, f"{where}.{key}")
            elif extra is False:
                errors.append(f"{where}: unexpected key {key!r}")
            elif isinstance(extra, dict):
                errors += _check(item, extra, root, f"{where}.{key}")
    if isinstance(value, list) and "items" in schema:
        for i, item in enumerate(value):
            errors += _check(item, schema["items"], root, f"{where}[{i}]")
    return errors


@pytest.fixture(scope="module")
def schema() -> dict[str, Any]:
    return json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))


def test_schema_header(schema: dict[str, Any]) -> None:
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["$id"] == "urn:planrunner:schema:decisions:1"
    assert "decisions.jsonl" in schema["title"]


def test_schema_matches_the_writer(schema: dict[str, Any]) -> None:
    # The schema and RECORD_FIELDS in planrunner.audit.log describe the same keys per kind.
    for kind, fields in RECORD_FIELDS.items():
        spec = schema["$defs"][kind]
        assert set(spec["required"]) == set(fields) | {"kind", "seq", "prev", "chain"}, kind
        assert set(spec["properties"]) == set(spec["required"]), kind
        assert spec["properties"]["kind"] == {"const": kind}
    assert [s["$ref"] for s in schema["oneOf"]] == [f"#/$defs/{k}" for k in RECORD_FIELDS]


def test_written_records_validate_against_the_schema(schema: dict[str, Any], tmp_path: Path,
                                                     monkeypatch) -> None:
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path.parent))
    records = build_log().records
    # and a start record built from real provenance facts, with a lock status
    (tmp_path / "plan.yaml").write_text("planrunner: 1\n")
    (tmp_path / "data.csv").write_text("g,y\na,1\n")
    real = DecisionLog()
    real.start(plan_sha256="c" * 64, plan_id=None,
               lock={"state": "unlocked", "lock_file": "plan.yaml.lock.json",
                     "current_sha256": "c" * 64, "locked_sha256": None,
                     "locked_at_utc": None, "locked_commit": None},
               **provenance.start_facts(tmp_path / "plan.yaml", tmp_path / "data.csv"))
    real.finish(status="failed", exit_code=1, reason="An internal error stopped the run.")
    for record in records + real.records:
        assert _check(record, schema, schema) == [], record["kind"]


def test_schema_checker_is_not_vacuous(schema: dict[str, Any]) -> None:
    decision = build_log().records[2]
    assert decision["kind"] == "decision" and not _check(decision, schema, schema)
    for broken, fragment in [
        ({k: v for k, v in decision.items() if k != "reason"}, "matches 0 of oneOf"),
        ({**decision, "colour": "red"}, "matches 0 of oneOf"),
        ({**decision, "p": 1.5}, "matches 0 of oneOf"),
        ({**decision, "kind": "verdict"}, "matches 0 of oneOf"),
    ]:
        assert fragment in _check(broken, schema, schema)[0]
    without_reason = {k: v for k, v in decision.items() if k != "reason"}
    assert "lacks 'reason'" in _check(without_reason, schema["$defs"]["decision"], schema)[0]
