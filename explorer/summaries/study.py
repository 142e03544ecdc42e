"""A study built on cell summaries computed by the engine that holds the rows.

:class:`SummaryStudy` shares the edit log, undo/redo, events and disclosure of
:class:`explorer.study.Study`, and returns the same :class:`~explorer.engine.Results`.
The partition, F tests, level tables, marginal means and every test that needs only
group or cell statistics (Welch, Brown-Forsythe, Tukey-Kramer, Games-Howell, Dunnett,
effect sizes, Types I/II/III) are exact: they come from per-cell counts, means and
centred sums of squares of all rows. Per-row quantities (fitted values, residuals,
leverage; the residual charts and rank-based tests drawn from them) come from a seeded
sample of the rows drawn by the engine, and the results say so in their notes.

``study.dataset`` and ``study.view`` describe that sample (an ordinary row dataset),
so charts built for row studies draw the sample unchanged.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..engine.cells import layout_cells
from ..engine.dataset import Dataset, build_dataset, level_label
from ..engine.deferred import replace_deferred
from ..engine.edits import Edit, MergeLevels, RenameLevel, edit_from_dict
from ..engine.errors import DataError, DesignError, EditError, ExplorerError, ReplayError
from ..engine.factorial import factorial_from_cells
from ..engine.fitrows import RowSet
from ..engine.groupstats import pool_groups
from ..engine.numerics import read_only
from ..engine.oneway import oneway_from_stats
from ..engine.response_unit import SAFE, unit_exponent, unit_note
from ..engine.results import Results
from ..engine.spec import ModelSpec
from ..engine.view import DataView
from ..study.ledger import Ledger
from ..study.output_files import write_text_atomic
from ..study.persistence import check_study_doc, ledger_from_doc, read_study_file
from ..study.planned import planned_from_doc
from ..study.study import COMPARISON_METHODS, Study, StudyEvent
from .atoms import MOVE_PREFIX, AtomTable, downdate, level_order, merge_atoms
from .edits import (
    DropCell,
    DropLevel,
    DropWhere,
    MoveWhere,
    RestoreCell,
    RestoreLevel,
    RestoreWhere,
)
from .predicate import parse_predicate
from .view import SummaryData, SummaryView

__all__ = ["SummaryStudy", "as_source"]

FORMAT = "variance-explorer/summary-study"
SCHEMA = 2


def as_source(data: Any, **options: Any) -> Any:
    """A summary source for ``data``: a source object as is, a Spark DataFrame, or files/DataFrame for DuckDB."""
    if hasattr(data, "atoms") and hasattr(data, "prepare"):
        return data
    if not isinstance(data, (str, Path, list, tuple, pd.DataFrame)) and not type(data).__module__.startswith("pyspark"):
        raise DataError(f"the data of a summary-backed study are Parquet or CSV path(s), a pandas DataFrame or a Spark "
                        f"DataFrame, not {type(data).__name__}")
    if type(data).__module__.startswith("pyspark"):
        from .engine_spark import SparkSource

        return SparkSource(data, **options)
    from .engine_duckdb import DuckDBSource

    return DuckDBSource(data, **options)


class SummaryStudy(Study):
    """An analysis of variance on data too large for memory, edited through cell summaries.

    Parameters
    ----------
    source : Parquet/CSV path(s) or a pandas DataFrame (read by DuckDB), a Spark
        DataFrame (summarised by Spark), or a source object from this package.
    response, factors, blocks, interactions, ss_type, alpha, terms, max_order, units : as for
        :class:`~explorer.study.Study`.
    test : 'classic', or with one factor 'welch' or 'brown-forsythe' (exact from the
        summaries); the rank and permutation tests need every row and are refused (run
        them on :meth:`sample_study`, which says it is a sample).

    What needs every row is refused with a message saying so, and nothing changes: a
    transform of the response (:meth:`set_transform`), covariates, random, nested or
    repeated-measures roles, and the rank and permutation tests. Model terms
    (:meth:`set_terms`), alpha, the overall test and the comparison method can change.
    sample_size : rows drawn (seeded, by the engine) for residuals and charts; 0 for none.
    seed : the sample's seed.
    """

    def __init__(
        self,
        source: Any,
        response: str,
        factors: str | Sequence[str],
        *,
        blocks: str | Sequence[str] = (),
        interactions: bool = True,
        ss_type: str = "II",
        alpha: float = 0.05,
        test: str = "classic",
        terms: Sequence[str | Sequence[str]] | None = None,
        max_order: int | None = None,
        units: str = "",
        sample_size: int = 2000,
        seed: int = 0,
    ) -> None:
        spec = ModelSpec(response=response, factors=factors, blocks=blocks,  # type: ignore[arg-type]
                         interactions=interactions, ss_type=ss_type, alpha=alpha, test=test,  # type: ignore[arg-type]
                         terms=None if terms is None else tuple(terms), max_order=max_order,  # type: ignore[arg-type]
                         units=units)
        self._setup(as_source(source), spec, int(sample_size), int(seed))
        self._read_files = _local_files(source)

    def _setup(self, source: Any, spec: ModelSpec, sample_size: int, seed: int) -> None:
        _summary_spec(spec)
        self._read_files = _local_files(source)
        self._own_files: list[Path] = []
        self.source = source
        self.spec = spec
        if sample_size < 0:
            raise DataError(f"sample_size is a number of rows, 0 or more, not {sample_size}")
        self.sample_size = sample_size
        self.seed = seed
        self.data_source = None
        self.prepared = source.prepare(spec.response, spec.columns)
        self.summary_data = SummaryData(source.describe(), tuple(source.columns), getattr(source, "kinds", None),
                                        {c: _type_name(t) for c, t in getattr(source, "types", {}).items()})
        self._atom_cache: dict[tuple, AtomTable] = {}
        self._sample_cache: dict[tuple, tuple[Dataset, pd.DataFrame]] = {}
        atoms = self._query_atoms((), ())
        unit = self._safe_unit(atoms)
        if unit:
            self.prepared = self.source.with_unit(self.prepared, unit)
            atoms = self._query_atoms((), ())
        if not (np.all(np.isfinite(atoms.mean)) and np.all(np.isfinite(atoms.m2))):
            raise DataError(f"the sums of squares of {spec.response!r} are not finite even in units of 2**{unit}; "
                            "its values span the whole float range: divide the column by a power of two first")
        if atoms.n_total == 0:
            raise DataError(f"every row has a missing {spec.response!r} or factor value; nothing to analyse")
        if self.prepared.rows_set_aside is None:
            aside = self.prepared.rows_total - atoms.n_total
            detail = ((f"{aside} row(s) have a missing {spec.response!r} or factor value and are set aside.",)
                      if aside else ())
            self.prepared = dataclasses.replace(self.prepared, rows_set_aside=aside, set_aside_detail=detail)
        keys = {}
        for j, f in enumerate(spec.columns):
            keys[f] = level_order(atoms.raw[j], f in self.prepared.numeric_factors)
        view = SummaryView(
            filters=(), moves=(), keys=keys, levels=dict(keys),
            codes={f: read_only(np.arange(len(k), dtype=np.int64)) for f, k in keys.items()},
        )
        self._atom_cache[view.engine_state()] = atoms
        self.fingerprint = _fingerprint(atoms, spec, self.prepared.unit_exponent)
        self._log: list[Edit] = []
        self._views: list[SummaryView] = [view]  # type: ignore[assignment]
        self._results: dict[int, Results] = {}
        self._position = 0
        self._ledger = Ledger()
        self._comparisons = COMPARISON_METHODS[0]
        self.edits_not_carried: tuple[Edit, ...] = ()
        self._listeners: list[Callable[[Study, StudyEvent], None]] = []
        self._results[0] = self._analyze(view)

    def _safe_unit(self, atoms: AtomTable) -> int:
        """0 when the atoms show the shifted response inside the safe band, else the unit exponent it needs.

        Every value lies within |mean| + sqrt(m2) of 0 in its atom and at least one is as
        far as max(|mean|, sqrt(m2 / n)); only when these bounds leave the band does the
        engine scan for the largest value (see :mod:`explorer.engine.response_unit`).
        """
        if not atoms.size:
            return 0
        with np.errstate(all="ignore"):
            spread = np.sqrt(atoms.m2)
            hi = float(np.max(np.abs(atoms.mean) + spread))
            lo = float(max(np.max(np.abs(atoms.mean)), np.max(spread / np.sqrt(np.maximum(atoms.n, 1)))))
        if np.isfinite(hi) and hi <= 2.0**SAFE and lo >= 2.0**-SAFE:
            return 0
        largest = self.source.largest_shifted(self.prepared)
        if not np.isfinite(largest):
            raise DataError(f"response {self.spec.response!r} spans the whole float range (values of both signs near "
                            "1.8e308): its shift overflows; divide the column by a power of two first, or load the "
                            "rows into memory (ex.Study), which rescales them")
        return unit_exponent(largest)

    # ------------------------------------------------------------ engine access
    def _atoms(self, view: SummaryView) -> AtomTable:
        key = view.engine_state()
        if key not in self._atom_cache:
            self._atom_cache[key] = self._query_atoms(view.filters, view.moves)
        return self._atom_cache[key]

    def _query_atoms(self, filters: tuple, moves: tuple) -> AtomTable:
        delta = self._atoms_by_delta(filters, moves)
        if delta is not None:
            return delta
        if self.sample_size and getattr(self.source, "samples_with_atoms", False):
            return self.source.atoms(self.prepared, filters, moves, sample_size=self.sample_size, seed=self.seed)
        return self.source.atoms(self.prepared, filters, moves)

    def _atoms_by_delta(self, filters: tuple, moves: tuple) -> AtomTable | None:
        """Atoms of a view one condition away from a cached one, summarising only the rows in between.

        A new condition: summarise the kept rows it catches (the engine can skip the rest
        early) and downdate; a condition taken back: summarise the rows it brings back and
        merge (exact). ``None`` when no cached view is one condition away or a downdate
        would lose digits.
        """
        texts = tuple(p.text for p in filters)
        move_key = tuple((p.text, f) for p, f in moves)
        for (pf, pm), parent in reversed(list(self._atom_cache.items())):
            if pm != move_key:
                continue
            if len(texts) == len(pf) + 1 and texts[:-1] == pf:
                removed = self.source.atoms(self.prepared, filters[:-1], moves, only=filters[-1])
                return downdate(parent, removed)
            if len(texts) + 1 == len(pf) and set(texts) < set(pf):
                (gone,) = set(pf) - set(texts)
                if [t for t in pf if t != gone] != list(texts):
                    continue
                back = parse_predicate(gone, self.summary_data.kinds or self.source.columns, self.summary_data.types)
                return merge_atoms(parent, self.source.atoms(self.prepared, filters, moves, only=back))
        return None

    def _sample(self, view: SummaryView) -> tuple[Dataset, pd.DataFrame]:
        key = view.engine_state()
        if key not in self._sample_cache:
            self._store_sample(key, self.source.sample(self.prepared, view.filters, view.moves, self.sample_size, self.seed))
        return self._sample_cache[key]

    def _store_sample(self, key: tuple, frame: pd.DataFrame) -> None:
        frame = frame.reset_index(drop=True)
        table = frame[[c for c in frame.columns if not str(c).startswith("vx_")]]
        ds = build_dataset(table, self.spec.response, self.spec.columns) if len(frame) else None
        self._sample_cache[key] = (ds, frame)  # type: ignore[assignment]

    def sample_study(self) -> Study:
        """A row study of the current sample, starting from this study's current view.

        Row-level tools (influence, case deletion, the flip finder, the regroup scan, rank
        tests, spread and normality checks) read every kept row; on a summary-backed study
        run them on this. Its results' notes say that it is a sample.
        """
        view = self.view
        note = (f"Sample: {view.n_kept} rows drawn with seed {self.seed} by {self.source.engine} from the "
                f"{self.results.n_used} rows of a summary-backed study; the exact results come from the summaries.")
        ds = dataclasses.replace(self.dataset, notes=self.dataset.notes + (note,))
        study = Study.from_dataset(ds, self.spec, baseline=view)
        res = study.baseline
        study._results[0] = dataclasses.replace(res, notes=res.notes + (note,))
        return study

    def sample_results(self) -> Results:
        """The row analysis of the current sample (kept rows only): for tests that need rows."""
        return self.sample_study().results

    def sample_frame(self) -> pd.DataFrame:
        """The current seeded sample of kept rows (all columns), e.g. for a row study of it."""
        ds, _ = self._sample(self._summary_view)
        return ds.table.copy() if ds is not None else pd.DataFrame()

    # ------------------------------------------------------------ analysis
    def _codes(self, view: SummaryView, keys_by_factor: list[list[str]]) -> np.ndarray:
        out = np.empty((len(keys_by_factor[0]) if keys_by_factor else 0, len(self.spec.columns)), dtype=np.int64)
        for j, f in enumerate(self.spec.columns):
            idx = view.key_index(f)
            out[:, j] = [int(view.codes[f][idx[k]]) for k in keys_by_factor[j]]
        return out

    def _set_aside_mask(self, view: SummaryView, codes: np.ndarray) -> np.ndarray:
        out = np.zeros(codes.shape[0], dtype=bool)
        cols = list(self.spec.columns)
        for cond in view.set_aside:
            hit = np.ones(codes.shape[0], dtype=bool)
            for f, lv in cond:
                if f not in cols:  # pragma: no cover - edits check factors
                    continue
                hit &= codes[:, cols.index(f)] == view.levels[f].index(lv)
            out |= hit
        return out

    def _analyze(self, view: SummaryView, *, with_sample: bool = True) -> Results:
        spec = self.spec
        atoms = self._atoms(view)
        codes = self._codes(view, [atoms.keys(j) for j in range(len(spec.columns))])
        keep = ~self._set_aside_mask(view, codes)
        codes, n, mean, m2 = codes[keep], atoms.n[keep], atoms.mean[keep], atoms.m2[keep]
        if n.sum() == 0:
            raise DesignError("no rows are left in the analysis; undo an edit or restore a level")
        sample_codes, sample_y, sample_pos = self._sample_rows(view) if with_sample and self.sample_size else (
            np.zeros((0, len(spec.columns)), dtype=np.int64), np.empty(0), np.empty(0, dtype=np.int64))
        method = f"cell summaries by {self.source.engine}"
        if spec.is_oneway:
            f = spec.factors[0]
            full = pool_groups(n, mean, m2, codes[:, 0], view.levels[f], atoms.offset)
            rows = RowSet(y=sample_y, group=sample_codes[:, 0], row_ids=sample_pos, positions=sample_pos)
            res = oneway_from_stats(full, spec, rows=rows, method=f"least squares, one-way ({method})")
        else:
            cols = spec.columns
            layout, atom_cell = layout_cells([codes[:, j] for j in range(len(cols))], [view.levels[c] for c in cols], cols)
            cells = pool_groups(n, mean, m2, atom_cell, layout.cell_labels(), atoms.offset)
            cell_index = {tuple(r): i for i, r in enumerate(layout.cell_levels.tolist())}
            compact = [{view.levels[c].index(name): i for i, name in enumerate(layout.levels[j])} for j, c in enumerate(cols)]
            group = np.asarray([cell_index[tuple(compact[j][int(c)] for j, c in enumerate(row))]
                                for row in sample_codes.tolist()], dtype=np.int64)
            rows = RowSet(y=sample_y, group=group, row_ids=sample_pos, positions=sample_pos)
            kind = "randomized block" if spec.blocks else "factorial"
            res = factorial_from_cells(layout, cells, spec, rows=rows, dataset_notes=self.prepared.notes,
                                       method=f"least squares, {kind} ({method}, QR)")
        return replace_deferred(res, notes=res.notes + self._notes(view, atoms, int(n.sum()), len(sample_y)))

    def _sample_rows(self, view: SummaryView) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Current level codes, shifted response and positions of the kept sample rows."""
        ds, frame = self._sample(view)
        k = len(self.spec.columns)
        if ds is None:
            return np.zeros((0, k), dtype=np.int64), np.empty(0), np.empty(0, dtype=np.int64)
        codes = self._codes(view, self._sample_keys(frame))
        keep = ~self._set_aside_mask(view, codes)
        pos = np.flatnonzero(keep)
        return codes[keep], frame["vx_y"].to_numpy(dtype=np.float64)[keep], pos

    def _sample_keys(self, frame: pd.DataFrame) -> list[list[str]]:
        return [
            [MOVE_PREFIX + str(int(m)) if m else level_label(v) for v, m in zip(frame[f].tolist(), frame[f"vx_m{j}"].tolist())]
            for j, f in enumerate(self.spec.columns)
        ]

    def _notes(self, view: SummaryView, atoms: AtomTable, n_used: int, n_sample: int) -> tuple[str, ...]:
        p = self.prepared
        base = self._atom_cache[next(iter(self._atom_cache))].n_total
        notes = [
            f"Exact from cell summaries: the partition, tests and level tables use all {n_used} rows in the analysis, "
            f"summarised by {self.source.describe()}.",
        ]
        if self.sample_size:
            notes.append(
                f"Per-row results (fitted values, residuals, leverage; residual charts, rank-based tests and "
                f"assumption checks built on them) use a seeded sample of {n_sample} of those rows (seed {self.seed}), "
                f"drawn by {self.source.engine}."
            )
        else:
            notes.append("No row sample was drawn (sample_size=0): per-row results are empty.")
        if view.filters:
            gone = base - atoms.n_total
            texts = "; ".join(f.text for f in view.filters)
            notes.append(f"{gone} row(s) left out by condition(s): {texts}.")
        for pred, f in view.moves:
            notes.append(f"Rows where {pred.text} moved to another level of {f!r} (see the edit log).")
        for cond in view.set_aside:
            notes.append("Set aside: " + ", ".join(f"{f} = {lv}" for f, lv in cond) + ".")
        notes.extend(p.set_aside_detail)
        if p.unit_exponent:
            notes.append(unit_note(self.spec.response, p.unit_exponent))
        return tuple(notes)

    # ------------------------------------------------------------ state seen by the shell
    @property
    def _summary_view(self) -> SummaryView:
        return self._views[self._position]  # type: ignore[return-value]

    @property
    def summary_view(self) -> SummaryView:
        """Conditions, row moves, level mapping and set-aside cells now in effect."""
        return self._summary_view

    @property
    def dataset(self) -> Dataset:  # type: ignore[override]
        """The seeded sample of the kept rows, as a row dataset (what charts draw)."""
        ds, _ = self._sample(self._summary_view)
        if ds is None:
            raise DesignError("no row sample is available (sample_size=0 or no rows left)")
        return ds

    @property
    def view(self) -> DataView:  # type: ignore[override]
        """The sample rows' current levels; rows in set-aside levels or cells are marked left out."""
        sv = self._summary_view
        ds, frame = self._sample(sv)
        if ds is None:
            raise DesignError("no row sample is available (sample_size=0 or no rows left)")
        codes = self._codes(sv, self._sample_keys(frame))
        kept = ~self._set_aside_mask(sv, codes)
        return DataView(kept=read_only(kept),
                        codes={f: read_only(codes[:, j].astype(np.int32)) for j, f in enumerate(self.spec.columns)},
                        levels=dict(sv.levels))

    @property
    def dropped(self) -> tuple:
        """Ids of the sample rows now left out (in set-aside levels or cells)."""
        try:
            v = self.view
        except DesignError:
            return ()
        return v.dropped_ids(self.dataset)

    @property
    def set_aside(self) -> tuple:  # type: ignore[override]
        return self.prepared.set_aside_detail

    def levels(self, factor: str) -> tuple[str, ...]:
        return self._summary_view.levels[factor]

    def _results_at(self, pos: int) -> Results:
        if pos not in self._results:
            self._results[pos] = self._analyze(self._views[pos])  # type: ignore[arg-type]
        return self._results[pos]

    # ------------------------------------------------------------ edits
    def apply(self, edit: Edit, *, origin: str = "") -> Results:
        """Apply an edit; refuse it (state unchanged) if the result cannot be analysed (``origin``: as
        :meth:`explorer.study.Study.apply`)."""
        if not isinstance(origin, str):
            raise EditError(f"the origin must be text, not {type(origin).__name__}")
        if not isinstance(edit.reason, str):
            raise EditError(f"the reason must be text, not {type(edit.reason).__name__} ({edit.reason!r})")
        old = self._summary_view
        if isinstance(edit, MergeLevels):
            busy = {lv for cond in old.set_aside for f, lv in cond if f == edit.factor}
            clash = sorted(busy & (set(edit.levels) | {edit.into}))
            if clash:
                raise EditError(f"edit refused ({edit.describe()}): level(s) {clash} of {edit.factor!r} are set aside; "
                                "restore them first")
        new: SummaryView = edit.apply(old, self.summary_data)  # type: ignore[arg-type,assignment]
        if isinstance(edit, RenameLevel):
            new = new.replace(set_aside=tuple(
                tuple((f, edit.new if (f == edit.factor and lv == edit.old) else lv) for f, lv in cond)
                for cond in new.set_aside))
        try:
            res = self._analyze(new)
        except DesignError as exc:
            raise EditError(f"edit refused ({edit.describe()}): {exc}") from None
        self._refuse_no_op(edit, new, res)
        del self._log[self._position :]
        del self._views[self._position + 1 :]
        for k in [k for k in self._results if k > self._position]:
            del self._results[k]
        self._log.append(edit)
        self._views.append(new)  # type: ignore[arg-type]
        self._position += 1
        self._results[self._position] = res
        self._ledger.record_edit(edit, origin=origin)
        self._emit("edit", edit)
        return res

    def _refuse_no_op(self, edit: Edit, new: SummaryView, res: Results) -> None:
        """A condition that catches no kept row changes nothing: refuse it rather than log it as done."""
        caught: int | None = None
        if isinstance(edit, DropWhere):
            caught = self.results.n_used - res.n_used
        elif isinstance(edit, MoveWhere):
            atoms = self._atoms(new)
            j = self.spec.columns.index(edit.factor)
            caught = int(atoms.n[atoms.move[:, j] == len(new.moves)].sum()) if atoms.size else 0
        if caught == 0:
            raise EditError(
                f"edit refused ({edit.describe()}): the condition holds for no kept row, so nothing would change; "
                "check the spelling, spaces and case of its text values (conditions compare text exactly)"
            )

    def drop_where(self, predicate: str, reason: str = "") -> Results:
        """Leave out the rows where ``predicate`` holds, e.g. ``"gauge_reading > 120"`` (pushed down to the engine)."""
        return self.apply(DropWhere(predicate=predicate, reason=reason))

    def restore_where(self, predicate: str, reason: str = "") -> Results:
        """Bring back the rows an earlier ``drop_where`` with the same text left out."""
        return self.apply(RestoreWhere(predicate=predicate, reason=reason))

    def move_where(self, predicate: str, factor: str, level: str, reason: str = "") -> Results:
        """Move the rows where ``predicate`` holds to ``level`` of ``factor`` (new or existing)."""
        return self.apply(MoveWhere(predicate=predicate, factor=factor, level=level, reason=reason))

    def drop_level(self, factor: str, level: str, reason: str = "") -> Results:
        """Set aside every row at ``level`` of ``factor`` (a day, a lot, a line)."""
        return self.apply(DropLevel(factors=(factor,), levels=(level,), reason=reason))

    def restore_level(self, factor: str, level: str, reason: str = "") -> Results:
        return self.apply(RestoreLevel(factors=(factor,), levels=(level,), reason=reason))

    def drop_cell(self, cell: dict[str, str], reason: str = "") -> Results:
        """Set aside one combination of levels, e.g. ``{"line": "L3", "shift": "night"}``."""
        return self.apply(DropCell(factors=tuple(cell), levels=tuple(str(v) for v in cell.values()), reason=reason))

    def restore_cell(self, cell: dict[str, str], reason: str = "") -> Results:
        return self.apply(RestoreCell(factors=tuple(cell), levels=tuple(str(v) for v in cell.values()), reason=reason))

    # ------------------------------------------------------------ checks and scans
    def _forget_results(self) -> None:
        """Drop every result (the test changed); positions are fitted again from the summaries when asked."""
        self._results = {}
        self.__dict__["_decisions"] = {}

    def _refit_current(self, view: Any) -> None:
        """Fit the current view from the summaries under the spec now set."""
        self._results_at(self._position)

    def _view_to_refit(self) -> Any:
        """Nothing to read first: a new spec is fitted again from the cached summaries (a study without a
        sample has no row view)."""
        return None

    def set_transform(self, transform: str | float, *, reason: str = "") -> Results:
        """Refused: a transform of the response needs every row, and the summaries hold the response as read.

        Nothing changes (spec, results, ledger). To analyse a transformed response, put it
        in a column of the data and build the study on that column, or try the transform
        on :meth:`sample_study` (a seeded sample, and it says so).
        """
        if transform == self.spec.transform:
            return self.results
        raise EditError(f"transform refused ({transform!r}): {_transform_reason(self.spec.response)}")

    def set_test(self, test: str) -> Any:
        """As :meth:`Study.set_test`; the rank and permutation tests are refused (they need every row)."""
        _summary_test(test)
        return super().set_test(test)

    def battery(self, **options: Any) -> Any:
        """The one-way battery: exact parts from the summaries, row parts from the sample
        (see :func:`explorer.summaries.battery.summary_battery`)."""
        from .battery import summary_battery

        return summary_battery(self, **options)

    def set_aside_scan(self, **options: Any) -> Any:
        """Each level and cell set aside, each pair of levels pooled (see :func:`explorer.summaries.scan.set_aside_scan`)."""
        from .scan import set_aside_scan

        return set_aside_scan(self, **options)

    def _on_sample(self, method: str, **options: Any) -> Any:
        """Run a row-level tool of :class:`~explorer.study.Study` on the sample study; count its search here."""
        sample = self.sample_study()
        mark = len(sample.ledger)
        out = getattr(sample, method)(**options)
        for entry in sample.ledger.since(mark):
            if entry.kind == "search":
                self.record_search(f"{entry.what or method} (on the seeded sample)", entry.count)
        return out

    def influence(self, **options: Any) -> Any:
        """Influence measures of the sample rows (see :meth:`sample_study`)."""
        return self._on_sample("influence", **options)

    def case_deletion(self, **options: Any) -> Any:
        """Each sample row left out in turn (see :meth:`sample_study`); for whole levels and cells use
        :meth:`set_aside_scan`, which is exact."""
        return self._on_sample("case_deletion", **options)

    def flip_finder(self, **options: Any) -> Any:
        """The fewest sample rows whose removal flips the sample's decision (see :meth:`sample_study`)."""
        return self._on_sample("flip_finder", **options)

    def regroup_scan(self, **options: Any) -> Any:
        """Merges and row moves on the sample (see :meth:`sample_study`); :meth:`set_aside_scan` pools
        pairs of levels exactly."""
        return self._on_sample("regroup_scan", **options)

    def unit_deletion(self, column: str, **options: Any) -> Any:
        """Refused: a scan of whole levels left out is :meth:`set_aside_scan` here (exact, from the summaries)."""
        raise DesignError(
            f"leaving out each level of {column!r} in turn refits every row; on a summary-backed study use "
            "study.set_aside_scan() (each level and cell set aside, exact from the summaries), or run it on "
            "study.sample_study() (a seeded sample, and it says so)")

    def row_deletion(self, **options: Any) -> Any:
        """Refused: leaving out each row in turn needs the rows (see :meth:`case_deletion` for the sample's rows)."""
        raise DesignError(
            "leaving out each row in turn needs every row, and a summary-backed study keeps cell summaries; "
            "run it on study.sample_study() (a seeded sample, and it says so), or use study.set_aside_scan() "
            "for whole levels and cells (exact)")

    def robustness_sweep(self, **options: Any) -> Any:
        """The robustness sweep on the sample rows (see :meth:`sample_study`)."""
        return self._on_sample("robustness_sweep", **options)

    # ------------------------------------------------------------ files
    def to_dict(self) -> dict[str, Any]:
        doc = {
            "format": FORMAT,
            "schema": SCHEMA,
            "spec": self.spec.to_dict(),
            "data": {"source": self.source.describe(), "engine": self.source.engine, "fingerprint": self.fingerprint,
                     "rows": self.prepared.rows_total},
            "sample": {"size": self.sample_size, "seed": self.seed},
            "edits": [e.to_dict() for e in self._log],
            "position": self._position,
            "comparisons": self.comparisons,
            "ledger": self._ledger.to_dict(),
        }
        if self.planned_requests:
            doc["planned"] = self.planned_to_dict()
        return doc

    def save(self, path: str | Path, *, overwrite: bool = False) -> Path:
        """Write the spec, the summaries' fingerprint and the edit log (with undone edits) as JSON, atomically
        (same refusals as :meth:`explorer.study.Study.save`)."""
        p = write_text_atomic(path, json.dumps(self.to_dict(), indent=1), overwrite=overwrite,
                              protect=self.files_read(study_files=False), own=self._own_files)
        self._remember_own_file(p)
        return p

    @classmethod
    def load(cls, path: str | Path, data: Any, *, allow_mismatch: bool = False) -> SummaryStudy:  # type: ignore[override]
        """Replay a saved log on ``data`` (same kinds of source as the constructor takes)."""
        study = cls.from_dict(read_study_file(path, FORMAT), data, allow_mismatch=allow_mismatch)
        study._remember_own_file(path)
        return study

    @classmethod
    def from_dict(cls, doc: dict[str, Any], data: Any, *, allow_mismatch: bool = False) -> SummaryStudy:  # type: ignore[override]
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise ReplayError(f"not a saved summary-backed study (no format marker {FORMAT!r}); "
                              "row studies load with explorer.Study.load")
        check_study_doc(doc, FORMAT)
        spec = ModelSpec.from_dict(doc["spec"])
        try:
            _summary_spec(spec)
        except ExplorerError as exc:
            raise ReplayError(f"the study file's spec cannot be analysed from cell summaries: {exc}") from None
        sample = doc.get("sample", {})
        study = cls.__new__(cls)
        study._setup(as_source(data), spec, int(sample.get("size", 2000)), int(sample.get("seed", 0)))
        study._read_files = _local_files(data)
        saved = doc.get("data", {})
        if saved.get("fingerprint") != study.fingerprint and not allow_mismatch:
            raise ReplayError(
                f"the summaries differ from those the log was saved on ({saved.get('rows')} rows then, "
                f"{study.prepared.rows_total} now, or different values). Pass allow_mismatch=True to replay anyway "
                "(edits that no longer apply fail)"
            )
        edits = []
        for i, d in enumerate(doc.get("edits", [])):
            try:
                edits.append(edit_from_dict(d))
            except (TypeError, ValueError) as exc:
                raise ReplayError(f"edit {i + 1} in the saved log cannot be read: {exc}") from None
        for i, e in enumerate(edits):
            try:
                study.apply(e)
            except EditError as exc:
                raise ReplayError(f"edit {i + 1} of the saved log ({e.describe()}) does not apply: {exc}") from None
        for request, at in planned_from_doc(doc):
            study._keep_request(request, record=False, at=at)
        position = int(doc.get("position", len(edits)))
        while study._position > position:
            study.undo()
        study._comparisons = doc.get("comparisons", COMPARISON_METHODS[0])
        study._ledger = ledger_from_doc(doc, edits, position)
        return study

    def to_code(self, data: str | Path | None = None) -> str:
        """Python source that rebuilds this state: build the summary study, then apply each edit."""
        s = self.spec
        from ..report.replay_code import python_literal as lit

        source = str(data) if data is not None else "<your files or Spark DataFrame>"
        lines = [
            "from explorer.engine.edits import edit_from_dict",
            "from explorer.summaries import SummaryStudy",
            f"study = SummaryStudy({lit(source)}, "
            f"response={lit(s.response)}, factors={lit(list(s.factors))}, blocks={lit(list(s.blocks))}, "
            f"interactions={lit(bool(s.interactions))}, ss_type={lit(s.ss_type)}, alpha={lit(float(s.alpha))}, "
            f"test={lit(s.test)}, "
            + (f"terms={lit([list(t) for t in s.terms])}, " if s.terms is not None else "")
            + (f"max_order={lit(s.max_order)}, " if s.max_order is not None else "")
            + (f"units={lit(s.units)}, " if s.units else "")
            + f"sample_size={lit(int(self.sample_size))}, seed={lit(int(self.seed))})",
        ]
        lines += [f"study.apply(edit_from_dict({lit(e.to_dict())}))" for e in self.edits]
        for request in self.planned_requests:
            method, args, kwargs = self.planned_call(request)
            call = ", ".join([lit(a) for a in args] + [f"{k}={lit(v)}" for k, v in kwargs.items()])
            lines.append(f"study.{method}({call})  # planned analysis, recomputed after every edit")
        if self.comparisons != COMPARISON_METHODS[0]:
            lines.append(f"study.set_comparisons({lit(self.comparisons)})")
        return "\n".join(lines) + "\n"

    def __repr__(self) -> str:
        return (f"SummaryStudy(response={self.spec.response!r}, factors={list(self.spec.columns)}, "
                f"rows={self.prepared.rows_total}, engine={self.source.engine}, edits={self._position})")


def _type_name(t: Any) -> str:
    """An engine's type for messages: DuckDB gives text, Spark a type object."""
    return t if isinstance(t, str) else str(getattr(t, "simpleString", lambda: t)())


def _local_files(source: Any) -> list[Path]:
    """The existing local files named by a source argument (a path or a list of paths), resolved."""
    items = source if isinstance(source, (list, tuple)) else [source]
    return [Path(x).resolve() for x in items if isinstance(x, (str, Path)) and Path(x).is_file()]


def _transform_reason(response: str) -> str:
    return (f"a summary-backed study holds each cell's count, mean and sum of squares of {response!r} as read, and "
            "a transform needs every row (the mean of the logs is not the log of the mean); put the transformed "
            "response in a column of the data and build the study on that column, or try the transform on "
            "study.sample_study() (a seeded sample, and it says so)")


def _summary_spec(spec: ModelSpec) -> None:
    """Refuse, naming why, what a summary-backed study cannot compute from cell summaries."""
    if spec.transform != "none":
        raise ExplorerError(f"transform {spec.transform!r} refused: {_transform_reason(spec.response)}")
    if spec.covariates:
        raise ExplorerError(
            f"covariates {list(spec.covariates)} refused: an adjustment for a covariate needs the cross-products of "
            f"{spec.response!r} and the covariate in every cell, and a summary-backed study holds only each cell's "
            "count, mean and sum of squares of the response; fit it with explorer.Study on the rows")
    roles = [name for name, used in (("random", spec.random), ("nested", spec.nested), ("subject", spec.subject))
             if used]
    if roles:
        raise ExplorerError(
            f"the role(s) {roles} refused: a summary-backed study fits crossed fixed factors and blocks only "
            "(random, nested and repeated-measures terms are not computed from its cell summaries); fit them with "
            "explorer.Study on the rows")
    _summary_test(spec.test)


def _summary_test(test: str) -> None:
    if test in ("kruskal", "permutation"):
        raise ExplorerError(
            f"the {test} test needs every row, and a summary-backed study holds cell summaries; read the decision "
            "from 'classic', 'welch' or 'brown-forsythe' (exact from the summaries), or run the rank or permutation "
            "test on study.sample_study() (a seeded sample, and it says so)")


def _fingerprint(atoms: AtomTable, spec: ModelSpec, unit: int = 0) -> str:
    """Hash of the baseline summaries (counts exactly; means and SS to 10 significant digits).

    In a unit 2**e other than the response's own, each number is written as a 10-digit
    binary mantissa and its exponent in the response's own unit, so engines that chose
    different units for the same rows agree.
    """
    def num(x: float, power: int) -> str:
        if not unit:
            return f"{x:.10g}"
        m, ex = math.frexp(x)
        return f"{m:.10g}p{ex + power * unit}"

    rows = sorted(
        (tuple(atoms.keys(j)[i] for j in range(len(spec.columns))), int(atoms.n[i]),
         num(atoms.mean[i] + atoms.offset, 1), num(atoms.m2[i], 2))
        for i in range(atoms.size)
    )
    head = f"{spec.response}|{'|'.join(spec.columns)}"
    return hashlib.sha256((head + repr(rows)).encode()).hexdigest()[:32]
