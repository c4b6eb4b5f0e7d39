"""`planrunner run`, `lock` and `verify` through typer's CliRunner: exit codes and messages."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planrunner.cli import app

PLANS = Path(__file__).resolve().parents[2] / "plans"
runner = CliRunner()


@pytest.fixture()
def study(tmp_path):
    """A copy of the Dunnett example plan with its data, in a folder of its own."""
    shutil.copytree(PLANS / "data", tmp_path / "data")
    plan = tmp_path / "tablet-coating-thickness.yaml"
    shutil.copy(PLANS / plan.name, plan)
    return plan


def invoke(*args: str):
    result = runner.invoke(app, list(args))
    assert "Traceback" not in result.output
    return result


def test_run_then_verify(study, tmp_path):
    out = tmp_path / "run"
    result = invoke("run", str(study), "--out", str(out), "--operator", "QA reviewer")
    assert result.exit_code == 0, result.output
    assert "the plan ran to its end" in result.output
    assert (out / "results.json").is_file() and (out / "decisions.jsonl").is_file()

    result = invoke("verify", str(out))
    assert result.exit_code == 0, result.output
    assert "every check holds" in result.output
    assert "reproduced byte for byte" in result.output


def test_verify_finds_an_edited_log(study, tmp_path):
    out = tmp_path / "run"
    assert invoke("run", str(study), "--out", str(out)).exit_code == 0
    log = out / "decisions.jsonl"
    lines = log.read_text(encoding="utf-8").splitlines(keepends=True)
    lines[3] = lines[3].replace('"significant"', '"not_significant"', 1).replace(
        '"usable"', '"unusable"', 1).replace('"passed"', '"failed"', 1)
    assert "".join(lines) != log.read_text(encoding="utf-8")
    log.write_text("".join(lines), encoding="utf-8")
    result = invoke("verify", str(out), "--no-rerun")
    assert result.exit_code == 1
    assert "line 4" in result.output


def test_lock_then_changed_plan_exits_5_unless_a_deviation_is_declared(study, tmp_path):
    result = invoke("lock", str(study))
    assert result.exit_code == 0, result.output
    text = study.read_text(encoding="utf-8").replace("alpha: 0.05\n", "alpha: 0.01\n", 1)
    assert "alpha: 0.01" in text
    study.write_text(text, encoding="utf-8")

    result = invoke("run", str(study), "--out", str(tmp_path / "run"))
    assert result.exit_code == 5
    assert "lock" in result.output
    assert not (tmp_path / "run").exists()

    result = invoke("run", str(study), "--out", str(tmp_path / "run"),
                    "--deviation", "alpha tightened at the sponsor's request before unblinding")
    assert result.exit_code == 0, result.output
    log = (tmp_path / "run" / "decisions.jsonl").read_text(encoding="utf-8")
    assert '"kind":"deviation"' in log and "sponsor" in log


def test_data_rejected_exits_3_with_row_and_column(study, tmp_path):
    data = tmp_path / "data" / "tablet-coating-thickness.csv"
    lines = data.read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    cells = lines[1].split(",")
    cells[header.index("setting")] = "setting_z"
    lines[1] = ",".join(cells)
    data.write_text("\n".join(lines) + "\n", encoding="utf-8")

    result = invoke("run", str(study), "--out", str(tmp_path / "run"))
    assert result.exit_code == 3
    assert "row 2, column 'setting'" in result.output
    assert "setting_z" in result.output
    assert not (tmp_path / "run").exists()


def test_run_with_another_data_file(study, tmp_path):
    other = tmp_path / "batch-2.csv"
    shutil.copy(tmp_path / "data" / "tablet-coating-thickness.csv", other)
    result = invoke("run", str(study), "--data", str(other), "--out", str(tmp_path / "run"))
    assert result.exit_code == 0, result.output
    assert "batch-2.csv" in result.output


def test_verify_on_a_missing_folder_is_misuse(tmp_path):
    result = invoke("verify", str(tmp_path / "nothing-here"))
    assert result.exit_code == 2


def test_rehearse_writes_its_three_files(study, tmp_path):
    out = tmp_path / "rehearsal"
    result = invoke("rehearse", str(study), "--out", str(out), "--replicates", "200")
    assert result.exit_code == 0, result.output
    assert "200 replicates per scenario" in result.output
    assert sorted(p.name for p in out.iterdir()) == [
        "rehearsal.html", "rehearsal.json", "rehearsal.md"]


def test_rehearse_unknown_scenario_is_misuse(study, tmp_path):
    result = invoke("rehearse", str(study), "--out", str(tmp_path / "r"), "--replicates", "200",
                    "--scenario", "no such scenario")
    assert result.exit_code == 2
    assert "scenario" in result.output


def test_report_rebuilds_from_the_run_folder(study, tmp_path):
    out = tmp_path / "run"
    assert invoke("run", str(study), "--out", str(out)).exit_code == 0
    (out / "report.html").unlink()
    result = invoke("report", str(out), "--format", "html")
    assert result.exit_code == 0, result.output
    assert (out / "report.html").is_file()
