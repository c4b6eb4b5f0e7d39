"""schemas/plan.schema.json is exactly what `planrunner schema` writes from the model."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from planrunner.cli import app
from planrunner.plan.model import SCHEMA_ID, plan_json_schema_text

from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[2]

SCHEMA = REPO_ROOT / "schemas" / "plan.schema.json"


def test_committed_schema_is_current():
    assert SCHEMA.read_text(encoding="utf-8") == plan_json_schema_text(), (
        "schemas/plan.schema.json is stale; run `planrunner schema`"
    )


def test_schema_command_writes_the_same_text(tmp_path):
    out = tmp_path / "nested" / "plan.schema.json"
    result = CliRunner().invoke(app, ["schema", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert out.read_text(encoding="utf-8") == SCHEMA.read_text(encoding="utf-8")


def test_schema_identity_and_stability():
    schema = json.loads(plan_json_schema_text())
    assert schema["$id"] == SCHEMA_ID
    assert schema["title"] == "planrunner plan, format 1"
    assert schema["additionalProperties"] is False
    assert plan_json_schema_text() == plan_json_schema_text()
    assert set(schema["required"]) == {
        "planrunner", "id", "title", "question", "hypotheses", "data", "comparisons"
    }
