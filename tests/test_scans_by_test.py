"""The sensitivity scans under each overall test equal brute-force refits under that test.

Oracles: scipy.stats.f_oneway (classic), statsmodels anova_oneway(use_var='unequal')
(Welch) and (use_var='bf') (Brown-Forsythe, Mehrotra df), scipy.stats.kruskal
(Kruskal-Wallis, every row). Permutation F: on a stated subset of rows, (1) the same
seeded orderings with each permuted data set's F computed by scipy f_oneway (exact
equality of counts), and (2) an independent permutation test of the refit data
(different seed) within four Monte-Carlo standard errors.
"""

from __future__ import annotations

import itertools
import re

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.oneway import anova_oneway

import explorer as ex
from explorer.inference.omnibus import permutation_f
from explorer.sensitivity.alternatives import oneway_input
from explorer.sensitivity.chosen_test import ChosenTest


def _data(seed: int = 11) -> pd.DataFrame:
    """Five levels of sizes 6, 8, 3, 9 and 2, values rounded to one decimal (ties), one outlier."""
    rng = np.random.default_rng(seed)
    g = np.repeat(list("abcde"), [6, 8, 3, 9, 2])
    y = np.round(10 + rng.normal(size=g.size) * np.repeat([1.0, 1.5, 0.7, 1.2, 1.0], [6, 8, 3, 9, 2])
                 + np.repeat([0.0, 0.9, 0.2, 1.1, 0.4], [6, 8, 3, 9, 2]), 1)
    y[4] += 4.0
    return pd.DataFrame({"g": g, "y": y})


def _groups(df: pd.DataFrame) -> list[np.ndarray]:
    return [v.to_numpy() for _, v in df.groupby("g")["y"] if len(v)]


def _reference(test: str, groups: list[np.ndarray]) -> tuple[float, float]:
    """(statistic, p) of ``test`` on ``groups``; NaN where the test is undefined."""
    if len(groups) < 2:
        return np.nan, np.nan
    if test == "classic":
        r = stats.f_oneway(*groups)
        return float(r.statistic), float(r.pvalue)
    if test == "kruskal":
        r = stats.kruskal(*groups)
        return float(r.statistic), float(r.pvalue)
    if min(len(v) for v in groups) < 2 or min(np.var(v) for v in groups) == 0:
        return np.nan, np.nan  # a level with one value (or no spread) has no variance of its own
    r = anova_oneway(groups, use_var="unequal" if test == "welch" else "bf")
    return float(r.statistic), float(r.pvalue)


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal"])
def test_case_deletion_equals_refits_row_by_row(test):
    """Every row left out, refitted by the reference library under the study's test (statistic and p to 1e-9)."""
    df = _data()
    study = ex.Study(df, "y", "g", test=test)
    scan = study.case_deletion(record=False)
    assert scan.test == test and scan.term == "g"
    for j, row in enumerate(scan.row_ids.tolist()):
        stat, p = _reference(test, _groups(df.drop(index=row)))
        if np.isnan(p):
            assert np.isnan(scan.pvalue[j]) and scan.status[j] > 0, (row, scan.status[j])
            continue
        assert scan.statistic[j] == pytest.approx(stat, rel=1e-9), row
        assert scan.pvalue[j] == pytest.approx(p, rel=1e-9), row
    assert any("Test:" in n for n in scan.notes)


def test_case_deletion_under_kruskal_with_heavy_ties():
    """Integer data with large tie blocks (scipy kruskal refits, every row): the tie term is downdated exactly."""
    rng = np.random.default_rng(2)
    df = pd.DataFrame({"g": rng.choice(list("pqr"), 60), "y": rng.integers(0, 4, 60).astype(float)})
    scan = ex.Study(df, "y", "g", test="kruskal").case_deletion(record=False)
    for j, row in enumerate(scan.row_ids.tolist()):
        r = stats.kruskal(*_groups(df.drop(index=row)))
        assert scan.pvalue[j] == pytest.approx(r.pvalue, rel=1e-10)


def _f_of_groupings(values: np.ndarray, sizes: np.ndarray) -> np.ndarray:
    """One-way F of each line of ``values`` (m, n) cut into contiguous groups of ``sizes``: two-pass sums of
    squares written out plainly; the first lines are checked against scipy.stats.f_oneway."""
    values = np.atleast_2d(values)
    bounds = np.r_[0, np.cumsum(sizes)]
    parts = [values[:, a:b] for a, b in zip(bounds[:-1], bounds[1:]) if b > a]
    grand = values.mean(axis=1, keepdims=True)
    ssb = sum(p.shape[1] * (p.mean(axis=1, keepdims=True) - grand)[:, 0] ** 2 for p in parts)
    ssw = sum(((p - p.mean(axis=1, keepdims=True)) ** 2).sum(axis=1) for p in parts)
    k, n = len(parts), values.shape[1]
    f = (ssb / (k - 1)) / (ssw / (n - k))
    for line in range(min(5, len(f))):
        ref = stats.f_oneway(*[p[line] for p in parts]).statistic
        assert f[line] == pytest.approx(ref, rel=1e-10)
    return f


def test_case_deletion_under_permutation_on_a_subset():
    """Rows 0, 5, 10, 15, 20, 25 (a stated subset). Same orderings (as many as the sequential rule drew), each
    turned into a grouping of the other rows by the stated rule (row i's value taken out; when it landed in
    another level's block, the first value of its own level's block moved into its place), F of each grouping by
    the plain two-pass formula checked against scipy f_oneway: the counts agree exactly; an independent
    permutation test of the refit (seed 1) agrees within 4 SE."""
    df = _data()
    study = ex.Study(df, "y", "g", test="permutation")
    scan = study.case_deletion(record=False)
    assert scan.permutations_used is not None and "orderings used" in scan.to_frame()
    chosen = ChosenTest(oneway_input(study), study.spec)
    p_again, _ = chosen.permutations.deletion_pvalues(0.05)
    drawn = chosen.permutations.drawn
    assert np.array_equal(p_again, scan.pvalue) and f"orderings drawn: {drawn} for the deletions" in scan.how
    assert (scan.permutations_used == drawn).all()
    orderings = np.vstack(list(chosen.permutations.orderings(drawn)))
    assert orderings.shape == (drawn, len(df))
    by_level = chosen.permutations.by_level  # orderings are of the rows sorted by level (stable)
    codes = oneway_input(study).codes[by_level]
    y = df["y"].to_numpy()[by_level]
    first = {c: int(np.flatnonzero(codes == c)[0]) for c in np.unique(codes)}  # first position of each block
    for i in [0, 5, 10, 15, 20, 25]:
        j = scan.row_ids.tolist().index(i)
        ii = int(np.flatnonzero(by_level == i)[0])
        sizes = np.bincount(oneway_input(study).codes[np.arange(len(df)) != i], minlength=5)
        f_obs = float(stats.f_oneway(*_groups(df.drop(index=i))).statistic)
        lines = []
        for o in orderings:
            o = o.copy()
            p = int(np.flatnonzero(o == ii)[0])
            q = first[codes[ii]]
            if codes[p] != codes[ii]:
                o[p] = o[q]  # the first value of its own block takes its place
                p = q
            lines.append(np.delete(o, p))
        hits = int(np.sum(_f_of_groupings(y[np.array(lines)], sizes) >= f_obs * (1 - 1e-12)))
        assert scan.pvalue[j] == pytest.approx((hits + 1) / (drawn + 1), rel=1e-12)
        ref = permutation_f(ex.Study(df.drop(index=i), "y", "g").results, 9999, seed=1).pvalue
        se = np.sqrt(ref * (1 - ref) / drawn + ref * (1 - ref) / 9999)
        assert abs(scan.pvalue[j] - ref) <= 4 * se + 1e-4


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal"])
def test_regroup_scan_equals_refits(test):
    """Every merge of two levels and every move of one row, refitted under the study's test (rel 1e-9)."""
    df = _data(3)
    scan = ex.Study(df, "y", "g", test=test).regroup_scan(record=False)
    assert scan.test == test
    for (a, b), p, s in zip(scan.merge_levels, scan.merge_fits.pvalue, scan.merge_fits.status):
        ref = _reference(test, _groups(df.assign(g=df.g.replace({b: a}))))[1]
        assert (np.isnan(p) and s > 0) if np.isnan(ref) else p == pytest.approx(ref, rel=1e-9), (a, b)
    rng = np.random.default_rng(0)
    for j in rng.choice(scan.move_rows.size, 40, replace=False):
        row, dst = scan.move_rows[j], scan.move_to[j]
        moved = df.copy()
        moved.loc[row, "g"] = dst
        ref = _reference(test, _groups(moved))[1]
        p = scan.move_fits.pvalue[j]
        assert np.isnan(p) if np.isnan(ref) else p == pytest.approx(ref, rel=1e-9), (row, dst)


def test_regroup_scan_under_permutation():
    """Merges and moves: the same orderings' F by scipy f_oneway over contiguous blocks of the new sizes
    (exact counts) for every merge and 8 stated moves; independent permutation tests (seed 2) within 4 SE."""
    df = _data(3)
    study = ex.Study(df, "y", "g", test="permutation")
    scan = study.regroup_scan(record=False)
    data = oneway_input(study)
    how = next(n for n in scan.notes if n.startswith("Test:"))
    drawn = {what: int(count) for count, what in re.findall(r"(\d+) for the (merges|moves)", how)}
    assert set(drawn) == {"merges", "moves"}
    perms = ChosenTest(data, study.spec).permutations
    orderings = np.vstack(list(perms.orderings(max(drawn.values()))))
    y = data.y[perms.by_level]
    labels = list(data.labels)

    def brute(regrouped: pd.DataFrame, count: int) -> float:
        groups = _groups(regrouped)
        f_obs = float(stats.f_oneway(*groups).statistic)
        sizes = np.array([len(v) for v in groups])
        null = _f_of_groupings(y[orderings[:count]], sizes)
        return float((np.sum(null >= f_obs * (1 - 1e-12)) + 1) / (len(null) + 1))

    for (a, b), p in zip(scan.merge_levels, scan.merge_fits.pvalue):
        merged = df.assign(g=df.g.replace({b: a}))
        assert p == pytest.approx(brute(merged, drawn["merges"]), rel=1e-12), (a, b)
    for j in range(0, scan.move_rows.size, max(1, scan.move_rows.size // 8))[:8]:
        moved = df.copy()
        moved.loc[scan.move_rows[j], "g"] = scan.move_to[j]
        assert scan.move_fits.pvalue[j] == pytest.approx(brute(moved, drawn["moves"]), rel=1e-12)
        ref = permutation_f(ex.Study(moved, "y", "g").results, 9999, seed=2).pvalue
        assert abs(scan.move_fits.pvalue[j] - ref) <= 4 * np.sqrt(2 * ref * (1 - ref) / 9999) + 1e-4
    assert labels == sorted(labels)


@pytest.mark.parametrize("test", ["welch", "kruskal"])
def test_flip_finder_exact_search_is_minimal_under_the_test(test):
    """Small data: brute force over every single row and pair with the reference library confirms that the
    exact search's set is a smallest flipping set under the study's test, and that it flips."""
    df = _data(5).iloc[:22].reset_index(drop=True)
    study = ex.Study(df, "y", "g", test=test)
    d = study.decision
    res = study.flip_finder(record=False, method="exact", max_size=2)
    assert res.term == "g" and res.test == test and res.base_pvalue == d.pvalue

    def flips(rows: tuple[int, ...]) -> bool:
        p = _reference(test, _groups(df.drop(index=list(rows))))[1]
        return not np.isnan(p) and (p < 0.05) != d.significant

    singles = [r for r in range(len(df)) if flips((r,))]
    pairs = [c for c in itertools.combinations(range(len(df)), 2) if flips(c)]
    if singles:
        assert res.found and len(res.rows) == 1 and res.rows[0] in singles
    elif pairs:
        assert res.found and len(res.rows) == 2 and tuple(sorted(res.rows)) in pairs
    else:
        assert not res.found and res.exact_up_to == 2
    if res.found:
        assert flips(tuple(res.rows))
        assert res.pvalues[-1] == pytest.approx(_reference(test, _groups(df.drop(index=list(res.rows))))[1], rel=1e-9)


def test_flip_finder_under_permutation_checks_each_step_afresh():
    """Every reported step's p-value is the kit's permutation test of the remaining rows (same seed and count)."""
    df = _data(7)
    study = ex.Study(df, "y", "g", test="permutation")
    res = study.flip_finder(record=False, method="greedy", max_steps=4)
    assert any("permutation critical value" in n for n in res.notes)
    kept = df.copy()
    for row, p in zip(res.rows, res.pvalues):
        kept = kept.drop(index=row)
        assert p == ex.Study(kept, "y", "g", test="permutation").decision.pvalue
    if res.found:
        assert (res.pvalues[-1] < 0.05) != study.decision.significant


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal", "permutation"])
def test_sweep_default_specification_is_the_study(test):
    """The sweep's default specification is the study's own analysis: its p equals the decision's."""
    df = _data()
    study = ex.Study(df, "y", "g", test=test)
    sweep = study.robustness_sweep(record=False, outlier_rules=["none", "cooks"], transforms=["none"])
    assert sweep.test == test and sweep.default_pvalue == pytest.approx(study.decision.pvalue, rel=1e-12)
    assert sweep.table["test"].iloc[0] in sweep.table["test"].tolist() and test in set(sweep.table["test"])


def test_two_way_scans_can_score_another_term():
    """term= picks the term scored (statsmodels anova_lm typ=2 refit per row for 'B'); an unknown term is refused."""
    import statsmodels.formula.api as smf
    from decision_support import CROSSOVER
    from statsmodels.stats.anova import anova_lm

    from explorer.engine.errors import ExplorerError

    study = ex.Study(CROSSOVER, "y", ["A", "B"])
    scan = study.case_deletion(term="B", record=False)
    assert scan.term == "B" and scan.base_pvalue == study.decision.verdict_for("B").pvalue
    for j, row in enumerate(scan.row_ids.tolist()[:8]):
        d = CROSSOVER.drop(index=row)
        ref = anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum)", d).fit(), typ=2)
        assert scan.pvalue[j] == pytest.approx(ref.loc["C(B, Sum)", "PR(>F)"], rel=1e-9)
    assert study.regroup_scan(term="B", record=False).term == "B"
    assert study.flip_finder(term="B", record=False, max_steps=2).term == "B"
    assert study.robustness_sweep(term="B", record=False, transforms=["none"]).term == "B"
    with pytest.raises(ExplorerError, match="not a treatment term"):
        study.case_deletion(term="C")


@pytest.mark.parametrize("test", ["welch", "brown-forsythe", "kruskal"])
def test_case_deletion_when_a_level_has_one_row(test):
    """A level of one row: Welch and Brown-Forsythe are undefined on all rows (statsmodels needs two per level) but
    defined, on one level fewer, once that row is left out; every row checked against the reference refit."""
    df = _data(8)
    df.loc[len(df)] = ["f", 12.5]
    scan = ex.Study(df, "y", "g", test=test).case_deletion(record=False)
    lone = scan.row_ids.tolist().index(len(df) - 1)
    for j, row in enumerate(scan.row_ids.tolist()):
        stat, p = _reference(test, _groups(df.drop(index=row)))
        if np.isnan(p):
            assert np.isnan(scan.pvalue[j]) and scan.status[j] > 0
        else:
            assert scan.pvalue[j] == pytest.approx(p, rel=1e-9) and scan.statistic[j] == pytest.approx(stat, rel=1e-9)
    assert np.isfinite(scan.pvalue[lone])
