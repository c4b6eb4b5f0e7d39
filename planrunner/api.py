"""The small Python API behind ``planrunner run``, ``planrunner lock`` and ``planrunner verify``.

Three functions, each returning an outcome object with an ``exit_code`` and a plain-text
``summary()`` for standard output; problems raise the classes of :mod:`planrunner.errors`,
which carry their own exit codes:

:func:`run_plan`
    Validate the plan, compare it with its lock, read and check the data, run the engine, and
    write ``results.json``, ``decisions.jsonl`` and ``plan.resolved.yaml`` into RUN_DIR
    (default ``reports/<plan id>`` under the current folder). Exit code 0 when the plan ran to
    its end, 4 when it stopped itself on some endpoint by one of its own rules (the files are
    written all the same). Raises :class:`~planrunner.errors.PlanError` (2),
    :class:`~planrunner.errors.DataError` (3) or :class:`~planrunner.errors.LockMismatch` (5);
    on any error RUN_DIR is left exactly as it was.
:func:`lock_plan`
    Validate the plan and write ``<plan file>.lock.json`` beside it.
:func:`verify_run`
    Check a RUN_DIR: the decision log's chain, results.json against the finish record, the
    archived inputs against their manifest, and (when the data are still at hand) rerun the
    plan and compare results.json byte for byte. Exit code 0 when everything checked holds,
    1 when a problem was found (like ``cmp`` and ``diff``: 1 means "differs"); a missing
    RUN_DIR or log is misuse, :class:`~planrunner.errors.PlanError` (2).

The numerical modules are imported only by :func:`run_plan` (and by a verify rerun).
"""

from __future__ import annotations

import dataclasses
import json
import os
import re
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .errors import DataError, LockMismatch, PlanError, PlanHalted, PlanrunnerError

if TYPE_CHECKING:  # pragma: no cover
    from .audit.lockfile import LockStatus
    from .audit.log import VerifyReport
    from .data import CheckedData, DataSpec
    from .plan.load import LoadedPlan

__all__ = [
    "ARCHIVE_DIR",
    "DEFAULT_REPORTS_DIR",
    "MANIFEST_FORMAT",
    "LockOutcome",
    "RunOutcome",
    "VerifyOutcome",
    "data_spec",
    "default_run_dir",
    "lock_plan",
    "run_plan",
    "verify_run",
]

#: Where runs are written when no ``out`` is given: ``<current folder>/reports/<plan id>``.
DEFAULT_REPORTS_DIR = "reports"
#: The folder inside RUN_DIR holding the archived inputs (``archive=True``).
ARCHIVE_DIR = "input"
#: Name and format tag of the archive's checksum manifest.
MANIFEST_NAME = "manifest.json"
MANIFEST_FORMAT = "planrunner.input/1"

_LOG_NAME = "decisions.jsonl"
_RESULTS_NAME = "results.json"
_RESOLVED_NAME = "plan.resolved.yaml"


# --------------------------------------------------------------------------------------------
# outcomes


@dataclass(frozen=True, slots=True, kw_only=True)
class EndpointLine:
    """One endpoint of a run as the summary shows it."""

    endpoint: str
    status: str
    conclusion: str | None
    halt_reason: str | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class RunOutcome:
    """What :func:`run_plan` did.

    ``status`` is ``completed`` (exit code 0) or ``halted`` (exit code 4: some endpoint was
    stopped by one of the plan's own rules; the run's files are written all the same).
    ``log_head`` is the decision log's final chain value: keep it somewhere the log's editor
    cannot reach (a commit, a ticket, a lab notebook) and pass it to ``verify``.
    """

    plan_id: str
    plan_revision: int
    plan_file: Path
    data_file: Path
    data_label: str
    data_sha256: str
    run_dir: Path
    status: str
    exit_code: int
    endpoints: tuple[EndpointLine, ...]
    halted_endpoints: tuple[str, ...]
    lock_state: str
    deviation: str | None
    files: tuple[str, ...]
    results_sha256: str
    log_head: str
    log_records: int
    plan_warnings: tuple[str, ...] = ()
    across_endpoints: dict[str, Any] | None = None

    def summary(self) -> str:
        """Plain text for standard output."""
        lines = [
            f"plan {self.plan_id} (revision {self.plan_revision}) on {self.data_label} "
            f"(SHA-256 {self.data_sha256[:16]}...)",
        ]
        lock = {
            "matches": "the plan matches its lock",
            "unlocked": "the plan has no lock file",
            "differs": "the plan differs from its lock; declared deviation: "
            f"{self.deviation}",
        }.get(self.lock_state, self.lock_state)
        if self.lock_state != "differs" and self.deviation:
            lock += f"; declared deviation: {self.deviation}"
        lines.append(f"  {lock}")
        for warning in self.plan_warnings:
            lines.append(f"  warning: {warning}")
        for e in self.endpoints:
            if e.status == "halted":
                lines.append(f"  {e.endpoint}: halted by the plan: {e.halt_reason}")
            else:
                lines.append(f"  {e.endpoint}: {e.conclusion or 'completed'}")
        across = self.across_endpoints
        if across:
            label = {"holm": "Holm", "benjamini_hochberg": "Benjamini-Hochberg"}.get(
                across.get("method"), str(across.get("method")))
            parts = [
                f"{name} {p:.3g}{' (significant)' if sig else ''}"
                for name, p, sig in zip(across.get("endpoints", ()),
                                        across.get("p_adjusted", ()),
                                        across.get("significant", ()))
            ]
            lines.append(f"  adjusted across endpoints ({label}): {', '.join(parts)}")
        if self.status == "halted":
            names = ", ".join(self.halted_endpoints)
            lines.append(f"the plan stopped itself on {names} by its own rule (recorded; "
                         "exit code 4)")
        else:
            lines.append("the plan ran to its end")
        lines.append(f"wrote {self.run_dir}: {', '.join(self.files)}")
        lines.append(
            f"decision log: {self.log_records} records; final chain value {self.log_head} "
            "(keep it apart from the run folder to check it later with planrunner verify)"
        )
        return "\n".join(lines)


@dataclass(frozen=True, slots=True, kw_only=True)
class LockOutcome:
    """What :func:`lock_plan` did: ``created``, ``unchanged`` or ``replaced`` the lock file."""

    plan_file: Path
    lock_file: Path
    action: str
    plan_sha256: str
    raw_sha256: str
    locked_at_utc: str
    git_commit: str | None
    plan_warnings: tuple[str, ...] = ()
    exit_code: int = 0

    def summary(self) -> str:
        """Plain text for standard output."""
        verb = {
            "created": "locked",
            "unchanged": "already locked with the same fingerprint, lock kept",
            "replaced": "lock replaced",
        }[self.action]
        commit = f", git commit {self.git_commit}" if self.git_commit else ", outside git"
        lines = [
            f"{self.plan_file}: {verb} ({self.lock_file.name}, locked {self.locked_at_utc}"
            f"{commit})",
            f"  plan fingerprint {self.plan_sha256}",
            f"  file SHA-256     {self.raw_sha256}",
        ]
        lines.extend(f"  warning: {w}" for w in self.plan_warnings)
        if self.action != "unchanged":
            lines.append(f"commit {self.lock_file.name} together with the plan before any data "
                         "exist")
        return "\n".join(lines)


@dataclass(frozen=True, slots=True, kw_only=True)
class VerifyOutcome:
    """What :func:`verify_run` found.

    ``problems`` lists every finding (empty when all checks hold); ``log`` is the
    :class:`~planrunner.audit.log.VerifyReport` of the decision log; ``rerun`` is
    ``identical``, ``differs``, ``failed`` or ``not_run`` (``rerun_note`` says why);
    ``differences`` names each value of results.json that the rerun did not reproduce.
    Exit code 0 when there are no problems, otherwise 1.
    """

    run_dir: Path
    log: VerifyReport
    rerun: str
    rerun_note: str | None = None
    differences: tuple[str, ...] = ()
    archive_checked: bool = False
    problems: tuple[str, ...] = field(default=())

    @property
    def ok(self) -> bool:
        return not self.problems

    @property
    def exit_code(self) -> int:
        return 0 if self.ok else 1

    @property
    def first_bad_line(self) -> int | None:
        """Line of decisions.jsonl holding the first bad record (None if none)."""
        return self.log.first_bad_line

    def summary(self) -> str:
        """Plain text for standard output."""
        lines = [self.log.summary()]
        if self.archive_checked:
            lines.append(f"archived inputs ({ARCHIVE_DIR}/): checked against {MANIFEST_NAME}")
        if self.rerun == "identical":
            lines.append(f"rerun: results.json reproduced byte for byte ({self.rerun_note})")
        elif self.rerun == "differs":
            lines.append(f"rerun: results.json NOT reproduced ({self.rerun_note}); "
                         f"{len(self.differences)} difference(s):")
            lines.extend(f"  {d}" for d in self.differences)
        elif self.rerun == "failed":
            lines.append(f"rerun: failed: {self.rerun_note}")
        else:
            lines.append(f"rerun: not done: {self.rerun_note}")
        others = [p for p in self.problems if p not in self.log.messages
                  and p not in self.differences]
        lines.extend(f"problem: {p}" for p in others)
        if self.ok:
            lines.append(f"{self.run_dir}: every check holds")
        else:
            n = len(self.problems)
            lines.append(f"{self.run_dir}: {n} problem{'s' if n != 1 else ''} found")
        return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# helpers


def default_run_dir(plan_id: str) -> Path:
    """``reports/<plan id>`` under the current folder: where a run writes without ``out``."""
    return Path(os.getcwd()) / DEFAULT_REPORTS_DIR / plan_id


def data_spec(plan: LoadedPlan, data: str | os.PathLike[str] | None = None) -> DataSpec:
    """The :class:`~planrunner.data.DataSpec` of a plan's ``data`` section.

    ``data`` replaces the plan's ``data.file`` (another batch of data); it is taken relative to
    the current folder, while the plan's own ``data.file`` is relative to the plan file.
    Under ``data.degenerate_groups: halt`` the data layer is asked for one value per group
    only: a group smaller than ``min_n`` is then a halt the engine records, not a rejection.
    """
    from .data import DataSpec

    d = plan.model.data
    nd = d.non_detects
    if data is None:
        file, label = plan.data_path, d.file
    else:
        file, label = Path(data), os.fspath(data)
    return DataSpec(
        file=file,
        group=d.group,
        responses=tuple(d.response),
        levels=tuple(d.levels),
        missing=d.missing,
        non_detect_rule=nd.rule,
        non_detect_fraction=getattr(nd, "fraction", 0.5),
        non_detect_limit=getattr(nd, "limit", None),
        # with degenerate_groups: halt a small group is the engine's to halt on (exit 4), so
        # the data layer only insists on one value per group
        min_n=d.min_n if d.degenerate_groups == "reject" else 1,
        response_kind=d.response_kind,
        label=label,
    )


def _plan_ref(path: str) -> str | None:
    """A plan notice's path (``a.b[2].c``) as the log's dotted plan_ref (``a.b.2.c``)."""
    ref = re.sub(r"\[(\d+)\]", r".\1", path)
    return ref if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z0-9_]+)*", ref) else None


def _check_deviation(deviation: str | None) -> str | None:
    if deviation is None:
        return None
    if not isinstance(deviation, str) or not deviation.strip():
        raise PlanError("--deviation needs a reason: say in one sentence why the plan departs "
                        "from its lock")
    if any(ch in deviation for ch in "\r\n"):
        raise PlanError("--deviation must be one line of text")
    return deviation.strip()


def _lock_mismatch(plan_path: Path, status: LockStatus) -> LockMismatch:
    return LockMismatch(
        f"{plan_path}: the plan differs from its lock {Path(status.lock_file).name} (locked "
        f"{status.locked_at_utc}); declare the departure with --deviation \"reason\", or "
        "restore the locked plan",
        problems=[f"locked fingerprint  {status.locked_sha256}",
                  f"current fingerprint {status.current_sha256}"],
    )


def _deviation_text(status: LockStatus) -> str:
    if status.state == "differs":
        return (f"the plan's fingerprint {status.current_sha256} differs from the locked "
                f"fingerprint {status.locked_sha256} (locked {status.locked_at_utc})")
    if status.state == "matches":
        return "the plan matches its lock; the deviation concerns something outside the plan"
    return "the plan has no lock file; the deviation concerns something outside the plan"


def _read_checked(spec: DataSpec) -> CheckedData:
    from .data import check_data, read_table

    return check_data(spec, read_table(spec))


def _endpoint_lines(endpoints: Sequence[dict[str, Any]]) -> tuple[EndpointLine, ...]:
    out = []
    for e in endpoints:
        conclusion = e.get("conclusion")
        text = conclusion.get("text") if isinstance(conclusion, dict) else None
        out.append(EndpointLine(endpoint=str(e.get("endpoint")), status=str(e.get("status")),
                                conclusion=text, halt_reason=e.get("halt_reason")))
    return tuple(out)


def _make_recorder(log: Any, endpoint_names: Sequence[str]) -> Any:
    from .engine.record import LogRecorder

    return LogRecorder(log, list(endpoint_names))


# --------------------------------------------------------------------------------------------
# archive


def _archive(stage: Path, files: Sequence[tuple[str, Path, str | None]]) -> list[dict[str, Any]]:
    """Copy ``(role, path, expected sha256)`` files into ``stage/input`` with a manifest."""
    from ._files import atomic_write_bytes, atomic_write_text
    from .audit.log import sha256_hex

    folder = stage / ARCHIVE_DIR
    folder.mkdir()
    entries: list[dict[str, Any]] = []
    used: set[str] = {MANIFEST_NAME}
    for role, path, expected in files:
        try:
            content = path.read_bytes()
        except OSError as exc:
            raise DataError(f"{path}: cannot be copied into the run folder "
                            f"({exc.strerror or exc})") from exc
        digest = sha256_hex(content)
        if expected is not None and digest != expected:
            raise DataError(
                f"{path} changed while the run was reading it (SHA-256 {digest}, read as "
                f"{expected}); run the plan again once the file is final"
            )
        name = path.name
        if name in used:
            name = f"{role}-{name}"
        used.add(name)
        atomic_write_bytes(folder / name, content)
        entries.append({"role": role, "name": name, "source": path.name, "sha256": digest,
                        "bytes": len(content)})
    manifest = {"format": MANIFEST_FORMAT, "files": entries}
    atomic_write_text(folder / MANIFEST_NAME,
                      json.dumps(manifest, sort_keys=True, indent=2, ensure_ascii=False) + "\n")
    return entries


def _read_manifest(run_dir: Path) -> tuple[list[dict[str, Any]] | None, list[str]]:
    """The archive's entries and the problems found checking them (None: no archive)."""
    from .audit.provenance import file_sha256

    folder = run_dir / ARCHIVE_DIR
    path = folder / MANIFEST_NAME
    if not folder.exists():
        return None, []
    if not path.is_file():
        return [], [f"{folder} holds no {MANIFEST_NAME}, so the archived inputs cannot be checked"]
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
        entries = list(manifest["files"])
        if manifest.get("format") != MANIFEST_FORMAT:
            raise ValueError
    except (OSError, ValueError, KeyError, TypeError):
        return [], [f"{path} is not a readable {MANIFEST_FORMAT} manifest"]
    problems = []
    listed = {MANIFEST_NAME}
    good = []
    for entry in entries:
        try:
            name, recorded = str(entry["name"]), str(entry["sha256"])
        except (KeyError, TypeError):
            problems.append(f"{path} has an entry without name and sha256")
            continue
        listed.add(name)
        target = folder / name
        if not target.is_file():
            problems.append(f"{ARCHIVE_DIR}/{name} is listed in {MANIFEST_NAME} but missing")
            continue
        actual = file_sha256(target)
        if actual != recorded:
            problems.append(f"{ARCHIVE_DIR}/{name} does not match {MANIFEST_NAME}: its SHA-256 "
                            f"is {actual}, the manifest recorded {recorded}")
            continue
        good.append(entry)
    for extra in sorted(set(os.listdir(folder)) - listed):
        problems.append(f"{ARCHIVE_DIR}/{extra} is not listed in {MANIFEST_NAME}")
    return good, problems


# --------------------------------------------------------------------------------------------
# run


def run_plan(
    plan: str | os.PathLike[str],
    data: str | os.PathLike[str] | None = None,
    out: str | os.PathLike[str] | None = None,
    *,
    operator: str | None = None,
    deviation: str | None = None,
    archive: bool = False,
    command: Sequence[str] | None = None,
) -> RunOutcome:
    """Run a plan on its data and write the run's files into RUN_DIR.

    Parameters
    ----------
    plan
        The plan file.
    data
        A data file to use instead of the plan's ``data.file`` (another batch of data);
        relative to the current folder. The plan's own ``data.file`` is relative to the plan.
    out
        RUN_DIR. Default: ``reports/<plan id>`` under the current folder. An existing RUN_DIR
        holding only the files a run writes is replaced as a whole; anything else there makes
        the run refuse.
    operator
        Who runs the plan (default: ``PLANRUNNER_OPERATOR``, else the login name).
    deviation
        A declared departure from the locked plan, in one sentence. Needed when the plan
        differs from its lock; recorded as a deviation record whenever it is given.
    archive
        Copy the plan file, the data file and the lock file (if any) into ``RUN_DIR/input/``
        with a SHA-256 manifest, so the folder is a self-contained record.
    command
        The command line to record (default ``sys.argv``).

    Returns
    -------
    RunOutcome
        ``exit_code`` 0 (completed) or 4 (the plan halted itself on some endpoint).

    Raises
    ------
    PlanError
        The plan is invalid, ``deviation`` or ``operator`` is empty, or RUN_DIR cannot be used
        (another run holds it, it holds other files). Exit code 2.
    DataError
        The data were rejected; every problem is listed with file, row and column. Nothing is
        written. Exit code 3.
    LockMismatch
        The plan differs from its lock and no deviation was declared. Exit code 5.
    """
    return _execute(plan, data=data, data_label=None, out=out, operator=operator,
                    deviation=deviation, archive=archive, command=command, check_lock=True)


def _execute(
    plan: str | os.PathLike[str],
    *,
    data: str | os.PathLike[str] | None,
    data_label: str | None,
    out: str | os.PathLike[str] | None,
    operator: str | None,
    deviation: str | None,
    archive: bool,
    command: Sequence[str] | None,
    check_lock: bool,
) -> RunOutcome:
    from .audit.lockfile import compare_lock, lock_path
    from .audit.log import DecisionLog, sha256_hex
    from .audit.provenance import operator_name, start_facts
    from .plan.fingerprint import resolved_yaml
    from .plan.load import load_plan

    # 1. the plan, the operator, the deviation, the lock: all before the data are touched
    loaded = load_plan(plan)
    plan_path = Path(os.path.abspath(plan))
    model = loaded.model
    deviation = _check_deviation(deviation)
    operator_name(operator)  # an unusable --operator is misuse (exit 2), found early
    if check_lock:
        status = compare_lock(plan_path, loaded.fingerprints.plan)
        if status.state == "differs" and deviation is None:
            raise _lock_mismatch(Path(plan), status)
    else:
        status = None

    # 2. the data: every problem listed, nothing written
    spec = data_spec(loaded, data)
    if data_label is not None:
        spec = dataclasses.replace(spec, label=data_label)
    checked = _read_checked(spec)
    data_path = Path(os.path.abspath(spec.file))
    label = spec.display_name

    # 3. the run, staged beside RUN_DIR and moved into place only on success
    from ._files import RunFolder

    run_dir = Path(out) if out is not None else default_run_dir(model.id)
    from .engine.run import analyse
    from .report.results import build_results, results_bytes

    with RunFolder(run_dir) as folder:
        log = DecisionLog(folder.file(_LOG_NAME))
        facts = start_facts(plan_path, data_path, operator=operator, argv=command)
        facts["data_sha256"] = checked.sha256  # the bytes actually analysed
        facts["plan_raw_sha256"] = loaded.fingerprints.raw
        lock_record = status.as_record() if status is not None else None
        log.start(plan_sha256=loaded.fingerprints.plan, plan_id=model.id, lock=lock_record,
                  **facts)
        if deviation is not None:
            assert status is not None
            log.deviation(reason=deviation, differs=_deviation_text(status),
                          details={"lock": status.as_record()})
        for notice in loaded.warnings:
            log.warn(stage="plan", message=notice.message, plan_ref=_plan_ref(notice.path))

        recorder = _make_recorder(log, model.endpoints)
        analysis = analyse(model, checked, recorder)
        recorder.flush()  # held records are written endpoint by endpoint (a no-op if done)

        results = build_results(loaded, checked, analysis, data_label=label)
        content = results_bytes(results)
        folder.write_bytes(_RESULTS_NAME, content)
        folder.write_text(_RESOLVED_NAME, resolved_yaml(model))
        files = [_RESULTS_NAME, _LOG_NAME, _RESOLVED_NAME]
        if archive:
            inputs: list[tuple[str, Path, str | None]] = [
                ("plan", plan_path, loaded.fingerprints.raw),
                ("data", data_path, checked.sha256),
            ]
            lock_file = lock_path(plan_path)
            if lock_file.is_file():
                inputs.append(("lock", lock_file, None))
            _archive(folder.path, inputs)
            files.append(f"{ARCHIVE_DIR}/")

        halted = tuple(str(n) for n in analysis.halted_endpoints)
        digest = sha256_hex(content)
        if analysis.status == "halted":
            reasons = [f"{e.get('endpoint')}: {e.get('halt_reason')}"
                       for e in results["endpoints"] if e.get("status") == "halted"]
            log.finish(status="halted", exit_code=PlanHalted.exit_code, results_sha256=digest,
                       reason="; ".join(reasons) or "the plan stopped itself by its own rule")
            exit_code = PlanHalted.exit_code
        else:
            log.finish(status="completed", exit_code=0, results_sha256=digest)
            exit_code = 0
        head, records = log.head, len(log)
        files += _render_reports(folder.path, model.report.formats)

    return RunOutcome(
        plan_id=model.id,
        plan_revision=model.revision,
        plan_file=plan_path,
        data_file=data_path,
        data_label=label,
        data_sha256=checked.sha256,
        run_dir=Path(os.path.abspath(run_dir)),
        status=str(analysis.status),
        exit_code=exit_code,
        endpoints=_endpoint_lines(results["endpoints"]),
        halted_endpoints=halted,
        lock_state=status.state if status is not None else "not_checked",
        deviation=deviation,
        files=tuple(files),
        results_sha256=digest,
        log_head=head,
        log_records=records,
        plan_warnings=tuple(str(w) for w in loaded.warnings),
        across_endpoints=results["across_endpoints"],
    )


def _render_reports(stage: Path, formats: Sequence[str]) -> list[str]:
    """Render the plan's human-readable reports inside the staging folder, from its files alone.

    They are moved into RUN_DIR together with results.json and the log, so a run folder never
    holds reports of another run.
    """
    wanted = tuple(f for f in formats if f in ("html", "markdown"))
    if not wanted:
        return []
    from .report.render import render_reports

    return [p.name for p in render_reports(stage, formats=wanted)]


# --------------------------------------------------------------------------------------------
# lock


def lock_plan(plan: str | os.PathLike[str], *, replace: bool = False) -> LockOutcome:
    """Validate the plan and write its lock file (``<plan file>.lock.json``) beside it.

    A lock with the same fingerprint is kept as it is (``unchanged``). A lock with another
    fingerprint is replaced only with ``replace=True``; otherwise
    :class:`~planrunner.errors.PlanError` (exit 2) explains that a changed plan needs a
    declared deviation once data exist.
    """
    from .audit.lockfile import write_lock
    from .plan.load import load_plan

    loaded = load_plan(plan)
    written = write_lock(plan, loaded.fingerprints.plan, loaded.fingerprints.raw,
                         replace=replace)
    lock = written.lock
    return LockOutcome(
        plan_file=Path(plan),
        lock_file=lock.path,
        action=written.action,
        plan_sha256=lock.plan_sha256,
        raw_sha256=lock.plan_raw_sha256,
        locked_at_utc=lock.locked_at_utc,
        git_commit=lock.git_commit,
        plan_warnings=tuple(str(w) for w in loaded.warnings),
    )


# --------------------------------------------------------------------------------------------
# verify


def _start_record(run_dir: Path) -> dict[str, Any] | None:
    try:
        with open(run_dir / _LOG_NAME, "rb") as handle:
            first = handle.readline()
        record = json.loads(first.decode("utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return None
    return record if isinstance(record, dict) and record.get("kind") == "start" else None


def _pick_input(
    recorded_path: Any, recorded_sha: Any, role: str, archived: list[dict[str, Any]] | None,
    run_dir: Path,
) -> tuple[Path | None, str]:
    """The file to rerun with: the original if unchanged, else the archived copy."""
    from .audit.provenance import file_sha256

    why = ""
    if isinstance(recorded_path, str) and recorded_path:
        original = Path(recorded_path)
        if original.is_file():
            try:
                if file_sha256(original) == recorded_sha:
                    return original, f"the {role} file {original}"
            except OSError:
                pass
            why = f"the {role} file {original} has changed since the run"
        else:
            why = f"the {role} file {original} is no longer there"
    for entry in archived or ():
        if entry.get("role") == role and entry.get("sha256") == recorded_sha:
            return run_dir / ARCHIVE_DIR / str(entry["name"]), f"the archived {role} copy"
    return None, why + " and the run folder holds no archived copy"


def verify_run(
    run_dir: str | os.PathLike[str],
    *,
    rerun: bool = True,
    expected_head: str | None = None,
) -> VerifyOutcome:
    """Check a run folder; with ``rerun``, reproduce its results.json.

    Checks, in order:

    1. ``decisions.jsonl``: the hash chain, record order and counts (the first bad record is
       named by its line), and results.json against the finish record's SHA-256
       (:func:`planrunner.audit.log.verify_log`); ``expected_head`` is a final chain value kept
       elsewhere.
    2. ``plan.resolved.yaml`` has the plan fingerprint of the start record.
    3. ``input/`` (when the run archived its inputs): every file against the manifest.
    4. Rerun (only when 1-3 hold): the plan and data files named in the start record, if they
       are unchanged, or else their archived copies, are run into a temporary folder, and the
       new results.json is compared byte for byte with the recorded one; every differing value
       is named. When neither the original nor an archived copy is at hand the rerun is not
       done, which is said, and is not a problem.

    Returns a :class:`VerifyOutcome`: exit code 0 when no problem was found, 1 otherwise.
    Raises :class:`~planrunner.errors.PlanError` (exit 2) when ``run_dir`` does not exist or
    holds no decision log.
    """
    from .audit.log import verify_log

    folder = Path(run_dir)
    if not folder.is_dir():
        raise PlanError(f"cannot verify {folder}: no such run folder")
    report = verify_log(folder, expected_head=expected_head)
    problems = list(report.messages)
    start = _start_record(folder) if report.ok else None

    # 2. the resolved plan matches the start record's fingerprint
    resolved = folder / _RESOLVED_NAME
    if start is not None:
        expected = (start.get("plan") or {}).get("sha256")
        if not resolved.is_file():
            problems.append(f"{_RESOLVED_NAME} is missing from the run folder")
        else:
            from .plan.load import load_plan_bytes

            try:
                again = load_plan_bytes(resolved.read_bytes(), path=resolved)
            except PlanrunnerError:
                problems.append(f"{_RESOLVED_NAME} is no longer a valid plan")
            else:
                if again.fingerprints.plan != expected:
                    problems.append(
                        f"{_RESOLVED_NAME} has the plan fingerprint {again.fingerprints.plan}, "
                        f"but the start record names {expected}: it was edited or replaced")

    # 3. archived inputs
    archived, archive_problems = _read_manifest(folder)
    problems.extend(archive_problems)
    if archived is not None and start is not None:
        data_sha = (start.get("data") or {}).get("sha256")
        if not any(e.get("role") == "data" and e.get("sha256") == data_sha for e in archived):
            problems.append(f"{ARCHIVE_DIR}/ holds no copy of the data with the SHA-256 the "
                            f"start record names ({data_sha})")

    # 4. rerun
    state, note, differences = "not_run", None, ()
    if not rerun:
        note = "not asked for"
    elif problems or start is None:
        note = "the run folder failed the checks above, so a rerun would prove nothing"
    else:
        state, note, differences = _rerun(folder, start, archived)
        if state == "differs":
            problems.extend(differences)
        elif state == "failed":
            problems.append(f"the rerun failed: {note}")

    return VerifyOutcome(
        run_dir=folder,
        log=report,
        rerun=state,
        rerun_note=note,
        differences=tuple(differences),
        archive_checked=archived is not None,
        problems=tuple(problems),
    )


def _rerun(
    folder: Path, start: dict[str, Any], archived: list[dict[str, Any]] | None
) -> tuple[str, str | None, tuple[str, ...]]:
    from .report.results import compare_results

    plan_info, data_info = start.get("plan") or {}, start.get("data") or {}
    plan_file, plan_why = _pick_input(plan_info.get("file"), plan_info.get("raw_sha256"),
                                      "plan", archived, folder)
    data_file, data_why = _pick_input(data_info.get("file"), data_info.get("sha256"),
                                      "data", archived, folder)
    if plan_file is None:
        return "not_run", plan_why, ()
    if data_file is None:
        return "not_run", data_why, ()
    recorded = (folder / _RESULTS_NAME).read_bytes()
    try:
        label = json.loads(recorded.decode("utf-8"))["data"]["file"]
    except (UnicodeDecodeError, ValueError, KeyError, TypeError):
        return "failed", "the recorded results.json does not name its data file", ()
    with tempfile.TemporaryDirectory(prefix="planrunner-verify-") as tmp:
        try:
            _execute(plan_file, data=data_file, data_label=str(label),
                     out=Path(tmp) / "rerun", operator=None, deviation=None, archive=False,
                     command=["planrunner", "verify", os.fspath(folder)], check_lock=False)
        except PlanrunnerError as exc:
            return "failed", str(exc).splitlines()[0], ()
        fresh = (Path(tmp) / "rerun" / _RESULTS_NAME).read_bytes()
    used = f"{plan_why}, {data_why}"
    differences = tuple(compare_results(recorded, fresh))
    return ("differs" if differences else "identical"), used, differences
