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

from collections.abc import Sequence
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .spec import ModelSpec

__all__ = ["CellDesign", "Term", "cell_design", "model_terms", "sum_contrasts", "term_name"]

Term = tuple[str, ...]

#: Joins factor names in an interaction's name, e.g. ``"machine × shift"``.
INTERACTION_SEP = " × "


def term_name(term: Term) -> str:
    """Display name of a term: the column name, or ``"A × B"`` for an interaction."""
    return INTERACTION_SEP.join(term)


def model_terms(spec: ModelSpec) -> tuple[Term, ...]:
    """Terms in display order: main effects, interactions by order, then blocks.

    ``spec.interactions=True`` crosses every subset of two or more treatment factors
    (the full factorial); blocks are additive main effects.
    """
    terms: list[Term] = [(f,) for f in spec.factors]
    if spec.interactions:
        for order in range(2, len(spec.factors) + 1):
            terms.extend(combinations(spec.factors, order))
    terms.extend((b,) for b in spec.blocks)
    return tuple(terms)


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


def _term_block(term: Term, cell_levels: np.ndarray, position: dict[str, int], contrasts: dict[str, np.ndarray]) -> np.ndarray:
    block = np.ones((cell_levels.shape[0], 1))
    for name in term:
        main = contrasts[name][cell_levels[:, position[name]]]
        block = (block[:, :, None] * main[:, None, :]).reshape(cell_levels.shape[0], -1)
    return block


def cell_design(
    terms: Sequence[Term],
    columns: Sequence[str],
    n_levels: Sequence[int],
    cell_levels: np.ndarray,
) -> CellDesign:
    """Sum-to-zero coded design matrix of the cells.

    Parameters
    ----------
    terms : model terms (see :func:`model_terms`).
    columns : the grouping columns, in the order of ``cell_levels``'s columns.
    n_levels : number of levels of each column.
    cell_levels : (cells x columns) integer level codes of each cell.
    """
    position = {c: i for i, c in enumerate(columns)}
    contrasts = {c: sum_contrasts(int(k)) for c, k in zip(columns, n_levels)}
    blocks = [np.ones((cell_levels.shape[0], 1))]
    slices: dict[Term, slice] = {}
    start = 1
    for t in terms:
        b = _term_block(t, cell_levels, position, contrasts)
        slices[t] = slice(start, start + b.shape[1])
        start += b.shape[1]
        blocks.append(b)
    return CellDesign(matrix=np.hstack(blocks), terms=tuple(terms), slices=slices, contrasts=contrasts)
