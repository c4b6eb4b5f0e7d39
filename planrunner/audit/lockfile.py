"""Plan locks: ``planrunner lock PLAN`` records the plan's fingerprint beside it.

The lock file is ``<plan file name>.lock.json`` in the plan's folder, meant to be committed
with the plan before any data exist. A later ``run`` compares the plan's canonical fingerprint
with the locked one (:func:`compare_lock`); a plan that differs from its lock needs a declared
deviation. The fingerprint is computed by ``planrunner.plan.fingerprint`` and passed in.

Contents (JSON, keys sorted, two-space indent)::

    {
      "format": "planrunner.lock/1",
      "git_commit": "3f1c...",            # HEAD when locked, or null outside git
      "locked_at_utc": "2027-03-04T09:15:00Z",
      "plan": "wash-trial.yaml",          # the plan's file name
      "plan_raw_sha256": "...",           # SHA-256 of the plan file's bytes
      "plan_sha256": "...",               # canonical fingerprint of the validated plan
      "planrunner": "0.1.0"
    }
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from .._files import atomic_write_text
from ..errors import PlanError

__all__ = [
    "LOCK_FORMAT",
    "Lock",
    "LockStatus",
    "LockWrite",
    "compare_lock",
    "lock_path",
    "read_lock",
    "write_lock",
]

LOCK_FORMAT = "planrunner.lock/1"
_HEX64 = re.compile(r"^[0-9a-f]{64}$")
_KEYS = ("format", "git_commit", "locked_at_utc", "plan", "plan_raw_sha256", "plan_sha256",
         "planrunner")


def lock_path(plan_path: str | os.PathLike[str]) -> Path:
    """The lock file of a plan: ``<plan file name>.lock.json`` beside it."""
    plan = Path(plan_path)
    return plan.with_name(plan.name + ".lock.json")


@dataclass(frozen=True, slots=True, kw_only=True)
class Lock:
    """The contents of a lock file."""

    path: Path
    plan: str
    plan_sha256: str
    plan_raw_sha256: str
    locked_at_utc: str
    git_commit: str | None
    planrunner: str
    format: str = LOCK_FORMAT

    def as_json(self) -> str:
        """The lock file's text."""
        body = {k: getattr(self, k) for k in _KEYS}
        return json.dumps(body, sort_keys=True, indent=2, ensure_ascii=False) + "\n"


@dataclass(frozen=True, slots=True, kw_only=True)
class LockWrite:
    """What :func:`write_lock` did: ``created``, ``unchanged`` (same fingerprint), ``replaced``."""

    action: Literal["created", "unchanged", "replaced"]
    lock: Lock
    previous: Lock | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class LockStatus:
    """How a plan compares with its lock.

    ``state`` is ``unlocked`` (no lock file), ``matches`` or ``differs``. ``sentence`` says
    the same in plain words; :meth:`as_record` is what the start record's ``lock`` holds.
    """

    state: Literal["unlocked", "matches", "differs"]
    lock_file: str
    current_sha256: str
    locked_sha256: str | None = None
    locked_at_utc: str | None = None
    locked_commit: str | None = None

    @property
    def sentence(self) -> str:
        name = Path(self.lock_file).name
        if self.state == "unlocked":
            return f"the plan has no lock file ({name}); nothing shows it was fixed in advance"
        if self.state == "matches":
            return f"the plan matches its lock ({name}, locked {self.locked_at_utc})"
        return (
            f"the plan differs from its lock ({name}, locked {self.locked_at_utc}): locked "
            f"fingerprint {self.locked_sha256}, current {self.current_sha256}"
        )

    def as_record(self) -> dict[str, Any]:
        return {
            "state": self.state,
            "lock_file": self.lock_file,
            "current_sha256": self.current_sha256,
            "locked_sha256": self.locked_sha256,
            "locked_at_utc": self.locked_at_utc,
            "locked_commit": self.locked_commit,
        }


def _check_fingerprint(value: Any, what: str) -> str:
    if not isinstance(value, str) or not _HEX64.match(value):
        raise ValueError(f"{what} must be 64 lowercase hex digits; got {value!r}")
    return value


def read_lock(plan_path: str | os.PathLike[str]) -> Lock | None:
    """Read the plan's lock file; None when there is none.

    Raises :class:`~planrunner.errors.PlanError`, naming the lock file, when it is not a
    readable lock of this format or belongs to another plan.
    """
    path = lock_path(plan_path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError(f"{path}: cannot read the lock file ({exc}); delete it and lock the "
                        "plan again") from exc
    fix = "; delete it and lock the plan again"
    try:
        data = json.loads(text)
    except ValueError as exc:
        line = getattr(exc, "lineno", None)
        where = f":{line}" if line else ""
        raise PlanError(f"{path}{where}: the lock file is not valid JSON{fix}") from None
    if not isinstance(data, dict):
        raise PlanError(f"{path}: the lock file does not hold a JSON object{fix}")
    fmt = data.get("format")
    if fmt != LOCK_FORMAT:
        if isinstance(fmt, str) and fmt.startswith("planrunner.lock/"):
            raise PlanError(f"{path}: lock format {fmt!r} is not {LOCK_FORMAT!r}; it was "
                            "written by another planrunner version")
        raise PlanError(f"{path}: not a planrunner lock file (format {fmt!r}){fix}")
    missing = [k for k in _KEYS if k not in data]
    if missing:
        raise PlanError(f"{path}: the lock file lacks {', '.join(missing)}{fix}")
    for key in ("plan_sha256", "plan_raw_sha256"):
        if not isinstance(data[key], str) or not _HEX64.match(data[key]):
            raise PlanError(f"{path}: {key} {data[key]!r} is not a SHA-256 fingerprint{fix}")
    for key in ("plan", "locked_at_utc", "planrunner"):
        if not isinstance(data[key], str):
            raise PlanError(f"{path}: {key} should be a string; got {data[key]!r}{fix}")
    if data["git_commit"] is not None and not isinstance(data["git_commit"], str):
        raise PlanError(f"{path}: git_commit should be a string or null{fix}")
    plan_name = Path(plan_path).name
    if data["plan"] != plan_name:
        raise PlanError(f"{path}: the lock belongs to the plan {data['plan']!r}, not "
                        f"{plan_name!r}; was the plan renamed? Lock it again under its new name")
    return Lock(path=path, plan=data["plan"], plan_sha256=data["plan_sha256"],
                plan_raw_sha256=data["plan_raw_sha256"], locked_at_utc=data["locked_at_utc"],
                git_commit=data["git_commit"], planrunner=data["planrunner"])


def write_lock(
    plan_path: str | os.PathLike[str],
    canonical_fingerprint: str,
    raw_fingerprint: str,
    *,
    replace: bool = False,
    time_utc: str | None = None,
    git_commit: str | None | Literal["auto"] = "auto",
) -> LockWrite:
    """Write (atomically) the lock file beside the plan.

    A lock with the same canonical fingerprint is left as it is (``unchanged``: the original
    lock time is kept). A lock with a different fingerprint is replaced only when ``replace``
    is true; otherwise :class:`~planrunner.errors.PlanError` says so, because re-locking a
    changed plan after the data exist defeats the lock.

    ``git_commit="auto"`` records the repository's HEAD commit, or null outside git;
    ``time_utc`` defaults to now.
    """
    from .._version import __version__
    from . import provenance

    plan = Path(plan_path)
    _check_fingerprint(canonical_fingerprint, "canonical_fingerprint")
    _check_fingerprint(raw_fingerprint, "raw_fingerprint")
    if not plan.is_file():
        raise PlanError(f"{plan}: no such plan file to lock")
    existing = read_lock(plan)
    if existing is not None and existing.plan_sha256 == canonical_fingerprint:
        return LockWrite(action="unchanged", lock=existing)
    if existing is not None and not replace:
        raise PlanError(
            f"{existing.path}: the plan has changed since it was locked on "
            f"{existing.locked_at_utc} (locked fingerprint {existing.plan_sha256}, current "
            f"{canonical_fingerprint}); replace the lock only if no data exist yet, otherwise "
            "declare a deviation"
        )
    if git_commit == "auto":
        git_commit = provenance.git_info(plan).head_commit
    lock = Lock(
        path=lock_path(plan),
        plan=plan.name,
        plan_sha256=canonical_fingerprint,
        plan_raw_sha256=raw_fingerprint,
        locked_at_utc=time_utc if time_utc is not None else provenance.utc_now(),
        git_commit=git_commit,
        planrunner=__version__,
    )
    try:
        atomic_write_text(lock.path, lock.as_json())
    except OSError as exc:
        raise PlanError(f"{lock.path}: cannot write the lock file ({exc.strerror or exc})") from exc
    return LockWrite(action="created" if existing is None else "replaced", lock=lock,
                     previous=existing)


def compare_lock(plan_path: str | os.PathLike[str], canonical_fingerprint: str) -> LockStatus:
    """Compare the plan's canonical fingerprint with its lock (corrupt lock: PlanError)."""
    _check_fingerprint(canonical_fingerprint, "canonical_fingerprint")
    path = lock_path(plan_path)
    lock = read_lock(plan_path)
    if lock is None:
        return LockStatus(state="unlocked", lock_file=str(path),
                          current_sha256=canonical_fingerprint)
    state: Literal["matches", "differs"] = (
        "matches" if lock.plan_sha256 == canonical_fingerprint else "differs"
    )
    return LockStatus(state=state, lock_file=str(path), current_sha256=canonical_fingerprint,
                      locked_sha256=lock.plan_sha256, locked_at_utc=lock.locked_at_utc,
                      locked_commit=lock.git_commit)
