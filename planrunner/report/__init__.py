"""What a run writes for people and programs to read.

* :mod:`planrunner.report.results` builds and serialises ``results.json``
  (:func:`build_results`, :func:`results_bytes`) and compares two of them
  (:func:`compare_results`, used by ``planrunner verify``).

Only the standard library is imported here.
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

__all__ = sorted(
    [
        "CAUTIONS",
        "RESULTS_FORMAT",
        "RESULTS_NAME",
        "build_results",
        "compare_results",
        "results_bytes",
    ]
)
