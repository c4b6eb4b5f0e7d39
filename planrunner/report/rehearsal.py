"""What ``planrunner rehearse`` writes: rehearsal.json, rehearsal.md and rehearsal.html.

All three are made from the rehearsal document (the JSON-ready dict built by
:func:`planrunner.engine.rehearse.rehearse_plan`). rehearsal.json holds it with sorted keys and
no timestamps, so a rerun with the same plan, seed and software is byte-identical.
rehearsal.md and rehearsal.html come from the Jinja2 templates ``rehearsal.md.j2`` and
``rehearsal.html.j2`` (the HTML one autoescaped); the HTML page is one self-contained file
with inline CSS and one inline SVG figure drawn by matplotlib (Agg backend, imported lazily;
``svg.hashsalt`` fixed and no ``Date`` metadata, so the SVG is deterministic too).

Only the standard library is imported at module level.
"""

from __future__ import annotations

import io
import json
import re
from pathlib import Path
from typing import Any, Mapping, Sequence

__all__ = [
    "REHEARSAL_FILES",
    "rehearsal_figure_svg",
    "rehearsal_html",
    "rehearsal_json_bytes",
    "rehearsal_markdown",
    "rehearsal_summary",
    "rehearsal_view",
    "write_rehearsal",
]

#: The files a rehearsal writes, in the order they are written.
REHEARSAL_FILES = ("rehearsal.json", "rehearsal.md", "rehearsal.html")

# Our own palette for the paths (teal, ochre, slate, moss, rust, plum, sand, steel).
_PATH_COLOURS = ("#0f5e63", "#b5651d", "#4f6272", "#6b8e23", "#a23b2a", "#7a4e7e",
                 "#c9b37e", "#7f9cb0")
_INK = "#23313b"
_GREY = "#8a949b"
_HALT_COLOUR = "#3b3b3b"


# --------------------------------------------------------------------------------------------
# JSON


def rehearsal_json_bytes(document: Mapping[str, Any]) -> bytes:
    """rehearsal.json: sorted keys, two-space indent, UTF-8, no NaN, final newline."""
    text = json.dumps(document, sort_keys=True, indent=2, ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")


# --------------------------------------------------------------------------------------------
# presentation values shared by the text, Markdown and HTML forms


def _r(x: float | None, digits: int = 4) -> str:
    return "—" if x is None else f"{x:.{digits}f}"


def _n_text(n: Sequence[int]) -> str:
    return str(n[0]) if len(set(n)) == 1 else "/".join(str(v) for v in n)


def _values(v: Any) -> str:
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(f"{x:g}" if isinstance(x, float) else str(x) for x in v) + "]"
    return f"{v:g}" if isinstance(v, float) else str(v)


_MEASURES = {"type_i_error": "type-I error", "power": "power"}


def rehearsal_view(document: Mapping[str, Any]) -> dict[str, Any]:
    """The document with every number formatted for reading (used by the templates)."""
    plan = document["plan"]
    scenarios = []
    for s in document["scenarios"]:
        om = s["omnibus"]
        fu = s["follow_ups"]
        pairs = []
        if fu is not None:
            for p in fu["pairs"]:
                pairs.append({"pair": f"{p['a']} − {p['b']}",
                              "difference": f"{p['true_difference']:g}",
                              "rate": _r(p["rate"]), "se": _r(p["se"]),
                              "measures": _MEASURES[p["measures"]]})
        ana = s["analytic"]
        scenarios.append({
            "name": s["name"],
            "distribution": s["distribution"].replace("_", " "),
            "parameters": [(k, _values(v)) for k, v in sorted(s["parameters"].items())],
            "n": _n_text(s["n"]),
            "null": s["null"],
            "replicates": s["replicates"],
            "omnibus_rate": _r(om["rate"]), "omnibus_se": _r(om["se"]),
            "omnibus_measures": _MEASURES[om["measures"]],
            "halted": _r(s["status"]["halted"]["rate"] + s["status"]["rejected"]["rate"]),
            "degenerate": _r(s["degenerate"]["rate"]),
            "paths": [{"label": p["label"], "rate": _r(p["rate"]), "se": _r(p["se"]),
                       "count": p["count"]} for p in s["paths"]],
            "compared": [{"what": w.replace("_", " "), "rate": _r(v["rate"])}
                         for w, v in s["compared"].items()],
            "follow_ups": None if fu is None else {
                "method": fu["method"].replace("_", "-") if fu["method"] in (
                    "tukey_kramer", "games_howell") else fu["method"].replace("_", " "),
                "performed": _r(fu["performed"]["rate"]),
                "any_rate": _r(fu["any_significant"]["rate"]),
                "any_se": _r(fu["any_significant"]["se"]),
                "null_pairs": fu["truly_null_pairs"],
                "fwer_rate": None if fu["familywise_error_truly_null"] is None
                else _r(fu["familywise_error_truly_null"]["rate"]),
                "fwer_se": None if fu["familywise_error_truly_null"] is None
                else _r(fu["familywise_error_truly_null"]["se"]),
                "pairs": pairs,
            },
            "analytic": None if ana is None else {
                "power": _r(ana["power"]), "f": f"{ana['effect_size_f']:.4g}",
                "counterpart": ana["counterpart"], "note": ana["note"],
            },
            "flags": list(s["flags"]),
            "notes": list(s["notes"]),
            "decisions": [{"stage": d["stage"].replace("_", " "), "plan_ref": d["plan_ref"],
                           "outcome": d["outcome"].replace("_", " "), "rate": _r(d["rate"]),
                           "count": d["count"]} for d in s["decisions"]],
            "warnings": [{"stage": w["stage"].replace("_", " "),
                          "plan_ref": w["plan_ref"] or "", "rate": _r(w["rate"])}
                         for w in s["warnings"]],
        })
    size = document.get("sample_size")
    size_view = None
    if size is not None:
        ana = size["analytic"]
        size_view = {
            "scenario": size["scenario"],
            "target": _r(size["target_power"], 2),
            "reached": size["reached"],
            "n": None if size["n"] is None else _n_text(size["n"]),
            "n_total": size["n_total"],
            "multiplier": size["multiplier"],
            "allocation": _n_text(size["allocation"]) if len(set(size["allocation"])) > 1
            else None,
            "power": _r(size["power"]), "se": _r(size["se"]),
            "power_one_less": _r(size["power_one_less"]),
            "max_n": size["search"]["max_n_per_group"],
            "evaluations": [{"n": _n_text(e["n"]), "rate": _r(e["rate"]), "se": _r(e["se"]),
                             "analytic": _r(e["analytic_power"])}
                            for e in size["evaluations"]],
            "has_analytic": ana is not None,
            "analytic": None if ana is None else {
                "n": _n_text(ana["n"]), "power": _r(ana["power"]),
                "f": f"{ana['effect_size_f']:.4g}", "counterpart": ana["counterpart"]},
            "analytic_not_applicable": size["analytic_not_applicable"],
        }
    checks = []
    if plan["variance_check"] != "none":
        checks.append(f"variance check {plan['variance_check']}")
    if plan["normality_check"] != "none":
        checks.append(f"normality check {plan['normality_check']}")
    tree = [f"omnibus {plan['omnibus']}"] + checks + [
        f"transform {plan['transform']}",
        f"when variances differ: {plan['when_variances_differ']}",
        f"comparisons {plan['comparisons']}"
        + (" (only after a significant omnibus test)"
           if plan["only_after_significant_omnibus"] else ""),
    ]
    return {
        "plan": plan,
        "tree": tree,
        "fingerprint": document["plan_fingerprint"],
        "seed": document["seed"],
        "replicates": document["replicates"],
        "alpha": f"{plan['alpha']:g}",
        "software": document["software"],
        "random_numbers": document["random_numbers"],
        "flag_rule": document["flag_rule"],
        "scenarios": scenarios,
        "sample_size": size_view,
        "any_flags": any(s["flags"] for s in scenarios),
    }


# --------------------------------------------------------------------------------------------
# terminal summary


def rehearsal_summary(document: Mapping[str, Any], *, run_dir: Any = None,
                      files: Sequence[str] = ()) -> str:
    """Plain text for standard output: one compact table per scenario."""
    v = rehearsal_view(document)
    plan = v["plan"]
    lines = [f"rehearsal of plan {plan['id']} (revision {plan['revision']}): "
             f"{v['replicates']} replicates per scenario, seed {v['seed']}, alpha {v['alpha']}"]
    for s in v["scenarios"]:
        kind = "all means equal" if s["null"] else "means differ"
        lines.append("")
        lines.append(f"scenario {s['name']!r} ({s['distribution']}, n {s['n']}, {kind})")
        width = max([len(p["label"]) for p in s["paths"]] + [24])
        for p in s["paths"]:
            lines.append(f"  {'path ' + p['label']:<{width + 5}} {p['rate']}  (SE {p['se']})")
        lab = f"omnibus rejects ({s['omnibus_measures']})"
        lines.append(f"  {lab:<{width + 5}} {s['omnibus_rate']}  (SE {s['omnibus_se']})")
        if s["analytic"] is not None:
            lines.append(f"  classic F power from the noncentral F ({s['analytic']['counterpart']}): "
                         f"{s['analytic']['power']}")
        fu = s["follow_ups"]
        if fu is not None:
            lines.append(f"  any comparison significant ({fu['method']}): {fu['any_rate']}  "
                         f"(SE {fu['any_se']})")
            if not s["null"]:
                for p in fu["pairs"]:
                    lines.append(f"    {p['pair']}: {p['rate']} (SE {p['se']}, {p['measures']})")
                if fu["fwer_rate"] is not None:
                    lines.append(f"  family-wise error among the {fu['null_pairs']} truly null "
                                 f"pairs: {fu['fwer_rate']}  (SE {fu['fwer_se']})")
        for flag in s["flags"]:
            lines.append(f"  FLAG: {flag}")
    size = v["sample_size"]
    if size is not None:
        lines.append("")
        if size["reached"]:
            lines.append(f"sample size for {size['scenario']!r} at target power {size['target']}: "
                         f"n {size['n']} per group ({size['n_total']} in all), simulated power "
                         f"{size['power']} (SE {size['se']})")
        else:
            lines.append(f"sample size for {size['scenario']!r}: target power {size['target']} "
                         f"not reached with up to {size['max_n']} per group")
        if size["analytic"] is not None:
            lines.append(f"  classic F from the noncentral F ({size['analytic']['counterpart']}): "
                         f"n {size['analytic']['n']} per group, power {size['analytic']['power']}")
        elif size["analytic_not_applicable"]:
            lines.append(f"  no analytic comparison: {size['analytic_not_applicable']}")
    if run_dir is not None:
        lines.append("")
        lines.append(f"wrote {run_dir}: {', '.join(files)}")
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# figure


def _to_svg(fig: Any, salt: str, title: str, desc: str) -> str:
    import matplotlib
    from markupsafe import escape

    buffer = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": salt, "svg.fonttype": "none"}):
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    text = text[text.find("<svg"):]
    text = re.sub(r"\s*<metadata>.*?</metadata>", "", text, count=1, flags=re.S)
    head_end = text.find(">") + 1
    opening = text[:head_end].replace(
        "<svg ", '<svg class="figure-svg" role="img" '
        'aria-labelledby="rehearsal-figure-title rehearsal-figure-desc" ', 1)
    alt = (f'\n <title id="rehearsal-figure-title">{escape(title)}</title>'
           f'\n <desc id="rehearsal-figure-desc">{escape(desc)}</desc>')
    return opening + alt + text[head_end:].rstrip() + "\n"


def rehearsal_figure_svg(document: Mapping[str, Any]) -> str:
    """One figure, two panels sharing the scenarios: the omnibus rejection rate with 2-SE
    bars and the alpha line, and the probability of each path as stacked bars."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    scen = list(document["scenarios"])
    alpha = float(document["plan"]["alpha"])
    names = [s["name"] for s in scen]
    m = len(scen)
    labels: list[str] = []
    for s in scen:
        for p in s["paths"]:
            if p["label"] not in labels:
                labels.append(p["label"])
    labels.sort(key=lambda x: (x in ("halted", "rejected"), x))
    rc = {"svg.fonttype": "none", "font.family": "sans-serif", "font.size": 8.5,
          "axes.edgecolor": _GREY, "axes.labelcolor": _INK, "xtick.color": _INK,
          "ytick.color": _INK, "axes.spines.top": False, "axes.spines.right": False}
    with matplotlib.rc_context(rc):
        fig = Figure(figsize=(8.2, 1.2 + 0.42 * m + 0.19 * -(-len(labels) // 2)))
        ax1 = fig.add_subplot(1, 2, 1)
        ax2 = fig.add_subplot(1, 2, 2)
        y = list(range(m))[::-1]
        for yi, s in zip(y, scen):
            om = s["omnibus"]
            colour = "#a23b2a" if s["null"] and s["flags"] else "#0f5e63"
            ax1.errorbar([om["rate"]], [yi], xerr=[[2 * om["se"]], [2 * om["se"]]],
                         fmt="o" if s["null"] else "D", color=colour, capsize=3,
                         markersize=5)
        ax1.axvline(alpha, color=_GREY, linestyle="--", linewidth=1.0)
        ax1.text(alpha, m - 0.45, f" alpha {alpha:g}", color=_GREY, fontsize=7.5,
                 va="bottom")
        ax1.set_xlim(0, 1)
        ax1.set_ylim(-0.6, m - 0.2)
        ax1.set_yticks(y)
        ax1.set_yticklabels(names)
        ax1.set_xlabel("omnibus rejection rate (± 2 SE)")
        ax1.grid(axis="x", color="#e6e1d6", linewidth=0.8)
        ax1.set_axisbelow(True)
        left = [0.0] * m
        for q, label in enumerate(labels):
            widths = []
            for s in scen:
                hit = [p["rate"] for p in s["paths"] if p["label"] == label]
                widths.append(hit[0] if hit else 0.0)
            colour = (_HALT_COLOUR if label in ("halted", "rejected")
                      else _PATH_COLOURS[q % len(_PATH_COLOURS)])
            ax2.barh(y, widths, left=left, color=colour, label=label, height=0.6,
                     edgecolor="white", linewidth=0.5)
            left = [a + b for a, b in zip(left, widths)]
        ax2.set_xlim(0, 1)
        ax2.set_ylim(-0.6, m - 0.2)
        ax2.set_yticks(y)
        ax2.set_yticklabels([""] * m)
        ax2.set_xlabel("probability of each path")
        rows = -(-len(labels) // 2)
        height = fig.get_figheight()
        fig.legend(*ax2.get_legend_handles_labels(), loc="lower center",
                   bbox_to_anchor=(0.62, 0.01), ncol=2, frameon=False, fontsize=7.5)
        fig.subplots_adjust(left=0.26, right=0.98, wspace=0.16, top=1 - 0.25 / height,
                            bottom=(0.62 + 0.19 * rows) / height)
    parts = []
    for s in scen:
        om = s["omnibus"]
        parts.append(f"{s['name']}: rejection rate {om['rate']:.3f} "
                     f"({'type-I error' if s['null'] else 'power'}); paths "
                     + ", ".join(f"{p['label']} {p['rate']:.3f}" for p in s["paths"]))
    desc = (f"Left: omnibus rejection rate per scenario with two-standard-error bars and a "
            f"dashed line at alpha = {alpha:g}. Right: probability of each path. "
            + "; ".join(parts) + ".")
    return _to_svg(fig, "planrunner-rehearsal", "Rejection rates and paths per scenario", desc)


# --------------------------------------------------------------------------------------------
# Markdown and HTML


def _environment() -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    env = Environment(
        loader=PackageLoader("planrunner.report", "templates"),
        autoescape=select_autoescape(enabled_extensions=("html.j2",),
                                     default_for_string=True, default=False),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["md"] = _md_cell
    return env


def _md_cell(value: Any) -> str:
    """Text safe inside a Markdown table cell."""
    return str(value).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def rehearsal_markdown(document: Mapping[str, Any]) -> str:
    """rehearsal.md."""
    return _environment().get_template("rehearsal.md.j2").render(**rehearsal_view(document))


def rehearsal_html(document: Mapping[str, Any], figure_svg: str | None = None) -> str:
    """rehearsal.html: one self-contained page (inline CSS, one inline SVG figure)."""
    from markupsafe import Markup

    svg = figure_svg if figure_svg is not None else rehearsal_figure_svg(document)
    return _environment().get_template("rehearsal.html.j2").render(
        figure=Markup(svg), **rehearsal_view(document))


def write_rehearsal(document: Mapping[str, Any], run_dir: str | Path) -> tuple[str, ...]:
    """Write rehearsal.json, .md and .html into ``run_dir`` (each atomically); their names.

    Every file's content is made before the first one is written, so a failure leaves the
    folder as it was.
    """
    from .._files import atomic_write_bytes, atomic_write_text

    data = rehearsal_json_bytes(document)
    md = rehearsal_markdown(document)
    html = rehearsal_html(document)
    folder = Path(run_dir)
    folder.mkdir(parents=True, exist_ok=True)
    atomic_write_bytes(folder / REHEARSAL_FILES[0], data)
    atomic_write_text(folder / REHEARSAL_FILES[1], md)
    atomic_write_text(folder / REHEARSAL_FILES[2], html)
    return REHEARSAL_FILES

