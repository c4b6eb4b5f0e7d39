"""``results.json``: what a run found, as one versioned, byte-stable JSON document.

The document (format :data:`RESULTS_FORMAT`) holds no timestamps, no machine paths and nothing
else that changes between two runs of the same plan on the same data, so a rerun gives the same
bytes and ``planrunner verify`` can compare them. Its top-level keys are:

``format``
    ``"planrunner.results/1"``.
``plan``
    ``id``, ``revision``, ``title``, ``question``, ``fingerprint`` (SHA-256 of the validated
    plan), ``raw_sha256`` (SHA-256 of the plan file's bytes) and ``settings`` (the
    decision-relevant settings the report draws the plan's tree from; :func:`plan_settings`).
``data``
    The data file as it was named (the plan's ``data.file``, or the ``--data`` value), its
    SHA-256, format, rows read, blank rows, every excluded row or cell with its reason, and per
    endpoint the rows used, group sizes, dropped missing values and substituted non-detects.
``status`` and ``halted_endpoints``
    ``completed`` or ``halted`` (some endpoint stopped by one of the plan's own rules).
``endpoints`` and ``across_endpoints``
    One object per endpoint as the engine produced it, in the plan's order of responses, and
    the adjustment across endpoints (null when there is one endpoint).
``cautions``
    Fixed sentences on how far the results reach.

Serialisation (:func:`results_bytes`): keys sorted, two-space indent, UTF-8 without ASCII
escapes, floats as their shortest round-trip text (Python's ``repr``), a final newline. NaN and
infinity are refused, naming where they occur; numpy scalars become Python numbers. Only the
standard library is imported here.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from ..errors import PlanrunnerError
from .._json import to_plain

if TYPE_CHECKING:  # pragma: no cover
    from ..data import CheckedData
    from ..plan.load import LoadedPlan

__all__ = [
    "CAUTIONS",
    "RESULTS_FORMAT",
    "RESULTS_NAME",
    "build_results",
    "compare_results",
    "plan_settings",
    "results_bytes",
]

#: Format tag of results.json; raise the number with any incompatible change.
RESULTS_FORMAT = "planrunner.results/1"
#: The file's name inside RUN_DIR.
RESULTS_NAME = "results.json"

#: Sentences every results.json carries, in this order.
CAUTIONS: tuple[str, ...] = (
    "These results are the output of a plan fixed in advance; they support, and do not "
    "replace, the judgement of a qualified statistician who knows the study and its design.",
    "In regulated work the laboratory's own procedures and the regulations that apply take "
    "precedence over anything stated here.",
    "Where an endpoint was analysed after a transformation, its tests and conclusions hold on "
    "the transformed scale; back-transformed figures describe quantities such as geometric "
    "means or ratios, not arithmetic means or differences.",
    "A plan that chooses its test after a preliminary check is a two-stage procedure whose "
    "real error rate can differ from the nominal alpha; the rehearsal of the plan measures it.",
)


class ResultsError(PlanrunnerError):
    """The results hold a value results.json cannot carry (a bug upstream; exit 1)."""


# --------------------------------------------------------------------------------------------
# plain JSON values


def _refuse(problem: str, where: str, value: Any) -> ResultsError:
    if problem == "not_finite":
        return ResultsError(
            f"results.json would hold {value!r} at {where}; results carry finite numbers "
            "only (a value that cannot be computed is null with a reason)"
        )
    if problem == "key":
        return ResultsError(f"results.json would have a key {value!r} at {where} that is "
                            "not text")
    return ResultsError(f"results.json cannot hold a {type(value).__name__} at {where}")


def _plain(value: Any, where: str) -> Any:
    """``value`` as plain JSON types; NaN, infinity and unknown objects raise ResultsError."""
    return to_plain(value, where, _refuse)


def results_bytes(results: Mapping[str, Any]) -> bytes:
    """The bytes of results.json: sorted keys, indent 2, UTF-8, shortest floats, final newline."""
    plain = _plain(results, "results")
    text = json.dumps(plain, sort_keys=True, indent=2, ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")


# --------------------------------------------------------------------------------------------
# building the document


def _plan_section(plan: LoadedPlan) -> dict[str, Any]:
    model = plan.model
    return {
        "id": model.id,
        "revision": model.revision,
        "title": model.title,
        "question": model.question,
        "fingerprint": plan.fingerprints.plan,
        "raw_sha256": plan.fingerprints.raw,
        "settings": plan_settings(model),
    }


def plan_settings(model: Any) -> dict[str, Any]:
    """The decision-relevant part of the validated plan, as the report draws its tree.

    A compact copy (defaults filled in) of the settings that decide an endpoint's path:
    ``alpha``, ``compare``, ``omnibus``, ``when_variances_differ``, ``degenerate_groups`` and
    the sections ``outliers``, ``variance_check``, ``normality_check``, ``transform`` and
    ``comparisons``. The whole plan is in plan.resolved.yaml beside results.json.
    """

    def section(value: Any) -> dict[str, Any]:
        return value.model_dump(mode="json")

    return {
        "alpha": model.alpha,
        "compare": model.compare,
        "omnibus": model.omnibus,
        "when_variances_differ": model.when_variances_differ,
        "degenerate_groups": model.data.degenerate_groups,
        "outliers": section(model.outliers),
        "variance_check": section(model.variance_check),
        "normality_check": section(model.normality_check),
        "transform": section(model.transform),
        "comparisons": section(model.comparisons),
    }


def _data_section(data: CheckedData, label: str) -> dict[str, Any]:
    endpoints = []
    for endpoint in data.endpoints:
        endpoints.append({
            "endpoint": endpoint.name,
            "rows_used": endpoint.rows_used,
            "n": {g.level: g.n for g in endpoint.groups},
            "missing_dropped": {
                "count": sum(len(g.missing_rows) for g in endpoint.groups),
                "rows": {g.level: [int(r) for r in g.missing_rows] for g in endpoint.groups},
            },
            "non_detects": [
                {"level": g.level, "row": int(nd.row), "text": nd.text, "limit": nd.limit,
                 "value": nd.value}
                for g in endpoint.groups
                for nd in g.non_detects
            ],
        })
    return {
        "file": label,
        "sha256": data.sha256,
        "format": data.format,
        "group": data.group,
        "levels": list(data.levels),
        "rows_read": data.rows_read,
        "blank_rows": [int(r) for r in data.blank_rows],
        "excluded": [
            {"row": int(x.row), "column": x.column, "reason": x.reason} for x in data.excluded
        ],
        "endpoints": endpoints,
    }


def build_results(
    plan: LoadedPlan,
    data: CheckedData,
    analysis: Any,
    *,
    data_label: str,
) -> dict[str, Any]:
    """The results.json document of one run, as plain Python data.

    Parameters
    ----------
    plan
        The validated plan (``planrunner.plan.load.LoadedPlan``).
    data
        The checked data (``planrunner.data.CheckedData``).
    analysis
        What ``planrunner.engine.run.analyse`` returned: ``endpoints`` (one dict per
        endpoint), ``across_endpoints``, ``status`` and ``halted_endpoints``.
    data_label
        How the data file is named in the results: the plan's ``data.file`` as written, or
        the ``--data`` value as given. Never resolved to an absolute path, so that the same
        run on another machine gives the same bytes.
    """
    status = str(analysis.status)
    if status not in ("completed", "halted"):
        raise ResultsError(f"the analysis status {status!r} is not completed or halted")
    endpoints = [_plain(e, f"endpoints[{i}]") for i, e in enumerate(analysis.endpoints)]
    names = [e.get("endpoint") for e in endpoints]
    if names != list(data.responses):
        raise ResultsError(
            f"the analysis returned endpoints {names!r}, not the plan's responses "
            f"{list(data.responses)!r}"
        )
    across = analysis.across_endpoints
    return {
        "format": RESULTS_FORMAT,
        "plan": _plan_section(plan),
        "data": _data_section(data, data_label),
        "status": status,
        "halted_endpoints": [str(n) for n in analysis.halted_endpoints],
        "endpoints": endpoints,
        "across_endpoints": None if across is None else _plain(across, "across_endpoints"),
        "cautions": list(CAUTIONS),
    }


# --------------------------------------------------------------------------------------------
# comparing two results documents


def _show(value: Any) -> str:
    text = json.dumps(value, sort_keys=True, ensure_ascii=False)
    return text if len(text) <= 80 else text[:77] + "..."


def _diff(a: Any, b: Any, where: str, out: list[str]) -> None:
    if isinstance(a, dict) and isinstance(b, dict):
        for key in sorted(set(a) | set(b)):
            path = f"{where}.{key}" if where else key
            if key not in b:
                out.append(f"{path}: present in the run, absent on rerun")
            elif key not in a:
                out.append(f"{path}: absent in the run, present on rerun ({_show(b[key])})")
            else:
                _diff(a[key], b[key], path, out)
        return
    if isinstance(a, list) and isinstance(b, list):
        for i, (x, y) in enumerate(zip(a, b)):
            label = ""
            if where == "endpoints" and isinstance(x, dict) and "endpoint" in x:
                label = f" ({x['endpoint']})"
            _diff(x, y, f"{where}[{i}]{label}", out)
        if len(a) != len(b):
            out.append(f"{where}: {len(a)} entries in the run, {len(b)} on rerun")
        return
    if type(a) is not type(b) or a != b:
        out.append(f"{where}: {_show(a)} in the run, {_show(b)} on rerun")


def compare_results(recorded: bytes, rerun: bytes) -> list[str]:
    """Where two results.json files differ, one plain line per differing value.

    Paths name endpoints by position and name, e.g.
    ``endpoints[0] (weight_gain_g).omnibus.statistic: 4.1 in the run, 4.2 on rerun``. Equal
    bytes give an empty list; equal values written differently give one line saying so.
    """
    if recorded == rerun:
        return []
    try:
        a = json.loads(recorded.decode("utf-8"))
    except (UnicodeDecodeError, ValueError):
        return ["the recorded results.json is not readable JSON"]
    b = json.loads(rerun.decode("utf-8"))
    out: list[str] = []
    _diff(a, b, "", out)
    if not out:
        out.append("the values are equal but the bytes differ: results.json was re-encoded")
    return out

