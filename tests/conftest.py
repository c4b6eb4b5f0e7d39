"""Shared fixtures: a minimal valid plan (as a dict and as YAML text) and file helpers."""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any, Callable

import pytest
import yaml

REPO_ROOT = Path(__file__).resolve().parents[1]
PLANS_DIR = REPO_ROOT / "plans"

_MINIMAL: dict[str, Any] = {
    "planrunner": 1,
    "id": "demo-plan",
    "title": "Demo plan",
    "question": "Do the group means differ?",
    "hypotheses": {"family": "all_pairs"},
    "data": {
        "file": "data/demo.csv",
        "group": "grp",
        "response": "y",
        "levels": ["a", "b", "c"],
    },
    "comparisons": {"method": "games_howell"},
    "sample_size": {"justification": "Demo only."},
}


@pytest.fixture
def minimal_plan() -> dict[str, Any]:
    """A fresh deep copy of the smallest valid plan (Welch, Games-Howell, no gate)."""
    return copy.deepcopy(_MINIMAL)


@pytest.fixture
def write_plan(tmp_path: Path) -> Callable[..., Path]:
    """write_plan(text_or_dict, name="plan.yaml") -> path of the written file."""

    def write(content: str | bytes | dict[str, Any], name: str = "plan.yaml") -> Path:
        path = tmp_path / name
        if isinstance(content, dict):
            content = yaml.safe_dump(content, sort_keys=False)
        if isinstance(content, str):
            content = content.encode("utf-8")
        path.write_bytes(content)
        return path

    return write
