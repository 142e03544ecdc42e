"""Regroup scan for factorial and block designs, from cell sufficient statistics.

Merging two levels of a factor pools cells pairwise; it is refitted once per pair of
levels (cell-level fits cost microseconds). Moving one row from level ``a`` to ``b`` of
the factor changes two cells: its source cell loses it (Welford downdate) and the
target cell gains it (update). For fixed counts every term's sum of squares and the
lack-of-fit part of the residual are quadratic forms in the cell means, so for each
(source cell, target cell) pair they are quadratics in the two mean shifts; six cell
fits give the coefficients and every row of the source cell is read off in O(1).
Moves that create or empty a cell change the design and are refitted directly.

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data. Wiley, ch. 4.
Welford, B. P. (1962). Technometrics 4(3), 419-420.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..engine.cellfit import CellFit, fit_cells
from ..engine.cells import layout_cells
from ..engine.design import model_terms, term_name
from ..engine.design_checks import check_design
from ..engine.distributions import f_sf
from ..engine.errors import DesignError, ExplorerError, closest_names
from ..engine.groupstats import GroupStats, group_stats
from ..engine.numerics import is_zero_ss, response_scale
from .alternatives import AlternativeFits, OnewayInput, leave_one_out
from .study_like import StudyLike

__all__ = ["CellRegroup", "TermFit", "cell_regroup"]


@dataclass(frozen=True, kw_only=True)
class TermFit:
    """One refit: the scored term's sum of squares and df, the residual's, and the levels of the term's first factor."""

    ss: float
    df: int
    ss_resid: float
    df_resid: int
    levels: int


@dataclass(frozen=True, kw_only=True, eq=False)
class CellRegroup:
    """Every merge of two levels of ``factor`` (``pairs``, ``merge_fits``) and every move of one
    row (``move_rows`` from level ``move_from`` to ``move_to``, ``move_fits``), each scored by the
    F test of the model term; ``notes`` say how."""

    factor: str
    pairs: tuple[tuple[str, str], ...]
    merge_fits: AlternativeFits
    move_rows: np.ndarray
    move_from: np.ndarray
    move_to: np.ndarray
    move_fits: AlternativeFits
    notes: tuple[str, ...]


class _Context:
    """The kept rows of a multi-factor study and the pieces every refit needs."""

    def __init__(self, study: StudyLike, factor: str | None, term: str) -> None:
        from ..engine.factorial import layout_of

        res = study.results
        self.spec = spec = study.spec
        dataset, view = study.dataset, study.view
        self.factor = factor or spec.factors[0]
        if self.factor not in spec.columns:
            near = closest_names(self.factor, spec.columns)
            hint = f" Did you mean {near[0]!r}?" if near else ""
            raise ExplorerError(f"{self.factor!r} is not a factor of this study ({list(spec.columns)}).{hint}")
        self.layout = layout_of(dataset, view, spec)
        pos = np.asarray(res.fit.positions)
        if pos.size != int(res.groups.n_total):
            raise DesignError("the regroup scan needs every kept row; this study's results carry a sample")
        self.y = np.asarray(dataset.y)[pos]
        self.cell = np.asarray(res.fit.group, dtype=np.int64)
        self.offset = float(dataset.offset)
        self.cells = group_stats(self.y, self.cell, tuple(res.groups.labels), self.offset)
        self.j = self.layout.columns.index(self.factor)
        self.col_codes = [np.asarray(view.codes[c])[pos] for c in spec.columns]
        self.levels = self.layout.levels
        self.term = term
        self.term_column = list(spec.columns).index({term_name(t): t for t in model_terms(spec)}[term][0])
        self.ss_total = self.cells.ss_within + self.cells.ss_between
        self.row_ids = np.asarray(res.fit.row_ids)
        base = fit_cells(self.cells, self.layout.cell_levels, self.layout.columns, self.layout.n_levels, spec)
        self.base = base

    def main_ss(self, fit: CellFit) -> tuple[float, int]:
        for t in fit.terms:
            if term_name(t) == self.term:
                return fit.ss[self.spec.ss_type][t], fit.df[self.spec.ss_type][t]
        raise KeyError(self.term)

    def refit_rows(self, col_codes: list[np.ndarray]) -> TermFit:
        """Direct refit from row codes: the scored term's and the residual's sums of squares and df.

        The scored term's ``levels`` is that of its first factor (a one-level factor leaves no test)."""
        layout, cell = layout_cells(col_codes, [tuple(lv) for lv in self.full_levels()], self.spec.columns)
        gs = group_stats(self.y, cell, tuple(str(i) for i in range(layout.n_cells)), self.offset)
        check_design(layout, gs.n, self.spec, ())  # what the engine would refuse, this refuses too
        fit = fit_cells(gs, layout.cell_levels, layout.columns, layout.n_levels, self.spec)
        ss, df = self.main_ss(fit)
        return TermFit(ss=ss, df=df, ss_resid=fit.ss_resid, df_resid=fit.df_resid,
                       levels=len(layout.levels[self.term_column]))

    def full_levels(self) -> list[tuple[str, ...]]:
        return [tuple(str(i) for i in range(int(c.max()) + 1)) for c in self.col_codes]


class _Block:
    """Alternatives collected in blocks: arrays of term SS and residual SS with their df and level counts."""

    def __init__(self) -> None:
        self.parts: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []

    def add(self, ssb: np.ndarray, df_b: int, ssw: np.ndarray, df_w: int, levels: int) -> None:
        m = ssb.size
        self.parts.append((ssb, np.full(m, df_b), ssw, np.full(m, df_w), np.full(m, levels), np.zeros(m, np.int8)))

    def add_result(self, r: TermFit | str) -> None:
        if isinstance(r, str):
            self.parts.append((np.full(1, np.nan), np.zeros(1, int), np.full(1, np.nan), np.zeros(1, int),
                               np.zeros(1, int), np.full(1, 4, np.int8)))
        else:
            self.add(np.array([r.ss]), r.df, np.array([r.ss_resid]), r.df_resid, r.levels)

    def fits(self, ss_total: float, n: int, scale: float) -> AlternativeFits:
        """F tests of every alternative collected (vectorised); ``n`` rows, response magnitude ``scale``."""
        if self.parts:
            ssb, df_b, ssw, df_w, lev, status = (np.concatenate(x) for x in zip(*self.parts))
        else:
            ssb = ssw = np.zeros(0)
            df_b = df_w = lev = np.zeros(0, dtype=np.int64)
            status = np.zeros(0, dtype=np.int8)
        df_b, df_w, lev = df_b.astype(np.int64), df_w.astype(np.int64), lev.astype(np.int64)
        status = status.copy()
        free = status == 0
        status[free & is_zero_ss(ssw, n, scale)] = 3
        status[free & (df_w < 1)] = 2
        status[free & ((lev < 2) | (df_b < 1))] = 1
        ok = status == 0
        stat = np.full(ssb.size, np.nan)
        p = np.full(ssb.size, np.nan)
        stat[ok] = (ssb[ok] / df_b[ok]) / (ssw[ok] / df_w[ok])
        p[ok] = f_sf(stat[ok], df_b[ok].astype(float), df_w[ok].astype(float))
        with np.errstate(divide="ignore", invalid="ignore"):
            eta = np.where(np.isfinite(ssb) & (ss_total > 0), ssb / ss_total, np.nan)
        return AlternativeFits(levels=lev, n=np.zeros(ssb.size, dtype=np.int64), df_between=df_b, df_within=df_w,
                               ss_between=ssb, ss_within=ssw, statistic=stat, pvalue=p, eta_squared=eta,
                               status=status)


def _shifted(cells: GroupStats, changes: dict[int, tuple[float, float]]) -> GroupStats:
    n = cells.n.copy()
    mean = cells.mean.copy()
    for c, (cn, cm) in changes.items():
        n[c], mean[c] = cn, cm
    return GroupStats(labels=cells.labels, n=n, mean=mean, m2=cells.m2, offset=cells.offset)


def _moved_ss(ctx: _Context, s: int, t: int, u: float, v: float) -> tuple[float, float]:
    """First factor's SS and the lack of fit with one row moved from cell ``s`` to ``t`` and the means shifted."""
    cells = ctx.cells
    moved = _shifted(cells, {s: (cells.n[s] - 1, cells.mean[s] + u), t: (cells.n[t] + 1, cells.mean[t] + v)})
    fit = fit_cells(moved, ctx.layout.cell_levels, ctx.layout.columns, ctx.layout.n_levels, ctx.spec)
    return ctx.main_ss(fit)[0], fit.ss_lack_of_fit


def cell_regroup(study: StudyLike, factor: str | None = None, *, term: str, moves: bool = True) -> CellRegroup:
    """Merges of two levels of ``factor`` and moves of one row to another of its levels, multi-factor designs.

    Each alternative is scored by the F test of the model term ``term``; see :class:`CellRegroup`.
    """
    ctx = _Context(study, factor, term)
    spec, j, lv = ctx.spec, ctx.j, ctx.levels[ctx.j]
    k = len(lv)
    notes: list[str] = []
    # Merges: refit once per pair of levels.
    pairs = [(a, b) for a in range(k) for b in range(a + 1, k)]
    merge_block = _Block()
    present = np.cumsum(np.bincount(ctx.col_codes[j]) > 0) - 1  # view codes -> layout codes
    for a, b in pairs:
        codes = [c.copy() for c in ctx.col_codes]
        lay = present[codes[j]]
        codes[j] = np.where(lay == b, a, lay)
        try:
            merge_block.add_result(ctx.refit_rows(codes))
        except DesignError as exc:
            merge_block.add_result(str(exc))
            notes.append(f"Merging {lv[a]} and {lv[b]}: {exc}")
    merge_fits = merge_block.fits(ctx.ss_total, ctx.y.size, response_scale(ctx.offset, ctx.cells.mean))
    move_rows_l: list[np.ndarray] = []
    move_to_l: list[np.ndarray] = []
    move_block = _Block()
    if moves:
        data = OnewayInput(factor="cell", y=ctx.y, codes=ctx.cell, labels=ctx.cells.labels, row_ids=ctx.row_ids,
                           positions=np.arange(ctx.y.size), offset=ctx.offset, alpha=spec.alpha, stats=ctx.cells)
        _, down_mean, down_m2 = leave_one_out(data)
        cl = ctx.layout.cell_levels
        lookup = {tuple(r): i for i, r in enumerate(cl.tolist())}
        cells = ctx.cells
        m2_total = cells.m2.sum()
        for s in range(cells.k):
            rows = np.flatnonzero(ctx.cell == s)
            for b in range(k):
                if b == cl[s, j] or rows.size == 0:
                    continue
                key = list(cl[s])
                key[j] = b
                t = lookup.get(tuple(key))
                move_rows_l.append(rows)
                move_to_l.append(np.full(rows.size, b))
                if t is None or cells.n[s] < 2:
                    for i in rows:  # the design changes: refit directly
                        codes = [c.copy() for c in ctx.col_codes]
                        codes[j] = present[codes[j]]
                        codes[j][i] = b
                        try:
                            move_block.add_result(ctx.refit_rows(codes))
                        except DesignError as exc:
                            move_block.add_result(str(exc))
                    continue
                n_t = float(cells.n[t])
                du = down_mean[rows] - cells.mean[s]
                dv = (ctx.y[rows] - cells.mean[t]) / (n_t + 1)
                h = float(np.max(np.abs(du))) or 1.0
                g = float(np.max(np.abs(dv))) or 1.0

                f00, fp0, fm0, f0p, f0m, fpp = (np.array(_moved_ss(ctx, s, t, u, v)) for u, v in
                                                ((0, 0), (h, 0), (-h, 0), (0, g), (0, -g), (h, g)))
                c1 = (fp0 - fm0) / 2
                c3 = (fp0 + fm0) / 2 - f00
                c2 = (f0p - f0m) / 2
                c4 = (f0p + f0m) / 2 - f00
                c5 = fpp - f00 - c1 - c2 - c3 - c4
                u = (du / h)[:, None]
                v = (dv / g)[:, None]
                val = f00 + c1 * u + c2 * v + c3 * u * u + c4 * v * v + c5 * u * v
                d_t = ctx.y[rows] - cells.mean[t]
                m2_t = cells.m2[t] + d_t * d_t * (n_t / (n_t + 1))
                pure = (m2_total - cells.m2[s] - cells.m2[t]) + down_m2[rows] + m2_t
                move_block.add(val[:, 0], ctx.main_ss(ctx.base)[1], pure + np.maximum(val[:, 1], 0.0),
                               ctx.base.df_resid, len(ctx.levels[ctx.term_column]))
    move_fits = move_block.fits(ctx.ss_total, ctx.y.size, response_scale(ctx.offset, ctx.cells.mean))
    moved = np.concatenate(move_rows_l) if move_rows_l else np.zeros(0, dtype=np.int64)
    targets = np.concatenate(move_to_l) if move_to_l else np.zeros(0, dtype=np.int64)
    src = ctx.layout.cell_levels[ctx.cell[moved], j]
    labels = np.asarray(lv, dtype=object)
    notes.append(f"Regrouping {ctx.factor!r}; the decision scored is the classic F of the {ctx.term!r} term "
                 f"({spec.ss_type} sums of squares).")
    return CellRegroup(factor=ctx.factor, pairs=tuple((lv[a], lv[b]) for a, b in pairs), merge_fits=merge_fits,
                       move_rows=ctx.row_ids[moved], move_from=labels[src], move_to=labels[targets],
                       move_fits=move_fits, notes=tuple(notes))
