"""`planrunner validate`, `new`, `schema` and `--version` through typer's CliRunner."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planrunner import __version__
from planrunner.cli import app
from planrunner.plan.load import load_plan
from planrunner.plan.model import STARTER_PLAN

PLANS_DIR = Path(__file__).resolve().parents[2] / "plans"
EXAMPLES = sorted(PLANS_DIR.glob("*.yaml"))
MODELINE = "# yaml-language-server: $schema=../schemas/plan.schema.json\n"

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

runner = CliRunner()


def invoke(*args: str):
    result = runner.invoke(app, list(args))
    assert "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    return result


def test_valid_plan_prints_fingerprints_and_decision_tree(write_plan):
    path = write_plan(GOOD)
    loaded = load_plan(path)
    result = invoke("validate", str(path))
    assert result.exit_code == 0
    assert f"{path}: valid plan 'demo-plan', revision 1" in result.stdout
    assert f"plan fingerprint:  sha256:{loaded.fingerprints.plan}" in result.stdout
    assert f"file fingerprint:  sha256:{loaded.fingerprints.raw}" in result.stdout
    assert "decision tree:" in result.stdout
    assert "Welch's ANOVA" in result.stdout
    assert result.stderr == ""


def test_misspelt_key_exit_2_with_place_and_suggestion(write_plan):
    path = write_plan(GOOD.replace("  levels:", "  levls:"))
    result = invoke("validate", str(path))
    assert result.exit_code == 2
    assert f"{path}:10:3: data.levls: unknown key 'levls'; use one of " in result.stderr
    assert "(did you mean 'levels'?)" in result.stderr
    assert f"{path}:6:1: data.levels: this key is required" in result.stderr
    assert f"error: {path} is not a valid plan (2 problems)" in result.stderr
    assert result.stdout == ""


def test_duplicate_key_exit_2(write_plan):
    path = write_plan(GOOD + "alpha: 0.05\nalpha: 0.1\n")
    result = invoke("validate", str(path))
    assert result.exit_code == 2
    assert (f"{path}:14:1: alpha: duplicate key 'alpha' (first given on line 13); each key "
            "may appear once.") in result.stderr


def test_wrong_type_exit_2(write_plan):
    path = write_plan(GOOD + "alpha: [0.05]\n")
    result = invoke("validate", str(path))
    assert result.exit_code == 2
    assert f"{path}:13:8: alpha: expected a number; got a list" in result.stderr


def test_alias_exit_2(write_plan):
    path = write_plan(GOOD.replace("title: Demo plan", "title: &t Demo plan")
                      + "question2: *t\n")
    result = invoke("validate", str(path))
    assert result.exit_code == 2
    assert f"{path}:3:8: anchor &t is not allowed" in result.stderr
    assert f"{path}:13:12: alias *t is not allowed" in result.stderr


def test_missing_file_exit_2(tmp_path):
    missing = tmp_path / "nope.yaml"
    result = invoke("validate", str(missing))
    assert result.exit_code == 2
    assert f"{missing}: no such plan file." in result.stderr


def test_several_files_all_checked(write_plan):
    good = write_plan(GOOD, "good.yaml")
    bad = write_plan(GOOD.replace("games_howell", "games_howel"), "bad.yaml")
    result = invoke("validate", str(bad), str(good))
    assert result.exit_code == 2
    assert f"{good}: valid plan" in result.stdout
    assert ("'games_howel' is not allowed; use one of tukey_kramer, games_howell, pairwise_t, "
            "dunnett, none (did you mean 'games_howell'?)") in result.stderr
    assert "1 of 2 plans invalid" in result.stderr


def test_quiet_prints_only_problems_and_warnings(write_plan):
    result = invoke("validate", "--quiet", str(write_plan(GOOD)))
    assert result.exit_code == 0
    assert result.output == ""


def test_no_arguments_is_misuse():
    result = invoke("validate")
    assert result.exit_code == 2


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_every_example_plan_validates(path):
    result = invoke("validate", str(path))
    assert result.exit_code == 0, result.output
    text = path.read_text(encoding="utf-8")
    assert text.startswith(MODELINE)
    loaded = load_plan(path)
    assert loaded.model.rehearsal is not None
    means = [s.means for s in loaded.model.rehearsal.scenarios]
    assert any(len(set(m)) == 1 for m in means), "a null scenario"
    assert any(len(set(m)) > 1 for m in means), "an expected-effect scenario"
    assert loaded.data_path.is_file(), "its invented data exist"


def test_examples_cover_the_required_cases():
    models = {p.stem: load_plan(p).model for p in EXAMPLES}
    assert len(models) >= 5
    kinds = {m.data.response_kind for m in models.values()}
    assert {"count", "proportion", "continuous"} <= kinds
    assert any(m.transform.policy == "ladder" and m.data.response_kind == "count"
               for m in models.values())
    assert any(m.data.response_kind == "proportion" and "arcsine_sqrt" in
               [n for _, n in m.transforms_named()] for m in models.values())
    assert any(m.comparisons.method == "dunnett" for m in models.values())
    assert any(len(m.endpoints) > 1 for m in models.values())
    assert any(m.variance_check.method == "hartley_fmax" and m.gates for m in models.values())


def test_gated_example_shows_the_two_stage_warning():
    result = invoke("validate", str(PLANS_DIR / "trout-feed-additive.yaml"))
    assert result.exit_code == 0
    assert ("variance_check.role: the test is chosen after a preliminary hartley_fmax test; "
            "such two-stage plans do not hold their nominal alpha; run `planrunner rehearse`"
            ) in result.stderr
    assert result.stderr.startswith("warning: ")


def test_new_writes_a_valid_plan_and_refuses_to_overwrite(tmp_path):
    target = tmp_path / "study" / "plan.yaml"
    result = invoke("new", str(target))
    assert result.exit_code == 0, result.output
    assert target.read_text(encoding="utf-8") == STARTER_PLAN
    model = load_plan(target).model
    assert model.omnibus == "welch"
    assert model.comparisons.method == "games_howell"
    assert model.gates == ()
    assert load_plan(target).warnings == ()
    assert invoke("validate", str(target)).exit_code == 0

    target.write_text("keep me", encoding="utf-8")
    result = invoke("new", str(target))
    assert result.exit_code == 2
    assert f"error: {target} already exists; use --force to replace it" in result.stderr
    assert target.read_text(encoding="utf-8") == "keep me"

    result = invoke("new", str(target), "--force")
    assert result.exit_code == 0
    assert target.read_text(encoding="utf-8") == STARTER_PLAN
    assert sorted(p.name for p in target.parent.iterdir()) == ["plan.yaml"]


def test_new_default_path(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    result = invoke("new")
    assert result.exit_code == 0
    assert (tmp_path / "plan.yaml").is_file()


def test_schema_to_stdout():
    result = invoke("schema", "--out", "-")
    assert result.exit_code == 0
    assert json.loads(result.stdout)["title"] == "planrunner plan, format 1"


def test_version():
    result = invoke("--version")
    assert result.exit_code == 0
    assert result.stdout == f"planrunner {__version__}\n"


def test_unknown_command_is_misuse():
    assert invoke("frobnicate").exit_code == 2


def test_validate_imports_no_numerical_libraries(tmp_path):
    path = tmp_path / "plan.yaml"
    path.write_text(GOOD, encoding="utf-8")
    code = (
        "import sys\n"
        "from planrunner.cli import main\n"
        "try:\n"
        f"    main(['validate', '--quiet', {str(path)!r}])\n"
        "except SystemExit as exc:\n"
        "    code = exc.code\n"
        "heavy = sorted(m for m in ('numpy', 'scipy', 'pandas', 'statsmodels', 'matplotlib')\n"
        "               if m in sys.modules)\n"
        "print(code, heavy)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True, timeout=120)
    assert done.stdout.strip() == "0 []", done.stdout + done.stderr


def test_console_entry_point_runs(tmp_path):
    path = tmp_path / "bad.yaml"
    path.write_text("- not a plan\n", encoding="utf-8")
    done = subprocess.run([sys.executable, "-c", "from planrunner.cli import main; main()",
                           "validate", str(path)], capture_output=True, text=True, timeout=120)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    assert f"{path}:1:1: a plan must be a mapping of keys to values; found a list." in done.stderr
