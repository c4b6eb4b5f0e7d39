"""Fingerprints of a plan, and the plan as resolved (defaults filled in).

Two SHA-256 digests identify a plan:

``plan``
    of the canonical JSON of the validated plan: ``model_dump(mode="json")`` with every default
    filled in, keys sorted, compact separators, UTF-8 without ASCII escapes. Comments,
    whitespace, key order, quoting style, number spelling (``0.05`` or ``5e-2``) and writing a
    default out explicitly do not change it; any change of a value does.
``raw``
    of the file's bytes exactly as read, so an auditor can match the file in version control.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from .model import Plan

#: Name of the resolved plan a run writes beside its results.
RESOLVED_NAME = "plan.resolved.yaml"


@dataclass(frozen=True, slots=True)
class Fingerprints:
    """Hex SHA-256 digests of the validated plan (``plan``) and of the file bytes (``raw``)."""

    plan: str
    raw: str


def canonical_json(plan: Plan) -> bytes:
    """The canonical JSON bytes the plan fingerprint is taken of."""
    text = json.dumps(
        plan.model_dump(mode="json"),
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=False,
        allow_nan=False,
    )
    return text.encode("utf-8")


def plan_fingerprint(plan: Plan) -> str:
    """Hex SHA-256 of :func:`canonical_json`."""
    return hashlib.sha256(canonical_json(plan)).hexdigest()


def raw_fingerprint(raw: bytes) -> str:
    """Hex SHA-256 of the plan file's bytes."""
    return hashlib.sha256(raw).hexdigest()


def fingerprints(plan: Plan, raw: bytes) -> Fingerprints:
    return Fingerprints(plan=plan_fingerprint(plan), raw=raw_fingerprint(raw))


def resolved_yaml(plan: Plan) -> str:
    """The plan as YAML with every default filled in, in the model's key order.

    Reading this text back with :func:`planrunner.plan.load.load_plan_bytes` gives a plan with
    the same plan fingerprint.
    """
    import yaml

    header = (
        "# planrunner plan as validated, with every default filled in.\n"
        f"# plan fingerprint: sha256:{plan_fingerprint(plan)}\n"
    )
    body = yaml.safe_dump(
        plan.model_dump(mode="json"),
        sort_keys=False,
        allow_unicode=True,
        default_flow_style=False,
        width=100,
    )
    return header + body


def write_resolved_plan(plan: Plan, target: str | os.PathLike[str]) -> Path:
    """Write :func:`resolved_yaml` to ``target`` (a directory gets ``plan.resolved.yaml``).

    The file is written under a temporary name and renamed into place, so a failure never
    leaves half a file. Returns the path written.
    """
    path = Path(target)
    if path.is_dir():
        path = path / RESOLVED_NAME
    data = resolved_yaml(plan).encode("utf-8")
    fd, tmp = tempfile.mkstemp(prefix=".resolved-", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


__all__ = [
    "RESOLVED_NAME",
    "Fingerprints",
    "canonical_json",
    "fingerprints",
    "plan_fingerprint",
    "raw_fingerprint",
    "resolved_yaml",
    "write_resolved_plan",
]
