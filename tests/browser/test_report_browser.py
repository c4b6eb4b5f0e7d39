"""report.html in a real browser: every example plan is run, its report loaded by headless
Chromium and the DOM the browser built is checked for the sections and the figures.

The page must render without scripts or network, so Chromium runs with networking features
off and a fresh profile; ``--dump-dom`` prints the document after parsing. The browsers run in
parallel (one process per plan) to keep the module fast.

Chromium is needed: when it is missing the module is skipped, except on CI (the environment
variable ``CI`` is set), where CI installs it and a missing browser is a failure.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from planrunner.api import run_plan

REPO = Path(__file__).resolve().parents[2]
PLANS = sorted((REPO / "plans").glob("*.yaml"))
CHROMIUM = next((p for p in (shutil.which("chromium"), shutil.which("chromium-browser"))
                 if p), None)
ON_CI = bool(os.environ.get("CI"))

pytestmark = pytest.mark.skipif(
    CHROMIUM is None and not ON_CI,
    reason="headless Chromium is not installed (install the 'chromium' package to run the "
           "browser tests; CI installs it)",
)

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync")

#: Text that would mean the page, the template or the browser went wrong.
ERROR_TEXT = ("Traceback", "jinja2.exceptions", "UndefinedError", "ERR_FILE_NOT_FOUND", "ERR_ACCESS_DENIED",
              "This page isn", "can’t be reached", "NaN", "undefined")


@pytest.fixture(scope="module")
def pages(tmp_path_factory) -> dict[str, tuple[str, str]]:
    """Per example plan: the report.html source and the DOM Chromium built from it."""
    if CHROMIUM is None:
        pytest.fail("headless Chromium is not installed, and CI is set: CI must install it "
                    "(apt-get install -y chromium) for the browser tests")
    base = tmp_path_factory.mktemp("browser")
    jobs = {}
    for plan in PLANS:
        out = base / plan.stem
        outcome = run_plan(plan, out=out, operator="tester", command=["planrunner", "run"])
        assert outcome.exit_code in (0, 4), outcome.summary()
        html = out / "report.html"
        profile = base / f"profile-{plan.stem}"
        profile.mkdir()
        jobs[plan.stem] = (html, subprocess.Popen(
            [CHROMIUM, *FLAGS, f"--user-data-dir={profile}", "--dump-dom", html.as_uri()],
            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, encoding="utf-8"))
    found = {}
    for name, (html, proc) in jobs.items():
        try:
            dom, _ = proc.communicate(timeout=90)
        except subprocess.TimeoutExpired:  # pragma: no cover - a hung browser
            proc.kill()
            proc.communicate()
            pytest.fail(f"Chromium did not finish loading {html}")
        assert proc.returncode == 0, f"Chromium exited with {proc.returncode} on {html}"
        found[name] = (html.read_text(encoding="utf-8"), dom)
    return found


@pytest.mark.parametrize("plan", [p.stem for p in PLANS])
def test_browser_builds_every_section_and_figure(pages, plan: str) -> None:
    source, dom = pages[plan]
    assert dom.lstrip().startswith("<!DOCTYPE html>\n<html"), dom[:200]
    assert "</body></html>" in dom  # the whole document was parsed
    for section in ("overview", "plan", "data", "run-record", "reach"):
        assert f'<section id="{section}">' in dom, section
    endpoints = re.findall(r'<section class="endpoint" id="(endpoint-\d+)">', source)
    assert endpoints
    promised = re.findall(r'<figure id="(endpoint-\d+-fig-\w+)">', source)
    assert promised, "the report promises no figures"
    for anchor in endpoints:
        block = dom.split(f'<section class="endpoint" id="{anchor}">')[1].split("</section>")[0]
        assert block.count('<svg class="path-svg"') == 1, anchor  # the decision path
        assert "The path the plan took" in block
    for fig in promised:
        assert f'<figure id="{fig}">' in dom, fig
        block = dom.split(f'<figure id="{fig}">')[1].split("</figure>")[0]
        assert "<svg" in block and "<figcaption>" in block, fig
        assert "<title" in block and "<desc" in block, fig  # the text alternative
    assert dom.count("<svg") >= len(promised) + len(endpoints)
    for word in ERROR_TEXT:
        assert word not in dom, word


def test_the_box_cox_plan_shows_its_profile(pages) -> None:
    _, dom = pages["compost-heating-time-boxcox"]
    block = dom.split('<figure id="endpoint-1-fig-boxcox">')[1].split("</figure>")[0]
    assert "Box-Cox profile log-likelihood" in block and "<svg" in block
    # the ladder plan draws its untried rung muted, its Box-Cox sibling the unused powers
    _, ladder = pages["hatchery-vibrio-counts"]
    assert 'class="path-node path-muted"' in ladder
    assert block.count("cut-off") >= 1
