"""Which combinations of sweep choices are the same analysis.

A robustness sweep crosses choices (outlier rule x test x transform x merges), but two
combinations can compute the same thing: a rank test reads only the ranks of the
response, and a strictly increasing transform such as the log leaves every rank
unchanged, so "rank test, log" is "rank test, as measured" on the same rows; an outlier
rule that leaves out no row (or the same rows as another rule) gives the analysis of
those rows. Counting such combinations twice would inflate the number of analyses a
sweep reports and weight the shares toward whatever the duplicates say (Steegen et al.
2016 count the distinct data sets of a multiverse, not the labels that lead to them).

References
----------
Steegen, S., Tuerlinckx, F., Gelman, A. and Vanpaemel, W. (2016). Increasing
transparency through a multiverse analysis. Perspect. Psychol. Sci. 11(5), 702-712.
Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion variance
analysis. JASA 47, 583-621 (H depends on the data through their ranks only).
"""

from __future__ import annotations

from collections import Counter

import pandas as pd

__all__ = ["RANK_TESTS", "ALSO_COLUMN", "distinct_analyses"]

#: Sweep test names whose statistic depends on the response only through its ranks.
RANK_TESTS = frozenset({"rank", "kruskal"})
#: Column of the distinct table listing the other combinations that reach each analysis.
ALSO_COLUMN = "also reached by"

_CHOICES = ("outlier rule", "test", "transform", "merges")


def _key(row: pd.Series) -> tuple[object, ...]:
    transform = "(ranks)" if row["test"] in RANK_TESTS else row["transform"]
    return (row["test"], transform, row["merges"], tuple(sorted(map(str, row["rows left out"]))))


def _why(kept: pd.Series, other: pd.Series) -> tuple[str, list[str]]:
    """How ``other`` differs from ``kept`` (its choices) and why it is the same analysis."""
    changed = [c for c in _CHOICES if other[c] != kept[c]]
    reasons = []
    if "transform" in changed:
        reasons.append("ranks are unchanged by a monotone transform")
    if "outlier rule" in changed:
        reasons.append("no row left out" if not len(other["rows left out"]) else "the same rows left out")
    label = ", ".join(f"{c} {other[c]}" for c in changed)
    return f"{label} ({'; '.join(reasons)})", reasons


def distinct_analyses(table: pd.DataFrame) -> tuple[pd.DataFrame, tuple[str, ...]]:
    """One line per distinct analysis of a sweep table, and notes saying which choices coincide.

    ``table`` has the choice columns ``outlier rule``, ``test``, ``transform``,
    ``merges`` and the ``rows left out`` of each combination. Two combinations are the
    same analysis when they run the same test on the same rows with the same merges, on
    the same transform of the response or, for a rank test, on any transform. The first
    combination of each group is kept (so the default specification is always kept);
    the others are named in the column :data:`ALSO_COLUMN`.
    """
    keys = [_key(row) for _, row in table.iterrows()]
    first: dict[tuple[object, ...], int] = {}
    also: dict[int, list[str]] = {}
    reasons: Counter[str] = Counter()
    for i, key in enumerate(keys):
        if key not in first:
            first[key] = i
            also[i] = []
            continue
        label, why = _why(table.iloc[first[key]], table.iloc[i])
        also[first[key]].append(label)
        reasons.update(why)
    kept = sorted(first.values())
    out = table.iloc[kept].reset_index(drop=True)
    out[ALSO_COLUMN] = ["; ".join(also[i]) for i in kept]
    notes: tuple[str, ...] = ()
    if len(kept) < len(table):
        counts = ", ".join(f"{n} where {r}" for r, n in reasons.most_common())
        notes = (f"{len(table)} combinations of choices are {len(kept)} distinct analyses; only distinct analyses "
                 f"are counted and ranked ({len(table) - len(kept)} coincide with another: {counts}). The column "
                 f"'{ALSO_COLUMN}' names them.",)
    return out, notes
