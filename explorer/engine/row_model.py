"""Least squares on the rows: a model matrix per kept row, for models the cells cannot carry.

The factorial engine fits cell means (:mod:`.cellfit`), which is exact whenever every
column of the model is a function of the cell. A covariate (a numeric column measured
on each row) is not, and neither are the per-row weights of a heteroscedasticity-
consistent covariance. This module builds the row-level model matrix - the cell design
of :mod:`.design` expanded to the rows, then one column per covariate (centred at its
mean over the kept rows) - and fits it by QR:

* each term's sum of squares (types I, II and III, as in :mod:`.cellfit`) is the
  squared distance between the fitted values of two nested models, from orthogonal
  projections, never a difference of two residual sums;
* coefficients, their unscaled covariance (X'X)^-1, fitted values, residuals and the
  hat-matrix diagonal.

Cost: O(n p^2) for the QR of each model compared (n rows, p parameters).

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data. Wiley (sums of squares of
nested models; covariance analysis, ch. 10).
Golub, G. H. and Van Loan, C. F. (2013). Matrix Computations, 4th ed., sec. 5.3.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import linalg

from .cellfit import SS_TYPES, model_comparisons
from .design import CellDesign, Term, term_name
from .errors import DesignError
from .numerics import qr_rank

__all__ = ["RowDesign", "RowFit", "expand_cells", "fit_rows", "hc_meat", "design_of"]


@dataclass(frozen=True, kw_only=True, eq=False)
class RowDesign:
    """Model matrix of the kept rows: intercept, each term's columns, then covariates.

    ``slices[term]`` locates a term's columns; covariate terms are one-column terms named
    by the covariate (``("pre_thickness",)``) and interactions of a factor with a covariate
    are ``("nozzle", "pre_thickness")``. ``covariate_means`` are the kept-row means the
    covariate columns were centred at. ``cell`` is each row's cell code.
    """

    matrix: np.ndarray
    terms: tuple[Term, ...]
    slices: dict[Term, slice]
    cell: np.ndarray
    covariates: tuple[str, ...] = ()
    covariate_means: tuple[float, ...] = ()
    nesting: Mapping[str, tuple[str, ...]] | None = None

    @property
    def n(self) -> int:
        return int(self.matrix.shape[0])

    @property
    def n_params(self) -> int:
        return int(self.matrix.shape[1])

    def columns_of(self, terms: Sequence[Term]) -> np.ndarray:
        """Column indices of the intercept plus the given terms."""
        idx = [0]
        for t in terms:
            s = self.slices[t]
            idx.extend(range(s.start, s.stop))
        return np.asarray(idx, dtype=np.int64)

    def name(self, term: Term) -> str:
        return term_name(term, self.nesting)


def expand_cells(
    cells: CellDesign,
    row_cell: np.ndarray,
    covariates: Mapping[str, np.ndarray] | None = None,
    *,
    slopes_by: Sequence[Term] = (),
) -> RowDesign:
    """The cell design repeated for each row, with centred covariate columns appended.

    ``slopes_by`` lists treatment terms whose interaction with every covariate is added
    (separate slopes per level or cell: the model behind the homogeneity-of-slopes check).
    """
    row_cell = np.asarray(row_cell, dtype=np.int64)
    x = cells.matrix[row_cell]
    blocks = [x]
    slices = dict(cells.slices)
    terms = list(cells.terms)
    start = x.shape[1]
    names: list[str] = []
    means: list[float] = []
    for name, values in (covariates or {}).items():
        v = np.asarray(values, dtype=np.float64)
        m = float(np.mean(v))
        m += float(np.mean(v - m))  # one correction step: the centred column sums to zero to rounding
        zc = (v - m)[:, None]
        names.append(name)
        means.append(m)
        slices[(name,)] = slice(start, start + 1)
        terms.append((name,))
        blocks.append(zc)
        start += 1
        for t in slopes_by:
            s = cells.slices[t]
            b = x[:, s] * zc
            term = tuple(t) + (name,)
            slices[term] = slice(start, start + b.shape[1])
            terms.append(term)
            blocks.append(b)
            start += b.shape[1]
    return RowDesign(matrix=np.hstack(blocks), terms=tuple(terms), slices=slices, cell=row_cell,
                     covariates=tuple(names), covariate_means=tuple(means), nesting=cells.nesting)


@dataclass(frozen=True, kw_only=True, eq=False)
class RowFit:
    """A least-squares fit of the rows (response on the shifted scale of ``y``).

    ``ss[type][term]`` and ``df[type][term]`` are each term's sum of squares and df;
    ``cov_unscaled`` is (X'X)^-1 (times the residual mean square: the coefficients'
    covariance); ``leverage`` the hat-matrix diagonal.
    """

    design: RowDesign
    terms: tuple[Term, ...]
    sequence: tuple[Term, ...]
    coef: np.ndarray
    cov_unscaled: np.ndarray
    fitted: np.ndarray
    residuals: np.ndarray
    leverage: np.ndarray
    ss: dict[str, dict[Term, float]]
    df: dict[str, dict[Term, int]]
    ss_resid: float
    df_resid: int
    ss_total: float
    center: float

    @property
    def n(self) -> int:
        return self.design.n

    @property
    def ms_resid(self) -> float:
        return self.ss_resid / self.df_resid


def _rank(r: np.ndarray, shape: tuple[int, int]) -> int:
    return qr_rank(np.diag(r), shape)


def fit_rows(
    design: RowDesign,
    y: np.ndarray,
    *,
    sequence: Sequence[Term] | None = None,
    types: Sequence[str] = SS_TYPES,
) -> RowFit:
    """Fit ``y`` (shifted scale) on ``design`` and partition its sum of squares.

    ``sequence`` is the order of entry for type I (default: the design's term order).
    Raises :class:`DesignError` when the model matrix is not of full rank (a covariate
    constant within the cells, or a term the kept rows cannot separate) or no residual
    df remain.
    """
    # Columns scaled by powers of two to a largest magnitude in [0.5, 1) (exact): the rank decision
    # and the projections no longer depend on a covariate's unit (a covariate near 1e300 or 1e-300
    # would otherwise swamp, or vanish beside, the 0/1 columns). Spans, so sums of squares, are unchanged.
    raw = design.matrix
    peak = np.max(np.abs(raw), axis=0) if raw.size else np.ones(raw.shape[1])
    d = np.ldexp(1.0, -np.frexp(np.where(peak > 0, peak, 1.0))[1])
    x = raw * d
    n, p = x.shape
    y = np.asarray(y, dtype=np.float64)
    center = float(np.mean(y))
    center += float(np.mean(y - center))
    z = y - center
    q, r, piv = linalg.qr(x, mode="economic", pivoting=True)
    rank = _rank(r, x.shape)
    if rank < p:
        raise DesignError(
            f"the model cannot be estimated from the kept rows: only {rank} of its {p} parameters are estimable "
            f"(terms {[design.name(t) for t in design.terms]}); a covariate may be constant within the levels or "
            "equal to a combination of them. Leave the covariate out or restore rows"
        )
    df_resid = n - p
    if df_resid < 1:
        raise DesignError(f"no residual degrees of freedom: {n} observations and {p} parameters; restore rows")
    terms = design.terms
    seq = tuple(sequence) if sequence is not None else terms
    cache: dict[tuple[int, ...], np.ndarray] = {}

    def fitted_of(cols: np.ndarray) -> np.ndarray:
        key = tuple(int(c) for c in cols)
        if key not in cache:
            qq, _ = np.linalg.qr(x[:, cols])
            cache[key] = qq @ (qq.T @ z)
        return cache[key]

    f_full = q @ (q.T @ z)
    cache[tuple(range(p))] = f_full
    resid = z - f_full
    ss: dict[str, dict[Term, float]] = {k: {} for k in SS_TYPES}
    df: dict[str, dict[Term, int]] = {k: {} for k in SS_TYPES}
    ncols = {t: design.slices[t].stop - design.slices[t].start for t in terms}
    for kind, pairs in model_comparisons(terms, seq, design.nesting).items():
        if kind not in types:
            continue
        for t, (big_terms, small_terms) in pairs.items():
            big = fitted_of(design.columns_of(big_terms))
            small = fitted_of(design.columns_of(small_terms))
            ss[kind][t] = float(np.sum((big - small) ** 2))
            df[kind][t] = ncols[t]
    rinv = linalg.solve_triangular(r, np.eye(p))
    coef_p = rinv @ (q.T @ z)
    coef = np.empty(p)
    coef[piv] = coef_p
    coef = coef * d  # back to the design's own columns
    coef[0] += center
    cov = np.empty((p, p))
    cov[np.ix_(piv, piv)] = rinv @ rinv.T
    cov = cov * d[:, None] * d[None, :]
    leverage = np.sum(q * q, axis=1)
    return RowFit(
        design=design, terms=terms, sequence=seq, coef=coef, cov_unscaled=cov, fitted=center + f_full,
        residuals=resid, leverage=leverage, ss=ss, df=df, ss_resid=float(np.sum(resid * resid)),
        df_resid=df_resid, ss_total=float(np.sum(z * z)), center=center,
    )


def hc_meat(fit: RowFit, kind: str = "hc3") -> np.ndarray:
    """Heteroscedasticity-consistent covariance of the coefficients (MacKinnon and White 1985).

    ``(X'X)^-1 X' diag(w_i e_i^2) X (X'X)^-1`` with w_i = 1 (HC0) or 1/(1 - h_i)^2 (HC3).
    Rows with leverage one have no HC3 weight: they are refused by the caller.
    """
    x = fit.design.matrix
    e2 = fit.residuals**2
    if kind == "hc3":
        e2 = e2 / (1.0 - fit.leverage) ** 2
    elif kind != "hc0":
        raise ValueError(f"kind must be 'hc0' or 'hc3', not {kind!r}")
    bread = fit.cov_unscaled
    meat = x.T @ (x * e2[:, None])
    cov: np.ndarray = bread @ meat @ bread
    return cov


def design_of(results: object, covariates: Mapping[str, np.ndarray] | None = None, *,
              slopes_by: Sequence[Term] = ()) -> RowDesign:
    """The row-level model matrix of the fixed-effects model behind ``results`` (kept rows in ``fit`` order).

    One-way results use their levels; multi-factor results their observed cells and the
    fitted terms (aliased terms left out). ``covariates`` are per-row values in the same
    order as ``results.fit``.
    """
    from .design import cell_design, fitted_terms

    res = results
    spec = res.spec  # type: ignore[attr-defined]
    group = np.asarray(res.fit.group, dtype=np.int64)  # type: ignore[attr-defined]
    cells = res.cells  # type: ignore[attr-defined]
    if cells is None or cells.cell_levels is None:
        k = res.groups.k  # type: ignore[attr-defined]
        f = spec.factors[0]
        cd = cell_design([(f,)], [f], [k], np.arange(k, dtype=np.int64)[:, None])
    else:
        aliased = {a.term for a in getattr(res, "aliased", ())}
        terms = [t for t in fitted_terms(spec, np.asarray(cells.n)) if t not in aliased]
        cd = cell_design(terms, cells.columns, [len(lv) for lv in cells.levels], cells.cell_levels, spec.nesting)
    return expand_cells(cd, group, covariates, slopes_by=slopes_by)
