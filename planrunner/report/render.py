"""``report.html`` and ``report.md``: a pure rendering of ``results.json`` and ``decisions.jsonl``.

:func:`render_reports` reads nothing but those two files of a RUN_DIR, so a report can be
rebuilt at any later time from an archived run. It first checks the decision log with
:func:`planrunner.audit.log.verify_log` (which also compares results.json with the finish
record) and refuses with :class:`ReportRefused` when the run folder fails that check: a report
must never lend its look to records that were changed.

The two formats tell the same story from the same view (:func:`build_view`): the outcome first,
then per endpoint the path the plan took, its checks, the overall test, the follow-up
comparisons, the estimates and the conclusion with the scale it holds on; then the run record
(software, fingerprints, the decision log) and the cautions. Labels are written in plain words;
published methods keep their usual names.
"""

from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path
from typing import Any, Mapping, Sequence

from ..errors import PlanError

__all__ = [
    "FORMATS",
    "HTML_NAME",
    "MARKDOWN_NAME",
    "ReportRefused",
    "build_view",
    "load_run",
    "render_reports",
]

#: File names the report writes inside RUN_DIR.
HTML_NAME = "report.html"
MARKDOWN_NAME = "report.md"
#: Formats :func:`render_reports` accepts. ``json`` (results.json) is already written by the
#: run, so asking for it here writes nothing more.
FORMATS = ("html", "markdown", "json")

_RESULTS_NAME = "results.json"
_LOG_NAME = "decisions.jsonl"
_RESULTS_FORMAT_PREFIX = "planrunner.results/"


class ReportRefused(PlanError):
    """The run folder cannot be reported: its log fails verification, or a file is missing or
    unreadable (exit 2)."""


# --------------------------------------------------------------------------------------------
# words

METHOD_LABELS: dict[str, str] = {
    # overall tests
    "classic": "one-way analysis of variance (equal variances)",
    "welch": "Welch's analysis of variance",
    "kruskal_wallis": "Kruskal-Wallis rank test",
    # checks
    "levene_median": "Levene's test, median-centred",
    "levene_mean": "Levene's test, mean-centred",
    "bartlett": "Bartlett's test",
    "fligner_killeen": "Fligner-Killeen test",
    "hartley_fmax": "Hartley's Fmax",
    "shapiro_wilk": "Shapiro-Wilk",
    "studentized_residual": "studentized residuals",
    # follow-ups and adjustments
    "tukey_kramer": "Tukey-Kramer",
    "games_howell": "Games-Howell",
    "dunnett": "Dunnett",
    "pairwise_t": "pairwise t tests",
    "holm": "Holm",
    "bonferroni": "Bonferroni",
    "benjamini_hochberg": "Benjamini-Hochberg",
    "sidak": "Šidák",
    # transformations
    "identity": "none (as measured)",
    "sqrt": "square root",
    "log": "natural logarithm",
    "log10": "base-10 logarithm",
    "reciprocal": "reciprocal",
    "arcsine_sqrt": "arcsine of the square root",
    "boxcox": "Box-Cox",
    "box_cox": "Box-Cox",
    # effect sizes
    "eta_squared": "eta squared (η²)",
    "omega_squared": "omega squared (ω²)",
    "epsilon_squared": "epsilon squared (ε²)",
    "cohens_f": "Cohen's f",
}

SHORT_LABELS: dict[str, str] = {
    "classic": "ANOVA (equal variances)",
    "welch": "Welch ANOVA",
    "kruskal_wallis": "Kruskal-Wallis",
    "levene_median": "Levene (median)",
    "levene_mean": "Levene (mean)",
    "bartlett": "Bartlett",
    "fligner_killeen": "Fligner-Killeen",
    "hartley_fmax": "Fmax",
    "shapiro_wilk": "Shapiro-Wilk",
    "tukey_kramer": "Tukey-Kramer",
    "games_howell": "Games-Howell",
    "dunnett": "Dunnett",
    "pairwise_t": "pairwise t",
    "identity": "as measured",
    "sqrt": "square root",
    "log": "ln",
    "log10": "log10",
    "reciprocal": "reciprocal",
    "arcsine_sqrt": "arcsine √",
    "boxcox": "Box-Cox",
    "box_cox": "Box-Cox",
}

STAGE_LABELS: dict[str, str] = {
    "outliers": "Unusual values",
    "describe": "Data usable",
    "check_assumptions": "Assumption checks",
    "transform": "Transformation",
    "when_variances_differ": "Fallback rule",
    "final_checks": "Checks on analysis scale",
    "omnibus": "Overall test",
    "follow_ups": "Follow-up comparisons",
    "effect_sizes": "Effect sizes",
    "sensitivity": "Sensitivity analysis",
    "conclude": "Conclusion",
    "across_endpoints": "Across endpoints",
    "plan": "Plan",
}

COMPARED_LABELS = {
    "means": "means",
    "geometric_means": "geometric means",
    "locations": "locations (typical values, by ranks)",
}


def label(value: Any) -> str:
    """Plain words for a method, transformation or effect-size name (else the name itself)."""
    if value is None:
        return "—"
    return METHOD_LABELS.get(str(value), str(value).replace("_", " "))


def short_label(value: Any) -> str:
    if value is None:
        return "—"
    return SHORT_LABELS.get(str(value), str(value).replace("_", " "))


def scale_label(scale: Any) -> str:
    """``log10`` -> ``base-10 logarithm scale``; Box-Cox scales keep their lambda."""
    if scale is None:
        return "—"
    text = str(scale)
    if text == "original":
        return "original scale"
    if text == "ranks":
        return "ranks"
    m = re.fullmatch(r"box_cox\(lambda=(.*)\)", text)
    if m:
        return f"Box-Cox scale (λ = {m.group(1)})"
    return f"{label(text)} scale"


def stage_label(stage: Any) -> str:
    """Plain words for a log stage (``follow_ups`` -> ``Follow-up comparisons``)."""
    return STAGE_LABELS.get(str(stage), outcome_words(stage))


def outcome_words(outcome: Any) -> str:
    return str(outcome).replace("_", " ") if outcome is not None else "—"


# --------------------------------------------------------------------------------------------
# numbers (shared by both formats)


def _finite(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    return float(x) if math.isfinite(x) else None


def fmt_num(x: Any, digits: int = 4) -> str:
    """A number for a reader: ``digits`` significant digits, no exponent for everyday sizes."""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return str(x)
    v = _finite(x)
    if v is None:
        return "—"
    if v == 0:
        return "0"
    a = abs(v)
    if a >= 10 ** digits:
        return f"{v:.0f}"
    if a < 1e-4:
        return f"{v:.{max(digits - 1, 1)}e}"
    text = f"{v:.{digits}g}"
    if "e" in text:  # pragma: no cover - guarded by the ranges above
        text = f"{v:.{digits}f}"
    return text


def fmt_p(p: Any) -> str:
    """A p-value: three significant digits, or ``< 0.0001``."""
    v = _finite(p)
    if v is None:
        return "—"
    if v < 1e-4:
        return "< 0.0001"
    return f"{v:.3g}"


def fmt_ci(ci: Any, *, open_ends: bool = False, digits: int = 4) -> str:
    """``lo to hi``; with ``open_ends`` a missing end is an unbounded side (one-sided)."""
    if not isinstance(ci, (list, tuple)) or len(ci) != 2:
        return "—"
    lo, hi = _finite(ci[0]), _finite(ci[1])
    if lo is None and hi is None:
        return "—"
    left = fmt_num(lo, digits) if lo is not None else ("−∞" if open_ends else "—")
    right = fmt_num(hi, digits) if hi is not None else ("+∞" if open_ends else "—")
    return f"{left} to {right}"


def fmt_pct(level: Any) -> str:
    v = _finite(level)
    return "—" if v is None else f"{100 * v:g}%"


# --------------------------------------------------------------------------------------------
# reading


def _read_json(path: Path, what: str) -> Any:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ReportRefused(f"cannot write a report: {path} is missing") from None
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise ReportRefused(f"cannot write a report: {what} {path} is not readable "
                            f"({exc})") from exc


def load_run(run_dir: str | os.PathLike[str]) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """Verify a RUN_DIR and return its results.json and its decision records, in order.

    Raises :class:`ReportRefused` when the folder or a file is missing, or when the decision
    log fails :func:`~planrunner.audit.log.verify_log` (edited, cut short, or not matching
    results.json); the message names the first problem found.
    """
    from ..audit.log import verify_log

    folder = Path(run_dir)
    if not folder.is_dir():
        raise ReportRefused(f"cannot write a report: {folder} is not a run folder")
    results_path = folder / _RESULTS_NAME
    if not results_path.is_file():
        raise ReportRefused(f"cannot write a report: {folder} holds no {_RESULTS_NAME}")
    if not (folder / _LOG_NAME).is_file():
        raise ReportRefused(f"cannot write a report: {folder} holds no {_LOG_NAME}")
    report = verify_log(folder)
    if not report.ok:
        n = len(report.problems)
        raise ReportRefused(
            f"cannot write a report for {folder}: the decision log fails verification "
            f"({n} problem{'s' if n != 1 else ''}; first: {report.problems[0].message}). "
            "A report is only written for an intact run; run planrunner verify for details",
            problems=[p.message for p in report.problems[1:6]],
        )
    results = _read_json(results_path, "the results file")
    if not isinstance(results, dict) or not str(results.get("format", "")).startswith(
            _RESULTS_FORMAT_PREFIX):
        raise ReportRefused(f"cannot write a report: {results_path} is not a planrunner "
                            "results file")
    records: list[dict[str, Any]] = []
    with open(folder / _LOG_NAME, encoding="utf-8") as handle:
        for line in handle:
            if line.strip():
                records.append(json.loads(line))
    return results, records


# --------------------------------------------------------------------------------------------
# the view


def md_slug(text: str) -> str:
    """The anchor a Markdown renderer gives a heading (lower case, spaces to hyphens, no
    punctuation other than hyphens and underscores)."""
    slug = text.strip().lower()
    slug = re.sub(r"[^\w\- ]", "", slug)
    return slug.replace(" ", "-")


def _path_token(record: Mapping[str, Any]) -> str | None:
    """One step of the path taken, as the overview shows it (None: not part of the path)."""
    stage, outcome, method = record.get("stage"), record.get("outcome"), record.get("method")
    ref = str(record.get("plan_ref") or "")
    if stage == "check_assumptions" and not ref.endswith(".role"):
        return f"{short_label(method)} {outcome_words(outcome)}"
    if stage == "transform":
        if outcome == "applied":
            return short_label(method)
        if outcome in ("passed", "failed"):
            return f"{short_label(method)} {outcome_words(outcome)}"
        if outcome in ("snapped", "estimate_used"):
            lam = _finite(record.get("threshold"))
            return f"Box-Cox λ = {fmt_num(lam, 3)}"
        if outcome == "exhausted":
            return "ladder exhausted"
        return None
    if stage == "when_variances_differ":
        return f"fallback: {short_label(outcome)}"
    if stage == "omnibus" and outcome not in ("scale_changed", "hypothesis_changed"):
        return short_label(method)
    if stage == "follow_ups":
        return short_label(method) if outcome == "performed" else "no follow-ups"
    return None


def decision_path_layout(endpoint: Mapping[str, Any], records: Sequence[Mapping[str, Any]],
                         settings: Mapping[str, Any]) -> dict[str, Any]:
    """Coordinates of the decision-path drawing: the plan's tree, the path taken highlighted
    (see :func:`planrunner.report.tree.plan_tree_layout`)."""
    from .tree import plan_tree_layout

    return plan_tree_layout(endpoint, records, settings)


def _settings(results: Mapping[str, Any]) -> Mapping[str, Any]:
    plan = results.get("plan")
    settings = plan.get("settings") if isinstance(plan, Mapping) else None
    return settings if isinstance(settings, Mapping) else {}


def _back_label(endpoint: Mapping[str, Any]) -> str:
    for g in endpoint.get("groups") or []:
        bt = g.get("back_transformed")
        if isinstance(bt, Mapping) and bt.get("label"):
            return str(bt["label"])
    return "back-transformed mean"


def _endpoint_view(i: int, endpoint: Mapping[str, Any], records: list[dict[str, Any]],
                   data_entry: Mapping[str, Any] | None, settings: Mapping[str, Any],
                   across_row: Mapping[str, Any] | None) -> dict[str, Any]:
    name = str(endpoint.get("endpoint"))
    decisions = [r for r in records if r.get("kind") == "decision"]
    tokens = [t for t in (_path_token(r) for r in decisions) if t]
    omnibus = endpoint.get("omnibus") if isinstance(endpoint.get("omnibus"), Mapping) else None
    checks = [c for c in endpoint.get("checks") or [] if isinstance(c, Mapping)]
    scale = endpoint.get("analysis_scale")
    heading = f"{i + 1}. {name}"
    groups = [g for g in endpoint.get("groups") or [] if isinstance(g, Mapping)]
    cmp = endpoint.get("comparisons") if isinstance(endpoint.get("comparisons"),
                                                    Mapping) else None
    pairs = [p for p in (cmp or {}).get("pairs") or [] if isinstance(p, Mapping)]
    bt_kinds = {(p.get("back_transformed") or {}).get("kind") for p in pairs}
    conclusion = endpoint.get("conclusion") if isinstance(endpoint.get("conclusion"),
                                                          Mapping) else {}
    return {
        "index": i + 1,
        "name": name,
        "anchor": f"endpoint-{i + 1}",
        "heading": heading,
        "md_anchor": md_slug(heading),
        "e": endpoint,
        "status": endpoint.get("status"),
        "halted": endpoint.get("status") == "halted",
        "records": records,
        "decisions": decisions,
        "first_seq": decisions[0].get("seq") if decisions else None,
        "path_tokens": tokens,
        "path_text": " → ".join(tokens) if tokens else "—",
        "layout": decision_path_layout(endpoint, records, settings),
        "test": label(omnibus.get("method")) if omnibus else "—",
        "test_short": short_label(omnibus.get("method")) if omnibus else "—",
        "omnibus": omnibus,
        "classic": bool(omnibus and omnibus.get("ss_between") is not None),
        "checks_before": [c for c in checks if str(c.get("when")) == "before_transform"],
        "checks_after": [c for c in checks if str(c.get("when")) != "before_transform"],
        "scale": scale,
        "scale_label": scale_label(scale),
        "transformed": scale not in (None, "original"),
        "compared_label": COMPARED_LABELS.get(str(endpoint.get("compared")),
                                              outcome_words(endpoint.get("compared"))),
        "groups": groups,
        "has_analysis": any(isinstance(g.get("analysis"), Mapping) for g in groups),
        "has_back": any(isinstance(g.get("back_transformed"), Mapping) for g in groups),
        "back_label": _back_label(endpoint),
        "back_header": ("Geometric mean" if _back_label(endpoint).startswith("geometric")
                        else "Back-transformed mean"),
        "comparisons": cmp,
        "pairs": pairs,
        "ratio_pairs": "ratio" in bt_kinds,
        "difference_pairs": "difference" in bt_kinds,
        "conclusion": conclusion,
        "data": data_entry or {},
        "across": across_row,
        "warnings": [r for r in records if r.get("kind") == "warning"],
        "figures": [],
        "figure_notes": [],
    }


def _across_rows(results: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    across = results.get("across_endpoints")
    out: dict[str, dict[str, Any]] = {}
    if not isinstance(across, Mapping):
        return out
    names = across.get("endpoints") or []
    padj = across.get("p_adjusted") or []
    sig = across.get("significant") or []
    for k, name in enumerate(names):
        out[str(name)] = {
            "method": across.get("method"),
            "p_adjusted": padj[k] if k < len(padj) else None,
            "significant": sig[k] if k < len(sig) else None,
        }
    return out


def build_view(results: Mapping[str, Any], records: Sequence[Mapping[str, Any]],
               ) -> dict[str, Any]:
    """The one view both formats render: results.json and the log, arranged for a reader."""
    records = [dict(r) for r in records]
    start = next((r for r in records if r.get("kind") == "start"), {})
    finish = next((r for r in records if r.get("kind") == "finish"), {})
    plan = results.get("plan") if isinstance(results.get("plan"), Mapping) else {}
    data = results.get("data") if isinstance(results.get("data"), Mapping) else {}
    settings = _settings(results)
    data_entries = {str(d.get("endpoint")): d for d in data.get("endpoints") or []
                    if isinstance(d, Mapping)}
    across = _across_rows(results)
    by_endpoint: dict[str, list[dict[str, Any]]] = {}
    general: list[dict[str, Any]] = []
    for r in records:
        ep = r.get("endpoint")
        if r.get("kind") in ("decision", "warning") and ep is not None:
            by_endpoint.setdefault(str(ep), []).append(r)
        else:
            general.append(r)
    endpoints = []
    for i, e in enumerate(results.get("endpoints") or []):
        if not isinstance(e, Mapping):
            continue
        name = str(e.get("endpoint"))
        own = e.get("across_endpoints") if isinstance(e.get("across_endpoints"), Mapping) \
            else None
        endpoints.append(_endpoint_view(i, e, by_endpoint.get(name, []), data_entries.get(name),
                                        settings, own or across.get(name)))
    lock = start.get("lock") if isinstance(start.get("lock"), Mapping) else None
    software = start.get("software") if isinstance(start.get("software"), Mapping) else {}
    n_sig = sum(1 for e in endpoints if (e["conclusion"] or {}).get("significant") is True)
    status = str(results.get("status") or finish.get("status") or "—")
    if status == "halted":
        headline = ("The plan stopped itself on "
                    + ", ".join(str(x) for x in results.get("halted_endpoints") or [])
                    + " by one of its own rules.")
    elif len(endpoints) == 1:
        headline = str((endpoints[0]["conclusion"] or {}).get("text") or "The plan ran to its end.")
    else:
        headline = (f"The plan ran to its end on {len(endpoints)} endpoints; the overall test "
                    f"was significant on {n_sig} of them.")
    return {
        "title": plan.get("title") or plan.get("id") or "planrunner report",
        "plan": plan,
        "settings": settings,
        "status": status,
        "headline": headline,
        "halted_endpoints": list(results.get("halted_endpoints") or []),
        "data": data,
        "endpoints": endpoints,
        "multi": len(endpoints) > 1,
        "across": results.get("across_endpoints"),
        "cautions": [str(c) for c in results.get("cautions") or []],
        "start": start,
        "finish": finish,
        "lock": lock,
        "lock_words": _lock_words(lock),
        "plan_before_data": start.get("plan_before_data") if isinstance(
            start.get("plan_before_data"), Mapping) else None,
        "software": sorted((str(k), str(v)) for k, v in software.items()),
        "operator": start.get("operator") if isinstance(start.get("operator"), Mapping) else {},
        "deviations": [r for r in records if r.get("kind") == "deviation"],
        "general_warnings": [r for r in general if r.get("kind") == "warning"],
        "general_records": general,
        "records": records,
        "head": records[-1].get("chain") if records else None,
        "results_format": results.get("format"),
    }


def _lock_words(lock: Mapping[str, Any] | None) -> str:
    if not lock:
        return "not checked"
    state = lock.get("state")
    if state == "matches":
        when = lock.get("locked_at_utc")
        return "the plan matches its lock" + (f" (locked {when})" if when else "")
    if state == "differs":
        return "the plan differs from its lock; a deviation was declared"
    if state == "unlocked":
        return "the plan had no lock file when it ran"
    return outcome_words(state)


# --------------------------------------------------------------------------------------------
# entry point


def render_reports(run_dir: str | os.PathLike[str], *,
                   formats: Sequence[str] = ("html", "markdown")) -> list[Path]:
    """Write ``report.html`` and/or ``report.md`` into ``run_dir`` and return their paths.

    Reads only ``results.json`` and ``decisions.jsonl``; refuses with :class:`ReportRefused`
    (a :class:`~planrunner.errors.PlanError`, exit 2) when the decision log fails
    verification. Files are written atomically. ``formats`` may hold ``html``, ``markdown``
    (or ``md``) and ``json``; ``json`` writes nothing, since results.json is the run's own.
    """
    from .._files import atomic_write_text

    wanted: list[str] = []
    for f in formats:
        name = "markdown" if f == "md" else f
        if name not in FORMATS:
            raise PlanError(f"report format {f!r} is not known; use one of "
                            f"{', '.join(FORMATS)}")
        if name not in wanted:
            wanted.append(name)
    results, records = load_run(run_dir)
    folder = Path(run_dir)
    written: list[Path] = []
    if "html" in wanted:
        from .html import render_html

        written.append(atomic_write_text(folder / HTML_NAME, render_html(results, records)))
    if "markdown" in wanted:
        from .markdown import render_markdown

        written.append(atomic_write_text(folder / MARKDOWN_NAME,
                                         render_markdown(results, records)))
    return written


def template_filters() -> dict[str, Any]:
    """The Jinja2 filters both report formats share (numbers, p-values, labels)."""
    return {
        "num": fmt_num,
        "p": fmt_p,
        "ci": fmt_ci,
        "pct": fmt_pct,
        "label": label,
        "short": short_label,
        "scale": scale_label,
        "words": outcome_words,
        "stage": stage_label,
        "yesno": lambda v: "—" if v is None else ("yes" if v else "no"),
    }
