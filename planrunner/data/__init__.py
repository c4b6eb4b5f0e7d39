"""The data layer of ``planrunner run``: read a data file, check it against the plan.

The engine builds a :class:`DataSpec` from the validated plan, then::

    table = read_table(spec)          # every cell as written, with its file row number
    data = check_data(spec, table)    # every problem collected, or arrays per group

Both raise :class:`planrunner.errors.DataError` (exit code 3). Before a transformation the
engine calls :func:`check_domain`. This package does not import the plan models; pandas is
imported when a file is read, pyarrow / openpyxl only for Parquet / Excel files.
"""

from __future__ import annotations

from .check import (
    DOMAINS,
    MISSING_TOKENS,
    CheckedData,
    EndpointData,
    ExcludedRow,
    GroupData,
    NonDetect,
    check_data,
    check_domain,
    data_error,
)
from .decimal_exact import restore_offset
from .read import RawTable, read_table
from .spec import DataSpec, level_label

__all__ = sorted(
    [
        "DOMAINS",
        "MISSING_TOKENS",
        "CheckedData",
        "DataSpec",
        "EndpointData",
        "ExcludedRow",
        "GroupData",
        "NonDetect",
        "RawTable",
        "check_data",
        "check_domain",
        "data_error",
        "level_label",
        "read_table",
        "restore_offset",
    ]
)
