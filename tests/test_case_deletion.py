"""Case-deletion scan: row-by-row agreement with brute-force refits (scipy.stats.f_oneway)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

import explorer as ex
from explorer.sensitivity.case_deletion import case_deletion_scan


def _refit(df: pd.DataFrame, drop: int, shift: float = 0.0):  # type: ignore[no-untyped-def]
    d = df.drop(index=drop)
    groups = [v.to_numpy() - shift for _, v in d.groupby("g")["y"] if len(v)]
    f, p = stats.f_oneway(*groups)
    allv = np.concatenate(groups)
    ssb = sum(len(v) * (v.mean() - allv.mean()) ** 2 for v in groups)
    sst = ((allv - allv.mean()) ** 2).sum()
    return f, p, ssb / sst, len(groups)


def _pair_ts(df: pd.DataFrame, drop: int | None) -> dict:
    d = df if drop is None else df.drop(index=drop)
    grp = {k: v.to_numpy() for k, v in d.groupby("g")["y"]}
    n = sum(len(v) for v in grp.values())
    msw = sum(((v - v.mean()) ** 2).sum() for v in grp.values()) / (n - len(grp))
    return {(a, b): (grp[a].mean() - grp[b].mean()) / np.sqrt(msw * (1 / len(grp[a]) + 1 / len(grp[b])))
            for a in grp for b in grp if a != b}


def _data(seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = np.repeat(list("abcde"), [6, 8, 2, 9, 1])  # 'c' shrinks to one row, 'e' to none
    y = rng.normal(size=g.size) + np.repeat([0.0, 1.0, 0.0, 0.4, 0.5], [6, 8, 2, 9, 1])
    return pd.DataFrame({"g": g, "y": y})


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_matches_f_oneway_refits_row_by_row(seed):
    """scipy.stats.f_oneway refit without each row: F and p to 1e-10, eta squared SSB/SST, level count."""
    df = _data(seed)
    scan = case_deletion_scan(ex.Study(df, "y", "g"))
    for j, row in enumerate(scan.row_ids.tolist()):
        f, p, eta, k = _refit(df, row)
        assert scan.statistic[j] == pytest.approx(f, rel=1e-10)
        assert scan.pvalue[j] == pytest.approx(p, rel=1e-10)
        assert scan.eta_squared[j] == pytest.approx(eta, rel=1e-10)
        assert scan.df_between[j] == k - 1 and scan.df_within[j] == len(df) - 1 - k


def test_largest_pairwise_change_matches_refits():
    """Pair t statistics (difference over its standard error from the residual mean square), refitted by hand with numpy."""
    df = _data(3)
    scan = case_deletion_scan(ex.Study(df, "y", "g"))
    before = _pair_ts(df, None)
    for j, row in enumerate(scan.row_ids.tolist()):
        after = _pair_ts(df, row)
        changes = [abs(after[key] - before[key]) for key in after]
        assert max(changes) == pytest.approx(abs(scan.pair_t_after[j] - scan.pair_t_before[j]), rel=1e-9)
        a, b = scan.pair[j].split(" vs ")
        assert scan.pair_t_after[j] == pytest.approx(after[(a, b)], rel=1e-9)


def test_large_offset_agrees_with_refits_to_8_digits():
    """Values near 1e9 with spread 1e-3..1e3 (exact binary fractions) vs f_oneway on the exactly shifted values.

    Group 'a' has one row holding nearly all its sum of squares, so its deletion takes the
    exact-recompute path of the downdate.
    """
    rng = np.random.default_rng(11)
    g = np.repeat(list("abc"), [6, 7, 8])
    small = np.round(rng.normal(size=g.size) * 64) / 128 + np.repeat([0.0, 0.5, 0.25], [6, 7, 8])
    small[0] = 1000.0
    df = pd.DataFrame({"g": g, "y": 1e9 + small})
    exact = pd.DataFrame({"g": g, "y": small})
    scan = case_deletion_scan(ex.Study(df, "y", "g"))
    for j, row in enumerate(scan.row_ids.tolist()):
        f, p, _eta, _ = _refit(exact, row)
        assert scan.statistic[j] == pytest.approx(f, rel=1e-8)
        assert scan.pvalue[j] == pytest.approx(p, rel=1e-8)


#: Constructed: levels a and b do not differ; the lone row of level c (row 16) makes the F test significant.
ONE_ROW = pd.DataFrame({
    "g": list("aaaaaaaabbbbbbbbc"),
    "y": [0.1, -0.3, 0.4, 0.0, -0.2, 0.3, -0.1, 0.2, 0.2, -0.1, 0.3, 0.0, 0.1, -0.2, 0.4, 0.05, 6.0],
})


def test_the_one_row_holding_significance_is_listed_first():
    """Constructed data; f_oneway (scipy) confirms: significant with row 16, not without it, still with any other row out."""
    study = ex.Study(ONE_ROW, "y", "g")
    assert study.decision.significant
    scan = case_deletion_scan(study)
    assert scan.flip_rows == [16]
    frame = scan.to_frame()
    assert frame["row"].iloc[0] == 16 and bool(frame["flips decision"].iloc[0])
    assert frame["flips decision"].sum() == 1
    assert _refit(ONE_ROW, 16)[1] > 0.05 and all(_refit(ONE_ROW, i)[1] < 0.05 for i in range(16))


def test_degenerate_deletions_get_a_status_not_nan():
    """Two levels, one of a single row: deleting it leaves one level (no F test); notes say why."""
    df = pd.DataFrame({"g": list("aaab"), "y": [1.0, 2.0, 4.0, 3.0]})
    scan = case_deletion_scan(ex.Study(df, "y", "g"))
    frame = scan.to_frame().set_index("row")
    assert pd.isna(frame.loc[3, "F"]) and "fewer than two levels" in frame.loc[3, "note"]
    assert frame.drop(index=3)["F"].notna().all()


def test_reads_only_and_counts_the_search():
    """The study's view and results are untouched; the n alternatives are added to the disclosure."""
    df = _data(4)
    study = ex.Study(df, "y", "g")
    res, view = study.results, study.view
    scan = case_deletion_scan(study)
    assert study.results is res and study.view is view
    assert study.disclosure.specifications == len(df) and scan.disclosure.specifications == len(df)
    assert "flip" in scan._repr_html_()


def test_study_methods_return_the_same_scans():
    """Study.case_deletion / flip_finder / regroup_scan / robustness_sweep / influence are thin wrappers."""
    df = _data(5)
    study = ex.Study(df, "y", "g")
    a = study.case_deletion()
    b = case_deletion_scan(study)
    np.testing.assert_array_equal(a.pvalue, b.pvalue)
    assert study.flip_finder().method in ("exact", "greedy")
    assert study.regroup_scan(moves=False).merge_levels
    sweep = study.robustness_sweep(tests=["classic"], transforms=["none"])
    assert sweep.n_combinations == 4 and sweep.n_specifications == len(sweep.table) <= 4
    assert study.influence().n == len(df)


def _two_way(seed: int, n: int = 40) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    a = rng.choice(list("xyz"), n)
    b = rng.choice(list("pq"), n)
    return pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=n) + (a == "x") * 0.8 + (b == "p") * 0.5 + 1e6})


@pytest.mark.parametrize("interactions", [True, False])
def test_two_way_matches_statsmodels_refits(interactions):
    """statsmodels anova_lm(typ=2) refit without each row (unbalanced 3 x 2, offset 1e6): every term's p to 1e-9."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    df = _two_way(1)
    scan = case_deletion_scan(ex.Study(df, "y", ["a", "b"], interactions=interactions))
    formula = "y ~ C(a) * C(b)" if interactions else "y ~ C(a) + C(b)"
    names = {"a": "C(a)", "b": "C(b)", "a × b": "C(a):C(b)"}
    assert set(scan.term_pvalues) == ({"a", "b", "a × b"} if interactions else {"a", "b"})
    for j, row in enumerate(scan.row_ids.tolist()):
        d = df.drop(index=row)
        table = anova_lm(smf.ols(formula, d.assign(y=d.y - 1e6)).fit(), typ=2)
        for term, p in scan.term_pvalues.items():
            assert p[j] == pytest.approx(table.loc[names[term], "PR(>F)"], rel=1e-9)
        assert scan.pvalue[j] == pytest.approx(table.loc[names[scan.term], "PR(>F)"], rel=1e-9)
        assert scan.df_within[j] == table.loc["Residual", "df"]


@pytest.mark.parametrize("ss_type", ["I", "III"])
def test_two_way_other_types_match_the_engine_refit(ss_type):
    """Types I and III: the project's factorial engine refitted without each row (itself checked against statsmodels)."""
    df = _two_way(2, 30)
    scan = case_deletion_scan(ex.Study(df, "y", ["a", "b"], ss_type=ss_type))
    for j, row in enumerate(scan.row_ids.tolist()):
        ref = ex.Study(df.drop(index=row), "y", ["a", "b"], ss_type=ss_type).results
        assert scan.statistic[j] == pytest.approx(ref.statistic(scan.term), rel=1e-9)
        assert scan.term_pvalues["a × b"][j] == pytest.approx(ref.pvalue("a × b"), rel=1e-9)


def test_two_way_single_row_cell():
    """A cell with one row: with the interaction its deletion leaves an empty cell (status 4, like the engine's
    refusal); in the additive model it is refitted directly (anova_lm typ=2 check)."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    df = _two_way(3, 30)
    df.loc[(df.a == "z") & (df.b == "q"), "b"] = "p"
    df.loc[0, ["a", "b"]] = ["z", "q"]
    full = case_deletion_scan(ex.Study(df, "y", ["a", "b"]))
    frame = full.to_frame().set_index("row")
    assert pd.isna(frame.loc[0, "F"]) and "cannot be fitted" in frame.loc[0, "note"]
    assert any("empties cell" in n for n in full.notes)
    additive = case_deletion_scan(ex.Study(df, "y", ["a", "b"], interactions=False), term="a")
    d = df.drop(index=0)
    table = anova_lm(smf.ols("y ~ C(a) + C(b)", d.assign(y=d.y - 1e6)).fit(), typ=2)
    j = additive.row_ids.tolist().index(0)
    assert additive.pvalue[j] == pytest.approx(table.loc["C(a)", "PR(>F)"], rel=1e-9)


@settings(max_examples=25, deadline=None)
@given(
    sizes=st.lists(st.integers(min_value=1, max_value=6), min_size=2, max_size=5),
    seed=st.integers(min_value=0, max_value=10_000),
    offset=st.sampled_from([0.0, 1e3, 1e7]),
)
def test_property_every_deletion_matches_f_oneway(sizes, seed, offset):
    """Hypothesis-generated groups of 1 to 6 rows (offsets up to 1e7): each deletion equals a scipy f_oneway refit,
    or has a stated reason where f_oneway has no answer (fewer than two groups, no residual df)."""
    if sum(sizes) - len(sizes) < 1:
        return  # the study itself has no residual df
    rng = np.random.default_rng(seed)
    g = np.repeat([f"g{i}" for i in range(len(sizes))], sizes)
    df = pd.DataFrame({"g": g, "y": offset + np.round(rng.normal(size=g.size) * 16) / 16})
    if df.groupby("g")["y"].apply(lambda v: np.ptp(v.to_numpy())).max() == 0:
        return  # zero residual: no F to compare
    scan = case_deletion_scan(ex.Study(df, "y", "g"))
    for j, row in enumerate(scan.row_ids.tolist()):
        d = df.drop(index=row)
        groups = [v.to_numpy() - offset for _, v in d.groupby("g")["y"]]
        if len(groups) < 2 or sum(len(v) for v in groups) - len(groups) < 1:
            assert scan.status[j] in (1, 2) and np.isnan(scan.pvalue[j])
            continue
        if sum(((v - v.mean()) ** 2).sum() for v in groups) == 0:
            assert scan.status[j] == 3
            continue
        ref = stats.f_oneway(*groups)
        assert scan.statistic[j] == pytest.approx(ref.statistic, rel=1e-9)
        assert scan.pvalue[j] == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-300)
