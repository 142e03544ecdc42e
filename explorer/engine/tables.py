"""Frozen table values shared by every analysis: partition rows and tables.

Numbers keep full precision here; rounding happens only in ``to_frame`` display
helpers and HTML reprs. A statistic that is undefined is ``None`` and the table's
``notes`` say why; there are no bare NaNs.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from ..formatting import esc, format_value, html_cells, result_frame
from ..rendering import html_repr, table

__all__ = ["TermRow", "AnovaTable", "COLUMNS", "ERROR_COLUMNS", "html_table", "fmt", "esc"]

#: Column headings of a partition table (plain trade words).
COLUMNS = ("source", "df", "sum of squares", "mean square", "F", "p-value")
#: Extra columns of a partition whose terms have their own error terms (random and mixed models).
ERROR_COLUMNS = ("tested against", "error df")


def fmt(x: Any, digits: int | None = None) -> str:
    """A number as the kit shows numbers of no stated kind (:func:`explorer.formatting.format_value`,
    4 significant digits); text is HTML-escaped. Prefer the role functions of
    :mod:`explorer.formatting` (``show_p``, ``show_stat``, ...); ``digits`` is ignored."""
    if isinstance(x, str):
        return esc(x)
    return format_value(x, "number")


#: Rows an HTML table shows at most (the rest stay in the value's ``to_frame()``).
MAX_HTML_ROWS = 500


def html_table(frame: pd.DataFrame, caption: str = "", notes: tuple[str, ...] = (), digits: int | None = None, *,
               spanning: tuple[tuple[str, str], ...] = ()) -> str:
    """A result's table through the one renderer (:func:`explorer.rendering.table`).

    Numbers go through the one formatter (:func:`explorer.formatting.format_frame`: each
    column by its role, units in the headings under a display scale). Each cell carries its
    column heading (``data-label``) and the table its column count (``vx-cols-N``), so a
    narrow page can stack a row into "heading: value" lines. At most
    :data:`MAX_HTML_ROWS` rows are shown, with a note saying how many there are;
    ``spanning`` rows (label, sentence) follow the table's rows. ``digits`` is ignored.
    """
    if len(frame) > MAX_HTML_ROWS:
        notes = (f"Showing the first {MAX_HTML_ROWS:,} of {len(frame):,} rows; the whole table is in to_frame().",
                 *notes)
        frame = frame.iloc[:MAX_HTML_ROWS]
    heads, rows = html_cells(frame)
    return table(heads, rows, caption=caption, notes=notes, spanning=spanning)


@dataclass(frozen=True, kw_only=True)
class TermRow:
    """One line of a partition: a source of variation with its test."""

    source: str
    df: int
    sum_sq: float
    mean_sq: float | None = None
    statistic: float | None = None
    pvalue: float | None = None
    #: Models with random terms: the mean square(s) the F is tested against, and their df.
    error_term: str | None = None
    ms_error: float | None = None
    df_error: float | None = None

    def as_tuple(self) -> tuple[Any, ...]:
        return (self.source, self.df, self.sum_sq, self.mean_sq, self.statistic, self.pvalue)


@dataclass(frozen=True, kw_only=True)
class AnovaTable:
    """A sums-of-squares partition: one row per source, then the residual and the total.

    ``ss_type`` and ``coding`` record how the term sums of squares were computed (the
    type asked for); ``types_coincide`` is True when the model has a single term, so that
    types I, II and III are the same sums of squares and the caption says so.
    """

    rows: tuple[TermRow, ...]
    title: str = "Partition of the sum of squares"
    ss_type: str = "I"
    coding: str = "treatment"
    notes: tuple[str, ...] = field(default=())
    #: (term, what it is aliased with) for terms left out because the cells cannot separate them.
    aliased: tuple[tuple[str, str], ...] = field(default=())
    types_coincide: bool = False

    def row(self, source: str) -> TermRow:
        for r in self.rows:
            if r.source == source:
                return r
        raise KeyError(f"no row {source!r} in the partition; rows are {[r.source for r in self.rows]}")

    @property
    def sources(self) -> tuple[str, ...]:
        return tuple(r.source for r in self.rows)

    @property
    def ss_caption(self) -> str:
        """Which sums of squares the table holds, in words."""
        if self.types_coincide:
            return "one term: types I, II and III sums of squares coincide"
        return f"type {self.ss_type} sums of squares"

    def to_frame(self) -> pd.DataFrame:
        """The table as a DataFrame with the trade's column names (full precision)."""
        frame = pd.DataFrame([r.as_tuple() for r in self.rows], columns=list(COLUMNS))
        for c in COLUMNS[2:]:
            frame[c] = pd.array(frame[c].tolist(), dtype="Float64")
        if any(r.error_term is not None for r in self.rows):
            frame[ERROR_COLUMNS[0]] = [r.error_term or "" for r in self.rows]
            frame[ERROR_COLUMNS[1]] = pd.array([r.df_error for r in self.rows], dtype="Float64")
        return result_frame(frame)

    def title_line(self) -> str:
        """The table's caption as one line of text."""
        return f"{self.title} ({self.ss_caption})"

    @html_repr
    def _repr_html_(self) -> str:
        # aliased terms are named inside the table, below the fitted terms
        return html_table(self.to_frame(), self.title_line(), self.notes, spanning=tuple(
            (name, f"not estimable: aliased with {other} (left out of the fit)") for name, other in self.aliased))
