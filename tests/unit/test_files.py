"""Atomic writes and run folders: no half-written file, no mix of two runs, one run at a time."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from planrunner import _files
from planrunner._files import RUN_FILES, RunFolder, atomic_write_bytes, atomic_write_text
from planrunner.errors import PlanError, PlanrunnerError


def _listing(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


# --------------------------------------------------------------------------- atomic writes


def test_atomic_write_creates_and_replaces_without_leftovers(tmp_path: Path) -> None:
    target = tmp_path / "results.json"
    atomic_write_bytes(target, b"first")
    assert target.read_bytes() == b"first"
    atomic_write_bytes(target, b"second, longer")
    assert target.read_bytes() == b"second, longer"
    assert _listing(tmp_path) == ["results.json"]


def test_atomic_write_text_keeps_newlines_byte_for_byte(tmp_path: Path) -> None:
    target = tmp_path / "report.md"
    atomic_write_text(target, "a\nb\r\nc µ")
    assert target.read_bytes() == "a\nb\r\nc µ".encode("utf-8")


def test_atomic_write_failure_leaves_the_old_file(tmp_path: Path, monkeypatch) -> None:
    target = tmp_path / "results.json"
    target.write_bytes(b"old")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(_files.os, "replace", broken_replace)
    with pytest.raises(OSError, match="No space"):
        atomic_write_bytes(target, b"new")
    assert target.read_bytes() == b"old"
    assert _listing(tmp_path) == ["results.json"]  # the temporary file was removed


def test_atomic_write_refuses_text_for_bytes(tmp_path: Path) -> None:
    with pytest.raises(TypeError, match="needs bytes"):
        atomic_write_bytes(tmp_path / "x", "text")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match="needs str"):
        atomic_write_text(tmp_path / "x", b"bytes")  # type: ignore[arg-type]


def test_atomic_write_permissions(tmp_path: Path) -> None:
    # mkstemp creates 0600 files; the result must look like an ordinarily created file
    fresh = tmp_path / "fresh.txt"
    atomic_write_bytes(fresh, b"x")
    umask = os.umask(0o022)
    os.umask(umask)
    assert fresh.stat().st_mode & 0o777 == 0o666 & ~umask
    kept = tmp_path / "kept.txt"
    kept.write_bytes(b"x")
    os.chmod(kept, 0o640)
    atomic_write_bytes(kept, b"y")
    assert kept.stat().st_mode & 0o777 == 0o640


# --------------------------------------------------------------------------- run folder


def test_success_moves_files_into_place(tmp_path: Path) -> None:
    run_dir = tmp_path / "reports" / "run-1"
    with RunFolder(run_dir) as run:
        assert run.path.parent == run_dir.parent and run.path.name.startswith(".run-1.partial-")
        assert run.lock_path.exists()
        lock = json.loads(run.lock_path.read_text())
        assert lock["pid"] == os.getpid() and lock["host"] == socket.gethostname()
        assert lock["started_utc"].endswith("Z")
        run.write_bytes("results.json", b"{}\n")
        run.write_text("report.md", "# report\n")
        assert not run_dir.exists()  # nothing visible before the end
    assert _listing(run_dir) == ["report.md", "results.json"]
    assert (run_dir / "results.json").read_bytes() == b"{}\n"
    assert _listing(run_dir.parent) == ["run-1"]  # no staging folder, no lock left


def test_failure_leaves_nothing_behind(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    with pytest.raises(ZeroDivisionError):
        with RunFolder(run_dir) as run:
            run.write_bytes("results.json", b"half")
            1 / 0
    assert _listing(tmp_path) == []


def test_failure_keeps_the_previous_run_untouched(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    with RunFolder(run_dir) as run:
        run.write_bytes("results.json", b"old results")
        run.write_bytes("decisions.jsonl", b"old log\n")
    with pytest.raises(KeyboardInterrupt):
        with RunFolder(run_dir) as run:
            run.write_bytes("results.json", b"new results")
            raise KeyboardInterrupt
    assert _listing(run_dir) == ["decisions.jsonl", "results.json"]
    assert (run_dir / "results.json").read_bytes() == b"old results"
    assert _listing(tmp_path) == ["run"]


def test_new_run_replaces_every_file_of_the_old_run(tmp_path: Path) -> None:
    # An auditor must never see a mix of two runs: report.md of the first run must go.
    run_dir = tmp_path / "run"
    with RunFolder(run_dir) as run:
        run.write_bytes("results.json", b"one")
        run.write_bytes("report.md", b"one")
    with RunFolder(run_dir) as run:
        run.write_bytes("results.json", b"two")
    assert _listing(run_dir) == ["results.json"]
    assert (run_dir / "results.json").read_bytes() == b"two"
    assert _listing(tmp_path) == ["run"]


def test_folder_with_foreign_files_is_refused(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    run_dir.mkdir()
    (run_dir / "results.json").write_bytes(b"old")
    (run_dir / "my-notes.txt").write_text("keep me")
    (run_dir / "data").mkdir()
    with pytest.raises(PlanError, match=r"files a run does not write \(data/, my-notes.txt\)"):
        with RunFolder(run_dir):
            pass  # pragma: no cover
    assert _listing(run_dir) == ["data", "my-notes.txt", "results.json"]
    assert _listing(tmp_path) == ["run"]  # no lock, no staging


def test_foreign_file_appearing_during_the_run_blocks_the_swap(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    run_dir.mkdir()
    with pytest.raises(PlanError, match="notes.txt"):
        with RunFolder(run_dir) as run:
            run.write_bytes("results.json", b"new")
            (run_dir / "notes.txt").write_text("written by someone meanwhile")
    assert _listing(run_dir) == ["notes.txt"]
    assert _listing(tmp_path) == ["run"]


def test_extra_file_names_can_be_allowed(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    run_dir.mkdir()
    (run_dir / "figure-1.svg").write_text("<svg/>")
    with RunFolder(run_dir, known_files=RUN_FILES | {"figure-1.svg"}) as run:
        run.write_bytes("results.json", b"x")
    assert _listing(run_dir) == ["results.json"]


def test_bad_targets_are_refused(tmp_path: Path, monkeypatch) -> None:
    a_file = tmp_path / "file"
    a_file.write_text("x")
    with pytest.raises(PlanError, match="is not a folder"):
        RunFolder(a_file).__enter__()
    real = tmp_path / "real"
    real.mkdir()
    link = tmp_path / "link"
    link.symlink_to(real)
    with pytest.raises(PlanError, match="symbolic link"):
        RunFolder(link).__enter__()
    monkeypatch.chdir(real)
    with pytest.raises(PlanError, match="current folder"):
        RunFolder(".").__enter__()
    with pytest.raises(PlanError, match="current folder"):
        RunFolder(tmp_path).__enter__()
    assert _listing(tmp_path) == ["file", "link", "real"]


def test_file_names_must_be_plain(tmp_path: Path) -> None:
    run = RunFolder(tmp_path / "run")
    with pytest.raises(RuntimeError, match="inside the with block"):
        run.file("results.json")
    with run:
        for bad in ("../escape.json", "sub/x.json", "", ".."):
            with pytest.raises(ValueError, match="plain file names"):
                run.file(bad)
    with pytest.raises(RuntimeError, match="only once"):
        run.__enter__()


def test_second_run_in_the_same_process_refuses(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    with RunFolder(run_dir) as first:
        with pytest.raises(PlanError, match=r"another run is writing to .*run \d+ on") as info:
            with RunFolder(run_dir):
                pass  # pragma: no cover
        assert info.value.exit_code == 2  # a misuse of the command
        assert str(first.lock_path) in str(info.value)
        first.write_bytes("results.json", b"first")
    assert (run_dir / "results.json").read_bytes() == b"first"
    assert _listing(tmp_path) == ["run"]


_HOLDER = textwrap.dedent(
    """
    import sys
    from planrunner._files import RunFolder
    with RunFolder(sys.argv[1]) as run:
        run.write_bytes("results.json", b"from the other process")
        print("ready", flush=True)
        sys.stdin.readline()
    print("done", flush=True)
    """
)


def test_concurrent_run_in_another_process_refuses(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    holder = subprocess.Popen(
        [sys.executable, "-c", _HOLDER, str(run_dir)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True,
    )
    try:
        assert holder.stdout is not None and holder.stdin is not None
        assert holder.stdout.readline().strip() == "ready"
        with pytest.raises(PlanError, match=f"another run is writing.*run {holder.pid} on"):
            with RunFolder(run_dir):
                pass  # pragma: no cover
        holder.stdin.write("go\n")
        holder.stdin.flush()
        assert holder.stdout.readline().strip() == "done"
    finally:
        holder.communicate(timeout=30)
    assert holder.returncode == 0
    assert (run_dir / "results.json").read_bytes() == b"from the other process"
    with RunFolder(run_dir) as run:  # the lock was released
        run.write_bytes("results.json", b"mine")
    assert (run_dir / "results.json").read_bytes() == b"mine"


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


def test_stale_lock_of_a_dead_process_is_removed(tmp_path: Path) -> None:
    run_dir = tmp_path / "run"
    pid = _dead_pid()
    lock = tmp_path / ".run.lock"
    lock.write_text(json.dumps({"pid": pid, "host": socket.gethostname(),
                                "started_utc": "2027-01-01T00:00:00Z", "token": "x"}))
    crashed = tmp_path / f".run.partial-{pid}"  # what a killed run leaves behind
    crashed.mkdir()
    (crashed / "results.json").write_bytes(b"half")
    with RunFolder(run_dir) as run:
        assert json.loads(lock.read_text())["pid"] == os.getpid()
        run.write_bytes("results.json", b"new")
    assert _listing(tmp_path) == ["run"]
    assert _listing(run_dir) == ["results.json"]


def test_lock_from_another_host_is_respected(tmp_path: Path) -> None:
    lock = tmp_path / ".run.lock"
    lock.write_text(json.dumps({"pid": _dead_pid(), "host": "some-other-machine.invalid",
                                "started_utc": "2027-01-01T00:00:00Z", "token": "x"}))
    with pytest.raises(PlanError, match="some-other-machine.invalid.*delete the lock file"):
        with RunFolder(tmp_path / "run"):
            pass  # pragma: no cover
    assert lock.exists()


def test_unreadable_lock_is_stale_only_when_old(tmp_path: Path) -> None:
    lock = tmp_path / ".run.lock"
    lock.write_bytes(b"")  # a lock whose owner has not written it yet, or crashed doing so
    with pytest.raises(PlanError, match="another run"):
        with RunFolder(tmp_path / "run"):
            pass  # pragma: no cover
    old = time.time() - 10 * _files._UNREADABLE_LOCK_GRACE
    os.utime(lock, (old, old))
    with RunFolder(tmp_path / "run") as run:
        run.write_bytes("results.json", b"x")
    assert _listing(tmp_path) == ["run"]


def test_commit_failure_is_reported_and_cleaned_up(tmp_path: Path, monkeypatch) -> None:
    run_dir = tmp_path / "run"
    real_rename = os.rename

    def failing_rename(src, dst):
        if Path(src).name.startswith(".run.partial-"):
            raise OSError(18, "Invalid cross-device link")
        return real_rename(src, dst)

    with RunFolder(run_dir) as run:
        run.write_bytes("results.json", b"old")
    monkeypatch.setattr(_files.os, "rename", failing_rename)
    with pytest.raises(PlanrunnerError, match="could not move the finished run") as info:
        with RunFolder(run_dir) as run:
            run.write_bytes("results.json", b"new")
    assert info.value.exit_code == 1
    assert (run_dir / "results.json").read_bytes() == b"old"  # the previous run was restored
    assert _listing(tmp_path) == ["run"]
