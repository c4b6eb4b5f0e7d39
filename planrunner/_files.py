"""Writing files so that nobody ever sees half of one, and run folders that never mix two runs.

Two tools live here:

* :func:`atomic_write_bytes` / :func:`atomic_write_text` write to a temporary file in the
  target's folder, flush it to disk and rename it over the target. A reader sees either the old
  file or the new one, never a partial file.
* :class:`RunFolder` is the context manager a run writes its output through. While the run
  works, its files go to a hidden staging folder beside ``RUN_DIR``
  (``.RUN_DIR.partial-<pid>``); an exclusive lock file beside ``RUN_DIR`` (``.RUN_DIR.lock``)
  keeps a second run from writing to the same place at the same time. When the ``with`` block
  ends normally, the staging folder *replaces* ``RUN_DIR`` as a whole; when it ends with an
  exception, the staging folder is deleted and ``RUN_DIR`` is left exactly as it was.

Replacing the whole folder is deliberate: a file an earlier run wrote and this run did not
(say a ``report.md`` when this run writes only HTML) must not survive next to the new
``decisions.jsonl``, or an auditor would see a mix of two runs. Because the folder is replaced
wholesale, ``RUN_DIR`` may only hold files a run writes; a folder holding anything else (notes,
data, sub-folders) is refused before any work is done, so a mistyped ``--out`` can never delete
someone's files. Between the two renames of a replacement ``RUN_DIR`` is briefly absent: a
reader then sees no run at all, never a mixture.

This module uses the standard library only.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import tempfile
import time
import uuid
from pathlib import Path
from types import TracebackType

from .errors import PlanError, PlanrunnerError

__all__ = ["RUN_FILES", "RunFolder", "atomic_write_bytes", "atomic_write_text"]

#: The files a run writes into RUN_DIR. A RUN_DIR holding only these (or nothing) may be
#: replaced by a new run; anything else in it makes :class:`RunFolder` refuse.
RUN_FILES: frozenset[str] = frozenset(
    {"results.json", "decisions.jsonl", "report.html", "report.md", "plan.resolved.yaml"}
)

#: A lock file that is empty or unreadable and younger than this (seconds) is taken to be in
#: the middle of being written by its owner; older ones count as left behind by a crash.
_UNREADABLE_LOCK_GRACE = 10.0

#: Sub-folders a run may write into RUN_DIR (``input/``: the archived plan and data with their
#: manifest, written by ``run --archive``). They are replaced with the folder like the files.
RUN_SUBFOLDERS: frozenset[str] = frozenset({"input"})

_umask_cache: int | None = None


def _umask() -> int:
    """Return the process umask (read once; reading it means setting it for an instant)."""
    global _umask_cache
    if _umask_cache is None:
        current = os.umask(0o022)
        os.umask(current)
        _umask_cache = current
    return _umask_cache


def _fsync_dir(folder: Path) -> None:
    """Flush a folder's entries to disk so a rename survives a power cut (POSIX; best effort)."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` so that readers see the old file or the new one, never half.

    The bytes go to a temporary file in the same folder (same file system, so the final rename
    is atomic), are flushed with ``fsync``, and the temporary file is renamed over ``path``
    with :func:`os.replace`. An existing file's permission bits are kept; a new file gets the
    usual ``0o666`` less the umask. On any error the temporary file is removed and the
    original exception propagates; ``path`` is then unchanged.

    Returns the path written.
    """
    target = Path(path)
    if not isinstance(data, (bytes, bytearray, memoryview)):
        raise TypeError(f"atomic_write_bytes needs bytes; got {type(data).__name__}")
    folder = target.parent
    try:
        mode = target.stat().st_mode & 0o7777
    except FileNotFoundError:
        mode = 0o666 & ~_umask()
    fd, tmp_name = tempfile.mkstemp(dir=folder, prefix=f".{target.name}.", suffix=".tmp")
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        try:
            tmp.unlink()
        except FileNotFoundError:
            pass
        raise
    _fsync_dir(folder)
    return target


def atomic_write_text(path: str | os.PathLike[str], text: str, *, encoding: str = "utf-8") -> Path:
    """Write ``text`` atomically, encoded as ``encoding``; newlines are written as given.

    No newline translation happens (``\\n`` stays ``\\n`` on every platform), so the bytes on
    disk, and therefore their SHA-256, are the same everywhere.
    """
    if not isinstance(text, str):
        raise TypeError(f"atomic_write_text needs str; got {type(text).__name__}")
    return atomic_write_bytes(path, text.encode(encoding))


# --------------------------------------------------------------------------- process checks


def _pid_alive(pid: int) -> bool:
    """Return whether a process with this id exists on this machine."""
    if pid <= 0:
        return False
    if os.name == "nt":  # pragma: no cover - exercised on Windows only
        return _pid_alive_windows(pid)
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # it exists, owned by someone else
    except OSError:
        return True  # cannot tell: assume alive (never break a live lock)
    return True


def _pid_alive_windows(pid: int) -> bool:  # pragma: no cover - Windows only
    # os.kill(pid, 0) on Windows would send CTRL_C_EVENT; ask the kernel instead.
    import ctypes

    process_query_limited_information = 0x1000
    still_active = 259
    kernel32 = ctypes.windll.kernel32  # type: ignore[attr-defined]
    handle = kernel32.OpenProcess(process_query_limited_information, False, pid)
    if not handle:
        return False
    try:
        code = ctypes.c_ulong()
        if not kernel32.GetExitCodeProcess(handle, ctypes.byref(code)):
            return True
        return code.value == still_active
    finally:
        kernel32.CloseHandle(handle)


def _utc_stamp() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


# --------------------------------------------------------------------------- run folder


class RunFolder:
    """Stage a run's files beside ``RUN_DIR``, lock it, and swap them in only on success.

    Use as a context manager::

        with RunFolder(out_dir) as run:
            run.write_bytes("results.json", results_bytes)
            log = DecisionLog(run.file("decisions.jsonl"))
            ...
        # here out_dir holds exactly the files written above

    Inside the block, :attr:`path` is the staging folder; :meth:`file` gives a path in it.
    On normal exit the staging folder replaces ``RUN_DIR`` as a whole (files of an earlier run
    are removed, never mixed with the new ones). On an exception the staging folder is deleted,
    ``RUN_DIR`` is untouched and the exception propagates.

    Refusals raise :class:`~planrunner.errors.PlanError` (exit 2, the command was misused):
    another run holds the lock, ``RUN_DIR`` is a file or a symbolic link, is the current
    folder, or holds files a run does not write.

    Parameters
    ----------
    run_dir
        The folder the run's files end up in. Its parent is created if needed.
    known_files
        File names a run may write. A RUN_DIR holding anything else is refused, because the
        whole folder is replaced. Defaults to :data:`RUN_FILES`; files written through
        :meth:`file` are always allowed as well.

    Notes
    -----
    The lock is a file ``.RUN_DIR.lock`` beside ``RUN_DIR``, created with
    ``O_CREAT | O_EXCL`` and holding the owner's process id, host name, start time and a
    random token. A lock whose owner was on this host and whose process no longer exists is
    stale (the run crashed or was killed) and is removed; a lock from another host cannot be
    checked and is always respected. Leftover staging folders of crashed runs are removed once
    the lock is held.
    """

    def __init__(
        self, run_dir: str | os.PathLike[str], *, known_files: frozenset[str] | set[str] = RUN_FILES
    ) -> None:
        self.final = Path(os.path.abspath(run_dir))
        self.known_files = frozenset(known_files)
        self._pid = os.getpid()
        self._token = uuid.uuid4().hex
        parent, name = self.final.parent, self.final.name
        self.lock_path = parent / f".{name}.lock"
        self.path = parent / f".{name}.partial-{self._pid}"
        self._previous = parent / f".{name}.previous-{self._pid}"
        self._state = "new"

    # -- context manager ---------------------------------------------------------------

    def __enter__(self) -> RunFolder:
        if self._state != "new":
            raise RuntimeError("a RunFolder can be entered only once")
        self._check_target(self.known_files)
        try:
            self.final.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise PlanError(
                f"cannot create the output folder's parent {self.final.parent}: "
                f"{exc.strerror or exc}"
            ) from exc
        self._acquire_lock()
        try:
            self._remove_leftovers()
            self.path.mkdir()
        except OSError as exc:
            self._release_lock()
            raise PlanError(
                f"cannot create a staging folder beside {self.final}: {exc.strerror or exc}"
            ) from exc
        except BaseException:
            self._release_lock()
            raise
        self._state = "open"
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> bool:
        try:
            if exc_type is None:
                self._commit()
                self._state = "committed"
            else:
                shutil.rmtree(self.path, ignore_errors=True)
                self._state = "discarded"
        except BaseException:
            shutil.rmtree(self.path, ignore_errors=True)
            self._state = "discarded"
            raise
        finally:
            self._release_lock()
        return False

    # -- writing -------------------------------------------------------------------------

    def file(self, name: str) -> Path:
        """Return the staging path for the run file ``name`` (a plain file name, no folders)."""
        if self._state != "open":
            raise RuntimeError("RunFolder.file() is available only inside the with block")
        if not name or name != Path(name).name or name in {".", ".."} or "\\" in name:
            raise ValueError(f"run file names are plain file names; got {name!r}")
        return self.path / name

    def write_bytes(self, name: str, data: bytes) -> Path:
        """Write one run file into the staging folder (atomically) and return its path."""
        return atomic_write_bytes(self.file(name), data)

    def write_text(self, name: str, text: str) -> Path:
        """Write one run file as UTF-8 text into the staging folder and return its path."""
        return atomic_write_text(self.file(name), text)

    # -- checks --------------------------------------------------------------------------

    def _check_target(self, allowed: frozenset[str]) -> None:
        final = self.final
        if final.parent == final:
            raise PlanError(f"cannot write a run into the root folder {final}; name a sub-folder")
        cwd = Path(os.path.abspath(os.getcwd()))
        if final == cwd or final in cwd.parents:
            raise PlanError(
                f"cannot write a run into {final}: it is the current folder or contains it, and "
                "a run replaces its output folder as a whole; name a sub-folder such as "
                "reports/run-1"
            )
        if final.is_symlink():
            raise PlanError(
                f"the output folder {final} is a symbolic link; a run replaces its output folder "
                "as a whole, so name the real folder instead"
            )
        if not final.exists():
            return
        if not final.is_dir():
            raise PlanError(f"the output folder {final} exists and is not a folder")
        foreign = sorted(
            entry.name + ("/" if entry.is_dir() else "")
            for entry in os.scandir(final)
            if not (
                (entry.name in allowed and entry.is_file(follow_symlinks=False))
                or (entry.name in RUN_SUBFOLDERS and entry.is_dir(follow_symlinks=False))
            )
        )
        if foreign:
            shown = ", ".join(foreign[:5]) + (", ..." if len(foreign) > 5 else "")
            raise PlanError(
                f"the output folder {final} holds files a run does not write ({shown}); a run "
                "replaces the whole folder, so choose an empty or new folder"
            )

    # -- commit --------------------------------------------------------------------------

    def _commit(self) -> None:
        staged = frozenset(os.listdir(self.path))
        self._check_target(self.known_files | staged)
        try:
            if self.final.exists():
                if self._previous.exists():
                    shutil.rmtree(self._previous)
                os.rename(self.final, self._previous)
                try:
                    os.rename(self.path, self.final)
                except BaseException:
                    os.rename(self._previous, self.final)
                    raise
                shutil.rmtree(self._previous, ignore_errors=True)
            else:
                os.rename(self.path, self.final)
        except OSError as exc:
            raise PlanrunnerError(
                f"could not move the finished run into {self.final}: {exc.strerror or exc}; "
                "nothing was changed there"
            ) from exc
        _fsync_dir(self.final.parent)

    def _remove_leftovers(self) -> None:
        """Remove staging and previous-run folders left by crashed runs (we hold the lock)."""
        prefixes = (f".{self.final.name}.partial-", f".{self.final.name}.previous-")
        for entry in os.scandir(self.final.parent):
            if entry.name.startswith(prefixes) and entry.is_dir(follow_symlinks=False):
                shutil.rmtree(entry.path, ignore_errors=True)

    # -- locking -------------------------------------------------------------------------

    def _lock_content(self) -> bytes:
        record = {
            "pid": self._pid,
            "host": socket.gethostname(),
            "started_utc": _utc_stamp(),
            "token": self._token,
            "run_dir": self.final.name,
        }
        return (json.dumps(record, sort_keys=True) + "\n").encode("utf-8")

    def _acquire_lock(self) -> None:
        for _ in range(5):
            try:
                fd = os.open(self.lock_path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                if self._break_stale_lock():
                    continue
                raise PlanError(self._busy_message()) from None
            except OSError as exc:
                raise PlanError(
                    f"cannot create the lock file {self.lock_path}: {exc.strerror or exc}"
                ) from exc
            try:
                os.write(fd, self._lock_content())
                os.fsync(fd)
            finally:
                os.close(fd)
            return
        raise PlanError(self._busy_message())

    def _read_lock(self) -> tuple[bytes, dict[str, object] | None]:
        try:
            raw = self.lock_path.read_bytes()
        except FileNotFoundError:
            return b"", None
        try:
            content = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, ValueError):
            return raw, None
        return raw, content if isinstance(content, dict) else None

    def _lock_is_stale(self, content: dict[str, object] | None) -> bool:
        if content is None:
            try:
                age = time.time() - self.lock_path.stat().st_mtime
            except FileNotFoundError:
                return True
            return age > _UNREADABLE_LOCK_GRACE
        pid, host = content.get("pid"), content.get("host")
        if not isinstance(pid, int) or isinstance(pid, bool) or not isinstance(host, str):
            return True
        if host != socket.gethostname():
            return False  # another machine's process: cannot check, so respect it
        return not _pid_alive(pid)

    def _break_stale_lock(self) -> bool:
        """Remove the lock if its owner is gone; return whether a new attempt makes sense."""
        raw, content = self._read_lock()
        if not raw and content is None and not self.lock_path.exists():
            return True  # released meanwhile
        if not self._lock_is_stale(content):
            return False
        # Move the stale lock aside atomically, then make sure it is the one we judged: if
        # another process replaced it in between, put that one back and give up.
        aside = self.lock_path.with_name(f"{self.lock_path.name}.stale-{self._pid}-{self._token}")
        try:
            os.rename(self.lock_path, aside)
        except FileNotFoundError:
            return True
        try:
            moved = aside.read_bytes()
        except OSError:
            moved = b""
        if moved != raw:
            try:
                os.link(aside, self.lock_path)  # never overwrites a newer lock
            except OSError:
                pass
            aside.unlink(missing_ok=True)
            return False
        aside.unlink(missing_ok=True)
        return True

    def _release_lock(self) -> None:
        _, content = self._read_lock()
        if content is not None and content.get("token") == self._token:
            self.lock_path.unlink(missing_ok=True)

    def _busy_message(self) -> str:
        _, content = self._read_lock()
        if content is None:
            owner = "another run"
        else:
            owner = (
                f"run {content.get('pid')} on {content.get('host')}, "
                f"started {content.get('started_utc')}"
            )
        return (
            f"another run is writing to {self.final} ({owner}); wait for it to finish. "
            f"If no run is in progress, delete the lock file {self.lock_path}"
        )
