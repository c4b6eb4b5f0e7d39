"""The decision log: one JSON object a line, each record chained to the one before by SHA-256.

A run's ``decisions.jsonl`` holds, in order:

* one ``start`` record: plan and data fingerprints, software versions, operator, UTC time,
  command line, git facts and the evidence that the plan predates the data;
* one ``decision`` record for every choice the engine makes (:meth:`DecisionLog.decide` is the
  only way the engine records one);
* ``deviation`` records (a declared departure from the locked plan) and ``warning`` records
  (something a careful statistician would point out) wherever they arise;
* one ``finish`` record: status, exit code, SHA-256 of ``results.json`` and record counts.

Every record has ``kind``, ``seq`` (its 0-based position: line ``n`` of the file holds
``seq == n - 1``), ``prev`` (the previous record's ``chain``; :data:`GENESIS` for the first)
and ``chain``, the SHA-256 (hex) of ``prev`` followed by the canonical JSON of the record
without its ``chain`` key. Every key of a kind is always present; unknown values are ``null``.

Canonical JSON (:func:`canonical_json`) sorts keys, uses compact separators, keeps non-ASCII
text as is, writes floats as their shortest round-trip ``repr`` and refuses NaN and infinity.
Each line of the file is the canonical JSON of its record, so the same records always give the
same bytes.

What the chain shows and what it cannot: any edit, insertion, deletion, reordering or
truncation of the file is found by :func:`verify_log`, and the first bad line is named. Someone
who rewrites a record *and recomputes every later chain value* produces a consistent file; to
rule that out, keep the final chain value (:attr:`VerifyReport.head`, printed when a run ends)
somewhere the log's editor cannot reach, such as a commit, a ticket or a lab notebook, and pass
it to :func:`verify_log` as ``expected_head``.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator, Mapping, Sequence

from .._files import atomic_write_bytes
from ..errors import PlanError, PlanrunnerError
from .._json import to_plain

__all__ = [
    "FINISH_STATUSES",
    "FORMAT",
    "GENESIS",
    "LOG_NAME",
    "AuditError",
    "Decision",
    "DecisionLog",
    "Problem",
    "VerifyReport",
    "canonical_json",
    "chain_value",
    "sha256_hex",
    "verify_log",
]

#: Format tag written in the start record.
FORMAT = "planrunner.decisions/1"
#: The ``prev`` value of the first record.
GENESIS = "0" * 64
#: The log's file name inside RUN_DIR.
LOG_NAME = "decisions.jsonl"
#: Allowed finish statuses and the exit code each implies (``failed``: any other non-zero code).
FINISH_STATUSES = ("completed", "halted", "failed")

_HEX64 = re.compile(r"^[0-9a-f]{64}$")
# A dotted path into the plan: keys, and list positions as numbers, e.g. "transform.ladder.2".
_PLAN_REF = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z0-9_]+)*$")
_UTC = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?Z$")


class AuditError(PlanrunnerError, ValueError):
    """A record cannot be written as given (a bug in the caller; exit 1).

    Raised for values the log refuses to hold (NaN, infinity, objects that are not JSON) and
    for records out of order (a decision before the start record, anything after finish).
    """


# --------------------------------------------------------------------------- canonical JSON


def _refuse(problem: str, where: str, value: Any) -> AuditError:
    if problem == "not_finite":
        return AuditError(
            f"{where} is {value!r}; the decision log holds finite numbers only. Record a "
            "value that cannot be computed as null and say why in the reason"
        )
    if problem == "key":
        return AuditError(f"{where} has a key {value!r} that is not a string")
    return AuditError(f"{where} is a {type(value).__name__}, which the decision log cannot hold")


def _plain(value: Any, where: str) -> Any:
    """Return ``value`` as plain JSON types; refuse NaN, infinity and unknown objects."""
    return to_plain(value, where, _refuse)


def canonical_json(value: Any) -> str:
    """Return the canonical JSON text of ``value`` (one line, no trailing newline).

    Keys sorted, separators ``,`` and ``:``, non-ASCII kept, floats as shortest round-trip
    ``repr``; tuples become lists, numpy scalars become Python numbers. NaN and infinity raise
    :class:`AuditError`, naming where they occur.
    """
    plain = _plain(value, "value")
    return json.dumps(plain, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def sha256_hex(data: bytes) -> str:
    """SHA-256 of ``data`` as 64 lowercase hex digits."""
    return hashlib.sha256(data).hexdigest()


def chain_value(prev: str, record_without_chain: Mapping[str, Any]) -> str:
    """The chain value of a record: SHA-256 of ``prev`` + canonical JSON (UTF-8)."""
    return sha256_hex((prev + canonical_json(record_without_chain)).encode("utf-8"))


# --------------------------------------------------------------------------- record shapes

_NUM = (int, float)
#: Keys and allowed Python types of each record kind (``None`` means JSON null is allowed).
#: Every key is always written. schemas/decisions.schema.json describes the same shapes; a
#: test keeps the two in step.
RECORD_FIELDS: dict[str, dict[str, tuple[type | None, ...]]] = {
    "start": {
        "format": (str,),
        "plan": (dict,),
        "data": (dict,),
        "time_utc": (str,),
        "operator": (dict,),
        "command": (list,),
        "software": (dict,),
        "numeric_build": (dict, None),
        "git": (dict, None),
        "plan_before_data": (dict, None),
        "lock": (dict, None),
    },
    "decision": {
        "stage": (str,),
        "endpoint": (str, None),
        "plan_ref": (str,),
        "method": (str, None),
        "statistic": (*_NUM, None),
        "threshold": (*_NUM, None),
        "p": (*_NUM, None),
        "outcome": (str,),
        "action": (str,),
        "reason": (str,),
        "details": (dict, None),
    },
    "deviation": {
        "reason": (str,),
        "differs": (str,),
        "plan_ref": (str, None),
        "details": (dict, None),
    },
    "warning": {
        "stage": (str,),
        "endpoint": (str, None),
        "plan_ref": (str, None),
        "message": (str,),
        "details": (dict, None),
    },
    "finish": {
        "status": (str,),
        "exit_code": (int,),
        "results_sha256": (str, None),
        "counts": (dict,),
        "reason": (str, None),
    },
}
_COMMON_FIELDS: dict[str, tuple[type | None, ...]] = {
    "kind": (str,),
    "seq": (int,),
    "prev": (str,),
    "chain": (str,),
}
_COUNT_KEYS = ("decisions", "deviations", "warnings")


def _type_ok(value: Any, allowed: tuple[type | None, ...]) -> bool:
    if value is None:
        return None in allowed
    if isinstance(value, bool):
        return bool in allowed
    return any(t is not None and isinstance(value, t) for t in allowed)


def _type_names(allowed: tuple[type | None, ...]) -> str:
    names = {str: "a string", int: "a number", float: "a number", dict: "an object",
             list: "a list", bool: "true or false", None: "null"}
    seen: list[str] = []
    for t in allowed:
        name = names[t]
        if name not in seen:
            seen.append(name)
    return " or ".join(seen)


def _shape_problems(record: Mapping[str, Any]) -> list[str]:
    """Plain sentences describing how ``record`` departs from its kind's shape."""
    kind = record.get("kind")
    if not isinstance(kind, str) or kind not in RECORD_FIELDS:
        allowed = ", ".join(RECORD_FIELDS)
        return [f"its kind {kind!r} is not one of {allowed}"]
    spec = {**_COMMON_FIELDS, **RECORD_FIELDS[kind]}
    problems = []
    missing = [k for k in spec if k not in record]
    if missing:
        problems.append(f"the {kind} record lacks {', '.join(repr(k) for k in missing)}")
    extra = sorted(k for k in record if k not in spec)
    if extra:
        problems.append(f"the {kind} record has unknown keys {', '.join(repr(k) for k in extra)}")
    for key, allowed in spec.items():
        if key in record and not _type_ok(record[key], allowed):
            problems.append(f"{key!r} should be {_type_names(allowed)}; got {record[key]!r}")
    for key in ("prev", "chain"):
        if isinstance(record.get(key), str) and not _HEX64.match(record[key]):
            problems.append(f"{key!r} is not 64 hex digits")
    if kind == "finish" and isinstance(record.get("status"), str) \
            and record["status"] not in FINISH_STATUSES:
        allowed = ", ".join(FINISH_STATUSES)
        problems.append(f"the finish status {record['status']!r} is not one of {allowed}")
    return problems


# --------------------------------------------------------------------------- records


@dataclass(frozen=True, slots=True, kw_only=True)
class Decision:
    """One ``decision`` record, as written to the log.

    ``plan_ref`` is the dotted path of the plan setting that governed the choice (for example
    ``variance_check.alpha`` or ``transform.ladder.2``); ``threshold`` is what the statistic
    or ``p`` was compared with (an alpha or a critical value); ``outcome`` says what was found
    and ``action`` what the engine does next; ``reason`` is the same in one plain sentence.
    """

    seq: int
    stage: str
    endpoint: str | None
    plan_ref: str
    method: str | None
    statistic: float | None
    threshold: float | None
    p: float | None
    outcome: str
    action: str
    reason: str
    details: dict[str, Any] | None = None
    prev: str = GENESIS
    chain: str = ""

    @classmethod
    def from_record(cls, record: Mapping[str, Any]) -> Decision:
        """Build a Decision from a parsed ``decision`` record."""
        if record.get("kind") != "decision":
            raise ValueError(f"not a decision record: kind {record.get('kind')!r}")
        names = cls.__dataclass_fields__  # type: ignore[attr-defined]
        return cls(**{k: record[k] for k in names if k in record})

    def to_record(self) -> dict[str, Any]:
        """The record as written, ``kind`` included."""
        out: dict[str, Any] = {"kind": "decision"}
        for name in self.__dataclass_fields__:  # type: ignore[attr-defined]
            out[name] = getattr(self, name)
        return out


def _nonempty(value: Any, what: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise AuditError(f"{what} must be a non-empty string; got {value!r}")
    return value


def _optional_str(value: Any, what: str) -> str | None:
    if value is None:
        return None
    return _nonempty(value, what)


def _plan_ref(value: Any, *, required: bool) -> str | None:
    if value is None and not required:
        return None
    if not isinstance(value, str) or not _PLAN_REF.match(value):
        raise AuditError(
            f"plan_ref must be a dotted path into the plan such as 'variance_check.alpha' or "
            f"'transform.ladder.2'; got {value!r}"
        )
    return value


def _number(value: Any, what: str) -> float | int | None:
    if value is None:
        return None
    plain = _plain(value, what)
    if isinstance(plain, bool) or not isinstance(plain, (int, float)):
        raise AuditError(f"{what} must be a number or None; got {value!r}")
    return plain


class DecisionLog:
    """Collect a run's records in order and write them, chained, as ``decisions.jsonl``.

    Parameters
    ----------
    path
        Where the log is written when :meth:`finish` is called, normally
        ``run_folder.file("decisions.jsonl")`` (the staging folder of a
        :class:`~planrunner._files.RunFolder`). ``None`` keeps the log in memory only.

    Notes
    -----
    Records are held in memory and the file is written once, atomically, by :meth:`finish`; a
    run that fails before finishing leaves no log file at all. The first record must be
    :meth:`start` and the last :meth:`finish`; anything else raises :class:`AuditError`.
    Records are stored as their canonical JSON lines; :attr:`records` returns fresh copies,
    so nothing a caller does to them can change what is written.
    """

    def __init__(self, path: str | os.PathLike[str] | None = None) -> None:
        self.path = Path(path) if path is not None else None
        self._lines: list[str] = []
        self._decisions: list[Decision] = []
        self._head = GENESIS
        self._counts = {k: 0 for k in _COUNT_KEYS}
        self._finished = False

    # -- state -----------------------------------------------------------------------

    @property
    def head(self) -> str:
        """The chain value of the last record (:data:`GENESIS` before any record)."""
        return self._head

    @property
    def finished(self) -> bool:
        """Whether the finish record has been written."""
        return self._finished

    @property
    def records(self) -> list[dict[str, Any]]:
        """All records so far, parsed afresh from their lines (changing them changes nothing)."""
        return [json.loads(line) for line in self._lines]

    def decisions(self, endpoint: str | None = None) -> Iterator[Decision]:
        """Iterate the decision records, all of them or those of one endpoint."""
        for decision in self._decisions:
            if endpoint is None or decision.endpoint == endpoint:
                yield decision

    def __len__(self) -> int:
        return len(self._lines)

    def to_bytes(self) -> bytes:
        """The log file's bytes: each record's canonical JSON and a newline."""
        return "".join(line + "\n" for line in self._lines).encode("utf-8")

    # -- appending -------------------------------------------------------------------

    def _append(self, kind: str, body: Mapping[str, Any]) -> dict[str, Any]:
        if self._finished:
            raise AuditError(f"cannot add a {kind} record: the log already has its finish record")
        if kind == "start" and self._lines:
            raise AuditError("the start record must be the first record and appear only once")
        if kind != "start" and not self._lines:
            raise AuditError(f"cannot add a {kind} record before the start record")
        record = _plain(dict(body), kind)
        record.update(kind=kind, seq=len(self._lines), prev=self._head)
        record["chain"] = chain_value(self._head, record)
        line = canonical_json(record)
        self._lines.append(line)
        self._head = record["chain"]
        return record

    def start(
        self,
        *,
        plan_file: str | os.PathLike[str],
        plan_sha256: str,
        plan_raw_sha256: str,
        data_file: str | os.PathLike[str],
        data_sha256: str,
        time_utc: str,
        operator: Mapping[str, Any],
        command: Sequence[str],
        software: Mapping[str, Any],
        plan_id: str | None = None,
        numeric_build: Mapping[str, Any] | None = None,
        git: Mapping[str, Any] | None = None,
        plan_before_data: Mapping[str, Any] | None = None,
        lock: Mapping[str, Any] | None = None,
    ) -> dict[str, Any]:
        """Write the start record; returns it.

        ``plan_sha256`` is the canonical fingerprint of the validated plan
        (``planrunner.plan.fingerprint``), ``plan_raw_sha256`` that of the plan file's bytes.
        :func:`planrunner.audit.provenance.start_facts` gathers every other argument.
        """
        for what, value in (("plan_sha256", plan_sha256), ("plan_raw_sha256", plan_raw_sha256),
                            ("data_sha256", data_sha256)):
            if not isinstance(value, str) or not _HEX64.match(value):
                raise AuditError(f"{what} must be 64 lowercase hex digits; got {value!r}")
        if not isinstance(time_utc, str) or not _UTC.match(time_utc):
            raise AuditError(f"time_utc must be ISO 8601 UTC ending in Z; got {time_utc!r}")
        if isinstance(command, str) or not all(isinstance(a, str) for a in command):
            raise AuditError("command must be a list of the command line's words")
        return self._append(
            "start",
            {
                "format": FORMAT,
                "plan": {
                    "file": os.fspath(plan_file),
                    "id": plan_id,
                    "sha256": plan_sha256,
                    "raw_sha256": plan_raw_sha256,
                },
                "data": {"file": os.fspath(data_file), "sha256": data_sha256},
                "time_utc": time_utc,
                "operator": dict(operator),
                "command": list(command),
                "software": dict(software),
                "numeric_build": None if numeric_build is None else dict(numeric_build),
                "git": None if git is None else dict(git),
                "plan_before_data": None if plan_before_data is None else dict(plan_before_data),
                "lock": None if lock is None else dict(lock),
            },
        )

    def decide(
        self,
        *,
        stage: str,
        plan_ref: str,
        outcome: str,
        action: str,
        reason: str,
        endpoint: str | None = None,
        method: str | None = None,
        statistic: float | None = None,
        threshold: float | None = None,
        p: float | None = None,
        details: Mapping[str, Any] | None = None,
    ) -> Decision:
        """Record one choice the engine made, and return it as a :class:`Decision`.

        This is the one function through which every choice is recorded. ``statistic``,
        ``threshold`` and ``p`` may be Python or numpy numbers, or ``None`` when they do not
        apply or could not be computed (say why in ``reason``); NaN and infinity are refused.
        """
        p_value = _number(p, "p")
        if p_value is not None and not 0.0 <= p_value <= 1.0:
            raise AuditError(f"p must lie between 0 and 1; got {p_value!r}")
        record = self._append(
            "decision",
            {
                "stage": _nonempty(stage, "stage"),
                "endpoint": _optional_str(endpoint, "endpoint"),
                "plan_ref": _plan_ref(plan_ref, required=True),
                "method": _optional_str(method, "method"),
                "statistic": _number(statistic, "statistic"),
                "threshold": _number(threshold, "threshold"),
                "p": p_value,
                "outcome": _nonempty(outcome, "outcome"),
                "action": _nonempty(action, "action"),
                "reason": _nonempty(reason, "reason"),
                "details": None if details is None else dict(details),
            },
        )
        self._counts["decisions"] += 1
        decision = Decision.from_record(record)
        self._decisions.append(decision)
        return decision

    def deviation(
        self,
        *,
        reason: str,
        differs: str,
        plan_ref: str | None = None,
        details: Mapping[str, Any] | None = None,
    ) -> dict[str, Any]:
        """Record a declared deviation from the locked plan: why, and what differs."""
        record = self._append(
            "deviation",
            {
                "reason": _nonempty(reason, "reason"),
                "differs": _nonempty(differs, "differs"),
                "plan_ref": _plan_ref(plan_ref, required=False),
                "details": None if details is None else dict(details),
            },
        )
        self._counts["deviations"] += 1
        return record

    def warn(
        self,
        *,
        stage: str,
        message: str,
        endpoint: str | None = None,
        plan_ref: str | None = None,
        details: Mapping[str, Any] | None = None,
    ) -> dict[str, Any]:
        """Record a warning a careful statistician would give (the run goes on)."""
        record = self._append(
            "warning",
            {
                "stage": _nonempty(stage, "stage"),
                "endpoint": _optional_str(endpoint, "endpoint"),
                "plan_ref": _plan_ref(plan_ref, required=False),
                "message": _nonempty(message, "message"),
                "details": None if details is None else dict(details),
            },
        )
        self._counts["warnings"] += 1
        return record

    def finish(
        self,
        *,
        status: str,
        exit_code: int,
        results_sha256: str | None = None,
        reason: str | None = None,
    ) -> dict[str, Any]:
        """Write the finish record and then the log file (atomically, if a path was given).

        ``status`` is ``completed`` (exit code 0, ``results_sha256`` required), ``halted``
        (exit code 4: the plan stopped itself by its own rule) or ``failed`` (any other
        non-zero code). ``results_sha256`` is the SHA-256 of the results.json bytes written
        (:func:`sha256_hex`), ``None`` if none were written. ``reason`` explains a halt or
        failure in one sentence.
        """
        if status not in FINISH_STATUSES:
            raise AuditError(f"status must be one of {', '.join(FINISH_STATUSES)}; got {status!r}")
        if not isinstance(exit_code, int) or isinstance(exit_code, bool):
            raise AuditError(f"exit_code must be an integer; got {exit_code!r}")
        expected = {"completed": 0, "halted": 4}.get(status)
        if expected is not None and exit_code != expected:
            raise AuditError(f"a {status} run exits with code {expected}; got {exit_code}")
        if status == "failed" and exit_code in (0, 4):
            raise AuditError(f"a failed run exits with a code other than 0 and 4; got {exit_code}")
        if results_sha256 is not None and (
            not isinstance(results_sha256, str) or not _HEX64.match(results_sha256)
        ):
            raise AuditError(
                f"results_sha256 must be 64 lowercase hex digits; got {results_sha256!r}"
            )
        if status == "completed" and results_sha256 is None:
            raise AuditError("a completed run must give the SHA-256 of its results.json")
        record = self._append(
            "finish",
            {
                "status": status,
                "exit_code": exit_code,
                "results_sha256": results_sha256,
                "counts": dict(self._counts),
                "reason": _optional_str(reason, "reason"),
            },
        )
        self._finished = True
        if self.path is not None:
            atomic_write_bytes(self.path, self.to_bytes())
        return record


# --------------------------------------------------------------------------- verification


@dataclass(frozen=True, slots=True)
class Problem:
    """One thing wrong with a log: the 1-based line it is on (None: the file as a whole)."""

    line: int | None
    message: str


@dataclass(frozen=True, slots=True, kw_only=True)
class VerifyReport:
    """What :func:`verify_log` found.

    ``ok`` is True when there are no problems. ``problems`` are sorted by line; the first
    is the first bad record. ``records`` counts the lines read, ``head`` is the chain value of
    the last line (compare it with a value kept elsewhere), ``status`` the finish record's
    status, and ``results_checked`` whether results.json was compared with the finish record.
    """

    log_path: str
    records: int
    head: str | None
    status: str | None
    results_checked: bool
    problems: tuple[Problem, ...] = field(default=())

    @property
    def ok(self) -> bool:
        return not self.problems

    @property
    def first_bad_line(self) -> int | None:
        """Line number of the first problem (None if there is none or it concerns the file)."""
        for problem in self.problems:
            if problem.line is not None:
                return problem.line
        return None

    @property
    def messages(self) -> list[str]:
        """The problems as plain sentences."""
        return [p.message for p in self.problems]

    def summary(self) -> str:
        """One sentence saying whether the log is intact."""
        if self.ok:
            results = " and results.json matches it" if self.results_checked else ""
            return (
                f"{self.log_path}: {self.records} records, the chain is intact{results}; "
                f"the run {self.status}. Final chain value {self.head}."
            )
        n = len(self.problems)
        plural = "s" if n != 1 else ""
        return f"{self.log_path}: {n} problem{plural}; first: {self.problems[0].message}"


def _reject_constant(name: str) -> Any:
    raise ValueError(f"non-finite number {name}")


def verify_log(
    path: str | os.PathLike[str],
    *,
    results: str | os.PathLike[str] | None = None,
    expected_head: str | None = None,
) -> VerifyReport:
    """Check a decision log's chain, order and completeness; never raises on a damaged file.

    Parameters
    ----------
    path
        A RUN_DIR (its ``decisions.jsonl`` is checked) or the log file itself.
    results
        The results.json to compare with the finish record's SHA-256. Defaults to
        ``results.json`` beside the log if it exists; when ``path`` is a RUN_DIR a missing
        results.json that the finish record names is a problem.
    expected_head
        A final chain value kept elsewhere; a log whose last chain value differs is reported.

    Returns
    -------
    VerifyReport
        With one :class:`Problem` per finding, line numbers counted from 1.

    Raises
    ------
    PlanError
        When ``path`` does not exist or the file cannot be read at all (the command was
        misused); damage inside the file is reported, never raised.
    """
    given = Path(path)
    is_run_dir = given.is_dir()
    log_path = given / LOG_NAME if is_run_dir else given
    if not log_path.is_file():
        where = f"{given} holds no {LOG_NAME}" if is_run_dir else f"{given} does not exist"
        raise PlanError(f"cannot verify: {where}")
    try:
        raw = log_path.read_bytes()
    except OSError as exc:
        raise PlanError(f"cannot read {log_path}: {exc.strerror or exc}") from exc

    problems: list[Problem] = []
    parts = raw.split(b"\n") if raw else []
    complete_last = raw.endswith(b"\n") or not raw
    if raw and complete_last:
        parts = parts[:-1]
    n_lines = len(parts)

    prev_chain: str | None = GENESIS  # None: the previous line could not be read
    prev_seq: int | None = -1
    kinds: list[str | None] = []
    finish: tuple[int, dict[str, Any]] | None = None
    counted = {k: 0 for k in _COUNT_KEYS}
    head: str | None = None

    for number, part in enumerate(parts, start=1):
        if number == n_lines and not complete_last:
            problems.append(Problem(number, f"line {number} is incomplete: the file ends in the "
                                            "middle of a record, so the log was cut off"))
            kinds.append(None)
            break
        record = _parse_line(part, number, problems)
        if record is None:
            kinds.append(None)
            prev_chain, prev_seq, head = None, None, None
            continue
        kind = record.get("kind")
        kinds.append(kind if isinstance(kind, str) else None)
        for sentence in _shape_problems(record):
            problems.append(Problem(number, f"line {number}: {sentence}"))
        seq, prev, chain = record.get("seq"), record.get("prev"), record.get("chain")

        if prev_seq is not None and isinstance(seq, int) and seq != prev_seq + 1:
            expected = prev_seq + 1
            problems.append(Problem(number, (
                f"line {number} has seq {seq} where {expected} was expected: a record was "
                "inserted, deleted or moved here")))
        if prev_chain is not None and isinstance(prev, str) and prev != prev_chain:
            before = "the start of the log" if number == 1 else f"line {number - 1}"
            problems.append(Problem(number, (
                f"line {number} does not follow {before}: its prev value is not the chain value "
                "before it, so a record was inserted, deleted or moved here")))
        if isinstance(chain, str):
            body = {k: v for k, v in record.items() if k != "chain"}
            try:
                recomputed = chain_value(prev if isinstance(prev, str) else "", body)
            except (AuditError, RecursionError):
                recomputed = None
            if recomputed != chain:
                problems.append(Problem(number, (
                    f"line {number} was changed after it was written: its chain value does not "
                    "match its contents")))
        try:
            canonical = canonical_json(record)
        except (AuditError, RecursionError):
            canonical = None
        if canonical is not None and part.decode("utf-8") != canonical:
            problems.append(Problem(number, (
                f"line {number} is not in the form planrunner writes (keys re-ordered, spaces "
                "added or a key repeated): it was re-encoded or edited")))

        if kind == "start" and number != 1:
            problems.append(Problem(number, f"line {number} is a second start record"))
        if number == 1 and kind != "start":
            problems.append(Problem(1, "line 1 is not the start record"))
        if finish is not None:
            problems.append(Problem(number, (
                f"line {number} comes after the finish record on line {finish[0]}")))
        if kind == "finish":
            finish = (number, record)
        elif kind == "decision":
            counted["decisions"] += 1
        elif kind == "deviation":
            counted["deviations"] += 1
        elif kind == "warning":
            counted["warnings"] += 1

        prev_chain = chain if isinstance(chain, str) else None
        prev_seq = seq if isinstance(seq, int) and not isinstance(seq, bool) else None
        head = prev_chain

    if n_lines == 0:
        problems.append(Problem(None, f"{log_path} is empty"))
    elif finish is None and complete_last:
        problems.append(Problem(n_lines + 1, (
            f"the log ends after line {n_lines} without a finish record: it was cut short, or "
            "the run did not finish")))

    results_checked = False
    status = None
    if finish is not None:
        finish_line, record = finish
        status = record.get("status") if isinstance(record.get("status"), str) else None
        problems.extend(_check_counts(finish_line, record, counted))
        results_path = Path(results) if results is not None else log_path.parent / "results.json"
        recorded = record.get("results_sha256")
        if results_path.is_file():
            results_checked = True
            actual = _file_sha256(results_path)
            if recorded is None:
                problems.append(Problem(finish_line, (
                    f"{results_path.name} exists, but the finish record on line {finish_line} "
                    "says the run wrote no results")))
            elif actual != recorded:
                problems.append(Problem(finish_line, (
                    f"{results_path.name} does not match the finish record on line "
                    f"{finish_line}: its SHA-256 is {actual}, the log recorded {recorded}")))
        elif recorded is not None and (is_run_dir or results is not None):
            problems.append(Problem(finish_line, (
                f"{results_path.name} is missing, but the finish record on line {finish_line} "
                f"names one with SHA-256 {recorded}")))

    if expected_head is not None and head != expected_head:
        problems.append(Problem(None, (
            f"the log's final chain value is {head}, not the {expected_head} kept for it: the "
            "log was rewritten or is not the one recorded")))

    problems.sort(key=lambda p: (p.line is None, p.line or 0))
    return VerifyReport(
        log_path=str(log_path),
        records=n_lines,
        head=head,
        status=status,
        results_checked=results_checked,
        problems=tuple(problems),
    )


def _parse_line(part: bytes, number: int, problems: list[Problem]) -> dict[str, Any] | None:
    try:
        text = part.decode("utf-8")
    except UnicodeDecodeError:
        problems.append(Problem(number, f"line {number} is not valid UTF-8 text"))
        return None
    if not text.strip():
        problems.append(Problem(number, f"line {number} is empty"))
        return None
    try:
        record = json.loads(text, parse_constant=_reject_constant)
    except ValueError as exc:
        if "non-finite" in str(exc):
            problems.append(Problem(number, f"line {number} holds NaN or Infinity, which a log "
                                            "never contains"))
        else:
            problems.append(Problem(number, f"line {number} is not valid JSON"))
        return None
    except RecursionError:
        problems.append(Problem(number, f"line {number} is not valid JSON (nested too deeply)"))
        return None
    if not isinstance(record, dict):
        problems.append(Problem(number, f"line {number} is not a JSON object"))
        return None
    return record


def _check_counts(
    line: int, record: Mapping[str, Any], counted: Mapping[str, int]
) -> list[Problem]:
    counts = record.get("counts")
    if not isinstance(counts, dict):
        return []
    out = []
    for key in _COUNT_KEYS:
        if counts.get(key) != counted[key]:
            out.append(Problem(line, (
                f"the finish record on line {line} counts {counts.get(key)!r} {key}, but the "
                f"log holds {counted[key]}")))
    return out


def _file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()
