"""Words for how the observed cells are laid out: complete, fractional, incomplete blocks.

A practitioner describes a layout by what was run: "a half fraction of the 2 x 2 x 2
factorial", "blocks of four, each holding half of the eight treatment combinations",
"every combination replicated twice". These notes say that from the cell layout alone,
so that the table's reader knows why some terms are missing or why the types agree.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 4 (balanced incomplete
block designs), ch. 7 (confounding in blocks) and ch. 8 (fractional factorials).
"""

from __future__ import annotations

import math

import numpy as np

from .cells import CellLayout
from .spec import ModelSpec

__all__ = ["layout_notes"]


def _fraction(observed: int, possible: int) -> str:
    ratio = possible / observed
    if abs(ratio - round(ratio)) < 1e-12 and round(ratio) > 1:
        return f"a 1/{int(round(ratio))} fraction"
    return f"{observed / possible:.0%} of them"


def _span(values: np.ndarray) -> str:
    lo, hi = int(values.min()), int(values.max())
    return str(lo) if lo == hi else f"{lo} to {hi}"


def layout_notes(layout: CellLayout, cell_n: np.ndarray, spec: ModelSpec) -> tuple[str, ...]:
    """Notes on replication, fractions and incomplete blocks of the observed cells."""
    nested = set(spec.nesting)
    factors = [f for f in spec.factors if f not in nested]
    if not factors or layout.n_cells == math.prod(layout.n_levels):
        return ()  # a complete layout: no fraction, every block holds every combination, every cell observed
    idx = [layout.columns.index(f) for f in factors]
    sizes = [layout.n_levels[i] for i in idx]
    possible = int(np.prod(sizes))
    key = np.zeros(layout.n_cells, dtype=np.int64)
    for i, k in zip(idx, sizes):  # mixed-radix code: sorts as the level combinations do
        key = key * int(k) + layout.cell_levels[:, i]
    treat, treat_code = np.unique(key, return_inverse=True)
    treat_code = treat_code.reshape(-1)
    observed = treat.shape[0]
    notes: list[str] = []
    names = ", ".join(factors)
    if len(factors) > 1 and observed < possible:
        notes.append(
            f"Fractional layout: {observed} of the {possible} combinations of {names} are observed "
            f"({_fraction(observed, possible)}); terms that the missing combinations would separate are aliased."
        )
    for b in spec.blocks:
        j = layout.columns.index(b)
        both = np.unique(layout.cell_levels[:, j] * observed + treat_code)
        pairs = np.stack(np.divmod(both, observed), axis=1)
        per_block = np.bincount(pairs[:, 0], minlength=layout.n_levels[j])
        per_treat = np.bincount(pairs[:, 1], minlength=observed)
        if int(per_block.max()) < observed:
            what = "treatment combinations" if len(factors) > 1 else f"levels of {factors[0]}"
            notes.append(
                f"Incomplete blocks: each level of {b!r} holds {_span(per_block)} of the {observed} {what}; "
                f"each appears in {_span(per_treat)} of the {layout.n_levels[j]} blocks."
            )
    counts = np.asarray(cell_n)
    if counts.size and int(counts.min()) == int(counts.max()) and layout.n_cells < int(np.prod(layout.n_levels)):
        notes.append(
            f"Every observed cell (combination of {', '.join(layout.columns)}) holds {int(counts.min())} "
            f"observation(s); {layout.n_cells} of the {int(np.prod(layout.n_levels))} possible cells are observed."
        )
    return tuple(notes)
