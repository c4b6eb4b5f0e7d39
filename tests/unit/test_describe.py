"""The decision tree in plain words."""

from __future__ import annotations

import copy

from planrunner.plan.describe import Step, describe_plan, render_steps
from planrunner.plan.load import load_plan
from planrunner.plan.model import Plan

from pathlib import Path

PLANS_DIR = Path(__file__).resolve().parents[2] / "plans"

STAGES = ["hypotheses", "data", "outliers", "transform", "variance_check", "normality_check",
          "omnibus", "comparisons", "effect_sizes"]


def test_minimal_plan_steps(minimal_plan):
    steps = describe_plan(Plan.model_validate(minimal_plan))
    assert all(isinstance(s, Step) for s in steps)
    assert [s.stage for s in steps] == STAGES
    text = {s.stage: s.text for s in steps}
    assert text["omnibus"] == (
        "Test whether the group means are all equal with Welch's ANOVA at 0.05."
    )
    assert text["variance_check"] == "Do not test whether the variances are equal."
    assert text["comparisons"] == (
        "Compare every pair of groups with Games-Howell, whatever the omnibus result; report "
        "each difference (a - b, in level order) with its 95% confidence interval."
    )


def test_gate_with_ladder_names_every_branch(minimal_plan):
    plan = copy.deepcopy(minimal_plan)
    plan.update(
        omnibus="classic",
        variance_check={"method": "hartley_fmax", "alpha": 0.05, "role": "gate"},
        transform={"policy": "ladder", "ladder": ["identity", "sqrt", "log10"]},
        when_variances_differ="welch",
        comparisons={"method": "tukey_kramer", "only_after_significant_omnibus": True},
    )
    text = {s.stage: s.text for s in describe_plan(Plan.model_validate(plan))}
    assert text["variance_check"] == (
        "Check equal variances with Hartley's Fmax at 0.05 (with unequal group sizes, the "
        "exact distribution for unequal degrees of freedom); if they differ, try the square root then log10, "
        "checking again after each; if they still differ, use Welch's ANOVA."
    )
    assert text["omnibus"].endswith("at 0.05 unless a check above redirects it.")
    assert "only if the omnibus test is significant" in text["comparisons"]
    assert text["transform"].startswith("Start with the data as measured;")


def test_against_control_one_sided(minimal_plan):
    minimal_plan["data"]["control"] = "a"
    minimal_plan["hypotheses"] = {"family": "against_control", "alternative": "greater"}
    minimal_plan["comparisons"] = {"method": "dunnett"}
    steps = describe_plan(Plan.model_validate(minimal_plan))
    assert steps[0].text.startswith(
        "Compare group means: test each group against the control 'a' for an increase over "
        "the control, at alpha 0.05"
    )
    assert steps[[s.stage for s in steps].index("comparisons")].text.startswith(
        "Compare each group with the control 'a' with Dunnett's test"
    )


def test_several_endpoints_and_sensitivity():
    plan = load_plan(PLANS_DIR / "soil-remediation-metals.yaml").model
    steps = describe_plan(plan)
    assert steps[-1].stage == "endpoints"
    assert steps[-1].text == (
        "Run these steps separately for each of the 3 endpoints, adjusting across the "
        "confirmatory endpoints by Holm's method."
    )
    assert "ratios of geometric means" in {s.stage: s.text for s in steps}["comparisons"]


def test_every_example_plan_describes_every_stage():
    for path in sorted(PLANS_DIR.glob("*.yaml")):
        steps = describe_plan(load_plan(path).model)
        assert [s.stage for s in steps][: len(STAGES)] == STAGES, path.name
        assert all(s.text.endswith(".") for s in steps), path.name


def test_render_numbers_the_steps(minimal_plan):
    steps = describe_plan(Plan.model_validate(minimal_plan))
    lines = render_steps(steps, indent="  ").splitlines()
    assert len(lines) == len(steps) == 9
    assert lines[0].startswith("  1. Compare group means")
    assert lines[8].startswith("  9. Report eta squared and omega squared")
