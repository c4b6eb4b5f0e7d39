"""Rehearsal: the plan's whole decision tree on simulated data, before any data exist.

For every scenario of the plan's ``rehearsal`` section, :func:`rehearse_plan` simulates
``replicates`` data sets (k groups shaped ``(R, n_i)``) and sends them, a chunk at a time,
through :func:`planrunner.engine.run.decide_batch` with a
:class:`~planrunner.engine.record.CountingRecorder`: the very stages ``planrunner run`` uses,
counted instead of logged. There is no second implementation of the decision tree here; this
module only draws data, counts what the engine did and estimates rates with their Monte Carlo
standard errors ``sqrt(p (1 - p) / R)``.

What is measured per scenario
-----------------------------
* the probability of each path the engine reports (``identity / classic``, ``log10 / welch``,
  ``ranks / kruskal_wallis``, ``halted``, ...), and of every counted decision;
* the omnibus rejection rate: the type-I error when all means are equal, the power otherwise;
* the follow-up comparisons: the probability that any comparison is significant (the
  family-wise error rate when all means are equal), the rejection rate of every pair, and the
  family-wise error rate among the pairs whose true means are equal;
* flags: a rate that should be at most alpha and exceeds it by more than two standard errors.

Random numbers
--------------
Every (scenario, group, block of :data:`BLOCK` replicates) has its own stream,
``SeedSequence(seed, spawn_key=(scenario key, group, block))`` with the scenario key taken from
the SHA-256 of the scenario's name. Adding, removing or editing one scenario leaves the others'
data unchanged, and the chunk size used for processing changes nothing. A block is drawn as
``(n_i, BLOCK)`` and transposed, so the data for ``n`` values per group are the first ``n`` of
the data for any larger ``n``: the sample-size search compares group sizes on common random
numbers.

Sample size
-----------
:func:`search_sample_size` finds the smallest multiplier ``m`` of the scenario's allocation
(``n_i = m * a_i``; with a common n the allocation is all ones and ``m`` is n) whose simulated
omnibus power reaches the target: doubling from the smallest usable ``m`` until the target is
reached, then bisection. With no preliminary test and a normal scenario of common sd it reports
the analytic power of the classic F test beside it (:func:`planrunner.stats.power.anova_power`).
"""

from __future__ import annotations

import hashlib
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from ..errors import PlanError
from .record import CountingRecorder
from .run import decide_batch

__all__ = [
    "BLOCK",
    "DEFAULT_CHUNK",
    "REHEARSAL_FORMAT",
    "RehearsalOutcome",
    "default_rehearsal_dir",
    "rehearse_plan",
    "rehearse_scenario",
    "scenario_key",
    "search_sample_size",
    "simulate",
]

#: Format tag of rehearsal.json.
REHEARSAL_FORMAT = "planrunner.rehearsal/1"
#: Replicates per random-number stream (part of the format: changing it changes the data).
BLOCK = 500
#: Replicates sent through the engine at once (a multiple of BLOCK; results do not depend on it).
DEFAULT_CHUNK = 2000
#: At most this many simulated values per group array in one chunk (keeps memory bounded).
_CHUNK_VALUES = 1_000_000
#: The sample-size search stops at this many values per group.
MAX_SEARCH_N = 1000
#: Rates that should not exceed alpha are flagged above alpha + FLAG_SE standard errors.
FLAG_SE = 2.0

#: Order of the engine's stages in tables (the names the stages record under).
_STAGE_ORDER = ("outliers", "describe", "check_assumptions", "transform",
                "when_variances_differ", "final_checks", "omnibus", "follow_ups",
                "effect_sizes", "back_transform", "sensitivity", "conclude")

_SPREAD = {"normal": "sd", "lognormal": "cv", "gamma": "cv", "poisson": None,
           "negative_binomial": "dispersion", "binomial": "trials"}

Progress = Callable[[int, int], None]


# --------------------------------------------------------------------------------------------
# simulation


def scenario_key(name: str) -> int:
    """The 64-bit stream key of a scenario: the first 8 bytes of SHA-256 of its name."""
    return int.from_bytes(hashlib.sha256(name.encode("utf-8")).digest()[:8], "big")


def _per_level(value: Any, k: int) -> list[float]:
    if isinstance(value, (list, tuple)):
        return [float(v) for v in value]
    return [float(value)] * k


def _sizes(scenario: Any, k: int) -> tuple[int, ...]:
    return tuple(int(v) for v in _per_level(scenario.n, k))


def _draw(scenario: Any, i: int, rng: np.random.Generator, shape: tuple[int, int]) -> np.ndarray:
    """Values of group ``i`` drawn in the order of ``shape`` (values per group first)."""
    k = len(scenario.means)
    mean = float(scenario.means[i])
    dist = scenario.distribution
    if dist == "normal":
        return rng.normal(mean, _per_level(scenario.sd, k)[i], size=shape)
    if dist == "lognormal":
        cv = _per_level(scenario.cv, k)[i]
        # Lognormal with arithmetic mean m and coefficient of variation cv:
        # sigma^2 = log(1 + cv^2), mu = log(m) - sigma^2 / 2 (Johnson, Kotz & Balakrishnan
        # 1994, ch. 14: E X = exp(mu + sigma^2/2), CV^2 = exp(sigma^2) - 1).
        s2 = math.log1p(cv * cv)
        return rng.lognormal(math.log(mean) - s2 / 2.0, math.sqrt(s2), size=shape)
    if dist == "gamma":
        cv = _per_level(scenario.cv, k)[i]
        # Gamma(shape a, scale b): mean a b, CV 1/sqrt(a) -> a = 1/cv^2, b = mean cv^2.
        return rng.gamma(1.0 / (cv * cv), mean * cv * cv, size=shape)
    if dist == "poisson":
        return rng.poisson(mean, size=shape).astype(np.float64)
    if dist == "negative_binomial":
        d = _per_level(scenario.dispersion, k)[i]
        # Variance mean + d mean^2: numpy's negative_binomial(n = 1/d, p = n / (n + mean))
        # has mean n (1 - p) / p = mean and variance mean / p = mean + mean^2 / n.
        size_n = 1.0 / d
        return rng.negative_binomial(size_n, size_n / (size_n + mean),
                                     size=shape).astype(np.float64)
    if dist == "binomial":
        trials = int(_per_level(scenario.trials, k)[i])
        return rng.binomial(trials, mean, size=shape) / float(trials)
    raise ValueError(f"unknown scenario distribution {dist!r}")  # pragma: no cover - model


def simulate(scenario: Any, seed: int, start: int, stop: int,
             n: Sequence[int] | None = None) -> tuple[np.ndarray, ...]:
    """Replicates ``start .. stop - 1`` of ``scenario``: k arrays shaped ``(stop - start, n_i)``.

    ``n`` replaces the scenario's group sizes (the sample-size search); the first ``n_i``
    values of a replicate do not depend on ``n_i``.
    """
    k = len(scenario.means)
    sizes = tuple(int(v) for v in (n if n is not None else _sizes(scenario, k)))
    key = scenario_key(scenario.name)
    first, last = start // BLOCK, (stop - 1) // BLOCK
    out = []
    for i in range(k):
        pieces = []
        for b in range(first, last + 1):
            rng = np.random.Generator(np.random.PCG64(
                np.random.SeedSequence(int(seed), spawn_key=(key, i, b))))
            block = _draw(scenario, i, rng, (sizes[i], BLOCK)).T
            lo = max(start - b * BLOCK, 0)
            hi = min(stop - b * BLOCK, BLOCK)
            pieces.append(block[lo:hi])
        out.append(np.ascontiguousarray(np.concatenate(pieces, axis=0)))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# counting what the engine did


def _rate(count: int, total: int) -> dict[str, Any]:
    p = count / total if total else 0.0
    return {"count": int(count), "rate": p, "se": math.sqrt(p * (1.0 - p) / total) if total
            else 0.0}


@dataclass
class _Tally:
    """Counts over the chunks of one scenario (plain integers: chunking cannot change them)."""

    pairs: tuple[tuple[int, int], ...] = ()
    total: int = 0
    status: dict[str, int] = field(default_factory=dict)
    paths: dict[str, int] = field(default_factory=dict)
    compared: dict[str, int] = field(default_factory=dict)
    omnibus: int = 0
    any_pair: int = 0
    any_null_pair: int = 0
    pair_counts: np.ndarray | None = None
    performed: int = 0
    recorder: CountingRecorder = field(default_factory=CountingRecorder)

    def add(self, outcome: Any, null_pairs: np.ndarray) -> None:
        b = int(outcome.status.shape[0])
        self.total += b
        self.pairs = tuple(outcome.pairs)
        for word, c in zip(*np.unique(outcome.status, return_counts=True)):
            self.status[str(word)] = self.status.get(str(word), 0) + int(c)
        for label, c in outcome.path_counts().items():
            if c:
                self.paths[label] = self.paths.get(label, 0) + c
        for word, c in zip(*np.unique(outcome.compared, return_counts=True)):
            if word:                                   # "" where the element did not complete
                self.compared[str(word)] = self.compared.get(str(word), 0) + int(c)
        self.omnibus += int(np.count_nonzero(outcome.omnibus_rejected))
        rej = np.asarray(outcome.comparison_rejected, dtype=bool).reshape(b, len(self.pairs))
        counts = rej.sum(axis=0).astype(np.int64)
        self.pair_counts = counts if self.pair_counts is None else self.pair_counts + counts
        if rej.shape[1]:
            self.any_pair += int(np.count_nonzero(rej.any(axis=1)))
            if null_pairs.any():
                self.any_null_pair += int(np.count_nonzero(rej[:, null_pairs].any(axis=1)))
        self.performed += int(np.count_nonzero(outcome.comparisons_performed))


def _null_pairs(scenario: Any, pairs: Sequence[tuple[int, int]]) -> np.ndarray:
    m = [float(x) for x in scenario.means]
    return np.array([m[a] == m[b] for a, b in pairs], dtype=bool)


def _chunk_for(sizes: Sequence[int], chunk: int) -> int:
    """Replicates per engine call: ``chunk`` rounded to whole blocks, bounded in memory."""
    widest = max(int(s) for s in sizes)
    cap = max(BLOCK, (_CHUNK_VALUES // max(widest, 1)) // BLOCK * BLOCK)
    c = max(1, int(chunk))
    if c >= BLOCK:
        c = c // BLOCK * BLOCK
    return min(c, cap)


def _run_replicates(plan: Any, scenario: Any, seed: int, replicates: int, *,
                    n: Sequence[int] | None = None, chunk: int = DEFAULT_CHUNK,
                    tick: Callable[[int], None] | None = None) -> _Tally:
    """Send ``replicates`` simulated data sets through the engine, a chunk at a time."""
    k = len(plan.data.levels)
    sizes = tuple(n) if n is not None else _sizes(scenario, k)
    step = _chunk_for(sizes, chunk)
    tally = _Tally()
    null_pairs: np.ndarray | None = None
    for start in range(0, replicates, step):
        stop = min(start + step, replicates)
        groups = simulate(scenario, seed, start, stop, sizes)
        outcome = decide_batch(plan, groups, tally.recorder)
        if null_pairs is None:
            null_pairs = _null_pairs(scenario, outcome.pairs)
        tally.add(outcome, null_pairs)
        if tick is not None:
            tick(stop - start)
    return tally


# --------------------------------------------------------------------------------------------
# what a scenario's numbers mean


def _is_null(scenario: Any) -> bool:
    return len({float(m) for m in scenario.means}) == 1


def _parameters(scenario: Any) -> dict[str, Any]:
    out: dict[str, Any] = {"means": [float(m) for m in scenario.means], "n": scenario.n}
    key = _SPREAD[scenario.distribution]
    if key is not None:
        out[key] = getattr(scenario, key)
    return out


def _scenario_notes(plan: Any, scenario: Any) -> list[str]:
    notes = []
    dist = scenario.distribution
    k = len(scenario.means)
    if _is_null(scenario):
        spread = _SPREAD[dist]
        uneven = spread is not None and len(set(_per_level(getattr(scenario, spread), k))) > 1
        if dist in ("lognormal", "gamma") and uneven:
            notes.append(
                "The arithmetic means are equal while the coefficients of variation differ: "
                "this is still a null of equal means, so a rejection is a type-I error, but "
                "geometric means and medians differ between the groups; a path on the log "
                "scale or on ranks then tests a hypothesis that is false here.")
        elif dist == "negative_binomial" and uneven:
            notes.append(
                "The means are equal while the dispersions differ: still a null of equal "
                "means, but medians and geometric means differ between the groups.")
        elif dist == "binomial" and uneven:
            notes.append("The success probabilities are equal; only the numbers of trials "
                         "differ, so this is a null of equal mean proportions.")
        if dist in ("lognormal", "gamma") and not uneven:
            notes.append("Equal means with a common coefficient of variation: means, geometric "
                         "means and medians are all equal, so every path tests a true null.")
    if len(plan.data.endpoints) > 1:
        notes.append(
            f"The plan has {len(plan.data.endpoints)} endpoints; each is rehearsed alone, and "
            "the adjustment across endpoints is not simulated.")
    return notes


def _classic_only(plan: Any) -> str | None:
    """Why the classic-F formula does not describe the plan (None when it does)."""
    if plan.gates:
        return "the plan chooses its test after a preliminary check"
    if plan.transform.policy != "none":
        return f"the plan's transform policy is {plan.transform.policy}"
    if plan.outliers.action == "remove":
        return "the plan removes outliers"
    if plan.omnibus == "kruskal_wallis":
        return "the plan's omnibus test is kruskal_wallis"
    return None


def _common_sd(scenario: Any) -> float | None:
    if scenario.distribution != "normal":
        return None
    sds = _per_level(scenario.sd, len(scenario.means))
    return sds[0] if len(set(sds)) == 1 else None


def _analytic(plan: Any, scenario: Any, n: Sequence[int]) -> dict[str, Any] | None:
    """Power of the classic one-way F from the noncentral F, when it describes the plan."""
    sd = _common_sd(scenario)
    if sd is None or _classic_only(plan) is not None:
        return None
    from ..stats.power import anova_power

    res = anova_power(means=[float(m) for m in scenario.means], sd=sd, n=list(n),
                      alpha=plan.alpha)
    exact = plan.omnibus == "classic"
    return {
        "method": "noncentral F power of the classic one-way F test",
        "power": float(res.power),
        "noncentrality": float(res.noncentrality),
        "effect_size_f": float(res.effect_size_f),
        "counterpart": "exact" if exact else "approximate",
        "note": None if exact else (
            "the plan's omnibus test is Welch's; the classic F is its equal-variance "
            "counterpart, so the two powers are close but not the same"),
    }


def _flag(what: str, r: dict[str, Any], alpha: float) -> str | None:
    if r["rate"] > alpha + FLAG_SE * r["se"]:
        return (f"{what} {r['rate']:.4f} exceeds alpha = {alpha:g} by more than "
                f"{FLAG_SE:g} Monte Carlo standard errors (SE {r['se']:.4f}).")
    return None


def _stage_rank(stage: str) -> tuple[int, str]:
    try:
        return (_STAGE_ORDER.index(stage), stage)
    except ValueError:
        return (len(_STAGE_ORDER), stage)


def _scenario_result(plan: Any, scenario: Any, tally: _Tally) -> dict[str, Any]:
    total = tally.total
    alpha = float(plan.alpha)
    levels = [str(x) for x in plan.data.levels]
    null = _is_null(scenario)
    n = _sizes(scenario, len(levels))
    omnibus = _rate(tally.omnibus, total)
    omnibus["measures"] = "type_i_error" if null else "power"
    means = [float(m) for m in scenario.means]
    null_pairs = _null_pairs(scenario, tally.pairs)
    pair_counts = tally.pair_counts if tally.pair_counts is not None else np.zeros(0, int)
    pairs = []
    for q, (a, b) in enumerate(tally.pairs):
        item = _rate(int(pair_counts[q]), total)
        item.update({"a": levels[a], "b": levels[b], "true_difference": means[a] - means[b],
                     "truly_null": bool(null_pairs[q]),
                     "measures": "type_i_error" if null_pairs[q] else "power"})
        pairs.append(item)
    follow = None
    if plan.comparisons.method != "none":
        follow = {
            "method": plan.comparisons.method,
            "performed": _rate(tally.performed, total),
            "any_significant": _rate(tally.any_pair, total),
            "truly_null_pairs": int(null_pairs.sum()),
            "familywise_error_truly_null": (_rate(tally.any_null_pair, total)
                                            if null_pairs.any() else None),
            "pairs": pairs,
        }
    flags = []
    if null:
        f = _flag("The omnibus type-I error", omnibus, alpha)
        if f:
            flags.append(f)
    if follow is not None and follow["familywise_error_truly_null"] is not None:
        what = ("The family-wise error rate of the comparisons" if null else
                "The family-wise error rate among the truly null pairs")
        f = _flag(what, follow["familywise_error_truly_null"], alpha)
        if f:
            flags.append(f)
    paths = [dict(label=label, **_rate(c, total))
             for label, c in sorted(tally.paths.items(), key=lambda kv: (-kv[1], kv[0]))]
    decisions = [
        dict(stage=s, plan_ref=r, outcome=o, **_rate(c, total))
        for (s, r, o), c in sorted(tally.recorder.outcomes.items(),
                                   key=lambda kv: (_stage_rank(kv[0][0]), kv[0][1], kv[0][2]))
    ]
    warnings = [
        dict(stage=s, plan_ref=r, **_rate(c, total))
        for (s, r), c in sorted(tally.recorder.warnings.items(),
                                key=lambda kv: (_stage_rank(kv[0][0]), kv[0][1] or ""))
    ]
    degenerate = tally.recorder.count("describe", "degenerate")
    return {
        "name": scenario.name,
        "distribution": scenario.distribution,
        "parameters": _parameters(scenario),
        "n": list(n),
        "null": null,
        "replicates": total,
        "status": {w: _rate(tally.status.get(w, 0), total)
                   for w in ("completed", "halted", "rejected")},
        "degenerate": _rate(degenerate, total),
        "paths": paths,
        "compared": {w: _rate(c, total) for w, c in sorted(tally.compared.items())},
        "omnibus": omnibus,
        "follow_ups": follow,
        "analytic": _analytic(plan, scenario, n),
        "flags": flags,
        "notes": _scenario_notes(plan, scenario),
        "decisions": decisions,
        "warnings": warnings,
    }


def rehearse_scenario(plan: Any, scenario: Any, *, seed: int, replicates: int,
                      chunk: int = DEFAULT_CHUNK,
                      tick: Callable[[int], None] | None = None) -> dict[str, Any]:
    """One scenario's JSON-ready result (see :func:`rehearse_plan`)."""
    tally = _run_replicates(plan, scenario, seed, replicates, chunk=chunk, tick=tick)
    return _scenario_result(plan, scenario, tally)


# --------------------------------------------------------------------------------------------
# sample size


def _allocation(scenario: Any, k: int) -> tuple[tuple[int, ...], int]:
    """(allocation, multiplier) with ``n_i = multiplier * allocation_i`` for the scenario."""
    sizes = _sizes(scenario, k)
    if not isinstance(scenario.n, (list, tuple)):
        return (1,) * k, sizes[0]
    g = 0
    for s in sizes:
        g = math.gcd(g, s)
    return tuple(s // g for s in sizes), g


def search_sample_size(plan: Any, scenario: Any, target_power: float, *, seed: int,
                       replicates: int, chunk: int = DEFAULT_CHUNK,
                       max_n: int = MAX_SEARCH_N,
                       tick: Callable[[int], None] | None = None) -> dict[str, Any]:
    """Smallest multiplier of the scenario's allocation whose simulated power reaches the target.

    Power is the omnibus rejection rate of the whole plan (every check and branch included),
    estimated on common random numbers across group sizes. The search doubles the multiplier
    from the smallest usable one until the target is reached (or ``max_n`` values per group
    would be exceeded), then bisects. Because simulated power is an estimate, it need not rise
    strictly with n; the answer is a multiplier reaching the target whose predecessor, when
    evaluated, did not.
    """
    k = len(plan.data.levels)
    alloc, current = _allocation(scenario, k)
    floor = max(2, int(plan.data.min_n))
    m_low = max(1, -(-floor // min(alloc)))
    m_cap = max(m_low, max_n // max(alloc))
    seen: dict[int, dict[str, Any]] = {}

    def power(m: int) -> float:
        if m not in seen:
            n = tuple(m * a for a in alloc)
            t = _run_replicates(plan, scenario, seed, replicates, n=n, chunk=chunk, tick=tick)
            item = {"multiplier": m, "n": list(n), **_rate(t.omnibus, t.total)}
            ana = _analytic(plan, scenario, n)
            item["analytic_power"] = None if ana is None else ana["power"]
            seen[m] = item
        return seen[m]["rate"]

    found: int | None = None
    last_fail: int | None = None
    m = m_low
    while True:
        if power(m) >= target_power:
            found = m
            break
        last_fail = m
        if m >= m_cap:
            break
        m = min(2 * m, m_cap)
    if found is not None and last_fail is not None:
        lo, hi = last_fail, found
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if power(mid) >= target_power:
                hi = mid
            else:
                lo = mid
        found = hi

    analytic = None
    sd = _common_sd(scenario)
    why_not = _classic_only(plan)
    if sd is not None and why_not is None:
        from ..stats.power import anova_sample_size

        a = anova_sample_size(means=[float(x) for x in scenario.means], sd=sd, k=k,
                              alpha=plan.alpha, target_power=target_power,
                              allocation=list(alloc))
        analytic = {"method": "noncentral F sample size of the classic one-way F test",
                    "multiplier": int(a.multiplier), "n": [int(x) for x in a.n],
                    "power": float(a.power), "effect_size_f": float(a.effect_size_f),
                    "counterpart": "exact" if plan.omnibus == "classic" else "approximate"}
    elif sd is None:
        data_reason = (f"the scenario is {scenario.distribution}"
                       if scenario.distribution != "normal"
                       else "the scenario's standard deviations differ")
        why_not = data_reason if why_not is None else f"{why_not}; {data_reason}"
    result = {
        "scenario": scenario.name,
        "target_power": float(target_power),
        "measure": "omnibus rejection rate",
        "allocation": list(alloc),
        "planned_multiplier": current,
        "search": {"from": m_low, "max_n_per_group": int(max_n), "method":
                   "doubling, then bisection, on common random numbers"},
        "reached": found is not None,
        "multiplier": found,
        "n": None if found is None else [found * a for a in alloc],
        "n_total": None if found is None else found * sum(alloc),
        "power": None if found is None else seen[found]["rate"],
        "se": None if found is None else seen[found]["se"],
        "power_one_less": (seen[found - 1]["rate"] if found is not None and found - 1 in seen
                           else None),
        "evaluations": [seen[q] for q in sorted(seen)],
        "analytic": analytic,
        "analytic_not_applicable": None if analytic is not None else why_not,
    }
    return result


def _search_budget(plan: Any, scenario: Any, max_n: int = MAX_SEARCH_N) -> int:
    """An upper bound on the number of group sizes the search evaluates (for progress)."""
    k = len(plan.data.levels)
    alloc, _ = _allocation(scenario, k)
    m_cap = max(2, max_n // max(alloc))
    return 2 * max(1, math.ceil(math.log2(m_cap))) + 1


# --------------------------------------------------------------------------------------------
# the driver


def default_rehearsal_dir(plan_id: str) -> Path:
    """``reports/<plan id>-rehearsal`` under the current folder."""
    return Path(os.getcwd()) / "reports" / f"{plan_id}-rehearsal"


def _as_loaded(plan: Any) -> tuple[Any, str, Path | None]:
    """(Plan model, plan fingerprint, plan file) from a path, a LoadedPlan or a Plan."""
    from ..plan.fingerprint import plan_fingerprint
    from ..plan.load import LoadedPlan, load_plan
    from ..plan.model import Plan

    if isinstance(plan, (str, os.PathLike)):
        plan = load_plan(plan)
    if isinstance(plan, LoadedPlan):
        return plan.model, plan.fingerprints.plan, plan.path
    if isinstance(plan, Plan):
        return plan, plan_fingerprint(plan), None
    raise TypeError(f"plan must be a path, a LoadedPlan or a Plan; got {type(plan).__name__}")


def _pick_scenarios(model: Any, name: str | None) -> list[Any]:
    scenarios = list(model.rehearsal.scenarios)
    if name is None:
        return scenarios
    for s in scenarios:
        if s.name == name:
            return [s]
    from ..plan.model import suggest

    names = [s.name for s in scenarios]
    close = suggest(name, names)
    hint = f" (did you mean {close!r}?)" if close else ""
    raise PlanError(f"the plan has no rehearsal scenario {name!r}; use one of "
                    f"{', '.join(repr(n) for n in names)}{hint}")


@dataclass(frozen=True, slots=True, kw_only=True)
class RehearsalOutcome:
    """What :func:`rehearse_plan` did: the rehearsal document and where it was written.

    ``document`` is the content of rehearsal.json (a JSON-ready dict); ``flags`` collects
    every scenario's flags as ``(scenario, message)``. A rehearsal always ends with exit code
    0: a flag is a finding about the plan, not a failure of the command.
    """

    plan_id: str
    plan_revision: int
    plan_file: Path | None
    run_dir: Path
    files: tuple[str, ...]
    document: dict[str, Any]
    flags: tuple[tuple[str, str], ...] = ()
    exit_code: int = 0

    @property
    def scenarios(self) -> list[dict[str, Any]]:
        return list(self.document["scenarios"])

    @property
    def sample_size(self) -> dict[str, Any] | None:
        return self.document.get("sample_size")

    def summary(self) -> str:
        """Plain text for standard output: a compact table per scenario."""
        from ..report.rehearsal import rehearsal_summary

        return rehearsal_summary(self.document, run_dir=self.run_dir, files=self.files)


def rehearse_plan(
    plan: Any,
    *,
    out: str | os.PathLike[str] | None = None,
    replicates: int | None = None,
    seed: int | None = None,
    scenario: str | None = None,
    target_power: float | None = None,
    progress: Progress | None = None,
    chunk: int = DEFAULT_CHUNK,
) -> RehearsalOutcome:
    """Rehearse a plan on simulated data and write rehearsal.json, .md and .html.

    Parameters
    ----------
    plan : path, LoadedPlan or Plan
        The plan; it needs a ``rehearsal`` section.
    out : path, optional
        The folder to write into (default ``reports/<plan id>-rehearsal`` under the current
        folder); created if needed, files replaced atomically.
    replicates, seed : int, optional
        Replace the plan's ``rehearsal.replicates`` and ``rehearsal.seed``.
    scenario : str, optional
        Rehearse only this scenario (and search the sample size for it).
    target_power : float, optional
        Also find the smallest group sizes whose simulated omnibus power reaches this target
        for ``scenario`` (which may be left out when the plan has exactly one scenario with
        unequal means).
    progress : callable, optional
        ``progress(done, total)`` in replicates, called after every chunk. With
        ``target_power`` the total includes an upper bound for the search, and the last call
        is ``progress(total, total)``.
    chunk : int
        Replicates per engine call (rounded to whole blocks of 500); results do not depend
        on it.

    Raises
    ------
    PlanError
        The plan is invalid or has no rehearsal section, the scenario is unknown, or the
        target power is not between alpha and 1.
    """
    model, fingerprint, plan_file = _as_loaded(plan)
    if model.rehearsal is None:
        raise PlanError(f"plan {model.id} has no rehearsal section; add rehearsal.seed and "
                        "rehearsal.scenarios to rehearse it")
    r = model.rehearsal
    reps = int(r.replicates if replicates is None else replicates)
    if isinstance(replicates, bool) or reps < 2:
        raise PlanError(f"replicates must be a whole number of at least 2; got {replicates!r}")
    sd = int(r.seed if seed is None else seed)
    if isinstance(seed, bool) or not 0 <= sd < 2**63:
        raise PlanError(f"seed must be a whole number from 0 to 2**63 - 1; got {seed!r}")
    chosen = _pick_scenarios(model, scenario)
    target_scenario = None
    if target_power is not None:
        tp = float(target_power)
        if not model.alpha < tp < 1.0:
            raise PlanError(f"target power must lie between alpha ({model.alpha:g}) and 1; got "
                            f"{target_power!r}")
        if scenario is None:
            alternatives = [s for s in chosen if not _is_null(s)]
            if len(alternatives) != 1:
                names = ", ".join(repr(s.name) for s in alternatives) or "none"
                raise PlanError("name the scenario to find the sample size for (scenarios "
                                f"with unequal means: {names})")
            target_scenario = alternatives[0]
        else:
            target_scenario = chosen[0]
            if _is_null(target_scenario):
                raise PlanError(f"scenario {target_scenario.name!r} has equal means, so no "
                                "sample size gives it power; name a scenario with unequal "
                                "means")

    total = reps * len(chosen)
    if target_scenario is not None:
        total += reps * _search_budget(model, target_scenario)
    done = 0

    def tick(b: int) -> None:
        nonlocal done
        done = min(done + b, total)
        if progress is not None:
            progress(done, total)

    if progress is not None:
        progress(0, total)
    results = [rehearse_scenario(model, s, seed=sd, replicates=reps, chunk=chunk, tick=tick)
               for s in chosen]
    size = None
    if target_scenario is not None:
        size = search_sample_size(model, target_scenario, float(target_power), seed=sd,
                                  replicates=reps, chunk=chunk, tick=tick)
    if progress is not None and done < total:
        done = total
        progress(total, total)

    document = _document(model, fingerprint, sd, reps, results, size)
    from ..report.rehearsal import write_rehearsal

    run_dir = Path(out) if out is not None else default_rehearsal_dir(model.id)
    files = write_rehearsal(document, run_dir)
    flags = tuple((s["name"], f) for s in results for f in s["flags"])
    return RehearsalOutcome(plan_id=model.id, plan_revision=int(model.revision),
                            plan_file=plan_file, run_dir=run_dir, files=files,
                            document=document, flags=flags)


def _plan_words(model: Any) -> dict[str, Any]:
    vc, nc = model.variance_check, model.normality_check
    return {
        "id": model.id,
        "revision": int(model.revision),
        "title": model.title,
        "levels": [str(x) for x in model.data.levels],
        "alpha": float(model.alpha),
        "omnibus": model.omnibus,
        "variance_check": vc.method if vc.method == "none" else f"{vc.method} ({vc.role})",
        "normality_check": nc.method if nc.method == "none" else f"{nc.method} ({nc.role})",
        "transform": model.transform.policy,
        "when_variances_differ": model.when_variances_differ,
        "comparisons": model.comparisons.method,
        "only_after_significant_omnibus": bool(
            getattr(model.comparisons, "only_after_significant_omnibus", False)),
        "preliminary_test": bool(model.gates),
    }


def _document(model: Any, fingerprint: str, seed: int, replicates: int,
              results: list[dict[str, Any]], size: dict[str, Any] | None) -> dict[str, Any]:
    import scipy

    from .._version import __version__

    return {
        "format": REHEARSAL_FORMAT,
        "plan": _plan_words(model),
        "plan_fingerprint": fingerprint,
        "seed": int(seed),
        "replicates": int(replicates),
        "random_numbers": {
            "bit_generator": "PCG64",
            "streams": "SeedSequence(seed, spawn_key=(scenario key, group, block))",
            "scenario_key": "first 8 bytes of SHA-256 of the scenario name, big-endian",
            "block": BLOCK,
        },
        "software": {"planrunner": __version__, "numpy": np.__version__,
                     "scipy": scipy.__version__},
        "monte_carlo_se": "sqrt(p (1 - p) / R)",
        "flag_rule": f"a rate that should be at most alpha exceeds alpha + {FLAG_SE:g} SE",
        "scenarios": results,
        "sample_size": size,
    }

