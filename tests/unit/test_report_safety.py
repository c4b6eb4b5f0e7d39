"""Text from the plan and the data is shown as text in both reports, never as markup.

Group names, endpoint (column) names and plan text holding HTML, quotes, pipes, line breaks
or non-ASCII letters are rendered escaped: in the HTML body, inside the inline SVG figures,
and in the Markdown tables. The run folders are built with the real writers; the data are
invented.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import pytest

from planrunner.audit.log import DecisionLog, sha256_hex
from planrunner.report.html import html_environment
from planrunner.report.markdown import markdown_environment, md_text
from planrunner.report.render import render_reports
from planrunner.report.results import CAUTIONS, RESULTS_FORMAT, results_bytes

SCRIPT = "<script>alert(1)</script>"
LEVELS = [SCRIPT, 'say "hi" & <b>bye</b>', "Größe µg/L — ü", "a|b\nc"]
ENDPOINT = "<img src=x onerror=alert(2)>_mg"
QUESTION = "Does <em>anything</em> differ? 'quotes' & \"double\" | pipes"


def _endpoint() -> dict[str, Any]:
    groups, pairs = [], []
    for k, level in enumerate(LEVELS):
        m = 10.0 + k
        groups.append({"level": level, "n": 5, "n_missing": 0, "n_non_detects": 0,
                       "original": {"mean": m, "sd": 1.0, "se": 0.45, "ci": [m - 1.2, m + 1.2]},
                       "analysis": None, "back_transformed": None,
                       "values": [m - 1, m - 0.5, m, m + 0.5, m + 1]})
    for i in range(len(LEVELS)):
        for j in range(i + 1, len(LEVELS)):
            pairs.append({"a": LEVELS[i], "b": LEVELS[j], "difference": float(i - j),
                          "se": 0.6, "statistic": (i - j) / 0.6, "df": 16.0,
                          "ci": [i - j - 1.7, i - j + 1.7], "p_adjusted": 0.2,
                          "significant": False,
                          "back_transformed": {"kind": "difference", "estimate": float(i - j),
                                               "ci": [i - j - 1.7, i - j + 1.7]}})
    return {
        "endpoint": ENDPOINT, "status": "completed", "halt_reason": None, "compared": "means",
        "analysis_scale": "original", "groups": groups,
        "transform": {"name": "identity", "shift": 0.0, "lambda": None,
                      "why": "the plan analyses the data as <i>measured</i>", "tried": []},
        "checks": [], "effect_sizes": [],
        "omnibus": {"method": "welch", "statistic": 3.2, "df1": 3.0, "df2": 8.8,
                    "pvalue": 0.077, "significant": False, "alpha": 0.05,
                    "ss_between": None, "ss_within": None, "ms_between": None,
                    "ms_within": None, "r_squared": None, "residual_sd": None},
        "comparisons": {"method": "games_howell", "adjust": None, "confidence_level": 0.95,
                        "performed": True, "why": "the plan makes them <always>",
                        "pairs": pairs},
        "outliers": [], "sensitivity": [],
        "conclusion": {"text": f"The data do not show that the means of {SCRIPT} differ.",
                       "scale": "original", "significant": False},
        "across_endpoints": None,
    }


def _write(folder: Path) -> Path:
    folder.mkdir()
    e = _endpoint()
    results = {
        "format": RESULTS_FORMAT,
        "plan": {"id": "safety", "revision": 1, "title": f"Title {SCRIPT}",
                 "question": QUESTION, "fingerprint": "ab" * 32, "raw_sha256": "cd" * 32},
        "data": {"file": "data/<x>.csv", "sha256": "ef" * 32, "format": "csv",
                 "group": 'grp"<col>', "levels": LEVELS, "rows_read": 20, "blank_rows": [],
                 "excluded": [{"row": 3, "column": "<td>", "reason": f"bad value {SCRIPT}"}],
                 "endpoints": [{"endpoint": ENDPOINT, "rows_used": 20,
                                "n": {lv: 5 for lv in LEVELS},
                                "missing_dropped": {"count": 0, "rows": {}},
                                "non_detects": []}]},
        "status": "completed", "halted_endpoints": [], "endpoints": [e],
        "across_endpoints": None, "cautions": list(CAUTIONS),
    }
    content = results_bytes(results)
    (folder / "results.json").write_bytes(content)
    log = DecisionLog(folder / "decisions.jsonl")
    log.start(plan_file="plans/<p>.yaml", plan_sha256="ab" * 32, plan_raw_sha256="cd" * 32,
              data_file="data/<x>.csv", data_sha256="ef" * 32, time_utc="2027-01-01T00:00:00Z",
              operator={"name": "<b>op</b>", "source": "option"}, command=["planrunner", SCRIPT],
              software={"planrunner": "0.1.0<br>"}, plan_id="safety")
    log.warn(stage="plan", message=f"plan note {SCRIPT}")
    log.decide(stage="omnibus", endpoint=ENDPOINT, plan_ref="omnibus", method="welch",
               statistic=3.2, threshold=0.05, p=0.077, outcome="not_significant",
               action="do not reject", reason=f"Welch for {SCRIPT}: p = 0.077 > 0.05.")
    log.finish(status="completed", exit_code=0, results_sha256=sha256_hex(content))
    return folder


@pytest.fixture(scope="module")
def reports(tmp_path_factory: pytest.TempPathFactory) -> tuple[str, str]:
    folder = _write(tmp_path_factory.mktemp("safety") / "run")
    html_path, md_path = render_reports(folder)
    return html_path.read_text(encoding="utf-8"), md_path.read_text(encoding="utf-8")


def test_html_shows_markup_as_text(reports: tuple[str, str]) -> None:
    html = reports[0]
    lowered = html.lower()
    assert "<script" not in lowered
    assert "<img" not in lowered and "<b>" not in lowered and "<em>" not in lowered
    assert "<i>measured" not in lowered and "0.1.0<br>" not in lowered
    assert "&lt;i&gt;measured&lt;/i&gt;" in html and "0.1.0&lt;br&gt;" in html
    assert "<code>&lt;td&gt;</code>" in html  # a column name that looks like a tag
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "&lt;img src=x onerror=alert(2)&gt;_mg" in html
    assert "&#34;hi&#34; &amp; &lt;b&gt;bye&lt;/b&gt;" in html
    assert "Größe µg/L — ü" in html  # Unicode kept as is (UTF-8 page)
    assert 'grp&#34;&lt;col&gt;' in html


def test_html_attributes_cannot_be_broken_out_of(reports: tuple[str, str]) -> None:
    html = reports[0]
    # every attribute value is quoted and holds no raw quote or angle bracket of the data
    for value in re.findall(r'=\s*"([^"]*)"', html):
        assert "<" not in value and ">" not in value


def test_inline_svg_text_is_escaped(reports: tuple[str, str]) -> None:
    html = reports[0]
    svgs = re.findall(r"<svg\b.*?</svg>", html, flags=re.S)
    assert len(svgs) >= 3
    texts: list[str] = []
    for svg in svgs:
        root = ET.fromstring(svg)  # raw markup inside would break the XML or add elements
        tags = {el.tag.split("}")[-1] for el in root.iter()}
        assert not tags & {"script", "img", "b", "foreignObject", "iframe"}
        texts.extend("".join(el.itertext()) for el in root.iter()
                     if el.tag.endswith("}text") or el.tag.endswith("}title"))
    joined = "\n".join(texts)
    # the names arrive as text in the drawings: matplotlib's tick labels and our own
    assert SCRIPT in joined
    assert "Größe µg/L — ü" in joined


def test_markdown_shows_markup_as_text(reports: tuple[str, str]) -> None:
    md = reports[1]
    lowered = md.lower()
    assert "<script" not in lowered and "<img" not in lowered and "<b>" not in lowered
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in md
    assert "Größe µg/L — ü" in md


def _cells(row: str) -> int:
    """Number of cells of a Markdown table row (pipes not escaped by a backslash)."""
    return len(re.findall(r"(?<!\\)\|", row)) - 1


def test_markdown_tables_keep_their_shape(reports: tuple[str, str]) -> None:
    lines = reports[1].splitlines()
    i = 0
    tables = 0
    while i < len(lines):
        if lines[i].startswith("|") and i + 1 < len(lines) and lines[i + 1].startswith("| ---"):
            width = _cells(lines[i])
            j = i
            while j < len(lines) and lines[j].startswith("|"):
                assert _cells(lines[j]) == width, lines[j]
                j += 1
            tables += 1
            i = j
        else:
            i += 1
    assert tables >= 2
    # the line break inside a group name did not split a row
    assert "a\\|b c" in reports[1]


def test_md_text_escapes() -> None:
    assert md_text("a|b\nc") == "a\\|b c"
    assert md_text("<b>x</b> & y") == "&lt;b&gt;x&lt;/b&gt; &amp; y"
    assert md_text("*_[x]_*`") == "\\*\\_\\[x\\]\\_\\*\\`"
    assert md_text(None) == "—"


def test_environments() -> None:
    html_env = html_environment()
    assert html_env.autoescape("report.html") is True
    assert html_env.from_string("{{ x }}").render(x=SCRIPT) == \
        "&lt;script&gt;alert(1)&lt;/script&gt;"
    md_env = markdown_environment()
    assert md_env.autoescape is False
    assert md_env.from_string("| {{ x }} |").render(x="a|b") == "| a\\|b |"
