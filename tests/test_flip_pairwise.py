"""The flip finder's pairwise decision follows the chosen test.

Oracles: pingouin.pairwise_gameshowell (Games-Howell after Welch's and Brown-Forsythe's F),
Dunn's z written out from scipy.stats.rankdata (mid-ranks) with the tie-corrected rank
variance of Dunn (1964) / Hollander, Wolfe and Chicken (2014, sec. 6.5; from memory) and
statsmodels multipletests(method='holm') (Dunn after Kruskal-Wallis), scipy.stats.studentized_range
(Tukey-Kramer). Minimality of the exact search by brute force over every single row and
pair of rows.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

import explorer as ex
from explorer.inference.rank_followups import dunn_holm
from explorer.sensitivity.alternatives import oneway_input
from explorer.sensitivity.chosen_test import ChosenTest
from explorer.sensitivity.flip import PAIRWISE_FOR_TEST


def _data(seed: int = 3) -> pd.DataFrame:
    """Four levels of 6, 5, 7 and 6 rows with unequal spreads; 'a' and 'd' differ."""
    rng = np.random.default_rng(seed)
    g = np.repeat(list("abcd"), [6, 5, 7, 6])
    spread = np.repeat([0.6, 1.2, 0.9, 1.5], [6, 5, 7, 6])
    shift = np.repeat([0.0, 0.5, 0.6, 1.7], [6, 5, 7, 6])
    return pd.DataFrame({"g": g, "y": np.round(10 + shift + spread * rng.normal(size=g.size), 2)})


def _games_howell_p(df: pd.DataFrame, a: str, b: str) -> float:
    """pingouin's Games-Howell p of the pair (NaN when a level is gone or has one row)."""
    counts = df.groupby("g")["y"].size()
    if a not in counts.index or b not in counts.index or counts[[a, b]].min() < 2:
        return np.nan
    tab = pg.pairwise_gameshowell(data=df, dv="y", between="g")
    row = tab[((tab.A == a) & (tab.B == b)) | ((tab.A == b) & (tab.B == a))]
    return float(row["pval"].iloc[0])


def _games_howell_fast(y: np.ndarray, g: np.ndarray, a: str, b: str) -> float:
    """Games and Howell (1976) written out (Welch df, studentized range tail from scipy) for the brute force;
    checked against pingouin on the data as it is."""
    ya, yb = y[g == a], y[g == b]
    if ya.size < 2 or yb.size < 2:
        return np.nan
    va, vb = ya.var(ddof=1) / ya.size, yb.var(ddof=1) / yb.size
    df = (va + vb) ** 2 / (va**2 / (ya.size - 1) + vb**2 / (yb.size - 1))
    q = np.sqrt(2) * abs(ya.mean() - yb.mean()) / np.sqrt(va + vb)
    return float(stats.studentized_range.sf(q, np.unique(g).size, df))


def _dunn_holm_fast(y: np.ndarray, g: np.ndarray, a: str, b: str) -> float:
    levels = sorted(set(g.tolist()))
    if a not in levels or b not in levels:
        return np.nan
    ranks = stats.rankdata(y)
    big_n = y.size
    _, counts = np.unique(y, return_counts=True)
    s2 = big_n * (big_n + 1) / 12 - np.sum(counts**3 - counts) / (12 * (big_n - 1))
    rbar = {lv: ranks[g == lv].mean() for lv in levels}
    n = {lv: int(np.sum(g == lv)) for lv in levels}
    pairs = list(itertools.combinations(levels, 2))
    p = [2 * stats.norm.sf(abs(rbar[u] - rbar[v]) / np.sqrt(s2 * (1 / n[u] + 1 / n[v]))) for u, v in pairs]
    return float(_holm(np.array(p))[pairs.index(tuple(sorted((a, b))))])


def _holm(p: np.ndarray) -> np.ndarray:
    """Holm's step-down by hand (statsmodels multipletests runs a garbage collection per call, too slow for the
    brute force); checked against multipletests(method='holm') in the tests below."""
    order = np.argsort(p)
    adj = np.minimum(np.maximum.accumulate(p[order] * (p.size - np.arange(p.size))), 1.0)
    out = np.empty_like(adj)
    out[order] = adj
    return out


def _dunn_holm_p(df: pd.DataFrame, a: str, b: str) -> float:
    return _dunn_holm_fast(df["y"].to_numpy(), df["g"].to_numpy(), a, b)


REFERENCE = {"welch": _games_howell_fast, "brown-forsythe": _games_howell_fast, "kruskal": _dunn_holm_fast}


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal", "permutation"])
def test_pairwise_method_follows_the_test_and_is_stated(test):
    res = ex.Study(_data(), "y", "g", test=test).flip_finder(pair=("a", "d"), record=False, method="greedy",
                                                              max_steps=3)
    assert res.pairwise_method == PAIRWISE_FOR_TEST[test]
    assert res.target == f"a vs d ({PAIRWISE_FOR_TEST[test]})"
    note = next(n for n in res.notes if n.startswith("Pairwise decision:"))
    assert PAIRWISE_FOR_TEST[test].split(" (")[0].split("-")[0] in note
    if test == "permutation":
        assert "no pairwise counterpart" in note
    overall = ex.Study(_data(), "y", "g", test=test).flip_finder(record=False, method="greedy", max_steps=1)
    assert overall.pairwise_method == ""


@pytest.mark.parametrize("test", ["welch", "kruskal"])
def test_pairwise_flip_exact_search_is_minimal(test):
    """Brute force over every single row and pair with the outside reference for the pair's p: the exact search's
    set is a smallest flipping set, it flips, and every reported p equals the reference on the remaining rows."""
    df = _data()
    y, g = df["y"].to_numpy(), df["g"].to_numpy()
    fast = REFERENCE[test]
    base = fast(y, g, "a", "d")
    if test == "welch":
        assert base == pytest.approx(_games_howell_p(df, "a", "d"), rel=1e-9)  # the written-out test is pingouin's
    study = ex.Study(df, "y", "g", test=test)
    res = study.flip_finder(pair=("a", "d"), record=False, method="exact", max_size=2)
    assert res.base_pvalue == pytest.approx(base, rel=1e-6)
    assert res.base_significant == (base < 0.05)

    def flips(rows: tuple[int, ...]) -> bool:
        keep = np.ones(y.size, dtype=bool)
        keep[list(rows)] = False
        p = fast(y[keep], g[keep], "a", "d")
        return bool(np.isfinite(p) and (p < 0.05) != (base < 0.05))

    singles = [r for r in range(len(df)) if flips((r,))]
    pairs = [] if singles else [c for c in itertools.combinations(range(len(df)), 2) if flips(c)]
    if singles:
        assert res.found and len(res.rows) == 1 and res.rows[0] in singles
    elif pairs:
        assert res.found and len(res.rows) == 2 and tuple(sorted(res.rows)) in pairs
    else:
        assert not res.found and res.exact_up_to == 2
    kept = df
    for row, p in zip(res.rows, res.pvalues):
        kept = kept.drop(index=row)
        want = _games_howell_p(kept, "a", "d") if test == "welch" else _dunn_holm_p(kept, "a", "d")
        assert p == pytest.approx(want, rel=1e-6)


def test_games_howell_under_brown_forsythe_scores_against_pingouin():
    df = _data(5)
    res = ex.Study(df, "y", "g", test="brown-forsythe").flip_finder(pair=("a", "d"), record=False, method="greedy",
                                                                      max_steps=4)
    assert res.base_pvalue == pytest.approx(_games_howell_p(df, "a", "d"), rel=1e-6)
    kept = df
    for row, p in zip(res.rows, res.pvalues):
        kept = kept.drop(index=row)
        assert p == pytest.approx(_games_howell_p(kept, "a", "d"), rel=1e-6)


def test_holm_by_hand_is_statsmodels():
    rng = np.random.default_rng(1)
    for _ in range(5):
        p = rng.uniform(0, 0.2, 6)
        assert _holm(p) == pytest.approx(multipletests(p, method="holm")[1], rel=1e-12)


def test_dunn_holm_batch_equals_the_written_out_test():
    """Removal sets scored by exact rank downdates: every pair's Holm-adjusted Dunn p equals the written-out
    test on the remaining rows (ties from rounding to one decimal)."""
    df = _data().assign(y=lambda d: d.y.round(1))
    study = ex.Study(df, "y", "g", test="kruskal")
    data = oneway_input(study)
    chosen = ChosenTest(data, study.spec)
    rng = np.random.default_rng(0)
    sets = np.array([rng.choice(len(df), 3, replace=False) for _ in range(12)])
    adjusted = dunn_holm(*chosen.rank_parts(sets))
    pairs = list(itertools.combinations(range(4), 2))
    for line, rows in zip(adjusted, sets):
        kept = df.drop(index=data.row_ids[rows].tolist())
        for col, (u, v) in enumerate(pairs):
            assert line[col] == pytest.approx(_dunn_holm_p(kept, data.labels[u], data.labels[v]), rel=1e-9)
