"""The least-squares engine for crossed fixed-effects designs, from cell summaries.

Given each cell's count n_c, mean and centred sum of squares, the fit of any model
whose terms are functions of the cell (main effects, interactions, additive blocks)
is a weighted least-squares fit of the cell means with weights n_c:

* residual SS = pooled within-cell SS (pure error) + sum_c n_c (mean_c - fitted_c)^2
  (lack of fit of the cell means under the model);
* the sum of squares of a term is the squared weighted distance between the fitted
  cell means of two nested models, computed from orthogonal (QR) projections of the
  centred, weighted cell means, never as a difference of large residual sums.

Types of sums of squares (Searle 1987, ch. 4; Langsrud 2003):

* Type I (sequential): each term adjusted for the terms entered before it;
* Type II: each term adjusted for every other term that does not contain it;
* Type III: each term adjusted for every other term, with sum-to-zero coding.

Nothing here needs the rows, so the same function serves summaries computed by a
database engine. Cost: O(cells x parameters^2) per model compared.

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data. Wiley.
Langsrud, O. (2003). ANOVA for unbalanced data: use Type II instead of Type III sums
of squares. Statistics and Computing 13, 163-167.
Golub, G. H. and Van Loan, C. F. (2013). Matrix Computations, 4th ed., sec. 5.3
(least squares by QR).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy import linalg

from .aliasing import AliasedTerm, find_aliased
from .design import (
    CellDesign,
    Term,
    cell_design,
    contains,
    model_terms,
    sequential_order,
    term_name,
)
from .errors import DesignError
from .groupstats import GroupStats
from .numerics import qr_rank
from .spec import ModelSpec

__all__ = ["SS_TYPES", "CellFit", "fit_cells", "model_comparisons"]

SS_TYPES = ("I", "II", "III")


@dataclass(frozen=True, kw_only=True, eq=False)
class CellFit:
    """A fitted cell-level model: partition for every SS type, coefficients, cell fits.

    Response quantities are on the shifted scale of ``stats`` (add ``stats.offset`` to
    means and fitted values for the original scale). ``cov_unscaled`` is (X'WX)^-1 of
    the sum-to-zero coded design; multiply by ``ms_resid`` for the covariance of
    ``coef``. ``cell_leverage[c]`` is x_c'(X'WX)^-1 x_c, the hat-matrix diagonal of each
    row of cell c.
    """

    terms: tuple[Term, ...]
    sequence: tuple[Term, ...]
    design: CellDesign
    stats: GroupStats
    ss: dict[str, dict[Term, float]]
    df: dict[str, dict[Term, int]]
    n: int
    ss_resid: float
    df_resid: int
    ss_pure_error: float
    df_pure_error: int
    ss_lack_of_fit: float
    df_lack_of_fit: int
    ss_total: float
    coef: np.ndarray
    cov_unscaled: np.ndarray
    cell_fitted: np.ndarray
    cell_leverage: np.ndarray
    aliased: tuple[AliasedTerm, ...] = ()
    #: Orthonormal bases of xw[:, cols] already computed, keyed by column indices (reused by ems.py).
    bases: dict[tuple[int, ...], np.ndarray] | None = None

    @property
    def ms_resid(self) -> float:
        return self.ss_resid / self.df_resid

    def name(self, term: Term) -> str:
        """Display name of a term of this fit (nested columns shown with their parents)."""
        return term_name(term, self.design.nesting)

    def term_names(self) -> tuple[str, ...]:
        return tuple(self.name(t) for t in self.terms)


def _projector(
    xw: np.ndarray, zw: np.ndarray, bases: dict[tuple[int, ...], np.ndarray]
) -> Callable[[np.ndarray], np.ndarray]:
    """Return ``fitted(cols)``: projection of ``zw`` on the span of ``xw[:, cols]`` (memoised).

    The orthonormal bases are kept in ``bases`` (keyed by the column indices), so that
    later quadratic forms on the same model comparisons (expected mean squares) reuse them.
    """
    cache: dict[tuple[int, ...], np.ndarray] = {}

    def fitted(cols: np.ndarray) -> np.ndarray:
        key = tuple(int(c) for c in cols)
        if key not in cache:
            if key not in bases:
                bases[key] = np.linalg.qr(xw[:, cols])[0]
            q = bases[key]
            cache[key] = q @ (q.T @ zw)
        return cache[key]

    return fitted


def _orthogonal_terms(xw: np.ndarray, design: CellDesign, terms: Sequence[Term]) -> bool:
    """True when, in the weighted cell space, each term's columns are orthogonal to the intercept
    and to every other term's columns (then Types I, II and III coincide)."""
    g = xw.T @ xw
    scale = float(np.max(np.abs(np.diag(g)))) if g.size else 1.0
    owner = np.zeros(g.shape[0], dtype=np.int64)
    for i, t in enumerate(terms, start=1):
        owner[design.slices[t]] = i
    off = owner[:, None] != owner[None, :]
    return bool(np.all(np.abs(g[off]) <= 1e-10 * scale))


def model_comparisons(
    terms: Sequence[Term], sequence: Sequence[Term], nesting: Mapping[str, Sequence[str]] | None = None
) -> dict[str, dict[Term, tuple[tuple[Term, ...], tuple[Term, ...]]]]:
    """For each SS type and term, the (larger, smaller) model whose difference is the term's SS.

    Type I: the terms entered up to and including it vs those before it; Type II: every
    term not containing it, with and without it; Type III: all terms vs all but it.
    """
    out: dict[str, dict[Term, tuple[tuple[Term, ...], tuple[Term, ...]]]] = {k: {} for k in SS_TYPES}
    for i, t in enumerate(sequence):
        out["I"][t] = (tuple(sequence[: i + 1]), tuple(sequence[:i]))
    for t in terms:
        base = tuple(u for u in terms if u != t and not contains(u, t, nesting))
        out["II"][t] = (base + (t,), base)
        out["III"][t] = (tuple(terms), tuple(u for u in terms if u != t))
    return out


def fit_cells(
    stats: GroupStats,
    cell_levels: np.ndarray,
    columns: Sequence[str],
    n_levels: Sequence[int],
    spec: ModelSpec,
    *,
    terms: Sequence[Term] | None = None,
) -> CellFit:
    """Fit ``spec``'s model to cell summaries and partition the sum of squares.

    Parameters
    ----------
    stats : per-cell n, mean (shifted scale) and centred SS; every cell non-empty.
    cell_levels : (cells x columns) level codes of each cell.
    columns : the grouping columns (treatment factors, then blocks).
    n_levels : number of levels of each column.
    spec : the model; ``terms`` overrides the terms it implies.

    Terms fully aliased with earlier terms (confounded with blocks, aliased in a
    fraction) are left out and listed in ``aliased`` (:mod:`.aliasing`).

    Raises
    ------
    DesignError
        When a term is partly aliased, a term has no degrees of freedom, or no residual
        degrees of freedom remain.
    """
    terms = tuple(terms) if terms is not None else model_terms(spec)
    nesting = spec.nesting
    design = cell_design(terms, columns, n_levels, cell_levels, nesting)
    empty = [term_name(t, nesting) for t in terms if design.slices[t].stop == design.slices[t].start]
    if empty:
        raise DesignError(
            f"{', '.join(empty)} has no degrees of freedom in this view (one level under every combination of the "
            "columns it is nested in); restore rows or leave it out of the model"
        )
    x = design.matrix
    n_c = stats.n.astype(np.float64)
    n = int(stats.n.sum())
    mean = stats.mean
    center = float(np.dot(n_c, mean) / n)
    # The weighted mean of the shifted cell means, made exact by one correction step.
    center += float(np.dot(n_c, mean - center) / n)
    w = np.sqrt(n_c)
    zc = mean - center
    zw = w * zc
    xw = w[:, None] * x

    q, r, piv = linalg.qr(xw, mode="economic", pivoting=True)
    rank = qr_rank(np.diag(r), xw.shape)
    p = x.shape[1]
    if rank < p:
        kept, aliased = find_aliased(xw, design, sequential_order(terms, spec.blocks), spec.blocks, nesting)
        if not aliased:  # pragma: no cover - rank lost without a single aliased term
            raise DesignError(
                f"the model terms {[term_name(t, nesting) for t in terms]} cannot all be estimated from the "
                f"{stats.k} observed cells (only {rank} of {p} parameters are estimable); "
                "fit the additive model (interactions=False), merge sparse levels, or restore rows"
            )
        fit = fit_cells(stats, cell_levels, columns, n_levels, spec, terms=[t for t in terms if t in kept])
        return replace(fit, aliased=aliased + fit.aliased)
    df_resid = n - p
    if df_resid < 1:
        raise DesignError(
            f"no residual degrees of freedom: {n} observations and {p} parameters; "
            "with one observation per cell fit the additive model (interactions=False), "
            "or restore rows"
        )

    f_full = q @ (q.T @ zw)  # the pivoted QR spans the full model
    lof = float(np.sum((zw - f_full) ** 2))
    pure = float(np.sum(stats.m2))
    ss_between_cells = float(np.dot(n_c, zc * zc))

    ss: dict[str, dict[Term, float]] = {t: {} for t in SS_TYPES}
    df: dict[str, dict[Term, int]] = {t: {} for t in SS_TYPES}
    ncols = {t: design.slices[t].stop - design.slices[t].start for t in terms}

    sequence = sequential_order(terms, spec.blocks)
    bases: dict[tuple[int, ...], np.ndarray] = {}
    if _orthogonal_terms(xw, design, terms):
        # Every term's columns are orthogonal to the intercept and to every other term's (balanced
        # data): each SS is the squared length of the data's projection on its own columns, and
        # the three types coincide.
        for t in terms:
            qt = np.linalg.qr(xw[:, design.slices[t]])[0]
            value = float(np.sum((qt.T @ zw) ** 2))
            for kind in SS_TYPES:
                ss[kind][t] = value
                df[kind][t] = ncols[t]
    else:
        fitted = _projector(xw, zw, bases)
        for kind, pairs in model_comparisons(terms, sequence, nesting).items():
            for t, (big_terms, small_terms) in pairs.items():
                big = fitted(design.columns_of(big_terms))
                small = fitted(design.columns_of(small_terms))
                ss[kind][t] = float(np.sum((big - small) ** 2))
                df[kind][t] = ncols[t]

    rinv = np.linalg.solve(r, np.eye(p))  # R is small and well conditioned (pivoted)
    coef_p = rinv @ (q.T @ zw)
    coef = np.empty(p)
    coef[piv] = coef_p
    coef[0] += center
    cov = np.empty((p, p))
    cov_p = rinv @ rinv.T
    cov[np.ix_(piv, piv)] = cov_p
    leverage = np.sum((x[:, piv] @ rinv) ** 2, axis=1)
    cell_fitted = center + f_full / w
    return CellFit(
        terms=terms,
        sequence=sequence,
        design=design,
        stats=stats,
        ss=ss,
        df=df,
        n=n,
        ss_resid=pure + lof,
        df_resid=df_resid,
        ss_pure_error=pure,
        df_pure_error=n - stats.k,
        ss_lack_of_fit=lof,
        df_lack_of_fit=stats.k - p,
        ss_total=pure + ss_between_cells,
        coef=coef,
        cov_unscaled=cov,
        cell_fitted=cell_fitted,
        cell_leverage=leverage,
        bases=bases,
    )
