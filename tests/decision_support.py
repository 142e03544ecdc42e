"""Invented two-factor and one-factor data sets for the decision tests (values are made up).

* ``CROSSOVER``: the effect of A reverses between the levels of B; A's main effect is
  near zero (p = 0.81) while A x B is strong (p = 6.1e-8), as in the issue's report.
* ``QUANTITATIVE``: A raises the response at both levels of B, by different amounts
  (A x B p = 2.5e-4, A p = 9.2e-7).
* ``ADDITIVE``: A and B both matter, no interaction (A x B p = 0.52).
* ``RANKS_DISAGREE``: one factor whose classic F says nothing (p = 0.86) while
  Kruskal-Wallis detects a shift (p = 0.016): one low outlier in L3 inflates the spread.
"""

from __future__ import annotations

import pandas as pd


def _two_way(cells: dict[tuple[str, str], list[float]]) -> pd.DataFrame:
    rows = [(a, b, v) for (a, b), values in cells.items() for v in values]
    return pd.DataFrame(rows, columns=["A", "B", "y"])


CROSSOVER = _two_way({
    ("a1", "b1"): [21.3, 22.2, 20.1, 21.2, 20.0, 21.8, 19.2, 21.7],
    ("a1", "b2"): [18.1, 19.6, 19.5, 19.6, 17.4, 19.8, 18.9, 18.8],
    ("a2", "b1"): [20.2, 19.5, 16.9, 19.2, 17.6, 18.1, 17.7, 17.9],
    ("a2", "b2"): [22.6, 22.0, 21.1, 21.4, 20.7, 21.3, 21.6, 20.1],
})

QUANTITATIVE = _two_way({
    ("a1", "b1"): [23.3, 23.8, 23.3, 21.7, 23.9, 23.4],
    ("a2", "b1"): [19.5, 20.6, 20.4, 20.3, 20.0, 20.5],
    ("a1", "b2"): [20.3, 20.8, 20.5, 21.6, 21.0, 20.7],
    ("a2", "b2"): [19.2, 19.7, 20.0, 19.7, 21.3, 21.0],
})

ADDITIVE = _two_way({
    ("a1", "b1"): [22.3, 22.8, 22.3, 20.7, 22.9, 22.4],
    ("a2", "b1"): [19.5, 20.6, 20.4, 20.3, 20.0, 20.5],
    ("a1", "b2"): [22.3, 22.8, 22.5, 23.6, 23.0, 22.7],
    ("a2", "b2"): [20.2, 20.7, 21.0, 20.7, 22.3, 22.0],
})

RANKS_DISAGREE = pd.DataFrame(
    [(g, v) for g, values in {
        "L1": [50.1, 49.9, 50.6, 50.1, 49.5, 50.4, 51.3],
        "L2": [50.9, 49.3, 48.7, 49.4, 50.0, 47.7, 49.8],
        "L3": [38.6, 51.1, 51.3, 51.5, 52.2, 52.8, 51.7],
    }.items() for v in values],
    columns=["g", "y"],
)

TWO_WAY_CASES = {"crossover": CROSSOVER, "quantitative": QUANTITATIVE, "additive": ADDITIVE}
