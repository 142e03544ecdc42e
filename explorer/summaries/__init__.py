"""Analysis of variance beyond one machine's memory: exact results from cell summaries.

A :class:`SummaryStudy` is built on per-cell counts, means and centred sums of squares
computed by the engine that holds the rows (DuckDB in-process for Parquet/CSV files,
Spark for a cluster's DataFrame); the rows never leave it. Neither duckdb nor pyspark
is imported until a source needs it.

>>> from explorer.summaries import SummaryStudy            # doctest: +SKIP
>>> study = SummaryStudy("readings/*.parquet", "thickness", ["line", "shift"])  # doctest: +SKIP
>>> study.drop_where("gauge_reading > 120", reason="outside the gauge range")  # doctest: +SKIP
>>> study.drop_level("day", "2026-03-14", reason="line stop, see log")  # doctest: +SKIP
"""

from __future__ import annotations

from typing import Any

from .edits import (
    DropCell,
    DropLevel,
    DropWhere,
    MoveWhere,
    RestoreCell,
    RestoreLevel,
    RestoreWhere,
)
from .predicate import Predicate, parse_predicate
from .scan import SetAsideScan, set_aside_scan
from .study import SummaryStudy, as_source

__all__ = [
    "DropCell",
    "DropLevel",
    "DropWhere",
    "DuckDBSource",
    "MoveWhere",
    "Predicate",
    "RestoreCell",
    "RestoreLevel",
    "RestoreWhere",
    "SetAsideScan",
    "SparkSource",
    "SummaryStudy",
    "as_source",
    "parse_predicate",
    "set_aside_scan",
    "summary_battery",
]


def __getattr__(name: str) -> Any:
    if name == "DuckDBSource":
        from .engine_duckdb import DuckDBSource

        return DuckDBSource
    if name == "SparkSource":
        from .engine_spark import SparkSource

        return SparkSource
    raise AttributeError(f"module 'explorer.summaries' has no attribute {name!r}")


def summary_battery(study: Any, **options: Any) -> Any:
    """The one-way battery of a summary-backed study (see :mod:`explorer.summaries.battery`)."""
    from .battery import summary_battery as run

    return run(study, **options)
