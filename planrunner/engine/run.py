"""Entry points of the engine: :func:`decide_batch` (the decision tree over a batch) and
:func:`analyse` (a run: every endpoint of the checked data, results as JSON-ready dicts).

``analyse`` groups the endpoints by complete-case pattern (:meth:`CheckedData.batches`), sends
each group through :func:`decide_batch` as one batch, builds one dict per endpoint, applies the
plan's adjustment across endpoints and flushes the recorder. ``rehearse`` calls
:func:`decide_batch` directly with thousands of simulated replicates and a
:class:`~planrunner.engine.record.CountingRecorder`: the same stages, the same decisions.
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from ..errors import DataError
from .context import Analysis, BatchOutcome, Context, merge_outcome
from .reasons import fmt, fmt_p
from .stages import STAGES, _pairs, _scale_of

__all__ = ["adjust_across", "analyse", "decide_batch", "run_stages"]


def run_stages(ctx: Context, recorder: Any, stages: Sequence[Callable] = STAGES) -> list[Context]:
    """Send a batch through the stages in order; returns the pieces it ended in."""
    parts = [ctx]
    for stage in stages:
        nxt: list[Context] = []
        for part in parts:
            result = stage(part, recorder)
            nxt.extend(result if isinstance(result, list) else [result])
        parts = nxt
    return parts


def decide_batch(
    plan: Any,
    groups: Sequence[np.ndarray],
    recorder: Any,
    *,
    centred: Sequence[np.ndarray] | None = None,
    offsets: Sequence[str] | None = None,
    rows: Sequence[np.ndarray] | None = None,
    full: bool = False,
    domain_problems: Callable[[int, str, float, str], tuple[str, ...]] | None = None,
) -> BatchOutcome:
    """Run the plan's decision tree over a batch of B elements.

    Parameters
    ----------
    plan : planrunner.plan.model.Plan
    groups : sequence of k arrays shaped (B, n_i)
        Plain values per group, in the plan's level order.
    recorder : Recorder
        :class:`LogRecorder` or :class:`CountingRecorder`; members are numbered 0..B-1.
    centred : sequence of k arrays (B, n_i), optional
        The same values with each element's exact offset removed (from the data layer);
        defaults to ``groups``.
    offsets : sequence of str, optional
        Each element's offset as decimal text (default ``"0"``).
    rows : sequence of k arrays (n_i,) or (B, n_i), optional
        File rows of the values (default: positions 1..n_i).
    full : bool
        Also compute estimates that decide nothing (summaries, effect sizes,
        back-transformation, sensitivity analyses).
    domain_problems : callable, optional
        ``(element, domain, shift, transform) -> messages`` from the data layer, quoted in the
        record when an element's values fall outside a transformation's domain.

    Returns
    -------
    BatchOutcome
    """
    values = tuple(np.atleast_2d(np.asarray(g, dtype=np.float64)) for g in groups)
    b = values[0].shape[0]
    cen = values if centred is None else tuple(
        np.atleast_2d(np.asarray(c, dtype=np.float64)) for c in centred)
    if rows is None:
        rws = tuple(np.broadcast_to(np.arange(1, v.shape[-1] + 1), v.shape).copy()
                    for v in values)
    else:
        rws = tuple(np.broadcast_to(np.asarray(r), v.shape).copy() for r, v in zip(rows, values))
    ctx = Context(
        plan=plan, ids=np.arange(b), values=values, centred=tuple(np.array(c) for c in cen),
        offsets=np.array(list(offsets) if offsets is not None else ["0"] * b, dtype=object),
        rows=rws, full=full, detailed=bool(getattr(recorder, "detailed", False)),
        domain_problems=domain_problems,
    )
    parts = run_stages(ctx, recorder)
    return merge_outcome(parts, b, _pairs(plan, len(values)))


class _Mapped:
    """A recorder view that numbers a batch's members as global endpoint indices."""

    def __init__(self, inner: Any, index: Sequence[int]) -> None:
        self.inner = inner
        self.index = np.asarray(index, dtype=np.int64)
        self.detailed = getattr(inner, "detailed", False)

    def decide(self, **kw: Any) -> None:
        kw["members"] = self.index[np.asarray(kw["members"], dtype=np.int64)]
        self.inner.decide(**kw)

    def warn(self, **kw: Any) -> None:
        kw["members"] = self.index[np.asarray(kw["members"], dtype=np.int64)]
        self.inner.warn(**kw)

    def hypothesis_change(self, **kw: Any) -> None:
        kw["members"] = self.index[np.asarray(kw["members"], dtype=np.int64)]
        self.inner.hypothesis_change(**kw)

    def flush(self) -> None:
        return None


def analyse(plan: Any, data: Any, recorder: Any) -> Any:
    """Run ``plan`` on every endpoint of ``data``; the results and the recorded decisions.

    Endpoints with the same complete-case pattern run as one batch. Raises
    :class:`~planrunner.errors.DataError` (after the decisions are flushed) when the plan's
    data rules reject an endpoint (a degenerate group under ``degenerate_groups: reject``, or
    values outside a fixed transformation's domain).
    """
    from ..data import check_domain

    names = list(data.responses)
    results: list[dict[str, Any] | None] = [None] * len(names)
    rejected: list[tuple[str, str]] = []
    for batch in data.batches():
        eps = [data.endpoint(n) for n in batch]
        gidx = [names.index(n) for n in batch]
        k = len(eps[0].groups)
        values = tuple(np.stack([ep.groups[i].values for ep in eps]) for i in range(k))
        centred = tuple(np.stack([ep.groups[i].offset_removed for ep in eps]) for i in range(k))
        rows = tuple(np.asarray(eps[0].groups[i].rows) for i in range(k))

        def problems(local: int, domain: str, shift: float, name: str, batch=batch):
            return check_domain(data, batch[local], domain, shift, transform=name)

        outcome = decide_batch(plan, values, _Mapped(recorder, gidx), centred=centred,
                               offsets=[ep.offset for ep in eps], rows=rows, full=True,
                               domain_problems=problems)
        for j, ep in enumerate(eps):
            results[gidx[j]] = endpoint_result(plan, ep, outcome, j)
            if outcome.status[j] == "rejected":
                rejected.append((ep.name, str(outcome.results["halt_reason"][j])))
    endpoints = [r for r in results if r is not None]
    across = _across_endpoints(plan, endpoints, recorder)
    recorder.flush()
    if rejected:
        raise DataError(
            "the data were rejected by the plan's rules",
            problems=[line for name, why in rejected
                      for line in _rejection_lines(name, why)],
        )
    halted = [e["endpoint"] for e in endpoints if e["status"] == "halted"]
    return Analysis(endpoints=endpoints, across_endpoints=across,
                    status="halted" if halted else "completed", halted_endpoints=halted)


def _rejection_lines(name: str, why: str) -> list[str]:
    """One problem line for the endpoint, then each data problem (file, row, column) below it."""
    head, *details = why.split("\n")
    return [f"endpoint {name!r}: {head}", *details]


# --------------------------------------------------------------------------------------------
# across endpoints


def adjust_across(p: np.ndarray, method: str) -> np.ndarray:
    """Holm (1979) or Benjamini-Hochberg (1995) adjusted p-values of one family."""
    p = np.asarray(p, dtype=np.float64)
    m = p.size
    if m == 0:
        return p.copy()
    order = np.argsort(p, kind="stable")
    ps = p[order]
    if method == "holm":
        # Holm (1979): adjusted p_(i) = max_{j <= i} min(1, (m - j + 1) p_(j))
        adj = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * ps))
    elif method == "benjamini_hochberg":
        # Benjamini & Hochberg (1995): adjusted p_(i) = min_{j >= i} min(1, m p_(j) / j)
        adj = np.minimum(1.0, np.minimum.accumulate((m * ps / np.arange(1, m + 1))[::-1])[::-1])
    else:
        raise ValueError(f"unknown adjustment {method!r}; use holm or benjamini_hochberg")
    out = np.empty(m)
    out[order] = adj
    return out


def _across_endpoints(plan: Any, endpoints: list[dict], recorder: Any) -> dict | None:
    method = plan.hypotheses.across_endpoints
    if len(endpoints) < 2 or method == "none":
        return None
    confirm = set(plan.confirmatory_endpoints)
    family = [i for i, e in enumerate(endpoints)
              if e["endpoint"] in confirm and e["omnibus"] is not None
              and e["omnibus"]["pvalue"] is not None]
    if not family:
        return None
    raw = np.array([endpoints[i]["omnibus"]["pvalue"] for i in family])
    adj = adjust_across(raw, method)
    sig = adj <= plan.alpha
    names = [endpoints[i]["endpoint"] for i in family]
    label = {"holm": "Holm", "benjamini_hochberg": "Benjamini-Hochberg"}[method]
    for q, i in enumerate(family):
        endpoints[i]["across_endpoints"] = {"method": method, "p_adjusted": float(adj[q]),
                                            "significant": bool(sig[q])}
    index = {e["endpoint"]: n for n, e in enumerate(endpoints)}
    members = np.array([index[n] for n in names])
    recorder.decide(
        stage="across_endpoints", plan_ref="hypotheses.across_endpoints", members=members,
        method=method, statistic=raw, threshold=plan.alpha, p=adj,
        outcome=np.where(sig, "significant", "not_significant"),
        action="report the adjusted p-value",
        reason=lambda j: (f"{label} adjustment over the {len(names)} confirmatory endpoints' "
                          f"omnibus p-values: {fmt_p(raw[j])} becomes adjusted "
                          f"{fmt_p(adj[j])}, {'significant' if sig[j] else 'not significant'} "
                          f"at alpha = {fmt(plan.alpha)}."),
    )
    return {"method": method, "endpoints": names,
            "pvalues": [float(x) for x in raw], "p_adjusted": [float(x) for x in adj],
            "significant": [bool(x) for x in sig]}


# --------------------------------------------------------------------------------------------
# one endpoint's dict


def _f(x: Any) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if np.isfinite(x) else None


def endpoint_result(plan: Any, ep: Any, outcome: BatchOutcome, j: int) -> dict[str, Any]:
    """The JSON-ready dict of element ``j`` (endpoint ``ep``) of a batch outcome."""
    from ..data import restore_offset
    from ..stats.transforms import get_transform

    r = outcome.results
    status = str(outcome.status[j])
    offset = ep.offset
    tname = str(r["tname"][j])
    ranks = bool(r["ranks"][j])
    lam = _f(r["tlambda"][j])
    shift = float(r["tshift"][j]) if np.isfinite(r["tshift"][j]) else 0.0
    scale = "ranks" if ranks else _scale_of(tname, lam if lam is not None else np.nan)
    completed = status == "completed"
    t = None
    if tname != "identity":
        t = get_transform(tname, lam if tname == "boxcox" else None)

    def restore(x: Any) -> float | None:
        x = _f(x)
        return None if x is None else restore_offset(x, offset)

    used = _values_used(ep, r["outliers"][j])
    # values on the analysis scale, computed as the stages compute them: f(x + shift)
    analysed = [t.forward(v + shift) if completed and t is not None and not ranks else None
                for v in used]
    groups = []
    for i, g in enumerate(ep.groups):
        item: dict[str, Any] = {"level": g.level, "n": g.n, "n_missing": len(g.missing_rows),
                                "n_non_detects": len(g.non_detects), "ci_level": plan.ci_level,
                                "values": [float(x) for x in used[i]],
                                "analysis_values": (None if analysed[i] is None else
                                                    [float(x) for x in analysed[i]]),
                                "original": None, "analysis": None, "back_transformed": None}
        if "orig_mean" in r and np.isfinite(r["orig_mean"][j, i]):
            item["original"] = {"mean": restore(r["orig_mean"][j, i]),
                                "sd": _f(r["orig_sd"][j, i]), "se": _f(r["orig_se"][j, i]),
                                "ci": [restore(r["orig_ci_low"][j, i]),
                                       restore(r["orig_ci_high"][j, i])]}
        if completed and t is not None and not ranks and "an_mean" in r:
            item["analysis"] = {"mean": _f(r["an_mean"][j, i]), "sd": _f(r["an_sd"][j, i]),
                                "se": _f(r["an_se"][j, i]),
                                "ci": [_f(r["an_ci_low"][j, i]), _f(r["an_ci_high"][j, i])]}
            item["back_transformed"] = {"estimate": _f(r["bt_est"][j, i]),
                                        "ci": [_f(r["bt_low"][j, i]), _f(r["bt_high"][j, i])],
                                        "label": t.back_transform_label}
        groups.append(item)

    ladder = list(plan.transform.ladder) if plan.transform.policy == "ladder" else []
    tried = ([name for q, name in enumerate(ladder) if r["tried_mask"][j, q]]
             if "tried_mask" in r else ([tname] if tname != "identity" else []))
    transform = {"name": tname, "shift": shift, "lambda": lam,
                 "why": r["why"][j] or ("the plan analyses the data as measured"
                                        if plan.transform.policy == "none" else ""),
                 "tried": tried, **_box_cox_fields(plan, r, j)}

    checks = []
    for c in outcome.checks:
        hit = np.flatnonzero(c.ids == j)
        if not hit.size:
            continue
        q = int(hit[0])
        sname = str(c.scale[q])
        when = c.when if c.when != "after_transform" else f"after_transform:{sname}"
        checks.append({
            "when": when, "method": c.method, "role": c.role,
            "statistic": _f(c.statistic[q]),
            "critical_value": None if c.critical_value is None else _f(c.critical_value[q]),
            "pvalue": _f(c.pvalue[q]), "alpha": c.alpha, "passed": bool(c.passed[q]),
            "scale": _scale_of(sname, lam if sname == "boxcox" and lam is not None else np.nan),
            "computable": bool(c.computable[q]),
            "reason": str(c.reason[q]) or None,
        })

    omnibus = None
    if completed:
        method = str(r["omni"][j])
        classic = method == "classic"
        omnibus = {
            "method": method, "statistic": _f(r["omni_stat"][j]), "df1": _f(r["omni_df1"][j]),
            "df2": _f(r["omni_df2"][j]), "pvalue": _f(r["omni_p"][j]),
            "significant": bool(r["significant"][j]), "alpha": plan.alpha,
        }
        for key in ("ss_between", "ss_within", "ms_between", "ms_within", "r_squared",
                    "residual_sd"):
            omnibus[key] = _f(r[key][j]) if classic else None

    effects = []
    if completed:
        for name in plan.effect_sizes:
            key = f"es_{name}"
            if key not in r:
                continue
            effects.append({"name": name, "estimate": _f(r[key][j]),
                            "ci": [_f(r[key + "_low"][j]), _f(r[key + "_high"][j])],
                            "confidence_level": plan.ci_level,
                            "clipped": bool(name == "omega_squared"
                                            and r["es_omega_clipped"][j])})

    comparisons = None
    if completed and plan.comparisons.method != "none":
        c = plan.comparisons
        performed = bool(r["cmp_performed"][j])
        pairs = []
        if performed:
            log_like = t is not None and t.contrast_label == "ratio of geometric means"
            for q, (a, b) in enumerate(outcome.pairs):
                d, lo, hi = r["cmp_diff"][j, q], r["cmp_low"][j, q], r["cmp_high"][j, q]
                if tname == "identity" and not ranks:
                    bt = {"kind": "difference", "estimate": _f(d), "ci": [_f(lo), _f(hi)]}
                elif log_like:
                    bt = {"kind": "ratio", "estimate": _f(t.back_transform_contrast(d)),
                          "ci": [_f(t.back_transform_contrast(lo)),
                                 _f(t.back_transform_contrast(hi))]}
                else:
                    bt = {"kind": "none", "estimate": None, "ci": [None, None]}
                pairs.append({
                    "a": str(plan.data.levels[a]), "b": str(plan.data.levels[b]),
                    "difference": _f(d), "se": _f(r["cmp_se"][j, q]),
                    "statistic": _f(r["cmp_stat"][j, q]), "df": _f(r["cmp_df"][j, q]),
                    "ci": [_f(lo), _f(hi)], "p_adjusted": _f(r["cmp_p"][j, q]),
                    "significant": bool(r["cmp_sig"][j, q]), "back_transformed": bt,
                })
        comparisons = {"method": c.method, "adjust": getattr(c, "adjust", None),
                       "confidence_level": plan.ci_level, "performed": performed,
                       "why": str(r["cmp_why"][j] or ""), "pairs": pairs}

    conclusion = {"text": str(r["conclusion"][j]) if r["conclusion"][j] else
                  f"The plan halted for this endpoint: {r['halt_reason'][j]}.",
                  "scale": scale if completed else None,
                  "significant": bool(r["significant"][j]) if completed else None}
    return {
        "endpoint": ep.name,
        "status": "completed" if completed else "halted",
        "halt_reason": None if completed else str(r["halt_reason"][j]),
        "compared": str(r["compared"][j]) if completed else plan.compare,
        "analysis_scale": scale,
        "groups": groups,
        "transform": transform,
        "checks": checks,
        "omnibus": omnibus,
        "effect_sizes": effects,
        "comparisons": comparisons,
        "outliers": list(r["outliers"][j] or []),
        "sensitivity": list(r["sensitivity"][j] or []),
        "conclusion": conclusion,
        "across_endpoints": None,
    }


def _values_used(ep: Any, outliers: Any) -> list[np.ndarray]:
    """Per group, the plain values the analysis used, in file order (values the plan removed
    as outliers are left out). The report derives the residuals of the one-way model from
    these, or from the analysis values: value minus its group mean."""
    removed = {(str(o["level"]), int(o["row"])) for o in outliers or []
               if o.get("action") == "removed"}
    out = []
    for g in ep.groups:
        keep = np.array([(g.level, int(row)) not in removed for row in g.rows], dtype=bool)
        out.append(np.asarray(g.values, dtype=np.float64)[keep])
    return out


def _box_cox_fields(plan: Any, r: dict[str, np.ndarray], j: int) -> dict[str, Any]:
    """``lambda_estimate``, ``lambda_ci`` and the thinned ``profile`` when Box-Cox estimated
    lambda for element ``j``; null otherwise."""
    est = _f(r["boxcox_lambda"][j]) if "boxcox_lambda" in r else None
    if est is None or "boxcox_profile" not in r:
        return {"lambda_estimate": None, "lambda_ci": None, "profile": None}
    from scipy.special import chdtri

    level = float(plan.transform.ci_level)
    peak = _f(r["boxcox_loglik"][j])
    grid, ll = r["boxcox_grid"][j], r["boxcox_profile"][j]
    finite = np.isfinite(grid) & np.isfinite(ll)
    # Box & Cox (1964): the interval is {lambda: loglik >= max - chi2_1(level) / 2}
    cutoff = None if peak is None else _f(peak - 0.5 * chdtri(1.0, 1.0 - level))
    return {
        "lambda_estimate": est,
        "lambda_ci": [_f(r["boxcox_low"][j]), _f(r["boxcox_high"][j])],
        "profile": {"lambda": [float(x) for x in grid[finite]],
                    "loglik": [float(x) for x in ll[finite]],
                    "loglik_max": peak, "cutoff": cutoff, "confidence_level": level},
    }
