"""The decision-path drawing: the whole plan tree of one endpoint, with the path it took.

:func:`plan_tree_layout` turns the plan's decision-relevant settings (``results.plan.settings``)
and the endpoint's decision records into rows of option boxes, one row per step of the plan:
unusual values, usable data, the scale (each rung of a ladder, each interpretable Box-Cox
power), the rule for variances that still differ, the checks on the analysis scale, the
overall test, the follow-up comparisons and the conclusion, then the analyses reported beside
the path. In every row the box the endpoint went through is *taken* (linked to its decision
record), boxes tried on the way are *tried* (a ladder's failed rungs), and every other option
of the plan is *muted* and linked to the record that decided against it. Records that fit no
box of the plan (for example a shift added before a transformation) get a box of their own in
their step, so every decision of the endpoint is drawn and linked.

Only the standard library is used; the template ``decision_path.html`` draws the SVG.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

__all__ = ["plan_tree_layout"]

# geometry (SVG user units = CSS pixels)
WIDTH = 920
X_LABEL = 8
X_NODES = 178
NODE_H = 50
ROW_H = 72
GAP = 12
MAX_NODE_W = 232
TOP = 14

_LOG_NAMES = {-1.0: "1/x", -0.5: "1/√x", 0.0: "log", 0.5: "√x", 1.0: "as measured"}
_TEST_ORDER = ("classic", "welch", "kruskal_wallis")


def _num(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    return float(x) if math.isfinite(x) else None


class _Option:
    """One box of a row."""

    def __init__(self, key: str, title: str, detail: str = "") -> None:
        self.key = key
        self.title = title
        self.detail = detail
        self.records: list[Mapping[str, Any]] = []
        self.state = "muted"
        self.link: int | None = None

    def own(self, record: Mapping[str, Any]) -> None:
        self.records.append(record)


class _Row:
    def __init__(self, key: str, label: str, ref: str, *, side: bool = False) -> None:
        self.key = key
        self.label = label
        self.ref = ref
        self.side = side
        self.options: list[_Option] = []
        self.chosen: _Option | None = None

    def add(self, key: str, title: str, detail: str = "") -> _Option:
        opt = _Option(key, title, detail)
        self.options.append(opt)
        return opt

    def get(self, key: str) -> _Option | None:
        return next((o for o in self.options if o.key == key), None)

    @property
    def records(self) -> list[Mapping[str, Any]]:
        return [r for o in self.options for r in o.records]


# --------------------------------------------------------------------------------------------
# words


def _words():
    from . import render as r

    return r


def _record_detail(record: Mapping[str, Any]) -> str:
    r = _words()
    method, outcome = record.get("method"), record.get("outcome")
    if outcome in ("snapped", "estimate_used"):
        est = _num(record.get("statistic"))
        return f"λ̂ {r.fmt_num(est, 3)} " + ("snapped" if outcome == "snapped" else "kept")
    text = r.outcome_words(outcome)
    if method and record.get("stage") in ("check_assumptions", "transform", "final_checks") \
            and outcome in ("passed", "failed", "not_computable"):
        text = f"{r.short_label(method)} {text}"
    if record.get("stage") == "conclude":
        text = ""
    p = _num(record.get("p"))
    if p is not None:
        shown = r.fmt_p(p)
        words = "adjusted p" if record.get("stage") == "across_endpoints" else "p"
        text += (", " if text else "") + (f"{words} {shown}" if shown.startswith("<")
                                          else f"{words} = {shown}")
    return text


def _lambda_name(value: float) -> str:
    r = _words()
    return f"λ = {r.fmt_num(value, 3)}"


# --------------------------------------------------------------------------------------------
# the rows of the plan


def _is_describe(record: Mapping[str, Any]) -> bool:
    ref = str(record.get("plan_ref") or "")
    return ref.endswith(".role")


def _build_rows(endpoint: Mapping[str, Any], decisions: Sequence[Mapping[str, Any]],
                settings: Mapping[str, Any]) -> tuple[list[_Row], list[Mapping[str, Any]]]:
    """The plan's rows with the endpoint's records assigned; returns the rows and the records
    no planned box took."""
    r = _words()
    rows: list[_Row] = []
    left: list[Mapping[str, Any]] = []
    t_set = settings.get("transform") if isinstance(settings.get("transform"), Mapping) else {}
    v_set = settings.get("variance_check") if isinstance(settings.get("variance_check"),
                                                         Mapping) else {}
    n_set = settings.get("normality_check") if isinstance(settings.get("normality_check"),
                                                          Mapping) else {}
    c_set = settings.get("comparisons") if isinstance(settings.get("comparisons"),
                                                      Mapping) else {}
    o_set = settings.get("outliers") if isinstance(settings.get("outliers"), Mapping) else {}
    policy = str(t_set.get("policy") or "none")
    v_gate = v_set.get("method") not in (None, "none") and v_set.get("role") == "gate"
    n_method = n_set.get("method")
    n_rule = n_set.get("if_not_normal")
    n_gate = n_method not in (None, "none") and n_set.get("role") == "gate"
    rule = str(settings.get("when_variances_differ") or "welch")
    omnibus = str(settings.get("omnibus") or "")

    # 1. unusual values
    outl = _Row("outliers", "Unusual values", "outliers")
    if o_set.get("rule") in (None, "none"):
        outl.add("not_screened", "not screened", "every value analysed")
    else:
        limit = r.fmt_num(_num(o_set.get("threshold")), 3)
        action = str(o_set.get("action") or "flag")
        outl.add("none_found", f"none beyond ±{limit}", "studentized residuals")
        outl.add("found", f"beyond ±{limit}: {'remove' if action == 'remove' else 'flag'}",
                 "studentized residuals")
    rows.append(outl)

    # 2. usable data
    desc = _Row("describe", "Data usable", "data.min_n")
    desc.add("usable", "every group usable", "enough values, some spread")
    degenerate = str(settings.get("degenerate_groups") or "halt")
    desc.add("degenerate", "degenerate group", "halt" if degenerate == "halt"
             else "reject the data")
    rows.append(desc)

    # 3. the scale (with the checks made on each scale)
    ladder = [str(x) for x in t_set.get("ladder") or []] if policy == "ladder" else []
    identity_first = policy == "none" or (ladder[:1] == ["identity"])
    original = None
    if not identity_first:
        original = _Row("original_checks", "Checks, original scale", "variance_check")
        original.add("reported", "checks reported only", "the plan's gates act later")
        rows.append(original)
    scale = _Row("scale", "Scale of analysis", "transform")
    if policy == "none":
        scale.add("identity", "as measured", "no transformation planned")
    elif policy == "fixed":
        name = str(t_set.get("transform") or "")
        scale.add(name, r.short_label(name), "fixed by the plan")
    elif policy == "ladder":
        for q, name in enumerate(ladder):
            scale.add(name, f"{q + 1}. {r.short_label(name)}", "rung of the ladder")
    elif policy == "box_cox":
        snaps = [v for v in (_num(x) for x in t_set.get("snap_values") or []) if v is not None]
        if t_set.get("rounding") == "snap":
            for v in snaps:
                name = _LOG_NAMES.get(v)
                scale.add(f"lambda:{v!r}", _lambda_name(v),
                          f"listed: {name}" if name else "listed power")
        scale.add("estimate", "λ as estimated", "if none listed inside"
                  if t_set.get("rounding") == "snap" else "the plan does not snap")
    rows.append(scale)

    # 4. the rule when variances still differ
    fallback = None
    if v_gate:
        fallback = _Row("fallback", "Variances still differ?", "when_variances_differ")
        fallback.add("pass", "no: keep the planned test", "the gates passed")
        fallback.add("rule", "yes: " + {"welch": "Welch's ANOVA",
                                         "kruskal_wallis": "Kruskal-Wallis",
                                         "halt": "halt"}.get(rule, r.outcome_words(rule)),
                     "on the plan's first scale")
        rows.append(fallback)

    # 5. checks on the analysis scale
    final = None
    if n_method not in (None, "none") and not (n_gate and n_rule == "transform"):
        final = _Row("final_checks", "Checks, analysis scale", "normality_check")
        if n_gate:
            final.add("passed", "residuals look normal", "go on")
            final.add("failed", "not normal: " + ("Kruskal-Wallis" if n_rule == "kruskal_wallis"
                                                  else "halt"), "normality_check.if_not_normal")
        else:
            final.add("reported", f"{r.short_label(n_method)}: reported only",
                      "does not change the path")
        rows.append(final)
    elif v_set.get("method") not in (None, "none") and v_set.get("role") == "describe":
        final = _Row("final_checks", "Checks, analysis scale", "variance_check")
        final.add("reported", "checks reported only", "do not change the path")
        rows.append(final)

    # 6. what is compared (a change of scale or hypothesis is a decision of its own)
    compared = _Row("compared", "What is compared", "compare")
    compared.add("compared", r.COMPARED_LABELS.get(str(settings.get("compare")),
                                                   r.outcome_words(settings.get("compare"))),
                 "as planned")

    # 7. the overall test
    test = _Row("omnibus", "Overall test", "omnibus")
    reachable = {omnibus}
    if v_gate and rule in ("welch", "kruskal_wallis"):
        reachable.add(rule)
    if n_gate and n_rule == "kruskal_wallis":
        reachable.add("kruskal_wallis")
    for name in [omnibus] + [x for x in _TEST_ORDER if x in reachable and x != omnibus]:
        if name:
            test.add(name, r.short_label(name), "planned" if name == omnibus else "if redirected")

    # 8. follow-ups
    follow = _Row("follow_ups", "Follow-up comparisons", "comparisons")
    method = str(c_set.get("method") or "none")
    if method == "none":
        follow.add("none_planned", "none planned", "")
    else:
        follow.add("performed", f"made: {r.short_label(method)}", "simultaneous intervals")
        follow.add("skipped", "not made", "only after a significant test"
                   if c_set.get("only_after_significant_omnibus") else "the test was a rank test")

    # 9. conclusion
    conclude = _Row("conclude", "Conclusion", "alpha")
    conclude.add("difference_shown", "difference shown", "")
    conclude.add("no_difference_shown", "no difference shown", "")

    # beside the path
    sens = _Row("sensitivity", "Beside the path", "sensitivity", side=True)
    across = _Row("across_endpoints", "Across endpoints", "hypotheses.across_endpoints",
                  side=True)

    # -- assign the records ----------------------------------------------------------------
    current: _Option | None = scale.options[0] if identity_first and scale.options else None
    for rec in decisions:
        stage, outcome, m = rec.get("stage"), str(rec.get("outcome")), rec.get("method")
        target: _Option | None = None
        if stage == "outliers":
            target = outl.get("not_screened" if outcome == "not_screened" else
                              ("none_found" if outcome == "none_found" else "found"))
        elif stage == "describe":
            target = desc.get("usable" if outcome == "usable" else "degenerate")
        elif stage == "check_assumptions":
            if identity_first and scale.options:
                target = scale.options[0]
            elif original is not None:
                target = original.options[0]
        elif stage == "transform":
            if outcome in ("applied", "outside_domain", "shift_added") and m is not None:
                target = scale.get(str(m))
                if outcome != "shift_added" and target is not None:
                    current = target
            elif outcome in ("snapped", "estimate_used"):
                lam = _num(rec.get("threshold"))
                target = scale.get(f"lambda:{lam!r}") if outcome == "snapped" else None
                if target is None:
                    target = scale.get("estimate")
                    if target is not None and lam is not None:
                        target.title = _lambda_name(lam)
                current = target
            elif outcome == "exhausted" and fallback is not None:
                target = fallback.get("rule")
            elif outcome in ("passed", "failed", "not_computable"):
                target = current
            elif outcome == "none":
                target = scale.options[0] if scale.options else None
        elif stage == "when_variances_differ" and fallback is not None:
            target = fallback.get("rule") if outcome == rule else None
        elif stage == "final_checks" and final is not None:
            if final.get("reported") is not None:
                target = final.get("reported")
            elif _is_describe(rec):
                target = None
            elif outcome == "passed":
                target = final.get("passed")
            else:
                target = final.get("failed")
        elif stage == "omnibus":
            if outcome in ("scale_changed", "hypothesis_changed"):
                target = compared.options[0]
                action = r.outcome_words(rec.get("action"))
                target.title = action[8:] if action.startswith("compare ") else action
                target.detail = r.outcome_words(outcome)
            else:
                target = test.get(str(m))
        elif stage == "follow_ups":
            target = follow.get(outcome)
        elif stage == "conclude":
            target = conclude.get(outcome)
        elif stage == "sensitivity":
            target = sens.add(f"s{rec.get('seq')}", _sensitivity_name(endpoint, rec), "")
        elif stage == "across_endpoints":
            target = across.add(f"a{rec.get('seq')}", r.label(m), "")
        if target is None:
            left.append(rec)
        else:
            target.own(rec)

    if compared.records:
        rows.append(compared)
    rows += [test]
    if method != "none" or follow.records:
        rows.append(follow)
    rows.append(conclude)
    rows += [row for row in (sens, across) if row.options]

    # records no planned box took: a box of their own in their step's row (or a new row)
    by_key = {row.key: row for row in rows}
    stage_row = {"outliers": "outliers", "describe": "describe",
                 "check_assumptions": "original_checks" if original else "scale",
                 "transform": "scale", "when_variances_differ": "fallback",
                 "final_checks": "final_checks", "omnibus": "omnibus",
                 "follow_ups": "follow_ups", "conclude": "conclude"}
    for rec in left:
        key = stage_row.get(str(rec.get("stage")))
        row = by_key.get(key) if key else None
        if row is None:
            row = _Row(f"other-{rec.get('stage')}", r.stage_label(rec.get("stage")),
                       str(rec.get("plan_ref") or ""))
            rows.insert(len(rows) - sum(1 for x in rows if x.side), row)
            by_key[row.key] = row
        title = r.short_label(rec.get("method")) if rec.get("method") else \
            r.outcome_words(rec.get("outcome"))
        row.add(f"x{rec.get('seq')}", title, "").own(rec)
    return rows, left


def _sensitivity_name(endpoint: Mapping[str, Any], record: Mapping[str, Any]) -> str:
    """``always welch`` for the record of plan_ref ``sensitivity.0`` (else the method)."""
    r = _words()
    ref = str(record.get("plan_ref") or "")
    entries = endpoint.get("sensitivity") or []
    tail = ref.rsplit(".", 1)[-1]
    if tail.isdigit() and int(tail) < len(entries) and isinstance(entries[int(tail)], Mapping):
        return r.outcome_words(entries[int(tail)].get("name"))
    return r.short_label(record.get("method"))


def _clip(text: str, n: int) -> str:
    return text if len(text) <= n else text[: max(n - 1, 1)] + "…"


def _choose(rows: list[_Row], endpoint: Mapping[str, Any]) -> None:
    """Mark the taken box of every row, the tried ones, and whom the muted ones link to."""
    transform = endpoint.get("transform") if isinstance(endpoint.get("transform"),
                                                        Mapping) else {}
    halted = endpoint.get("status") == "halted"
    main = [row for row in rows if not row.side]
    reached_last = max((i for i, row in enumerate(main) if row.records), default=-1)
    for i, row in enumerate(main):
        owned = [o for o in row.options if o.records]
        for o in owned:
            o.state = "tried"
        chosen: _Option | None = None
        if row.key == "scale":
            name = str(transform.get("name") or "identity")
            lam = _num(transform.get("lambda"))
            if name == "boxcox":
                chosen = row.get(f"lambda:{lam!r}") if lam is not None else None
                chosen = chosen if chosen is not None and chosen.records else \
                    next((o for o in owned if o.key == "estimate"), None)
            else:
                chosen = row.get(name)
            if chosen is None or not chosen.records:
                chosen = owned[-1] if owned else None
            if chosen is None and not halted and i < reached_last and row.options:
                chosen = row.options[0]  # e.g. "as measured" when no record names it
        elif row.key == "fallback":
            rule = row.get("rule")
            if rule is not None and rule.records:
                chosen = rule
            elif i < reached_last:
                chosen = row.get("pass")
                if chosen is not None:
                    gate = [r for r in (main[i - 1].records if i else [])
                            if r.get("outcome") == "passed"]
                    chosen.link = gate[-1].get("seq") if gate else None
                    if gate:
                        chosen.detail = _record_detail(gate[-1])
        elif owned:
            chosen = max(owned, key=lambda o: max(int(r.get("seq") or 0) for r in o.records))
        if chosen is not None:
            chosen.state = "taken"
        row.chosen = chosen
    for row in rows:
        if row.side:
            for o in row.options:
                o.state = "side"
    # whom a muted box links to: the record of its row's taken box, else the record that
    # stopped the path
    all_recs = [r for row in main for r in row.records]
    stop = max(all_recs, key=lambda r: int(r.get("seq") or 0)) if all_recs else None
    for row in rows:
        ref = None
        if row.chosen is not None:
            ref = row.chosen.records[0].get("seq") if row.chosen.records else row.chosen.link
        if ref is None and stop is not None:
            ref = stop.get("seq")
        for o in row.options:
            if o.records:
                o.link = _primary(o).get("seq")
            elif o.link is None:
                o.link = ref


def _primary(option: _Option) -> Mapping[str, Any]:
    """The record a box's rectangle links to and describes: a Box-Cox choice, else the last
    check on a scale, else the first record."""
    chosen = [r for r in option.records if r.get("outcome") in ("snapped", "estimate_used")]
    checks = [r for r in option.records if r.get("outcome") in ("passed", "failed")]
    return chosen[0] if chosen else (checks[-1] if checks else option.records[0])


def plan_tree_layout(endpoint: Mapping[str, Any], records: Sequence[Mapping[str, Any]],
                     settings: Mapping[str, Any]) -> dict[str, Any]:
    """Coordinates and words of one endpoint's decision-path drawing.

    Returns ``rows`` (label, plan reference, y), ``nodes`` (x, y, width, state ``taken`` /
    ``tried`` / ``muted`` / ``side``, title, detail, the record it links to, the records it
    holds), ``edges`` (SVG path data of the path taken, and of the climb along a ladder) and
    the drawing's ``width`` and ``height``.
    """
    decisions = [x for x in records if x.get("kind") == "decision"]
    rows, _ = _build_rows(endpoint, decisions, settings)
    _choose(rows, endpoint)
    out_rows, nodes, edges = [], [], []
    y = TOP
    avail = WIDTH - X_NODES - 8
    centre: dict[int, tuple[float, float, float]] = {}
    for ri, row in enumerate(rows):
        n = max(len(row.options), 1)
        w = min(MAX_NODE_W, (avail - (n - 1) * GAP) / n)
        chars = max(int((w - 14) / 6.3), 6)
        out_rows.append({"label": row.label, "ref": row.ref, "y": y, "mid": y + NODE_H / 2,
                         "side": row.side})
        for q, o in enumerate(row.options):
            x = X_NODES + q * (w + GAP)
            seqs = [int(rec.get("seq")) for rec in o.records if rec.get("seq") is not None]
            detail = o.detail
            if o.records:
                detail = _record_detail(_primary(o))
            tip = " ".join(str(rec.get("reason") or "") for rec in o.records) or (
                f"Not taken; decided by record #{o.link}." if o.link is not None else
                "Not reached.")
            nodes.append({
                "x": round(x, 1), "y": y, "w": round(w, 1), "h": NODE_H, "state": o.state,
                "title": _clip(o.title, chars), "detail": _clip(detail, chars + 2),
                "link": o.link, "seqs": seqs, "tip": tip,
                "seq_x": round(x + w - 6, 1), "text_x": round(x + 7, 1),
            })
            if o is row.chosen:
                centre[ri] = (x + w / 2, y, x)
        if row.key == "scale":  # the climb along the ladder, between tried rungs
            tried = [q for q, o in enumerate(row.options) if o.records]
            for a, b in zip(tried, tried[1:]):
                x1 = X_NODES + a * (w + GAP) + w
                x2 = X_NODES + b * (w + GAP)
                edges.append({"kind": "climb",
                              "d": f"M{x1:.1f},{y + NODE_H / 2:.1f} H{x2 - 1:.1f}"})
        y += ROW_H
    main = [i for i, row in enumerate(rows) if not row.side]
    for a, b in zip(main, main[1:]):
        if a in centre and b in centre:
            x1, y1, _ = centre[a]
            x2, y2, _ = centre[b]
            y1 += NODE_H
            mid = (y1 + y2) / 2
            edges.append({"kind": "taken",
                          "d": f"M{x1:.1f},{y1:.1f} C{x1:.1f},{mid:.1f} {x2:.1f},{mid:.1f} "
                               f"{x2:.1f},{y2 - 1:.1f}"})
    return {"rows": out_rows, "nodes": nodes, "edges": edges, "width": WIDTH,
            "height": y - ROW_H + NODE_H + TOP, "x_label": X_LABEL, "node_h": NODE_H}
