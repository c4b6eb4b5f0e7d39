"""One exception tree; every class carries the exit code the CLI maps it to.

``PlanrunnerError`` (exit 1) is the root. The CLI catches it in one place and prints the
message without a traceback. Messages are plain sentences that name the file, the place
(plan key with YAML line, data row and column) and what is allowed.
"""

from __future__ import annotations


class PlanrunnerError(Exception):
    """Base class; an unexpected internal failure (exit 1)."""

    exit_code = 1

    def __init__(self, message: str, *, problems: tuple[str, ...] | list[str] = ()) -> None:
        super().__init__(message)
        self.message = message
        #: Individual problems when several were found at once (each one line).
        self.problems: tuple[str, ...] = tuple(problems)

    def __str__(self) -> str:
        if not self.problems:
            return self.message
        return self.message + "\n" + "\n".join(f"  {p}" for p in self.problems)


class PlanError(PlanrunnerError):
    """The plan is invalid, or the command was misused (exit 2)."""

    exit_code = 2


class DataError(PlanrunnerError):
    """The data were rejected: missing file, unknown or missing groups, wrong types (exit 3)."""

    exit_code = 3


class PlanHalted(PlanrunnerError):
    """The plan stopped itself by one of its own rules, e.g. ``halt`` (exit 4)."""

    exit_code = 4


class LockMismatch(PlanrunnerError):
    """The plan differs from its lock and no deviation was declared (exit 5)."""

    exit_code = 5


__all__ = ["DataError", "LockMismatch", "PlanError", "PlanHalted", "PlanrunnerError"]
