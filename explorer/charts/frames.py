"""Tidy frames the chart builders draw from, and the rule for thinning large data.

Charts never carry more than ``max_points`` rows: above that they draw a stated sample
(every left-out row, the rows a ``priority`` score ranks highest, then an even spread of
the rest) and say so in the subtitle. The statistics are always computed on every row;
only the drawing is thinned.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from explorer.engine import Results
from explorer.engine.moves import moved_mask
from explorer.study import Study

from .style import IN_ANALYSIS, LEFT_OUT_STATE, MOVED_STATE

__all__ = [
    "MAX_POINTS",
    "RowColumns",
    "Thinned",
    "column_fields",
    "fit_frame",
    "observation_frame",
    "row_columns",
    "thin",
]

#: Most rows a chart draws (Altair's own inline-data limit).
MAX_POINTS = 5000


@dataclass(frozen=True)
class Thinned:
    """Positions chosen for drawing and the sentence that states the sample ('' when all drawn)."""

    positions: np.ndarray
    note: str


def thin(n: int, max_points: int, *, always: np.ndarray | None = None, priority: np.ndarray | None = None,
         priority_share: float = 0.2, what: str = "rows") -> Thinned:
    """Choose at most ``max_points`` of ``n`` rows: all of ``always``, then the top of ``priority``, then a spread."""
    if n <= max_points:
        return Thinned(np.arange(n), "")
    chosen = np.zeros(n, dtype=bool)
    if always is not None:
        chosen[np.flatnonzero(always)[:max_points]] = True
    budget = max_points - int(chosen.sum())
    if priority is not None and budget > 0:
        order = np.argsort(-np.nan_to_num(np.abs(priority), nan=-1.0), kind="stable")
        top = [i for i in order if not chosen[i]][: int(max_points * priority_share)]
        chosen[top[:budget]] = True
        budget = max_points - int(chosen.sum())
    if budget > 0:
        rest = np.flatnonzero(~chosen)
        step = len(rest) / budget
        chosen[rest[(np.arange(budget) * step).astype(np.int64)]] = True
    note = (f"Drawing {int(chosen.sum()):,} of {n:,} {what} (all left-out rows, the most extreme ones and an even "
            "spread of the rest); the statistics use every row.")
    return Thinned(np.flatnonzero(chosen), note)


def column_fields(table: pd.DataFrame) -> list[tuple[str, str]]:
    """Safe field names (``c0``, ``c1``...) for the table's columns, paired with their titles."""
    return [(f"c{i}", str(c)) for i, c in enumerate(table.columns)]


def _json_safe(col: pd.Series) -> list:
    if pd.api.types.is_bool_dtype(col.dtype):
        return [None if pd.isna(v) else str(bool(v)) for v in col]
    if pd.api.types.is_numeric_dtype(col.dtype):
        vals = col.to_numpy(dtype=np.float64, na_value=np.nan)
        return [None if np.isnan(v) else (int(v) if float(v).is_integer() and abs(v) < 2**53 else float(v)) for v in vals]
    return [None if pd.isna(v) else str(v) for v in col]


def _table_rows(study: Study) -> pd.DataFrame:
    ds = study.dataset
    usable = np.isin(ds.all_row_ids, ds.row_ids) if len(ds.set_aside) else np.ones(len(ds.table), dtype=bool)
    return ds.table.iloc[np.flatnonzero(usable)]


@dataclass(frozen=True)
class RowColumns:
    """Every table column of the usable rows (by position), for hover text on row-level charts."""

    table: pd.DataFrame
    fields: list[tuple[str, str]]

    def attach(self, frame: pd.DataFrame) -> pd.DataFrame:
        """``frame`` plus the columns ``c0``, ``c1``... of the rows named by its ``order`` column."""
        rows = self.table.iloc[frame["order"].to_numpy()]
        out = frame.copy()
        for i, (field, _) in enumerate(self.fields):
            out[field] = _json_safe(rows.iloc[:, i])
        return out

    def tooltips(self) -> list:
        import altair as alt

        return [alt.Tooltip(field, title=title) for field, title in self.fields]


def row_columns(study: Study) -> RowColumns:
    """The study's table columns for hover text (pass to the fit-based chart builders)."""
    return RowColumns(_table_rows(study), column_fields(study.dataset.table))


def _jitter(n: int) -> np.ndarray:
    """Even, repeatable spread in [-1, 1] (a golden-ratio sequence), so points keep their place across redraws."""
    return (np.arange(n) * 0.6180339887498949) % 1.0 * 2.0 - 1.0


def observation_frame(study: Study, max_points: int = MAX_POINTS, factor: str | None = None) -> tuple[pd.DataFrame, str]:
    """One line per usable row: id, current level, response, state, jitter and every table column."""
    ds, view = study.dataset, study.view
    f = factor or study.spec.factors[0]
    kept = np.asarray(view.kept)
    moved = moved_mask(ds, view, study.edits, f)
    fit = study.results.fit
    resid = np.full(ds.n, np.nan)
    resid[fit.positions] = fit.residuals
    picked = thin(ds.n, max_points, always=~kept, priority=resid)
    pos = picked.positions
    ids = ds.row_ids[pos]
    level = view.labels(f)[pos]
    value = ds.y_original[pos]
    state = np.where(~kept[pos], LEFT_OUT_STATE, np.where(moved[pos], MOVED_STATE, IN_ANALYSIS))
    recorded = np.asarray(ds.levels[f], dtype=object)[ds.codes[f][pos]].astype(str)
    out = pd.DataFrame({
        "row": [str(i) for i in ids.tolist()],
        "order": pos,
        "level": level.astype(str),
        "value": value,
        "state": state,
        "recorded": recorded,
        "jitter": _jitter(ds.n)[pos],
        "z": np.where(state == MOVED_STATE, 2, np.where(state == LEFT_OUT_STATE, 1, 0)),  # drawn on top
    })
    out["aria"] = [f"row {r}: {f} {lv}, {study.spec.response} {v:.6g}, {s}"
                   for r, lv, v, s in zip(out["row"], out["level"], value, state)]
    table = _table_rows(study).iloc[pos]
    for field, title in column_fields(ds.table):
        out[field] = _json_safe(table[title] if title in table.columns else table.iloc[:, int(field[1:])])
    return out, picked.note


def fit_frame(results: Results) -> pd.DataFrame:
    """One line per row in the analysis: id, level (or cell), observed, fitted, residual, leverage."""
    fit = results.fit
    labels = np.asarray(results.groups.labels, dtype=object)
    return pd.DataFrame({
        "row": [str(i) for i in fit.row_ids.tolist()],
        "order": np.asarray(fit.positions),
        "level": labels[np.asarray(fit.group)].astype(str),
        "observed": fit.y,
        "fitted": fit.fitted,
        "residual": fit.residuals,
        "leverage": fit.leverage,
    })
