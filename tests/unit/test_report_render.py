"""report.html and report.md rendered from a run folder: sections, links, refusal, size.

The run folders are built here with the real writers (planrunner.report.results.results_bytes
and planrunner.audit.log.DecisionLog), in the shapes the engine and the run produce; the
example plans in plans/ are also run end to end through planrunner.api.run_plan. The data are
invented.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import pytest
from markupsafe import escape

from planrunner.audit.log import DecisionLog, sha256_hex
from planrunner.errors import PlanError
from planrunner.report.render import (
    HTML_NAME,
    MARKDOWN_NAME,
    ReportRefused,
    build_view,
    fmt_ci,
    fmt_num,
    fmt_p,
    load_run,
    md_slug,
    render_reports,
)
from planrunner.report.results import CAUTIONS, RESULTS_FORMAT, results_bytes

PLANS = Path(__file__).resolve().parents[2] / "plans"
HEX = "ab" * 32
LEVELS = ["control", "low", "high"]
#: results.plan.settings as planrunner.report.results.plan_settings writes them
SETTINGS: dict[str, Any] = {
    "alpha": 0.05, "compare": "means", "omnibus": "classic", "when_variances_differ": "welch",
    "degenerate_groups": "halt", "outliers": {"rule": "none", "action": "flag"},
    "variance_check": {"method": "levene_median", "alpha": 0.05, "role": "gate"},
    "normality_check": {"method": "none"},
    "transform": {"policy": "ladder", "ladder": ["identity", "log10", "reciprocal"],
                  "shift": "auto"},
    "comparisons": {"method": "tukey_kramer", "only_after_significant_omnibus": True},
}


# --------------------------------------------------------------------------------------------
# a run folder in the real shapes


def _group(level: str, k: int, log: bool) -> dict[str, Any]:
    mean = 10.0 + 5.0 * k
    values = [mean + (1.0 + k) * f for f in (-1.3, -0.6, -0.1, 0.2, 0.5, 1.3)]
    out: dict[str, Any] = {
        "level": level, "n": 6, "n_missing": k % 2, "n_non_detects": 0, "ci_level": 0.95,
        "values": values, "analysis_values": None,
        "original": {"mean": mean, "sd": 1.0 + k, "se": (1.0 + k) / 6 ** 0.5,
                     "ci": [mean - 2.0, mean + 2.0]},
        "analysis": None, "back_transformed": None,
    }
    if log:
        out["analysis_values"] = [math.log10(v) for v in values]
        out["analysis"] = {"mean": 1.0 + 0.1 * k, "sd": 0.05, "se": 0.02,
                           "ci": [0.95 + 0.1 * k, 1.05 + 0.1 * k]}
        out["back_transformed"] = {"estimate": 10 ** (1.0 + 0.1 * k),
                                   "ci": [10 ** (0.95 + 0.1 * k), 10 ** (1.05 + 0.1 * k)],
                                   "label": "geometric mean"}
    return out


def make_endpoint(name: str, levels: list[str] = LEVELS, *, log: bool = True,
                  classic: bool = True, status: str = "completed") -> dict[str, Any]:
    """One endpoint dict in the engine's shape (see the engine's contract)."""
    scale = "log10" if log else "original"
    if status == "halted":
        return {
            "endpoint": name, "status": "halted",
            "halt_reason": "a group has fewer than min_n values", "compared": "means",
            "analysis_scale": "original", "groups": [_group(lv, k, False)
                                                     for k, lv in enumerate(levels)],
            "transform": {"name": "identity", "shift": 0.0, "lambda": None, "why": "",
                          "tried": [], "lambda_estimate": None, "lambda_ci": None,
                          "profile": None},
            "checks": [], "omnibus": None, "effect_sizes": [], "comparisons": None,
            "outliers": [], "sensitivity": [],
            "conclusion": {"text": "The plan halted for this endpoint.", "scale": None,
                           "significant": None},
            "across_endpoints": None,
        }
    pairs = []
    for i in range(len(levels)):
        for j in range(i + 1, len(levels)):
            d = -0.1 * (j - i)
            pairs.append({
                "a": levels[i], "b": levels[j], "difference": d, "se": 0.03,
                "statistic": d / 0.03, "df": 15.0, "ci": [d - 0.08, d + 0.08],
                "p_adjusted": 0.01 * (j + i), "significant": j - i > 1,
                "back_transformed": ({"kind": "ratio", "estimate": 10 ** d,
                                      "ci": [10 ** (d - 0.08), 10 ** (d + 0.08)]} if log
                                     else {"kind": "difference", "estimate": d,
                                           "ci": [d - 0.08, d + 0.08]}),
            })
    omnibus = {"method": "classic" if classic else "welch", "statistic": 9.5, "df1": 2.0,
               "df2": 15.0 if classic else 9.7, "pvalue": 0.0021, "significant": True,
               "alpha": 0.05, "ss_between": None, "ss_within": None, "ms_between": None,
               "ms_within": None, "r_squared": None, "residual_sd": None}
    if classic:
        omnibus.update(ss_between=0.12, ss_within=0.0948, ms_between=0.06,
                       ms_within=0.00632, r_squared=0.5587, residual_sd=0.0795)
    return {
        "endpoint": name, "status": "completed", "halt_reason": None,
        "compared": "geometric_means" if log else "means",
        "analysis_scale": scale,
        "groups": [_group(lv, k, log) for k, lv in enumerate(levels)],
        "transform": {"name": "log10" if log else "identity", "shift": 0.0, "lambda": None,
                      "why": "rung 2 of the ladder (log10): the first on which the gates passed"
                      if log else "the plan analyses the data as measured",
                      "tried": ["identity", "log10"] if log else [],
                      "lambda_estimate": None, "lambda_ci": None, "profile": None},
        "checks": [
            {"when": "before_transform", "method": "levene_median", "role": "gate",
             "statistic": 4.2, "critical_value": None, "pvalue": 0.035, "alpha": 0.05,
             "passed": False, "scale": "original", "computable": True, "reason": None},
            {"when": f"after_transform:{scale}", "method": "levene_median", "role": "gate",
             "statistic": 0.7, "critical_value": None, "pvalue": 0.51, "alpha": 0.05,
             "passed": True, "scale": scale, "computable": True, "reason": None},
        ],
        "omnibus": omnibus,
        "effect_sizes": [{"name": "omega_squared", "estimate": 0.49, "ci": [0.1, 0.7],
                          "confidence_level": 0.95, "clipped": False}],
        "comparisons": {"method": "tukey_kramer", "adjust": None, "confidence_level": 0.95,
                        "performed": True, "why": "the omnibus test was significant",
                        "pairs": pairs},
        "outliers": [],
        "sensitivity": [{"name": "always_welch", "scale": "original", "agrees_with_primary": True,
                         "omnibus": dict(omnibus, method="welch"), "comparisons": None}],
        "conclusion": {"text": f"On the log10 scale, the geometric means of {name} differ "
                       "between the groups (p = 0.0021, alpha = 0.05).",
                       "scale": scale, "significant": True},
        "across_endpoints": None,
    }


def _log_endpoint(log: DecisionLog, e: dict[str, Any]) -> None:
    name = e["endpoint"]
    log.decide(stage="describe", endpoint=name, plan_ref="data.min_n", outcome="usable",
               action="continue", reason="Every group has at least min_n = 3 values.")
    if e["status"] == "halted":
        log.decide(stage="describe", endpoint=name, plan_ref="data.degenerate_groups",
                   outcome="degenerate", action="halt", reason=e["halt_reason"])
        return
    log.decide(stage="check_assumptions", endpoint=name, plan_ref="variance_check",
               method="levene_median", statistic=4.2, threshold=0.05, p=0.035,
               outcome="failed", action="trying the next transformation in the ladder, log10",
               reason="On the original scale, Levene's test gives p = 0.035: variances differ.")
    log.decide(stage="transform", endpoint=name, plan_ref="transform.ladder.1", method="log10",
               statistic=0.0, outcome="applied", action="check again",
               reason="Rung 1 of the ladder: log10 is applied to every value.")
    log.decide(stage="transform", endpoint=name, plan_ref="variance_check",
               method="levene_median", statistic=0.7, threshold=0.05, p=0.51, outcome="passed",
               action="analysing the log10 scale",
               reason="On the log10 scale, Levene's test gives p = 0.51.")
    log.decide(stage="omnibus", endpoint=name, plan_ref="omnibus", method="classic",
               statistic=9.5, threshold=0.05, p=0.0021, outcome="significant",
               action="reject the hypothesis of equality", reason="F(2, 15) = 9.5, p = 0.0021.")
    log.decide(stage="follow_ups", endpoint=name, plan_ref="comparisons.method",
               method="tukey_kramer", statistic=1.0, threshold=0.05, outcome="performed",
               action="report 3 comparisons", reason="Tukey-Kramer made.")
    log.warn(stage="transform", endpoint=name, plan_ref="transform.policy",
             message="The scale was chosen by a data-driven ladder.")
    log.decide(stage="conclude", endpoint=name, plan_ref="alpha", method="classic",
               p=0.0021, threshold=0.05, outcome="difference_shown", action="report",
               reason=e["conclusion"]["text"])


def write_run(folder: Path, endpoints: list[dict[str, Any]], *, question: str = "Do they differ?",
              levels: list[str] = LEVELS, across: dict[str, Any] | None = None) -> Path:
    """Write results.json and a verified decisions.jsonl for ``endpoints`` into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    halted = [e["endpoint"] for e in endpoints if e["status"] == "halted"]
    results = {
        "format": RESULTS_FORMAT,
        "plan": {"id": "demo-report", "revision": 3, "title": "Demo trial", "question": question,
                 "fingerprint": HEX, "raw_sha256": "cd" * 32, "settings": SETTINGS},
        "data": {
            "file": "data/demo.csv", "sha256": "ef" * 32, "format": "csv", "group": "grp",
            "levels": levels, "rows_read": 20, "blank_rows": [],
            "excluded": [{"row": 7, "column": "y", "reason": "not a number: 'n/a'"}],
            "endpoints": [{"endpoint": e["endpoint"], "rows_used": 18,
                           "n": {lv: 6 for lv in levels},
                           "missing_dropped": {"count": 1, "rows": {lv: [] for lv in levels}},
                           "non_detects": [{"level": levels[0], "row": 4, "text": "<0.2",
                                            "limit": "0.2", "value": "0.1"}]}
                          for e in endpoints],
        },
        "status": "halted" if halted else "completed",
        "halted_endpoints": halted,
        "endpoints": endpoints,
        "across_endpoints": across,
        "cautions": list(CAUTIONS),
    }
    content = results_bytes(results)
    (folder / "results.json").write_bytes(content)
    log = DecisionLog(folder / "decisions.jsonl")
    log.start(plan_file="plans/demo.yaml", plan_sha256=HEX, plan_raw_sha256="cd" * 32,
              data_file="data/demo.csv", data_sha256="ef" * 32, time_utc="2027-03-01T09:30:00Z",
              operator={"name": "analyst", "source": "option"},
              command=["planrunner", "run", "plans/demo.yaml"],
              software={"planrunner": "0.1.0", "numpy": "2.0.0", "scipy": "1.17.0"},
              plan_id="demo-report",
              lock={"state": "differs", "locked_sha256": "12" * 32, "current_sha256": HEX,
                    "locked_at_utc": "2027-02-01T08:00:00Z", "locked_commit": None,
                    "lock_file": "plans/demo.yaml.lock.json"})
    log.deviation(reason="The alpha was corrected after a typo was found.",
                  differs="the plan's fingerprint differs from the locked fingerprint")
    log.warn(stage="plan", plan_ref="variance_check.role",
             message="The test is chosen after a preliminary test.")
    for e in endpoints:
        _log_endpoint(log, e)
    if halted:
        log.finish(status="halted", exit_code=4, results_sha256=sha256_hex(content),
                   reason="halted by the plan")
    else:
        log.finish(status="completed", exit_code=0, results_sha256=sha256_hex(content))
    return folder


@pytest.fixture
def run_dir(tmp_path: Path) -> Path:
    return write_run(tmp_path / "run", [make_endpoint("yield_g"),
                                       make_endpoint("ash_pct", log=False, classic=False)],
                     across={"method": "holm", "endpoints": ["yield_g", "ash_pct"],
                             "pvalues": [0.0021, 0.0021], "p_adjusted": [0.0042, 0.0042],
                             "significant": [True, True]})


def _svgs(html: str) -> list[str]:
    return re.findall(r"<svg\b.*?</svg>", html, flags=re.S)


# --------------------------------------------------------------------------------------------
# files and sections


def test_render_writes_both_files(run_dir: Path) -> None:
    paths = render_reports(run_dir)
    assert paths == [run_dir / HTML_NAME, run_dir / MARKDOWN_NAME]
    html = paths[0].read_text(encoding="utf-8")
    assert html.startswith("<!DOCTYPE html>")
    assert paths[1].read_text(encoding="utf-8").startswith("# Demo trial\n")


def test_render_is_deterministic(run_dir: Path) -> None:
    first = [p.read_bytes() for p in render_reports(run_dir)]
    second = [p.read_bytes() for p in render_reports(run_dir)]
    assert first == second


def test_html_has_every_section(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    for text in (
        "The question and the plan", "Do they differ?", "revision 3", HEX,
        "the plan differs from its lock; a deviation was declared",
        "The alpha was corrected after a typo was found.",
        "The data", "not a number: &#39;n/a&#39;", "Non-detects replaced",
        "The path the plan took", "Assumption checks", "Before any transformation",
        "After transformation",
        # the variance table in our own words
        "Between groups", "Within groups", "Degrees of freedom", "Sum of squared deviations",
        "Mean square", "F ratio", "p-value",
        "Follow-up comparisons: Tukey-Kramer", "Difference a − b", "Adjusted p-value",
        "Ratio a / b, back-transformed", "Effect sizes", "omega squared (ω²)",
        "Geometric mean (interval)", "Mean, base-10 logarithm scale (interval)",
        "This holds for the geometric means on the base-10 logarithm scale",
        "Adjustment across endpoints", "Holm",
        "Run record and software", "scipy", "1.17.0",
        "How far these results reach",
        "does not replace it",
    ):
        assert text in html, text
    for caution in CAUTIONS:
        assert caution.replace("'", "&#39;") in html
    # the Welch endpoint has no sums of squares: one variance table only
    assert html.count("Sum of squared deviations") == 1
    assert "This test does not split the variation into sums of squares." in html


def test_decision_path_links_every_node_to_a_log_row(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    _, records = load_run(run_dir)
    ids = set(re.findall(r'id="(decision-\d+)"', html))
    assert ids == {f"decision-{r['seq']}" for r in records}  # every record listed once
    assert len(re.findall(r'id="decision-\d+"', html)) == len(records)
    path_svgs = [s for s in _svgs(html) if 'class="path-svg"' in s]
    assert len(path_svgs) == 2
    for svg in path_svgs:
        targets = re.findall(r'<a href="#(decision-\d+)">', svg)
        assert targets and set(targets) <= ids
    first = path_svgs[0]
    decisions = [r for r in records if r["kind"] == "decision" and r["endpoint"] == "yield_g"]
    # every decision of the endpoint is drawn and linked; warnings are not decisions
    for r in decisions:
        assert f'<a href="#decision-{r["seq"]}"><tspan>#{r["seq"]}</tspan></a>' in first
    # the whole ladder of the plan: identity tried and failed, log10 taken, reciprocal muted
    assert '1. as measured' in first and '2. log10' in first and '3. reciprocal' in first
    rects = re.findall(r'<rect class="path-node path-(\w+)"[^>]*>\s*<text[^>]*>([^<]*)<', first)
    state = {title: st for st, title in rects}
    assert state["1. as measured"] == "tried"
    assert state["2. log10"] == "taken"
    assert state["3. reciprocal"] == "muted"
    assert state["yes: Welch's ANOVA".replace("'", "&#39;")] == "muted"
    assert state["no difference shown"] == "muted" and state["difference shown"] == "taken"
    # the path is drawn as arrows between the taken boxes, and the climb along the ladder
    assert first.count('class="edge-taken"') == sum(1 for st, _ in rects if st == "taken") - 1
    assert first.count('class="edge-climb"') == 1


def test_overview_links_to_each_endpoint(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    for n in (1, 2):
        assert f'<a href="#endpoint-{n}">' in html
        assert f'<section class="endpoint" id="endpoint-{n}">' in html
    overview = html.split('<section id="overview">')[1].split("</section>")[0]
    assert overview.count("<tr>") == 3  # header and two endpoints
    assert "0.0042" in overview  # adjusted across endpoints


def test_html_references_nothing_outside(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    refs = re.findall(r'\b(?:src|href|xlink:href)\s*=\s*"([^"]*)"', html)
    assert refs and all(r.startswith("#") for r in refs), [r for r in refs if r[:1] != "#"]
    lowered = html.lower()
    assert "<script" not in lowered
    assert "<link" not in lowered and "@import" not in lowered and "url(http" not in lowered
    assert "@media print" in html


def test_every_svg_is_valid_and_described(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    svgs = _svgs(html)
    assert len(svgs) >= 6  # two decision paths and matplotlib figures
    ns = "{http://www.w3.org/2000/svg}"
    for svg in svgs:
        root = ET.fromstring(svg)
        assert root.tag == f"{ns}svg"
        assert root.get("role") == "img"
        assert root.find(f"{ns}title") is not None and root.find(f"{ns}desc") is not None
        assert "<?xml" not in svg and "<!DOCTYPE" not in svg
    ids = re.findall(r'\bid="([^"]+)"', html)
    assert len(ids) == len(set(ids)), "ids repeat within the page"


def test_every_promised_figure_is_drawn(run_dir: Path) -> None:
    html = render_reports(run_dir, formats=("html",))[0].read_text(encoding="utf-8")
    for n in (1, 2):
        for key in ("estimates", "spread", "residuals", "comparisons"):
            block = html.split(f'<figure id="endpoint-{n}-fig-{key}">')[1].split("</figure>")[0]
            assert "<svg " in block and "<figcaption>" in block
    assert "does not carry" not in html and "not drawn" not in html
    # the individual values are drawn: one marker per value in matplotlib's point groups
    estimates = html.split('<figure id="endpoint-1-fig-estimates">')[1].split("</figure>")[0]
    root = ET.fromstring(_svgs(estimates)[0])
    ns = "{http://www.w3.org/2000/svg}"
    markers = sum(len(g.findall(f".//{ns}use")) for g in root.iter(f"{ns}g")
                  if "PathCollection" in (g.get("id") or ""))
    assert markers == 2 * 18  # 18 values on each of the two scales


def test_halted_endpoint_renders(tmp_path: Path) -> None:
    folder = write_run(tmp_path / "run", [make_endpoint("yield_g"),
                                          make_endpoint("ash_pct", status="halted")])
    html_path, md_path = render_reports(folder)
    html = html_path.read_text(encoding="utf-8")
    md = md_path.read_text(encoding="utf-8")
    assert "The plan halted for this endpoint." in html
    assert "a group has fewer than min_n values" in html and "a group has fewer" in md
    assert "The plan stopped itself on ash\\_pct" in md


# --------------------------------------------------------------------------------------------
# refusal


def test_refuses_a_tampered_log(run_dir: Path) -> None:
    log = run_dir / "decisions.jsonl"
    lines = log.read_text(encoding="utf-8").splitlines(keepends=True)
    bad = next(i for i, line in enumerate(lines) if "Levene" in line)
    lines[bad] = lines[bad].replace("Levene", "Levenne")
    log.write_text("".join(lines), encoding="utf-8")
    with pytest.raises(ReportRefused, match="fails verification") as info:
        render_reports(run_dir)
    assert isinstance(info.value, PlanError) and info.value.exit_code == 2
    assert f"line {bad + 1}" in str(info.value)
    assert not (run_dir / HTML_NAME).exists() and not (run_dir / MARKDOWN_NAME).exists()


def test_refuses_results_that_differ_from_the_log(run_dir: Path) -> None:
    path = run_dir / "results.json"
    path.write_text(path.read_text(encoding="utf-8").replace("0.0021", "0.0022"),
                    encoding="utf-8")
    with pytest.raises(ReportRefused, match="fails verification"):
        render_reports(run_dir)


def test_refuses_a_missing_run_folder_or_file(tmp_path: Path, run_dir: Path) -> None:
    with pytest.raises(ReportRefused, match="not a run folder"):
        render_reports(tmp_path / "nowhere")
    (run_dir / "decisions.jsonl").unlink()
    with pytest.raises(ReportRefused, match="holds no decisions.jsonl"):
        render_reports(run_dir)


def test_unknown_format_is_misuse(run_dir: Path) -> None:
    with pytest.raises(PlanError, match="'pdf' is not known"):
        render_reports(run_dir, formats=("pdf",))
    assert render_reports(run_dir, formats=("json",)) == []
    assert render_reports(run_dir, formats=("md",)) == [run_dir / MARKDOWN_NAME]


# --------------------------------------------------------------------------------------------
# markdown


def test_markdown_outcome_first_and_tables(run_dir: Path) -> None:
    md = render_reports(run_dir, formats=("markdown",))[0].read_text(encoding="utf-8")
    lines = md.splitlines()
    assert lines[0] == "# Demo trial"
    assert lines[2].startswith("**Outcome (completed).**")
    assert lines[4].startswith("| Endpoint | Path taken |")
    assert "| [yield\\_g](#1-yield_g) |" in md and "### 1. yield\\_g" in md
    assert "| Between groups | 2 |" in md and "| Within groups | 15 |" in md
    assert "0.0042 (Holm)" in md
    for caution in CAUTIONS:
        assert caution in md


def test_markdown_stays_short_for_twenty_endpoints(tmp_path: Path) -> None:
    endpoints = [make_endpoint(f"analyte_{i:02d}", levels=["a", "b", "c", "d"], log=i % 2 == 0)
                 for i in range(20)]
    folder = write_run(tmp_path / "run", endpoints, levels=["a", "b", "c", "d"])
    md = render_reports(folder, formats=("markdown",))[0].read_text(encoding="utf-8")
    lines = md.splitlines()
    assert len(lines) < 300, len(lines)
    rows = [line for line in lines if line.startswith("| [analyte")]
    assert len(rows) == 20
    headings = [line[4:] for line in lines if line.startswith("### ")]
    assert len(headings) == 20
    for row, heading in zip(rows, headings):
        target = re.search(r"\]\(#([^)]+)\)", row).group(1)
        assert target == md_slug(heading.replace("\\", ""))


# --------------------------------------------------------------------------------------------
# number formatting and the view


def test_number_formatting() -> None:
    assert fmt_num(None) == "—" and fmt_num(3) == "3" and fmt_num(True) == "yes"
    assert fmt_num(504.16666) == "504.2" and fmt_num(61409.458) == "61409"
    assert fmt_num(-8.643e-05) == "-8.643e-05" and fmt_num(0.0) == "0"
    assert fmt_p(0.013324) == "0.0133" and fmt_p(3e-7) == "< 0.0001" and fmt_p(None) == "—"
    assert fmt_ci([1.0, 2.5]) == "1 to 2.5" and fmt_ci([None, None]) == "—"
    assert fmt_ci([-0.0021, None], open_ends=True) == "-0.0021 to +∞"


def test_view_path_text(run_dir: Path) -> None:
    results, records = load_run(run_dir)
    view = build_view(results, records)
    first = view["endpoints"][0]
    assert first["path_text"] == ("Levene (median) failed → log10 → Levene (median) passed → "
                                  "ANOVA (equal variances) → Tukey-Kramer")
    assert view["deviations"][0]["reason"].startswith("The alpha was corrected")


def test_tree_without_settings_still_draws_every_decision(tmp_path: Path) -> None:
    # a results file whose plan carries no settings: each record gets a box of its own step
    folder = write_run(tmp_path / "run", [make_endpoint("yield_g")])
    results, records = load_run(folder)
    del results["plan"]["settings"]
    view = build_view(results, records)
    nodes = view["endpoints"][0]["layout"]["nodes"]
    held = {s for n in nodes for s in n["seqs"]}
    decisions = {r["seq"] for r in records if r["kind"] == "decision" and r.get("endpoint")}
    assert decisions <= held
    assert all(n["link"] in {r["seq"] for r in records} for n in nodes if n["link"] is not None)


def test_tree_of_a_box_cox_plan_mutes_the_powers_not_used(tmp_path: Path) -> None:
    from planrunner.report.tree import plan_tree_layout

    settings = dict(SETTINGS, transform={"policy": "box_cox", "lambda_bounds": [-2.0, 2.0],
                                         "ci_level": 0.95, "rounding": "snap",
                                         "snap_values": [-1.0, -0.5, 0.0, 0.5, 1.0],
                                         "shift": "none"})
    endpoint = make_endpoint("y", log=False)
    endpoint["transform"].update(name="boxcox", **{"lambda": -0.5})
    records = [
        {"kind": "decision", "seq": 3, "stage": "describe", "outcome": "usable"},
        {"kind": "decision", "seq": 4, "stage": "check_assumptions", "method": "levene_median",
         "plan_ref": "variance_check.role", "outcome": "passed", "p": 0.12},
        {"kind": "decision", "seq": 5, "stage": "transform", "method": "box_cox",
         "plan_ref": "transform.rounding", "statistic": -0.28, "threshold": -0.5,
         "outcome": "snapped"},
        {"kind": "decision", "seq": 6, "stage": "transform", "method": "levene_median",
         "plan_ref": "variance_check", "outcome": "passed", "p": 0.15},
        {"kind": "decision", "seq": 7, "stage": "omnibus", "method": "classic",
         "outcome": "significant", "p": 0.001},
    ]
    layout = plan_tree_layout(endpoint, records, settings)
    by_title = {n["title"]: n for n in layout["nodes"]}
    assert by_title["λ = -0.5"]["state"] == "taken" and by_title["λ = -0.5"]["seqs"] == [5, 6]
    assert by_title["λ = -0.5"]["detail"] == "λ̂ -0.28 snapped"
    for other in ("λ = -1", "λ = 0", "λ = 0.5", "λ = 1", "λ as estimated"):
        assert by_title[other]["state"] == "muted" and by_title[other]["link"] == 5
    assert by_title["checks reported only"]["seqs"] == [4]
    assert by_title["no: keep the planned test"]["state"] == "taken"


# --------------------------------------------------------------------------------------------
# the example plans, end to end


@pytest.mark.parametrize("plan", sorted(PLANS.glob("*.yaml")), ids=lambda p: p.stem)
def test_example_plans_render_end_to_end(plan: Path, tmp_path: Path) -> None:
    from planrunner.api import run_plan

    out = tmp_path / plan.stem
    outcome = run_plan(plan, out=out, operator="tester", command=["planrunner", "run"])
    assert outcome.exit_code in (0, 4)
    html_path, md_path = render_reports(out)
    html = html_path.read_text(encoding="utf-8")
    md = md_path.read_text(encoding="utf-8")
    for svg in _svgs(html):
        ET.fromstring(svg)
    refs = re.findall(r'\b(?:src|href|xlink:href)\s*=\s*"([^"]*)"', html)
    assert all(r.startswith("#") for r in refs)
    results, records = load_run(out)
    for e in results["endpoints"]:
        assert e["endpoint"] in html
        assert str(escape(e["conclusion"]["text"])) in html
    for r in records:
        assert f'id="decision-{r["seq"]}"' in html
    assert md.splitlines()[0] == f"# {results['plan']['title']}".replace("_", "\\_")
