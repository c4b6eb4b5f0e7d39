"""The audit trail of a run: the hash-chained decision log, provenance facts and plan locks.

* :mod:`planrunner.audit.log` writes and verifies ``decisions.jsonl``
  (:class:`DecisionLog`, :func:`verify_log`).
* :mod:`planrunner.audit.provenance` gathers the start record's facts (software, operator,
  git, whether the plan predates the data).
* :mod:`planrunner.audit.lockfile` writes and checks ``<plan>.lock.json``.

Only the standard library is imported here, so ``planrunner verify`` starts fast.
"""

from __future__ import annotations

from .lockfile import Lock, LockStatus, LockWrite, compare_lock, lock_path, read_lock, write_lock
from .log import (
    GENESIS,
    AuditError,
    Decision,
    DecisionLog,
    Problem,
    VerifyReport,
    canonical_json,
    sha256_hex,
    verify_log,
)
from .provenance import start_facts

__all__ = sorted(
    [
        "GENESIS",
        "AuditError",
        "Decision",
        "DecisionLog",
        "Lock",
        "LockStatus",
        "LockWrite",
        "Problem",
        "VerifyReport",
        "canonical_json",
        "compare_lock",
        "lock_path",
        "read_lock",
        "sha256_hex",
        "start_facts",
        "verify_log",
        "write_lock",
    ]
)
