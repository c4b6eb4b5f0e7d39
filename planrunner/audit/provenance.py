"""Facts for the start record: who ran what, where, with which software, and the plan's age.

Every function here is safe to call on any machine: git may be missing, the files may be
outside a repository, the user may have no login name. What cannot be found is recorded as
``None`` with a plain sentence saying why, never raised. Only the standard library is imported
at module level; :func:`numeric_build_info` imports numpy (a run has loaded it anyway).

:func:`plan_predates_data` is careful about what git can show. Commit dates come from the
committer's clock and can be set at will, and a data file may have existed long before anyone
committed it. So ``"yes"`` means only that the record is *consistent* with a plan fixed before
the data; ``"no"`` means the record itself shows the data (or the plan's present form) came
first; ``"unknown"`` means the record cannot tell.
"""

from __future__ import annotations

import getpass
import hashlib
import os
import platform
import subprocess
import sys
import warnings
from dataclasses import asdict, dataclass
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path
from typing import Any, Literal, Sequence

from ..errors import PlanError

__all__ = [
    "GitInfo",
    "Operator",
    "Precedence",
    "command_line",
    "file_sha256",
    "git_info",
    "numeric_build_info",
    "operator_name",
    "plan_predates_data",
    "software_versions",
    "start_facts",
    "utc_now",
]

#: Distributions whose versions the start record lists (display name -> distribution name).
_DISTRIBUTIONS = {
    "numpy": "numpy",
    "scipy": "scipy",
    "pandas": "pandas",
    "statsmodels": "statsmodels",
    "pydantic": "pydantic",
    "pyyaml": "PyYAML",
    "jinja2": "Jinja2",
    "typer": "typer",
}
#: Seconds any one git command may take before it is given up.
GIT_TIMEOUT = 10.0
#: Environment variables that would point git at some other repository than the file's own.
_GIT_ENV_DROP = ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE", "GIT_PREFIX", "GIT_COMMON_DIR",
                 "GIT_OBJECT_DIRECTORY")


# --------------------------------------------------------------------------- simple facts


def utc_now() -> str:
    """The current UTC time as ISO 8601 to the second with a ``Z``: ``2027-03-04T09:15:00Z``."""
    return _iso_utc(datetime.now(timezone.utc))


def _iso_utc(moment: datetime) -> str:
    return moment.astimezone(timezone.utc).replace(microsecond=0).strftime("%Y-%m-%dT%H:%M:%SZ")


def command_line(argv: Sequence[str] | None = None) -> list[str]:
    """The command line as a list of words, the program given by name only (no folder)."""
    words = [str(w) for w in (sys.argv if argv is None else argv)]
    if not words:
        return []
    program = Path(words[0]).name
    if program in {"__main__.py", "-c", "-m", ""}:
        program = "planrunner"
    return [program, *words[1:]]


def file_sha256(path: str | os.PathLike[str], *, chunk_size: int = 1 << 20) -> str:
    """SHA-256 (hex) of a file's bytes, read in chunks; OS errors propagate to the caller."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(chunk_size), b""):
            digest.update(chunk)
    return digest.hexdigest()


def software_versions() -> dict[str, str | None]:
    """Versions of Python, planrunner and the libraries a run relies on (None: not installed).

    Read from the installed packages' metadata; nothing is imported.
    """
    from .._version import __version__

    versions: dict[str, str | None] = {
        "python": platform.python_version(),
        "planrunner": __version__,
    }
    for name, distribution in _DISTRIBUTIONS.items():
        try:
            versions[name] = metadata.version(distribution)
        except metadata.PackageNotFoundError:
            versions[name] = None
    return versions


def numeric_build_info() -> dict[str, Any]:
    """The machine and the BLAS/LAPACK numpy uses, as far as they can be found.

    Uses ``numpy.show_config(mode="dicts")`` (numpy 1.26 and later) and, if installed,
    ``threadpoolctl`` for the libraries actually loaded. Neither is required: what cannot be
    found is ``None``, and ``notes`` says why.
    """
    info: dict[str, Any] = {
        "machine": platform.machine() or None,
        "processor": platform.processor() or None,
        "system": platform.system() or None,
        "cpu_count": os.cpu_count(),
        "blas": None,
        "lapack": None,
        "simd": None,
        "threadpools": None,
        "notes": [],
    }
    try:
        import numpy

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            config = numpy.show_config(mode="dicts")
    except Exception as exc:  # old numpy (no mode=), or no numpy at all
        info["notes"].append(f"numpy did not report its build ({type(exc).__name__})")
    else:
        deps = config.get("Build Dependencies", {}) if isinstance(config, dict) else {}
        for lib in ("blas", "lapack"):
            entry = deps.get(lib)
            if isinstance(entry, dict):
                info[lib] = {
                    "name": _str_or_none(entry.get("name")),
                    "version": _str_or_none(entry.get("version")),
                    "configuration": _str_or_none(entry.get("openblas configuration")),
                }
        simd = config.get("SIMD Extensions") if isinstance(config, dict) else None
        if isinstance(simd, dict):
            info["simd"] = {
                "baseline": [str(x) for x in simd.get("baseline", []) or []],
                "found": [str(x) for x in simd.get("found", []) or []],
            }
    try:
        import threadpoolctl  # optional
    except ImportError:
        info["notes"].append("threadpoolctl is not installed, so the loaded BLAS is not listed")
    else:
        try:
            pools = threadpoolctl.threadpool_info()
        except Exception as exc:
            info["notes"].append(f"threadpoolctl failed ({type(exc).__name__})")
        else:
            info["threadpools"] = [
                {k: _str_or_none(pool.get(k)) for k in
                 ("user_api", "internal_api", "version", "num_threads")}
                for pool in pools
            ]
    return info


def _str_or_none(value: Any) -> str | None:
    return None if value is None else str(value)


# --------------------------------------------------------------------------- operator


@dataclass(frozen=True, slots=True)
class Operator:
    """Who ran the plan, and where the name came from (``option``, ``environment``, ``login``)."""

    name: str | None
    source: Literal["option", "environment", "login", "unknown"]

    def as_record(self) -> dict[str, Any]:
        return {"name": self.name, "source": self.source}


def _clean_name(value: str, where: str) -> str:
    name = value.strip()
    if not name:
        raise PlanError(f"{where} is empty; give the name of the person running the plan")
    if any(ch in name for ch in "\r\n\t") or not name.isprintable():
        raise PlanError(f"{where} {value!r} holds control characters; give a plain name")
    return name


def operator_name(cli_value: str | None = None) -> Operator:
    """The operator: ``--operator``, else ``PLANRUNNER_OPERATOR``, else the login name.

    An empty or multi-line ``--operator`` raises :class:`~planrunner.errors.PlanError`; an
    empty environment variable is ignored. When no login name can be found the name is
    ``None`` with source ``unknown``.
    """
    if cli_value is not None:
        return Operator(_clean_name(cli_value, "--operator"), "option")
    env = os.environ.get("PLANRUNNER_OPERATOR")
    if env is not None and env.strip():
        return Operator(_clean_name(env, "PLANRUNNER_OPERATOR"), "environment")
    try:
        login = getpass.getuser()
    except Exception:  # KeyError (no passwd entry) or OSError (Python 3.13)
        return Operator(None, "unknown")
    return Operator(login, "login") if login else Operator(None, "unknown")


# --------------------------------------------------------------------------- git


def _git(args: Sequence[str], cwd: Path) -> tuple[int, str, str] | None:
    """Run git in ``cwd``; None when git is missing, hangs or cannot be started."""
    env = {k: v for k, v in os.environ.items() if k not in _GIT_ENV_DROP}
    env.update(GIT_TERMINAL_PROMPT="0", GIT_OPTIONAL_LOCKS="0", LC_ALL="C")
    try:
        done = subprocess.run(
            ["git", *args],
            cwd=cwd,
            env=env,
            stdin=subprocess.DEVNULL,
            capture_output=True,
            timeout=GIT_TIMEOUT,
            check=False,
        )
    except (OSError, subprocess.SubprocessError, ValueError):
        return None
    decode = lambda b: b.decode("utf-8", errors="replace").strip()  # noqa: E731
    return done.returncode, decode(done.stdout), decode(done.stderr)


@dataclass(frozen=True, slots=True, kw_only=True)
class GitInfo:
    """What git knows about one file. Dates are UTC, ISO 8601 with ``Z``.

    ``first_commit`` is the commit that first added the file, ``last_commit`` the latest
    commit that changed it (the one that gave the committed file its present content).
    ``note`` explains, in one sentence, anything that could not be found.
    """

    git_available: bool
    in_repository: bool
    path_in_repository: str | None = None
    head_commit: str | None = None
    tracked: bool | None = None
    uncommitted_changes: bool | None = None
    first_commit: str | None = None
    first_commit_date: str | None = None
    last_commit: str | None = None
    last_commit_date: str | None = None
    note: str | None = None

    def as_record(self) -> dict[str, Any]:
        return asdict(self)


def _commit_and_date(line: str) -> tuple[str | None, str | None]:
    parts = line.split()
    if len(parts) != 2:
        return None, None
    try:
        moment = datetime.fromisoformat(parts[1].replace("Z", "+00:00"))
    except ValueError:
        return parts[0], None
    return parts[0], _iso_utc(moment)


def git_info(path: str | os.PathLike[str], *, follow_renames: bool = False) -> GitInfo:
    """Ask git about ``path``: repository, HEAD, tracked, uncommitted changes, first/last commit.

    ``follow_renames`` makes the first-commit search follow the file across renames (git's
    ``--follow``, a similarity heuristic); without it the file is dated from when it got its
    present name. Never raises: a missing git, a timeout or a refusal is recorded in ``note``.
    """
    file = Path(os.path.abspath(path))
    folder = file.parent
    if not folder.is_dir():
        return GitInfo(git_available=True, in_repository=False,
                       note=f"the folder {folder} does not exist")
    where = _git(["rev-parse", "--show-prefix"], folder)
    if where is None:
        return GitInfo(git_available=False, in_repository=False,
                       note="git is not available here (not installed, or it did not answer)")
    code, prefix, err = where
    if code != 0:
        first = err.splitlines()[0] if err else ""
        note = ("the file is not inside a git repository" if "not a git repository" in first
                else f"git could not read the repository: {first}")
        return GitInfo(git_available=True, in_repository=False, note=note)
    rel = prefix + file.name
    head = _git(["rev-parse", "--verify", "-q", "HEAD"], folder)
    head_commit = head[1] if head and head[0] == 0 and head[1] else None
    listed = _git(["ls-files", "--error-unmatch", "--", file.name], folder)
    tracked = None if listed is None else listed[0] == 0
    notes: list[str] = []
    if head_commit is None:
        notes.append("the repository has no commits yet")
    if not tracked:
        notes.append("the file is not tracked by git")
        return GitInfo(git_available=True, in_repository=True, path_in_repository=rel,
                       head_commit=head_commit, tracked=tracked, note="; ".join(notes) or None)

    status = _git(["status", "--porcelain=v1", "--", file.name], folder)
    changes = None if status is None or status[0] != 0 else bool(status[1])
    follow = ["--follow"] if follow_renames else []
    added = _git(["log", "--diff-filter=A", *follow, "--format=%H %cI", "--", file.name], folder)
    first_commit = first_date = None
    if added is not None and added[0] == 0 and added[1]:
        first_commit, first_date = _commit_and_date(added[1].splitlines()[-1])
    last = _git(["log", "-1", "--format=%H %cI", "--", file.name], folder)
    last_commit = last_date = None
    if last is not None and last[0] == 0 and last[1]:
        last_commit, last_date = _commit_and_date(last[1].splitlines()[0])
    if tracked and first_commit is None:
        notes.append("the file is staged but not yet in any commit")
    if changes is None:
        notes.append("git did not say whether the file has uncommitted changes")
    return GitInfo(
        git_available=True,
        in_repository=True,
        path_in_repository=rel,
        head_commit=head_commit,
        tracked=tracked,
        uncommitted_changes=changes,
        first_commit=first_commit,
        first_commit_date=first_date,
        last_commit=last_commit,
        last_commit_date=last_date,
        note="; ".join(notes) or None,
    )


# --------------------------------------------------------------------------- precedence


@dataclass(frozen=True, slots=True, kw_only=True)
class Precedence:
    """Evidence on whether the plan, as run, was fixed before the data existed.

    ``answer`` is ``yes`` (the record is consistent with plan first; it cannot prove it),
    ``no`` (the record shows the data, or the plan's present form, came first) or ``unknown``.
    ``reason`` says why in plain sentences. ``data_evidence`` is ``git`` (the data file's first
    commit) or ``mtime`` (its modification time, for a file git does not track).
    """

    answer: Literal["yes", "no", "unknown"]
    reason: str
    plan_first_commit: str | None = None
    plan_first_date: str | None = None
    plan_fixed_commit: str | None = None
    plan_fixed_date: str | None = None
    data_evidence: Literal["git", "mtime"] | None = None
    data_commit: str | None = None
    data_date: str | None = None

    def as_record(self) -> dict[str, Any]:
        return asdict(self)


_CAVEAT_GIT = (
    " Commit dates come from the committer's clock, and the data may have existed before they "
    "were committed, so this is consistent with a plan fixed in advance but does not prove it."
)
_CAVEAT_MTIME = (
    " The data file is not in git, so its modification time is used; modification times are "
    "easily changed, so this is weak evidence."
)


def _parse_utc(text: str) -> datetime:
    return datetime.fromisoformat(text.replace("Z", "+00:00"))


def plan_predates_data(
    plan_path: str | os.PathLike[str], data_path: str | os.PathLike[str]
) -> Precedence:
    """Compare when the plan took its present form with when the data file first appeared.

    The plan's date is the commit that last changed it (its first commit is reported too: a
    plan first committed before the data but edited afterwards does *not* predate the data as
    run). The data's date is the commit that first added the data file, following renames, or,
    for a data file git does not track, its modification time. A plan that is not committed,
    or has uncommitted changes, gives ``unknown``. Never raises.
    """
    plan = git_info(plan_path)
    if not plan.git_available:
        return Precedence(answer="unknown", reason=(
            "git is not available here, so nothing shows when the plan was written."))
    if not plan.in_repository or not plan.tracked or plan.last_commit_date is None:
        return Precedence(answer="unknown", reason=(
            "The plan is not committed to a git repository, so nothing shows when it was "
            "written. Commit the plan (and lock it) before the data arrive."))
    if plan.uncommitted_changes:
        return Precedence(answer="unknown", reason=(
            "The plan has changes that are not committed, so the version being run has no "
            "date git can show."), plan_first_commit=plan.first_commit,
            plan_first_date=plan.first_commit_date, plan_fixed_commit=plan.last_commit,
            plan_fixed_date=plan.last_commit_date)
    facts = dict(plan_first_commit=plan.first_commit, plan_first_date=plan.first_commit_date,
                 plan_fixed_commit=plan.last_commit, plan_fixed_date=plan.last_commit_date)

    data = git_info(data_path, follow_renames=True)
    if data.tracked and data.first_commit_date is not None:
        evidence, data_commit, data_date = "git", data.first_commit, data.first_commit_date
        data_phrase = (
            f"the data file was first committed (commit {_short(data_commit)}, {data_date})"
        )
    else:
        try:
            mtime = os.stat(data_path).st_mtime
        except OSError:
            return Precedence(answer="unknown", reason=(
                "The data file cannot be found, so its age cannot be compared with the plan's."),
                **facts)
        evidence, data_commit = "mtime", None
        data_date = _iso_utc(datetime.fromtimestamp(mtime, timezone.utc))
        data_phrase = f"the data file was last modified ({data_date})"
    facts.update(data_evidence=evidence, data_commit=data_commit, data_date=data_date)
    caveat = _CAVEAT_GIT if evidence == "git" else _CAVEAT_MTIME

    fixed = _parse_utc(plan.last_commit_date)
    first = _parse_utc(plan.first_commit_date) if plan.first_commit_date else fixed
    seen = _parse_utc(data_date)
    fixed_phrase = f"commit {_short(plan.last_commit)} on {plan.last_commit_date}"
    if evidence == "git" and data_commit == plan.last_commit:
        return Precedence(answer="unknown", reason=(
            f"The plan and the data file were committed together ({fixed_phrase}), so git "
            "cannot show which came first."), **facts)
    if fixed < seen:
        return Precedence(answer="yes", reason=(
            f"The plan took its present form in {fixed_phrase}, before {data_phrase}."
            + caveat), **facts)
    if fixed == seen:
        return Precedence(answer="unknown", reason=(
            f"The plan took its present form in {fixed_phrase}, at the same second as "
            f"{data_phrase}, so the order cannot be told."), **facts)
    if first < seen:
        return Precedence(answer="no", reason=(
            f"The plan was first committed on {plan.first_commit_date}, before {data_phrase}, "
            f"but it was changed afterwards (last in {fixed_phrase}); the plan as run does not "
            "predate the data."), **facts)
    return Precedence(answer="no", reason=(
        f"{data_phrase[0].upper()}{data_phrase[1:]} before the plan took its present form in "
        f"{fixed_phrase}; the plan as run does not predate the data."), **facts)


def _short(commit: str | None) -> str:
    return commit[:12] if commit else "?"


# --------------------------------------------------------------------------- all together


def start_facts(
    plan_path: str | os.PathLike[str],
    data_path: str | os.PathLike[str],
    *,
    operator: str | None = None,
    argv: Sequence[str] | None = None,
) -> dict[str, Any]:
    """Gather everything the start record needs except the plan's canonical fingerprint.

    The keys match :meth:`planrunner.audit.log.DecisionLog.start`::

        log.start(plan_sha256=fingerprint, plan_id=plan.id, lock=status.as_record(),
                  **start_facts(plan_path, data_path, operator=cli_operator))

    ``operator`` is the ``--operator`` value (None if not given); ``argv`` defaults to
    ``sys.argv``. OS errors reading the two files propagate.
    """
    plan_git, data_git = git_info(plan_path), git_info(data_path, follow_renames=True)
    return {
        "plan_file": os.fspath(plan_path),
        "plan_raw_sha256": file_sha256(plan_path),
        "data_file": os.fspath(data_path),
        "data_sha256": file_sha256(data_path),
        "time_utc": utc_now(),
        "operator": operator_name(operator).as_record(),
        "command": command_line(argv),
        "software": software_versions(),
        "numeric_build": numeric_build_info(),
        "git": {"plan": plan_git.as_record(), "data": data_git.as_record()},
        "plan_before_data": plan_predates_data(plan_path, data_path).as_record(),
    }
