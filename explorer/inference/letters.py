"""Compact letter display from any table of pairwise comparisons (Piepho 2004).

Levels that share a letter are not declared different by the table's method at the
chosen alpha. Built with Piepho's insert-and-absorb algorithm: start with one column
holding every level; for each significant pair split every column that holds both
into two (one without each member); then drop columns contained in another. Insert and
absorb can leave redundant letters, so Piepho's final sweep follows: a level loses a
letter when every level it shares that letter with also shares another letter with it
(and it keeps at least one), so no letter can be removed without changing what the
display says. Levels are listed from the largest estimate down, and letters are handed
out in that order.
Pairs the table did not test (e.g. two treatments in a Dunnett table) count as not
different, and the result says so.

Reference
---------
Piepho, H.-P. (2004). An algorithm for a letter-based representation of all-pairwise
comparisons. J. Comput. Graph. Stat. 13(2), 456-466.
"""

from __future__ import annotations

import string
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.errors import ExplorerError
from ..engine.tables import html_table
from ..formatting import result_frame
from ..rendering import html_repr
from .comparisons import PairwiseTable

__all__ = ["MAX_LEVELS", "MAX_WORK", "LetterDisplay", "compact_letters"]

#: Letters are built for at most this many levels (beyond it a display cannot be read).
MAX_LEVELS = 150
#: Column comparisons the insert-absorb steps may make before the display is given up (bounds the time).
MAX_WORK = 1e7

_ALPHABET = string.ascii_lowercase + string.ascii_uppercase


def _letter(i: int) -> str:
    out = ""
    i += 1
    while i > 0:
        i, r = divmod(i - 1, len(_ALPHABET))
        out = _ALPHABET[r] + out
    return out


@dataclass(frozen=True, kw_only=True, eq=False)
class LetterDisplay:
    """Levels (largest estimate first), their estimates and letters; the method behind them."""

    labels: tuple[str, ...]
    estimates: np.ndarray
    letters: tuple[str, ...]
    method: str
    alpha: float
    notes: tuple[str, ...] = field(default=())

    def letter_of(self, level: str) -> str:
        try:
            return self.letters[self.labels.index(level)]
        except ValueError:
            raise ExplorerError(f"no level {level!r}; levels are {list(self.labels)}") from None

    def to_frame(self) -> pd.DataFrame:
        return result_frame({"level": list(self.labels), "estimate": self.estimates, "letters": list(self.letters)})

    @html_repr
    def _repr_html_(self) -> str:
        cap = f"Letters (same letter: not declared different by {self.method} at alpha {self.alpha:g})"
        return html_table(self.to_frame(), cap, self.notes)


def _sweep(columns: list[frozenset[str]], rank: dict[str, int]) -> list[frozenset[str]]:
    """Piepho's (2004) sweep: remove every letter that is redundant, then empty columns.

    A level's entry in a column is redundant when the level has another letter and every
    other level of the column shares a further column with it. Removing entries only
    lowers sharing, so an entry kept at its turn stays needed: one pass in column order
    leaves a display in which no single letter can be removed.
    """
    cols = [set(c) for c in columns]
    for ci, col in enumerate(cols):
        for lab in sorted(col, key=rank.__getitem__):
            others = [o for oi, o in enumerate(cols) if oi != ci and lab in o]
            if others and all(any(j in o for o in others) for j in col if j != lab):
                col.discard(lab)
    kept = [frozenset(c) for c in cols if c]
    kept.sort(key=lambda c: sorted(rank[x] for x in c))
    return kept


def compact_letters(table: PairwiseTable, *, alpha: float = 0.05) -> LetterDisplay:
    """Letters for the levels of ``table`` from its significant pairs at ``alpha``.

    Parameters
    ----------
    table : PairwiseTable
        Any table of pairwise comparisons (Tukey, Games-Howell, pairwise t, Dunnett,
        least-squares means).
    alpha : float, default 0.05
        Level at which a pair counts as different.

    Returns
    -------
    LetterDisplay
        Levels from the largest estimate down with their letters: levels that share a
        letter are not declared different. Pairs the table did not test count as not
        different, and the result says so.

    References
    ----------
    Piepho, H.-P. (2004). An algorithm for a letter-based representation of
    all-pairwise comparisons. J. Comput. Graph. Stat. 13(2), 456-466.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> letters = ex.stats.compact_letters(ex.stats.tukey(results))
    >>> dict(zip(letters.labels, letters.letters))
    {'B': 'a', 'A': 'b', 'C': 'b'}
    """
    if not 0 < alpha < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")
    labels = table.labels
    n_levels = len(labels)
    if n_levels > MAX_LEVELS:
        raise ExplorerError(
            f"letters not built for {n_levels} levels (at most {MAX_LEVELS}): a display that long cannot be read "
            "and its cost grows steeply with the levels; read the comparison table instead"
        )
    est = np.asarray(table.estimates, dtype=float)
    order = np.argsort(-est, kind="stable")
    rank = {labels[i]: r for r, i in enumerate(order)}
    sig = table.significant(alpha)
    columns: list[frozenset[str]] = [frozenset(labels)]
    work = 0
    for a, b, s in zip(table.first, table.second, sig):
        if not s:
            continue
        kept: list[frozenset[str]] = []
        split: list[frozenset[str]] = []
        for col in columns:
            if a in col and b in col:
                split.extend((col - {a}, col - {b}))
            else:
                kept.append(col)
        if not split:
            continue
        # absorb: drop duplicates and columns contained in another. A column that was not split
        # cannot lie inside a split one (it would have lain inside the column split), so only
        # the split columns are checked.
        work += len(split) * (len(kept) + len(split))
        if work > MAX_WORK:
            raise ExplorerError(
                f"letters not built: the {n_levels} levels' significant pairs need more than {MAX_WORK:.0e} column "
                "comparisons (the display would have too many letters to read); read the comparison table instead"
            )
        old = set(kept)
        fresh = [c for c in dict.fromkeys(split) if c not in old]
        columns = kept + [c for c in fresh if not any(c < o for o in kept) and not any(c < o for o in fresh)]
    columns = [c for c in columns if c]
    columns.sort(key=lambda c: sorted(rank[x] for x in c))
    columns = _sweep(columns, rank)
    letters = {lab: "" for lab in labels}
    for i, col in enumerate(columns):
        for lab in col:
            letters[lab] += _letter(i)
    notes: list[str] = []
    if table.family_size < n_levels * (n_levels - 1) // 2:
        notes.append(
            f"The table tests {table.family_size} of the {n_levels * (n_levels - 1) // 2} pairs; pairs it did "
            "not test count as not different."
        )
    if not np.all(np.isfinite(table.pvalue)):
        notes.append("Comparisons with an undefined p-value count as not different.")
    return LetterDisplay(
        labels=tuple(labels[i] for i in order), estimates=est[order],
        letters=tuple(letters[labels[i]] for i in order),
        method=f"{table.method} ({table.adjustment})", alpha=alpha, notes=tuple(notes),
    )
