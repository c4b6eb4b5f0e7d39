"""Plan fingerprints: stable under layout changes, sensitive to every value; resolved plan."""

from __future__ import annotations

import hashlib
import json

import pytest

from planrunner.plan.fingerprint import (
    RESOLVED_NAME,
    canonical_json,
    plan_fingerprint,
    raw_fingerprint,
    resolved_yaml,
    write_resolved_plan,
)
from planrunner.plan.load import load_plan_bytes

BASE = """\
planrunner: 1
id: wash-2027
title: Wash trial
question: Do the mean counts differ?
hypotheses: {family: all_pairs}
data:
  file: data/wash.csv
  group: protocol
  response: cfu
  levels: [tap, chlorine, ozone]
alpha: 0.05
comparisons: {method: games_howell}
sample_size: {justification: Demo.}
"""

# Same plan: comments, blank lines, block vs flow style, key order, quoting, number spelling,
# a single response written as a one-item list and defaults written out.
SAME = """\
# a comment at the top
comparisons:
  method: "games_howell"      # trailing comment

data:
  levels:
    - tap
    - 'chlorine'
    - ozone
  response: [cfu]
  group: protocol
  file: data/wash.csv
  missing: reject
alpha: 5.0e-2
hypotheses:
    family: all_pairs
question: "Do the mean counts differ?"
title: Wash trial
sample_size: {justification: Demo.}
id: wash-2027
omnibus: welch
planrunner: 1
"""


def fp(text: str) -> str:
    return load_plan_bytes(text.encode("utf-8")).fingerprints.plan


def test_sha256_is_the_standard_one():
    # FIPS 180-2, appendix B.1: SHA-256("abc")
    assert raw_fingerprint(b"abc") == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    )


def test_layout_does_not_change_the_plan_fingerprint():
    assert fp(BASE) == fp(SAME)
    assert raw_fingerprint(BASE.encode()) != raw_fingerprint(SAME.encode())


@pytest.mark.parametrize(
    ("old", "new"),
    [
        ("id: wash-2027", "id: wash-2028"),
        ("alpha: 0.05", "alpha: 0.049"),
        ("[tap, chlorine, ozone]", "[chlorine, tap, ozone]"),  # level order is report order
        ("title: Wash trial", "title: Wash trial "[:-1] + "."),
        ("{method: games_howell}", "{method: tukey_kramer}"),
        ("group: protocol", "group: Protocol"),
        ("hypotheses: {family: all_pairs}", "hypotheses: {family: all_pairs, confirmatory: false}"),
    ],
)
def test_any_value_change_changes_the_plan_fingerprint(old, new):
    assert old in BASE
    assert fp(BASE.replace(old, new)) != fp(BASE)


def test_canonical_json_form():
    plan = load_plan_bytes(BASE.replace("Wash trial", "Wäsche µ-trial").encode()).model
    data = canonical_json(plan)
    text = data.decode("utf-8")
    assert "Wäsche µ-trial" in text  # not escaped
    assert ", " not in text and ": " not in text.replace("Do the mean counts differ?", "")
    parsed = json.loads(text)
    assert list(parsed) == sorted(parsed)
    assert parsed["ci_level"] == 0.95  # defaults filled in
    assert plan_fingerprint(plan) == hashlib.sha256(data).hexdigest()


def test_resolved_yaml_round_trips_to_the_same_fingerprint(tmp_path):
    loaded = load_plan_bytes(BASE.encode())
    text = resolved_yaml(loaded.model)
    assert text.startswith("# planrunner plan as validated")
    assert f"sha256:{loaded.fingerprints.plan}" in text
    assert "when_variances_differ: welch" in text  # a default, written out
    again = load_plan_bytes(text.encode())
    assert again.fingerprints.plan == loaded.fingerprints.plan


def test_resolved_yaml_quotes_text_that_looks_like_booleans():
    loaded = load_plan_bytes(BASE.replace("[tap, chlorine, ozone]", "['yes', 'no', 'true']")
                             .encode())
    again = load_plan_bytes(resolved_yaml(loaded.model).encode())
    assert again.model.data.levels == ["yes", "no", "true"]


def test_write_resolved_plan_to_folder_and_file(tmp_path):
    plan = load_plan_bytes(BASE.encode()).model
    written = write_resolved_plan(plan, tmp_path)
    assert written == tmp_path / RESOLVED_NAME
    assert written.read_text(encoding="utf-8") == resolved_yaml(plan)
    other = write_resolved_plan(plan, tmp_path / "copy.yaml")
    assert other.read_bytes() == written.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["copy.yaml", RESOLVED_NAME]
