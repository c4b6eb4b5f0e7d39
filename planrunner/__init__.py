"""planrunner: pre-specified comparisons of group means, run exactly as planned.

The public API is small; heavy modules are imported only when a function is first used, so
``planrunner validate`` starts fast.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from ._version import __version__
from .errors import DataError, LockMismatch, PlanError, PlanHalted, PlanrunnerError

__all__ = sorted(
    [
        "DataError",
        "LockMismatch",
        "PlanError",
        "PlanHalted",
        "PlanrunnerError",
        "__version__",
        "load_plan",
        "lock_plan",
        "rehearse_plan",
        "run_plan",
        "validate_plan",
        "verify_run",
    ]
)

_LAZY = {
    "load_plan": ("planrunner.plan.load", "load_plan"),
    "validate_plan": ("planrunner.plan.load", "validate_plan"),
    "run_plan": ("planrunner.api", "run_plan"),
    "rehearse_plan": ("planrunner.engine.rehearse", "rehearse_plan"),
    "lock_plan": ("planrunner.api", "lock_plan"),
    "verify_run": ("planrunner.api", "verify_run"),
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        value = getattr(importlib.import_module(module), attr)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'planrunner' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))


if TYPE_CHECKING:  # pragma: no cover
    from .api import lock_plan, run_plan, verify_run
    from .engine.rehearse import rehearse_plan
    from .plan.load import load_plan, validate_plan
