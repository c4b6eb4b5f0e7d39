"""Plan model: every cross-field rule and field rule, compared with exact .errors() output,
and the warnings for valid plans that deserve a second look."""

from __future__ import annotations

from typing import Any

import pytest
from pydantic import ValidationError

from planrunner.plan.model import (
    Plan,
    format_path,
    plan_warnings,
    suggest,
)


def errors(plan: dict[str, Any]) -> list[tuple[str, tuple, str]]:
    with pytest.raises(ValidationError) as info:
        Plan.model_validate(plan)
    return [(e["type"], e["loc"], e["msg"]) for e in info.value.errors()]


def rule(loc: tuple, msg: str) -> tuple[str, tuple, str]:
    return ("plan_rule", loc, msg)


def warnings_of(plan: dict[str, Any]) -> list[tuple[tuple, str]]:
    return [(w.loc, w.message) for w in plan_warnings(Plan.model_validate(plan))]


# ---------------------------------------------------------------------------------------------
# the minimal plan and its defaults


def test_minimal_plan_fills_defaults(minimal_plan):
    plan = Plan.model_validate(minimal_plan)
    assert plan.omnibus == "welch"
    assert plan.variance_check.method == "none"
    assert plan.transform.policy == "none"
    assert plan.ci_level == 0.95
    assert plan.data.response == ["y"]
    assert plan.data.missing == "reject"
    assert plan.data.non_detects.rule == "reject"
    assert plan.hypotheses.alternative == "two_sided"
    assert plan.report.formats == ["html", "markdown", "json"]
    assert plan.endpoints == ("y",)
    assert plan_warnings(plan) == []


def test_ci_level_defaults_to_one_minus_alpha(minimal_plan):
    minimal_plan["alpha"] = 0.01
    assert Plan.model_validate(minimal_plan).ci_level == 0.99
    minimal_plan["ci_level"] = 0.9
    assert Plan.model_validate(minimal_plan).ci_level == 0.9


def test_plan_is_frozen(minimal_plan):
    plan = Plan.model_validate(minimal_plan)
    with pytest.raises(ValidationError):
        plan.alpha = 0.1  # type: ignore[misc]


def test_unknown_key_is_refused(minimal_plan):
    minimal_plan["data"]["respnse"] = "y"
    assert errors(minimal_plan) == [
        ("extra_forbidden", ("data", "respnse"), "Extra inputs are not permitted")
    ]


def test_text_is_not_coerced_to_numbers(minimal_plan):
    minimal_plan["alpha"] = "0.05"
    minimal_plan["data"]["levels"] = ["a", "b", 3]
    assert errors(minimal_plan) == [
        ("string_type", ("data", "levels", 2), "Input should be a valid string"),
        ("float_type", ("alpha",), "Input should be a valid number"),
    ]


def test_tagged_union_reports_one_error_with_member_path(minimal_plan):
    minimal_plan["transform"] = {"policy": "ladder", "ladder": ["identity", "cube_root"]}
    minimal_plan["variance_check"] = {"method": "levene_median", "role": "gate"}
    assert errors(minimal_plan) == [
        (
            "literal_error",
            ("transform", "ladder", "ladder", 1),
            "Input should be 'identity', 'sqrt', 'log', 'log10', 'reciprocal' or "
            "'arcsine_sqrt'",
        )
    ]


# ---------------------------------------------------------------------------------------------
# field rules


@pytest.mark.parametrize(
    ("where", "value"),
    [
        (("alpha",), 0.0),
        (("alpha",), 1.0),
        (("alpha",), 1.5),
        (("ci_level",), 1.0),
        (("variance_check", "alpha"), 0.0),
        (("normality_check", "alpha"), 1.2),
    ],
)
def test_every_alpha_and_ci_level_in_open_unit_interval(minimal_plan, where, value):
    if where[0] == "variance_check":
        minimal_plan["variance_check"] = {"method": "bartlett", "role": "describe"}
        minimal_plan["variance_check"]["alpha"] = value
        loc = ("variance_check", "bartlett", "alpha")
    elif where[0] == "normality_check":
        minimal_plan["normality_check"] = {"method": "shapiro_wilk", "role": "describe",
                                           "alpha": value}
        loc = ("normality_check", "shapiro_wilk", "alpha")
    else:
        minimal_plan[where[0]] = value
        loc = where
    assert errors(minimal_plan) == [
        rule(loc, f"must be strictly between 0 and 1; got {value!r}.")
    ]


def test_box_cox_ci_level_in_open_unit_interval(minimal_plan):
    minimal_plan["transform"] = {"policy": "box_cox", "ci_level": 1.0}
    assert errors(minimal_plan) == [
        rule(("transform", "box_cox", "ci_level"), "must be strictly between 0 and 1; got 1.0.")
    ]


def test_min_n_at_least_two(minimal_plan):
    minimal_plan["data"]["min_n"] = 1
    assert errors(minimal_plan) == [rule(("data", "min_n"), "must be at least 2; got 1.")]


def test_unknown_plan_format(minimal_plan):
    minimal_plan["planrunner"] = 2
    assert errors(minimal_plan) == [
        rule(("planrunner",),
             "plan format 2 is not known; this version of planrunner reads format 1.")
    ]


def test_plan_id_characters(minimal_plan):
    minimal_plan["id"] = "my plan"
    assert errors(minimal_plan) == [
        rule(("id",), "'my plan' is not a usable plan id; use up to 100 letters, digits, '.', "
                      "'_' or '-', starting with a letter or digit.")
    ]


def test_labels_are_single_trimmed_lines(minimal_plan):
    minimal_plan["data"]["group"] = " grp"
    minimal_plan["title"] = "   "
    assert errors(minimal_plan) == [
        rule(("title",), "must not be empty."),
        rule(("data", "group"), "' grp' must be one line without leading or trailing spaces."),
    ]


# ---------------------------------------------------------------------------------------------
# data section


def test_levels_need_two_distinct_groups(minimal_plan):
    minimal_plan["data"]["levels"] = ["a"]
    assert errors(minimal_plan) == [
        rule(("data", "levels"), "levels must name at least two different groups; got 1.")
    ]


def test_duplicate_levels(minimal_plan):
    minimal_plan["data"]["levels"] = ["a", "b", "a"]
    assert errors(minimal_plan) == [rule(("data", "levels", 2), "'a' is listed more than once.")]


def test_control_must_be_a_level(minimal_plan):
    minimal_plan["data"]["control"] = "B"
    assert errors(minimal_plan) == [
        rule(("data", "control"),
             "control 'B' is not one of the levels (a, b, c) (did you mean 'b'?).")
    ]


def test_response_columns(minimal_plan):
    minimal_plan["data"]["response"] = ["y", "grp", "y"]
    assert errors(minimal_plan) == [
        rule(("data", "response", 2), "'y' is listed more than once."),
        rule(("data", "response", 1),
             "column 'grp' cannot be both the group column and a response."),
    ]


def test_units_mapping_names_response_columns(minimal_plan):
    minimal_plan["data"]["response_units"] = {"yy": "mg"}
    assert errors(minimal_plan) == [
        rule(("data", "response_units", "yy"),
             "'yy' is not a response column (y) (did you mean 'y'?).")
    ]


@pytest.mark.parametrize("fraction", [0.0, 1.5])
def test_non_detect_fraction(minimal_plan, fraction):
    minimal_plan["data"]["non_detects"] = {"rule": "substitute", "fraction": fraction}
    assert errors(minimal_plan) == [
        rule(("data", "non_detects", "substitute", "fraction"),
             f"fraction must be greater than 0 and at most 1; got {fraction!r}.")
    ]


def test_non_detect_rule_choice(minimal_plan):
    minimal_plan["data"]["non_detects"] = {"rule": "substitut"}
    assert errors(minimal_plan)[0][:2] == ("union_tag_invalid", ("data", "non_detects"))


# ---------------------------------------------------------------------------------------------
# hypotheses and comparisons


def test_against_control_needs_control(minimal_plan):
    minimal_plan["hypotheses"]["family"] = "against_control"
    minimal_plan["comparisons"] = {"method": "pairwise_t", "adjust": "holm"}
    assert errors(minimal_plan) == [
        rule(("hypotheses", "family"),
             "family against_control needs a control group; set data.control to one of the "
             "levels.")
    ]


def test_dunnett_needs_control(minimal_plan):
    minimal_plan["hypotheses"]["family"] = "omnibus"
    minimal_plan["comparisons"] = {"method": "dunnett"}
    assert errors(minimal_plan) == [
        rule(("comparisons", "method"),
             "dunnett compares each group with a control; set data.control to one of the "
             "levels.")
    ]


def test_dunnett_with_all_pairs(minimal_plan):
    minimal_plan["data"]["control"] = "a"
    minimal_plan["comparisons"] = {"method": "dunnett"}
    assert errors(minimal_plan) == [
        rule(("comparisons", "method"),
             "dunnett only compares groups with the control, but hypotheses.family is "
             "all_pairs; use tukey_kramer, games_howell or pairwise_t.")
    ]


def test_pairwise_family_needs_comparisons(minimal_plan):
    minimal_plan["comparisons"] = {"method": "none"}
    assert errors(minimal_plan) == [
        rule(("comparisons", "method"),
             "hypotheses.family all_pairs needs a comparisons method; with none those "
             "hypotheses would never be tested.")
    ]


def test_pairwise_t_needs_adjust(minimal_plan):
    minimal_plan["comparisons"] = {"method": "pairwise_t"}
    assert errors(minimal_plan) == [
        ("missing", ("comparisons", "pairwise_t", "adjust"), "Field required")
    ]


def test_one_sided_only_against_control(minimal_plan):
    minimal_plan["hypotheses"]["alternative"] = "greater"
    assert errors(minimal_plan) == [
        rule(("hypotheses", "alternative"),
             "a one-sided alternative is only meaningful against a control; set "
             "hypotheses.family to against_control or use two_sided.")
    ]


def test_one_sided_needs_a_one_sided_comparison(minimal_plan):
    minimal_plan["hypotheses"] = {"family": "against_control", "alternative": "less"}
    minimal_plan["data"]["control"] = "a"
    minimal_plan["comparisons"] = {"method": "tukey_kramer"}
    assert errors(minimal_plan) == [
        rule(("comparisons", "method"),
             "tukey_kramer is two-sided only; a one-sided plan uses dunnett or pairwise_t.")
    ]


def test_confirmatory_list_names_response_columns(minimal_plan):
    minimal_plan["data"]["response"] = ["lead", "zinc"]
    minimal_plan["hypotheses"]["confirmatory"] = ["lead", "zink"]
    assert errors(minimal_plan) == [
        rule(("hypotheses", "confirmatory", 1),
             "'zink' is not a response column (lead, zinc) (did you mean 'zinc'?).")
    ]


def test_confirmatory_type(minimal_plan):
    minimal_plan["hypotheses"]["confirmatory"] = "yes"
    assert errors(minimal_plan) == [
        rule(("hypotheses", "confirmatory"),
             "confirmatory must be true, false or a list of response columns; got 'yes'.")
    ]


# ---------------------------------------------------------------------------------------------
# what is compared


def test_geometric_means_need_fixed_log(minimal_plan):
    minimal_plan["compare"] = "geometric_means"
    assert errors(minimal_plan) == [
        rule(("compare",),
             "compare: geometric_means needs transform policy fixed with log or log10, so "
             "that means of logs back-transform to geometric means.")
    ]
    minimal_plan["transform"] = {"policy": "fixed", "transform": "log"}
    assert Plan.model_validate(minimal_plan).compare == "geometric_means"


def test_fixed_log_with_means_warns(minimal_plan):
    minimal_plan["transform"] = {"policy": "fixed", "transform": "log10"}
    assert warnings_of(minimal_plan) == [
        (("compare",), "a fixed log transform compares geometric means, not means; consider "
                       "compare: geometric_means.")
    ]


def test_locations_go_with_kruskal_wallis(minimal_plan):
    minimal_plan["compare"] = "locations"
    minimal_plan["hypotheses"]["family"] = "omnibus"
    minimal_plan["comparisons"] = {"method": "none"}
    assert errors(minimal_plan) == [
        rule(("omnibus",), "compare: locations is tested with the rank-based kruskal_wallis "
                           "omnibus; welch compares means.")
    ]
    minimal_plan["omnibus"] = "kruskal_wallis"
    assert Plan.model_validate(minimal_plan).omnibus == "kruskal_wallis"


def test_kruskal_wallis_needs_locations(minimal_plan):
    minimal_plan["omnibus"] = "kruskal_wallis"
    assert errors(minimal_plan) == [
        rule(("omnibus",), "kruskal_wallis compares rank-based locations, not means; set "
                           "compare to locations or choose classic or welch.")
    ]


def test_locations_refuse_transform_and_mean_comparisons(minimal_plan):
    minimal_plan.update(compare="locations", omnibus="kruskal_wallis",
                        transform={"policy": "fixed", "transform": "log"})
    assert errors(minimal_plan) == [
        rule(("transform", "policy"),
             "compare: locations works on ranks, which a monotone transformation does not "
             "change; set transform.policy to none."),
        rule(("comparisons", "method"),
             "games_howell compares means, not rank-based locations; set comparisons.method "
             "to none for compare: locations."),
    ]


# ---------------------------------------------------------------------------------------------
# transformations


def test_fixed_needs_a_transform_name(minimal_plan):
    minimal_plan["transform"] = {"policy": "fixed"}
    assert errors(minimal_plan) == [
        rule(("transform", "fixed", "transform"),
             "policy fixed needs a transform name: one of sqrt, log, log10, reciprocal, "
             "arcsine_sqrt.")
    ]


def test_fixed_identity_is_policy_none(minimal_plan):
    minimal_plan["transform"] = {"policy": "fixed", "transform": "identity"}
    assert errors(minimal_plan) == [
        rule(("transform", "fixed", "transform"),
             "a fixed identity transform changes nothing; use policy: none.")
    ]


def test_ladder_must_not_be_empty(minimal_plan):
    minimal_plan["transform"] = {"policy": "ladder", "ladder": []}
    assert errors(minimal_plan) == [
        rule(("transform", "ladder", "ladder"), "the ladder needs at least one transformation.")
    ]


def test_ladder_without_duplicates(minimal_plan):
    minimal_plan["transform"] = {"policy": "ladder", "ladder": ["identity", "sqrt", "sqrt"]}
    assert errors(minimal_plan) == [
        rule(("transform", "ladder", "ladder", 2), "'sqrt' is listed more than once.")
    ]


def test_ladder_identity_first_and_one_log(minimal_plan):
    minimal_plan["transform"] = {"policy": "ladder",
                                 "ladder": ["sqrt", "identity", "log", "log10"]}
    assert errors(minimal_plan) == [
        rule(("transform", "ladder", "ladder", 1),
             "identity can only be the first rung of a ladder."),
        rule(("transform", "ladder", "ladder", 3),
             "log and log10 differ only by a constant factor, so a check cannot tell them "
             "apart; keep one of them."),
    ]


def test_ladder_needs_a_gate(minimal_plan):
    minimal_plan["transform"] = {"policy": "ladder", "ladder": ["identity", "sqrt"]}
    assert errors(minimal_plan) == [
        rule(("transform", "policy"),
             "a ladder needs a gate to decide when to move to the next rung; make "
             "variance_check a gate, or a normality gate with if_not_normal: transform.")
    ]
    minimal_plan["normality_check"] = {"method": "shapiro_wilk", "role": "gate",
                                       "if_not_normal": "transform"}
    assert Plan.model_validate(minimal_plan).gates == ("normality_check",)


def test_box_cox_bounds_and_snap_values(minimal_plan):
    minimal_plan["transform"] = {"policy": "box_cox", "lambda_bounds": [1.0, -1.0]}
    assert errors(minimal_plan) == [
        rule(("transform", "box_cox", "lambda_bounds"),
             "lambda_bounds must be two numbers [low, high] with low < high; got [1.0, -1.0].")
    ]
    minimal_plan["transform"] = {"policy": "box_cox", "lambda_bounds": [-0.5, 2.0]}
    assert errors(minimal_plan) == [
        rule(("transform", "box_cox", "snap_values", 0),
             "snap value -1.0 lies outside lambda_bounds [-0.5, 2.0].")
    ]


def test_shift_is_auto_or_positive(minimal_plan):
    minimal_plan["transform"] = {"policy": "fixed", "transform": "log", "shift": -1}
    assert errors(minimal_plan) == [
        rule(("transform", "fixed", "shift"),
             "shift must be auto, none or a positive number; got -1.")
    ]
    minimal_plan["transform"]["shift"] = 0.5
    assert Plan.model_validate(minimal_plan).transform.shift == 0.5


def test_arcsine_sqrt_only_for_proportions(minimal_plan):
    minimal_plan["transform"] = {"policy": "fixed", "transform": "arcsine_sqrt"}
    assert errors(minimal_plan) == [
        rule(("transform", "transform"),
             "arcsine_sqrt is only for proportions, but data.response_kind is continuous.")
    ]
    minimal_plan["data"]["response_kind"] = "proportion"
    assert Plan.model_validate(minimal_plan).transform.transform == "arcsine_sqrt"


def test_proportions_refuse_reciprocal_and_box_cox(minimal_plan):
    minimal_plan["data"]["response_kind"] = "proportion"
    minimal_plan["variance_check"] = {"method": "levene_median", "role": "gate"}
    minimal_plan["transform"] = {"policy": "ladder", "ladder": ["identity", "reciprocal"]}
    assert errors(minimal_plan) == [
        rule(("transform", "ladder", 1),
             "reciprocal is unsuitable for proportions (zeros have no reciprocal and the "
             "scale is reversed); use arcsine_sqrt.")
    ]
    minimal_plan["transform"] = {"policy": "box_cox"}
    assert errors(minimal_plan) == [
        rule(("transform", "policy"),
             "box_cox ignores the upper limit of 1 on a proportion; use a ladder or a fixed "
             "arcsine_sqrt.")
    ]


def test_log_of_proportion_warns(minimal_plan):
    minimal_plan["data"]["response_kind"] = "proportion"
    minimal_plan["variance_check"] = {"method": "levene_median", "role": "gate"}
    minimal_plan["transform"] = {"policy": "ladder", "ladder": ["identity", "log"]}
    assert (("transform", "ladder", 1),
            "log of a proportion needs a shift for zeros and ignores the upper limit of 1; "
            "arcsine_sqrt is usually the better choice.") in warnings_of(minimal_plan)


# ---------------------------------------------------------------------------------------------
# checks and gates


def test_gate_needs_a_method(minimal_plan):
    minimal_plan["variance_check"] = {"method": "none", "role": "gate"}
    assert errors(minimal_plan) == [
        rule(("variance_check", "none"),
             "a gate needs a method; method none examines nothing and cannot decide anything.")
    ]


def test_check_needs_a_role(minimal_plan):
    minimal_plan["variance_check"] = {"method": "hartley_fmax"}
    assert errors(minimal_plan) == [
        ("missing", ("variance_check", "hartley_fmax", "role"), "Field required")
    ]


def test_normality_gate_needs_outcome_rule(minimal_plan):
    minimal_plan["normality_check"] = {"method": "shapiro_wilk", "role": "gate"}
    assert errors(minimal_plan) == [
        rule(("normality_check", "shapiro_wilk", "if_not_normal"),
             "a normality gate needs a rule for a failed check; set if_not_normal to "
             "transform, kruskal_wallis or halt (or make the check role: describe).")
    ]
    minimal_plan["normality_check"] = {"method": "shapiro_wilk", "role": "describe",
                                       "if_not_normal": "halt"}
    assert errors(minimal_plan) == [
        rule(("normality_check", "shapiro_wilk", "if_not_normal"),
             "if_not_normal has no effect when role is describe; remove it or make the check "
             "role: gate.")
    ]


def test_if_not_normal_transform_needs_ladder(minimal_plan):
    minimal_plan["normality_check"] = {"method": "shapiro_wilk", "role": "gate",
                                       "if_not_normal": "transform"}
    assert errors(minimal_plan) == [
        rule(("normality_check", "if_not_normal"),
             "if_not_normal: transform moves to the next rung of a ladder, but "
             "transform.policy is none.")
    ]


def test_variance_gate_warns_about_two_stage_alpha(minimal_plan):
    minimal_plan["omnibus"] = "classic"
    minimal_plan["comparisons"] = {"method": "tukey_kramer"}
    minimal_plan["variance_check"] = {"method": "hartley_fmax", "role": "gate"}
    assert warnings_of(minimal_plan) == [
        (("variance_check", "role"),
         "the test is chosen after a preliminary hartley_fmax test; such two-stage plans do "
         "not hold their nominal alpha; run `planrunner rehearse` to measure the real error "
         "rates."),
        (("comparisons", "method"),
         "tukey_kramer assumes equal variances, but the omnibus is or may become welch; "
         "games_howell (all pairs) or pairwise_t with per_pair error terms do not."),
    ]


def test_describe_role_gives_no_two_stage_warning(minimal_plan):
    minimal_plan["variance_check"] = {"method": "hartley_fmax", "role": "describe"}
    assert warnings_of(minimal_plan) == []


def test_games_howell_with_classic_warns(minimal_plan):
    minimal_plan["omnibus"] = "classic"
    assert warnings_of(minimal_plan) == [
        (("comparisons", "method"),
         "games_howell allows unequal variances while the classic omnibus assumes them "
         "equal; consider omnibus: welch.")
    ]


def test_useless_gate_and_fallback_warnings(minimal_plan):
    minimal_plan["variance_check"] = {"method": "bartlett", "role": "gate"}
    found = warnings_of(minimal_plan)
    assert (("variance_check", "role"),
            "the variance gate cannot change the analysis: the omnibus is already welch and "
            "there is no ladder to climb.") in found
    minimal_plan["variance_check"] = {"method": "none"}
    minimal_plan["when_variances_differ"] = "halt"
    assert warnings_of(minimal_plan) == [
        (("when_variances_differ",),
         "when_variances_differ has no effect because variance_check is not a gate.")
    ]


# ---------------------------------------------------------------------------------------------
# outliers, sensitivity, effect sizes


def test_outlier_removal_needs_a_rule(minimal_plan):
    minimal_plan["outliers"] = {"rule": "none", "action": "remove"}
    assert errors(minimal_plan) == [
        rule(("outliers", "none", "action"),
             "removing outliers needs a pre-specified rule; set rule to studentized_residual "
             "with a threshold.")
    ]
    minimal_plan["outliers"] = {"rule": "studentized_residual", "threshold": 4,
                                "action": "remove"}
    assert Plan.model_validate(minimal_plan).outliers.threshold == 4.0


def test_sensitivity_that_repeats_the_primary_analysis(minimal_plan):
    minimal_plan["sensitivity"] = ["untransformed", "outliers_kept", "untransformed"]
    assert errors(minimal_plan) == [
        rule(("sensitivity", 2), "'untransformed' is listed more than once."),
        rule(("sensitivity", 0),
             "untransformed repeats the primary analysis because transform.policy is none."),
        rule(("sensitivity", 1),
             "outliers_kept repeats the primary analysis because no outliers are removed."),
        rule(("sensitivity", 2),
             "untransformed repeats the primary analysis because transform.policy is none."),
    ]


def test_duplicate_effect_sizes_and_formats(minimal_plan):
    minimal_plan["effect_sizes"] = ["omega_squared", "omega_squared"]
    minimal_plan["report"] = {"formats": ["json", "json"]}
    assert errors(minimal_plan) == [
        rule(("report", "formats", 1), "'json' is listed more than once.")
    ]
    minimal_plan["report"] = {"formats": ["json"]}
    assert errors(minimal_plan) == [
        rule(("effect_sizes", 1), "'omega_squared' is listed more than once.")
    ]


# ---------------------------------------------------------------------------------------------
# rehearsal


def _with_rehearsal(plan, *scenarios, **extra):
    plan["rehearsal"] = {"seed": 1, "scenarios": list(scenarios), **extra}
    return plan


NULL = {"name": "null", "distribution": "normal", "means": [1, 1, 1], "sd": 1, "n": 5}


def test_rehearsal_vectors_one_per_level(minimal_plan):
    bad = {"name": "x", "distribution": "normal", "means": [1, 2], "sd": [1, 1], "n": [5, 5, 5, 5]}
    _with_rehearsal(minimal_plan, NULL, bad)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 1, "means"),
             "means has 2 entries but there are 3 levels; give one per level."),
        rule(("rehearsal", "scenarios", 1, "n"),
             "n has 4 entries but there are 3 levels; give one number for all or one per "
             "level."),
        rule(("rehearsal", "scenarios", 1, "sd"),
             "sd has 2 entries but there are 3 levels; give one number for all or one per "
             "level."),
    ]


@pytest.mark.parametrize(
    ("distribution", "spread", "mean", "what"),
    [
        ("lognormal", {"cv": 0.5}, -1.0, "positive"),
        ("gamma", {"cv": 0.5}, 0.0, "positive"),
        ("poisson", {}, 0.0, "positive"),
        ("negative_binomial", {"dispersion": 0.2}, -3.0, "positive"),
        ("binomial", {"trials": 20}, 1.0, "strictly between 0 and 1"),
    ],
)
def test_rehearsal_means_in_domain(minimal_plan, distribution, spread, mean, what):
    if distribution == "binomial":
        minimal_plan["data"]["response_kind"] = "proportion"
    scenario = {"name": "s", "distribution": distribution, "means": [0.5, 0.5, mean], "n": 5,
                **spread}
    _with_rehearsal(minimal_plan, scenario)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 0, distribution, "means", 2),
             f"{distribution} means must be {what}; got {mean!r}.")
    ]


def test_rehearsal_replicates_bounds(minimal_plan):
    _with_rehearsal(minimal_plan, NULL, replicates=99)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "replicates"), "must be at least 100; got 99.")
    ]
    _with_rehearsal(minimal_plan, NULL, replicates=2_000_000)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "replicates"), "replicates must be at most 1000000; got 2000000.")
    ]


def test_rehearsal_seed_required_and_names_unique(minimal_plan):
    minimal_plan["rehearsal"] = {"scenarios": [NULL, NULL]}
    assert errors(minimal_plan) == [("missing", ("rehearsal", "seed"), "Field required")]
    _with_rehearsal(minimal_plan, NULL, NULL)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 1, "name"), "scenario name 'null' is used twice.")
    ]


def test_rehearsal_n_not_below_min_n(minimal_plan):
    _with_rehearsal(minimal_plan, dict(NULL, n=[5, 5, 2]))
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 0, "n"),
             "n of 2 is below data.min_n of 3, so the run would refuse such data.")
    ]


def test_rehearsal_distribution_matches_response_kind(minimal_plan):
    scenario = {"name": "s", "distribution": "binomial", "means": [0.5, 0.5, 0.5],
                "trials": 10, "n": 5}
    _with_rehearsal(minimal_plan, scenario)
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 0, "distribution"),
             "binomial simulates proportions, but data.response_kind is continuous.")
    ]


def test_rehearsal_spread_and_n_types(minimal_plan):
    _with_rehearsal(minimal_plan, dict(NULL, sd=0, n=1.5))
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 0, "normal", "sd"),
             "expected a positive number or a list with one positive number per level; got "
             "0.0."),
        rule(("rehearsal", "scenarios", 0, "normal", "n"),
             "expected a whole number of at least 2 or a list with one per level; got 1.5."),
    ]


def test_rehearsal_without_null_scenario_warns(minimal_plan):
    _with_rehearsal(minimal_plan, dict(NULL, means=[1, 2, 3]))
    assert warnings_of(minimal_plan) == [
        (("rehearsal", "scenarios"),
         "no scenario has equal means, so rehearse cannot show the plan's type-I error.")
    ]


# ---------------------------------------------------------------------------------------------
# helpers


def test_format_path():
    assert format_path(("rehearsal", "scenarios", 1, "means")) == "rehearsal.scenarios[1].means"
    assert format_path(()) == ""


def test_suggest():
    assert suggest("ladderr", ["none", "fixed", "ladder", "box_cox"]) == "ladder"
    assert suggest("Welch", ["classic", "welch"]) == "welch"
    assert suggest("zzz", ["classic", "welch"]) is None
    assert suggest(3, ["a"]) is None


# ---------------------------------------------------------------------------------------------
# more warnings


def _plan_with(base, **changes):
    for key, value in changes.items():
        if key == "data":
            base["data"].update(value)
        else:
            base[key] = value
    return base


def test_against_control_with_all_pair_method_warns(minimal_plan):
    _plan_with(minimal_plan, data={"control": "a"}, hypotheses={"family": "against_control"})
    assert warnings_of(minimal_plan) == [
        (("comparisons", "method"),
         "games_howell tests every pair although the hypotheses concern each group against "
         "the control; dunnett or pairwise_t has more power for that family.")
    ]


def test_kruskal_wallis_fallbacks_warn_of_changed_hypothesis(minimal_plan):
    _plan_with(minimal_plan, variance_check={"method": "levene_mean", "role": "gate"},
               when_variances_differ="kruskal_wallis")
    found = warnings_of(minimal_plan)
    assert (("when_variances_differ",),
            "falling back to kruskal_wallis changes the hypothesis from means to rank-based "
            "locations; the run records it as such.") in found
    _plan_with(minimal_plan, variance_check={"method": "none"},
               when_variances_differ="welch",
               normality_check={"method": "shapiro_wilk", "role": "gate",
                                "if_not_normal": "kruskal_wallis"})
    assert warnings_of(minimal_plan)[-1] == (
        ("normality_check", "if_not_normal"),
        "falling back to kruskal_wallis changes the hypothesis from means to rank-based "
        "locations; the run records it as such.",
    )


def test_several_confirmatory_endpoints_without_adjustment_warn(minimal_plan):
    minimal_plan["data"]["response"] = ["lead", "zinc"]
    minimal_plan["hypotheses"]["across_endpoints"] = "none"
    assert warnings_of(minimal_plan) == [
        (("hypotheses", "across_endpoints"),
         "several confirmatory endpoints are tested without an adjustment across them, so the "
         "chance of at least one false positive exceeds alpha.")
    ]
    minimal_plan["hypotheses"]["confirmatory"] = ["lead"]
    assert warnings_of(minimal_plan) == []


def test_large_alpha_and_missing_sample_size_warn(minimal_plan):
    minimal_plan["alpha"] = 0.2
    del minimal_plan["sample_size"]
    assert warnings_of(minimal_plan) == [
        (("alpha",), "alpha of 0.2 is unusually large for a confirmatory test."),
        (("hypotheses", "confirmatory"),
         "the plan is confirmatory but gives no sample_size justification."),
    ]


def test_low_removal_threshold_warns(minimal_plan):
    minimal_plan["outliers"] = {"rule": "studentized_residual", "threshold": 2.0,
                                "action": "remove"}
    assert warnings_of(minimal_plan) == [
        (("outliers", "threshold"),
         "a removal threshold of 2.0 removes a noticeable share of perfectly ordinary values "
         "(about 1% or more from normal data).")
    ]


def test_distribution_and_response_kind_mismatch_warns(minimal_plan):
    minimal_plan["data"]["response_kind"] = "count"
    minimal_plan["rehearsal"] = {"seed": 1, "scenarios": [NULL]}
    assert warnings_of(minimal_plan) == [
        (("rehearsal", "scenarios", 0, "distribution"),
         "normal simulates non-integer values, but data.response_kind is count.")
    ]


def test_proportion_rehearsed_with_normal_is_an_error(minimal_plan):
    minimal_plan["data"]["response_kind"] = "proportion"
    minimal_plan["rehearsal"] = {"seed": 1, "scenarios": [NULL]}
    assert errors(minimal_plan) == [
        rule(("rehearsal", "scenarios", 0, "distribution"),
             "proportions are rehearsed with distribution binomial; normal does not keep "
             "values between 0 and 1.")
    ]
