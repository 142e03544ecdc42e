"""Exceptions the kit raises for bad input or impossible edits.

Every message says what is wrong, where (column, rows, level) and what to do.
All derive from :class:`ExplorerError`, itself a ``ValueError``, so callers can
catch one type.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable, Sequence

__all__ = ["ColumnError", "DataError", "DesignError", "EditError", "ExplorerError", "OutputError", "PredicateError",
           "ReplayError", "closest_names", "preview"]


class ExplorerError(ValueError):
    """Base class for every error the kit raises on purpose."""


class ColumnError(ExplorerError):
    """A named column is missing or unusable."""


class DataError(ExplorerError):
    """The values in a column cannot be analysed as they are."""


class EditError(ExplorerError):
    """An edit names rows, factors or levels that do not exist, or would leave nothing to analyse."""


class PredicateError(EditError):
    """A condition on columns (``drop_where`` and friends) is malformed or compares values of the wrong types."""


class DesignError(ExplorerError):
    """The model cannot be fitted on the current view (too few levels, no residual df, ...)."""


class ReplayError(ExplorerError):
    """A saved edit log does not fit the data it is being replayed on, or the file is not a valid study file."""


class OutputError(ExplorerError):
    """A file cannot or must not be written (a folder, the data file, an existing file, a full disk)."""


def closest_names(name: str, candidates: Iterable[str], n: int = 3) -> list[str]:
    """Candidates that look like ``name`` (case-insensitive first, then fuzzy)."""
    cands = [str(c) for c in candidates]
    lowered = [c for c in cands if c.lower() == str(name).lower()]
    fuzzy = difflib.get_close_matches(str(name), cands, n=n, cutoff=0.5)
    out: list[str] = []
    for c in lowered + fuzzy:
        if c not in out:
            out.append(c)
    return out[:n]


def preview(items: Sequence[object], limit: int = 8) -> str:
    """Comma-separated preview of ``items`` with a count of what was left out."""
    shown = ", ".join(repr(i) if isinstance(i, str) else str(i) for i in list(items)[:limit])
    extra = len(items) - limit
    return shown + (f" (and {extra} more)" if extra > 0 else "")
