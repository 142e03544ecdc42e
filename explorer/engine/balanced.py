"""Closed-form fit of complete, equally replicated layouts: no least-squares solve.

When every cell holds the same count n and the cells are every combination of the
columns' levels (a nested column: the same number of levels under each combination of
its parents), the spaces of the model's terms are mutually orthogonal and the
least-squares fit is the classic decomposition of the cell means into marginal means
(Yates; Scheffé 1959, ch. 4 and 5; Montgomery, Design and Analysis of Experiments,
8th ed., ch. 5 and 14, from memory):

* the marginal mean of a set S of columns is the mean of the cell means over each
  combination of S's levels (one ``bincount``);
* the effect of a term t at a cell is the inclusion-exclusion sum over the subsets D
  of t's own columns, sum_D (-1)^(|t| - |D|) m_{P u D}, where P are the columns t is
  nested in (Moebius inversion on the order ideals of the columns);
* SS(t) = n sum over cells of effect_t^2 (types I, II and III coincide); the fitted
  cell mean is the grand mean plus the fitted terms' effects; the residual is the pooled
  within-cell SS plus n sum (mean - fitted)^2;
* sum-to-zero coefficients are read off the effects (level j < L - 1 of each column)
  and (X'WX)^-1 is block diagonal, (cells of t / N) kron_c (I - J / L_c) per crossed
  term; every row's leverage is p / N.

The result is the same :class:`~.cellfit.CellFit` the general engine returns (same
design, coefficients and partition), so everything downstream is unchanged; the
expected mean squares are the exact counts N / (level combinations of each random
term) (:mod:`.ems`).

Reference: Scheffé, H. (1959). The Analysis of Variance. Wiley, ch. 4-5 (from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .cellfit import SS_TYPES, CellFit
from .cells import CellLayout
from .design import CellDesign, Term, cell_design, sequential_order, term_columns
from .ems import RESIDUAL, ExpectedMeanSquares, is_random
from .groupstats import GroupStats
from .spec import ModelSpec

__all__ = ["METHOD", "balanced_counts", "balanced_ems", "fit_balanced"]

METHOD = "complete balanced layout: sums of squares from marginal means"

#: What a complete layout's fit needs besides the cell means - the design, the marginal-mean keys, the
#: coefficient picks and (X'WX)^-1 - depends only on the layout's shape and the count per cell, which an
#: edit that drops or restores whole units revisits; kept for recent shapes (arrays read-only).
_PLANS: dict[tuple[object, ...], "_Plan"] = {}


@dataclass(frozen=True, eq=False)
class _TermPlan:
    term: Term
    marginals: tuple[tuple[float, frozenset[str]], ...]  # (sign, columns) of the inclusion-exclusion sum, in order
    coef_slice: slice
    pick: np.ndarray | None  # crossed term: a cell of each coefficient's level combination
    nested: tuple[np.ndarray, np.ndarray] | None  # nested term: X_t and (X_t'X_t)^-1


@dataclass(frozen=True, eq=False)
class _Plan:
    design: CellDesign
    terms: tuple[_TermPlan, ...]
    keys: dict[frozenset[str], tuple[np.ndarray, int, int]]  # columns -> (cell key, combinations, cells each)
    cov: np.ndarray
    df: dict[Term, int]
    sequence: tuple[Term, ...]
    leverage: np.ndarray  # every cell's hat value, p / N


def _read_only(a: np.ndarray) -> np.ndarray:
    a.flags.writeable = False
    return a


def _make_plan(terms: tuple[Term, ...], layout: CellLayout, spec: ModelSpec, counts: Mapping[str, int],
               n0: float) -> _Plan:
    nesting = spec.nesting
    columns, n_levels, cell_levels = layout.columns, layout.n_levels, layout.cell_levels
    pos = {c: i for i, c in enumerate(columns)}
    design = cell_design(terms, columns, n_levels, cell_levels, nesting)
    design.matrix.flags.writeable = False
    p = design.n_params
    cells = layout.n_cells
    n = n0 * cells
    cov = np.zeros((p, p))
    cov[0, 0] = 1.0 / n
    keys: dict[frozenset[str], tuple[np.ndarray, int, int]] = {}
    plans = []
    for t in terms:
        parents = term_columns(t, nesting) - set(t)
        marginals = []
        for k in range(len(t) + 1):
            sign = -1.0 if (len(t) - k) % 2 else 1.0
            for sub in combinations(t, k):
                cols = frozenset(parents | set(sub))
                marginals.append((sign, cols))
                if cols and cols not in keys:
                    key = np.zeros(cells, dtype=np.int64)
                    size = 1
                    for j in sorted(pos[c] for c in cols):
                        key = key * int(n_levels[j]) + cell_levels[:, j]
                        size *= int(n_levels[j])
                    keys[cols] = (_read_only(key), size, cells // math.prod(counts[c] for c in cols))
        sl = design.slices[t]
        pick = nested = None
        if not parents:  # crossed term: coefficients and (X'WX)^-1 in closed form
            shape = tuple(counts[c] for c in t)
            where = np.zeros(shape, dtype=np.int64)
            where[tuple(cell_levels[:, pos[c]] for c in t)] = np.arange(cells)
            pick = _read_only(where[tuple(slice(0, k - 1) for k in shape)].ravel())
            cov[sl, sl] = _kron_centering(shape) * (math.prod(shape) / n)
        else:  # nested: the term's own block of the (block-diagonal) normal equations
            x_t = design.matrix[:, sl]
            inv = np.linalg.inv(x_t.T @ x_t)
            nested = (x_t, _read_only(inv))
            cov[sl, sl] = inv / n0
        plans.append(_TermPlan(term=t, marginals=tuple(marginals), coef_slice=sl, pick=pick, nested=nested))
    return _Plan(design=design, terms=tuple(plans), keys=keys, cov=_read_only(cov),
                 df={t: design.slices[t].stop - design.slices[t].start for t in terms},
                 sequence=sequential_order(terms, spec.blocks), leverage=_read_only(np.full(cells, p / int(n))))


def _plan(terms: tuple[Term, ...], layout: CellLayout, spec: ModelSpec, counts: Mapping[str, int],
          n0: float) -> _Plan:
    key = (terms, layout.columns, layout.n_levels, layout.cell_levels.tobytes(), n0, spec.blocks,
           tuple(sorted((c, tuple(p)) for c, p in spec.nesting.items())))
    plan = _PLANS.get(key)
    if plan is None:
        plan = _make_plan(terms, layout, spec, counts, n0)
        if len(_PLANS) >= 32:
            _PLANS.clear()
        _PLANS[key] = plan
    return plan


def _kron_centering(shape: Sequence[int]) -> np.ndarray:
    """kron over k in ``shape`` of (I_(k-1) - J / k): (X'X)^-1 of a crossed term's sum-to-zero block, up to scale."""
    block = np.ones((1, 1))
    for k in shape:
        m = np.eye(k - 1) - 1.0 / k
        block = (block[:, None, :, None] * m[None, :, None, :]).reshape(block.shape[0] * (k - 1), -1)
    return block


def _per_parent(cell_levels: np.ndarray, inner: int, parents: Sequence[int], n_levels: Sequence[int]) -> int | None:
    """The number of levels of column ``inner`` under each combination of ``parents``, or None when it varies."""
    key = np.zeros(cell_levels.shape[0], dtype=np.int64)
    for j in parents:
        key = key * int(n_levels[j]) + cell_levels[:, j]
    pair = key * int(n_levels[inner]) + cell_levels[:, inner]
    distinct = np.unique(pair)
    per = np.bincount(distinct // int(n_levels[inner]))
    per = per[per > 0]
    if per.size == 0 or not bool(np.all(per == per[0])):
        return None
    return int(per[0])


def balanced_counts(
    layout: CellLayout, cell_n: np.ndarray, terms: Sequence[Term], nesting: Mapping[str, Sequence[str]]
) -> dict[str, int] | None:
    """Levels of each column (per parent combination for a nested one) when the closed form applies, else None.

    It applies when every cell holds the same count, the cells are every combination of
    the columns' levels, and every term's marginal terms are in the model (the condition
    of :func:`.ems.complete_balanced`).
    """
    if cell_n.size == 0 or not bool(np.all(cell_n == cell_n[0])):
        return None
    nested = tuple(sorted((c, tuple(p)) for c, p in nesting.items()))
    key = (layout.columns, layout.n_levels, layout.n_cells, tuple(terms), nested,
           layout.cell_levels.tobytes() if any(c in nesting for c in layout.columns) else None)
    if key not in _COUNTS:
        if len(_COUNTS) >= 64:
            _COUNTS.clear()
        _COUNTS[key] = _counts(layout, terms, nesting)
    counts = _COUNTS[key]
    return None if counts is None else dict(counts)


#: balanced_counts of recent layouts (a complete layout's answer depends on its shape and terms only).
_COUNTS: dict[tuple[object, ...], dict[str, int] | None] = {}


def _counts(layout: CellLayout, terms: Sequence[Term], nesting: Mapping[str, Sequence[str]]) -> dict[str, int] | None:
    columns, n_levels = layout.columns, layout.n_levels
    pos = {c: i for i, c in enumerate(columns)}
    counts: dict[str, int] = {}
    for c in columns:
        if c in nesting:
            per = _per_parent(layout.cell_levels, pos[c], [pos[p] for p in nesting[c]], n_levels)
            if per is None:
                return None
            counts[c] = per
        else:
            counts[c] = int(n_levels[pos[c]])
    if math.prod(counts[c] for c in columns) != layout.n_cells:
        return None
    present = {frozenset(t) for t in terms}
    for t in terms:
        if any(counts[c] < 2 for c in t):
            return None
        for k in range(1, len(t)):
            for sub in combinations(t, k):
                crosses_parent = any(p in sub for c in sub for p in nesting.get(c, ()))
                if not crosses_parent and frozenset(sub) not in present:
                    return None
    return counts


def fit_balanced(
    stats: GroupStats, layout: CellLayout, spec: ModelSpec, terms: Sequence[Term], counts: Mapping[str, int]
) -> CellFit | None:
    """The :class:`~.cellfit.CellFit` of ``terms`` on a complete balanced layout (see module docstring).

    ``counts`` come from :func:`balanced_counts`. Returns None when no residual df remain
    (the general engine then says what is wrong).
    """
    terms = tuple(terms)
    n_c = stats.n.astype(np.float64)
    n0 = float(n_c[0])
    n = int(stats.n.sum())
    plan = _plan(terms, layout, spec, counts, n0)
    p = plan.design.n_params
    if n - p < 1:
        return None
    mean = stats.mean
    center = float(np.dot(n_c, mean) / n)
    center += float(np.dot(n_c, mean - center) / n)
    zc = mean - center
    grand = float(np.add.reduce(zc) / zc.size)  # np.mean's arithmetic, without its wrapper

    means: dict[frozenset[str], np.ndarray] = {}

    def marginal(cols: frozenset[str]) -> np.ndarray | float:
        if not cols:
            return grand
        m = means.get(cols)
        if m is None:
            key, size, each = plan.keys[cols]
            m = means[cols] = np.bincount(key, weights=zc, minlength=size)[key] / each
        return m

    ss_t: dict[Term, float] = {}
    fitted = np.zeros(layout.n_cells)
    coef = np.zeros(p)
    coef[0] = center
    for tp in plan.terms:
        effect = np.zeros(layout.n_cells)
        for sign, cols in tp.marginals:  # effect + sign * m: x * 1.0 is x and a + (-b) is a - b, bit for bit
            (np.add if sign > 0 else np.subtract)(effect, marginal(cols), out=effect)
        ss_t[tp.term] = float(n0 * np.dot(effect, effect))
        fitted += effect
        if tp.pick is not None:
            coef[tp.coef_slice] = effect[tp.pick]
        elif tp.nested is not None:
            x_t, inv = tp.nested
            coef[tp.coef_slice] = inv @ (x_t.T @ effect)
    pure = float(np.sum(stats.m2))
    lof = float(n0 * np.sum((zc - fitted) ** 2))
    return CellFit(
        terms=terms,
        sequence=plan.sequence,
        design=plan.design,
        stats=stats,
        ss={k: dict(ss_t) for k in SS_TYPES},
        df={k: dict(plan.df) for k in SS_TYPES},
        n=n,
        ss_resid=pure + lof,
        df_resid=n - p,
        ss_pure_error=pure,
        df_pure_error=n - stats.k,
        ss_lack_of_fit=lof,
        df_lack_of_fit=stats.k - p,
        ss_total=pure + float(n0 * np.dot(zc, zc)),
        coef=coef,
        cov_unscaled=plan.cov,
        cell_fitted=center + fitted,
        cell_leverage=plan.leverage,
        bases={},
    )


#: E(MS) tables of recent complete layouts: they depend on the terms, the random columns and the counts only.
_EMS: dict[tuple[object, ...], ExpectedMeanSquares] = {}


def balanced_ems(fit: CellFit, spec: ModelSpec, counts: Mapping[str, int]) -> ExpectedMeanSquares:
    """E(MS) of a complete balanced layout by the exact counts: the coefficient of sigma^2_U in
    E(MS_T) is N / (level combinations of U) when U's columns include all of T's (else 0).

    The same table as :func:`.ems.expected_mean_squares` returns there, without forming
    the indicator matrices. Recent tables are kept (coefficients read-only): an edit that
    keeps the layout's shape gets the same value.
    """
    nesting = fit.design.nesting
    key = (fit.terms, tuple(sorted((c, tuple(p)) for c, p in (nesting or {}).items())), spec.random_columns,
           tuple(sorted(counts.items())), fit.n)
    ems = _EMS.get(key)
    if ems is None:
        ems = _balanced_ems(fit, spec, counts)
        ems.coefficients.flags.writeable = False
        if len(_EMS) >= 32:
            _EMS.clear()
        _EMS[key] = ems
    return ems


def _balanced_ems(fit: CellFit, spec: ModelSpec, counts: Mapping[str, int]) -> ExpectedMeanSquares:
    nesting = fit.design.nesting
    random_terms = sorted((t for t in fit.terms if is_random(t, spec)), key=lambda t: -len(term_columns(t, nesting)))
    n = float(fit.n)
    rows = [fit.name(t) for t in fit.terms] + [RESIDUAL]
    comps = [fit.name(u) for u in random_terms] + [RESIDUAL]
    coef = np.zeros((len(rows), len(comps)))
    coef[:, -1] = 1.0
    cols_u = [term_columns(u, nesting) for u in random_terms]
    combos = [math.prod(counts[c] for c in cu) for cu in cols_u]
    for i, t in enumerate(fit.terms):
        cols_t = term_columns(t, nesting)
        for j, cu in enumerate(cols_u):
            if cols_t <= cu:
                coef[i, j] = n / combos[j]
    return ExpectedMeanSquares(
        rows=tuple(rows), components=tuple(comps), coefficients=coef,
        fixed=tuple(not is_random(t, spec) for t in fit.terms) + (False,),
        random_rows=tuple(is_random(t, spec) for t in fit.terms) + (True,),
        method="balanced data: exact counts", ss_type="I",
    )
