"""Plan lock files: writing, reading, comparing, and plain errors for damaged locks."""

from __future__ import annotations

import json
import os
import subprocess
from pathlib import Path

import pytest

from planrunner import __version__
from planrunner.audit.lockfile import (
    LOCK_FORMAT,
    compare_lock,
    lock_path,
    read_lock,
    write_lock,
)
from planrunner.errors import PlanError

FP_A = "a" * 64
FP_B = "b" * 64
RAW = "0123456789abcdef" * 4


@pytest.fixture
def plan(tmp_path: Path, monkeypatch) -> Path:
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path.parent))
    path = tmp_path / "wash-trial.yaml"
    path.write_text("planrunner: 1\n")
    return path


def test_lock_file_name_and_contents(plan: Path) -> None:
    written = write_lock(plan, FP_A, RAW, time_utc="2027-01-10T12:00:00Z")
    assert written.action == "created" and written.previous is None
    path = plan.parent / "wash-trial.yaml.lock.json"
    assert lock_path(plan) == path == written.lock.path
    text = path.read_text(encoding="utf-8")
    assert text.endswith("}\n")
    assert json.loads(text) == {
        "format": LOCK_FORMAT,
        "git_commit": None,  # not in a repository
        "locked_at_utc": "2027-01-10T12:00:00Z",
        "plan": "wash-trial.yaml",
        "plan_raw_sha256": RAW,
        "plan_sha256": FP_A,
        "planrunner": __version__,
    }
    assert read_lock(plan) == written.lock
    assert sorted(p.name for p in plan.parent.iterdir()) == ["wash-trial.yaml",
                                                             "wash-trial.yaml.lock.json"]


def test_compare_lock_states(plan: Path) -> None:
    unlocked = compare_lock(plan, FP_A)
    assert unlocked.state == "unlocked" and unlocked.locked_sha256 is None
    assert "no lock file (wash-trial.yaml.lock.json)" in unlocked.sentence

    write_lock(plan, FP_A, RAW, time_utc="2027-01-10T12:00:00Z")
    same = compare_lock(plan, FP_A)
    assert same.state == "matches" and same.locked_sha256 == same.current_sha256 == FP_A
    assert "matches its lock" in same.sentence

    changed = compare_lock(plan, FP_B)
    assert changed.state == "differs"
    assert (changed.locked_sha256, changed.current_sha256) == (FP_A, FP_B)
    assert f"locked fingerprint {FP_A}, current {FP_B}" in changed.sentence
    assert changed.as_record() == {
        "state": "differs", "lock_file": str(lock_path(plan)), "current_sha256": FP_B,
        "locked_sha256": FP_A, "locked_at_utc": "2027-01-10T12:00:00Z", "locked_commit": None,
    }


def test_relocking_same_plan_keeps_the_original_lock(plan: Path) -> None:
    write_lock(plan, FP_A, RAW, time_utc="2027-01-10T12:00:00Z")
    again = write_lock(plan, FP_A, RAW, time_utc="2027-05-05T00:00:00Z")
    assert again.action == "unchanged"
    assert read_lock(plan).locked_at_utc == "2027-01-10T12:00:00Z"


def test_changed_plan_is_relocked_only_on_request(plan: Path) -> None:
    write_lock(plan, FP_A, RAW, time_utc="2027-01-10T12:00:00Z")
    with pytest.raises(PlanError, match="has changed since it was locked on 2027-01-10") as info:
        write_lock(plan, FP_B, RAW)
    assert info.value.exit_code == 2
    assert str(lock_path(plan)) in str(info.value)
    assert read_lock(plan).plan_sha256 == FP_A
    replaced = write_lock(plan, FP_B, RAW, replace=True, time_utc="2027-02-01T00:00:00Z")
    assert replaced.action == "replaced" and replaced.previous.plan_sha256 == FP_A
    assert read_lock(plan).plan_sha256 == FP_B


@pytest.mark.parametrize(
    ("content", "message"),
    [
        ('{"format": "planrunner.lock/1",\n "plan": ',
         r"wash-trial.yaml.lock.json:2: the lock file is not valid JSON"),
        ("[1, 2]", "does not hold a JSON object"),
        ('{"format": "something/else"}', "not a planrunner lock file"),
        ('{"format": "planrunner.lock/9"}', "written by another planrunner version"),
        ('{"format": "planrunner.lock/1", "plan": "wash-trial.yaml"}',
         "lacks git_commit, locked_at_utc"),
    ],
)
def test_corrupt_lock_names_the_file(plan: Path, content: str, message: str) -> None:
    lock_path(plan).write_text(content)
    with pytest.raises(PlanError, match=message) as info:
        read_lock(plan)
    assert str(lock_path(plan)) in str(info.value)
    with pytest.raises(PlanError):
        compare_lock(plan, FP_A)


def test_lock_with_bad_fields(plan: Path) -> None:
    good = json.loads(write_lock(plan, FP_A, RAW, time_utc="2027-01-10T12:00:00Z").lock.as_json())
    for key, value, message in [
        ("plan_sha256", "XYZ", "plan_sha256 'XYZ' is not a SHA-256 fingerprint"),
        ("locked_at_utc", 5, "locked_at_utc should be a string"),
        ("git_commit", 7, "git_commit should be a string or null"),
        ("plan", "other.yaml", "belongs to the plan 'other.yaml', not 'wash-trial.yaml'"),
    ]:
        lock_path(plan).write_text(json.dumps({**good, key: value}))
        with pytest.raises(PlanError, match=message):
            read_lock(plan)
    lock_path(plan).write_bytes(b"\xff\xfe not text")
    with pytest.raises(PlanError, match="cannot read the lock file"):
        read_lock(plan)


def test_arguments_are_checked(plan: Path, tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="canonical_fingerprint must be 64 lowercase hex"):
        write_lock(plan, FP_A.upper(), RAW)
    with pytest.raises(ValueError, match="raw_fingerprint"):
        write_lock(plan, FP_A, "abc")
    with pytest.raises(ValueError, match="canonical_fingerprint"):
        compare_lock(plan, "")
    with pytest.raises(PlanError, match="no such plan file to lock"):
        write_lock(tmp_path / "missing.yaml", FP_A, RAW)


def test_lock_records_the_git_head(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setenv("GIT_CONFIG_GLOBAL", os.devnull)
    monkeypatch.setenv("GIT_CONFIG_NOSYSTEM", "1")
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path.parent))
    repo = tmp_path / "repo"
    repo.mkdir()
    env = {**os.environ, "GIT_AUTHOR_DATE": "2027-01-10T12:00:00+00:00",
           "GIT_COMMITTER_DATE": "2027-01-10T12:00:00+00:00"}
    run = lambda *a: subprocess.run(["git", *a], cwd=repo, env=env, check=True,  # noqa: E731
                                    capture_output=True, text=True, timeout=30).stdout.strip()
    run("init", "-q")
    run("config", "user.name", "Test Author")
    run("config", "user.email", "author@example.invalid")
    (repo / "plan.yaml").write_text("planrunner: 1\n")
    run("add", "plan.yaml")
    run("commit", "-q", "-m", "plan")
    head = run("rev-parse", "HEAD")
    lock = write_lock(repo / "plan.yaml", FP_A, RAW).lock
    assert lock.git_commit == head
    assert lock.locked_at_utc.endswith("Z")
    relocked = write_lock(repo / "plan.yaml", FP_B, RAW, replace=True, git_commit=None)
    assert relocked.lock.git_commit is None
