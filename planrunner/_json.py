"""Plain JSON values for the files a run writes (results.json, decisions.jsonl).

One walk turns mappings, sequences, paths and numpy scalars into plain JSON types and refuses
NaN, infinity, non-text keys and unknown objects, so that no file ever holds a silent NaN.
Each caller supplies the exception to raise, worded for its own file.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Mapping
from typing import Any

#: ``refuse(problem, where, value)`` returns the exception to raise; ``problem`` is one of
#: ``"not_finite"``, ``"key"`` (a key that is not text) and ``"type"`` (an unknown object).
Refuse = Callable[[str, str, Any], Exception]


def to_plain(value: Any, where: str, refuse: Refuse) -> Any:
    """``value`` as plain JSON types; problems raise ``refuse(problem, where, value)``."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise refuse("not_finite", where, value)
        return float(value)
    if isinstance(value, Mapping):
        out: dict[str, Any] = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise refuse("key", where, key)
            out[key] = to_plain(item, f"{where}.{key}", refuse)
        return out
    if isinstance(value, (list, tuple)):
        return [to_plain(item, f"{where}[{i}]", refuse) for i, item in enumerate(value)]
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    # numpy scalars and 0-d arrays, without importing numpy
    if hasattr(value, "dtype") and getattr(value, "shape", None) == () and hasattr(value, "item"):
        return to_plain(value.item(), where, refuse)
    raise refuse("type", where, value)
