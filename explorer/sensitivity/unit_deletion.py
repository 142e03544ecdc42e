"""Leave one unit out at a time: each subject, operator, part, lot (or single row) refitted.

For models with random, nested or subject terms every F has its own error term and
the variance components move with the data, so the scan refits the whole analysis on
a private view for each unit left out (the study itself is never edited). Each line
gives every term's p-value, the headline term's decision and every variance
component; a unit whose removal the engine would refuse (a factor left with one level,
a term with no df) gets a status saying why. Refits cost one cell-level analysis each,
so a scan over units (tens to hundreds) takes well under a second; the row version is
limited to ``max_rows``.

The number of alternatives examined is added to the study's disclosure count.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.analysis import analyze
from ..engine.errors import DesignError, ExplorerError
from ..engine.tables import html_table
from ..rendering import html_repr
from .study_like import StudyLike

__all__ = ["UnitDeletionScan", "headline_term", "row_deletion", "unit_deletion"]


def headline_term(results) -> str:
    """The term a deletion scan reads its decision from: the first fixed treatment term (not a block)."""
    spec = results.spec
    ems = results.expected_mean_squares
    random_rows = {r for r, rnd in zip(ems.rows, ems.random_rows) if rnd} if ems is not None else set()
    for r in results.partition.rows:
        if r.statistic is None or r.source in spec.blocks or r.source in random_rows:
            continue
        return r.source
    return results.partition.rows[0].source


@dataclass(frozen=True, kw_only=True, eq=False)
class UnitDeletionScan:
    """One line per unit left out: rows removed, each term's p, the decision, each variance component."""

    column: str
    units: tuple[str, ...]
    rows_removed: np.ndarray
    pvalues: dict[str, np.ndarray]
    components: dict[str, np.ndarray]
    term: str
    baseline_pvalue: float | None
    alpha: float
    status: tuple[str, ...]
    disclosure: object = None
    notes: tuple[str, ...] = field(default=())

    @property
    def flips(self) -> np.ndarray:
        """Units whose removal changes the headline decision at alpha."""
        p = self.pvalues.get(self.term)
        if p is None or self.baseline_pvalue is None:
            return np.zeros(len(self.units), dtype=bool)
        was = self.baseline_pvalue < self.alpha
        return np.isfinite(p) & ((p < self.alpha) != was)

    def to_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame({self.column: list(self.units), "rows left out": self.rows_removed})
        for name, p in self.pvalues.items():
            frame[f"p: {name}"] = p
        for name, v in self.components.items():
            frame[f"variance: {name}"] = v
        frame["decision flips"] = self.flips
        frame["status"] = list(self.status)
        return frame.sort_values("decision flips", ascending=False, kind="stable").reset_index(drop=True)

    @html_repr
    def _repr_html_(self) -> str:
        n_flip = int(self.flips.sum())
        cap = (f"Each {self.column} left out in turn ({len(self.units)} refits): {n_flip} change the decision on "
               f"{self.term}")
        return html_table(self.to_frame(), cap, self.notes)


def _scan(study: StudyLike, column: str, groups: list[tuple[str, np.ndarray]], record: bool, what: str) -> UnitDeletionScan:
    base = study.results
    term = headline_term(base)
    sources = [r.source for r in base.partition.rows if r.statistic is not None]
    comps = [c.source for c in base.variance_components.components] if base.variance_components else []
    n = len(groups)
    pvalues = {s: np.full(n, np.nan) for s in sources}
    components = {c: np.full(n, np.nan) for c in comps}
    removed = np.zeros(n, dtype=np.int64)
    status = []
    view = study.view
    for i, (_, positions) in enumerate(groups):
        kept = view.kept.copy()
        kept[positions] = False
        removed[i] = int(view.kept[positions].sum())
        try:
            res = analyze(study.dataset, view.replace(kept=kept), study.spec)
        except DesignError as exc:
            status.append(f"cannot be analysed without it: {exc}")
            continue
        status.append("ok")
        for s in sources:
            try:
                p = res.partition.row(s).pvalue
            except KeyError:
                p = None
            pvalues[s][i] = np.nan if p is None else p
        if res.variance_components is not None:
            for c in res.variance_components.components:
                if c.source in components:
                    components[c.source][i] = c.estimate
    if record:
        study.record_search(what, n)
    base_p = base.partition.row(term).pvalue
    notes = ("Each line is a full refit (error terms and variance components recomputed); the study is not edited.",)
    return UnitDeletionScan(
        column=column, units=tuple(g for g, _ in groups), rows_removed=removed, pvalues=pvalues,
        components=components, term=term, baseline_pvalue=base_p, alpha=study.spec.alpha, status=tuple(status),
        disclosure=study.disclosure, notes=notes,
    )


def unit_deletion(study: StudyLike, column: str, *, record: bool = True) -> UnitDeletionScan:
    """Each level of ``column`` (subject, operator, part, lot, block ...) left out in turn, refitted.

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    column : str
        The column whose levels are left out one at a time.
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    UnitDeletionScan
        For each unit: rows removed, every term's p-value with its own error term, the
        headline decision and every variance component; a status says why a refit was
        refused.

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3
    (deletion of groups of cases).

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("gauge"), "diameter_mm", ["part", "operator"],
    ...                  random=["part", "operator"])
    >>> scan = ex.stats.unit_deletion(study, "operator")
    >>> scan.units
    ('ana', 'ben', 'cho')
    """
    view = study.view
    if column not in view.levels:
        raise ExplorerError(f"{column!r} is not a column of the study's model {list(view.levels)}")
    codes = view.codes[column]
    groups = []
    for k, label in enumerate(view.levels[column]):
        pos = np.flatnonzero((codes == k) & view.kept)
        if pos.size:
            groups.append((label, pos))
    return _scan(study, column, groups, record, f"each {column} left out")


def row_deletion(study: StudyLike, *, max_rows: int = 5000, record: bool = True) -> UnitDeletionScan:
    """Each kept row left out in turn, refitted (models with random terms).

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    max_rows : int, default 5000
        Refused above this many kept rows (one refit each).
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    UnitDeletionScan
        As :func:`unit_deletion`, one line per row.

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3.

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("gauge"), "diameter_mm", ["part", "operator"],
    ...                  random=["part", "operator"])
    >>> scan = ex.stats.row_deletion(study)
    >>> len(scan.units)
    30
    """
    pos = np.flatnonzero(study.view.kept)
    if pos.size > max_rows:
        raise ExplorerError(
            f"{pos.size} kept rows: a refit per row is limited to max_rows={max_rows}; leave out whole units "
            "with unit_deletion(column), or raise max_rows"
        )
    ids = study.dataset.row_ids
    groups = [(str(ids[p]), np.array([p])) for p in pos]
    return _scan(study, "row", groups, record, "each row left out")
