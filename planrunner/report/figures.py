"""Figures for report.html: matplotlib drawings rendered to SVG text for inlining.

Every function takes one endpoint's dict from ``results.json`` (``endpoints[i]``) and returns a
:class:`ReportFigure`, or ``None`` when the endpoint does not hold what the figure needs (the
caller says so in the report). matplotlib is imported inside the functions, with the Agg
backend, so importing this module costs nothing.

Output is deterministic: ``svg.hashsalt`` is fixed per figure (and differs between figures, so
the ids matplotlib writes stay unique inside one HTML page), the ``Date`` metadata is left out
and text is written as SVG ``<text>`` (``svg.fonttype: none``), which matplotlib escapes. The
XML prolog, doctype and metadata block are removed so the SVG can sit inside HTML, and each
SVG gets ``role="img"`` with ``<title>`` and ``<desc>`` as its text alternative.

Fields of results.json the figures read beyond the group summaries:

``groups[j].values`` and ``groups[j].analysis_values``
    The values used, on the original and on the analysis scale (individual points; a group
    with more than :data:`MAX_POINTS` values is drawn as that many evenly spaced quantiles).
    The residuals of the quantile plot are derived from them (:func:`residuals_of`).
``transform.lambda_estimate``, ``transform.lambda_ci`` and ``transform.profile``
    The Box-Cox estimate, its interval and the profile log-likelihood with its cut-off.
"""

from __future__ import annotations

import io
import math
import re
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

from markupsafe import escape

__all__ = [
    "MAX_POINTS",
    "ReportFigure",
    "boxcox_profile_figure",
    "comparisons_figure",
    "endpoint_figures",
    "group_estimates_figure",
    "residual_quantile_figure",
    "residuals_of",
    "spread_figure",
]

# Our own palette: ink, a deep teal for estimates, an ochre for the second scale, a muted grey
# for reference lines and individual values.
_INK = "#23313b"
_TEAL = "#0f5e63"
_OCHRE = "#b5651d"
_GREY = "#8a949b"
_PALE = "#e6e1d6"

#: At most this many points are drawn per group (and in the quantile plot, ten times as many).
MAX_POINTS = 300

_RC = {
    "svg.fonttype": "none",
    "font.family": "sans-serif",
    "font.size": 9.0,
    "axes.edgecolor": _GREY,
    "axes.labelcolor": _INK,
    "axes.titlesize": 9.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlecolor": _INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": _PALE,
    "grid.linewidth": 0.8,
    "xtick.color": _INK,
    "ytick.color": _INK,
    "lines.linewidth": 1.4,
    "savefig.transparent": True,
}


@dataclass(frozen=True, slots=True, kw_only=True)
class ReportFigure:
    """One figure: its inline SVG text, a short title, a text alternative and a caption."""

    key: str
    svg: str
    title: str
    desc: str
    caption: str


# --------------------------------------------------------------------------------------------
# helpers


def _num(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    return float(x) if math.isfinite(x) else None


def _ci(block: Mapping[str, Any] | None, key: str = "ci") -> tuple[float | None, float | None]:
    if not isinstance(block, Mapping):
        return None, None
    ci = block.get(key)
    if not isinstance(ci, (list, tuple)) or len(ci) != 2:
        return None, None
    return _num(ci[0]), _num(ci[1])


def _short(x: float | None) -> str:
    return "not computable" if x is None else f"{x:.4g}"


def _figure(width: float, height: float, ncols: int = 1) -> tuple[Any, Any]:
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height))
    axes = [fig.add_subplot(1, ncols, i + 1) for i in range(ncols)]
    return fig, axes


def _to_svg(fig: Any, salt: str, title: str, desc: str) -> str:
    """``fig`` as SVG text to inline: no prolog or metadata, ids prefixed, a text alternative."""
    import matplotlib

    buffer = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": salt, "svg.fonttype": "none"}):
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    start = text.find("<svg")
    if start < 0:  # pragma: no cover - matplotlib always writes an svg element
        raise RuntimeError("matplotlib wrote no <svg> element")
    text = text[start:]
    text = re.sub(r"\s*<metadata>.*?</metadata>", "", text, count=1, flags=re.S)
    ident = re.sub(r"[^a-z0-9-]", "-", salt.lower())
    # matplotlib numbers its element ids per figure (figure_1, axes_1, ...): prefix them, and
    # every reference to them, so that several figures can share one page
    own = set(re.findall(r'\bid="([^"]+)"', text))

    def prefix(m: re.Match[str]) -> str:
        name = m.group(2)
        return f"{m.group(1)}{ident}-{name}{m.group(3)}" if name in own else m.group(0)

    text = re.sub(r'(\bid="|href="#|url\(#)([^")]+)(["\)])', prefix, text)
    head_end = text.find(">") + 1
    opening = text[:head_end]
    opening = opening.replace(
        "<svg ",
        f'<svg class="figure-svg" role="img" aria-labelledby="{ident}-title {ident}-desc" ',
        1,
    )
    alt = (f'\n <title id="{ident}-title">{escape(title)}</title>'
           f'\n <desc id="{ident}-desc">{escape(desc)}</desc>')
    return opening + alt + text[head_end:].rstrip() + "\n"


def _rc() -> Any:
    import matplotlib

    return matplotlib.rc_context(_RC)


def _levels(endpoint: Mapping[str, Any]) -> list[str]:
    return [str(g.get("level")) for g in endpoint.get("groups") or []]


def _panel_title(scale: str | None) -> str:
    """A short panel title: ``Analysis scale: log10``, ``Analysis scale: Box-Cox λ = -0.5``."""
    m = re.fullmatch(r"box_cox\(lambda=(.*)\)", str(scale))
    words = f"Box-Cox λ = {m.group(1)}" if m else _scale_words(scale).removesuffix(" scale")
    return f"Analysis scale: {words}"


def _scale_words(scale: str | None) -> str:
    m = re.fullmatch(r"box_cox\(lambda=(.*)\)", str(scale))
    if m:
        return f"Box-Cox scale, λ = {m.group(1)}"
    return {
        None: "analysis scale",
        "original": "original scale",
        "sqrt": "square-root scale",
        "log": "natural-log scale",
        "log10": "log10 scale",
        "reciprocal": "reciprocal scale",
        "arcsine_sqrt": "arcsine-square-root scale",
        "ranks": "ranks",
    }.get(scale, f"{scale} scale")


# --------------------------------------------------------------------------------------------
# figures


def _thin(values: Sequence[float], limit: int) -> tuple[list[float], bool]:
    """At most ``limit`` values: all of them, or ``limit`` evenly spaced order statistics."""
    if len(values) <= limit:
        return list(values), False
    ordered = sorted(values)
    last = len(ordered) - 1
    return [ordered[round(q * last / (limit - 1))] for q in range(limit)], True


def _jitter(count: int, width: float) -> list[float]:
    """Deterministic horizontal offsets in [-width/2, width/2): the fractional parts of
    k times the golden ratio, which spread any number of points evenly (no random numbers)."""
    golden = 0.6180339887498949
    return [((k * golden) % 1.0 - 0.5) * width for k in range(count)]


def _estimate_panel(ax: Any, groups: Sequence[Mapping[str, Any]], block: str, values_key: str,
                    colour: str, label: str) -> tuple[int, bool]:
    """Draw each group's values, mean and CI; return how many means and whether any group's
    values were thinned to quantiles."""
    drawn, thinned = 0, False
    for i, g in enumerate(groups):
        est = g.get(block)
        mean = _num(est.get("mean")) if isinstance(est, Mapping) else None
        values = g.get(values_key)
        if isinstance(values, (list, tuple)) and values:
            pts, cut = _thin([v for v in (_num(v) for v in values) if v is not None],
                             MAX_POINTS)
            thinned = thinned or cut
            ax.scatter([i - 0.2 + o for o in _jitter(len(pts), 0.22)], pts, s=11,
                       facecolors="none", edgecolors=_GREY, linewidths=0.8, zorder=2)
        if mean is None:
            continue
        lo, hi = _ci(est)
        if lo is not None and hi is not None:
            ax.vlines(i + 0.08, lo, hi, color=colour, linewidth=2.2, zorder=3)
            ax.hlines([lo, hi], i + 0.02, i + 0.14, color=colour, linewidth=1.2, zorder=3)
        ax.plot([i + 0.08], [mean], marker="D", markersize=5.5, color=colour, zorder=4)
        drawn += 1
    ax.set_xticks(range(len(groups)))
    ax.set_xticklabels([str(g.get("level")) for g in groups], rotation=20, ha="right")
    ax.set_xlim(-0.6, len(groups) - 0.4)
    ax.set_title(label)
    ax.grid(axis="x", visible=False)
    return drawn, thinned


def group_estimates_figure(endpoint: Mapping[str, Any], *, salt: str) -> ReportFigure | None:
    """Each group's values, mean and confidence interval, on the original and the analysis
    scale (a second panel when the analysis scale is a transformation).

    Returns ``None`` when no group has a mean.
    """
    groups = list(endpoint.get("groups") or [])
    if not any(isinstance(g.get("original"), Mapping) for g in groups):
        return None
    scale = endpoint.get("analysis_scale")
    two = scale not in (None, "original", "ranks") and any(
        isinstance(g.get("analysis"), Mapping) for g in groups)
    with _rc():
        fig, axes = _figure(7.2 if two else 4.6, 3.0, 2 if two else 1)
        _, thinned = _estimate_panel(axes[0], groups, "original", "values", _TEAL,
                                     "Original scale")
        if two:
            _, more = _estimate_panel(axes[1], groups, "analysis", "analysis_values", _OCHRE,
                                      _panel_title(scale))
            thinned = thinned or more
        fig.subplots_adjust(left=0.1, right=0.98, bottom=0.28, top=0.88, wspace=0.3)
        has_values = any(isinstance(g.get("values"), (list, tuple)) and g.get("values")
                         for g in groups)
        title = f"Group values, means and confidence intervals: {endpoint.get('endpoint')}"
        parts = []
        for g in groups:
            o = g.get("original") if isinstance(g.get("original"), Mapping) else {}
            lo, hi = _ci(o)
            parts.append(f"{g.get('level')}: n {g.get('n')}, mean {_short(_num(o.get('mean')))} "
                         f"(interval {_short(lo)} to {_short(hi)})")
        desc = "On the original scale, " + "; ".join(parts) + "."
        if two:
            desc += f" A second panel shows the same on the {_scale_words(scale)}."
        svg = _to_svg(fig, salt, title, desc)
    level = next((_num(g.get("ci_level")) for g in groups if _num(g.get("ci_level"))), None)
    pct = f"{100 * level:g}% " if level is not None else ""
    caption = ("Diamonds are group means, bars their " + pct + "confidence intervals"
               + ("; open grey circles beside them are the individual values, spread sideways "
                  "only so that equal values stay visible" if has_values else "")
               + (f" (groups of more than {MAX_POINTS} values are shown by {MAX_POINTS} evenly "
                  "spaced quantiles)" if thinned else "")
               + ". Look for groups whose intervals hardly overlap, for single values far from "
               "the rest, and, when there are two panels, for whether the picture changes with "
               "the scale.")
    return ReportFigure(key="estimates", svg=svg, title=title, desc=desc, caption=caption)


def spread_figure(endpoint: Mapping[str, Any], *, salt: str) -> ReportFigure | None:
    """Standard deviation against mean by group, on the original and the analysis scale.

    Spread that grows with the mean on the original scale is what a variance-stabilising
    transformation addresses; on a good analysis scale the points lie roughly level.
    """
    groups = list(endpoint.get("groups") or [])
    scale = endpoint.get("analysis_scale")

    def points(block: str) -> list[tuple[str, float, float]]:
        out = []
        for g in groups:
            est = g.get(block)
            if isinstance(est, Mapping):
                m, s = _num(est.get("mean")), _num(est.get("sd"))
                if m is not None and s is not None:
                    out.append((str(g.get("level")), m, s))
        return out

    original = points("original")
    if len(original) < 2:
        return None
    analysis = points("analysis") if scale not in (None, "original", "ranks") else []
    two = len(analysis) >= 2
    with _rc():
        fig, axes = _figure(7.2 if two else 4.6, 3.0, 2 if two else 1)
        panels = [(axes[0], original, _TEAL, "Original scale")]
        if two:
            panels.append((axes[1], analysis, _OCHRE, _panel_title(scale)))
        for ax, pts, colour, label in panels:
            ax.scatter([p[1] for p in pts], [p[2] for p in pts], s=28, color=colour, zorder=3)
            for name, m, s in pts:
                ax.annotate(name, (m, s), textcoords="offset points", xytext=(4, 4),
                            fontsize=7.5, color=_INK)
            ax.margins(x=0.25)
            ax.set_xlabel("group mean")
            ax.set_ylabel("group standard deviation")
            ax.set_title(label)
            top = max(p[2] for p in pts)
            ax.set_ylim(0, top * 1.25 if top > 0 else 1.0)
        fig.subplots_adjust(left=0.12 if two else 0.17, right=0.95, bottom=0.17, top=0.88,
                            wspace=0.38)
        title = f"Spread against mean by group: {endpoint.get('endpoint')}"

        def ratio(pts: list[tuple[str, float, float]]) -> str:
            sds = [p[2] for p in pts]
            return "not computable" if min(sds) <= 0 else f"{max(sds) / min(sds):.3g}"

        desc = (f"Largest to smallest group standard deviation on the original scale: "
                f"{ratio(original)}.")
        if two:
            desc += f" On the {_scale_words(scale)}: {ratio(analysis)}."
        svg = _to_svg(fig, salt, title, desc)
    caption = ("Each point is one group. If the standard deviation rises with the mean on the "
               "original scale, equal-variance methods are strained there; a suitable "
               "transformation makes the points lie roughly level.")
    return ReportFigure(key="spread", svg=svg, title=title, desc=desc, caption=caption)


def _normal_quantiles(n: int) -> list[float]:
    from statistics import NormalDist

    # Blom (1958) plotting positions (i - 3/8) / (n + 1/4)
    z = NormalDist()
    return [z.inv_cdf((i - 0.375) / (n + 0.25)) for i in range(1, n + 1)]


def residuals_of(endpoint: Mapping[str, Any]) -> tuple[list[float], str | None]:
    """The residuals of the one-way model, groups in level order, and their scale.

    Derived from results.json: each group's ``analysis_values`` (or, on the original scale,
    its ``values``) minus their mean (``math.fsum`` / n). For a rank test the residuals are
    those of the original values when the plan did not transform; a halted endpoint has none.
    """
    if endpoint.get("status") != "completed":
        return [], None
    groups = [g for g in endpoint.get("groups") or [] if isinstance(g, Mapping)]
    scale = endpoint.get("analysis_scale")
    t = endpoint.get("transform") if isinstance(endpoint.get("transform"), Mapping) else {}
    if scale == "ranks":
        if t.get("name") not in (None, "identity"):
            return [], None
        key, scale = "values", "original"
    elif scale == "original":
        key = "values"
    else:
        key = "analysis_values"
    out: list[float] = []
    for g in groups:
        raw = g.get(key)
        if not isinstance(raw, (list, tuple)):
            return [], None
        x = [v for v in (_num(v) for v in raw) if v is not None]
        if not x:
            continue
        mean = math.fsum(x) / len(x)
        out.extend(v - mean for v in x)
    return out, str(scale)


def residual_quantile_figure(endpoint: Mapping[str, Any], *, salt: str) -> ReportFigure | None:
    """Normal quantile plot of the residuals of the one-way model (see :func:`residuals_of`).

    More than ten times :data:`MAX_POINTS` residuals are drawn as that many evenly spaced
    order statistics, each at its own plotting position.
    """
    res, scale = residuals_of(endpoint)
    res.sort()
    n = len(res)
    if n < 3:
        return None
    q = _normal_quantiles(n)
    mean = sum(res) / n
    sd = math.sqrt(sum((r - mean) ** 2 for r in res) / (n - 1))  # centred sum of squares
    limit = 10 * MAX_POINTS
    pick = list(range(n)) if n <= limit else sorted(
        {round(i * (n - 1) / (limit - 1)) for i in range(limit)})
    words = _scale_words(scale) if scale != "original" else "original scale"
    with _rc():
        fig, axes = _figure(4.6, 3.2)
        ax = axes[0]
        ax.scatter([q[i] for i in pick], [res[i] for i in pick], s=14, facecolors="none",
                   edgecolors=_TEAL, linewidths=1.0, zorder=3)
        ends = [q[0], q[-1]]
        ax.plot(ends, [mean + sd * e for e in ends], color=_OCHRE, linestyle="--",
                linewidth=1.1)
        ax.set_xlabel("normal quantile (Blom positions)")
        ax.set_ylabel("residual")
        ax.set_title(f"Residuals ({words})")
        fig.subplots_adjust(left=0.16, right=0.97, bottom=0.16, top=0.88)
        title = f"Normal quantile plot of residuals: {endpoint.get('endpoint')}"
        desc = (f"{n} residuals on the {words} against normal quantiles; smallest "
                f"{res[0]:.4g}, largest {res[-1]:.4g}, standard deviation {sd:.4g}."
                + (f" {len(pick)} evenly spaced order statistics are drawn." if n > limit
                   else ""))
        svg = _to_svg(fig, salt, title, desc)
    caption = ("Each circle is one value minus its group mean, against the quantile a normal "
               "distribution would put there; the dashed line is where normally distributed "
               "residuals with this spread would lie. Look at the ends: a curve bending away "
               "from the line points to skew or heavy tails, which the normality check "
               "summarises in one p-value.")
    return ReportFigure(key="residuals", svg=svg, title=title, desc=desc, caption=caption)


def boxcox_profile_figure(endpoint: Mapping[str, Any], *, salt: str) -> ReportFigure | None:
    """The Box-Cox profile log-likelihood with the estimate, the lambda used and the interval.

    Needs ``transform.profile`` (``lambda`` and ``loglik`` lists of equal length; optional
    ``cutoff``, the log-likelihood the interval ends on).
    """
    t = endpoint.get("transform")
    if not isinstance(t, Mapping) or t.get("name") != "boxcox":
        return None
    profile = t.get("profile")
    if not isinstance(profile, Mapping):
        return None
    lams, ll = profile.get("lambda"), profile.get("loglik")
    if not isinstance(lams, (list, tuple)) or not isinstance(ll, (list, tuple)):
        return None
    pts = [(a, b) for a, b in ((_num(a), _num(b)) for a, b in zip(lams, ll))
           if a is not None and b is not None]
    if len(pts) < 3:
        return None
    chosen = _num(t.get("lambda"))
    estimate = _num(t.get("lambda_estimate"))
    cutoff = _num(profile.get("cutoff"))
    peak = _num(profile.get("loglik_max"))
    lo, hi = _ci(t, "lambda_ci")
    level = _num(profile.get("confidence_level"))
    pct = f"{100 * level:g}% " if level is not None else ""
    top = max(b for _, b in pts) if peak is None else max(peak, max(b for _, b in pts))
    # show the neighbourhood of the peak: down to four times the interval's depth (the curve
    # leaves the panel beyond it)
    depth = (top - cutoff) if cutoff is not None and top > cutoff else 2.0
    bottom = max(min(b for _, b in pts), top - 4.5 * depth)
    with _rc():
        fig, axes = _figure(5.4, 3.2)
        ax = axes[0]
        if lo is not None and hi is not None:
            ax.axvspan(lo, hi, color=_PALE, zorder=0, linewidth=0)
        ax.plot([p[0] for p in pts], [p[1] for p in pts], color=_TEAL, zorder=3)
        if cutoff is not None:
            ax.axhline(cutoff, color=_GREY, linestyle=":", linewidth=1.1, zorder=2)
            ax.annotate(f"{pct}cut-off", (pts[0][0], cutoff), textcoords="offset points",
                        xytext=(2, 3), fontsize=7.5, color=_INK)
        if estimate is not None:
            ax.axvline(estimate, color=_TEAL, linewidth=1.0, zorder=2)
            ax.annotate(f"estimate {estimate:.3g}", (estimate, top),
                        textcoords="offset points", xytext=(4, -10), fontsize=7.5, color=_TEAL)
        if chosen is not None:
            ax.axvline(chosen, color=_OCHRE, linestyle="--", linewidth=1.4, zorder=2)
            ax.annotate(f"used {chosen:.3g}", (chosen, bottom), textcoords="offset points",
                        xytext=(4, 4), fontsize=7.5, color=_OCHRE)
        ax.set_ylim(bottom - 0.04 * (top - bottom), top + 0.12 * (top - bottom))
        ax.set_xlim(pts[0][0], pts[-1][0])
        ax.set_xlabel("lambda (Box-Cox power)")
        ax.set_ylabel("profile log-likelihood")
        ax.set_title("Box-Cox profile under the one-way model")
        fig.subplots_adjust(left=0.15, right=0.97, bottom=0.16, top=0.88)
        title = f"Box-Cox profile log-likelihood: {endpoint.get('endpoint')}"
        desc = (f"The profile log-likelihood of lambda peaks at the estimate {_short(estimate)}; "
                f"its {pct}interval runs from {_short(lo)} to {_short(hi)}, where the curve "
                f"crosses the cut-off {_short(cutoff)}; the lambda used is {_short(chosen)}.")
        svg = _to_svg(fig, salt, title, desc)
    caption = ("The curve shows how well each power makes the groups look normal with equal "
               "spread; it peaks at the estimate (solid line). The shaded band is the "
               "interval, where the curve stays above the dotted cut-off; the dashed line is "
               "the lambda used, an interpretable value inside the band when the plan snaps. "
               "A wide band means the data say little about the scale.")
    return ReportFigure(key="boxcox", svg=svg, title=title, desc=desc, caption=caption)


def comparisons_figure(endpoint: Mapping[str, Any], *, salt: str) -> ReportFigure | None:
    """The simultaneous intervals of the follow-up comparisons, with the line of no difference.

    On a log scale the back-transformed ratios are drawn on a logarithmic axis with the line
    at one; otherwise the differences a − b on the analysis scale with the line at zero. An
    interval open on one side (a one-sided comparison) runs to the edge of the panel.
    """
    cmp = endpoint.get("comparisons")
    if not isinstance(cmp, Mapping) or not cmp.get("performed"):
        return None
    pairs = [p for p in cmp.get("pairs") or [] if isinstance(p, Mapping)]
    if not pairs:
        return None
    ratios = all(isinstance(p.get("back_transformed"), Mapping)
                 and p["back_transformed"].get("kind") == "ratio"
                 and _num(p["back_transformed"].get("estimate")) is not None for p in pairs)
    rows = []
    for p in pairs:
        block = p["back_transformed"] if ratios else p
        est = _num(block.get("estimate" if ratios else "difference"))
        lo, hi = _ci(block)
        rows.append((f"{p.get('a')} − {p.get('b')}" if not ratios
                     else f"{p.get('a')} / {p.get('b')}", est, lo, hi, bool(p.get("significant"))))
    known = [v for r in rows for v in r[1:4] if v is not None]
    if ratios:
        known = [v for v in known if v > 0]
    if not known:
        return None
    ref = 1.0 if ratios else 0.0
    lo_all, hi_all = min(known + [ref]), max(known + [ref])
    if ratios:
        pad = (math.log(hi_all) - math.log(lo_all)) * 0.08 or 0.1
        left, right = math.exp(math.log(lo_all) - pad), math.exp(math.log(hi_all) + pad)
    else:
        pad = (hi_all - lo_all) * 0.08 or 1.0
        left, right = lo_all - pad, hi_all + pad
    height = 1.0 + 0.32 * len(rows)
    with _rc():
        fig, axes = _figure(6.2, height)
        ax = axes[0]
        if ratios:
            ax.set_xscale("log")
        ax.axvline(ref, color=_GREY, linewidth=1.0)
        for y, (name, est, lo, hi, sig) in enumerate(reversed(rows)):
            colour = _TEAL if sig else _GREY
            a = lo if lo is not None else left
            b = hi if hi is not None else right
            ax.hlines(y, a, b, color=colour, linewidth=2.0)
            if est is not None:
                ax.plot([est], [y], marker="o", markersize=5, color=colour)
        ax.set_yticks(range(len(rows)))
        ax.set_yticklabels([r[0] for r in reversed(rows)])
        ax.set_ylim(-0.7, len(rows) - 0.3)
        ax.set_xlim(left, right)
        ax.grid(axis="y", visible=False)
        level = _num(cmp.get("confidence_level"))
        pct = f"{100 * level:g}% " if level is not None else ""
        ax.set_xlabel("ratio of back-transformed means" if ratios
                      else f"difference a − b ({_scale_words(endpoint.get('analysis_scale'))})")
        ax.set_title(f"{pct}simultaneous intervals")
        fig.subplots_adjust(left=0.34, right=0.97, bottom=0.5 / height + 0.05,
                            top=1 - 0.35 / height)
        title = f"Follow-up comparison intervals: {endpoint.get('endpoint')}"
        desc = "; ".join(f"{name}: {_short(est)} ("
                         f"{_short(lo) if lo is not None else 'unbounded below'} to "
                         f"{_short(hi) if hi is not None else 'unbounded above'})"
                         f"{', significant' if sig else ''}"
                         for name, est, lo, hi, sig in rows) + "."
        svg = _to_svg(fig, salt, title, desc)
    line = "one" if ratios else "zero"
    caption = (f"Each bar is one comparison's interval; teal bars are significant after "
               f"adjustment. An interval that does not cross the line at {line} marks a pair "
               "that differs.")
    return ReportFigure(key="comparisons", svg=svg, title=title, desc=desc, caption=caption)


def endpoint_figures(endpoint: Mapping[str, Any], *, index: int) -> tuple[list[ReportFigure],
                                                                           list[str]]:
    """All figures of one endpoint, and a plain note for each promised figure not drawn.

    ``index`` (the endpoint's position) makes every figure's ids unique within a page.
    """
    figures: list[ReportFigure] = []
    notes: list[str] = []
    makers = (
        ("estimates", group_estimates_figure),
        ("spread", spread_figure),
        ("residuals", residual_quantile_figure),
        ("boxcox", boxcox_profile_figure),
        ("comparisons", comparisons_figure),
    )
    t = endpoint.get("transform") if isinstance(endpoint.get("transform"), Mapping) else {}
    halted = endpoint.get("status") != "completed"
    for key, make in makers:
        fig = make(endpoint, salt=f"planrunner-e{index}-{key}")
        if fig is not None:
            figures.append(fig)
        elif key == "residuals" and halted:
            notes.append("No normal quantile plot of residuals: the plan halted for this "
                         "endpoint before its analysis.")
        elif key == "residuals" and endpoint.get("analysis_scale") == "ranks":
            notes.append("No normal quantile plot of residuals: the rank test analyses ranks "
                         "of transformed values, which results.json does not hold.")
        elif key == "residuals":
            notes.append("No normal quantile plot of residuals: fewer than three residuals.")
        elif key == "boxcox" and t.get("name") == "boxcox":
            notes.append("No Box-Cox profile: the lambda was not estimated for this endpoint.")
    return figures, notes
