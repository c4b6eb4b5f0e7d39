"""A plan's decision tree in plain words.

:func:`describe_plan` turns a validated :class:`~planrunner.plan.model.Plan` into an ordered
tuple of :class:`Step` objects, one per stage the run goes through, each naming the part of the
plan it comes from; :func:`render_steps` numbers them as text. The wording is meant for the
people who sign off a plan, so it says what happens on every branch, not how it is computed.
"""

from __future__ import annotations

from dataclasses import dataclass

from .model import Plan

_CHECK_NAMES = {
    "hartley_fmax": "Hartley's Fmax",
    "levene_median": "the median-centred Levene test (Brown-Forsythe)",
    "levene_mean": "the mean-centred Levene test",
    "bartlett": "Bartlett's test",
    "fligner_killeen": "the Fligner-Killeen test",
    "shapiro_wilk": "the Shapiro-Wilk test",
}
_OMNIBUS_NAMES = {
    "classic": "the classic one-way ANOVA (pooled variance)",
    "welch": "Welch's ANOVA",
    "kruskal_wallis": "the Kruskal-Wallis test",
}
_FALLBACK_WORDS = {
    "welch": "use Welch's ANOVA",
    "kruskal_wallis": "use the Kruskal-Wallis test (the hypothesis becomes one about locations)",
    "halt": "halt the plan",
}
_TRANSFORM_WORDS = {
    "identity": "the data as measured",
    "sqrt": "the square root",
    "log": "the natural log",
    "log10": "log10",
    "reciprocal": "the reciprocal",
    "arcsine_sqrt": "the arcsine of the square root",
}
_COMPARISON_NAMES = {
    "tukey_kramer": "Tukey-Kramer",
    "games_howell": "Games-Howell",
    "pairwise_t": "t tests",
    "dunnett": "Dunnett's test",
}
_ADJUST_NAMES = {"bonferroni": "Bonferroni", "holm": "Holm", "sidak": "Šidák"}
_EFFECT_NAMES = {
    "eta_squared": "eta squared",
    "omega_squared": "omega squared",
    "cohens_f": "Cohen's f",
}
_SENSITIVITY_WORDS = {
    "always_classic": "the classic ANOVA whatever the checks say",
    "always_welch": "Welch's ANOVA whatever the checks say",
    "always_kruskal_wallis": "the Kruskal-Wallis test whatever the checks say",
    "untransformed": "the same analysis on the untransformed data",
    "outliers_kept": "the same analysis with the removed outliers kept",
}
_COMPARE_WORDS = {
    "means": "group means",
    "geometric_means": "geometric means (means of logs)",
    "locations": "group locations (rank-based)",
}


@dataclass(frozen=True, slots=True)
class Step:
    """One stage of the plan: what happens, in plain words, and where the plan says so."""

    stage: str
    plan_ref: str
    text: str


def _join(words: list[str], last: str = "and") -> str:
    if len(words) <= 1:
        return "".join(words)
    return ", ".join(words[:-1]) + f" {last} " + words[-1]


def _quoted(items: list[str]) -> str:
    return _join([f"'{x}'" for x in items])


def _number(x: float) -> str:
    return f"{x:g}"


def describe_plan(plan: Plan) -> tuple[Step, ...]:
    """The plan's decision tree as ordered steps."""
    d, h = plan.data, plan.hypotheses
    steps: list[Step] = []

    def add(stage: str, ref: str, text: str) -> None:
        steps.append(Step(stage, ref, text))

    # what is asked
    family = {
        "omnibus": "whether all groups share one value",
        "all_pairs": "every pair of groups",
        "against_control": f"each group against the control '{d.control}'",
    }[h.family]
    sides = {
        "two_sided": "in either direction",
        "greater": "for an increase over the control",
        "less": "for a decrease below the control",
    }[h.alternative]
    if h.confirmatory is True:
        status = "confirmatory"
    elif h.confirmatory is False:
        status = "exploratory"
    else:
        status = f"confirmatory for {_quoted(list(h.confirmatory))}, exploratory otherwise"
    add("hypotheses", "hypotheses",
        f"Compare {_COMPARE_WORDS[plan.compare]}: test {family} {sides}, at alpha "
        f"{_number(plan.alpha)} with {_number(100 * (plan.ci_level or 0))}% confidence "
        f"intervals; the results are {status}.")

    # data
    kind = d.response_kind + (f", {d.response_units}" if isinstance(d.response_units, str)
                              else "")
    unit = f"; each row is one {d.experimental_unit}" if d.experimental_unit else ""
    missing = ("rows with an empty response are left out and counted" if d.missing == "drop"
               else "an empty response rejects the data")
    nd = d.non_detects
    if nd.rule == "reject":
        nd_words = "a non-detect such as '<0.5' or 'ND' rejects the data"
    else:
        nd_words = (f"a non-detect such as '<0.5' is replaced by {_number(nd.fraction)} times "
                    "its limit")
        nd_words += (f" ('ND' alone by {_number(nd.fraction)} times {_number(nd.limit)})"
                     if nd.limit is not None else " ('ND' without a number rejects the data)")
    degenerate = "rejects the data" if d.degenerate_groups == "reject" else "halts the plan"
    add("data", "data",
        f"Read {d.file}: groups from column '{d.group}' ({_join(list(d.levels))}), response "
        f"{_quoted(list(d.response))} ({kind}){unit}. {missing.capitalize()}; {nd_words}. A "
        f"group with fewer than {d.min_n} values or with no spread {degenerate}.")

    # outliers
    o = plan.outliers
    if o.rule == "none":
        add("outliers", "outliers", "Do not screen for outliers.")
    else:
        fate = ("flag them in the report and keep them" if o.action == "flag"
                else "remove them before every later step and list them in the report")
        add("outliers", "outliers",
            f"Find values whose externally studentized residual exceeds {_number(o.threshold)} "
            f"in absolute value; {fate}.")

    # transform
    t = plan.transform
    if t.policy == "none":
        add("transform", "transform", "Analyse the data on the scale they were measured.")
    elif t.policy == "fixed":
        add("transform", "transform",
            f"Analyse {_TRANSFORM_WORDS[t.transform]} of every value"
            f"{_shift_words(t.shift, [t.transform])}.")
    elif t.policy == "ladder":
        first, rest = t.ladder[0], t.ladder[1:]
        text = f"Start with {_TRANSFORM_WORDS[first]}"
        if rest:
            text += (f"; the gates below decide whether to move on to "
                     f"{_join([_TRANSFORM_WORDS[r] for r in rest], 'then')}")
        add("transform", "transform", text + f"{_shift_words(t.shift, t.ladder)}.")
    else:
        low, high = t.lambda_bounds
        rounding = (f"then use the nearest of {', '.join(_number(v) for v in t.snap_values)} "
                    "inside that interval (the estimate itself when none is inside)"
                    if t.rounding == "snap" else "then use the estimate as it is")
        add("transform", "transform",
            f"Estimate the Box-Cox lambda between {_number(low)} and {_number(high)} with a "
            f"{_number(100 * t.ci_level)}% interval, {rounding}; analyse the transformed "
            f"values{_shift_words(t.shift, ['box_cox'])}.")

    ladder_left = t.policy == "ladder" and len(t.ladder) > 1

    # variance check
    v = plan.variance_check
    if v.method == "none":
        add("variance_check", "variance_check", "Do not test whether the variances are equal.")
    elif v.role == "describe":
        add("variance_check", "variance_check",
            f"Test equal variances with {_CHECK_NAMES[v.method]} at {_number(v.alpha)}, for "
            "the report only; the outcome changes nothing.")
    else:
        text = f"Check equal variances with {_CHECK_NAMES[v.method]} at {_number(v.alpha)}"
        if v.method == "hartley_fmax":
            text += (" (with unequal group sizes, the exact distribution for unequal "
                     "degrees of freedom)" if v.unequal_n == "exact" else
                     " (with unequal group sizes, degrees of freedom from the smallest group)")
        text += "; if they differ, "
        if ladder_left:
            rungs = _join([_TRANSFORM_WORDS[r] for r in t.ladder[1:]], "then")
            text += f"try {rungs}, checking again after each; if they still differ, "
        text += _FALLBACK_WORDS[plan.when_variances_differ] + "."
        add("variance_check", "variance_check", text)

    # normality check
    n = plan.normality_check
    if n.method == "none":
        add("normality_check", "normality_check", "Do not test normality.")
    else:
        on = ("the residuals of the one-way model" if n.applies_to == "residuals"
              else "each group separately")
        if n.role == "describe":
            add("normality_check", "normality_check",
                f"Test normality of {on} with {_CHECK_NAMES[n.method]} at {_number(n.alpha)}, "
                "for the report only.")
        else:
            fail = {
                "transform": "move to the next rung of the transform ladder and check again",
                "kruskal_wallis": "use the Kruskal-Wallis test instead (the hypothesis becomes "
                                  "one about locations)",
                "halt": "halt the plan",
            }[n.if_not_normal]
            add("normality_check", "normality_check",
                f"Check normality of {on} with {_CHECK_NAMES[n.method]} at {_number(n.alpha)}; "
                f"if it fails, {fail}.")

    # omnibus
    redirect = " unless a check above redirects it" if plan.gates else ""
    add("omnibus", "omnibus",
        f"Test whether the {_COMPARE_WORDS[plan.compare]} are all equal with "
        f"{_OMNIBUS_NAMES[plan.omnibus]} at {_number(plan.alpha)}{redirect}.")

    # comparisons
    c = plan.comparisons
    if c.method == "none":
        add("comparisons", "comparisons", "Make no follow-up comparisons between groups.")
    else:
        pairs = (f"each group with the control '{d.control}'"
                 if h.family == "against_control" or c.method == "dunnett"
                 else "every pair of groups")
        how = _COMPARISON_NAMES[c.method]
        if c.method == "pairwise_t":
            term = "Welch t for each pair" if c.error_term == "per_pair" else "a pooled variance"
            how = f"t tests ({term}) with {_ADJUST_NAMES[c.adjust]}-adjusted p-values"
        when = (" only if the omnibus test is significant" if c.only_after_significant_omnibus
                else ", whatever the omnibus result")
        scale = (" Differences of logs are also shown back-transformed, as ratios of "
                 "geometric means." if t.policy == "fixed" and t.transform in ("log", "log10")
                 else "")
        add("comparisons", "comparisons",
            f"Compare {pairs} with {how}{when}; report each difference (a - b, in level order) "
            f"with its {_number(100 * (plan.ci_level or 0))}% confidence interval.{scale}")

    # effect sizes
    if plan.effect_sizes:
        add("effect_sizes", "effect_sizes",
            f"Report {_join([_EFFECT_NAMES[e] for e in plan.effect_sizes])} with confidence "
            "intervals.")
    else:
        add("effect_sizes", "effect_sizes", "Report no effect sizes.")

    # several endpoints
    if len(d.response) > 1:
        adjust = {
            "none": "without an adjustment across them",
            "holm": "adjusting across the confirmatory endpoints by Holm's method",
            "benjamini_hochberg": "controlling the false discovery rate across the "
                                  "confirmatory endpoints (Benjamini-Hochberg)",
        }[h.across_endpoints]
        add("endpoints", "hypotheses.across_endpoints",
            f"Run these steps separately for each of the {len(d.response)} endpoints, "
            f"{adjust}.")

    # sensitivity
    if plan.sensitivity:
        add("sensitivity", "sensitivity",
            "Beside the primary analysis, also report "
            f"{_join([_SENSITIVITY_WORDS[s] for s in plan.sensitivity])}.")
    return tuple(steps)


def _shift_words(shift: str | float, names: list[str]) -> str:
    if not set(names) & {"log", "log10", "reciprocal", "box_cox"}:
        return ""  # square roots and identity take zeros as they are
    if shift == "auto":
        return " (adding a recorded constant first if values are zero or negative)"
    if shift == "none":
        return " (adding nothing: zero or negative values are outside its domain)"
    return f" (adding {_number(float(shift))} first if values are zero or negative)"


def render_steps(steps: tuple[Step, ...] | list[Step], *, indent: str = "") -> str:
    """The steps as numbered lines."""
    width = len(str(len(steps)))
    return "\n".join(f"{indent}{i:>{width}}. {s.text}" for i, s in enumerate(steps, 1))


__all__ = ["Step", "describe_plan", "render_steps"]
