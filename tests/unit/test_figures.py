"""The report's matplotlib figures: valid, deterministic SVG with a text alternative.

Endpoint dicts follow the per-endpoint shape of results.json; the optional parts (values,
residuals, the Box-Cox profile) are added where a test needs them. The data are invented.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from typing import Any

import pytest

from planrunner.report.figures import (
    MAX_POINTS,
    _jitter,
    _normal_quantiles,
    _thin,
    boxcox_profile_figure,
    comparisons_figure,
    endpoint_figures,
    group_estimates_figure,
    residual_quantile_figure,
    residuals_of,
    spread_figure,
)

NS = "{http://www.w3.org/2000/svg}"


def _endpoint(*, ratio: bool = True, one_sided: bool = False) -> dict[str, Any]:
    levels = ["tap", "chlorine", "ozone"]
    groups = []
    for k, level in enumerate(levels):
        m = 900.0 / (k + 1)
        groups.append({
            "level": level, "n": 4, "n_missing": 0, "n_non_detects": 0,
            "original": {"mean": m, "sd": 0.5 * m, "se": 0.25 * m, "ci": [0.4 * m, 1.6 * m]},
            "analysis": {"mean": 2.9 - 0.3 * k, "sd": 0.2, "se": 0.1,
                         "ci": [2.6 - 0.3 * k, 3.2 - 0.3 * k]},
            "back_transformed": {"estimate": 10 ** (2.9 - 0.3 * k), "ci": [1.0, 2.0],
                                 "label": "geometric mean"},
        })
    pairs = []
    for i in range(3):
        for j in range(i + 1, 3):
            d = 0.3 * (j - i)
            hi = None if one_sided else d + 0.35
            pairs.append({"a": levels[i], "b": levels[j], "difference": d, "se": 0.14,
                          "statistic": d / 0.14, "df": 9.0, "ci": [d - 0.35, hi],
                          "p_adjusted": 0.04 * (i + 1), "significant": j - i == 2,
                          "back_transformed": ({"kind": "ratio", "estimate": 10 ** d,
                                                "ci": [10 ** (d - 0.35),
                                                       None if hi is None else 10 ** hi]}
                                               if ratio else
                                               {"kind": "none", "estimate": None,
                                                "ci": [None, None]})})
    return {
        "endpoint": "cfu_per_g", "status": "completed", "analysis_scale": "log10",
        "compared": "geometric_means", "groups": groups,
        "transform": {"name": "log10", "shift": 0.0, "lambda": None, "why": "", "tried": []},
        "comparisons": {"method": "tukey_kramer", "adjust": None, "confidence_level": 0.95,
                        "performed": True, "why": "", "pairs": pairs},
    }


def _check_svg(svg: str) -> ET.Element:
    assert svg.startswith("<svg ")
    assert "<?xml" not in svg and "<!DOCTYPE" not in svg and "<metadata" not in svg
    root = ET.fromstring(svg)
    assert root.tag == f"{NS}svg"
    assert root.get("role") == "img"
    title, desc = root.find(f"{NS}title"), root.find(f"{NS}desc")
    assert title is not None and title.text and desc is not None and desc.text
    assert root.get("aria-labelledby") == f"{title.get('id')} {desc.get('id')}"
    for ref in re.findall(r'(?:xlink:)?href="([^"]*)"', svg):
        assert ref.startswith("#")
    return root


def _points(svg: str) -> int:
    """Scatter markers in a matplotlib SVG: <use> elements inside PathCollection groups."""
    root = ET.fromstring(svg)
    return sum(len(g.findall(f".//{NS}use")) for g in root.iter(f"{NS}g")
               if "PathCollection" in (g.get("id") or ""))


def test_group_estimates_two_scales() -> None:
    fig = group_estimates_figure(_endpoint(), salt="t-est")
    assert fig is not None
    root = _check_svg(fig.svg)
    texts = {"".join(t.itertext()) for t in root.iter(f"{NS}text")}
    assert {"tap", "chlorine", "ozone", "Original scale"} <= texts
    assert any(t.startswith("Analysis scale") for t in texts)
    assert "tap: n 4, mean 900" in fig.desc
    assert "individual values" not in fig.caption  # no values in the endpoint


def test_group_estimates_with_values_draws_points() -> None:
    e = _endpoint()
    for g in e["groups"]:
        g["values"] = [g["original"]["mean"] * f for f in (0.6, 1.0, 1.4, 1.0)]
        g["ci_level"] = 0.9
        g["analysis_values"] = [math.log10(v) for v in g["values"]]
    fig = group_estimates_figure(e, salt="t-val")
    assert fig is not None and "open grey circles" in fig.caption
    assert "90% confidence intervals" in fig.caption
    _check_svg(fig.svg)
    assert _points(fig.svg) == 2 * 12  # 12 values on each of the two panels


def test_jitter_is_deterministic_and_bounded() -> None:
    a, b = _jitter(50, 0.22), _jitter(50, 0.22)
    assert a == b and all(-0.11 <= x < 0.11 for x in a)
    assert len(set(round(x, 9) for x in a)) == 50  # no two points share an offset


def test_large_groups_are_drawn_as_quantiles() -> None:
    values = [float(i % 97) for i in range(5000)]
    pts, thinned = _thin(values, MAX_POINTS)
    assert thinned and len(pts) == MAX_POINTS
    assert pts[0] == min(values) and pts[-1] == max(values) and pts == sorted(pts)
    assert _thin([3.0, 1.0], MAX_POINTS) == ([3.0, 1.0], False)
    e = _endpoint()
    e["groups"][0]["values"] = values
    fig = group_estimates_figure(e, salt="t-big")
    assert fig is not None and f"{MAX_POINTS} evenly spaced quantiles" in fig.caption
    assert _points(fig.svg) == MAX_POINTS  # only this group carries values here


def test_spread_figure_reports_sd_ratio() -> None:
    fig = spread_figure(_endpoint(), salt="t-spread")
    assert fig is not None
    _check_svg(fig.svg)
    # SDs 450, 225, 150 on the original scale: ratio 3; all 0.2 on the analysis scale
    assert "original scale: 3." in fig.desc and "log10 scale: 1." in fig.desc


def test_comparisons_on_ratio_scale_and_difference_scale() -> None:
    ratio = comparisons_figure(_endpoint(), salt="t-cmp-r")
    diff = comparisons_figure(_endpoint(ratio=False), salt="t-cmp-d")
    assert ratio is not None and diff is not None
    _check_svg(ratio.svg)
    _check_svg(diff.svg)
    assert "line at one" in ratio.caption and "line at zero" in diff.caption
    assert "tap / ozone" in ratio.desc and "tap − ozone" in diff.desc
    assert "ratio of back-transformed means" in ratio.svg


def test_comparisons_with_open_intervals() -> None:
    fig = comparisons_figure(_endpoint(ratio=False, one_sided=True), salt="t-open")
    assert fig is not None
    _check_svg(fig.svg)
    assert "to unbounded above)" in fig.desc  # the open end is said in words


def test_comparisons_not_made_gives_no_figure() -> None:
    e = _endpoint()
    e["comparisons"] = {"method": "tukey_kramer", "performed": False, "pairs": []}
    assert comparisons_figure(e, salt="x") is None


def test_residual_and_boxcox_figures_need_their_fields() -> None:
    e = _endpoint()
    assert residual_quantile_figure(e, salt="x") is None  # no values in the endpoint
    assert boxcox_profile_figure(e, salt="x") is None
    values = [[1.2, 1.5, 1.9, 2.4], [0.9, 1.1, 1.6, 1.8], [2.2, 2.3, 2.9, 3.6]]
    for g, v in zip(e["groups"], values):
        g["values"] = [10 ** x for x in v]
        g["analysis_values"] = v
    res, scale = residuals_of(e)
    assert scale == "log10"
    expected = [x - sum(v) / len(v) for v in values for x in v]
    assert max(abs(a - b) for a, b in zip(res, expected)) < 1e-15 and len(res) == 12
    fig = residual_quantile_figure(e, salt="t-res")
    assert fig is not None and fig.desc.startswith("12 residuals on the log10 scale")
    _check_svg(fig.svg)
    assert _points(fig.svg) == 12
    e["transform"] = {"name": "boxcox", "shift": 0.0, "lambda": 0.0, "lambda_estimate": 0.08,
                      "lambda_ci": [-0.4, 0.5],
                      "profile": {"lambda": [-1.0, -0.5, 0.0, 0.5, 1.0],
                                  "loglik": [-30.0, -26.0, -25.0, -26.5, -31.0],
                                  "loglik_max": -24.9, "cutoff": -26.82,
                                  "confidence_level": 0.95}}
    box = boxcox_profile_figure(e, salt="t-box")
    assert box is not None and "95% interval runs from -0.4 to 0.5" in box.desc
    assert "estimate 0.08" in box.desc and "cut-off -26.82" in box.desc
    assert "lambda used is 0" in box.desc
    root = _check_svg(box.svg)
    texts = {"".join(t.itertext()) for t in root.iter(f"{NS}text")}
    assert {"estimate 0.08", "used 0", "95% cut-off"} <= texts


def test_many_residuals_are_thinned() -> None:
    e = _endpoint()
    e["analysis_scale"] = "original"
    n = 10 * MAX_POINTS + 500
    for k, g in enumerate(e["groups"]):
        g["values"] = [((i * 37) % 101 - 50) / 7 + k for i in range(n // 3 + (k == 0) * (n % 3))]
    fig = residual_quantile_figure(e, salt="t-many")
    assert fig is not None and fig.desc.startswith(f"{n} residuals on the original scale")
    assert _points(fig.svg) == 10 * MAX_POINTS


def test_residuals_of_a_rank_test_or_a_halt() -> None:
    e = _endpoint()
    for g in e["groups"]:
        g["values"] = [1.0, 2.0, 4.0]
    e["analysis_scale"] = "ranks"
    e["transform"]["name"] = "identity"
    res, scale = residuals_of(e)
    assert scale == "original" and len(res) == 9 and abs(sum(res)) < 1e-12
    e["transform"]["name"] = "log10"  # ranks of transformed values: not in results.json
    assert residuals_of(e) == ([], None)
    e["analysis_scale"], e["status"] = "original", "halted"
    assert residuals_of(e) == ([], None)


def test_endpoint_figures_notes_and_unique_ids() -> None:
    e = _endpoint()
    e["transform"] = {"name": "boxcox", "shift": 0.0, "lambda": 0.5, "why": "", "tried": [],
                      "lambda_estimate": None, "lambda_ci": None, "profile": None}
    figures, notes = endpoint_figures(e, index=1)
    assert [f.key for f in figures] == ["estimates", "spread", "comparisons"]
    assert notes == ["No normal quantile plot of residuals: fewer than three residuals.",
                     "No Box-Cox profile: the lambda was not estimated for this endpoint."]
    e["status"] = "halted"
    assert endpoint_figures(e, index=1)[1][0].startswith(
        "No normal quantile plot of residuals: the plan halted")
    again, _ = endpoint_figures(e, index=2)
    ids = [i for f in figures + again for i in re.findall(r'\bid="([^"]+)"', f.svg)]
    assert len(ids) == len(set(ids))


def test_figures_are_deterministic() -> None:
    a = spread_figure(_endpoint(), salt="same")
    b = spread_figure(_endpoint(), salt="same")
    assert a is not None and b is not None and a.svg == b.svg


def test_svg_text_is_escaped() -> None:
    e = _endpoint()
    e["groups"][0]["level"] = "<script>alert(1)</script>"
    fig = group_estimates_figure(e, salt="t-esc")
    assert fig is not None
    assert "<script" not in fig.svg
    root = _check_svg(fig.svg)
    texts = {"".join(t.itertext()) for t in root.iter(f"{NS}text")}
    assert "<script>alert(1)</script>" in texts


@pytest.mark.parametrize("n", [3, 8, 25])
def test_normal_quantiles_match_scipy(n: int) -> None:
    from scipy.stats import norm

    # Blom (1958) plotting positions (i - 3/8) / (n + 1/4); reference: scipy.stats.norm.ppf
    expected = norm.ppf([(i - 0.375) / (n + 0.25) for i in range(1, n + 1)])
    got = _normal_quantiles(n)
    assert max(abs(a - b) for a, b in zip(got, expected)) < 1e-12
