"""The plan format: strict, frozen pydantic models and the rules that tie their fields together.

A plan states, before any data exist, everything a statistical analysis plan for comparing
group means has to state: who and what (``id``, ``revision``, ``title``, ``question``), the
hypotheses and which of them are confirmatory, the quantity compared, the data layout and the
rules for missing values and non-detects, the error rates, each assumption check and what it
decides, the transformation policy and the fallbacks, the follow-up comparisons, the effect
sizes, the sensitivity analyses, and the rehearsal scenarios used to measure the plan's error
rates and power on simulated data.

Three layers of checking, each with one plain sentence per problem:

1. field types and choices (pydantic; the loader turns these into ``file:line:column`` messages);
2. rules inside one section (validators on the section's model);
3. rules across sections (the ``Plan`` validator), reported with the dotted path of the field
   that has to change.

Things that are allowed but deserve a second look are *warnings*, returned by
:func:`plan_warnings`; they never make a plan invalid.

Paths are written ``section.key[index].key`` (for example ``rehearsal.scenarios[1].means``);
:func:`format_path` builds them from a pydantic location.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Annotated, Any, Literal, Union

from pydantic import (
    AfterValidator,
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    PlainValidator,
    ValidationError,
    WithJsonSchema,
    model_validator,
)
from pydantic_core import InitErrorDetails, PydanticCustomError

#: The plan format this version of planrunner reads (the ``planrunner:`` key).
PLAN_FORMAT = 1

#: Identifier written into the generated JSON schema.
SCHEMA_ID = "urn:planrunner:schema:plan:1"

#: Transformations a plan may name, in the order of increasing strength used in ladders.
TRANSFORM_NAMES = ("identity", "sqrt", "log", "log10", "reciprocal", "arcsine_sqrt")

#: Box-Cox lambdas that correspond to the named transformations (reciprocal, 1/sqrt, log,
#: sqrt, identity); the default values lambda is snapped to.
DEFAULT_SNAP_VALUES = (-1.0, -0.5, 0.0, 0.5, 1.0)

TransformName = Literal["identity", "sqrt", "log", "log10", "reciprocal", "arcsine_sqrt"]
Role = Literal["gate", "describe"]
EffectSizeName = Literal["eta_squared", "omega_squared", "cohens_f"]
SensitivityName = Literal[
    "always_classic", "always_welch", "always_kruskal_wallis", "untransformed", "outliers_kept"
]
ReportFormat = Literal["html", "markdown", "json"]

_RULE = "plan_rule"


# --------------------------------------------------------------------------------------------
# helpers: one plain sentence per problem


def _rule_error(message: str) -> PydanticCustomError:
    # The sentence travels in ctx so that braces in quoted values never act as placeholders.
    return PydanticCustomError(_RULE, "{reason}", {"reason": message})


class _Problems:
    """Collects rule violations so that one validation pass reports all of them."""

    def __init__(self) -> None:
        self._items: list[InitErrorDetails] = []

    def add(self, loc: Sequence[str | int], message: str, value: Any = None) -> None:
        self._items.append(
            InitErrorDetails(type=_rule_error(message), loc=tuple(loc), input=value)
        )

    def raise_if_any(self, title: str) -> None:
        if self._items:
            raise ValidationError.from_exception_data(title, self._items)


def _quote(value: Any) -> str:
    if isinstance(value, str):
        return "'" + (value if len(value) <= 60 else value[:57] + "...") + "'"
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "null"
    return repr(value)


def suggest(value: Any, choices: Iterable[str]) -> str | None:
    """The closest of ``choices`` to ``value`` (case-insensitive), or None."""
    if not isinstance(value, str):
        return None
    choices = list(choices)
    lowered = {c.lower(): c for c in choices}
    if value.lower() in lowered and lowered[value.lower()] != value:
        return lowered[value.lower()]
    hits = difflib.get_close_matches(value.lower(), list(lowered), n=1, cutoff=0.6)
    return lowered[hits[0]] if hits else None


def _did_you_mean(value: Any, choices: Iterable[str]) -> str:
    hit = suggest(value, choices)
    return f" (did you mean {_quote(hit)}?)" if hit else ""


def _repeats(items: Sequence[Any]) -> list[tuple[int, Any]]:
    """(index, item) of every entry that repeats an earlier one."""
    seen: set[Any] = set()
    out = []
    for i, item in enumerate(items):
        if item in seen:
            out.append((i, item))
        seen.add(item)
    return out


def _check_unique(problems: _Problems, loc: tuple[str | int, ...], items: Sequence[Any]) -> None:
    for i, item in _repeats(items):
        problems.add((*loc, i), f"{_quote(item)} is listed more than once.", item)


def format_path(loc: Sequence[str | int]) -> str:
    """``('rehearsal', 'scenarios', 1, 'means')`` -> ``'rehearsal.scenarios[1].means'``."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


# --------------------------------------------------------------------------------------------
# scalar types with our own messages


def _label(value: str) -> str:
    if not value.strip():
        raise _rule_error("must not be empty.")
    if value != value.strip() or "\n" in value or "\r" in value:
        raise _rule_error(
            f"{_quote(value)} must be one line without leading or trailing spaces."
        )
    if len(value) > 200:
        raise _rule_error("must be at most 200 characters long.")
    return value


def _text(value: str) -> str:
    if not value.strip():
        raise _rule_error("must not be empty.")
    if len(value) > 10_000:
        raise _rule_error("must be at most 10000 characters long.")
    return value


def _plan_id(value: str) -> str:
    ok = (
        0 < len(value) <= 100
        and value[0].isascii()
        and value[0].isalnum()
        and all(c.isascii() and (c.isalnum() or c in "._-") for c in value)
    )
    if not ok:
        raise _rule_error(
            f"{_quote(value)} is not a usable plan id; use up to 100 letters, digits, '.', '_' "
            "or '-', starting with a letter or digit."
        )
    return value


def _open_unit(value: float) -> float:
    if not 0.0 < value < 1.0:
        raise _rule_error(f"must be strictly between 0 and 1; got {value!r}.")
    return value


def _positive(value: float) -> float:
    if not value > 0.0:
        raise _rule_error(f"must be greater than 0; got {value!r}.")
    return value


def _format_version(value: int) -> int:
    if value != PLAN_FORMAT:
        raise _rule_error(
            f"plan format {value!r} is not known; this version of planrunner reads format "
            f"{PLAN_FORMAT}."
        )
    return value


def _at_least(minimum: int):
    def check(value: int) -> int:
        if value < minimum:
            raise _rule_error(f"must be at least {minimum}; got {value!r}.")
        return value

    return check


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _finite_number(value: Any, what: str) -> float:
    if not _is_number(value) or not math.isfinite(value):
        raise _rule_error(f"{what}; got {_quote(value)}.")
    return float(value)


def _shift(value: Any) -> str | float:
    if value in ("auto", "none"):
        return value
    number = _finite_number(value, "shift must be auto, none or a positive number")
    if number <= 0:
        raise _rule_error(f"shift must be auto, none or a positive number; got {value!r}.")
    return number


def _per_level_positive(value: Any) -> float | list[float]:
    what = "expected a positive number or a list with one positive number per level"
    if isinstance(value, list):
        if not value:
            raise _rule_error(f"{what}; got an empty list.")
        out = [_finite_number(v, what) for v in value]
    else:
        out = _finite_number(value, what)
    for v in out if isinstance(out, list) else [out]:
        if v <= 0:
            raise _rule_error(f"{what}; got {v!r}.")
    return out


def _per_level_count(minimum: int):
    what = f"expected a whole number of at least {minimum} or a list with one per level"

    def check(value: Any) -> int | list[int]:
        items = value if isinstance(value, list) else [value]
        if isinstance(value, list) and not value:
            raise _rule_error(f"{what}; got an empty list.")
        for v in items:
            if not isinstance(v, int) or isinstance(v, bool) or v < minimum:
                raise _rule_error(f"{what}; got {_quote(v)}.")
        return list(items) if isinstance(value, list) else int(value)

    return check


def _one_or_list_of_columns(value: Any) -> Any:
    return [value] if isinstance(value, str) else value


def _confirmatory(value: Any) -> bool | list[str]:
    if isinstance(value, bool):
        return value
    if isinstance(value, list) and value and all(isinstance(v, str) and v for v in value):
        return list(value)
    raise _rule_error(
        f"confirmatory must be true, false or a list of response columns; got {_quote(value)}."
    )


def _units(value: Any) -> str | dict[str, str] | None:
    if value is None:
        return None
    if isinstance(value, str) and value.strip():
        return value
    if (
        isinstance(value, dict)
        and value
        and all(isinstance(k, str) and isinstance(v, str) and v.strip() for k, v in value.items())
    ):
        return dict(value)
    raise _rule_error(
        "response_units must be a unit such as mg/kg, or a mapping from response column to "
        f"unit; got {_quote(value)}."
    )


Label = Annotated[
    str, AfterValidator(_label), WithJsonSchema({"type": "string", "minLength": 1,
                                                 "maxLength": 200})
]
Text = Annotated[str, AfterValidator(_text), WithJsonSchema({"type": "string", "minLength": 1})]
PlanId = Annotated[
    str,
    AfterValidator(_plan_id),
    WithJsonSchema({"type": "string", "pattern": "^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$"}),
]
Probability = Annotated[
    float,
    AfterValidator(_open_unit),
    WithJsonSchema({"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1}),
]
PositiveFloat = Annotated[
    float, AfterValidator(_positive), WithJsonSchema({"type": "number", "exclusiveMinimum": 0})
]


def _int_at_least(minimum: int) -> Any:
    return Annotated[
        int,
        AfterValidator(_at_least(minimum)),
        WithJsonSchema({"type": "integer", "minimum": minimum}),
    ]


IntAtLeast0 = _int_at_least(0)
IntAtLeast1 = _int_at_least(1)
IntAtLeast2 = _int_at_least(2)
IntAtLeast100 = _int_at_least(100)
Shift = Annotated[
    Union[Literal["auto", "none"], float],
    PlainValidator(_shift),
    WithJsonSchema({"anyOf": [{"enum": ["auto", "none"]},
                              {"type": "number", "exclusiveMinimum": 0}]}),
]
PerLevelSpread = Annotated[
    Union[float, list[float]],
    PlainValidator(_per_level_positive),
    WithJsonSchema(
        {
            "anyOf": [
                {"type": "number", "exclusiveMinimum": 0},
                {"type": "array", "items": {"type": "number", "exclusiveMinimum": 0},
                 "minItems": 1},
            ]
        }
    ),
]


def _per_level_count_type(minimum: int) -> Any:
    return Annotated[
        Union[int, list[int]],
        PlainValidator(_per_level_count(minimum)),
        WithJsonSchema(
            {
                "anyOf": [
                    {"type": "integer", "minimum": minimum},
                    {"type": "array", "items": {"type": "integer", "minimum": minimum},
                     "minItems": 1},
                ]
            }
        ),
    ]


PerLevelN = _per_level_count_type(2)
PerLevelTrials = _per_level_count_type(1)
Columns = Annotated[
    list[Label],
    BeforeValidator(_one_or_list_of_columns),
    Field(min_length=1),
    WithJsonSchema(
        {
            "anyOf": [
                {"type": "string", "minLength": 1},
                {"type": "array", "items": {"type": "string", "minLength": 1}, "minItems": 1},
            ]
        }
    ),
]
Confirmatory = Annotated[
    Union[bool, list[str]],
    PlainValidator(_confirmatory),
    WithJsonSchema(
        {
            "anyOf": [
                {"type": "boolean"},
                {"type": "array", "items": {"type": "string", "minLength": 1}, "minItems": 1},
            ]
        }
    ),
]
Units = Annotated[
    Union[str, dict[str, str], None],
    PlainValidator(_units),
    WithJsonSchema(
        {
            "anyOf": [
                {"type": "string", "minLength": 1},
                {"type": "object", "additionalProperties": {"type": "string", "minLength": 1}},
                {"type": "null"},
            ]
        }
    ),
]


class Strict(BaseModel):
    """Base of every plan model: unknown keys refused, values frozen, defaults validated."""

    model_config = ConfigDict(
        extra="forbid",
        frozen=True,
        validate_default=True,
        strict=True,
        allow_inf_nan=False,
    )


# --------------------------------------------------------------------------------------------
# hypotheses and data


class Hypotheses(Strict):
    """What is tested, in which direction, and which results are confirmatory."""

    family: Literal["omnibus", "all_pairs", "against_control"] = Field(
        description="omnibus: only 'all group means are equal'; all_pairs: every pair of "
        "groups; against_control: each group against data.control."
    )
    confirmatory: Confirmatory = Field(
        True,
        description="true: every endpoint is confirmatory; false: the whole plan is "
        "exploratory; a list: only these response columns are confirmatory.",
    )
    alternative: Literal["two_sided", "greater", "less"] = Field(
        "two_sided",
        description="Direction of the pairwise hypotheses: greater means group minus control "
        "> 0. One-sided alternatives are only allowed against a control.",
    )
    across_endpoints: Literal["none", "holm", "benjamini_hochberg"] = Field(
        "holm",
        description="Multiplicity adjustment across the confirmatory endpoints when "
        "data.response lists several columns (holm: family-wise error; benjamini_hochberg: "
        "false discovery rate).",
    )


class NonDetectReject(Strict):
    """Values such as '<0.5' or 'ND' make the data invalid."""

    rule: Literal["reject"]


class NonDetectSubstitute(Strict):
    """Values such as '<0.5' are replaced by a stated fraction of their limit."""

    rule: Literal["substitute"]
    fraction: float = Field(
        description="Multiplier of the reporting limit, in (0, 1]; 0.5 substitutes half the "
        "limit."
    )
    limit: PositiveFloat | None = Field(
        None,
        description="Reporting limit for markers that carry no number, such as 'ND'; without "
        "it such markers are rejected.",
    )

    @model_validator(mode="after")
    def _fraction_range(self) -> NonDetectSubstitute:
        if not 0.0 < self.fraction <= 1.0:
            problems = _Problems()
            problems.add(
                ("fraction",),
                f"fraction must be greater than 0 and at most 1; got {self.fraction!r}.",
                self.fraction,
            )
            problems.raise_if_any("NonDetectSubstitute")
        return self


NonDetects = Annotated[Union[NonDetectReject, NonDetectSubstitute], Field(discriminator="rule")]


class Data(Strict):
    """Where the data are, how they are laid out, and what counts as unusable."""

    file: Label = Field(description="Data file, relative to the plan file.")
    group: Label = Field(description="Column holding the group label.")
    response: Columns = Field(
        description="Response column, or a list of columns (one endpoint each)."
    )
    response_kind: Literal["continuous", "count", "proportion"] = Field(
        "continuous",
        description="continuous measurements, counts (whole numbers >= 0), or proportions "
        "in [0, 1].",
    )
    response_units: Units = Field(
        None, description="Unit of the response, or a mapping from response column to unit."
    )
    experimental_unit: Label | None = Field(
        None,
        description="What one row is (a tank, a tablet, a soil core): the unit that was "
        "randomised or sampled independently.",
    )
    levels: list[Label] = Field(description="Expected groups, in report order.")
    control: Label | None = Field(None, description="Reference group; one of levels.")
    missing: Literal["drop", "reject"] = Field(
        "reject",
        description="drop: rows with an empty response are left out and counted; reject: "
        "any empty response makes the data invalid.",
    )
    non_detects: NonDetects = Field({"rule": "reject"}, description="Values like '<0.5' or 'ND'.")
    min_n: IntAtLeast2 = Field(
        3, description="Smallest usable group size."
    )
    degenerate_groups: Literal["halt", "reject"] = Field(
        "reject",
        description="What happens when a group has fewer than min_n values or zero variance: "
        "reject the data (exit 3) or halt the plan by its own rule (exit 4).",
    )

    @property
    def endpoints(self) -> tuple[str, ...]:
        """The response columns, one endpoint each."""
        return tuple(self.response)

    @model_validator(mode="after")
    def _consistent(self) -> Data:
        problems = _Problems()
        _check_unique(problems, ("levels",), self.levels)
        if len(set(self.levels)) < 2:
            problems.add(
                ("levels",),
                f"levels must name at least two different groups; got {len(set(self.levels))}.",
                self.levels,
            )
        if self.control is not None and self.control not in self.levels:
            problems.add(
                ("control",),
                f"control {_quote(self.control)} is not one of the levels "
                f"({', '.join(self.levels)}){_did_you_mean(self.control, self.levels)}.",
                self.control,
            )
        _check_unique(problems, ("response",), self.response)
        for i, column in enumerate(self.response):
            if column == self.group:
                problems.add(
                    ("response", i),
                    f"column {_quote(column)} cannot be both the group column and a response.",
                    column,
                )
        if isinstance(self.response_units, dict):
            for column in self.response_units:
                if column not in self.response:
                    problems.add(
                        ("response_units", column),
                        f"{_quote(column)} is not a response column "
                        f"({', '.join(self.response)})"
                        f"{_did_you_mean(column, self.response)}.",
                        column,
                    )
        problems.raise_if_any("Data")
        return self


# --------------------------------------------------------------------------------------------
# assumption checks


def _refuse_role(data: Any) -> Any:
    if isinstance(data, dict) and "role" in data:
        if data["role"] == "gate":
            raise _rule_error(
                "a gate needs a method; method none examines nothing and cannot decide "
                "anything."
            )
        raise _rule_error("method none takes no role; remove role or name a method.")
    return data


class NoVarianceCheck(Strict):
    """Variances are not examined."""

    method: Literal["none"]

    _no_role = model_validator(mode="before")(lambda data: _refuse_role(data))


class HartleyFmaxCheck(Strict):
    """Hartley's Fmax: largest over smallest group variance, against its tabled distribution."""

    method: Literal["hartley_fmax"]
    alpha: Probability = 0.05
    role: Role = Field(
        description="gate: a failed check sends the analysis down the transform policy and "
        "then when_variances_differ; describe: reported only."
    )
    unequal_n: Literal["exact", "smallest_group"] = Field(
        "exact",
        description="With unequal group sizes: exact uses the exact Fmax distribution for "
        "unequal degrees of freedom (summed over which group holds the smallest variance); "
        "smallest_group uses the equal-size distribution with the smallest group's degrees "
        "of freedom, the conservative printed-table convention.",
    )


class VarianceTestCheck(Strict):
    """A test of equal variances: Levene (mean or median centred), Bartlett, Fligner-Killeen."""

    method: Literal["levene_median", "levene_mean", "bartlett", "fligner_killeen"]
    alpha: Probability = 0.05
    role: Role = Field(
        description="gate: a failed check sends the analysis down the transform policy and "
        "then when_variances_differ; describe: reported only."
    )


VarianceCheck = Annotated[
    Union[NoVarianceCheck, HartleyFmaxCheck, VarianceTestCheck], Field(discriminator="method")
]


class NoNormalityCheck(Strict):
    """Normality is not examined."""

    method: Literal["none"]

    _no_role = model_validator(mode="before")(lambda data: _refuse_role(data))


class ShapiroWilkCheck(Strict):
    """Shapiro-Wilk test of normality."""

    method: Literal["shapiro_wilk"]
    alpha: Probability = 0.05
    role: Role = Field(
        description="gate: a failed check triggers if_not_normal; describe: reported only."
    )
    applies_to: Literal["residuals", "each_group"] = Field(
        "residuals",
        description="residuals: one test on the pooled residuals of the one-way model; "
        "each_group: one test per group, failed if any group fails.",
    )
    if_not_normal: Literal["transform", "kruskal_wallis", "halt"] | None = Field(
        None,
        description="For a gate: transform moves to the next rung of the ladder; "
        "kruskal_wallis switches to the rank test; halt stops the plan. Not used with "
        "role describe.",
    )

    @model_validator(mode="after")
    def _outcome_rule(self) -> ShapiroWilkCheck:
        problems = _Problems()
        if self.role == "gate" and self.if_not_normal is None:
            problems.add(
                ("if_not_normal",),
                "a normality gate needs a rule for a failed check; set if_not_normal to "
                "transform, kruskal_wallis or halt (or make the check role: describe).",
            )
        if self.role == "describe" and self.if_not_normal is not None:
            problems.add(
                ("if_not_normal",),
                "if_not_normal has no effect when role is describe; remove it or make the "
                "check role: gate.",
                self.if_not_normal,
            )
        problems.raise_if_any("ShapiroWilkCheck")
        return self


NormalityCheck = Annotated[
    Union[NoNormalityCheck, ShapiroWilkCheck], Field(discriminator="method")
]


# --------------------------------------------------------------------------------------------
# transformation policy


class NoTransform(Strict):
    """The data are analysed as measured."""

    policy: Literal["none"]


class FixedTransform(Strict):
    """One named transformation, applied to every value before any check."""

    policy: Literal["fixed"]
    transform: TransformName | None = Field(None, description="The transformation to apply.")
    shift: Shift = Field(
        "auto",
        description="Constant added to every value when the data contain zeros or negative "
        "values the transformation cannot take; auto lets the run choose and record it; none "
        "adds nothing, so such values reject the data.",
    )

    @model_validator(mode="after")
    def _named(self) -> FixedTransform:
        problems = _Problems()
        if self.transform is None:
            problems.add(
                ("transform",),
                "policy fixed needs a transform name: one of "
                + ", ".join(TRANSFORM_NAMES[1:]) + ".",
            )
        elif self.transform == "identity":
            problems.add(
                ("transform",),
                "a fixed identity transform changes nothing; use policy: none.",
                self.transform,
            )
        problems.raise_if_any("FixedTransform")
        return self


class LadderTransform(Strict):
    """Transformations tried in order; the next is tried while a gate check still fails."""

    policy: Literal["ladder"]
    ladder: list[TransformName] = Field(
        description="Rungs in the order they are tried, usually starting with identity."
    )
    shift: Shift = Field(
        "auto",
        description="Constant added to every value when the data contain zeros or negative "
        "values a rung cannot take; auto lets the run choose and record it; none adds nothing, "
        "so a rung such values fall outside of is skipped.",
    )

    @model_validator(mode="after")
    def _rungs(self) -> LadderTransform:
        problems = _Problems()
        if not self.ladder:
            problems.add(("ladder",), "the ladder needs at least one transformation.", [])
        _check_unique(problems, ("ladder",), self.ladder)
        for i, name in enumerate(self.ladder):
            if name == "identity" and i > 0:
                problems.add(
                    ("ladder", i),
                    "identity can only be the first rung of a ladder.",
                    name,
                )
        if "log" in self.ladder and "log10" in self.ladder:
            problems.add(
                ("ladder", max(self.ladder.index("log"), self.ladder.index("log10"))),
                "log and log10 differ only by a constant factor, so a check cannot tell them "
                "apart; keep one of them.",
                "log10",
            )
        problems.raise_if_any("LadderTransform")
        return self


class BoxCoxTransform(Strict):
    """Box-Cox power transformation with lambda estimated under the one-way model."""

    policy: Literal["box_cox"]
    lambda_bounds: list[float] = Field(
        [-2.0, 2.0], description="Search interval [low, high] for lambda."
    )
    ci_level: Probability = Field(
        0.95, description="Confidence level of the profile-likelihood interval for lambda."
    )
    rounding: Literal["snap", "none"] = Field(
        "snap",
        description="snap: use the snap_values entry inside the lambda interval nearest the "
        "estimate (the estimate itself when none lies inside); none: use the estimate.",
    )
    snap_values: list[float] = Field(
        list(DEFAULT_SNAP_VALUES),
        description="Interpretable lambdas: -1 reciprocal, -0.5 reciprocal square root, "
        "0 log, 0.5 square root, 1 no transformation.",
    )
    shift: Shift = Field(
        "auto",
        description="Constant added to every value when the data contain zeros or negative "
        "values; auto lets the run choose and record it; none adds nothing, so such values "
        "reject the data.",
    )

    @model_validator(mode="after")
    def _bounds(self) -> BoxCoxTransform:
        problems = _Problems()
        bounds = self.lambda_bounds
        if len(bounds) != 2 or not bounds[0] < bounds[1]:
            problems.add(
                ("lambda_bounds",),
                f"lambda_bounds must be two numbers [low, high] with low < high; got {bounds!r}.",
                bounds,
            )
        else:
            for i, value in enumerate(self.snap_values):
                if not bounds[0] <= value <= bounds[1]:
                    problems.add(
                        ("snap_values", i),
                        f"snap value {value!r} lies outside lambda_bounds {bounds!r}.",
                        value,
                    )
        if self.rounding == "snap" and not self.snap_values:
            problems.add(
                ("snap_values",),
                "rounding snap needs at least one snap value.",
                [],
            )
        _check_unique(problems, ("snap_values",), self.snap_values)
        problems.raise_if_any("BoxCoxTransform")
        return self


Transform = Annotated[
    Union[NoTransform, FixedTransform, LadderTransform, BoxCoxTransform],
    Field(discriminator="policy"),
]


# --------------------------------------------------------------------------------------------
# outliers, comparisons, effect sizes, sample size


class NoOutlierRule(Strict):
    """No outlier screening."""

    rule: Literal["none"]
    action: Literal["flag", "remove"] = "flag"

    @model_validator(mode="after")
    def _removal_needs_rule(self) -> NoOutlierRule:
        if self.action == "remove":
            problems = _Problems()
            problems.add(
                ("action",),
                "removing outliers needs a pre-specified rule; set rule to "
                "studentized_residual with a threshold.",
                self.action,
            )
            problems.raise_if_any("NoOutlierRule")
        return self


class StudentizedResidualRule(Strict):
    """Values whose externally studentized residual (one-way model) exceeds a threshold."""

    rule: Literal["studentized_residual"]
    threshold: PositiveFloat = Field(3.0, description="Absolute studentized residual limit.")
    action: Literal["flag", "remove"] = Field(
        "flag", description="flag: report and keep; remove: leave out of the analysis."
    )


Outliers = Annotated[Union[NoOutlierRule, StudentizedResidualRule], Field(discriminator="rule")]


def _only_after() -> Any:
    return Field(
        False, description="Run the comparisons only when the omnibus test is significant."
    )


class TukeyKramer(Strict):
    """All pairs, studentized range with the pooled variance (assumes equal variances)."""

    method: Literal["tukey_kramer"]
    only_after_significant_omnibus: bool = _only_after()


class GamesHowell(Strict):
    """All pairs, studentized range with per-pair Welch degrees of freedom."""

    method: Literal["games_howell"]
    only_after_significant_omnibus: bool = _only_after()


class PairwiseT(Strict):
    """t tests for the pairs the hypothesis family names, with a stated adjustment."""

    method: Literal["pairwise_t"]
    only_after_significant_omnibus: bool = _only_after()
    adjust: Literal["bonferroni", "holm", "sidak"]
    error_term: Literal["per_pair", "pooled"] = Field(
        "per_pair",
        description="per_pair: Welch t for each pair; pooled: one pooled variance from all "
        "groups.",
    )


class Dunnett(Strict):
    """Each group against data.control (assumes equal variances)."""

    method: Literal["dunnett"]
    only_after_significant_omnibus: bool = _only_after()


class NoComparisons(Strict):
    """No follow-up comparisons."""

    method: Literal["none"]


Comparisons = Annotated[
    Union[TukeyKramer, GamesHowell, PairwiseT, Dunnett, NoComparisons],
    Field(discriminator="method"),
]


class AssumedEffect(Strict):
    """The effect the sample size was chosen to detect."""

    measure: Literal["cohens_f", "eta_squared", "omega_squared"]
    value: PositiveFloat

    @model_validator(mode="after")
    def _range(self) -> AssumedEffect:
        if self.measure != "cohens_f" and self.value >= 1:
            problems = _Problems()
            problems.add(
                ("value",), f"{self.measure} must be less than 1; got {self.value!r}.", self.value
            )
            problems.raise_if_any("AssumedEffect")
        return self


class SampleSize(Strict):
    """Why the group sizes are what they are."""

    justification: Text
    target_power: Probability | None = None
    assumed_effect: AssumedEffect | None = None


# --------------------------------------------------------------------------------------------
# rehearsal


def _scenario_checks(scenario: Any, low: float | None, high: float | None, what: str) -> None:
    problems = _Problems()
    if not scenario.means:
        problems.add(("means",), "means needs one value per level.", [])
    for i, mean in enumerate(scenario.means):
        if (low is not None and not mean > low) or (high is not None and not mean < high):
            problems.add(
                ("means", i),
                f"{scenario.distribution} means must be {what}; got {mean!r}.",
                mean,
            )
    problems.raise_if_any(type(scenario).__name__)


class NormalScenario(Strict):
    """Normal data with the given means and standard deviations."""

    name: Label
    distribution: Literal["normal"]
    means: list[float]
    sd: PerLevelSpread
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> NormalScenario:
        _scenario_checks(self, None, None, "")
        return self


class LognormalScenario(Strict):
    """Lognormal data with the given arithmetic means and coefficients of variation."""

    name: Label
    distribution: Literal["lognormal"]
    means: list[float]
    cv: PerLevelSpread
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> LognormalScenario:
        _scenario_checks(self, 0.0, None, "positive")
        return self


class GammaScenario(Strict):
    """Gamma data with the given means and coefficients of variation."""

    name: Label
    distribution: Literal["gamma"]
    means: list[float]
    cv: PerLevelSpread
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> GammaScenario:
        _scenario_checks(self, 0.0, None, "positive")
        return self


class PoissonScenario(Strict):
    """Poisson counts with the given means (the variance equals the mean)."""

    name: Label
    distribution: Literal["poisson"]
    means: list[float]
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> PoissonScenario:
        _scenario_checks(self, 0.0, None, "positive")
        return self


class NegativeBinomialScenario(Strict):
    """Overdispersed counts: variance = mean + dispersion x mean squared."""

    name: Label
    distribution: Literal["negative_binomial"]
    means: list[float]
    dispersion: PerLevelSpread
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> NegativeBinomialScenario:
        _scenario_checks(self, 0.0, None, "positive")
        return self


class BinomialScenario(Strict):
    """Proportions: successes out of a number of trials, divided by the trials."""

    name: Label
    distribution: Literal["binomial"]
    means: list[float] = Field(description="Success probability per level, in (0, 1).")
    trials: PerLevelTrials
    n: PerLevelN

    @model_validator(mode="after")
    def _means(self) -> BinomialScenario:
        _scenario_checks(self, 0.0, 1.0, "strictly between 0 and 1")
        return self


Scenario = Annotated[
    Union[
        NormalScenario,
        LognormalScenario,
        GammaScenario,
        PoissonScenario,
        NegativeBinomialScenario,
        BinomialScenario,
    ],
    Field(discriminator="distribution"),
]

_SPREAD_KEY = {
    "normal": "sd",
    "lognormal": "cv",
    "gamma": "cv",
    "poisson": None,
    "negative_binomial": "dispersion",
    "binomial": "trials",
}

MAX_REPLICATES = 1_000_000


class Rehearsal(Strict):
    """Simulated data sets that measure the plan's error rates and power."""

    replicates: IntAtLeast100 = Field(
        10_000, description=f"Simulated data sets per scenario, 100 to {MAX_REPLICATES}."
    )
    seed: IntAtLeast0
    scenarios: list[Scenario] = Field(min_length=1)

    @model_validator(mode="after")
    def _sane(self) -> Rehearsal:
        problems = _Problems()
        if self.replicates > MAX_REPLICATES:
            problems.add(
                ("replicates",),
                f"replicates must be at most {MAX_REPLICATES}; got {self.replicates}.",
                self.replicates,
            )
        if self.seed >= 2**63:
            problems.add(("seed",), "seed must be less than 2**63.", self.seed)
        for i, name in _repeats([s.name for s in self.scenarios]):
            problems.add(("scenarios", i, "name"), f"scenario name {_quote(name)} is used twice.",
                         name)
        problems.raise_if_any("Rehearsal")
        return self


class Report(Strict):
    """What the run writes."""

    formats: list[ReportFormat] = Field(["html", "markdown", "json"], min_length=1)

    @model_validator(mode="after")
    def _unique(self) -> Report:
        problems = _Problems()
        _check_unique(problems, ("formats",), self.formats)
        problems.raise_if_any("Report")
        return self


# --------------------------------------------------------------------------------------------
# the plan


def _ci_from_alpha(data: Any) -> Any:
    if isinstance(data, dict) and data.get("ci_level") is None:
        alpha = data.get("alpha", 0.05)
        if _is_number(alpha) and 0 < alpha < 1:
            data = {**data, "ci_level": round(1.0 - float(alpha), 12)}
    return data


class Plan(Strict):
    """A pre-specified comparison of group means (plan format 1)."""

    planrunner: Annotated[
        int, AfterValidator(_format_version), WithJsonSchema({"const": PLAN_FORMAT})
    ] = Field(
        description="Plan format version; this planrunner reads 1."
    )
    id: PlanId = Field(description="Short identifier, e.g. trout-feed-2027.")
    revision: IntAtLeast1 = Field(
        1, description="Revision of this plan; raise it with every approved change."
    )
    title: Text
    question: Text = Field(description="The question the comparison answers, in plain words.")
    hypotheses: Hypotheses
    compare: Literal["means", "geometric_means", "locations"] = Field(
        "means",
        description="means; geometric_means (with a fixed log transform); locations "
        "(rank-based location shift, with kruskal_wallis).",
    )
    data: Data
    alpha: Probability = Field(0.05, description="Significance level of the confirmatory tests.")
    ci_level: Probability | None = Field(
        None, description="Confidence level of intervals; defaults to 1 - alpha."
    )
    omnibus: Literal["classic", "welch", "kruskal_wallis"] = Field(
        "welch",
        description="The test used unless a check redirects: classic (pooled-variance F), "
        "welch (Welch's heteroscedastic F), kruskal_wallis (ranks).",
    )
    variance_check: VarianceCheck = Field({"method": "none"})
    normality_check: NormalityCheck = Field({"method": "none"})
    transform: Transform = Field({"policy": "none"})
    when_variances_differ: Literal["welch", "kruskal_wallis", "halt"] = Field(
        "welch",
        description="What a failed variance gate leads to once the transform policy is "
        "exhausted.",
    )
    outliers: Outliers = Field({"rule": "none", "action": "flag"})
    sensitivity: list[SensitivityName] = Field(
        [], description="Analyses reported beside the primary one."
    )
    comparisons: Comparisons
    effect_sizes: list[EffectSizeName] = Field(["eta_squared", "omega_squared"])
    sample_size: SampleSize | None = None
    rehearsal: Rehearsal | None = None
    report: Report = Field({})

    _fill_ci = model_validator(mode="before")(_ci_from_alpha)

    # -- convenience used by describe, the engine and the report ------------------------------

    @property
    def levels(self) -> tuple[str, ...]:
        return tuple(self.data.levels)

    @property
    def endpoints(self) -> tuple[str, ...]:
        return self.data.endpoints

    @property
    def confirmatory_endpoints(self) -> tuple[str, ...]:
        c = self.hypotheses.confirmatory
        if c is True:
            return self.endpoints
        if c is False:
            return ()
        return tuple(e for e in self.endpoints if e in c)

    @property
    def gates(self) -> tuple[str, ...]:
        """Names of the checks that act as decision points."""
        out = []
        for key in ("variance_check", "normality_check"):
            check = getattr(self, key)
            if check.method != "none" and check.role == "gate":
                out.append(key)
        return tuple(out)

    def transforms_named(self) -> tuple[tuple[tuple[str | int, ...], str], ...]:
        """(path, name) of every transformation the policy can apply."""
        t = self.transform
        if t.policy == "fixed" and t.transform is not None:
            return ((("transform", "transform"), t.transform),)
        if t.policy == "ladder":
            return tuple((("transform", "ladder", i), n) for i, n in enumerate(t.ladder))
        return ()

    @model_validator(mode="after")
    def _across_sections(self) -> Plan:
        problems = _Problems()
        _cross_rules(self, problems)
        problems.raise_if_any("Plan")
        return self


def _cross_rules(plan: Plan, problems: _Problems) -> None:  # noqa: C901 - a list of rules
    h, d, cmp_ = plan.hypotheses, plan.data, plan.comparisons
    k = len(d.levels)

    # hypotheses and comparisons
    if h.family == "against_control" and d.control is None:
        problems.add(
            ("hypotheses", "family"),
            "family against_control needs a control group; set data.control to one of the "
            "levels.",
            h.family,
        )
    if cmp_.method == "dunnett" and d.control is None:
        problems.add(
            ("comparisons", "method"),
            "dunnett compares each group with a control; set data.control to one of the levels.",
            cmp_.method,
        )
    if cmp_.method == "dunnett" and h.family == "all_pairs":
        problems.add(
            ("comparisons", "method"),
            "dunnett only compares groups with the control, but hypotheses.family is "
            "all_pairs; use tukey_kramer, games_howell or pairwise_t.",
            cmp_.method,
        )
    if cmp_.method == "none" and h.family in ("all_pairs", "against_control"):
        problems.add(
            ("comparisons", "method"),
            f"hypotheses.family {h.family} needs a comparisons method; with none those "
            "hypotheses would never be tested.",
            cmp_.method,
        )
    if h.alternative != "two_sided":
        if h.family != "against_control":
            problems.add(
                ("hypotheses", "alternative"),
                "a one-sided alternative is only meaningful against a control; set "
                "hypotheses.family to against_control or use two_sided.",
                h.alternative,
            )
        elif cmp_.method in ("tukey_kramer", "games_howell"):
            problems.add(
                ("comparisons", "method"),
                f"{cmp_.method} is two-sided only; a one-sided plan uses dunnett or pairwise_t.",
                cmp_.method,
            )
    if isinstance(h.confirmatory, list):
        for i, column in enumerate(h.confirmatory):
            if column not in d.response:
                problems.add(
                    ("hypotheses", "confirmatory", i),
                    f"{_quote(column)} is not a response column ({', '.join(d.response)})"
                    f"{_did_you_mean(column, d.response)}.",
                    column,
                )
        for i, column in _repeats(h.confirmatory):
            problems.add(
                ("hypotheses", "confirmatory", i), f"{_quote(column)} is listed more than once.",
                column,
            )

    # what is compared, and by which test
    if plan.compare == "locations":
        if plan.omnibus != "kruskal_wallis":
            problems.add(
                ("omnibus",),
                "compare: locations is tested with the rank-based kruskal_wallis omnibus; "
                f"{plan.omnibus} compares means.",
                plan.omnibus,
            )
        if plan.transform.policy != "none":
            problems.add(
                ("transform", "policy"),
                "compare: locations works on ranks, which a monotone transformation does not "
                "change; set transform.policy to none.",
                plan.transform.policy,
            )
        if cmp_.method != "none":
            problems.add(
                ("comparisons", "method"),
                f"{cmp_.method} compares means, not rank-based locations; set "
                "comparisons.method to none for compare: locations.",
                cmp_.method,
            )
    elif plan.omnibus == "kruskal_wallis":
        problems.add(
            ("omnibus",),
            f"kruskal_wallis compares rank-based locations, not {plan.compare.replace('_', ' ')}"
            "; set compare to locations or choose classic or welch.",
            plan.omnibus,
        )
    if plan.compare == "geometric_means":
        t = plan.transform
        if not (t.policy == "fixed" and t.transform in ("log", "log10")):
            problems.add(
                ("compare",),
                "compare: geometric_means needs transform policy fixed with log or log10, so "
                "that means of logs back-transform to geometric means.",
                plan.compare,
            )

    # transformations and the response kind
    for path, name in plan.transforms_named():
        if name == "arcsine_sqrt" and d.response_kind != "proportion":
            problems.add(
                path,
                f"arcsine_sqrt is only for proportions, but data.response_kind is "
                f"{d.response_kind}.",
                name,
            )
        if name == "reciprocal" and d.response_kind == "proportion":
            problems.add(
                path,
                "reciprocal is unsuitable for proportions (zeros have no reciprocal and the "
                "scale is reversed); use arcsine_sqrt.",
                name,
            )
    if plan.transform.policy == "box_cox" and d.response_kind == "proportion":
        problems.add(
            ("transform", "policy"),
            "box_cox ignores the upper limit of 1 on a proportion; use a ladder or a fixed "
            "arcsine_sqrt.",
            "box_cox",
        )
    # gates and fallbacks
    normality = plan.normality_check
    variance_gate = plan.variance_check.method != "none" and plan.variance_check.role == "gate"
    normality_gate = normality.method != "none" and normality.role == "gate"
    if plan.transform.policy == "ladder" and not (
        variance_gate or (normality_gate and normality.if_not_normal == "transform")
    ):
        problems.add(
            ("transform", "policy"),
            "a ladder needs a gate to decide when to move to the next rung; make "
            "variance_check a gate, or a normality gate with if_not_normal: transform.",
            "ladder",
        )
    if normality_gate and normality.if_not_normal == "transform" and (
        plan.transform.policy != "ladder"
    ):
        problems.add(
            ("normality_check", "if_not_normal"),
            "if_not_normal: transform moves to the next rung of a ladder, but transform.policy "
            f"is {plan.transform.policy}.",
            "transform",
        )

    # sensitivity analyses
    _check_unique(problems, ("sensitivity",), plan.sensitivity)
    for i, name in enumerate(plan.sensitivity):
        if name == "untransformed" and plan.transform.policy == "none":
            problems.add(
                ("sensitivity", i),
                "untransformed repeats the primary analysis because transform.policy is none.",
                name,
            )
        if name == "outliers_kept" and plan.outliers.action != "remove":
            problems.add(
                ("sensitivity", i),
                "outliers_kept repeats the primary analysis because no outliers are removed.",
                name,
            )
        if name == "always_kruskal_wallis" and plan.compare == "locations":
            problems.add(
                ("sensitivity", i),
                "always_kruskal_wallis repeats the primary analysis of compare: locations.",
                name,
            )
    _check_unique(problems, ("effect_sizes",), plan.effect_sizes)

    # rehearsal scenarios must fit the data layout
    if plan.rehearsal is not None:
        for i, s in enumerate(plan.rehearsal.scenarios):
            base = ("rehearsal", "scenarios", i)
            if len(s.means) != k:
                problems.add(
                    (*base, "means"),
                    f"means has {len(s.means)} entries but there are {k} levels; give one "
                    "per level.",
                    s.means,
                )
            for key in ("n", _SPREAD_KEY[s.distribution]):
                if key is None:
                    continue
                value = getattr(s, key)
                if isinstance(value, list) and len(value) != k:
                    problems.add(
                        (*base, key),
                        f"{key} has {len(value)} entries but there are {k} levels; give one "
                        "number for all or one per level.",
                        value,
                    )
            sizes = s.n if isinstance(s.n, list) else [s.n]
            if min(sizes) < d.min_n:
                problems.add(
                    (*base, "n"),
                    f"n of {min(sizes)} is below data.min_n of {d.min_n}, so the run would "
                    "refuse such data.",
                    s.n,
                )
            if s.distribution == "binomial" and d.response_kind != "proportion":
                problems.add(
                    (*base, "distribution"),
                    f"binomial simulates proportions, but data.response_kind is "
                    f"{d.response_kind}.",
                    s.distribution,
                )
            if d.response_kind == "proportion" and s.distribution != "binomial":
                problems.add(
                    (*base, "distribution"),
                    f"proportions are rehearsed with distribution binomial; {s.distribution} "
                    "does not keep values between 0 and 1.",
                    s.distribution,
                )


# --------------------------------------------------------------------------------------------
# warnings


@dataclass(frozen=True, slots=True)
class PlanWarning:
    """Something valid that deserves a second look; ``loc`` is the place in the plan."""

    loc: tuple[str | int, ...]
    message: str

    @property
    def path(self) -> str:
        return format_path(self.loc)


def plan_warnings(plan: Plan) -> list[PlanWarning]:
    """Warnings for a valid plan, in plan order."""
    out: list[PlanWarning] = []

    def warn(loc: tuple[str | int, ...], message: str) -> None:
        out.append(PlanWarning(loc, message))

    h, d, cmp_ = plan.hypotheses, plan.data, plan.comparisons
    variance = plan.variance_check
    normality = plan.normality_check
    variance_gate = "variance_check" in plan.gates
    normality_gate = "normality_check" in plan.gates

    if h.family == "against_control" and cmp_.method in ("tukey_kramer", "games_howell"):
        warn(
            ("comparisons", "method"),
            f"{cmp_.method} tests every pair although the hypotheses concern each group against "
            "the control; dunnett or pairwise_t has more power for that family.",
        )
    if len(d.response) > 1 and h.across_endpoints == "none" and len(
        plan.confirmatory_endpoints
    ) > 1:
        warn(
            ("hypotheses", "across_endpoints"),
            "several confirmatory endpoints are tested without an adjustment across them, so "
            "the chance of at least one false positive exceeds alpha.",
        )
    if plan.alpha > 0.1:
        warn(("alpha",), f"alpha of {plan.alpha!r} is unusually large for a confirmatory test.")
    if h.confirmatory is not False and plan.sample_size is None:
        warn(
            ("hypotheses", "confirmatory"),
            "the plan is confirmatory but gives no sample_size justification.",
        )
    if d.file.startswith("/") or (len(d.file) > 1 and d.file[1] == ":"):
        warn(
            ("data", "file"),
            "an absolute data path ties the plan to one machine; give it relative to the plan.",
        )

    # what is compared
    t = plan.transform
    if plan.compare == "means" and t.policy == "fixed" and t.transform in ("log", "log10"):
        warn(
            ("compare",),
            "a fixed log transform compares geometric means, not means; consider compare: "
            "geometric_means.",
        )
    for path, name in plan.transforms_named():
        if name in ("log", "log10") and d.response_kind == "proportion":
            warn(
                path,
                f"{name} of a proportion needs a shift for zeros and ignores the upper limit "
                "of 1; arcsine_sqrt is usually the better choice.",
            )

    # gates: two-stage procedures
    for key, check, gate in (
        ("variance_check", variance, variance_gate),
        ("normality_check", normality, normality_gate),
    ):
        if gate:
            warn(
                (key, "role"),
                f"the test is chosen after a preliminary {check.method} test; such two-stage "
                "plans do not hold their nominal alpha; run `planrunner rehearse` to measure "
                "the real error rates.",
            )
    if (
        variance_gate
        and plan.when_variances_differ == "welch"
        and plan.omnibus == "welch"
        and t.policy != "ladder"
    ):
        warn(
            ("variance_check", "role"),
            "the variance gate cannot change the analysis: the omnibus is already welch and "
            "there is no ladder to climb.",
        )
    if "when_variances_differ" in plan.model_fields_set and not variance_gate:
        warn(
            ("when_variances_differ",),
            "when_variances_differ has no effect because variance_check is not a gate.",
        )
    if variance_gate and plan.when_variances_differ == "kruskal_wallis":
        warn(
            ("when_variances_differ",),
            "falling back to kruskal_wallis changes the hypothesis from "
            f"{plan.compare.replace('_', ' ')} to rank-based locations; the run records it as "
            "such.",
        )
    if normality_gate and normality.if_not_normal == "kruskal_wallis":
        warn(
            ("normality_check", "if_not_normal"),
            "falling back to kruskal_wallis changes the hypothesis from "
            f"{plan.compare.replace('_', ' ')} to rank-based locations; the run records it as "
            "such.",
        )

    # comparisons and the variance assumption
    welch_possible = plan.omnibus == "welch" or (
        variance_gate and plan.when_variances_differ == "welch"
    )
    if cmp_.method in ("tukey_kramer", "dunnett") and welch_possible:
        warn(
            ("comparisons", "method"),
            f"{cmp_.method} assumes equal variances, but the omnibus is or may become welch; "
            "games_howell (all pairs) or pairwise_t with per_pair error terms do not.",
        )
    if cmp_.method == "games_howell" and plan.omnibus == "classic":
        warn(
            ("comparisons", "method"),
            "games_howell allows unequal variances while the classic omnibus assumes them "
            "equal; consider omnibus: welch.",
        )

    # outliers
    o = plan.outliers
    if o.rule == "studentized_residual" and o.action == "remove" and o.threshold < 2.5:
        warn(
            ("outliers", "threshold"),
            f"a removal threshold of {o.threshold!r} removes a noticeable share of perfectly "
            "ordinary values (about 1% or more from normal data).",
        )

    # sensitivity analyses that repeat the primary one
    redirect = variance_gate or (
        normality_gate and normality.if_not_normal in ("kruskal_wallis", "transform")
    )
    for i, name in enumerate(plan.sensitivity):
        same = {"always_classic": "classic", "always_welch": "welch"}.get(name)
        if same == plan.omnibus and not redirect and t.policy == "none":
            warn(("sensitivity", i), f"{name} repeats the primary analysis.")

    # effect sizes
    if plan.compare == "locations" and plan.effect_sizes:
        warn(
            ("effect_sizes",),
            "these effect sizes describe differences in means, while the plan compares "
            "rank-based locations.",
        )

    # rehearsal
    r = plan.rehearsal
    if r is not None:
        if not any(len(set(s.means)) == 1 for s in r.scenarios):
            warn(
                ("rehearsal", "scenarios"),
                "no scenario has equal means, so rehearse cannot show the plan's type-I error.",
            )
        for i, s in enumerate(r.scenarios):
            counts = s.distribution in ("poisson", "negative_binomial")
            if counts and d.response_kind != "count":
                warn(
                    ("rehearsal", "scenarios", i, "distribution"),
                    f"{s.distribution} simulates counts, but data.response_kind is "
                    f"{d.response_kind}.",
                )
            if d.response_kind == "count" and s.distribution in ("normal", "lognormal", "gamma"):
                warn(
                    ("rehearsal", "scenarios", i, "distribution"),
                    f"{s.distribution} simulates non-integer values, but data.response_kind is "
                    "count.",
                )
    return out


# --------------------------------------------------------------------------------------------
# starter plan written by `planrunner new`

STARTER_PLAN = """\
# planrunner plan: fixed before the data exist, kept in version control.
# Check it with `planrunner validate THIS_FILE`; rehearse it before the data arrive.
# For completion in editors, run `planrunner schema` and point the YAML language server at
# schemas/plan.schema.json with a first-line comment naming it as $schema.
planrunner: 1                     # plan format version
id: basil-led-2027                # short identifier, used in results and logs
revision: 1                       # raise with every approved change to this plan
title: Basil under four LED spectra - dry leaf mass per plant at harvest
question: Does the mean dry leaf mass per plant differ between the four LED spectra?

hypotheses:
  family: all_pairs               # omnibus | all_pairs | against_control
  confirmatory: true              # or a list of response columns
  alternative: two_sided          # one-sided needs family against_control
  across_endpoints: holm          # used when data.response lists several columns

compare: means                    # means | geometric_means | locations

data:
  file: data/basil-led.csv        # relative to this plan file
  group: spectrum                 # column holding the group label
  response: dry_mass_g            # one column, or a list of columns
  response_kind: continuous       # continuous | count | proportion
  response_units: g
  experimental_unit: pot (one plant per pot, pots randomised to benches)
  levels: [white, red_blue, red_blue_far_red, full_spectrum]
  missing: drop                   # drop (counted and reported) | reject
  non_detects: {rule: reject}     # or {rule: substitute, fraction: 0.5}
  min_n: 4
  degenerate_groups: reject       # reject (exit 3) | halt (exit 4)

alpha: 0.05
# ci_level defaults to 1 - alpha

# Welch's ANOVA without a preliminary variance test: it does not assume equal variances, and
# choosing the test after a variance test would change the real error rate.
omnibus: welch                    # classic | welch | kruskal_wallis
variance_check: {method: levene_median, role: describe}   # reported, decides nothing
normality_check: {method: shapiro_wilk, role: describe, applies_to: residuals}
transform: {policy: none}         # none | fixed | ladder | box_cox
outliers: {rule: studentized_residual, threshold: 3.5, action: flag}   # flag, never remove
sensitivity: [always_kruskal_wallis]

comparisons:
  method: games_howell            # tukey_kramer | games_howell | pairwise_t | dunnett | none
  only_after_significant_omnibus: false

effect_sizes: [omega_squared, eta_squared]

sample_size:
  justification: >-
    Nine pots per spectrum give about 82% power to detect Cohen's f = 0.6 at alpha 0.05
    with the classic F test and equal variances (noncentral F); the rehearsal below checks
    the Welch route with unequal variances. The bench holds 36 pots.
  target_power: 0.8
  assumed_effect: {measure: cohens_f, value: 0.6}

rehearsal:                        # used by `planrunner rehearse`
  replicates: 10000
  seed: 20270315
  scenarios:
    - {name: no difference, distribution: normal, means: [4.0, 4.0, 4.0, 4.0], sd: [0.5, 0.5, 0.8, 0.8], n: 9}
    - {name: expected effect, distribution: normal, means: [4.0, 4.4, 4.9, 4.5], sd: [0.5, 0.5, 0.8, 0.8], n: 9}

report: {formats: [html, markdown, json]}
"""


# --------------------------------------------------------------------------------------------
# JSON schema


def plan_json_schema() -> dict[str, Any]:
    """The JSON schema of the plan format, for editors (``yaml-language-server``)."""
    schema = Plan.model_json_schema(mode="validation")
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = SCHEMA_ID
    schema["title"] = f"planrunner plan, format {PLAN_FORMAT}"
    schema["description"] = (
        "A comparison of group means fixed before the data exist. Generated from "
        "planrunner.plan.model by `planrunner schema`; do not edit by hand."
    )
    return schema


def plan_json_schema_text() -> str:
    """The schema as stable text: sorted keys, two-space indent, final newline."""
    import json

    return json.dumps(plan_json_schema(), indent=2, sort_keys=True, ensure_ascii=False) + "\n"


__all__ = [
    "DEFAULT_SNAP_VALUES",
    "MAX_REPLICATES",
    "PLAN_FORMAT",
    "SCHEMA_ID",
    "STARTER_PLAN",
    "TRANSFORM_NAMES",
    "AssumedEffect",
    "BinomialScenario",
    "BoxCoxTransform",
    "Data",
    "Dunnett",
    "FixedTransform",
    "GammaScenario",
    "GamesHowell",
    "HartleyFmaxCheck",
    "Hypotheses",
    "LadderTransform",
    "LognormalScenario",
    "NegativeBinomialScenario",
    "NoComparisons",
    "NoNormalityCheck",
    "NoOutlierRule",
    "NoTransform",
    "NoVarianceCheck",
    "NonDetectReject",
    "NonDetectSubstitute",
    "NormalScenario",
    "PairwiseT",
    "Plan",
    "PlanWarning",
    "PoissonScenario",
    "Rehearsal",
    "Report",
    "SampleSize",
    "ShapiroWilkCheck",
    "Strict",
    "StudentizedResidualRule",
    "TukeyKramer",
    "VarianceTestCheck",
    "format_path",
    "plan_json_schema",
    "plan_json_schema_text",
    "plan_warnings",
    "suggest",
]
