"""The loader never fails with anything but PlanError, whatever it is fed."""

from __future__ import annotations

import copy
from typing import Any

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planrunner.errors import PlanError
from planrunner.plan.load import LoadedPlan, load_plan_bytes

VALID: dict[str, Any] = {
    "planrunner": 1,
    "id": "fuzz-plan",
    "title": "Fuzz",
    "question": "Do they differ?",
    "hypotheses": {"family": "all_pairs"},
    "data": {"file": "d.csv", "group": "g", "response": "y", "levels": ["a", "b", "c"]},
    "omnibus": "classic",
    "variance_check": {"method": "levene_median", "role": "gate"},
    "transform": {"policy": "ladder", "ladder": ["identity", "sqrt", "log10"]},
    "comparisons": {"method": "tukey_kramer"},
    "rehearsal": {
        "seed": 3,
        "scenarios": [
            {"name": "null", "distribution": "normal", "means": [1, 1, 1], "sd": 1, "n": 5}
        ],
    },
}

FUZZ = settings(max_examples=150, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])


def only_plan_error(raw: bytes) -> None:
    try:
        result = load_plan_bytes(raw, path="fuzz.yaml")
    except PlanError as exc:
        assert exc.exit_code == 2
        assert exc.problems
        assert all(isinstance(p, str) and p.startswith("fuzz.yaml:") for p in exc.problems)
        return
    assert isinstance(result, LoadedPlan)


scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=20),
    st.sampled_from(["none", "ladder", "welch", "gate", "a", "b", "c", "auto", "", "yes"]),
)
trees = st.recursive(
    scalars,
    lambda children: st.one_of(
        st.lists(children, max_size=5),
        st.dictionaries(st.one_of(st.text(max_size=12), st.sampled_from(list(VALID))),
                        children, max_size=5),
    ),
    max_leaves=30,
)


@FUZZ
@given(st.binary(max_size=2000))
def test_arbitrary_bytes(raw):
    only_plan_error(raw)


@FUZZ
@given(st.text(max_size=500))
def test_arbitrary_text(text):
    only_plan_error(text.encode("utf-8"))


@FUZZ
@given(trees)
def test_arbitrary_yaml_trees(tree):
    only_plan_error(yaml.safe_dump(tree, allow_unicode=True).encode("utf-8"))


def _paths(node: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(node, dict):
        for key, value in node.items():
            out += _paths(value, (*prefix, key))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            out += _paths(value, (*prefix, i))
    return out


@FUZZ
@given(st.data())
def test_valid_plan_with_one_part_replaced(data):
    plan = copy.deepcopy(VALID)
    path = data.draw(st.sampled_from(_paths(plan)[1:]))
    parent = plan
    for key in path[:-1]:
        parent = parent[key]
    parent[path[-1]] = data.draw(trees)
    only_plan_error(yaml.safe_dump(plan, allow_unicode=True).encode("utf-8"))


@FUZZ
@given(st.data())
def test_valid_plan_text_with_bytes_spliced_in(data):
    raw = yaml.safe_dump(VALID).encode("utf-8")
    at = data.draw(st.integers(min_value=0, max_value=len(raw)))
    cut = data.draw(st.integers(min_value=0, max_value=20))
    insert = data.draw(st.one_of(st.binary(max_size=20),
                                 st.sampled_from([b"&a ", b"*a", b"!!str ", b"\n---\n", b"\t",
                                                  b": ", b"- ", b"[", b"{", b"'", b"\x00"])))
    only_plan_error(raw[:at] + insert + raw[at + cut:])
