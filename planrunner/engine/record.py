"""Recorders: the one place through which the engine's choices are written down.

Every stage calls :meth:`Recorder.decide` for each choice it makes, once per choice and for a
whole sub-batch at a time: ``members`` are the batch elements the choice concerns (global
element indices), and ``statistic``, ``p``, ``outcome`` and ``action`` are either one value for
all members or arrays aligned with ``members``. The plain-language ``reason`` is a callable
``reason(j) -> str`` for the ``j``-th member (or one string); only :class:`LogRecorder` calls it,
so a rehearsal of ten thousand replicates never formats a sentence.

* :class:`LogRecorder` (``planrunner run``) writes one decision record per member into a
  :class:`~planrunner.audit.log.DecisionLog`, naming the member's endpoint. Records are held
  until :meth:`LogRecorder.flush` and then written endpoint by endpoint, in the order the
  stages made them, so the log reads as one account per endpoint.
* :class:`CountingRecorder` (``planrunner rehearse``) counts ``(stage, outcome)`` pairs and
  warnings; it never formats text.
"""

from __future__ import annotations

import math
from collections import Counter
from typing import Any, Callable, Mapping, Protocol, Sequence, Union

import numpy as np

__all__ = ["CountingRecorder", "LogRecorder", "Recorder", "Reason"]

#: A reason: one sentence for every member, or a callable giving the sentence of member j.
Reason = Union[str, Callable[[int], str]]


class Recorder(Protocol):
    """What a stage needs to record its choices (see the module docstring)."""

    #: True when statistics that only explain a choice (not make it) are worth computing.
    detailed: bool

    def decide(
        self,
        *,
        stage: str,
        plan_ref: str,
        members: np.ndarray,
        outcome: Any,
        action: Any,
        reason: Reason,
        method: Any = None,
        statistic: Any = None,
        threshold: Any = None,
        p: Any = None,
        details: Callable[[int], Mapping[str, Any]] | None = None,
    ) -> None: ...

    def warn(
        self,
        *,
        stage: str,
        plan_ref: str | None,
        members: np.ndarray,
        message: Reason,
    ) -> None: ...

    def hypothesis_change(
        self,
        *,
        stage: str,
        plan_ref: str,
        members: np.ndarray,
        before: str,
        after: Any,
        reason: Reason,
    ) -> None: ...

    def flush(self) -> None: ...


def _pick(value: Any, j: int, n: int) -> Any:
    """Member j's value from a scalar or an array aligned with the members."""
    if value is None or isinstance(value, str):
        return value
    arr = np.asarray(value)
    if arr.ndim == 0:
        return arr.item()
    if arr.shape[0] != n:
        raise ValueError(f"a recorded array has {arr.shape[0]} entries for {n} members")
    return arr[j].item() if hasattr(arr[j], "item") else arr[j]


def _number(value: Any) -> float | None:
    """A finite float, or None (a log never holds NaN)."""
    if value is None:
        return None
    x = float(value)
    return x if math.isfinite(x) else None


def _text(value: Any) -> str:
    return value if isinstance(value, str) else str(value)


class LogRecorder:
    """Write every member's decision into a :class:`~planrunner.audit.log.DecisionLog`.

    Parameters
    ----------
    log : DecisionLog
        The run's log (its start record already written).
    endpoint_names : sequence of str
        The endpoint name of each global element index; a member's records carry it.
    """

    detailed = True

    def __init__(self, log: Any, endpoint_names: Sequence[str | None]) -> None:
        self.log = log
        self.endpoint_names = list(endpoint_names)
        self._pending: list[tuple[int, int, str, dict[str, Any]]] = []

    def _queue(self, element: int, kind: str, body: dict[str, Any]) -> None:
        self._pending.append((element, len(self._pending), kind, body))

    def decide(self, *, stage, plan_ref, members, outcome, action, reason, method=None,
               statistic=None, threshold=None, p=None, details=None) -> None:
        members = np.atleast_1d(np.asarray(members, dtype=np.int64))
        n = members.shape[0]
        for j in range(n):
            element = int(members[j])
            p_j = _number(_pick(p, j, n))
            if p_j is not None:
                p_j = min(max(p_j, 0.0), 1.0)
            body = {
                "stage": stage,
                "endpoint": self.endpoint_names[element],
                "plan_ref": plan_ref,
                "method": _pick(method, j, n),
                "statistic": _number(_pick(statistic, j, n)),
                "threshold": _number(_pick(threshold, j, n)),
                "p": p_j,
                "outcome": _text(_pick(outcome, j, n)),
                "action": _text(_pick(action, j, n)),
                "reason": reason if isinstance(reason, str) else reason(j),
                "details": None if details is None else dict(details(j)),
            }
            self._queue(element, "decision", body)

    def warn(self, *, stage, plan_ref, members, message) -> None:
        members = np.atleast_1d(np.asarray(members, dtype=np.int64))
        for j in range(members.shape[0]):
            element = int(members[j])
            self._queue(element, "warning", {
                "stage": stage,
                "endpoint": self.endpoint_names[element],
                "plan_ref": plan_ref,
                "message": message if isinstance(message, str) else message(j),
            })

    def hypothesis_change(self, *, stage, plan_ref, members, before, after, reason) -> None:
        members = np.atleast_1d(np.asarray(members, dtype=np.int64))
        n = members.shape[0]
        self.decide(
            stage=stage, plan_ref=plan_ref, members=members, outcome="hypothesis_changed",
            action=[f"compare {_text(_pick(after, j, n)).replace('_', ' ')}" for j in range(n)],
            reason=reason,
            details=lambda j: {"from": before, "to": _text(_pick(after, j, n))},
        )

    def flush(self) -> None:
        """Write the held records, element by element (the order they were made within each)."""
        pending = sorted(self._pending, key=lambda t: (t[0], t[1]))
        self._pending = []
        for _, _, kind, body in pending:
            if kind == "decision":
                self.log.decide(**body)
            else:
                self.log.warn(**body)


class CountingRecorder:
    """Count outcomes instead of writing them (for rehearsals over many replicates).

    ``outcomes[(stage, plan_ref, outcome)]`` is the number of elements that took that
    outcome; ``warnings[(stage, plan_ref)]`` the number of elements warned there.
    """

    detailed = False

    def __init__(self) -> None:
        self.outcomes: Counter[tuple[str, str, str]] = Counter()
        self.warnings: Counter[tuple[str, str | None]] = Counter()

    def decide(self, *, stage, plan_ref, members, outcome, action, reason, method=None,
               statistic=None, threshold=None, p=None, details=None) -> None:
        members = np.atleast_1d(np.asarray(members))
        if members.size == 0:
            return
        if isinstance(outcome, str) or np.ndim(outcome) == 0:
            self.outcomes[(stage, plan_ref, str(outcome))] += int(members.size)
            return
        values, counts = np.unique(np.asarray(outcome).astype(str), return_counts=True)
        for v, c in zip(values.tolist(), counts.tolist()):
            self.outcomes[(stage, plan_ref, v)] += int(c)

    def warn(self, *, stage, plan_ref, members, message) -> None:
        size = int(np.atleast_1d(np.asarray(members)).size)
        if size:
            self.warnings[(stage, plan_ref)] += size

    def hypothesis_change(self, *, stage, plan_ref, members, before, after, reason) -> None:
        self.decide(stage=stage, plan_ref=plan_ref, members=members,
                    outcome="hypothesis_changed", action="", reason="")

    def flush(self) -> None:
        return None

    def count(self, stage: str, outcome: str, plan_ref: str | None = None) -> int:
        """Elements with ``outcome`` at ``stage`` (summed over plan_refs unless one is given)."""
        return sum(c for (s, r, o), c in self.outcomes.items()
                   if s == stage and o == outcome and (plan_ref is None or r == plan_ref))
