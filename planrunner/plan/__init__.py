"""The plan: its format (``model``), reading it from YAML (``load``), fingerprints and the
resolved plan (``fingerprint``), and its decision tree in plain words (``describe``).

Nothing here imports numpy, scipy or pandas, so checking a plan starts fast.
"""

from __future__ import annotations

from .describe import Step, describe_plan, render_steps
from .fingerprint import (
    Fingerprints,
    canonical_json,
    plan_fingerprint,
    raw_fingerprint,
    resolved_yaml,
    write_resolved_plan,
)
from .load import (
    MAX_PLAN_BYTES,
    LoadedPlan,
    PlanNotice,
    load_plan,
    load_plan_bytes,
    resolve_data_path,
    validate_plan,
)
from .model import (
    PLAN_FORMAT,
    Plan,
    PlanWarning,
    format_path,
    plan_json_schema,
    plan_json_schema_text,
    plan_warnings,
)

__all__ = sorted(
    [
        "MAX_PLAN_BYTES",
        "PLAN_FORMAT",
        "Fingerprints",
        "LoadedPlan",
        "Plan",
        "PlanNotice",
        "PlanWarning",
        "Step",
        "canonical_json",
        "describe_plan",
        "format_path",
        "load_plan",
        "load_plan_bytes",
        "plan_fingerprint",
        "plan_json_schema",
        "plan_json_schema_text",
        "plan_warnings",
        "raw_fingerprint",
        "render_steps",
        "resolve_data_path",
        "resolved_yaml",
        "validate_plan",
        "write_resolved_plan",
    ]
)
