"""What the stages share: the batch being analysed, its per-element state, and the outcome.

A :class:`Context` holds one *batch*: k groups, each an array shaped ``(b, n_i)`` (``b``
endpoints that share a complete-case pattern, or ``b`` simulated replicates). Every stage reads
it, calls :mod:`planrunner.stats` once per branch, writes per-element results into
:attr:`Context.out` (arrays whose first axis is the element) and records its choices through
the recorder. ``ids`` map the batch's elements to global element numbers, which the recorder
uses to name endpoints; a batch can split into several (when outliers are removed the group
sizes change), and :func:`merge_outcome` joins the pieces again.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

__all__ = [
    "ACTIVE",
    "HALTED",
    "REJECTED",
    "Analysis",
    "BatchOutcome",
    "CheckEntry",
    "Context",
    "merge_outcome",
]

#: Element status codes in ``out["status"]``.
ACTIVE, HALTED, REJECTED = 0, 1, 2
_STATUS_WORDS = np.array(["completed", "halted", "rejected"], dtype=object)

#: Per-element result fields and their fill values (object arrays hold text and lists).
_FLOAT_FIELDS = (
    "tshift", "tlambda", "base_shift", "base_lambda",
    "omni_stat", "omni_p", "omni_df1", "omni_df2", "ss_between", "ss_within", "ms_between",
    "ms_within", "r_squared", "residual_sd", "boxcox_lambda", "boxcox_low", "boxcox_high",
)
_OBJECT_FIELDS = (
    "halt_reason", "tname", "why", "base_name", "omni", "compared", "tried", "outliers",
    "cmp_method", "cmp_why", "conclusion", "sensitivity",
)


@dataclass(frozen=True, slots=True, kw_only=True)
class CheckEntry:
    """One assumption check made on a set of elements (arrays aligned with ``ids``)."""

    ids: np.ndarray
    when: str
    method: str
    role: str
    plan_ref: str
    scale: np.ndarray
    statistic: np.ndarray
    critical_value: np.ndarray | None
    pvalue: np.ndarray
    alpha: float
    passed: np.ndarray
    computable: np.ndarray
    reason: np.ndarray


@dataclass(eq=False)
class Context:
    """One batch on its way through the stages (mutable; stages update it in place).

    Attributes
    ----------
    plan : Plan
    ids : ndarray of int, (b,)
        Global element numbers.
    values : tuple of ndarray (b, n_i)
        Plain float64 values (used by transformations).
    centred : tuple of ndarray (b, n_i)
        Values with each element's exact offset removed (used on the original scale).
    offsets : ndarray of object, (b,)
        Each element's offset as decimal text (``"0"`` when none).
    rows : tuple of ndarray (b, n_i) of int
        File rows (or positions within the group, counted from 1, for simulated data).
    full : bool
        Also compute estimates that decide nothing (summaries, effect sizes,
        back-transformation, sensitivity analyses); ``run`` wants them, ``rehearse`` need not.
    detailed : bool
        Also compute numbers that only explain a choice (e.g. the p-value of Fmax).
    domain_problems : callable or None
        ``(element, domain, shift, transform) -> tuple of str``: the data layer's account of
        values outside a domain, for the records of a run.
    kept_values, kept_centred : tuple of ndarray or None
        The values before outliers were removed (for the ``outliers_kept`` analysis).
    analysis : tuple of ndarray (b, n_i)
        Values on each element's current analysis scale.
    base : tuple of ndarray (b, n_i)
        Values on the plan's primary scale before any data-driven move (the fallback scale).
    out : dict of ndarray
        Per-element results (first axis = element).
    checks : list of CheckEntry
    """

    plan: Any
    ids: np.ndarray
    values: tuple[np.ndarray, ...]
    centred: tuple[np.ndarray, ...]
    offsets: np.ndarray
    rows: tuple[np.ndarray, ...]
    full: bool = False
    detailed: bool = False
    domain_problems: Callable[[int, str, float, str], tuple[str, ...]] | None = None
    kept_values: tuple[np.ndarray, ...] | None = None
    kept_centred: tuple[np.ndarray, ...] | None = None
    analysis: tuple[np.ndarray, ...] = ()
    base: tuple[np.ndarray, ...] = ()
    out: dict[str, np.ndarray] = field(default_factory=dict)
    checks: list[CheckEntry] = field(default_factory=list)
    scratch: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        b = self.size
        if not self.out:
            self.out["status"] = np.zeros(b, dtype=np.int8)
            for name in _FLOAT_FIELDS:
                self.out[name] = np.full(b, np.nan)
            for name in _OBJECT_FIELDS:
                self.out[name] = np.full(b, None, dtype=object)
            self.out["tname"][:] = "identity"
            self.out["base_name"][:] = "identity"
            self.out["tshift"][:] = 0.0
            self.out["base_shift"][:] = 0.0
            self.out["omni"][:] = ""
            self.out["significant"] = np.zeros(b, dtype=bool)
            self.out["gate_failed"] = np.zeros(b, dtype=bool)
            self.out["variance_failed"] = np.zeros(b, dtype=bool)
            self.out["normality_failed"] = np.zeros(b, dtype=bool)
            self.out["cmp_performed"] = np.zeros(b, dtype=bool)
            self.out["ranks"] = np.zeros(b, dtype=bool)
        if not self.analysis:
            self.analysis = tuple(np.array(c, dtype=np.float64) for c in self.centred)
        if not self.base:
            self.base = tuple(np.array(c, dtype=np.float64) for c in self.centred)

    @property
    def size(self) -> int:
        return int(self.ids.shape[0])

    @property
    def k(self) -> int:
        return len(self.values)

    @property
    def n(self) -> tuple[int, ...]:
        return tuple(int(v.shape[-1]) for v in self.values)

    @property
    def status(self) -> np.ndarray:
        return self.out["status"]

    def active(self) -> np.ndarray:
        """Local indices of the elements still running."""
        return np.flatnonzero(self.out["status"] == ACTIVE)

    def stop(self, local: np.ndarray, status: int, reasons: Any) -> None:
        """Mark elements halted or rejected, with a reason each (a string or a sequence)."""
        local = np.asarray(local, dtype=np.int64)
        self.out["status"][local] = status
        if isinstance(reasons, str):
            self.out["halt_reason"][local] = reasons
        else:
            for j, i in enumerate(local.tolist()):
                self.out["halt_reason"][i] = reasons[j]

    def take(self, arrays: tuple[np.ndarray, ...], local: np.ndarray) -> tuple[np.ndarray, ...]:
        """The sub-batch ``local`` of k group arrays."""
        return tuple(a[local] for a in arrays)

    def set_analysis(self, local: np.ndarray, arrays: tuple[np.ndarray, ...]) -> None:
        for target, source in zip(self.analysis, arrays):
            target[local] = source

    def set_base(self, local: np.ndarray, arrays: tuple[np.ndarray, ...]) -> None:
        for target, source in zip(self.base, arrays):
            target[local] = source


@dataclass(frozen=True, slots=True, kw_only=True)
class BatchOutcome:
    """What the decision tree did with every element of a batch (arrays over the elements).

    Attributes
    ----------
    status : ndarray of str
        ``completed``, ``halted`` (the plan stopped by its own rule) or ``rejected`` (the
        plan's data rule refused the element).
    scale : ndarray of str
        Final analysis scale: ``identity``, a transformation name, ``boxcox`` or ``ranks``.
    omnibus : ndarray of str
        The omnibus test used (empty where halted).
    compared : ndarray of str
        What the conclusion is about: ``means``, ``geometric_means`` or ``locations`` (empty
        where the element did not complete).
    path : ndarray of int
        Index into ``path_labels`` (``"log10 / classic"``, ``"identity / welch"``,
        ``"halted"``, ...): the route an element took, for counting.
    omnibus_statistic, omnibus_pvalue : ndarray of float (NaN where not tested)
    omnibus_rejected : ndarray of bool
    pairs : tuple of (int, int)
        The pairs of the planned comparisons (indices in level order).
    comparisons_performed : ndarray of bool
    comparison_pvalues : ndarray (B, n_pairs)
        Adjusted p-values; NaN where not performed. Without a detailed record (a rehearsal)
        the quadrature methods decide by critical values, so their p-values are NaN except
        next to the critical value.
    comparison_rejected : ndarray of bool (B, n_pairs)
    results : dict of ndarray
        Every per-element field the stages wrote (first axis = element).
    checks : tuple of CheckEntry
    """

    status: np.ndarray
    scale: np.ndarray
    omnibus: np.ndarray
    compared: np.ndarray
    path: np.ndarray
    path_labels: tuple[str, ...]
    omnibus_statistic: np.ndarray
    omnibus_pvalue: np.ndarray
    omnibus_rejected: np.ndarray
    pairs: tuple[tuple[int, int], ...]
    comparisons_performed: np.ndarray
    comparison_pvalues: np.ndarray
    comparison_rejected: np.ndarray
    results: dict[str, np.ndarray]
    checks: tuple[CheckEntry, ...]

    def path_counts(self) -> dict[str, int]:
        """How many elements took each path."""
        counts = np.bincount(self.path, minlength=len(self.path_labels))
        return {label: int(c) for label, c in zip(self.path_labels, counts.tolist())}


@dataclass(frozen=True, slots=True, kw_only=True)
class Analysis:
    """The engine's answer for a run: one JSON-ready dict per endpoint, in the plan's order."""

    endpoints: list[dict[str, Any]]
    across_endpoints: dict[str, Any] | None
    status: str
    halted_endpoints: list[str]


def merge_outcome(parts: list[Context], size: int, pairs: tuple[tuple[int, int], ...]
                  ) -> BatchOutcome:
    """Join the per-element results of the pieces of a batch into one :class:`BatchOutcome`."""
    results: dict[str, np.ndarray] = {}
    keys: list[str] = []
    for part in parts:
        for key in part.out:
            if key not in keys:
                keys.append(key)
    for key in keys:
        sample = next(p.out[key] for p in parts if key in p.out)
        dtype = object if sample.dtype.kind in "OUS" else sample.dtype
        if sample.dtype.kind == "f":
            fill: Any = np.nan
        elif sample.dtype.kind == "b":
            fill = False
        elif dtype is object:
            fill = None
        else:
            fill = 0
        target = np.full((size,) + sample.shape[1:], fill, dtype=dtype)
        for part in parts:
            if key in part.out:
                target[part.ids] = part.out[key]
        results[key] = target
    checks = tuple(c for p in parts for c in p.checks)

    status = _STATUS_WORDS[results["status"].astype(np.int64)].astype(str)
    scale = np.where(results["ranks"], "ranks", results["tname"].astype(str))
    omnibus = results["omni"].astype(str)
    combined = np.where(status == "completed", np.char.add(np.char.add(scale, " / "), omnibus),
                        status)
    labels, path = np.unique(combined, return_inverse=True)
    n_pairs = len(pairs)
    cp = results.get("cmp_p", np.full((size, n_pairs), np.nan))
    performed = results["cmp_performed"]
    return BatchOutcome(
        status=status,
        scale=scale,
        omnibus=omnibus,
        compared=np.where(status == "completed",
                          np.array([str(c) if c is not None else "" for c in
                                    results["compared"].tolist()], dtype=object), "").astype(str),
        path=path.astype(np.int64).reshape(size),
        path_labels=tuple(str(x) for x in labels.tolist()),
        omnibus_statistic=results["omni_stat"],
        omnibus_pvalue=results["omni_p"],
        omnibus_rejected=results["significant"] & (status == "completed"),
        pairs=pairs,
        comparisons_performed=performed,
        comparison_pvalues=cp,
        comparison_rejected=results.get("cmp_sig", np.zeros((size, n_pairs), dtype=bool)),
        results=results,
        checks=checks,
    )
