"""Start-record facts: versions, operator, time, hashes, git facts and plan-before-data evidence.

Git facts are checked in throw-away repositories whose commit dates are pinned with
GIT_AUTHOR_DATE / GIT_COMMITTER_DATE, so every expected date below is known exactly.
"""

from __future__ import annotations

import hashlib
import importlib.util
import inspect
import os
import re
import subprocess
import sys
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path

import pytest

from planrunner import __version__
from planrunner.audit import provenance as pv
from planrunner.audit.log import DecisionLog
from planrunner.errors import PlanError


@pytest.fixture(autouse=True)
def _isolated_git(tmp_path: Path, monkeypatch) -> None:
    # No user or system git configuration, and no repository above tmp_path is discovered.
    monkeypatch.setenv("GIT_CONFIG_GLOBAL", os.devnull)
    monkeypatch.setenv("GIT_CONFIG_NOSYSTEM", "1")
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path.parent))
    for name in ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE"):
        monkeypatch.delenv(name, raising=False)


def git(repo: Path, *args: str, date: str | None = None) -> str:
    env = dict(os.environ)
    if date is not None:
        env.update(GIT_AUTHOR_DATE=date, GIT_COMMITTER_DATE=date)
    done = subprocess.run(["git", *args], cwd=repo, env=env, capture_output=True, text=True,
                          check=True, timeout=30)
    return done.stdout.strip()


def make_repo(path: Path) -> Path:
    path.mkdir(parents=True, exist_ok=True)
    git(path, "init", "-q")
    git(path, "config", "user.name", "Test Author")
    git(path, "config", "user.email", "author@example.invalid")
    git(path, "config", "commit.gpgsign", "false")
    return path


def commit(repo: Path, files: dict[str, str], date: str, message: str = "change") -> str:
    for name, text in files.items():
        (repo / name).parent.mkdir(parents=True, exist_ok=True)
        (repo / name).write_text(text)
        git(repo, "add", name)
    git(repo, "commit", "-q", "-m", message, date=date)
    return git(repo, "rev-parse", "HEAD")


# --------------------------------------------------------------------------- simple facts


def test_software_versions_come_from_metadata_without_imports() -> None:
    versions = pv.software_versions()
    assert list(versions) == ["python", "planrunner", "numpy", "scipy", "pandas", "statsmodels",
                              "pydantic", "pyyaml", "jinja2", "typer"]
    assert versions["python"] == ".".join(str(v) for v in sys.version_info[:3])
    assert versions["planrunner"] == __version__
    assert versions["numpy"] == metadata.version("numpy")
    assert versions["pyyaml"] == metadata.version("PyYAML")
    # nothing heavy is imported to find them
    code = ("import sys; from planrunner.audit import provenance as pv; pv.software_versions(); "
            "heavy = [m for m in ('numpy', 'scipy', 'pandas', 'statsmodels') if m in sys.modules];"
            " print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, timeout=60).stdout.strip()
    assert out == "[]"


def test_numeric_build_info_reports_numpys_blas() -> None:
    import numpy

    info = pv.numeric_build_info()
    config = numpy.show_config(mode="dicts")["Build Dependencies"]
    assert info["blas"]["name"] == config["blas"]["name"]
    assert info["lapack"]["name"] == config["lapack"]["name"]
    assert info["machine"] == __import__("platform").machine()
    if importlib.util.find_spec("threadpoolctl") is None:
        assert info["threadpools"] is None
        assert any("threadpoolctl" in note for note in info["notes"])
    else:
        assert isinstance(info["threadpools"], list)


def test_operator_sources_in_order(monkeypatch) -> None:
    monkeypatch.setenv("PLANRUNNER_OPERATOR", "  Env Name ")
    assert pv.operator_name("  A. Analyst ") == pv.Operator("A. Analyst", "option")
    assert pv.operator_name() == pv.Operator("Env Name", "environment")
    monkeypatch.setenv("PLANRUNNER_OPERATOR", "   ")  # empty: ignored
    monkeypatch.setattr(pv.getpass, "getuser", lambda: "labtech7")
    assert pv.operator_name() == pv.Operator("labtech7", "login")
    assert pv.operator_name().as_record() == {"name": "labtech7", "source": "login"}

    def no_user() -> str:
        raise KeyError("getpwuid(): uid not found")

    monkeypatch.setattr(pv.getpass, "getuser", no_user)
    assert pv.operator_name() == pv.Operator(None, "unknown")


def test_operator_option_must_be_a_plain_name() -> None:
    with pytest.raises(PlanError, match="--operator is empty"):
        pv.operator_name("  ")
    with pytest.raises(PlanError, match="control characters"):
        pv.operator_name("Ann\nBob")


def test_utc_now_format() -> None:
    text = pv.utc_now()
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", text)
    moment = datetime.fromisoformat(text.replace("Z", "+00:00"))
    assert abs((datetime.now(timezone.utc) - moment).total_seconds()) < 60


def test_command_line_drops_the_programs_folder() -> None:
    assert pv.command_line(["/opt/tools/bin/planrunner", "run", "plans/a.yaml"]) == [
        "planrunner", "run", "plans/a.yaml"]
    assert pv.command_line(["/x/planrunner/__main__.py", "verify", "r"]) == [
        "planrunner", "verify", "r"]
    assert pv.command_line([]) == []
    assert pv.command_line()[0] == Path(sys.argv[0]).name or pv.command_line()[0] == "planrunner"


def test_file_sha256_streams(tmp_path: Path) -> None:
    data = bytes(range(256)) * 1000
    path = tmp_path / "data.bin"
    path.write_bytes(data)
    assert pv.file_sha256(path, chunk_size=1000) == hashlib.sha256(data).hexdigest()
    # SHA-256 of the empty string, FIPS 180-2 / NIST example value
    empty = tmp_path / "empty"
    empty.write_bytes(b"")
    assert pv.file_sha256(empty) == (
        "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855")


# --------------------------------------------------------------------------- git facts


def test_git_info_outside_a_repository(tmp_path: Path) -> None:
    f = tmp_path / "plan.yaml"
    f.write_text("x: 1\n")
    info = pv.git_info(f)
    assert info.git_available and not info.in_repository
    assert info.note == "the file is not inside a git repository"
    assert pv.git_info(tmp_path / "missing" / "plan.yaml").in_repository is False


def test_git_info_in_a_repository(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    first = commit(repo, {"plans/plan.yaml": "a: 1\n"}, "2027-01-05T10:00:00+01:00", "add plan")
    second = commit(repo, {"plans/plan.yaml": "a: 2\n"}, "2027-02-01T08:30:00+00:00", "edit plan")
    commit(repo, {"other.txt": "x\n"}, "2027-03-01T00:00:00+00:00", "unrelated")
    head = git(repo, "rev-parse", "HEAD")

    info = pv.git_info(repo / "plans" / "plan.yaml")
    assert info.in_repository and info.tracked
    assert info.path_in_repository == "plans/plan.yaml"
    assert info.head_commit == head
    assert info.uncommitted_changes is False
    assert (info.first_commit, info.first_commit_date) == (first, "2027-01-05T09:00:00Z")
    assert (info.last_commit, info.last_commit_date) == (second, "2027-02-01T08:30:00Z")
    assert info.note is None
    assert info.as_record()["first_commit"] == first

    (repo / "plans" / "plan.yaml").write_text("a: 3\n")
    assert pv.git_info(repo / "plans" / "plan.yaml").uncommitted_changes is True

    (repo / "new.csv").write_text("y\n")
    untracked = pv.git_info(repo / "new.csv")
    assert untracked.in_repository and untracked.tracked is False
    assert untracked.first_commit is None and untracked.head_commit == head
    assert "not tracked" in untracked.note


def test_git_info_in_a_repository_without_commits(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    (repo / "plan.yaml").write_text("a: 1\n")
    git(repo, "add", "plan.yaml")
    info = pv.git_info(repo / "plan.yaml")
    assert info.in_repository and info.tracked and info.head_commit is None
    assert info.first_commit is None
    assert "no commits yet" in info.note and "not yet in any commit" in info.note


def test_git_missing_or_hanging_never_raises(tmp_path: Path, monkeypatch) -> None:
    f = tmp_path / "plan.yaml"
    f.write_text("x\n")
    empty = tmp_path / "empty-bin"
    empty.mkdir()
    monkeypatch.setenv("PATH", str(empty))
    info = pv.git_info(f)
    assert not info.git_available and "git is not available" in info.note
    assert pv.plan_predates_data(f, f).answer == "unknown"

    slow = tmp_path / "slow-bin"
    slow.mkdir()
    fake = slow / "git"
    fake.write_text(f"#!/bin/sh\nexec '{sys.executable}' -c 'import time; time.sleep(30)'\n")
    fake.chmod(0o755)
    monkeypatch.setenv("PATH", str(slow))
    monkeypatch.setattr(pv, "GIT_TIMEOUT", 0.3)
    assert pv.git_info(f).git_available is False


def test_git_refusing_the_repository_is_a_note(tmp_path: Path, monkeypatch) -> None:
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir()
    fake = bin_dir / "git"
    fake.write_text("#!/bin/sh\necho 'fatal: detected dubious ownership in repository' >&2\n"
                    "exit 128\n")
    fake.chmod(0o755)
    monkeypatch.setenv("PATH", str(bin_dir))
    f = tmp_path / "plan.yaml"
    f.write_text("x\n")
    info = pv.git_info(f)
    assert info.git_available and not info.in_repository
    assert info.note == "git could not read the repository: fatal: detected dubious ownership " \
                        "in repository"


# --------------------------------------------------------------------------- plan before data


def test_plan_committed_before_data_is_yes_with_caveat(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    plan_commit = commit(repo, {"plan.yaml": "a\n"}, "2027-01-10T12:00:00+00:00")
    data_commit = commit(repo, {"data.csv": "1\n"}, "2027-02-20T12:00:00+00:00")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "data.csv")
    assert result.answer == "yes"
    assert result.data_evidence == "git"
    assert result.plan_fixed_commit == result.plan_first_commit == plan_commit
    assert result.data_commit == data_commit
    assert (result.plan_fixed_date, result.data_date) == ("2027-01-10T12:00:00Z",
                                                          "2027-02-20T12:00:00Z")
    assert "before the data file was first committed" in result.reason
    assert "does not prove it" in result.reason


def test_data_committed_first_is_no(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"data.csv": "1\n"}, "2027-01-10T12:00:00+00:00")
    commit(repo, {"plan.yaml": "a\n"}, "2027-02-20T12:00:00+00:00")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "data.csv")
    assert result.answer == "no"
    assert result.reason.startswith("The data file was first committed")


def test_plan_edited_after_the_data_is_no(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"plan.yaml": "a\n"}, "2027-01-10T12:00:00+00:00")
    commit(repo, {"data.csv": "1\n"}, "2027-02-20T12:00:00+00:00")
    edit = commit(repo, {"plan.yaml": "b\n"}, "2027-03-01T12:00:00+00:00")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "data.csv")
    assert result.answer == "no"
    assert result.plan_fixed_commit == edit
    assert "changed afterwards" in result.reason
    assert result.plan_first_date == "2027-01-10T12:00:00Z"


def test_renamed_data_file_is_dated_from_its_first_addition(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    content = "group,value\n" + "".join(f"g{i % 3},{i}\n" for i in range(40))
    commit(repo, {"incoming.csv": content}, "2027-01-10T12:00:00+00:00")
    commit(repo, {"plan.yaml": "a\n"}, "2027-02-20T12:00:00+00:00")
    git(repo, "mv", "incoming.csv", "batch-1.csv")
    git(repo, "commit", "-q", "-m", "rename", date="2027-03-01T12:00:00+00:00")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "batch-1.csv")
    assert result.answer == "no"
    assert result.data_date == "2027-01-10T12:00:00Z"


def test_committed_together_is_unknown(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"plan.yaml": "a\n", "data.csv": "1\n"}, "2027-01-10T12:00:00+00:00")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "data.csv")
    assert result.answer == "unknown" and "committed together" in result.reason


def test_uncommitted_or_untracked_plan_is_unknown(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"plan.yaml": "a\n"}, "2027-01-10T12:00:00+00:00")
    commit(repo, {"data.csv": "1\n"}, "2027-02-20T12:00:00+00:00")
    (repo / "plan.yaml").write_text("edited\n")
    result = pv.plan_predates_data(repo / "plan.yaml", repo / "data.csv")
    assert result.answer == "unknown" and "not committed" in result.reason

    loose = tmp_path / "loose.yaml"
    loose.write_text("a\n")
    result = pv.plan_predates_data(loose, repo / "data.csv")
    assert result.answer == "unknown"
    assert "not committed to a git repository" in result.reason


def test_untracked_data_uses_its_modification_time(tmp_path: Path) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"plan.yaml": "a\n"}, "2027-01-10T12:00:00+00:00")
    data = tmp_path / "incoming" / "data.csv"
    data.parent.mkdir()
    data.write_text("1\n")
    later = datetime(2027, 2, 1, tzinfo=timezone.utc).timestamp()
    os.utime(data, (later, later))
    result = pv.plan_predates_data(repo / "plan.yaml", data)
    assert (result.answer, result.data_evidence) == ("yes", "mtime")
    assert result.data_date == "2027-02-01T00:00:00Z"
    assert "weak evidence" in result.reason

    earlier = datetime(2027, 1, 1, tzinfo=timezone.utc).timestamp()
    os.utime(data, (earlier, earlier))
    assert pv.plan_predates_data(repo / "plan.yaml", data).answer == "no"
    missing = pv.plan_predates_data(repo / "plan.yaml", tmp_path / "nope.csv")
    assert missing.answer == "unknown" and "cannot be found" in missing.reason


# --------------------------------------------------------------------------- start facts


def test_start_facts_feed_the_start_record(tmp_path: Path, monkeypatch) -> None:
    repo = make_repo(tmp_path / "repo")
    commit(repo, {"plan.yaml": "a: 1\n"}, "2027-01-10T12:00:00+00:00")
    commit(repo, {"data.csv": "g,y\na,1\n"}, "2027-02-20T12:00:00+00:00")
    monkeypatch.delenv("PLANRUNNER_OPERATOR", raising=False)
    facts = pv.start_facts(repo / "plan.yaml", repo / "data.csv", operator="Q. Checker",
                           argv=["planrunner", "run", "plan.yaml"])
    start_params = set(inspect.signature(DecisionLog.start).parameters) - {"self"}
    assert set(facts) <= start_params
    assert start_params - set(facts) == {"plan_sha256", "plan_id", "lock"}
    assert facts["plan_raw_sha256"] == hashlib.sha256(b"a: 1\n").hexdigest()
    assert facts["data_sha256"] == hashlib.sha256(b"g,y\na,1\n").hexdigest()
    assert facts["operator"] == {"name": "Q. Checker", "source": "option"}
    assert facts["plan_before_data"]["answer"] == "yes"
    assert facts["git"]["plan"]["tracked"] is True

    log = DecisionLog()
    record = log.start(plan_sha256="c" * 64, plan_id="demo", **facts)
    assert record["plan"] == {"file": str(repo / "plan.yaml"), "id": "demo", "sha256": "c" * 64,
                              "raw_sha256": facts["plan_raw_sha256"]}
