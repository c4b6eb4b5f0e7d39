"""The staged executor: a plan's decision tree over a batch of endpoints or replicates.

:func:`analyse` runs a plan on checked data (``planrunner run``); :func:`decide_batch` runs the
same stages on any batch of k groups shaped ``(B, n_i)`` (``planrunner rehearse``). Every choice
goes through a recorder: :class:`LogRecorder` writes decision records, :class:`CountingRecorder`
counts them. The stages are declared in :data:`planrunner.engine.stages.STAGES`.
"""

from __future__ import annotations

from .context import Analysis, BatchOutcome
from .record import CountingRecorder, LogRecorder, Recorder
from .run import adjust_across, analyse, decide_batch
from .stages import STAGES

__all__ = sorted([
    "Analysis",
    "BatchOutcome",
    "CountingRecorder",
    "LogRecorder",
    "Recorder",
    "STAGES",
    "adjust_across",
    "analyse",
    "decide_batch",
])
