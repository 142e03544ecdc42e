"""Case deletion for multi-factor designs, from cell sufficient statistics.

Leaving out one row of cell ``c`` changes only that cell: its count drops by one, its
mean moves by ``delta = -(y - mean_c) / (n_c - 1)`` and its centred sum of squares is
downdated (Welford). For fixed cell counts every term's sum of squares (Types I, II
and III alike) and the lack-of-fit part of the residual are quadratic forms in the
cell means, so along the line ``mean_c + delta`` each is a quadratic in ``delta``.
Three fits of the cell-level model per cell (at ``delta = -h, 0, h``) give the
coefficients exactly; every row of the cell is then read off in O(1). A row that is
its cell's only observation removes the cell; those few are refitted directly.

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data. Wiley, ch. 4 (sums of squares
as quadratic forms in the cell means).
Welford, B. P. (1962). Technometrics 4(3), 419-420.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..engine.cellfit import fit_cells
from ..engine.design import term_name
from ..engine.distributions import f_sf
from ..engine.errors import DesignError
from ..engine.groupstats import GroupStats, group_stats
from ..engine.numerics import is_zero_ss
from .alternatives import OnewayInput, leave_one_out
from .study_like import StudyLike

__all__ = ["TermDeletions", "cell_deletion", "eta_squared_total"]


def _with_cell(cells: GroupStats, c: int, n: float, mean: float) -> GroupStats:
    nn = cells.n.copy()
    mm = cells.mean.copy()
    nn[c], mm[c] = n, mean
    return GroupStats(labels=cells.labels, n=nn, mean=mm, m2=cells.m2, offset=cells.offset)


def _without_cell(cells: GroupStats, c: int) -> GroupStats:
    keep = np.arange(cells.k) != c
    return GroupStats(labels=tuple(lab for lab, k in zip(cells.labels, keep) if k), n=cells.n[keep],
                      mean=cells.mean[keep], m2=cells.m2[keep], offset=cells.offset)


@dataclass(frozen=True, kw_only=True, eq=False)
class TermDeletions:
    """Every term's F test with each kept row left out (one entry per row in each array).

    ``per_term[name]`` holds arrays ``statistic``, ``pvalue``, ``ss``, ``df`` (the
    residual's under ``"residual"``); ``status`` follows :data:`.alternatives.STATUS_NOTES`
    (4 = the row's cell disappears and the model cannot be fitted without it); ``cells``
    are the kept rows with their cells as groups; ``notes`` say what was refitted.
    """

    per_term: dict[str, dict[str, np.ndarray]]
    status: np.ndarray
    cells: OnewayInput
    notes: list[str]


def cell_deletion(study: StudyLike) -> TermDeletions:
    """Every term's F test with each kept row left out in turn; see :class:`TermDeletions`."""
    from ..engine.factorial import layout_of

    res = study.results
    spec = study.spec
    dataset = study.dataset
    layout = layout_of(dataset, study.view, spec)
    pos = np.asarray(res.fit.positions)
    if pos.size != int(res.groups.n_total):
        raise DesignError("the case-deletion scan needs every kept row; this study's results carry a sample")
    y = np.asarray(dataset.y)[pos]
    codes = np.asarray(res.fit.group, dtype=np.int64)
    cells = group_stats(y, codes, tuple(res.groups.labels), dataset.offset)
    data = OnewayInput(factor="cell", y=y, codes=codes, labels=cells.labels, row_ids=np.asarray(res.fit.row_ids),
                       positions=pos, offset=float(dataset.offset), alpha=float(spec.alpha), stats=cells)
    levels, columns, n_levels = layout.cell_levels, layout.columns, layout.n_levels
    base = fit_cells(cells, levels, columns, n_levels, spec)
    terms = base.terms
    ss_type = spec.ss_type
    new_n, new_mean, new_m2 = leave_one_out(data)
    n = data.n
    ss = {t: np.full(n, np.nan) for t in terms}
    lof = np.full(n, np.nan)
    df_resid = np.full(n, base.df_resid - 1, dtype=np.int64)
    status = np.zeros(n, dtype=np.int8)
    notes: list[str] = []
    others_m2 = cells.m2.sum() - cells.m2  # pure error of the other cells (sums of non-negative terms)
    for c in range(cells.k):
        rows = np.flatnonzero(codes == c)
        if rows.size == 0:
            continue
        if cells.n[c] >= 2:
            delta = new_mean[rows] - cells.mean[c]
            h = float(np.max(np.abs(delta))) or 1.0
            fits = [fit_cells(_with_cell(cells, c, cells.n[c] - 1, cells.mean[c] + s * h), levels, columns, n_levels,
                              spec) for s in (-1.0, 0.0, 1.0)]
            u = delta / h
            for t in terms:
                lo, mid, hi = (f.ss[ss_type][t] for f in fits)
                ss[t][rows] = mid + u * (hi - lo) / 2 + u * u * ((hi + lo) / 2 - mid)
            lo, mid, hi = (f.ss_lack_of_fit for f in fits)
            lof[rows] = np.maximum(mid + u * (hi - lo) / 2 + u * u * ((hi + lo) / 2 - mid), 0.0)
        else:
            try:
                f = fit_cells(_without_cell(cells, c), np.delete(levels, c, axis=0), columns, n_levels, spec)
            except DesignError as exc:
                status[rows] = 4
                notes.append(f"Leaving out row {data.row_ids[rows[0]]} empties cell {cells.labels[c]!r}: {exc}")
                continue
            for t in terms:
                ss[t][rows] = f.ss[ss_type].get(t, np.nan)
            lof[rows] = f.ss_lack_of_fit
            df_resid[rows] = f.df_resid
    resid = others_m2[codes] + new_m2 + lof
    zero = is_zero_ss(resid, n, data.scale())
    status[(status == 0) & zero] = 3
    status[(status == 0) & (df_resid < 1)] = 2
    ok = status == 0
    per_term: dict[str, dict[str, np.ndarray]] = {}
    for t in terms:
        df_t = base.df[ss_type][t]
        stat = np.full(n, np.nan)
        p = np.full(n, np.nan)
        stat[ok] = (ss[t][ok] / df_t) / (resid[ok] / df_resid[ok])
        p[ok] = f_sf(stat[ok], float(df_t), df_resid[ok].astype(float))
        per_term[term_name(t)] = {"statistic": stat, "pvalue": p, "ss": ss[t], "df": np.full(n, df_t)}
    per_term["residual"] = {"ss": resid, "df": df_resid}
    return TermDeletions(per_term=per_term, status=status, cells=data, notes=notes)


def eta_squared_total(data: OnewayInput, ss_term: np.ndarray) -> np.ndarray:
    """Term sum of squares over the total sum of squares with each row left out (one-way total downdate)."""
    gm = data.stats.grand_mean
    n = data.n
    d = data.y - gm
    sst = data.stats.ss_within + data.stats.ss_between
    with np.errstate(divide="ignore", invalid="ignore"):
        sst_i = np.maximum(sst - d * d * n / (n - 1), 0.0)
        return np.where(sst_i > 0, ss_term / sst_i, np.nan)

