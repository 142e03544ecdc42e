"""Model terms and cell-level design matrices for crossed fixed-effects designs.

A model is a list of terms; a term is a tuple of column names (one name for a main
effect or a block, several for an interaction). The design matrix is built once per
*cell* (one row per observed combination of levels), with sum-to-zero (deviation)
coding: a factor with L levels gets L - 1 columns, level j < L - 1 coded as the unit
vector e_j and the last level as -1 in every column; interaction columns are the
products of the main-effect columns of their factors.

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data, ch. 4 (cell-means and
over-parameterised models, sum-to-zero restrictions).
Chambers, J. M. and Hastie, T. J. (1992). Statistical Models in S, ch. 2 (terms,
contrasts and model matrices).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations

import numpy as np

from .spec import ModelSpec

__all__ = [
    "CellDesign", "Term", "cell_design", "contains", "fitted_terms", "model_terms", "sum_contrasts", "term_columns",
    "term_name",
    "sequential_order",
]

Term = tuple[str, ...]

#: Joins factor names in an interaction's name, e.g. ``"machine × shift"``.
INTERACTION_SEP = " × "


def term_name(term: Term, nesting: Mapping[str, Sequence[str]] | None = None) -> str:
    """Display name of a term: ``"A"``, ``"A × B"``, or ``"lot (within supplier)"`` for a nested column."""
    if not nesting:
        return INTERACTION_SEP.join(term)
    parts = []
    for c in term:
        parents = nesting.get(c)
        parts.append(f"{c} (within {', '.join(parents)})" if parents else c)
    return INTERACTION_SEP.join(parts)


def term_columns(term: Term, nesting: Mapping[str, Sequence[str]] | None = None) -> frozenset[str]:
    """Every column a term depends on: its own and, for nested columns, their parents (recursively)."""
    out = set(term)
    stack = list(term)
    while stack and nesting:
        c = stack.pop()
        for p in nesting.get(c, ()):
            if p not in out:
                out.add(p)
                stack.append(p)
    return frozenset(out)


def contains(big: Term, small: Term, nesting: Mapping[str, Sequence[str]] | None = None) -> bool:
    """True when term ``big`` contains every column of ``small`` and more (nesting parents included)."""
    return term_columns(small, nesting) < term_columns(big, nesting)


def _crosses_parent(combo: Sequence[str], nesting: Mapping[str, Sequence[str]]) -> bool:
    return any(p in combo for c in combo for p in term_columns((c,), nesting) - {c})


def model_terms(spec: ModelSpec) -> tuple[Term, ...]:
    """Terms in display order (a specification's terms are kept: every edit asks again).

    Without a subject: treatment terms (``spec.terms``, or main effects and the
    interactions up to ``spec.max_order`` - all orders when ``spec.interactions``, none
    when not), then blocks. A nested column never crosses its own parents.

    With a subject (repeated measures): terms grouped by stratum - for each set of
    within factors (none first), the fixed terms whose within part is that set, then
    the subject term crossed with it (``subject (within between factors) × time``).
    """
    return _model_terms(spec)


@lru_cache(maxsize=64)
def _model_terms(spec: ModelSpec) -> tuple[Term, ...]:
    nesting = spec.nesting
    if spec.terms is not None:
        treatment = list(spec.terms)
    else:
        order = spec.max_order if spec.max_order is not None else (len(spec.factors) if spec.interactions else 1)
        treatment = [(f,) for f in spec.factors]
        for k in range(2, min(order, len(spec.factors)) + 1):
            treatment.extend(c for c in combinations(spec.factors, k) if not _crosses_parent(c, nesting))
    treatment += [(b,) for b in spec.blocks if (b,) not in treatment]
    if spec.subject is None:
        return tuple(treatment)
    within = spec.within
    out: list[Term] = []
    for k in range(0, len(within) + 1):
        for ws in combinations(within, k):
            out.extend(t for t in treatment if tuple(c for c in t if c in within) == ws and t not in out)
            out.append((spec.subject, *ws))
    out.extend(t for t in treatment if t not in out)
    return tuple(out)


def fitted_terms(spec: ModelSpec, cell_n: np.ndarray) -> tuple[Term, ...]:
    """The terms fitted on cells with counts ``cell_n``: :func:`model_terms`, less the
    subject-by-within term that coincides with the residual when every cell (combination
    of all columns) holds one observation (the usual repeated-measures layout)."""
    terms = model_terms(spec)
    if spec.subject is not None and cell_n.size and bool(np.all(cell_n == 1)):
        top = (spec.subject, *spec.within)
        terms = tuple(t for t in terms if t != top)
    return terms


def sequential_order(terms: Sequence[Term], blocks: Sequence[str]) -> tuple[Term, ...]:
    """Order of entry for sequential (Type I) sums of squares: blocks, then the rest.

    Blocks enter first so that treatments are adjusted for blocks, as in the usual
    analysis of a randomized block design (Montgomery, Design and Analysis of
    Experiments, ch. 4).
    """
    first = [t for t in terms if len(t) == 1 and t[0] in blocks]
    return tuple(first + [t for t in terms if t not in first])


def sum_contrasts(k: int) -> np.ndarray:
    """The k x (k - 1) sum-to-zero contrast matrix (rows are levels)."""
    c = np.zeros((k, max(k - 1, 0)))
    if k > 1:
        c[: k - 1] = np.eye(k - 1)
        c[k - 1] = -1.0
    return c


@dataclass(frozen=True, kw_only=True, eq=False)
class CellDesign:
    """Design matrix of the cells: intercept first, then each term's columns.

    ``slices[term]`` locates a term's columns in ``matrix``; ``contrasts[column]`` is
    the contrast matrix used for that column's levels.
    """

    matrix: np.ndarray
    terms: tuple[Term, ...]
    slices: dict[Term, slice]
    contrasts: dict[str, np.ndarray]
    nesting: Mapping[str, tuple[str, ...]] | None = None

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


def _nested_block(cell_levels: np.ndarray, inner: int, parents: Sequence[int]) -> np.ndarray:
    """Sum-to-zero contrasts among the levels of a nested column within each parent combination.

    For each observed combination of the parents' levels, the inner levels observed
    under it get a sum-to-zero contrast matrix (L_p - 1 columns); the blocks are placed
    side by side, so the column's df is the sum of L_p - 1 over parent combinations.
    """
    parent_key = np.unique(cell_levels[:, list(parents)], axis=0, return_inverse=True)[1].reshape(-1)
    blocks = []
    for p in range(int(parent_key.max()) + 1 if parent_key.size else 0):
        rows = parent_key == p
        inner_levels, code = np.unique(cell_levels[rows, inner], return_inverse=True)
        k = inner_levels.size
        if k < 2:
            continue
        block = np.zeros((cell_levels.shape[0], k - 1))
        block[rows] = sum_contrasts(k)[code.reshape(-1)]
        blocks.append(block)
    return np.hstack(blocks) if blocks else np.zeros((cell_levels.shape[0], 0))


def _term_block(term: Term, units: dict[str, np.ndarray], n_cells: int) -> np.ndarray:
    block = np.ones((n_cells, 1))
    for name in term:
        main = units[name]
        block = (block[:, :, None] * main[:, None, :]).reshape(block.shape[0], -1)
    return block


def cell_design(
    terms: Sequence[Term],
    columns: Sequence[str],
    n_levels: Sequence[int],
    cell_levels: np.ndarray,
    nesting: Mapping[str, Sequence[str]] | None = None,
) -> CellDesign:
    """Sum-to-zero coded design matrix of the cells.

    Parameters
    ----------
    terms : model terms (see :func:`model_terms`).
    columns : the grouping columns, in the order of ``cell_levels``'s columns.
    n_levels : number of levels of each column.
    cell_levels : (cells x columns) integer level codes of each cell.
    nesting : nested column -> the columns it is nested in; such a column is coded by
        contrasts among its levels within each combination of its parents' levels.
    """
    position = {c: i for i, c in enumerate(columns)}
    contrasts = {c: sum_contrasts(int(k)) for c, k in zip(columns, n_levels)}
    nest = {c: tuple(p) for c, p in (nesting or {}).items() if c in position}
    used = {c for t in terms for c in t}
    units = {
        c: (_nested_block(cell_levels, position[c], [position[p] for p in nest[c]]) if c in nest
            else contrasts[c][cell_levels[:, position[c]]])
        for c in used
    }
    blocks = [np.ones((cell_levels.shape[0], 1))]
    slices: dict[Term, slice] = {}
    start = 1
    for t in terms:
        b = _term_block(t, units, cell_levels.shape[0])
        slices[t] = slice(start, start + b.shape[1])
        start += b.shape[1]
        blocks.append(b)
    return CellDesign(matrix=np.hstack(blocks), terms=tuple(terms), slices=slices, contrasts=contrasts,
                      nesting=nest or None)
