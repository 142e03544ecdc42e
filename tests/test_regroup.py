"""Regroup scan: every merge and every move agrees with a brute-force refit (scipy.stats.f_oneway)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.sensitivity.regroup import regroup_scan


def _p(df: pd.DataFrame) -> tuple[float, float, int]:
    groups = [v.to_numpy() for _, v in df.groupby("g")["y"]]
    f, p = stats.f_oneway(*groups)
    return f, p, len(groups)


def _data(seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = np.repeat(list("abcd"), [5, 7, 1, 9])  # 'c' has a single row: moving it away removes the level
    return pd.DataFrame({"g": g, "y": rng.normal(size=g.size) + np.repeat([0.0, 1.0, 0.0, 0.5], [5, 7, 1, 9])})


@pytest.mark.parametrize("seed", [0, 1])
def test_every_merge_and_move_matches_refits(seed):
    """Each alternative rebuilt as a table and refitted with scipy.stats.f_oneway: F and p to 1e-10, df."""
    df = _data(seed)
    scan = regroup_scan(ex.Study(df, "y", "g"))
    frame = scan.to_frame()
    assert len(frame) == 6 + len(df) * 3
    for _, r in frame.iterrows():
        d = df.copy()
        if r["kind"] == "merge":
            d.loc[d.g == r["to"], "g"] = r["from"]
        else:
            d.loc[r["row"], "g"] = r["to"]
        f, p, k = _p(d)
        assert r["F"] == pytest.approx(f, rel=1e-10) and r["p-value"] == pytest.approx(p, rel=1e-10)
        assert r["df (term)"] == k - 1 and r["df (residual)"] == len(df) - k


def test_flips_are_listed_first_and_match_refits(demo_csv):
    """Demo data (nozzle effect hangs on a few panels): every listed flip confirmed by an f_oneway refit, flips first."""
    df = pd.read_csv(demo_csv).rename(columns={"nozzle": "g", "thickness_um": "y"})
    study = ex.Study(df, "y", "g")
    base_sig = study.decision.significant
    scan = regroup_scan(study)
    assert scan.merge_flips and scan.move_flips
    merges = scan.merges_frame()
    k = len(scan.merge_flips)
    assert merges["flips decision"].iloc[:k].all() and not merges["flips decision"].iloc[k:].any()
    for a, b in scan.merge_flips:
        d = df.copy()
        d.loc[d.g == b, "g"] = a
        assert (_p(d)[1] < 0.05) != base_sig
    moves = scan.moves_frame()
    k = len(scan.move_flips)
    assert moves["flips decision"].iloc[:k].all() and not moves["flips decision"].iloc[k:].any()
    for row, _, to in scan.move_flips:
        d = df.copy()
        d.loc[row, "g"] = to
        assert (_p(d)[1] < 0.05) != base_sig


def test_reads_only_and_counts():
    """The study is untouched; pairs + n (k - 1) alternatives are added to its disclosure."""
    df = _data(2)
    study = ex.Study(df, "y", "g")
    res = study.results
    scan = regroup_scan(study)
    assert study.results is res
    assert study.disclosure.specifications == 6 + len(df) * 3
    assert "Merging two levels" in scan._repr_html_()
    scan2 = regroup_scan(study, moves=False)
    assert scan2.move_rows.size == 0 and len(scan2.to_frame()) == 6


@pytest.mark.parametrize(("interactions", "factor"), [(True, "a"), (False, "a"), (True, "b")])
def test_two_way_merges_and_moves_match_statsmodels(interactions, factor):
    """Two-way designs (3 x 2, unbalanced, offset 1e3): each merge of two levels and each move of a row to another
    level of ``factor`` against statsmodels anova_lm(typ=2) on the rebuilt table, p of factor a to 1e-9.
    Merges that leave a factor with one level are refused (status note), as the engine refuses that edit."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    rng = np.random.default_rng(1)
    a = rng.choice(list("xyz"), 36)
    b = rng.choice(list("pq"), 36)
    df = pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=36) + (a == "x") * 0.8 + (b == "p") * 0.5 + 1e3})
    scan = regroup_scan(ex.Study(df, "y", ["a", "b"], interactions=interactions), factor=factor)
    frame = scan.to_frame()
    k = 3 if factor == "a" else 2
    assert len(frame) == k * (k - 1) // 2 + len(df) * (k - 1)
    formula = "y ~ C(a) * C(b)" if interactions else "y ~ C(a) + C(b)"
    checked = 0
    for _, r in frame.iterrows():
        d = df.copy()
        if r["kind"] == "merge":
            d.loc[d[factor] == r["to"], factor] = r["from"]
        else:
            d.loc[r["row"], factor] = r["to"]
        if d[factor].nunique() < 2:
            assert pd.isna(r["p-value"]) and "cannot be fitted" in r["note"]
            continue
        table = anova_lm(smf.ols(formula, d.assign(y=d.y - 1e3)).fit(), typ=2)
        assert r["p-value"] == pytest.approx(table.loc["C(a)", "PR(>F)"], rel=1e-9)
        checked += 1
    assert checked >= len(df)


def test_two_way_moves_that_create_or_empty_a_cell_are_refitted():
    """Additive 3 x 2 with cell (z, q) empty and cell (y, q) holding one row: moves into the empty cell or out of
    the single-row cell change the design and are refitted directly (statsmodels anova_lm(typ=2) check)."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    rng = np.random.default_rng(8)
    a = np.array(list("xxxxxxyyyyyyzzzzzz") + list("xxxxy"))
    b = np.array(list("pppqqqpppppppppppp") + list("qqqqq"))
    df = pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=a.size) + (a == "x") * 0.7})
    scan = regroup_scan(ex.Study(df, "y", ["a", "b"], interactions=False))
    moves = scan.moves_frame()
    lone = int(np.flatnonzero((a == "y") & (b == "q"))[0])
    for _, r in moves[moves["row"].isin([lone, 3])].iterrows():
        d = df.copy()
        d.loc[r["row"], "a"] = r["to"]
        table = anova_lm(smf.ols("y ~ C(a) + C(b)", d).fit(), typ=2)
        assert r["p-value"] == pytest.approx(table.loc["C(a)", "PR(>F)"], rel=1e-9)
