"""What a run writes for people and programs to read.

* :mod:`planrunner.report.render` renders ``report.html`` and ``report.md`` from a run
  folder's results.json and decisions.jsonl alone (:func:`render_reports`), refusing a folder
  whose log does not verify (:class:`ReportRefused`).
* :mod:`planrunner.report.results` builds and serialises ``results.json``
  (:func:`build_results`, :func:`results_bytes`) and compares two of them
  (:func:`compare_results`, used by ``planrunner verify``).

Only the standard library is imported here; rendering imports Jinja2 and matplotlib when used.
"""

from __future__ import annotations

from .results import (
    CAUTIONS,
    RESULTS_FORMAT,
    RESULTS_NAME,
    build_results,
    compare_results,
    results_bytes,
)


def __getattr__(name: str):
    if name in ("render_reports", "ReportRefused"):
        from . import render

        return getattr(render, name)
    raise AttributeError(f"module 'planrunner.report' has no attribute {name!r}")


__all__ = sorted(
    [
        "CAUTIONS",
        "RESULTS_FORMAT",
        "ReportRefused",
        "RESULTS_NAME",
        "build_results",
        "compare_results",
        "render_reports",
        "results_bytes",
    ]
)
