"""Terms that the observed cells cannot separate from others: confounded and aliased terms.

In a design with incomplete blocks or a fractional replicate, some contrasts of a term
coincide with contrasts of earlier terms: the three-factor interaction of a 2 x 2 x 2
factorial laid out in blocks of four is the difference between two sets of blocks
(confounded with blocks); in a half fraction ``C`` and ``A x B`` are the same contrast
(aliased). Standard practice fits every estimable term and names the rest.

Terms are entered in the sequential order (blocks, then main effects, then
interactions by order); a term that adds no rank is fully aliased with the earlier
terms its columns are combinations of, is named and left out. A term that adds some
but not all of its degrees of freedom (partial aliasing) is refused, saying how many
df remain, because its adjusted sums of squares then depend on the coding.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 7 (blocking and confounding
in the 2^k factorial) and ch. 8 (fractional factorials, alias structure).
Yates, F. (1937). The Design and Analysis of Factorial Experiments. Imperial Bureau of
Soil Science (confounding with blocks).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import linalg

from .design import CellDesign, Term, term_name
from .errors import DesignError
from .numerics import qr_rank

__all__ = ["AliasedTerm", "find_aliased"]


@dataclass(frozen=True, kw_only=True)
class AliasedTerm:
    """A term left out because the cells cannot separate it from earlier terms.

    ``aliased_with`` names the earlier terms whose contrasts reproduce it;
    ``with_blocks`` is True when they are all blocks (the term is confounded with blocks).
    """

    term: Term
    name: str
    df: int
    aliased_with: tuple[str, ...]
    with_blocks: bool

    def sentence(self) -> str:
        others = " and ".join(self.aliased_with)
        if self.with_blocks:
            return (f"{self.name} is confounded with {others}: its {self.df} contrast(s) are differences between "
                    f"{others} totals, so it cannot be estimated and is left out of the model.")
        return (f"{self.name} is aliased with {others} (the same contrast(s) of the observed cells), so it cannot "
                "be estimated apart from it and is left out of the model.")


def _rank(a: np.ndarray, scale: float) -> int:
    if a.shape[1] == 0:
        return 0
    r = linalg.qr(a, mode="r", pivoting=True)[0]
    return qr_rank(np.diag(r), a.shape, reference=scale)


def find_aliased(
    xw: np.ndarray,
    design: CellDesign,
    sequence: Sequence[Term],
    blocks: Sequence[str],
    nesting: Mapping[str, Sequence[str]] | None = None,
) -> tuple[tuple[Term, ...], tuple[AliasedTerm, ...]]:
    """Split ``sequence`` into the estimable terms and the fully aliased ones.

    ``xw`` is the (weighted) cell design matrix. Raises :class:`DesignError` for a term
    that is only partly aliased, naming the terms involved and the df that remain.
    """
    scale = float(np.max(np.abs(xw))) if xw.size else 1.0
    kept: list[Term] = []
    aliased: list[AliasedTerm] = []
    cols = [0]
    rank = 1
    for t in sequence:
        s = design.slices[t]
        own = list(range(s.start, s.stop))
        new_rank = _rank(xw[:, cols + own], scale)
        gain = new_rank - rank
        name = term_name(t, nesting)
        if gain == len(own):
            kept.append(t)
            cols += own
            rank = new_rank
            continue
        others = _aliased_with(xw, design, kept, cols, own, nesting)
        if gain > 0:
            raise DesignError(
                f"{name} is partly aliased with {' and '.join(others)}: only {gain} of its {len(own)} degrees of "
                "freedom can be estimated apart from them, and its adjusted sum of squares would depend on the "
                "coding. Leave it out (terms=[...] or max_order=), merge sparse levels, or restore rows"
            )
        on_blocks = bool(others) and all(o in blocks for o in others)
        aliased.append(AliasedTerm(term=t, name=name, df=len(own), aliased_with=tuple(others), with_blocks=on_blocks))
    return tuple(kept), tuple(aliased)


def _aliased_with(
    xw: np.ndarray, design: CellDesign, kept: list[Term], cols: list[int], own: list[int],
    nesting: Mapping[str, Sequence[str]] | None,
) -> list[str]:
    """Earlier terms with a non-zero share in reproducing the term's columns (unique: the kept columns have full rank)."""
    coef = np.linalg.lstsq(xw[:, cols], xw[:, own], rcond=None)[0]
    size = float(np.max(np.abs(coef))) if coef.size else 0.0
    out = []
    for t in kept:
        s = design.slices[t]
        idx = [cols.index(c) for c in range(s.start, s.stop)]
        if size and float(np.max(np.abs(coef[idx]))) > 1e-8 * size:
            out.append(term_name(t, nesting))
    return out or ["the mean"]
