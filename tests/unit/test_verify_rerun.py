"""verify_run: tampering with a run folder is found, and a rerun reproduces results.json.

Every case starts from one real run of a small invented plan (demonstration data). The log
cases (edit, insert, delete, reorder, truncate) must name the first bad record by its line;
an edited results.json must be caught by its hash; a log and results.json rewritten
consistently (chain recomputed) pass the hash checks but not the rerun, which names the value
that differs.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from planrunner.api import run_plan, verify_run
from planrunner.audit.log import canonical_json, chain_value, sha256_hex
from planrunner.errors import PlanError

PLAN = """\
planrunner: 1
id: verify-demo
title: Invented demo - three feeds and the final mass of a test organism
question: Does the mean final mass differ between the three feeds?
hypotheses: {family: all_pairs, confirmatory: false}
data:
  file: data/feeds.csv
  group: feed
  response: mass_mg
  levels: [plain, enriched, fortified]
  min_n: 3
alpha: 0.05
omnibus: welch
comparisons: {method: games_howell}
"""

# invented demo values
CSV = """\
feed,mass_mg
plain,41.2
plain,39.8
plain,40.5
plain,42.0
plain,40.9
enriched,44.1
enriched,45.3
enriched,43.8
enriched,46.0
enriched,44.7
fortified,47.9
fortified,46.2
fortified,48.8
fortified,47.1
fortified,49.5
"""


@pytest.fixture(scope="module")
def pristine(tmp_path_factory):
    """A study folder and one completed, archived run of it (copied per test)."""
    base = tmp_path_factory.mktemp("verify")
    study = base / "study"
    (study / "data").mkdir(parents=True)
    (study / "plan.yaml").write_text(PLAN, encoding="utf-8")
    (study / "data" / "feeds.csv").write_text(CSV, encoding="utf-8")
    run_plan(study / "plan.yaml", out=base / "run", archive=True)
    return base


@pytest.fixture
def run(tmp_path, pristine):
    """A fresh copy of the run folder and its log lines.

    The start record names the pristine study's plan and data files (absolute paths), so a
    rerun reads those; tests that move or change them put them back.
    """
    shutil.copytree(pristine / "run", tmp_path / "run")
    return tmp_path / "run", log_lines(tmp_path / "run")


def log_lines(run_dir: Path) -> list[str]:
    return (run_dir / "decisions.jsonl").read_text(encoding="utf-8").splitlines()


def write_lines(run_dir: Path, lines: list[str], *, final_newline: bool = True) -> None:
    text = "\n".join(lines) + ("\n" if final_newline else "")
    (run_dir / "decisions.jsonl").write_text(text, encoding="utf-8")


def test_intact_run_verifies_and_reruns_identically(run):
    run_dir, _ = run
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 0, outcome.summary()
    assert outcome.rerun == "identical"
    assert outcome.archive_checked
    assert "every check holds" in outcome.summary()
    assert outcome.first_bad_line is None


def test_the_log_has_enough_records_for_the_tamper_cases(run):
    run_dir, lines = run
    assert len(lines) >= 5


def test_edited_record_is_found_on_its_line(run):
    run_dir, lines = run
    record = json.loads(lines[2])
    key = "reason" if record["kind"] == "decision" else "message"
    record[key] = record[key] + " (edited)"
    lines[2] = canonical_json(record)
    write_lines(run_dir, lines)
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert outcome.first_bad_line == 3
    assert "changed after it was written" in outcome.log.problems[0].message
    assert outcome.rerun == "not_run"


def test_inserted_record_is_found_on_its_line(run):
    run_dir, lines = run
    write_lines(run_dir, lines[:3] + [lines[2]] + lines[3:])
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert outcome.first_bad_line == 4


def test_deleted_record_is_found_on_its_line(run):
    run_dir, lines = run
    write_lines(run_dir, lines[:2] + lines[3:])
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert outcome.first_bad_line == 3


def test_reordered_records_are_found_on_the_first_moved_line(run):
    run_dir, lines = run
    lines[1], lines[2] = lines[2], lines[1]
    write_lines(run_dir, lines)
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert outcome.first_bad_line == 2


def test_truncated_log_is_found(run):
    run_dir, lines = run
    cut = lines[:-1] + [lines[-1][: len(lines[-1]) // 2]]
    write_lines(run_dir, cut, final_newline=False)
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert outcome.first_bad_line == len(lines)
    assert "cut off" in outcome.log.problems[0].message


def test_log_without_its_finish_record_is_found(run):
    run_dir, lines = run
    write_lines(run_dir, lines[:-1])
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert "without a finish record" in " ".join(outcome.problems)


def test_edited_results_json_is_found_by_its_hash(run):
    run_dir, _ = run
    path = run_dir / "results.json"
    results = json.loads(path.read_text(encoding="utf-8"))
    results["plan"]["title"] = "Something else"
    path.write_text(json.dumps(results, sort_keys=True, indent=2) + "\n", encoding="utf-8")
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert any("results.json does not match the finish record" in p for p in outcome.problems)


def test_consistent_rewrite_passes_the_hashes_but_not_the_rerun(run):
    # someone edits a value in results.json, then fixes the finish record and its chain value
    run_dir, lines = run
    path = run_dir / "results.json"
    results = json.loads(path.read_text(encoding="utf-8"))
    omnibus = results["endpoints"][0]["omnibus"]
    omnibus["pvalue"] = 0.0001 if omnibus["pvalue"] != 0.0001 else 0.0002
    content = (json.dumps(results, sort_keys=True, indent=2, ensure_ascii=False) + "\n").encode()
    path.write_bytes(content)
    finish = json.loads(lines[-1])
    finish["results_sha256"] = sha256_hex(content)
    body = {k: v for k, v in finish.items() if k != "chain"}
    finish["chain"] = chain_value(finish["prev"], body)
    lines[-1] = canonical_json(finish)
    write_lines(run_dir, lines)

    outcome = verify_run(run_dir)
    assert outcome.log.ok  # the chain alone cannot see a consistent rewrite
    assert outcome.rerun == "differs"
    assert outcome.exit_code == 1
    assert any(d.startswith("endpoints[0] (mass_mg).omnibus.pvalue:")
               for d in outcome.differences), outcome.differences
    assert "NOT reproduced" in outcome.summary()


def test_a_kept_chain_value_exposes_a_rewritten_log(run, pristine):
    run_dir, lines = run
    kept = json.loads(log_lines(pristine / "run")[-1])["chain"]
    assert verify_run(run_dir, rerun=False, expected_head=kept).exit_code == 0
    finish = json.loads(lines[-1])
    finish["reason"] = "rewritten"
    body = {k: v for k, v in finish.items() if k != "chain"}
    finish["chain"] = chain_value(finish["prev"], body)
    lines[-1] = canonical_json(finish)
    write_lines(run_dir, lines)
    assert verify_run(run_dir, rerun=False).exit_code == 0  # consistent on its own
    outcome = verify_run(run_dir, rerun=False, expected_head=kept)
    assert outcome.exit_code == 1
    assert "not the" in outcome.problems[0]


def test_rerun_uses_the_archived_data_when_the_original_is_gone(run, pristine, tmp_path):
    run_dir, _ = run
    original = pristine / "study" / "data" / "feeds.csv"
    moved = tmp_path / "moved.csv"
    shutil.move(original, moved)
    try:
        outcome = verify_run(run_dir)
    finally:
        shutil.move(moved, original)
    assert outcome.exit_code == 0, outcome.summary()
    assert outcome.rerun == "identical"
    assert "archived data copy" in outcome.rerun_note


def test_without_data_or_archive_the_rerun_is_not_done_and_said_so(run, pristine, tmp_path):
    run_dir, _ = run
    shutil.rmtree(run_dir / "input")
    original = pristine / "study" / "data" / "feeds.csv"
    moved = tmp_path / "moved.csv"
    shutil.move(original, moved)
    try:
        outcome = verify_run(run_dir)
    finally:
        shutil.move(moved, original)
    assert outcome.exit_code == 0
    assert outcome.rerun == "not_run"
    assert "no longer there" in outcome.rerun_note
    assert "rerun: not done" in outcome.summary()


def test_changed_data_file_is_not_used_for_the_rerun(run, pristine):
    run_dir, _ = run
    shutil.rmtree(run_dir / "input")
    original = pristine / "study" / "data" / "feeds.csv"
    text = original.read_text(encoding="utf-8")
    original.write_text(text.replace("41.2", "41.3"), encoding="utf-8")
    try:
        outcome = verify_run(run_dir)
    finally:
        original.write_text(text, encoding="utf-8")
    assert outcome.rerun == "not_run"
    assert "has changed since the run" in outcome.rerun_note


def test_edited_archive_is_found(run):
    run_dir, _ = run
    copy = run_dir / "input" / "feeds.csv"
    copy.write_text(copy.read_text(encoding="utf-8").replace("41.2", "14.2"), encoding="utf-8")
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert any("input/feeds.csv does not match manifest.json" in p for p in outcome.problems)


def test_edited_resolved_plan_is_found(run):
    run_dir, _ = run
    path = run_dir / "plan.resolved.yaml"
    path.write_text(path.read_text(encoding="utf-8").replace("alpha: 0.05", "alpha: 0.1", 1),
                    encoding="utf-8")
    outcome = verify_run(run_dir)
    assert outcome.exit_code == 1
    assert any("plan.resolved.yaml has the plan fingerprint" in p for p in outcome.problems)


def test_rerun_can_be_switched_off(run):
    run_dir, _ = run
    outcome = verify_run(run_dir, rerun=False)
    assert outcome.exit_code == 0 and outcome.rerun == "not_run"
    assert outcome.rerun_note == "not asked for"


def test_missing_run_folder_is_misuse(tmp_path):
    with pytest.raises(PlanError) as info:
        verify_run(tmp_path / "absent")
    assert info.value.exit_code == 2
    (tmp_path / "empty").mkdir()
    with pytest.raises(PlanError):
        verify_run(tmp_path / "empty")
