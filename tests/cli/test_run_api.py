"""End-to-end runs through the Python API: run_plan and lock_plan.

The small plans and CSV files below are invented for these tests (demonstration data, no real
study). Each test checks what a run writes, what it refuses, and the exit code the CLI will map
the outcome or exception to (DESIGN.md, "Commands and exit codes").
"""

from __future__ import annotations

import hashlib
import json
import threading
from pathlib import Path

import pytest

import planrunner.engine.run as engine_run
from planrunner import api
from planrunner.api import lock_plan, run_plan, verify_run
from planrunner.errors import DataError, LockMismatch, PlanError

REPO = Path(__file__).resolve().parents[2]
EXAMPLE_PLANS = sorted((REPO / "plans").glob("*.yaml"))

PLAN = """\
planrunner: 1
id: {id}
title: Invented demo - bench trial of three coatings
question: Does the mean coating thickness differ between the three coatings?
hypotheses: {{family: all_pairs, confirmatory: true}}
data:
  file: {data_file}
  group: coating
  response: thickness_um
  levels: [alpha, beta, gamma]
  missing: {missing}
  min_n: 3
alpha: {alpha}
omnibus: classic
{extra}comparisons: {{method: tukey_kramer}}
"""

# invented demo values
ROWS = {
    "alpha": [10.1, 10.4, 9.8, 10.2, 10.0, 10.3],
    "beta": [11.0, 11.3, 10.9, 11.4, 11.1, 10.8],
    "gamma": [10.6, 10.2, 10.9, 10.5, 10.7, 10.4],
}
# invented: gamma's spread is far larger than alpha's, so a variance gate fails
SPREAD_ROWS = {
    "alpha": [10.0, 10.1, 9.9, 10.05, 9.95, 10.02],
    "beta": [11.0, 11.2, 10.8, 11.1, 10.9, 11.05],
    "gamma": [4.0, 19.0, 2.0, 25.0, 9.0, 14.0],
}
HALT_EXTRA = (
    "variance_check: {method: hartley_fmax, alpha: 0.05, role: gate}\n"
    "when_variances_differ: halt\n"
)


def write_csv(path: Path, rows: dict[str, list[float]]) -> Path:
    lines = ["coating,thickness_um"]
    for level, values in rows.items():
        lines += [f"{level},{v!r}" for v in values]
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def write_study(folder: Path, *, plan_id: str = "coating-demo", rows=None, extra: str = "",
                missing: str = "reject", alpha: float = 0.05) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    write_csv(folder / "data" / "coatings.csv", ROWS if rows is None else rows)
    plan = folder / "coatings.yaml"
    plan.write_text(PLAN.format(id=plan_id, data_file="data/coatings.csv", missing=missing,
                                alpha=alpha, extra=extra), encoding="utf-8")
    return plan


def records(run_dir: Path) -> list[dict]:
    text = (run_dir / "decisions.jsonl").read_text(encoding="utf-8")
    return [json.loads(line) for line in text.splitlines()]


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --------------------------------------------------------------------------------------------
# a completed run


def test_run_writes_results_log_and_resolved_plan(tmp_path):
    plan = write_study(tmp_path / "study")
    out = tmp_path / "runs" / "first"
    outcome = run_plan(plan, out=out, operator="A. Tester", command=["planrunner", "run", "x"])

    assert outcome.exit_code == 0 and outcome.status == "completed"
    assert sorted(p.name for p in out.iterdir()) == [
        "decisions.jsonl", "plan.resolved.yaml", "report.html", "report.md", "results.json"]
    # nothing left beside RUN_DIR: no staging folder, no lock file
    assert sorted(p.name for p in out.parent.iterdir()) == ["first"]

    results = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert results["format"] == "planrunner.results/1"
    assert results["status"] == "completed"
    assert results["plan"]["id"] == "coating-demo"
    assert results["plan"]["raw_sha256"] == sha256(plan)
    assert results["data"]["file"] == "data/coatings.csv"
    assert results["data"]["sha256"] == sha256(plan.parent / "data" / "coatings.csv")
    assert results["data"]["rows_read"] == 18
    assert [e["endpoint"] for e in results["endpoints"]] == ["thickness_um"]

    log = records(out)
    start, finish = log[0], log[-1]
    assert start["kind"] == "start" and finish["kind"] == "finish"
    assert start["plan"]["sha256"] == results["plan"]["fingerprint"]
    assert start["plan"]["raw_sha256"] == sha256(plan)
    assert start["data"]["sha256"] == results["data"]["sha256"]
    assert start["operator"] == {"name": "A. Tester", "source": "option"}
    assert start["command"] == ["planrunner", "run", "x"]
    assert start["lock"]["state"] == "unlocked"
    assert start["software"]["numpy"] is not None
    assert start["plan_before_data"]["answer"] in ("yes", "no", "unknown")
    assert finish["status"] == "completed" and finish["exit_code"] == 0
    assert finish["results_sha256"] == sha256(out / "results.json")
    assert outcome.results_sha256 == finish["results_sha256"]
    assert outcome.log_head == finish["chain"]
    assert any(r["kind"] == "decision" and r["endpoint"] == "thickness_um" for r in log)


def test_plan_warnings_are_logged_as_warning_records(tmp_path):
    # the plan is confirmatory without a sample_size justification: the plan layer warns
    plan = write_study(tmp_path / "study")
    outcome = run_plan(plan, out=tmp_path / "run")
    warnings = [r for r in records(tmp_path / "run") if r["kind"] == "warning"
                and r["stage"] == "plan"]
    assert any(w["plan_ref"] == "hypotheses.confirmatory" for w in warnings)
    assert any("sample_size" in w for w in outcome.plan_warnings)


def test_summary_names_plan_endpoints_folder_and_chain_value(tmp_path):
    plan = write_study(tmp_path / "study")
    outcome = run_plan(plan, out=tmp_path / "run")
    text = outcome.summary()
    assert "plan coating-demo (revision 1) on data/coatings.csv" in text
    assert "thickness_um:" in text
    assert "the plan ran to its end" in text
    assert str(tmp_path / "run") in text
    assert outcome.log_head in text


def test_rerun_on_the_same_plan_and_data_is_byte_identical(tmp_path):
    plan = write_study(tmp_path / "study")
    first = run_plan(plan, out=tmp_path / "a")
    second = run_plan(plan, out=tmp_path / "b")
    assert (tmp_path / "a" / "results.json").read_bytes() == \
        (tmp_path / "b" / "results.json").read_bytes()
    assert first.results_sha256 == second.results_sha256
    # the logs differ (time, chain) but both are intact
    assert verify_run(tmp_path / "a", rerun=False).exit_code == 0
    # a run into an existing RUN_DIR replaces it as a whole
    third = run_plan(plan, out=tmp_path / "a")
    assert third.results_sha256 == first.results_sha256
    assert records(tmp_path / "a")[-1]["chain"] == third.log_head


def test_default_run_dir_is_reports_plan_id_under_the_current_folder(tmp_path, monkeypatch):
    plan = write_study(tmp_path / "study", plan_id="coating-default")
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    outcome = run_plan(plan)
    assert outcome.run_dir == work / "reports" / "coating-default"
    assert (work / "reports" / "coating-default" / "results.json").is_file()


def test_data_override_reads_another_batch_and_names_it_as_given(tmp_path, monkeypatch):
    plan = write_study(tmp_path / "study")
    batch = write_csv(tmp_path / "batches" / "batch-2.csv",
                      {k: [v + 0.1 for v in vals] for k, vals in ROWS.items()})
    monkeypatch.chdir(tmp_path)
    outcome = run_plan(plan, data="batches/batch-2.csv", out=tmp_path / "run")
    results = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    assert results["data"]["file"] == "batches/batch-2.csv"
    assert results["data"]["sha256"] == sha256(batch) == outcome.data_sha256
    assert records(tmp_path / "run")[0]["data"]["file"] == str(batch)


# --------------------------------------------------------------------------------------------
# locks and deviations


def test_lock_plan_creates_then_keeps_the_lock(tmp_path):
    plan = write_study(tmp_path / "study")
    first = lock_plan(plan)
    assert first.exit_code == 0 and first.action == "created"
    assert first.lock_file == plan.with_name("coatings.yaml.lock.json")
    assert first.raw_sha256 == sha256(plan)
    assert first.plan_sha256 in first.summary()
    again = lock_plan(plan)
    assert again.action == "unchanged" and again.locked_at_utc == first.locked_at_utc

    outcome = run_plan(plan, out=tmp_path / "run")
    assert outcome.lock_state == "matches"
    assert records(tmp_path / "run")[0]["lock"]["state"] == "matches"


def test_lock_plan_refuses_a_changed_plan_unless_replace(tmp_path):
    plan = write_study(tmp_path / "study")
    lock_plan(plan)
    write_study(tmp_path / "study", alpha=0.01)
    with pytest.raises(PlanError) as info:
        lock_plan(plan)
    assert info.value.exit_code == 2
    assert lock_plan(plan, replace=True).action == "replaced"


def test_plan_differing_from_its_lock_exits_5_and_writes_nothing(tmp_path):
    plan = write_study(tmp_path / "study")
    locked = lock_plan(plan)
    write_study(tmp_path / "study", alpha=0.01)  # a changed alpha after locking
    with pytest.raises(LockMismatch) as info:
        run_plan(plan, out=tmp_path / "run")
    assert info.value.exit_code == 5
    assert "--deviation" in str(info.value)
    assert locked.plan_sha256 in str(info.value)
    assert not (tmp_path / "run").exists()


def test_declared_deviation_is_recorded_and_the_run_goes_on(tmp_path):
    plan = write_study(tmp_path / "study")
    locked = lock_plan(plan)
    write_study(tmp_path / "study", alpha=0.01)
    reason = "alpha lowered to 0.01 at the sponsor's request before unblinding"
    outcome = run_plan(plan, out=tmp_path / "run", deviation=reason)
    assert outcome.exit_code == 0 and outcome.lock_state == "differs"
    log = records(tmp_path / "run")
    assert log[0]["lock"]["state"] == "differs"
    deviations = [r for r in log if r["kind"] == "deviation"]
    assert len(deviations) == 1
    assert deviations[0]["reason"] == reason
    assert locked.plan_sha256 in deviations[0]["differs"]
    assert log[-1]["counts"]["deviations"] == 1
    assert reason in outcome.summary()


@pytest.mark.parametrize("deviation", ["", "   ", "two\nlines"])
def test_unusable_deviation_is_misuse(tmp_path, deviation):
    plan = write_study(tmp_path / "study")
    with pytest.raises(PlanError) as info:
        run_plan(plan, out=tmp_path / "run", deviation=deviation)
    assert info.value.exit_code == 2
    assert not (tmp_path / "run").exists()


# --------------------------------------------------------------------------------------------
# refusals: invalid plan, rejected data


def test_invalid_plan_exits_2(tmp_path):
    plan = write_study(tmp_path / "study")
    plan.write_text(plan.read_text(encoding="utf-8").replace("omnibus: classic",
                                                               "omnibus: clasic"),
                    encoding="utf-8")
    with pytest.raises(PlanError) as info:
        run_plan(plan, out=tmp_path / "run")
    assert info.value.exit_code == 2
    assert any("did you mean 'classic'" in p for p in info.value.problems)
    assert not (tmp_path / "run").exists()


def test_data_problems_list_file_row_and_column_and_nothing_is_written(tmp_path):
    plan = write_study(tmp_path / "study")
    csv = plan.parent / "data" / "coatings.csv"
    lines = csv.read_text(encoding="utf-8").splitlines()
    lines[2] = "alpha,10.4 um"  # file row 3: a unit after the number
    lines[8] = "gama,11.0"  # file row 9: a group not in the plan
    csv.write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.raises(DataError) as info:
        run_plan(plan, out=tmp_path / "runs" / "run")
    assert info.value.exit_code == 3
    problems = info.value.problems
    assert any(p.startswith("data/coatings.csv row 3, column 'thickness_um'") for p in problems)
    assert any(p.startswith("data/coatings.csv row 9, column 'coating'") and "gamma" in p
               for p in problems)
    assert not (tmp_path / "runs").exists()


def test_missing_data_file_is_a_data_error(tmp_path):
    plan = write_study(tmp_path / "study")
    with pytest.raises(DataError) as info:
        run_plan(plan, data=tmp_path / "nowhere.csv", out=tmp_path / "run")
    assert info.value.exit_code == 3
    assert not (tmp_path / "run").exists()


# --------------------------------------------------------------------------------------------
# halts, failures, concurrency, archive


def test_halt_by_the_plans_own_rule_exits_4_with_files_written(tmp_path):
    plan = write_study(tmp_path / "study", rows=SPREAD_ROWS, extra=HALT_EXTRA)
    outcome = run_plan(plan, out=tmp_path / "run")
    assert outcome.exit_code == 4 and outcome.status == "halted"
    assert outcome.halted_endpoints == ("thickness_um",)
    results = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    assert results["status"] == "halted"
    assert results["halted_endpoints"] == ["thickness_um"]
    assert results["endpoints"][0]["status"] == "halted"
    assert results["endpoints"][0]["halt_reason"]
    finish = records(tmp_path / "run")[-1]
    assert finish["status"] == "halted" and finish["exit_code"] == 4
    assert finish["results_sha256"] == sha256(tmp_path / "run" / "results.json")
    assert "stopped itself" in outcome.summary()
    assert verify_run(tmp_path / "run").exit_code == 0


def test_small_group_under_degenerate_groups_halt_exits_4(tmp_path):
    rows = {**ROWS, "gamma": ROWS["gamma"][:2]}  # 2 values, below min_n = 3
    plan = write_study(tmp_path / "study", rows=rows)
    text = plan.read_text(encoding="utf-8").replace("  min_n: 3\n",
                                                    "  min_n: 3\n  degenerate_groups: halt\n")
    plan.write_text(text, encoding="utf-8")
    outcome = run_plan(plan, out=tmp_path / "run")
    assert outcome.exit_code == 4
    assert "min_n" in outcome.endpoints[0].halt_reason
    assert (tmp_path / "run" / "results.json").is_file()


def test_small_group_under_degenerate_groups_reject_is_a_data_error(tmp_path):
    rows = {**ROWS, "gamma": ROWS["gamma"][:2]}
    plan = write_study(tmp_path / "study", rows=rows)
    with pytest.raises(DataError) as info:
        run_plan(plan, out=tmp_path / "run")
    assert info.value.exit_code == 3
    assert any("gamma" in p and "min_n" in p for p in info.value.problems)
    assert not (tmp_path / "run").exists()


def test_a_failing_run_leaves_the_earlier_run_untouched(tmp_path, monkeypatch):
    plan = write_study(tmp_path / "study")
    out = tmp_path / "run"
    run_plan(plan, out=out)
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def broken(*args, **kwargs):
        raise RuntimeError("simulated failure inside the engine")

    monkeypatch.setattr(engine_run, "analyse", broken)
    with pytest.raises(RuntimeError):
        run_plan(plan, out=out)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run", "study"]


def test_a_second_run_into_the_same_folder_at_once_is_refused(tmp_path, monkeypatch):
    plan = write_study(tmp_path / "study")
    out = tmp_path / "run"
    real = engine_run.analyse
    entered, release = threading.Event(), threading.Event()
    outcomes: list = []

    def slow(*args, **kwargs):
        entered.set()
        assert release.wait(30)
        return real(*args, **kwargs)

    monkeypatch.setattr(engine_run, "analyse", slow)
    first = threading.Thread(target=lambda: outcomes.append(run_plan(plan, out=out)))
    first.start()
    try:
        assert entered.wait(30)
        monkeypatch.setattr(engine_run, "analyse", real)
        with pytest.raises(PlanError) as info:
            run_plan(plan, out=out)
        assert info.value.exit_code == 2
        assert "another run is writing" in str(info.value)
    finally:
        release.set()
        first.join(30)
    assert outcomes and outcomes[0].exit_code == 0
    assert (out / "results.json").is_file()


def test_archive_copies_inputs_with_a_checksum_manifest(tmp_path):
    plan = write_study(tmp_path / "study")
    lock_plan(plan)
    outcome = run_plan(plan, out=tmp_path / "run", archive=True)
    folder = tmp_path / "run" / api.ARCHIVE_DIR
    assert "input/" in outcome.files
    manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["format"] == "planrunner.input/1"
    by_role = {e["role"]: e for e in manifest["files"]}
    assert set(by_role) == {"plan", "data", "lock"}
    assert (folder / "coatings.csv").read_bytes() == (plan.parent / "data" /
                                                      "coatings.csv").read_bytes()
    for entry in manifest["files"]:
        assert sha256(folder / entry["name"]) == entry["sha256"]
    assert by_role["data"]["sha256"] == records(tmp_path / "run")[0]["data"]["sha256"]
    assert by_role["plan"]["sha256"] == sha256(plan)


def test_a_second_archived_run_replaces_the_first(tmp_path):
    # input/ is part of what a run writes, so a later run into the same folder replaces it
    plan = write_study(tmp_path / "study")
    run_plan(plan, out=tmp_path / "run", archive=True)
    first = (tmp_path / "run" / "results.json").read_bytes()
    run_plan(plan, out=tmp_path / "run", archive=True)
    assert (tmp_path / "run" / "results.json").read_bytes() == first
    assert (tmp_path / "run" / api.ARCHIVE_DIR / "manifest.json").is_file()
    run_plan(plan, out=tmp_path / "run")  # without --archive the old input/ goes too
    assert not (tmp_path / "run" / api.ARCHIVE_DIR).exists()
    assert verify_run(tmp_path / "run").exit_code == 0


# --------------------------------------------------------------------------------------------
# the example plans shipped in plans/


def test_example_plans_exist():
    assert len(EXAMPLE_PLANS) >= 3


@pytest.mark.parametrize("plan", EXAMPLE_PLANS, ids=lambda p: p.stem)
def test_example_plan_runs_and_verifies(tmp_path, plan):
    outcome = run_plan(plan, out=tmp_path / "run")
    assert outcome.exit_code in (0, 4)
    results = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    assert results["plan"]["raw_sha256"] == sha256(plan)
    assert results["status"] == ("halted" if outcome.exit_code == 4 else "completed")
    if results["across_endpoints"] is not None:
        assert "adjusted across endpoints" in outcome.summary()
    checked = verify_run(tmp_path / "run")
    assert checked.exit_code == 0, checked.summary()
    assert checked.rerun == "identical"


# --------------------------------------------------------------------------------------------
# transformation domains are checked before a transformation is applied


def test_log_of_zero_without_a_shift_is_rejected_with_row_and_column(tmp_path):
    rows = {k: list(v) for k, v in ROWS.items()}
    rows["beta"][2] = 0.0  # data row 10 of the file (header is row 1)
    plan = write_study(tmp_path / "study", rows=rows,
                       extra="transform: {policy: fixed, transform: log, shift: none}\n")
    with pytest.raises(DataError) as info:
        run_plan(plan, out=tmp_path / "run")
    assert info.value.exit_code == 3
    text = str(info.value)
    assert "row 10, column 'thickness_um'" in text
    assert "log" in text
    assert not (tmp_path / "run").exists()


def test_log_of_zero_with_the_automatic_shift_records_the_constant(tmp_path):
    rows = {k: list(v) for k, v in ROWS.items()}
    rows["beta"][2] = 0.0
    plan = write_study(tmp_path / "study", rows=rows,
                       extra="transform: {policy: fixed, transform: log, shift: auto}\n")
    outcome = run_plan(plan, out=tmp_path / "run")
    assert outcome.exit_code == 0
    results = json.loads((tmp_path / "run" / "results.json").read_text(encoding="utf-8"))
    transform = results["endpoints"][0]["transform"]
    assert transform["name"] == "log"
    assert transform["shift"] > 0


def test_proportion_above_one_is_rejected_with_row_and_column(tmp_path):
    rows = {k: [v / 20 for v in vals] for k, vals in ROWS.items()}
    rows["gamma"][0] = 1.2  # data row 14
    plan = write_study(tmp_path / "study", rows=rows)
    text = plan.read_text(encoding="utf-8").replace(
        "  response: thickness_um\n", "  response: thickness_um\n  response_kind: proportion\n")
    plan.write_text(text, encoding="utf-8")
    with pytest.raises(DataError) as info:
        run_plan(plan, out=tmp_path / "run")
    assert "row 14, column 'thickness_um'" in str(info.value)
    assert "1.2" in str(info.value)
