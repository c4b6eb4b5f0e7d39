"""Each branch of the decision tree, taken by a small data set built to take it.

How the data are built (so the path is certain, not a matter of luck): every group is the
same standard-normal sample ``z`` (seeded numpy), mapped through the inverse of the scale on
which the variances are meant to be equal. On that scale the group variances are then exactly
equal (Fmax = 1, below any critical value), while on the scales below it in the ladder the
group variances grow with the group means by a factor far beyond the critical value 8.44 of
Fmax for k = 4, df = 7, alpha = 0.05 (Pearson & Hartley 1954, Table 31 gives 8.44). For the
"exhausted" branches one group gets ten times the spread of the others at a mean so large that
every rung acts almost linearly, so the Fmax ratio stays near 100 on every rung.

Plans are YAML files loaded with planrunner.plan.load.load_plan; data are CSV files read and
checked by planrunner.data.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest

from planrunner.audit.log import DecisionLog
from planrunner.data import DataSpec, check_data, read_table
from planrunner.engine import LogRecorder, analyse
from planrunner.errors import DataError
from planrunner.plan.load import load_plan

LEVELS = ("a", "b", "c", "d")
Z = np.random.default_rng(20240611).standard_normal(8)
Z = (Z - Z.mean()) / Z.std(ddof=1)                      # exactly mean 0, sd 1


def groups_equal_on(scale: str) -> dict[str, np.ndarray]:
    """Four groups whose variances are exactly equal on ``scale`` and unequal below it."""
    if scale == "identity":
        return {lv: 50.0 + 10.0 * i + 2.0 * Z for i, lv in enumerate(LEVELS)}
    if scale == "sqrt":                                  # sqrt(y) = m_i + 0.5 z
        return {lv: (m + 0.5 * Z) ** 2 for lv, m in zip(LEVELS, (5.0, 10.0, 20.0, 40.0))}
    if scale == "log10":                                 # log10(y) = m_i + 0.1 z
        return {lv: 10.0 ** (m + 0.1 * Z) for lv, m in zip(LEVELS, (1.0, 2.0, 3.0, 4.0))}
    if scale == "never":                                 # one group 10x the spread everywhere
        return {lv: 1e4 + 5.0 * i + (10.0 if i == 3 else 1.0) * Z
                for i, lv in enumerate(LEVELS)}
    raise ValueError(scale)


PLAN_HEAD = """\
planrunner: 1
id: branch-test
title: Branch test
question: Do the group means differ?
"""


def run(tmp_path: Path, body: str, groups: dict[str, np.ndarray], *, columns=("y",),
        extra: dict[str, dict[str, np.ndarray]] | None = None):
    """Write plan and CSV, load and check them, run the engine; return (analysis, log)."""
    lines = ["grp," + ",".join(columns)]
    for lv in LEVELS:
        for j, v in enumerate(groups[lv]):
            cells = [repr(float(v))]
            for col in columns[1:]:
                cells.append(repr(float(extra[col][lv][j])))
            lines.append(f"{lv}," + ",".join(cells))
    (tmp_path / "d.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    response = columns[0] if len(columns) == 1 else "[" + ", ".join(columns) + "]"
    text = PLAN_HEAD + textwrap.dedent(body).format(response=response)
    (tmp_path / "plan.yaml").write_text(text, encoding="utf-8")
    loaded = load_plan(tmp_path / "plan.yaml")
    plan = loaded.model
    d = plan.data
    spec = DataSpec(file=loaded.data_path, group=d.group, responses=tuple(d.response),
                    levels=tuple(d.levels), min_n=d.min_n, missing=d.missing)
    data = check_data(spec, read_table(spec))
    log = DecisionLog()
    log.start(plan_file="plan.yaml", plan_sha256="a" * 64, plan_raw_sha256="b" * 64,
              data_file="d.csv", data_sha256="c" * 64, time_utc="2027-01-01T00:00:00Z",
              operator={"name": "test"}, command=["test"], software={})
    analysis = analyse(plan, data, LogRecorder(log, list(data.responses)))
    return analysis, log


LADDER = """\
hypotheses: {{family: all_pairs}}
data: {{file: d.csv, group: grp, response: {response}, levels: [a, b, c, d]}}
omnibus: classic
variance_check: {{method: hartley_fmax, role: gate}}
transform: {{policy: ladder, ladder: [identity, sqrt, log10]}}
when_variances_differ: {fallback}
comparisons: {{method: tukey_kramer, only_after_significant_omnibus: false}}
"""


def ladder(fallback: str = "welch") -> str:
    return LADDER.replace("{fallback}", fallback)


def decisions(log: DecisionLog, **match):
    return [d for d in log.decisions() if all(getattr(d, k) == v for k, v in match.items())]


def test_identity_passes(tmp_path):
    analysis, log = run(tmp_path, ladder(), groups_equal_on("identity"))
    ep = analysis.endpoints[0]
    assert ep["analysis_scale"] == "original"
    assert ep["transform"]["tried"] == ["identity"]
    assert ep["omnibus"]["method"] == "classic"
    gate = decisions(log, plan_ref="variance_check")
    assert [d.outcome for d in gate] == ["passed"]
    assert gate[0].statistic == pytest.approx(1.0)           # equal variances by construction
    assert not decisions(log, outcome="hypothesis_changed")


def test_sqrt_rung(tmp_path):
    analysis, log = run(tmp_path, ladder(), groups_equal_on("sqrt"))
    ep = analysis.endpoints[0]
    assert ep["analysis_scale"] == "sqrt"
    assert ep["transform"]["tried"] == ["identity", "sqrt"]
    assert [c["passed"] for c in ep["checks"]] == [False, True]
    assert ep["checks"][1]["when"] == "after_transform:sqrt"
    assert ep["omnibus"]["method"] == "classic"
    # a sqrt scale compares means of square roots: recorded as a change of scale, not of
    # hypothesis
    assert decisions(log, outcome="scale_changed")
    assert not decisions(log, outcome="hypothesis_changed")


def test_log10_rung_changes_the_hypothesis(tmp_path):
    analysis, log = run(tmp_path, ladder(), groups_equal_on("log10"))
    ep = analysis.endpoints[0]
    assert ep["analysis_scale"] == "log10"
    assert ep["transform"]["tried"] == ["identity", "sqrt", "log10"]
    assert ep["compared"] == "geometric_means"
    change = decisions(log, outcome="hypothesis_changed")
    assert len(change) == 1 and change[0].plan_ref == "compare"
    assert change[0].details == {"from": "means", "to": "geometric_means"}
    assert "geometric means" in change[0].reason
    # back-transformed group estimates are geometric means: 10 ** mean(log10 y) = 10 ** m_i
    for g, m in zip(ep["groups"], (1.0, 2.0, 3.0, 4.0)):
        assert g["back_transformed"]["label"] == "geometric mean"
        assert g["back_transformed"]["estimate"] == pytest.approx(10.0 ** m, rel=1e-12)
        lo, hi = g["back_transformed"]["ci"]
        assert lo < g["back_transformed"]["estimate"] < hi
    # comparisons back-transform to ratios of geometric means: 10 ** (m_a - m_b)
    pair = ep["comparisons"]["pairs"][0]
    assert pair["back_transformed"]["kind"] == "ratio"
    assert pair["back_transformed"]["estimate"] == pytest.approx(0.1, rel=1e-10)


def test_exhausted_ladder_falls_back_to_welch(tmp_path):
    analysis, log = run(tmp_path, ladder("welch"), groups_equal_on("never"))
    ep = analysis.endpoints[0]
    assert ep["omnibus"]["method"] == "welch"
    assert ep["analysis_scale"] == "original"
    assert ep["omnibus"]["ss_between"] is None
    assert [c["passed"] for c in ep["checks"]] == [False, False, False]
    assert decisions(log, plan_ref="transform.ladder", outcome="exhausted")
    fallback = decisions(log, plan_ref="when_variances_differ")
    assert [d.outcome for d in fallback] == ["welch"]


def test_exhausted_ladder_falls_back_to_kruskal_wallis(tmp_path):
    body = ladder("kruskal_wallis").replace("tukey_kramer", "games_howell")
    analysis, log = run(tmp_path, body, groups_equal_on("never"))
    ep = analysis.endpoints[0]
    assert ep["omnibus"]["method"] == "kruskal_wallis"
    assert ep["analysis_scale"] == "ranks"
    assert ep["compared"] == "locations"
    change = decisions(log, outcome="hypothesis_changed")
    assert change and change[0].details["to"] == "locations"
    assert "rank-based locations" in change[0].reason
    # comparisons of means are not made after the rank test replaced the omnibus
    assert ep["comparisons"]["performed"] is False
    assert decisions(log, stage="follow_ups", outcome="skipped")


def test_exhausted_ladder_halts(tmp_path):
    analysis, log = run(tmp_path, ladder("halt"), groups_equal_on("never"))
    ep = analysis.endpoints[0]
    assert analysis.status == "halted"
    assert analysis.halted_endpoints == ["y"]
    assert ep["status"] == "halted" and ep["omnibus"] is None
    assert "halt" in ep["halt_reason"]
    assert not decisions(log, stage="omnibus")


FIXED = """\
hypotheses: {{family: all_pairs}}
compare: geometric_means
data: {{file: d.csv, group: grp, response: {response}, levels: [a, b, c, d]}}
omnibus: classic
variance_check: {{method: hartley_fmax, role: gate}}
transform: {{policy: fixed, transform: log10}}
comparisons: {{method: tukey_kramer, only_after_significant_omnibus: true}}
"""


def test_fixed_transform_is_applied_then_checked(tmp_path):
    analysis, log = run(tmp_path, FIXED, groups_equal_on("log10"))
    ep = analysis.endpoints[0]
    assert ep["analysis_scale"] == "log10"
    assert ep["compared"] == "geometric_means"
    # the original-scale check is recorded for the report, the gate acts on the log scale
    assert [(c["when"], c["role"], c["passed"]) for c in ep["checks"]] == [
        ("before_transform", "describe", False), ("after_transform:log10", "gate", True)]
    assert not decisions(log, outcome="hypothesis_changed")   # the plan already says so
    assert ep["comparisons"]["performed"] is True


BOX_COX = """\
hypotheses: {{family: all_pairs}}
data: {{file: d.csv, group: grp, response: {response}, levels: [a, b, c, d]}}
omnibus: classic
variance_check: {{method: hartley_fmax, role: gate}}
transform: {{policy: box_cox}}
comparisons: {{method: tukey_kramer}}
"""


def test_box_cox_snaps_inside_the_interval(tmp_path):
    # log10 of these values is exactly normal-shaped with equal spread: the one-way Box-Cox
    # estimate is near 0 and its interval holds 0 (the log) but not -0.5 or 0.5.
    analysis, log = run(tmp_path, BOX_COX, groups_equal_on("log10"))
    ep = analysis.endpoints[0]
    assert ep["transform"]["name"] == "boxcox"
    assert ep["transform"]["lambda"] == 0.0
    assert ep["analysis_scale"] == "box_cox(lambda=0)"
    assert ep["compared"] == "geometric_means"
    chosen = decisions(log, plan_ref="transform.rounding")
    assert chosen[0].outcome == "snapped"
    assert abs(chosen[0].statistic) < 0.25
    assert "snapped to 0, the nearest listed value inside the interval" in chosen[0].reason
    assert ep["checks"][-1]["when"] == "after_transform:boxcox"
    assert ep["checks"][-1]["passed"] is True


def test_follow_ups_skipped_after_non_significant_omnibus(tmp_path):
    same = {lv: 50.0 + 2.0 * Z for lv in LEVELS}            # identical groups: F = 0, p = 1
    body = ladder().replace("only_after_significant_omnibus: false",
                            "only_after_significant_omnibus: true")
    analysis, log = run(tmp_path, body, same)
    ep = analysis.endpoints[0]
    assert ep["omnibus"]["significant"] is False
    assert ep["comparisons"]["performed"] is False
    assert ep["comparisons"]["pairs"] == []
    skipped = decisions(log, plan_ref="comparisons.only_after_significant_omnibus")
    assert [d.outcome for d in skipped] == ["skipped"]
    assert "not significant" in skipped[0].reason


def test_follow_ups_recorded_when_performed(tmp_path):
    analysis, log = run(tmp_path, ladder(), groups_equal_on("identity"))
    performed = decisions(log, stage="follow_ups")
    assert [d.outcome for d in performed] == ["performed"]
    assert "whatever the omnibus result" in performed[0].reason


def test_reason_text_reads_as_an_account(tmp_path):
    _, log = run(tmp_path, ladder(), groups_equal_on("log10"))
    gate = decisions(log, plan_ref="variance_check")
    first, last = gate[0].reason, gate[-1].reason
    # critical value of Fmax for k = 4, df = 7 at 0.05 is 8.44 (Pearson & Hartley 1954, Table 31)
    assert first.startswith("On the original scale, Fmax ")
    assert "exceeds the critical value 8.44 for k = 4, df = 7 at alpha = 0.05" in first
    assert first.endswith("variances differ; trying the next transformation in the ladder, "
                          "sqrt.")
    assert "trying the next transformation in the ladder, log10" in gate[1].reason
    assert last.startswith("On the log10 scale, Fmax 1 does not exceed the critical value 8.44")
    assert last.endswith("analysing the log10 scale.")
    omni = decisions(log, stage="omnibus", plan_ref="omnibus")[0]
    assert omni.reason.startswith("The classic one-way ANOVA (as planned) on the log10 scale: "
                                  "F(3, 28) = ")
    warnings = [r for r in log.records if r["kind"] == "warning"]
    assert any("data-driven ladder" in w["message"] for w in warnings)


def test_sensitivity_always_welch_is_reported(tmp_path):
    body = ladder() + "sensitivity: [always_welch, untransformed]\n"
    analysis, log = run(tmp_path, body, groups_equal_on("log10"))
    sens = analysis.endpoints[0]["sensitivity"]
    assert [s["name"] for s in sens] == ["always_welch", "untransformed"]
    welch = sens[0]
    assert welch["omnibus"]["method"] == "welch"
    assert welch["scale"] == "original"                  # the ladder's first scale
    assert isinstance(welch["agrees_with_primary"], bool)
    assert welch["comparisons"]["method"] == "games_howell"
    assert sens[1]["omnibus"]["method"] == "classic" and sens[1]["scale"] == "original"
    recs = decisions(log, stage="sensitivity")
    assert [d.plan_ref for d in recs] == ["sensitivity.0", "sensitivity.1"]


def test_degenerate_group_halts_or_rejects(tmp_path):
    groups = groups_equal_on("identity")
    groups["b"] = np.full(8, 7.0)
    body = ladder().replace("levels: [a, b, c, d]}",
                            "levels: [a, b, c, d], degenerate_groups: halt}")
    analysis, log = run(tmp_path, body, groups)
    assert analysis.status == "halted"
    assert "group b has no spread" in analysis.endpoints[0]["halt_reason"]
    assert decisions(log, plan_ref="data.degenerate_groups", outcome="degenerate")
    sub = tmp_path / "reject"
    sub.mkdir()
    with pytest.raises(DataError, match="rejected"):
        run(sub, ladder(), groups)


OUTLIERS = """\
hypotheses: {{family: all_pairs}}
data: {{file: d.csv, group: grp, response: {response}, levels: [a, b, c, d]}}
omnibus: welch
outliers: {{rule: studentized_residual, threshold: 3.5, action: {action}}}
sensitivity: {sens}
comparisons: {{method: games_howell}}
"""


@pytest.mark.parametrize("action", ["flag", "remove"])
def test_outliers_flagged_or_removed(tmp_path, action):
    groups = groups_equal_on("identity")
    groups["c"] = groups["c"].copy()
    groups["c"][2] += 60.0                               # far outside: |t| >> 3.5
    sens = "[outliers_kept]" if action == "remove" else "[]"
    body = OUTLIERS.replace("{action}", action).replace("{sens}", sens)
    analysis, log = run(tmp_path, body, groups)
    ep = analysis.endpoints[0]
    assert len(ep["outliers"]) == 1
    o = ep["outliers"][0]
    assert (o["level"], o["row"], o["action"]) == ("c", 20, "removed" if action == "remove"
                                                  else "flagged")
    rec = decisions(log, stage="outliers")[0]
    assert "row 20" in rec.reason
    if action == "remove":
        assert ep["omnibus"]["df2"] is not None
        assert ep["sensitivity"][0]["name"] == "outliers_kept"
        assert ep["groups"][2]["original"]["mean"] == pytest.approx(
            float(np.delete(groups["c"], 2).mean()), rel=1e-12)
    else:
        assert ep["groups"][2]["original"]["mean"] == pytest.approx(float(groups["c"].mean()))


def test_games_howell_small_groups_warns(tmp_path):
    groups = {lv: v[:4] for lv, v in groups_equal_on("identity").items()}
    body = OUTLIERS.replace("{{rule: studentized_residual, threshold: 3.5, action: {action}}}",
                            "{{rule: none}}").replace("{sens}", "[]")
    _, log = run(tmp_path, body, groups)
    messages = [r["message"] for r in log.records if r["kind"] == "warning"]
    assert any("Games-Howell with fewer than 6" in m for m in messages)


def test_stacked_multiplicity_warning(tmp_path):
    body = ladder().replace("only_after_significant_omnibus: false",
                            "only_after_significant_omnibus: true")
    _, log = run(tmp_path, body, groups_equal_on("identity"))
    messages = [r["message"] for r in log.records if r["kind"] == "warning"]
    assert any("already controls the family-wise error rate" in m for m in messages)


def test_fmax_unequal_sizes_smallest_group_uses_the_table_df(tmp_path):
    groups = {lv: np.concatenate([v, [v.mean()]]) if lv != "a" else v
              for lv, v in groups_equal_on("identity").items()}      # n = 8, 9, 9, 9
    body = ladder().replace("{{method: hartley_fmax, role: gate}}",
                            "{{method: hartley_fmax, role: gate, unequal_n: smallest_group}}")
    _, log = run(tmp_path, body, groups)
    gate = decisions(log, plan_ref="variance_check")[0]
    # Pearson & Hartley (1954), Table 31: upper 5% point of Fmax for k = 4, df = 7 is 8.44
    assert gate.threshold == pytest.approx(8.44, abs=0.005)
    assert "k = 4, df = 7 at alpha" in gate.reason
    sub = tmp_path / "exact"
    sub.mkdir()
    _, log = run(sub, ladder(), groups)                   # default: exact, df = 7, 8, 8, 8
    gate = decisions(log, plan_ref="variance_check")[0]
    assert "df = 7, 8, 8, 8 (exact, unequal sizes)" in gate.reason
    assert 7.0 < gate.threshold < 8.44                    # more df: a smaller critical value


CONTRACT_KEYS = {"endpoint", "status", "halt_reason", "compared", "analysis_scale", "groups",
                 "transform", "checks", "omnibus", "effect_sizes", "comparisons", "outliers",
                 "sensitivity", "conclusion", "across_endpoints"}


@pytest.mark.parametrize("scale", ["identity", "log10", "never"])
def test_endpoint_dict_has_the_contract_keys_and_no_nan(tmp_path, scale):
    import json

    body = ladder() + "sensitivity: [always_welch, always_kruskal_wallis, untransformed]\n"
    analysis, _ = run(tmp_path, body, groups_equal_on(scale))
    ep = analysis.endpoints[0]
    assert set(ep) == CONTRACT_KEYS
    json.dumps(ep, allow_nan=False)                       # raises on NaN or infinity
    assert ep["conclusion"]["scale"] == ep["analysis_scale"]
    assert ep["conclusion"]["text"].startswith("On ")
