"""The YAML loader: located messages, every refusal, suggestions, and data path resolution."""

from __future__ import annotations

import codecs
import re
from pathlib import Path

import pytest
import yaml

from planrunner.errors import PlanError
from planrunner.plan.load import (
    MAX_DEPTH,
    MAX_PLAN_BYTES,
    load_plan,
    load_plan_bytes,
    resolve_data_path,
    validate_plan,
)

GOOD = """\
planrunner: 1
id: demo-plan
title: Demo plan
question: Do the group means differ?
hypotheses: {family: all_pairs}
data:
  file: data/demo.csv
  group: grp
  response: y
  levels: [a, b, c]
comparisons: {method: games_howell}
sample_size: {justification: Demo only.}
"""

LOCATED = re.compile(r"^(?P<file>[^:]+):(?P<line>\d+):(?P<col>\d+): (?P<rest>.+)$")


def problems(text: str | bytes, name: str = "plan.yaml") -> list[str]:
    raw = text.encode("utf-8") if isinstance(text, str) else text
    with pytest.raises(PlanError) as info:
        load_plan_bytes(raw, path=name)
    assert info.value.exit_code == 2
    assert info.value.problems, "a PlanError always lists its problems"
    return list(info.value.problems)


def test_good_plan_loads(tmp_path):
    path = tmp_path / "plan.yaml"
    path.write_text(GOOD, encoding="utf-8")
    loaded = load_plan(path)
    assert loaded.model.id == "demo-plan"
    assert loaded.raw == GOOD.encode()
    assert loaded.path == path
    assert loaded.warnings == ()
    assert len(loaded.fingerprints.plan) == len(loaded.fingerprints.raw) == 64
    assert loaded.where(("data", "levels", 1)) == (10, 15)
    assert validate_plan(path).fingerprints == loaded.fingerprints


def test_misspelt_key_with_place_and_suggestion():
    text = GOOD.replace("  response: y", "  respnse: y")
    assert problems(text) == [
        "plan.yaml:6:1: data.response: this key is required",
        "plan.yaml:9:3: data.respnse: unknown key 'respnse'; use one of file, group, response, "
        "response_kind, response_units, experimental_unit, levels, control, missing, "
        "non_detects, min_n, degenerate_groups (did you mean 'response'?)",
    ]


def test_misspelt_choice_with_suggestion():
    text = GOOD + "transform:\n  policy: ladderr\n"
    assert problems(text) == [
        "plan.yaml:14:11: transform.policy: 'ladderr' is not allowed; use one of none, fixed, "
        "ladder, box_cox (did you mean 'ladder'?)"
    ]


def test_misspelt_literal_inside_a_union_member():
    text = GOOD + "variance_check: {method: levene_median, role: gaet}\n"
    assert problems(text) == [
        "plan.yaml:13:47: variance_check.role: 'gaet' is not allowed; use one of gate, "
        "describe (did you mean 'gate'?)"
    ]


def test_wrong_types_are_located():
    text = GOOD.replace("levels: [a, b, c]", "levels: [a, b, 10]") + "alpha: high\n"
    assert problems(text) == [
        "plan.yaml:10:18: data.levels[2]: expected text; got 10 (put it in quotes, '10', to "
        "use it as text)",
        "plan.yaml:13:8: alpha: expected a number; got 'high'",
    ]


def test_mapping_expected():
    text = GOOD + "transform: ladder\n"
    assert problems(text) == [
        "plan.yaml:13:12: transform: expected a mapping of keys to values, such as "
        "'key: value' lines; got 'ladder'"
    ]


def test_discriminator_missing():
    text = GOOD + "transform: {ladder: [identity]}\n"
    assert problems(text) == ["plan.yaml:13:1: transform.policy: 'policy' is required here"]


def test_cross_field_rule_is_located():
    text = GOOD.replace("hypotheses: {family: all_pairs}",
                        "hypotheses: {family: all_pairs, alternative: greater}")
    assert problems(text) == [
        "plan.yaml:5:46: hypotheses.alternative: a one-sided alternative is only meaningful "
        "against a control; set hypotheses.family to against_control or use two_sided."
    ]


def test_several_problems_sorted_by_line():
    text = GOOD.replace("id: demo-plan", "id: demo plan").replace(
        "group: grp", "group: [grp]") + "alpha: 2\n"
    found = problems(text)
    assert [LOCATED.match(p).group("line") for p in found] == ["2", "8", "13"]
    assert found[0] == (
        "plan.yaml:2:5: id: 'demo plan' is not a usable plan id; use up to 100 letters, "
        "digits, '.', '_' or '-', starting with a letter or digit."
    )


def test_missing_top_level_key():
    text = GOOD.replace("title: Demo plan\n", "")
    assert problems(text) == ["plan.yaml:1:1: title: this key is required"]


# ---------------------------------------------------------------------------------------------
# refusals


def test_duplicate_key_refused():
    text = GOOD + "alpha: 0.05\nalpha: 0.01\n"
    assert problems(text) == [
        "plan.yaml:14:1: alpha: duplicate key 'alpha' (first given on line 13); each key may "
        "appear once."
    ]


def test_nested_duplicate_key_refused():
    text = GOOD.replace("  group: grp\n", "  group: grp\n  group: other\n")
    assert problems(text) == [
        "plan.yaml:9:3: data.group: duplicate key 'group' (first given on line 8); each key "
        "may appear once."
    ]


def test_anchor_and_alias_refused():
    text = GOOD.replace("levels: [a, b, c]", "levels: &lv [a, b, c]") + "extra: *lv\n"
    assert problems(text) == [
        "plan.yaml:10:11: anchor &lv is not allowed; write every value out in full.",
        "plan.yaml:13:8: alias *lv is not allowed; write the value out in full.",
    ]


def test_merge_key_is_just_an_unknown_key():
    text = GOOD.replace("data:\n", "data:\n  <<: {file: x}\n")
    assert problems(text)[0].startswith("plan.yaml:7:3: data.<<: unknown key '<<'")


@pytest.mark.parametrize(
    ("snippet", "tag"),
    [
        ("title: !!str Demo", "tag:yaml.org,2002:str"),
        ("title: !custom Demo", "!custom"),
        ("title: !!python/object:os.system {}", "tag:yaml.org,2002:python/object:os.system"),
        ("title: !!set {a, b}", "tag:yaml.org,2002:set"),
    ],
)
def test_tags_refused(snippet, tag):
    text = GOOD.replace("title: Demo plan", snippet)
    assert problems(text) == [
        f"plan.yaml:3:8: tag {tag} is not allowed; a plan uses plain values without tags."
    ]


@pytest.mark.parametrize(
    ("text", "found"),
    [("- a\n- b\n", "a list"), ("just text\n", "a single value"), ("42\n", "a single value")],
)
def test_non_mapping_documents_refused(text, found):
    assert problems(text) == [
        f"plan.yaml:1:1: a plan must be a mapping of keys to values; found {found}."
    ]


@pytest.mark.parametrize("text", ["", "# only a comment\n", "---\n", "\n\n   \n", "~\n"])
def test_empty_documents_refused(text):
    assert problems(text) == ["plan.yaml:1:1: the plan is empty."]


def test_multiple_documents_refused():
    assert problems(GOOD + "---\nid: second\n") == [
        "plan.yaml:13:1: a second YAML document starts here; a plan file holds exactly one."
    ]


def test_non_utf8_refused_with_place():
    raw = GOOD.replace("Demo plan", "Demo plan \xe9t\xe9").encode("latin-1")
    assert problems(raw) == [
        "plan.yaml:3:18: byte 0xe9 is not UTF-8; save the file as UTF-8."
    ]


def test_utf8_bom_accepted_and_kept_in_raw_fingerprint():
    plain = load_plan_bytes(GOOD.encode())
    with_bom = load_plan_bytes(codecs.BOM_UTF8 + GOOD.encode())
    assert with_bom.fingerprints.plan == plain.fingerprints.plan
    assert with_bom.fingerprints.raw != plain.fingerprints.raw


@pytest.mark.parametrize("encoding", ["utf-16", "utf-32"])
def test_utf16_and_utf32_refused(encoding):
    assert problems(GOOD.encode(encoding)) == [
        "plan.yaml:1:1: the file is UTF-16 or UTF-32; save it as UTF-8."
    ]


def test_oversized_file_refused():
    raw = GOOD.encode() + b"#" * MAX_PLAN_BYTES
    assert problems(raw) == [
        f"plan.yaml:1:1: the file is larger than {MAX_PLAN_BYTES} bytes; a plan is short text."
    ]


def test_deep_nesting_refused():
    depth = MAX_DEPTH + 5
    text = GOOD + "title2: " + "[" * depth + "]" * depth + "\n"
    assert problems(text) == [
        f"plan.yaml:13:{8 + MAX_DEPTH}: nesting deeper than {MAX_DEPTH} levels is not allowed."
    ]


def test_very_deep_nesting_is_not_a_recursion_error():
    text = "a: " + "[" * 100_000 + "]" * 100_000 + "\n"
    assert problems(text)[0].endswith(f"nesting deeper than {MAX_DEPTH} levels is not allowed.")


def test_control_character_refused():
    text = GOOD.replace("Demo plan", "Demo\x00plan")
    assert problems(text) == ["plan.yaml:3:12: character U+0000 is not allowed in a plan file."]


def test_yaml_syntax_error_is_located():
    text = GOOD.replace("  group: grp", "  group: grp\n group: bad")
    found = problems(text)
    assert len(found) == 1
    assert found[0].startswith("plan.yaml:9:2: YAML syntax: ")


def test_tab_indentation_is_a_located_syntax_error():
    found = problems(GOOD.replace("  group: grp", "\tgroup: grp"))
    assert found[0].startswith("plan.yaml:8:1: YAML syntax: ")


def test_complex_key_refused():
    text = GOOD + "? [a, b]\n: 1\n"
    assert problems(text) == ["plan.yaml:13:3: keys must be plain text, not lists or mappings."]


def test_huge_integer_refused():
    text = GOOD.replace("{family: all_pairs}", "{family: all_pairs}\nrevision: " + "9" * 5000)
    assert problems(text) == [
        "plan.yaml:6:11: revision: a number with more than 100 digits is not allowed."
    ]


@pytest.mark.parametrize("spelling", [".nan", ".inf", "-.inf", "+.INF"])
def test_non_finite_numbers_refused(spelling):
    value = float(spelling.lower().lstrip("+").replace(".", ""))
    assert problems(GOOD + f"alpha: {spelling}\n") == [
        f"plan.yaml:13:8: alpha: expected a finite number; got {value!r}"
    ]


# ---------------------------------------------------------------------------------------------
# YAML 1.2 core scalars: no surprises from YAML 1.1


def test_yes_no_on_off_stay_text():
    text = GOOD.replace("levels: [a, b, c]", "levels: [yes, no, on, off]")
    assert load_plan_bytes(text.encode()).model.data.levels == ["yes", "no", "on", "off"]


def test_dates_and_sexagesimal_stay_text():
    text = GOOD.replace("title: Demo plan", "title: 2027-01-31").replace(
        "levels: [a, b, c]", "levels: ['1:30', 1:40, 010]")
    found = problems(text)
    # 010 is a decimal integer (YAML 1.2), 1:40 stays text
    assert found == [
        "plan.yaml:10:26: data.levels[2]: expected text; got 10 (put it in quotes, '10', to "
        "use it as text)"
    ]
    ok = load_plan_bytes(text.replace("010", "'010'").encode()).model
    assert ok.title == "2027-01-31"
    assert ok.data.levels == ["1:30", "1:40", "010"]


def test_booleans_are_strict(tmp_path):
    text = GOOD.replace("{method: games_howell}",
                        "{method: games_howell, only_after_significant_omnibus: yes}")
    assert problems(text) == [
        "plan.yaml:11:69: comparisons.only_after_significant_omnibus: expected true or false; "
        "got 'yes'"
    ]


# ---------------------------------------------------------------------------------------------
# files and paths


def test_missing_file(tmp_path):
    target = tmp_path / "nothing.yaml"
    with pytest.raises(PlanError) as info:
        load_plan(target)
    assert info.value.problems == (f"{target}: no such plan file.",)
    assert info.value.exit_code == 2


def test_directory_is_not_a_plan(tmp_path):
    with pytest.raises(PlanError) as info:
        load_plan(tmp_path)
    assert info.value.problems == (f"{tmp_path}: is a folder, not a plan file.",)


def test_data_path_relative_to_plan(tmp_path):
    folder = tmp_path / "plans"
    folder.mkdir()
    path = folder / "p.yaml"
    path.write_text(GOOD, encoding="utf-8")
    loaded = load_plan(path)
    assert loaded.model.data.file == "data/demo.csv"  # the plan's own text is kept
    assert loaded.data_path == folder / "data" / "demo.csv"
    absolute = Path(tmp_path / "abs.csv").resolve()
    assert resolve_data_path(path, str(absolute)) == absolute
    assert resolve_data_path(None, "x.csv") == Path("x.csv")


def test_absolute_data_path_warns():
    text = GOOD.replace("file: data/demo.csv", "file: /srv/lab/demo.csv")
    loaded = load_plan_bytes(text.encode(), path="p.yaml")
    assert [str(w) for w in loaded.warnings] == [
        "p.yaml:7:9: data.file: an absolute data path ties the plan to one machine; give it "
        "relative to the plan."
    ]


def test_warnings_are_located():
    text = GOOD + "omnibus: classic\ncomparisons2: x\n"
    assert problems(text)[0].startswith("plan.yaml:14:1: comparisons2: unknown key")
    loaded = load_plan_bytes((GOOD + "omnibus: classic\n").encode(), path="p.yaml")
    assert [str(w) for w in loaded.warnings] == [
        "p.yaml:11:23: comparisons.method: games_howell allows unequal variances while the "
        "classic omnibus assumes them equal; consider omnibus: welch."
    ]


def test_message_has_count(tmp_path):
    with pytest.raises(PlanError) as info:
        load_plan_bytes(b"- a\n", path="x.yaml")
    assert info.value.message == "x.yaml is not a valid plan (1 problem)"
    assert str(info.value) == (
        "x.yaml is not a valid plan (1 problem)\n"
        "  x.yaml:1:1: a plan must be a mapping of keys to values; found a list."
    )


def test_resolved_plan_of_safe_dump_round_trips(minimal_plan):
    loaded = load_plan_bytes(yaml.safe_dump(minimal_plan).encode())
    assert loaded.model.id == "demo-plan"
