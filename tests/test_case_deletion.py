"""Case-deletion scan: row-by-row agreement with brute-force refits (scipy.stats.f_oneway)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.core.case_deletion import case_deletion_scan
from explorer.core.errors import DesignError


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
    assert study.results.significant()
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


def test_two_factor_study_is_refused_clearly():
    """One-factor scan only: a two-factor study gets a DesignError naming the factors."""
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"a": list("xy") * 10, "b": list("ppqq") * 5, "y": rng.normal(size=20)})
    with pytest.raises(DesignError, match="one-factor"):
        case_deletion_scan(ex.Study(df, "y", ["a", "b"]))


def test_study_methods_return_the_same_scans():
    """Study.case_deletion / flip_finder / regroup_scan / robustness_sweep / influence are thin wrappers."""
    df = _data(5)
    study = ex.Study(df, "y", "g")
    a = study.case_deletion()
    b = case_deletion_scan(study)
    np.testing.assert_array_equal(a.pvalue, b.pvalue)
    assert study.flip_finder().method in ("exact", "greedy")
    assert study.regroup_scan(moves=False).merge_levels
    assert study.robustness_sweep(tests=["classic"], transforms=["none"]).n_specifications == 4
    assert study.influence().n == len(df)
