"""The stages of a plan's decision tree, declared once in :data:`STAGES`.

Each stage is ``stage(ctx, recorder) -> Context | list[Context]``. It works on the batch's
active elements: it computes the statistics it needs with one batched call per branch,
derives per element which branch it takes (boolean masks over index arrays), records every
choice through ``recorder.decide`` (one call per branch, never per element), and moves each
branch's sub-batch on. Only :func:`screen_outliers` can return several contexts: removing
values changes the group sizes, so elements with the same new sizes continue together.

The same code serves ``run`` (a few endpoints, every decision logged) and ``rehearse``
(thousands of simulated replicates, decisions counted): there is one decision tree.

Stages that only estimate (summaries, effect sizes, back-transformation, sensitivity
analyses) run when ``ctx.full`` is set; they decide nothing.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ..stats._core import DomainError
from ..stats.anova import kruskal_wallis, oneway_anova, welch_anova
from ..stats.boxcox import boxcox_oneway
from ..stats.comparisons import Comparisons, dunnett, games_howell, pairwise_t, tukey_kramer
from ..stats.effect import effect_sizes as _effect_sizes
from ..stats.hartley import hartley_fmax
from ..stats.normality import shapiro_wilk
from ..stats.summary import describe_groups, studentized_residuals
from ..stats.transforms import get_transform
from ..stats.variance import bartlett, fligner_killeen, levene
from .context import HALTED, REJECTED, CheckEntry, Context
from .reasons import (
    CHECK_NAMES,
    COMPARISON_NAMES,
    OMNIBUS_NAMES,
    compared_words,
    fmt,
    fmt_p,
    scale_words,
)

__all__ = [
    "STAGES",
    "back_transform",
    "check_assumptions",
    "choose_transform",
    "conclude",
    "describe",
    "effect_sizes",
    "final_checks",
    "follow_ups",
    "omnibus",
    "screen_outliers",
    "sensitivity",
    "when_variances_differ",
]

#: Where ``value + shift`` must lie for each transformation (names of planrunner.data.DOMAINS).
DOMAIN_OF = {
    "identity": "any",
    "sqrt": "nonnegative",
    "log": "positive",
    "log10": "positive",
    "reciprocal": "positive",
    "arcsine_sqrt": "unit_interval",
    "boxcox": "positive",
}
_LOG_FAMILY = ("log", "log10")
_ALTERNATIVE = {"two_sided": "two-sided", "greater": "greater", "less": "less"}
#: Common practice: Games-Howell is liberal with fewer than about 6 values per group
#: (Games & Howell 1976 simulated groups from 6 upwards).
_GH_MIN_N = 6
#: Common practice: a largest-to-smallest SD ratio above 2 counts as unequal spread.
_SD_RATIO = 2.0


# --------------------------------------------------------------------------------------------
# small helpers


def _cat(groups: tuple[np.ndarray, ...]) -> np.ndarray:
    return np.concatenate(groups, axis=-1)


def _level(plan: Any, i: int) -> str:
    return str(plan.data.levels[i])


def _pairs(plan: Any, k: int) -> tuple[tuple[int, int], ...]:
    """The pairs the planned comparisons report, in the order the stats functions use."""
    c = plan.comparisons
    if c.method == "none":
        return ()
    control = plan.data.control
    if c.method == "dunnett" or (c.method == "pairwise_t"
                                 and plan.hypotheses.family == "against_control"):
        ci = list(plan.data.levels).index(control)
        return tuple((i, ci) for i in range(k) if i != ci)
    return tuple((a, b) for a in range(k) for b in range(a + 1, k))


def _member_values(local: np.ndarray, *arrays: Any) -> Callable[[int], tuple]:
    """Reason helpers index arrays aligned with ``local`` by member position j."""
    def get(j: int) -> tuple:
        return tuple(None if a is None else a[j] for a in arrays)
    return get


def _scale_of(name: str, lmbda: float) -> str:
    """Contract name of an analysis scale."""
    if name == "identity":
        return "original"
    if name == "boxcox":
        return f"box_cox(lambda={fmt(lmbda, 4)})"
    return name


def _ladder_next(plan: Any, r: int) -> str:
    ladder = plan.transform.ladder
    if r + 1 < len(ladder):
        return f"trying the next transformation in the ladder, {ladder[r + 1]}"
    return (f"the ladder is exhausted, so when_variances_differ ({plan.when_variances_differ}) "
            "applies")


def _fallback_words(plan: Any) -> str:
    return {
        "welch": "when_variances_differ applies: Welch's ANOVA, which does not assume equal "
                 "variances",
        "kruskal_wallis": "when_variances_differ applies: the Kruskal-Wallis rank test",
        "halt": "when_variances_differ applies: the plan halts",
    }[plan.when_variances_differ]


# --------------------------------------------------------------------------------------------
# checks (batched)


def _variance_test(ctx: Context, groups: tuple[np.ndarray, ...]) -> dict[str, np.ndarray]:
    """The plan's variance check on a sub-batch: statistic, threshold, p, passed, computable."""
    v = ctx.plan.variance_check
    m = groups[0].shape[0]
    if v.method == "hartley_fmax":
        k = len(groups)
        sizes = [g.shape[-1] - 1 for g in groups]
        # plan: exact = the Fmax distribution with each group's own df (equal sizes: one df);
        # smallest_group = the equal-df distribution with the smallest group's df
        unequal_n = getattr(v, "unequal_n", "exact")
        if len(set(sizes)) == 1:
            df: Any = sizes[0]
        elif unequal_n == "smallest_group":
            df = min(sizes)
        else:
            df = tuple(sizes)
        if min(sizes) < 1:                      # a group of one value has no variance
            ok = np.zeros(m, dtype=bool)
            fmax = np.full(m, np.nan)
            p = np.full(m, np.nan)
            crit = np.nan
        else:
            # the p-value only explains the decision: computed for a detailed record only
            res = hartley_fmax(*groups, alpha=v.alpha, unequal_n=unequal_n,
                               pvalues=ctx.detailed)
            ok = np.atleast_1d(res.computable)
            fmax = np.atleast_1d(res.statistic)
            p = np.atleast_1d(res.pvalue)
            crit = res.critical_value
        passed = ok & (np.where(ok, fmax, np.inf) <= crit)
        reason = np.where(ok, "", "a group has zero variance, so Fmax is undefined").astype(object)
        return {"statistic": fmax, "critical": np.full(m, crit), "p": p, "passed": passed,
                "computable": ok, "reason": reason, "df": df, "k": k}
    if v.method in ("levene_median", "levene_mean"):
        res = levene(*groups, center=v.method.split("_")[1])
    elif v.method == "bartlett":
        res = bartlett(*groups)
    else:
        res = fligner_killeen(*groups)
    ok = np.atleast_1d(res.computable)
    p = np.atleast_1d(res.pvalue)
    passed = ok & (np.where(ok, p, 0.0) > v.alpha)
    return {"statistic": np.atleast_1d(res.statistic), "critical": None, "p": p,
            "passed": passed, "computable": ok, "reason": np.atleast_1d(res.reason).astype(object)}


def _normality_test(ctx: Context, groups: tuple[np.ndarray, ...]) -> dict[str, np.ndarray]:
    nc = ctx.plan.normality_check
    if nc.applies_to == "residuals":
        res = shapiro_wilk(*groups)
        ok = np.atleast_1d(res.computable)
        p = np.atleast_1d(res.pvalue)
        stat = np.atleast_1d(res.statistic)
        reason = np.atleast_1d(res.reason).astype(object)
    else:  # each group: failed if any group fails; report the smallest p
        results = [shapiro_wilk(g) for g in groups]
        ps = np.stack([np.atleast_1d(r.pvalue) for r in results], axis=-1)
        oks = np.stack([np.atleast_1d(r.computable) for r in results], axis=-1)
        ok = oks.all(axis=-1)
        j = np.argmin(np.where(oks, ps, np.inf), axis=-1)
        p = np.take_along_axis(ps, j[:, None], axis=-1)[:, 0]
        stats = np.stack([np.atleast_1d(r.statistic) for r in results], axis=-1)
        stat = np.take_along_axis(stats, j[:, None], axis=-1)[:, 0]
        reason = np.where(ok, "", "a group is too small or constant for Shapiro-Wilk").astype(object)
    passed = ok & (np.where(ok, p, 0.0) > nc.alpha)
    return {"statistic": np.where(ok, stat, np.nan), "critical": None,
            "p": np.where(ok, p, np.nan), "passed": passed, "computable": ok, "reason": reason}


def _check_sentence(ctx: Context, kind: str, res: dict, j: int, scale: str) -> str:
    """What check j found, e.g. 'Fmax 8.9 exceeds the critical value 5.67 for k = 4, df = 10
    at alpha = 0.05: variances differ'."""
    plan = ctx.plan
    if not res["computable"][j]:
        return f"{CHECK_NAMES.get(_method(plan, kind), kind)} on {scale} is not computable " \
               f"({res['reason'][j]}), so equality cannot be confirmed"
    if kind == "variance" and plan.variance_check.method == "hartley_fmax":
        v = plan.variance_check
        stat, crit = res["statistic"][j], res["critical"][j]
        verb = "does not exceed" if res["passed"][j] else "exceeds"
        found = "variances do not differ detectably" if res["passed"][j] else "variances differ"
        p = "" if not np.isfinite(res["p"][j]) else f", {fmt_p(res['p'][j])}"
        df = res["df"]
        df_words = (f"df = {df}" if not isinstance(df, tuple)
                    else f"df = {', '.join(str(x) for x in df)} (exact, unequal sizes)")
        return (f"On {scale}, Fmax {fmt(stat)} {verb} the critical value {fmt(crit)} for "
                f"k = {res['k']}, {df_words} at alpha = {fmt(v.alpha)}{p}: {found}")
    if kind == "variance":
        alpha = plan.variance_check.alpha
        name = CHECK_NAMES[plan.variance_check.method]
        found = "variances do not differ detectably" if res["passed"][j] else "variances differ"
    else:
        alpha = plan.normality_check.alpha
        name = "Shapiro-Wilk on the residuals" if plan.normality_check.applies_to == "residuals" \
            else "Shapiro-Wilk in each group (smallest p shown)"
        found = "no detectable departure from normality" if res["passed"][j] \
            else "the residuals depart from normality"
    cmp = ">" if res["passed"][j] else "<="
    return (f"On {scale}, {name} gives statistic {fmt(res['statistic'][j])}, "
            f"{fmt_p(res['p'][j])} {cmp} alpha = {fmt(alpha)}: {found}")


def _method(plan: Any, kind: str) -> str:
    return plan.variance_check.method if kind == "variance" else plan.normality_check.method


def _record_check(ctx: Context, rec: Any, local: np.ndarray, kind: str, res: dict, *,
                  stage: str, when: str, role: str, scale_names: np.ndarray,
                  action: Any) -> None:
    """Store one check in ctx.checks and record it (action: str or callable(j))."""
    plan = ctx.plan
    check = plan.variance_check if kind == "variance" else plan.normality_check
    ref = "variance_check" if kind == "variance" else "normality_check"
    ids = ctx.ids[local]
    ctx.checks.append(CheckEntry(
        ids=ids, when=when, method=check.method, role=role, plan_ref=ref,
        scale=scale_names, statistic=res["statistic"], critical_value=res["critical"],
        pvalue=res["p"], alpha=check.alpha, passed=res["passed"], computable=res["computable"],
        reason=res["reason"],
    ))
    outcome = np.where(res["computable"], np.where(res["passed"], "passed", "failed"),
                       "not_computable")
    threshold = res["critical"] if res["critical"] is not None else check.alpha
    if callable(action):
        actions = action
    else:
        actions = (lambda j, a=action: a)

    def reason(j: int) -> str:
        scale = scale_words(str(scale_names[j]), ctx.out["tlambda"][local[j]])
        return f"{_check_sentence(ctx, kind, res, j, scale)}; {actions(j)}."

    rec.decide(stage=stage, plan_ref=ref + ".role" if role == "describe" else ref,
               members=ids, method=check.method, statistic=res["statistic"],
               threshold=threshold, p=res["p"], outcome=outcome,
               action=[actions(j) for j in range(ids.size)] if rec.detailed else "",
               reason=reason)


def _gates(ctx: Context, rec: Any, local: np.ndarray, groups: tuple[np.ndarray, ...], *,
           stage: str, when: str, scale: str, on_pass: str, on_fail: str) -> np.ndarray:
    """Run the gates that move a ladder (or decide a fixed policy) on one sub-batch.

    The gates are the variance check (when a gate) and the normality check when its rule is
    ``transform``. Returns the passed mask aligned with ``local`` and records each check,
    with the action that follows from all gates together.
    """
    plan = ctx.plan
    v, nc = plan.variance_check, plan.normality_check
    m = local.size
    passed = np.ones(m, dtype=bool)
    results = []
    if v.method != "none" and v.role == "gate":
        res = _variance_test(ctx, groups)
        ctx.out["variance_failed"][local] = ~res["passed"]
        passed &= res["passed"]
        results.append(("variance", res))
    if nc.method != "none" and nc.role == "gate" and nc.if_not_normal == "transform":
        res = _normality_test(ctx, groups)
        ctx.out["normality_failed"][local] = ~res["passed"]
        passed &= res["passed"]
        results.append(("normality", res))
    names = np.full(m, scale, dtype=object)
    for kind, res in results:
        _record_check(ctx, rec, local, kind, res, stage=stage, when=when, role="gate",
                      scale_names=names,
                      action=lambda j, p=passed: on_pass if p[j] else on_fail)
    return passed


def _describe_checks(ctx: Context, rec: Any, local: np.ndarray, groups: tuple[np.ndarray, ...],
                     *, stage: str, when: str, scale_names: np.ndarray, variance: bool,
                     normality: bool, note: str) -> None:
    """Checks that are reported only (role describe, or a gate not acting at this point)."""
    if local.size == 0:
        return
    plan = ctx.plan
    if variance and plan.variance_check.method != "none":
        res = _variance_test(ctx, groups)
        _record_check(ctx, rec, local, "variance", res, stage=stage, when=when,
                      role="describe", scale_names=scale_names, action=note)
    if normality and plan.normality_check.method != "none":
        res = _normality_test(ctx, groups)
        _record_check(ctx, rec, local, "normality", res, stage=stage, when=when,
                      role="describe", scale_names=scale_names, action=note)


# --------------------------------------------------------------------------------------------
# transformations (batched)


def _prepare(ctx: Context, rec: Any, local: np.ndarray, name: str, shift_rule: Any, *,
             stage: str, plan_ref: str, lmbda: float | None = None):
    """Shift and domain of transformation ``name`` for the elements ``local``.

    Returns (inside, shift, transform): ``inside`` are the local indices whose values (plus
    the shift) lie in the domain, ``shift`` their shifts. Elements outside the domain are
    recorded (outcome ``outside_domain``); the caller decides what that means for them.
    """
    t = get_transform(name, 1.0 if name == "boxcox" and lmbda is None else lmbda)
    allv = _cat(ctx.take(ctx.values, local))
    need = np.atleast_1d(t.requires_shift(allv, axis=-1))
    if shift_rule == "none":
        shift = np.zeros(need.shape)
    elif shift_rule == "auto":
        shift = np.where(need, np.atleast_1d(t.default_shift(allv, axis=-1)), 0.0)
    else:
        shift = np.where(need, float(shift_rule), 0.0)
    inside = np.ones(local.size, dtype=bool)
    try:
        t.check_domain(allv + shift[:, None])
    except DomainError:
        for j in range(local.size):  # only when some element is outside: find which
            try:
                t.check_domain(allv[j] + shift[j])
            except DomainError:
                inside[j] = False
    shifted = np.flatnonzero(inside & (shift != 0))
    if shifted.size:
        ids = ctx.ids[local[shifted]]
        sh = shift[shifted]
        lows = allv[shifted].min(axis=-1)
        rule = ("the documented default of the transformation for plan shift auto"
                if shift_rule == "auto" else "the plan's shift")
        rec.decide(
            stage=stage, plan_ref="transform.shift", members=ids, method=name, statistic=sh,
            outcome="shift_added", action="add the shift to every value before transforming",
            reason=lambda j: (f"{t.label} needs {t.domain} and the smallest value is "
                              f"{fmt(lows[j])}, so {fmt(sh[j], 6)} is added to every value "
                              f"({rule})."),
        )
    outside = np.flatnonzero(~inside)
    if outside.size:
        ids = ctx.ids[local[outside]]
        sh = shift[outside]
        domain = DOMAIN_OF[name]

        def why(j: int) -> str:
            problems = ()
            if ctx.domain_problems is not None:
                problems = ctx.domain_problems(int(ids[j]), domain, float(sh[j]), name)
            shown = "; ".join(problems[:3]) + (f"; and {len(problems) - 3} more"
                                               if len(problems) > 3 else "")
            return (f"Some values lie outside the domain of {t.label} ({t.domain}) even after "
                    f"the shift {fmt(sh[j], 6)}" + (f": {shown}" if shown else "") + ".")

        rec.decide(stage=stage, plan_ref=plan_ref, members=ids, method=name,
                   outcome="outside_domain", action="skip", reason=why)
    return local[inside], shift[inside], t


def _forward(t: Any, groups: tuple[np.ndarray, ...], shift: np.ndarray) -> tuple[np.ndarray, ...]:
    return tuple(t.forward(g + shift[:, None]) for g in groups)


def _apply_boxcox(ctx: Context, local: np.ndarray, lam: np.ndarray, shift: np.ndarray
                  ) -> tuple[np.ndarray, ...]:
    """Box-Cox with one lambda per element (one call per distinct lambda)."""
    out = tuple(np.empty((local.size, n)) for n in ctx.n)
    for u in np.unique(lam):
        sel = np.flatnonzero(lam == u)
        t = get_transform("boxcox", float(u))
        vals = _forward(t, ctx.take(ctx.values, local[sel]), shift[sel])
        for target, v in zip(out, vals):
            target[sel] = v
    return out


def _accept(ctx: Context, local: np.ndarray, name: str, shift: np.ndarray,
            lmbda: Any, groups: tuple[np.ndarray, ...], *, base: bool = False) -> None:
    ctx.out["tname"][local] = name
    ctx.out["tshift"][local] = shift
    ctx.out["tlambda"][local] = lmbda
    ctx.set_analysis(local, groups)
    if base:
        ctx.out["base_name"][local] = name
        ctx.out["base_shift"][local] = shift
        ctx.out["base_lambda"][local] = lmbda
        ctx.set_base(local, groups)


# --------------------------------------------------------------------------------------------
# stages


def screen_outliers(ctx: Context, rec: Any) -> Context | list[Context]:
    """Flag (and, when the plan says so, remove) values with large studentized residuals."""
    plan = ctx.plan
    o = plan.outliers
    act = ctx.active()
    ids = ctx.ids[act]
    if o.rule == "none":
        rec.decide(stage="outliers", plan_ref="outliers.rule", members=ids,
                   outcome="not_screened", action="keep every value",
                   reason="The plan screens no outliers; every value is analysed.")
        return ctx
    # k arrays (m, n_i); NaN where not computable (never flagged)
    t = studentized_residuals(*ctx.take(ctx.centred, act)).residuals
    flags = tuple(np.abs(np.nan_to_num(x, nan=0.0)) > o.threshold for x in t)
    count = sum(f.sum(axis=-1) for f in flags)
    remove = o.action == "remove"
    found = count > 0
    outcome = np.where(found, "removed" if remove else "flagged", "none_found")
    rows = ctx.take(ctx.rows, act)
    vals = ctx.take(ctx.values, act)

    def listing(j: int) -> str:
        items = []
        for i, f in enumerate(flags):
            for q in np.flatnonzero(f[j]).tolist():
                items.append(f"row {int(rows[i][j, q])} ({_level(plan, i)}, value "
                             f"{fmt(vals[i][j, q], 6)}, studentized residual "
                             f"{fmt(t[i][j, q])})")
        return "; ".join(items)

    def reason(j: int) -> str:
        if not found[j]:
            return (f"No value has an externally studentized residual beyond "
                    f"{fmt(o.threshold)} in absolute value.")
        what = ("removed before every later step, as the plan pre-specifies" if remove
                else "flagged and kept (the plan does not remove outliers)")
        return f"{int(count[j])} value(s) exceed {fmt(o.threshold)}: {listing(j)}; {what}."

    rec.decide(stage="outliers", plan_ref="outliers.action" if remove else "outliers.threshold",
               members=ids, method="studentized_residual", statistic=count.astype(float),
               threshold=o.threshold, outcome=outcome,
               action=np.where(found, "remove" if remove else "flag", "keep every value"),
               reason=reason)
    if ctx.full:
        for j in np.flatnonzero(found).tolist():
            items = []
            for i, f in enumerate(flags):
                for q in np.flatnonzero(f[j]).tolist():
                    items.append({"level": _level(plan, i), "row": int(rows[i][j, q]),
                                  "value": float(vals[i][j, q]),
                                  "studentized_residual": _finite(t[i][j, q]),
                                  "action": "removed" if remove else "flagged"})
            ctx.out["outliers"][act[j]] = items
    if not remove or not found.any():
        return ctx
    # Removal changes the group sizes: elements with equal new sizes continue together.
    keep = tuple(np.ones(v.shape, dtype=bool) for v in ctx.values)
    for i, f in enumerate(flags):
        keep[i][act] = ~f
    sizes = np.stack([kp.sum(axis=-1) for kp in keep], axis=-1)      # (b, k)
    patterns, which = np.unique(sizes, axis=0, return_inverse=True)
    parts = []
    for p in range(patterns.shape[0]):
        sel = np.flatnonzero(which.reshape(-1) == p)
        new_n = patterns[p]

        def gather(arrays, sel=sel, new_n=new_n):
            return tuple(a[sel][keep[i][sel]].reshape(sel.size, int(new_n[i]))
                         for i, a in enumerate(arrays))

        parts.append(Context(
            plan=plan, ids=ctx.ids[sel], values=gather(ctx.values),
            centred=gather(ctx.centred), offsets=ctx.offsets[sel], rows=gather(ctx.rows),
            full=ctx.full, detailed=ctx.detailed, domain_problems=ctx.domain_problems,
            kept_values=ctx.take(ctx.values, sel), kept_centred=ctx.take(ctx.centred, sel),
            out={key: val[sel].copy() for key, val in ctx.out.items()},
        ))
    return parts


def _finite(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def describe(ctx: Context, rec: Any) -> Context:
    """Degenerate groups (fewer than min_n values, no spread) per data.degenerate_groups;
    summaries of the original values."""
    plan = ctx.plan
    d = plan.data
    act = ctx.active()
    if act.size == 0:
        return ctx
    n = ctx.n
    small = [i for i, ni in enumerate(n) if ni < d.min_n]
    if small:
        bad = np.ones(act.size, dtype=bool)
        const = np.zeros((act.size, ctx.k), dtype=bool)
    else:
        const = np.stack([np.all(g[act] == g[act][:, :1], axis=-1) for g in ctx.centred],
                         axis=-1)
        bad = const.any(axis=-1)
    halt = d.degenerate_groups == "halt"

    def what(j: int) -> str:
        parts = [f"group {_level(plan, i)} has {n[i]} values, fewer than min_n = {d.min_n}"
                 for i in small]
        parts += [f"group {_level(plan, i)} has no spread (all {n[i]} values equal)"
                  for i in np.flatnonzero(const[j]).tolist()]
        return "; ".join(parts)

    bad_l = act[bad]
    if bad_l.size:
        sub = np.flatnonzero(bad)
        rec.decide(stage="describe", plan_ref="data.degenerate_groups", members=ctx.ids[bad_l],
                   outcome="degenerate", action="halt" if halt else "reject the data",
                   reason=lambda j: (f"{what(int(sub[j]))[0].upper()}{what(int(sub[j]))[1:]}; "
                                     f"data.degenerate_groups is {d.degenerate_groups}, so "
                                     f"{'the plan halts' if halt else 'the data are rejected'}"
                                     " for this endpoint."))
        zero = np.flatnonzero(bad & const.any(axis=-1))
        if zero.size:
            rec.warn(stage="describe", plan_ref="data.degenerate_groups",
                     members=ctx.ids[act[zero]],
                     message=lambda j: (f"{what(int(zero[j]))}: a group whose values are all "
                                        "equal usually means a reporting limit, rounding or a "
                                        "copying error; check the data."))
        reasons = [what(int(j)) for j in sub] if rec.detailed or ctx.full else "degenerate group"
        ctx.stop(bad_l, HALTED if halt else REJECTED, reasons)
    good = act[~bad]
    if good.size:
        rec.decide(stage="describe", plan_ref="data.min_n", members=ctx.ids[good],
                   outcome="usable", action="continue",
                   reason=(f"Every group has at least min_n = {d.min_n} values "
                           f"(n = {', '.join(str(x) for x in n)}) and some spread."))
    if ctx.full and good.size:
        s = describe_groups(*ctx.take(ctx.centred, good), confidence_level=plan.ci_level)
        _store_summary(ctx, good, s, "orig")
    return ctx


def _store_summary(ctx: Context, local: np.ndarray, s: Any, prefix: str) -> None:
    for name, arr in (("mean", s.mean), ("sd", s.sd), ("se", s.se), ("ci_low", s.ci.low),
                      ("ci_high", s.ci.high)):
        key = f"{prefix}_{name}"
        if key not in ctx.out:
            ctx.out[key] = np.full((ctx.size, ctx.k), np.nan)
        ctx.out[key][local] = np.asarray(arr).reshape(local.size, ctx.k)


def check_assumptions(ctx: Context, rec: Any) -> Context:
    """The assumption checks on the original scale (a gate here only when the plan's first
    scale is the original one: no transformation, or a ladder starting with identity)."""
    plan = ctx.plan
    act = ctx.active()
    if act.size == 0:
        return ctx
    t = plan.transform
    v, nc = plan.variance_check, plan.normality_check
    groups = ctx.take(ctx.centred, act)
    names = np.full(act.size, "identity", dtype=object)
    gate_here = t.policy == "none" or (t.policy == "ladder" and t.ladder[0] == "identity")
    has_gate = bool(plan.gates) and (
        (v.method != "none" and v.role == "gate")
        or (nc.method != "none" and nc.role == "gate" and nc.if_not_normal == "transform"))
    if gate_here and has_gate:
        if t.policy == "none":
            on_pass = f"continue with {OMNIBUS_NAMES[plan.omnibus]} as planned"
            on_fail = _fallback_words(plan)
        else:
            on_pass = "keeping the original scale (the first rung of the ladder)"
            on_fail = _ladder_next(plan, 0)
        passed = _gates(ctx, rec, act, groups, stage="check_assumptions",
                        when="before_transform", scale="identity", on_pass=on_pass,
                        on_fail=on_fail)
        ctx.scratch["pass_original"] = np.zeros(ctx.size, dtype=bool)
        ctx.scratch["pass_original"][act] = passed
        if t.policy == "none":
            ctx.out["gate_failed"][act] = ~passed
    reported_only = "reported only; it does not change the analysis"
    if not gate_here:
        reported_only = "recorded for the report; the plan's gate acts after its transformation"
    _describe_checks(
        ctx, rec, act, groups, stage="check_assumptions", when="before_transform",
        scale_names=names,
        variance=v.method != "none" and (v.role == "describe" or not gate_here),
        normality=False, note=reported_only)
    return ctx


def choose_transform(ctx: Context, rec: Any) -> Context:
    """The transformation policy: none, fixed, ladder (re-tested after every rung), box_cox."""
    plan = ctx.plan
    t = plan.transform
    act = ctx.active()
    if act.size == 0:
        return ctx
    if t.policy == "none":
        rec.decide(stage="transform", plan_ref="transform.policy", members=ctx.ids[act],
                   outcome="none", action="analyse the data as measured",
                   reason="The plan analyses the data on the scale they were measured.")
        return ctx
    if t.policy == "fixed":
        _fixed(ctx, rec, act)
    elif t.policy == "ladder":
        _ladder(ctx, rec, act)
    else:
        _box_cox(ctx, rec, act)
    return ctx


def _fixed(ctx: Context, rec: Any, act: np.ndarray) -> None:
    plan = ctx.plan
    name = plan.transform.transform
    inside, shift, tr = _prepare(ctx, rec, act, name, plan.transform.shift, stage="transform",
                                 plan_ref="transform.transform")
    outside = np.setdiff1d(act, inside)
    if outside.size:
        rule = plan.transform.shift
        shift_used = 0.0 if rule in ("auto", "none") else float(rule)
        head = f"values lie outside the domain of the plan's fixed transformation {name}"
        reasons = []
        for i in outside.tolist():
            found = ()
            if ctx.domain_problems is not None:
                found = ctx.domain_problems(int(ctx.ids[i]), DOMAIN_OF[name], shift_used, name)
            reasons.append("\n".join((head, *found)))
        ctx.stop(outside, REJECTED, reasons)
    if inside.size == 0:
        return
    groups = _forward(tr, ctx.take(ctx.values, inside), shift)
    _accept(ctx, inside, name, shift, np.nan, groups, base=True)
    ctx.out["why"][inside] = f"fixed by the plan (transform.transform: {name})"
    rec.decide(stage="transform", plan_ref="transform.transform", members=ctx.ids[inside],
               method=name, statistic=shift, outcome="applied",
               action=f"analyse {scale_words(name)}",
               reason=f"The plan fixes the transformation: {name} is applied to every value.")
    _after_policy_gates(ctx, rec, inside, groups, name, f"analyse {scale_words(name)}")


def _after_policy_gates(ctx: Context, rec: Any, local: np.ndarray, groups, name: str,
                        on_pass: str) -> None:
    """Gates after a fixed or Box-Cox transformation: failing sends to the fallback."""
    plan = ctx.plan
    if not plan.gates:
        return
    passed = _gates(ctx, rec, local, groups, stage="transform",
                    when=f"after_transform:{name}", scale=name,
                    on_pass=on_pass, on_fail=_fallback_words(plan))
    ctx.out["gate_failed"][local] = ~passed


def _ladder(ctx: Context, rec: Any, act: np.ndarray) -> None:
    plan = ctx.plan
    ladder = plan.transform.ladder
    tried = ctx.out.setdefault("tried_mask", np.zeros((ctx.size, len(ladder)), dtype=bool))
    pending = act
    for r, name in enumerate(ladder):
        if pending.size == 0:
            break
        ref = f"transform.ladder.{r}"
        if r == 0 and name == "identity" and "pass_original" in ctx.scratch:
            tried[pending, 0] = True
            ok, shift = pending, np.zeros(pending.size)
            groups = ctx.take(ctx.centred, pending)
            passed = ctx.scratch["pass_original"][pending]
        else:
            ok, shift, tr = _prepare(ctx, rec, pending, name, plan.transform.shift,
                                     stage="transform", plan_ref=ref)
            if ok.size == 0:
                continue
            tried[ok, r] = True
            groups = (ctx.take(ctx.centred, ok) if name == "identity"
                      else _forward(tr, ctx.take(ctx.values, ok), shift))
            if r == 0:
                _accept(ctx, ok, name, shift, np.nan, groups, base=True)
            rec.decide(stage="transform", plan_ref=ref, members=ctx.ids[ok], method=name,
                       statistic=shift, outcome="applied", action="check again",
                       reason=f"Rung {r} of the ladder: {name} is applied to every value "
                              "and the gates are checked again.")
            passed = _gates(ctx, rec, ok, groups, stage="transform",
                            when=f"after_transform:{name}", scale=name,
                            on_pass=f"analysing {scale_words(name)}",
                            on_fail=_ladder_next(plan, r))
        accept = ok[passed]
        if accept.size:
            _accept(ctx, accept, name, shift[passed], np.nan,
                    tuple(g[passed] for g in groups))
            ctx.out["why"][accept] = (f"rung {r} of the ladder ({name}): the first on which the "
                                      "gates passed")
        pending = np.setdiff1d(pending, accept)
    if pending.size:
        ctx.out["gate_failed"][pending] = True
        ctx.out["why"][pending] = "no rung of the ladder passed the gates"
        rec.decide(stage="transform", plan_ref="transform.ladder", members=ctx.ids[pending],
                   outcome="exhausted", action="apply the fallback rule",
                   reason=(f"No rung of the ladder ({', '.join(ladder)}) passed the gates; "
                           "the rule for a failed gate applies on the ladder's first scale."))
    rec.warn(stage="transform", plan_ref="transform.policy", members=ctx.ids[act],
             message=("The scale was chosen by a data-driven ladder: the reported p-values do "
                      "not account for that choice (a two-stage procedure; rehearse the plan "
                      "to see its real error rates)."))


def _box_cox(ctx: Context, rec: Any, act: np.ndarray) -> None:
    plan = ctx.plan
    t = plan.transform
    inside, shift, _ = _prepare(ctx, rec, act, "boxcox", t.shift, stage="transform",
                                plan_ref="transform")
    outside = np.setdiff1d(act, inside)
    if outside.size:
        ctx.stop(outside, REJECTED, "values lie outside the domain of the Box-Cox transformation")
    if inside.size == 0:
        return
    shifted = tuple(g + shift[:, None] for g in ctx.take(ctx.values, inside))
    snap = t.snap_values if t.rounding == "snap" else None
    bc = boxcox_oneway(*shifted, bounds=tuple(t.lambda_bounds), confidence_level=t.ci_level,
                       snap=snap)
    est = np.atleast_1d(bc.lmbda)
    lam = np.atleast_1d(bc.lmbda_snapped if snap is not None else bc.lmbda)
    lo, hi = np.atleast_1d(bc.ci.low), np.atleast_1d(bc.ci.high)
    snapped = np.atleast_1d(bc.snapped)
    ok = np.atleast_1d(bc.computable)
    if (~ok).any():
        ctx.stop(inside[~ok], HALTED, "the Box-Cox lambda is not computable")
        inside, shift, est, lam, lo, hi, snapped = (x[ok] for x in
                                                    (inside, shift, est, lam, lo, hi, snapped))
    ctx.out["boxcox_lambda"][inside] = est
    ctx.out["boxcox_low"][inside] = lo
    ctx.out["boxcox_high"][inside] = hi
    if ctx.full:  # kept for the report: the profile on at most 121 grid points, and its peak
        grid = np.asarray(bc.profile.lmbda, dtype=np.float64)
        step = -(-(grid.size - 1) // 120)
        keep = np.unique(np.append(np.arange(0, grid.size, step), grid.size - 1))
        ll = np.reshape(bc.profile.loglik, (-1, grid.size))[ok][:, keep]
        for key, value in (("boxcox_grid", np.broadcast_to(grid[keep], ll.shape)),
                           ("boxcox_profile", ll)):
            ctx.out.setdefault(key, np.full((ctx.size, keep.size), np.nan))[inside] = value
        ctx.out.setdefault("boxcox_loglik", np.full(ctx.size, np.nan))[inside] = \
            np.atleast_1d(bc.loglik)[ok]
    level = fmt(100 * t.ci_level)

    def reason(j: int) -> str:
        base = (f"Box-Cox lambda under the one-way model is estimated at {fmt(est[j])} "
                f"({level}% interval {fmt(lo[j])} to {fmt(hi[j])})")
        if snap is None:
            return base + "; the plan uses the estimate as it is."
        if snapped[j]:
            return base + f"; it is snapped to {fmt(lam[j])}, the nearest listed value inside " \
                          "the interval."
        return base + "; no listed value lies inside the interval, so the estimate is kept."

    rec.decide(stage="transform", plan_ref="transform.rounding", members=ctx.ids[inside],
               method="box_cox", statistic=est, threshold=lam,
               outcome=np.where(snapped, "snapped", "estimate_used"),
               action="apply Box-Cox with the chosen lambda", reason=reason)
    groups = _apply_boxcox(ctx, inside, lam, shift)
    _accept(ctx, inside, "boxcox", shift, lam, groups, base=True)
    ctx.out["why"][inside] = "Box-Cox lambda estimated under the one-way model"
    rec.warn(stage="transform", plan_ref="transform.policy", members=ctx.ids[inside],
             message=("The Box-Cox lambda was estimated from these data: the reported p-values "
                      "do not account for that choice."))
    _after_policy_gates(ctx, rec, inside, groups, "boxcox", "analyse on the Box-Cox scale")


def when_variances_differ(ctx: Context, rec: Any) -> Context:
    """Elements whose gates still fail: welch, kruskal_wallis or halt (on the plan's first
    scale); elements that passed keep the planned omnibus."""
    plan = ctx.plan
    act = ctx.active()
    failed = act[ctx.out["gate_failed"][act]]
    vf = failed[ctx.out["variance_failed"][failed]]
    nf = failed[~ctx.out["variance_failed"][failed]]
    rule = plan.when_variances_differ
    ok = np.setdiff1d(act, failed)
    ctx.out["omni"][ok] = plan.omnibus
    ctx.out["omni_ref"] = ctx.out.get("omni_ref", np.full(ctx.size, None, dtype=object))
    ctx.out["omni_ref"][ok] = "omnibus"
    if vf.size:
        base_scale = ctx.out["base_name"][vf]
        words = {
            "welch": "use Welch's ANOVA, which does not assume equal variances",
            "kruskal_wallis": "use the Kruskal-Wallis rank test",
            "halt": "halt the plan for this endpoint",
        }[rule]
        rec.decide(stage="when_variances_differ", plan_ref="when_variances_differ",
                   members=ctx.ids[vf], method=rule, outcome=rule, action=words,
                   reason=lambda j: (f"The variances still differ after the transformation "
                                     f"policy; the plan's rule when_variances_differ is {rule}, "
                                     "so " + ("the plan halts for this endpoint" if rule == "halt"
                                              else f"the analysis uses {words[4:]} on "
                                              f"{scale_words(str(base_scale[j]))}") + "."))
        if rule == "halt":
            ctx.stop(vf, HALTED, "the variances differ and the plan's rule "
                                 "when_variances_differ is halt")
        else:
            _to_base(ctx, vf)
            ctx.out["omni"][vf] = rule
            ctx.out["omni_ref"][vf] = "when_variances_differ"
            ctx.out["ranks"][vf] = rule == "kruskal_wallis"
            first = ("no rung of the ladder passed the gates"
                     if plan.transform.policy == "ladder" else "the variance gate failed")
            ctx.out["why"][vf] = (f"{first}; when_variances_differ ({rule}) on the plan's "
                                  "first scale")
    if nf.size:
        _to_base(ctx, nf)
        ctx.out["omni"][nf] = plan.omnibus
        ctx.out["omni_ref"][nf] = "omnibus"
        rec.decide(stage="when_variances_differ", plan_ref="normality_check.if_not_normal",
                   members=ctx.ids[nf], outcome="exhausted",
                   action=f"continue with {OMNIBUS_NAMES[plan.omnibus]} on the first scale",
                   reason=("The residuals did not pass the normality gate on any rung of the "
                           "ladder and the plan names no further rule; the analysis continues "
                           f"with {OMNIBUS_NAMES[plan.omnibus]} on the ladder's first scale."))
        rec.warn(stage="when_variances_differ", plan_ref="normality_check.if_not_normal",
                 members=ctx.ids[nf],
                 message="No transformation made the residuals look normal; the omnibus "
                         "p-value relies on the test's robustness to non-normal errors.")
    return ctx


def _to_base(ctx: Context, local: np.ndarray) -> None:
    ctx.out["tname"][local] = ctx.out["base_name"][local]
    ctx.out["tshift"][local] = ctx.out["base_shift"][local]
    ctx.out["tlambda"][local] = ctx.out["base_lambda"][local]
    ctx.set_analysis(local, ctx.take(ctx.base, local))


def final_checks(ctx: Context, rec: Any) -> Context:
    """The normality check on the final analysis scale (gate: kruskal_wallis or halt), and
    describe-only checks repeated on a transformed scale."""
    plan = ctx.plan
    nc, v = plan.normality_check, plan.variance_check
    act = ctx.active()
    if act.size == 0:
        return ctx
    names = ctx.out["tname"][act].astype(object)
    groups = ctx.take(ctx.analysis, act)
    if nc.method != "none" and not (nc.role == "gate" and nc.if_not_normal == "transform"):
        res = _normality_test(ctx, groups)
        kw = ctx.out["omni"][act] == "kruskal_wallis"
        when = np.where(names == "identity", "before_transform", "after_transform")
        if nc.role == "gate":
            rule = nc.if_not_normal
            fail = ~res["passed"] & ~kw
            act_words = {"kruskal_wallis": "use the Kruskal-Wallis rank test instead",
                         "halt": "halt the plan for this endpoint"}[rule]

            def action(j: int) -> str:
                if kw[j]:
                    return "reported only: the rank test does not assume normal errors"
                return act_words if fail[j] else "continue"
            _record_check(ctx, rec, act, "normality", res, stage="final_checks",
                          when=str(when[0]) if when.size else "", role="gate",
                          scale_names=names, action=action)
            hit = act[fail]
            if hit.size:
                rec.decide(stage="final_checks", plan_ref="normality_check.if_not_normal",
                           members=ctx.ids[hit], method=rule, outcome=rule, action=act_words,
                           reason=f"The normality gate failed; the plan's rule if_not_normal is "
                                  f"{rule}: {act_words}.")
                if rule == "halt":
                    ctx.stop(hit, HALTED, "the residuals are not normal and the plan's rule "
                                          "if_not_normal is halt")
                else:
                    ctx.out["omni"][hit] = "kruskal_wallis"
                    ctx.out["ranks"][hit] = True
                    ctx.out["omni_ref"][hit] = "normality_check.if_not_normal"
        else:
            _record_check(ctx, rec, act, "normality", res, stage="final_checks",
                          when=str(when[0]), role="describe", scale_names=names,
                          action="reported only; it does not change the analysis")
    moved = act[names != "identity"]
    if moved.size and v.method != "none" and v.role == "describe":
        _describe_checks(ctx, rec, moved, ctx.take(ctx.analysis, moved), stage="final_checks",
                         when="after_transform", scale_names=ctx.out["tname"][moved],
                         variance=True, normality=False,
                         note="reported only; it does not change the analysis")
    return ctx


def omnibus(ctx: Context, rec: Any) -> Context:
    """State what is compared (recording a change of hypothesis) and run the omnibus test."""
    plan = ctx.plan
    act = ctx.active()
    if act.size == 0:
        return ctx
    out = ctx.out
    tname = out["tname"][act].astype(str)
    kw = out["omni"][act] == "kruskal_wallis"
    logfam = np.isin(tname, _LOG_FAMILY) | ((tname == "boxcox") & (out["tlambda"][act] == 0))
    compared = np.where(kw, "locations", np.where(logfam, "geometric_means", "means"))
    out["compared"][act] = compared
    changed = compared != plan.compare
    if changed.any():
        sel = act[changed]
        comp = compared[changed]
        scl = tname[changed]
        rec.hypothesis_change(
            stage="omnibus", plan_ref="compare", members=ctx.ids[sel], before=plan.compare,
            after=comp,
            reason=lambda j: (
                f"The plan compares {compared_words(plan.compare)}; "
                + ("the rank test compares rank-based locations instead, so the hypothesis "
                   "changes to one about locations." if comp[j] == "locations" else
                   f"means on {scale_words(scl[j])} back-transform to geometric means, so the "
                   "hypothesis changes to one about geometric means.")))
    other = act[~changed & (tname != "identity") & (compared == "means")]
    if other.size:
        scl2 = out["tname"][other]
        lam2 = out["tlambda"][other]
        rec.decide(stage="omnibus", plan_ref="compare", members=ctx.ids[other],
                   outcome="scale_changed", action="compare means on the transformed scale",
                   reason=lambda j: (f"Means are compared on "
                                     f"{scale_words(str(scl2[j]), lam2[j])}; "
                                     "back-transformed they are not the original means."))
    for method, fn in (("classic", oneway_anova), ("welch", welch_anova),
                       ("kruskal_wallis", kruskal_wallis)):
        sel = act[out["omni"][act] == method]
        if sel.size == 0:
            continue
        res = fn(*ctx.take(ctx.analysis, sel))
        ok = np.atleast_1d(res.computable)
        stat, p = np.atleast_1d(res.statistic), np.atleast_1d(res.pvalue)
        if method == "classic":
            df1, df2 = np.atleast_1d(res.df_between), np.atleast_1d(res.df_within)
            for key in ("ss_between", "ss_within", "ms_between", "ms_within", "r_squared",
                        "residual_sd"):
                out[key][sel] = np.atleast_1d(getattr(res, key))
        elif method == "welch":
            df1, df2 = np.atleast_1d(res.df1), np.atleast_1d(res.df2)
        else:
            df1, df2 = np.atleast_1d(res.df), np.full(sel.size, np.nan)
        out["omni_stat"][sel] = stat
        out["omni_p"][sel] = p
        out["omni_df1"][sel] = df1
        out["omni_df2"][sel] = df2
        sig = ok & (np.where(ok, p, 1.0) <= plan.alpha)
        out["significant"][sel] = sig
        refs = out["omni_ref"][sel]
        label = "F" if method != "kruskal_wallis" else "H"
        scl = out["tname"][sel]
        lam = out["tlambda"][sel]

        def reason(j: int, stat=stat, p=p, sig=sig, df1=df1, df2=df2, refs=refs, scl=scl,
                   lam=lam, method=method, label=label) -> str:
            why = "as planned" if refs[j] == "omnibus" else f"as directed by {refs[j]}"
            on = "ranks" if method == "kruskal_wallis" else scale_words(str(scl[j]), lam[j])
            df = fmt(df1[j]) if not np.isfinite(df2[j]) else f"{fmt(df1[j])}, {fmt(df2[j], 4)}"
            verdict = "significant" if sig[j] else "not significant"
            cmp = "<=" if sig[j] else ">"
            return (f"{OMNIBUS_NAMES[method][0].upper()}{OMNIBUS_NAMES[method][1:]} ({why}) on "
                    f"{on}: {label}({df}) = {fmt(stat[j], 4)}, {fmt_p(p[j])} {cmp} alpha = "
                    f"{fmt(plan.alpha)}: {verdict}.")

        rec.decide(stage="omnibus", plan_ref="omnibus", members=ctx.ids[sel], method=method,
                   statistic=stat, threshold=plan.alpha, p=p,
                   outcome=np.where(ok, np.where(sig, "significant", "not_significant"),
                                    "not_computable"),
                   action=np.where(sig, "reject the hypothesis of equality",
                                   "do not reject the hypothesis of equality"),
                   reason=reason)
        if (~ok).any():
            ctx.stop(sel[~ok], HALTED, "the omnibus test is not computable")
    return ctx


def _compare(plan: Any, groups: tuple[np.ndarray, ...], method: str, *,
             decide_only: bool = False) -> Comparisons:
    """The planned follow-up comparisons on one sub-batch, with ``rejected`` at plan.alpha.

    ``decide_only`` (a rehearsal counts decisions only): the quadrature methods decide by
    their critical values and compute adjusted p-values only next to them (same rejections).
    """
    c = plan.comparisons
    cl = plan.ci_level
    route = {"alpha": plan.alpha, "pvalues": not decide_only}
    if method == "tukey_kramer":
        return tukey_kramer(*groups, confidence_level=cl, **route)
    if method == "games_howell":
        return games_howell(*groups, confidence_level=cl, **route)
    alternative = _ALTERNATIVE[plan.hypotheses.alternative]
    if method == "dunnett":
        control = list(plan.data.levels).index(plan.data.control)
        return dunnett(*groups, control=control, alternative=alternative,
                       confidence_level=cl, **route)
    against = plan.hypotheses.family == "against_control"
    control = list(plan.data.levels).index(plan.data.control) if against else 0
    return pairwise_t(*groups, adjust=c.adjust, confidence_level=cl,
                      pairs="control" if against else "all", control=control,
                      error_term=c.error_term, alternative=alternative, alpha=plan.alpha)


def follow_ups(ctx: Context, rec: Any) -> Context:
    """The planned comparisons, only after a significant omnibus test when the plan says so."""
    plan = ctx.plan
    c = plan.comparisons
    act = ctx.active()
    out = ctx.out
    pairs = _pairs(plan, ctx.k)
    if act.size == 0:
        return ctx
    if c.method == "none":
        out["cmp_why"][act] = "the plan makes no follow-up comparisons"
        rec.decide(stage="follow_ups", plan_ref="comparisons.method", members=ctx.ids[act],
                   outcome="none_planned", action="no comparisons",
                   reason="The plan makes no follow-up comparisons.")
        return ctx
    for key, fill, dtype in (("cmp_diff", np.nan, float), ("cmp_se", np.nan, float),
                             ("cmp_stat", np.nan, float), ("cmp_df", np.nan, float),
                             ("cmp_low", np.nan, float), ("cmp_high", np.nan, float),
                             ("cmp_p", np.nan, float), ("cmp_sig", False, bool)):
        if key not in out:
            out[key] = np.full((ctx.size, len(pairs)), fill, dtype=dtype)
    name = COMPARISON_NAMES[c.method]
    kw = act[out["omni"][act] == "kruskal_wallis"]
    if kw.size:
        out["cmp_why"][kw] = "the rank test replaced the comparison of means"
        rec.decide(stage="follow_ups", plan_ref="comparisons.method", members=ctx.ids[kw],
                   method=c.method, outcome="skipped", action="no comparisons",
                   reason=(f"The rank test replaced the comparison of means, so the planned "
                           f"{name} comparisons of means are not made."))
    rest = act[out["omni"][act] != "kruskal_wallis"]
    if c.only_after_significant_omnibus:
        ref = "comparisons.only_after_significant_omnibus"
        do = rest[out["significant"][rest]]
        skip = rest[~out["significant"][rest]]
        if skip.size:
            out["cmp_why"][skip] = "the omnibus test was not significant"
            rec.decide(stage="follow_ups", plan_ref=ref, members=ctx.ids[skip], method=c.method,
                       outcome="skipped", action="no comparisons",
                       reason=(f"The omnibus test is not significant and the plan makes the "
                               f"{name} comparisons only after a significant one."))
        why = "the omnibus test was significant"
    else:
        ref = "comparisons.method"
        do = rest
        why = "the plan makes them whatever the omnibus result"
    if do.size == 0:
        return ctx
    # Without a detailed record (rehearsal) only the decisions count: p <= alpha is decided
    # through the critical value, with the same rejections (p-values NaN away from it).
    res = _compare(plan, ctx.take(ctx.analysis, do), c.method, decide_only=not ctx.detailed)
    p = np.asarray(res.pvalue_adjusted).reshape(do.size, -1)
    sig = np.asarray(res.rejected).reshape(do.size, -1)
    for key, arr in (("cmp_diff", res.difference), ("cmp_se", res.se),
                     ("cmp_stat", res.statistic), ("cmp_df", res.df), ("cmp_low", res.ci_low),
                     ("cmp_high", res.ci_high), ("cmp_p", p)):
        out[key][do] = np.asarray(arr).reshape(do.size, -1)
    out["cmp_sig"][do] = sig
    out["cmp_performed"][do] = True
    out["cmp_method"][do] = c.method
    out["cmp_why"][do] = why
    nsig = sig.sum(axis=-1)
    rec.decide(stage="follow_ups", plan_ref=ref, members=ctx.ids[do], method=c.method,
               statistic=nsig.astype(float), threshold=plan.alpha, outcome="performed",
               action=f"report {len(pairs)} comparisons",
               reason=lambda j: (f"{name[0].upper()}{name[1:]} comparisons made because {why}: "
                                 f"{int(nsig[j])} of {len(pairs)} comparisons significant at "
                                 f"alpha = {fmt(plan.alpha)} (adjusted p-values)."))
    _comparison_warnings(ctx, rec, do)
    return ctx


def _comparison_warnings(ctx: Context, rec: Any, do: np.ndarray) -> None:
    plan = ctx.plan
    c = plan.comparisons
    n = ctx.n
    if c.method == "games_howell" and min(n) < _GH_MIN_N:
        rec.warn(stage="follow_ups", plan_ref="comparisons.method", members=ctx.ids[do],
                 message=(f"Games-Howell with fewer than {_GH_MIN_N} values in a group "
                          f"(smallest n = {min(n)}) tends to be liberal (common practice: its "
                          "error rate exceeds alpha in such small groups)."))
    if len(set(n)) > 1 and (c.method in ("tukey_kramer", "dunnett")
                            or (c.method == "pairwise_t" and c.error_term == "pooled")):
        sd = np.stack([g.std(axis=-1, ddof=1) for g in ctx.take(ctx.analysis, do)], axis=-1)
        ratio = sd.max(axis=-1) / np.where(sd.min(axis=-1) > 0, sd.min(axis=-1), np.inf)
        hit = do[ratio > _SD_RATIO]
        if hit.size:
            rec.warn(stage="follow_ups", plan_ref="comparisons.method", members=ctx.ids[hit],
                     message=(f"Unequal group sizes together with unequal spread (largest to "
                              f"smallest SD above {fmt(_SD_RATIO)}, common practice): the "
                              f"pooled-variance {COMPARISON_NAMES[c.method]} (and the classic "
                              "ANOVA) can be unreliable here."))
    if c.only_after_significant_omnibus and c.method in ("tukey_kramer", "games_howell",
                                                         "dunnett"):
        rec.warn(stage="follow_ups", plan_ref="comparisons.only_after_significant_omnibus",
                 members=ctx.ids[do],
                 message=(f"{COMPARISON_NAMES[c.method]} already controls the family-wise error "
                          "rate by itself; requiring a significant omnibus test first stacks a "
                          "further condition on it and makes it more conservative."))


def effect_sizes(ctx: Context, rec: Any) -> Context:
    """Effect sizes on the analysis scale (estimates only; nothing is decided)."""
    plan = ctx.plan
    act = ctx.active()
    if not ctx.full or act.size == 0 or not plan.effect_sizes:
        return ctx
    es = _effect_sizes(*ctx.take(ctx.analysis, act), confidence_level=plan.ci_level)
    for name in ("eta_squared", "omega_squared", "cohens_f"):
        ci = getattr(es, name + "_ci")
        for suffix, value in (("", getattr(es, name)), ("_low", ci.low), ("_high", ci.high)):
            key = f"es_{name}{suffix}"
            ctx.out.setdefault(key, np.full(ctx.size, np.nan))[act] = np.atleast_1d(value)
    ctx.out.setdefault("es_omega_clipped", np.zeros(ctx.size, dtype=bool))[act] = \
        np.atleast_1d(es.omega_squared_clipped)
    return ctx


def back_transform(ctx: Context, rec: Any) -> Context:
    """Group estimates on the analysis scale and back on the original scale."""
    act = ctx.active()
    if not ctx.full or act.size == 0:
        return ctx
    plan = ctx.plan
    s = describe_groups(*ctx.take(ctx.analysis, act), confidence_level=plan.ci_level)
    _store_summary(ctx, act, s, "an")
    out = ctx.out
    for key in ("bt_est", "bt_low", "bt_high"):
        out.setdefault(key, np.full((ctx.size, ctx.k), np.nan))
    names = out["tname"][act].astype(str)
    lams = out["tlambda"][act]
    for name in np.unique(names):
        if name == "identity":
            continue
        sel_m = names == name
        for lam in np.unique(lams[sel_m]) if name == "boxcox" else [None]:
            m = sel_m & (lams == lam) if lam is not None else sel_m
            sel = act[m]
            t = get_transform(name, None if lam is None else float(lam))
            shift = out["tshift"][sel][:, None]
            out["bt_est"][sel] = t.inverse(out["an_mean"][sel]) - shift
            lo, hi = t.back_transform_ci(out["an_ci_low"][sel], out["an_ci_high"][sel])
            out["bt_low"][sel] = lo - shift
            out["bt_high"][sel] = hi - shift
    return ctx


def sensitivity(ctx: Context, rec: Any) -> Context:
    """The plan's sensitivity analyses beside the primary path (reported separately)."""
    plan = ctx.plan
    act = ctx.active()
    if not ctx.full or act.size == 0 or not plan.sensitivity:
        return ctx
    out = ctx.out
    for idx in act.tolist():
        out["sensitivity"][idx] = []
    for si, name in enumerate(plan.sensitivity):
        method_of = {"always_classic": "classic", "always_welch": "welch",
                     "always_kruskal_wallis": "kruskal_wallis"}.get(name)
        if method_of is not None:
            jobs = [(act, method_of, ctx.take(ctx.base, act), "base")]
        elif name == "untransformed":
            jobs = [(act[out["omni"][act] == m], m, ctx.take(ctx.centred, act[out["omni"][act] == m]),
                     "identity") for m in ("classic", "welch", "kruskal_wallis")]
        else:  # outliers_kept
            jobs = _kept_jobs(ctx, act)
        for local, method, groups, scale in jobs:
            if local.size == 0:
                continue
            fn = {"classic": oneway_anova, "welch": welch_anova,
                  "kruskal_wallis": kruskal_wallis}[method]
            res = fn(*groups)
            p = np.atleast_1d(res.pvalue)
            stat = np.atleast_1d(res.statistic)
            ok = np.atleast_1d(res.computable)
            sig = ok & (np.nan_to_num(p, nan=1.0) <= plan.alpha)
            cmp_dicts: list[Any] = [None] * local.size
            cmp_method = _sensitivity_comparisons(plan, method)
            if cmp_method is not None:
                cres = _compare(plan, groups, cmp_method)
                cmp_dicts = [_comparison_dict(plan, cres, j, cmp_method, None, 0.0, None)
                             for j in range(local.size)]
            for j, idx in enumerate(local.tolist()):
                scale_name = (str(out["base_name"][idx]) if scale == "base" else
                              str(out["tname"][idx]) if scale == "primary" else "identity")
                out["sensitivity"][idx].append({
                    "name": name,
                    "scale": "ranks" if method == "kruskal_wallis" else _scale_of(
                        scale_name, out["base_lambda"][idx] if scale == "base"
                        else out["tlambda"][idx]),
                    "omnibus": _omnibus_dict(plan, method, res, j),
                    "comparisons": cmp_dicts[j],
                    "agrees_with_primary": bool(sig[j] == out["significant"][idx]),
                })
            agree = sig == out["significant"][local]
            rec.decide(stage="sensitivity", plan_ref=f"sensitivity.{si}",
                       members=ctx.ids[local], method=method, statistic=stat,
                       threshold=plan.alpha, p=p,
                       outcome=np.where(agree, "agrees", "disagrees"),
                       action="report beside the primary analysis",
                       reason=lambda j, p=p, agree=agree, method=method, name=name: (
                           f"Sensitivity analysis {name}: {OMNIBUS_NAMES[method]} gives "
                           f"{fmt_p(p[j])}; it {'agrees' if agree[j] else 'disagrees'} with "
                           "the primary analysis at alpha."))
    return ctx


def _kept_jobs(ctx: Context, act: np.ndarray) -> list:
    out = ctx.out
    kv = ctx.kept_values if ctx.kept_values is not None else ctx.values
    kc = ctx.kept_centred if ctx.kept_centred is not None else ctx.centred
    jobs = []
    keys = np.char.add(np.char.add(out["tname"][act].astype(str), "|"),
                       np.char.add(out["tlambda"][act].astype(str), "|"))
    keys = np.char.add(np.char.add(keys, out["tshift"][act].astype(str)), "|")
    keys = np.char.add(keys, out["omni"][act].astype(str))
    for key in np.unique(keys):
        local = act[keys == key]
        name, lam, shift, method = key.split("|")
        if name == "identity":
            groups = tuple(a[local] for a in kc)
        else:
            t = get_transform(name, float(lam) if name == "boxcox" else None)
            try:
                groups = tuple(t.forward(a[local] + float(shift)) for a in kv)
            except DomainError:
                continue
        jobs.append((local, method, groups, "primary"))
    return jobs


def _sensitivity_comparisons(plan: Any, method: str) -> str | None:
    if plan.comparisons.method == "none" or method == "kruskal_wallis":
        return None
    if plan.hypotheses.family == "against_control" and method == "classic":
        return "dunnett"
    if plan.hypotheses.family == "all_pairs":
        return "tukey_kramer" if method == "classic" else "games_howell"
    return None


def _omnibus_dict(plan: Any, method: str, res: Any, j: int) -> dict[str, Any]:
    def g(name: str) -> float | None:
        return _finite(np.atleast_1d(getattr(res, name))[j]) if hasattr(res, name) else None

    p = g("pvalue")
    if method == "classic":
        df1, df2 = g("df_between"), g("df_within")
    elif method == "welch":
        df1, df2 = g("df1"), g("df2")
    else:
        df1, df2 = g("df"), None
    return {
        "method": method, "statistic": g("statistic"), "df1": df1, "df2": df2, "pvalue": p,
        "significant": bool(p is not None and p <= plan.alpha), "alpha": plan.alpha,
        "ss_between": g("ss_between"), "ss_within": g("ss_within"),
        "ms_between": g("ms_between"), "ms_within": g("ms_within"),
        "r_squared": g("r_squared"), "residual_sd": g("residual_sd"),
    }


def _comparison_dict(plan: Any, res: Comparisons, j: int, method: str, tname: str | None,
                     shift: float, lmbda: float | None) -> dict[str, Any]:
    pairs = []
    for q, (a, b) in enumerate(res.pairs):
        def v(arr: Any, q=q) -> float | None:
            return _finite(np.asarray(arr).reshape(-1, len(res.pairs))[j, q])
        p = v(res.pvalue_adjusted)
        pairs.append({
            "a": _level(plan, a), "b": _level(plan, b), "difference": v(res.difference),
            "se": v(res.se), "statistic": v(res.statistic), "df": v(res.df),
            "ci": [v(res.ci_low), v(res.ci_high)], "p_adjusted": p,
            "significant": bool(p is not None and p <= plan.alpha),
            "back_transformed": None,
        })
    return {"method": method, "adjust": res.adjust, "confidence_level": res.confidence_level,
            "performed": True, "why": "sensitivity analysis", "pairs": pairs}


def conclude(ctx: Context, rec: Any) -> Context:
    """One decision per element: what the plan concludes, and on which scale."""
    plan = ctx.plan
    act = ctx.active()
    if act.size == 0:
        return ctx
    out = ctx.out
    sig = out["significant"][act]
    compared = out["compared"][act]
    tname = out["tname"][act]
    kw = out["ranks"][act]
    lam = out["tlambda"][act]

    def text(j: int) -> str:
        on = "ranks" if kw[j] else scale_words(str(tname[j]), lam[j])
        what = compared_words(str(compared[j]))
        if sig[j]:
            return (f"On {on}, the {what} differ between the groups "
                    f"({OMNIBUS_NAMES[str(out['omni'][act[j]])]}, {fmt_p(out['omni_p'][act[j]])}"
                    f", alpha = {fmt(plan.alpha)}).")
        return (f"On {on}, the data do not show that the {what} differ "
                f"({OMNIBUS_NAMES[str(out['omni'][act[j]])]}, {fmt_p(out['omni_p'][act[j]])}, "
                f"alpha = {fmt(plan.alpha)}).")

    if ctx.full:
        for j, idx in enumerate(act.tolist()):
            out["conclusion"][idx] = text(j)
    rec.decide(stage="conclude", plan_ref="alpha", members=ctx.ids[act],
               method=out["omni"][act].astype(str), p=out["omni_p"][act],
               threshold=plan.alpha,
               outcome=np.where(sig, "difference_shown", "no_difference_shown"),
               action="report", reason=text)
    return ctx


#: The plan's decision tree, in order. Each stage: (Context, Recorder) -> Context (or a list of
#: Contexts when the group sizes change).
STAGES = (
    screen_outliers,
    describe,
    check_assumptions,
    choose_transform,
    when_variances_differ,
    final_checks,
    omnibus,
    follow_ups,
    effect_sizes,
    back_transform,
    sensitivity,
    conclude,
)
