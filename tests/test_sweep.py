"""Robustness sweep: every specification recomputed with scipy/statsmodels; counts, shares and the single choices."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

import explorer as ex
from explorer.engine.errors import ExplorerError
from explorer.sensitivity.sweep import robustness_sweep


def _data() -> pd.DataFrame:
    rng = np.random.default_rng(5)
    g = np.repeat(["L1", "L2", "L3", "L4"], [12, 15, 10, 13])
    y = 20 + rng.normal(size=g.size) * 1.5 + np.repeat([0.0, 1.2, 1.0, 0.2], [12, 15, 10, 13])
    y[3] += 9.0
    y[30] -= 7.0
    return pd.DataFrame({"g": g, "y": y})


def _rebuild(df: pd.DataFrame, spec: pd.Series, formula: str) -> tuple[pd.DataFrame, np.ndarray]:
    """The table of one specification (transform, merges) and the rows its outlier rule flags (statsmodels)."""
    d = df.copy()
    if spec["transform"] == "log":
        d["y"] = np.log(d["y"])
    if spec["merges"] != "none":
        for m in spec["merges"].split("; "):
            d.loc[d.g.isin(m.split("+")), "g"] = m
    fit = smf.ols(formula, d).fit()
    oi = OLSInfluence(fit)
    flag = np.zeros(len(d), dtype=bool)
    if spec["outlier rule"] == "studentized":
        flag = np.abs(oi.resid_studentized_external) > 3
    elif spec["outlier rule"] == "cooks":
        flag = oi.cooks_distance[0] > 4 / len(d)
    elif spec["outlier rule"] == "outlier_test":
        flag = fit.outlier_test(method="bonf")["bonf(p)"].to_numpy() < 0.05
    return d, flag


def _reference(df: pd.DataFrame, spec: pd.Series) -> tuple[list[int], float]:
    """Rebuild one specification with pandas and compute it with statsmodels/scipy."""
    d, flag = _rebuild(df, spec, "y ~ C(g)")
    kept = d[~flag]
    groups = [v.to_numpy() for _, v in kept.groupby("g")["y"]]
    if spec["test"] == "classic":
        p = stats.f_oneway(*groups).pvalue
    elif spec["test"] == "welch":
        p = stats.f_oneway(*groups, equal_var=False).pvalue
    else:
        p = stats.kruskal(*groups).pvalue
    return sorted(np.flatnonzero(flag).tolist()), float(p)


def test_every_specification_matches_reference_libraries():
    """Rows left out: statsmodels OLSInfluence / outlier_test(method='bonf'); p: scipy f_oneway (classic and
    equal_var=False for Welch) and scipy kruskal; all 4 x 3 x 2 x 4 = 96 combinations are computed by the
    reference, and the sweep's distinct analyses are exactly the distinct (test, merges, rows, p) of the
    reference: a rank test on the log equals the rank test on the raw response (Kruskal and Wallis 1952: H
    reads the ranks only), and rules that leave out the same rows give one analysis."""
    import itertools

    df = _data()
    study = ex.Study(df, "y", "g")
    sweep = robustness_sweep(study, merges=[["L2", "L3"], ["L1", "L4"]])
    assert sweep.n_combinations == 96 and sweep.n_specifications == len(sweep.table)
    for _, spec in sweep.table.iterrows():
        rows, p = _reference(df, spec)
        assert sorted(spec["rows left out"]) == rows, spec.to_dict()
        assert spec["p-value"] == pytest.approx(p, rel=1e-9), spec.to_dict()
    assert any(len(r) for r in sweep.table["rows left out"])
    distinct = set()
    for rule, test, transform, merges in itertools.product(
            ["none", "studentized", "cooks", "outlier_test"], ["classic", "welch", "kruskal"], ["none", "log"],
            ["none", "L2+L3", "L1+L4", "L2+L3; L1+L4"]):
        combo = pd.Series({"outlier rule": rule, "test": test, "transform": transform, "merges": merges})
        rows, p = _reference(df, combo)
        distinct.add((test, merges, tuple(rows), float(f"{p:.10g}")))
    assert sweep.n_specifications == len(distinct) < 96
    assert study.disclosure.specifications == sweep.n_specifications


def test_summaries_follow_the_table():
    """Share agreeing, ranks and the single-choice table are read off the specification table."""
    df = _data()
    study = ex.Study(df, "y", "g")
    sweep = robustness_sweep(study, merges=[["L2", "L3"]])
    t = sweep.table
    assert sweep.n_combinations == 4 * 3 * 2 * 2 and len(t) == sweep.n_specifications < sweep.n_combinations
    current = study.decision.significant
    assert sweep.share_agreeing == pytest.approx(((t["p-value"] < 0.05) == current).mean())
    assert t["rank"].tolist() == list(range(1, len(t) + 1))
    assert t["p-value"].is_monotonic_increasing
    default = t[(t["outlier rule"] == "none") & (t["test"] == "classic") & (t["transform"] == "none") & (t["merges"] == "none")]
    assert sweep.default_pvalue == pytest.approx(float(default["p-value"].iloc[0]))
    assert sweep.default_pvalue == pytest.approx(study.results.pvalue(), rel=1e-12)
    sc = sweep.single_choice
    assert len(sc) == 3 + 2 + 1 + 1
    best = sweep.strongest_choice
    assert abs(best["change in log10 p"]) == pytest.approx(sc["change in log10 p"].abs().max())
    assert "Robustness sweep" in sweep._repr_html_()


def test_log_left_out_when_response_not_positive():
    """A zero in the response: no log specifications, and a note says why."""
    df = _data()
    df.loc[0, "y"] = 0.0
    sweep = robustness_sweep(ex.Study(df, "y", "g"), tests=["classic"])
    assert set(sweep.table["transform"]) == {"none"}
    assert any("Log transform left out" in n for n in sweep.notes)


def test_counts_and_bad_options():
    """The specifications computed are added to the disclosure; unknown options and levels are refused clearly."""
    study = ex.Study(_data(), "y", "g")
    sweep = robustness_sweep(study, outlier_rules=["none", "cooks"], tests=["classic", "kruskal"], transforms=["none"])
    assert sweep.n_specifications == 4 and study.disclosure.specifications == 4
    with pytest.raises(ExplorerError, match="tests must be"):
        robustness_sweep(study, tests=["anova"])
    with pytest.raises(ExplorerError, match="no level 'L9'"):
        robustness_sweep(study, merges=[["L1", "L9"]])


def test_two_way_sweep_matches_statsmodels():
    """Two-way with interaction: each specification (outlier rule on that model's OLSInfluence / outlier_test, log or
    not, merges of the first factor) against statsmodels anova_lm(typ=2) of the rebuilt table, p of C(g) to 1e-9."""
    from statsmodels.stats.anova import anova_lm

    df = _data()
    df["s"] = np.tile(["day", "night"], len(df) // 2)
    study = ex.Study(df, "y", ["g", "s"])
    sweep = robustness_sweep(study, merges=[["L2", "L3"]])
    assert sweep.n_combinations == 4 * 1 * 2 * 2 and set(sweep.table["test"]) == {"classic"}
    assert sweep.n_specifications == len(sweep.table) < sweep.n_combinations  # rules that flag the same rows
    assert any("one-factor tests" in n for n in sweep.notes)
    for _, spec in sweep.table.iterrows():
        d, flag = _rebuild(df, spec, "y ~ C(g) * C(s)")
        assert sorted(spec["rows left out"]) == np.flatnonzero(flag).tolist()
        ref = anova_lm(smf.ols("y ~ C(g) * C(s)", d[~flag]).fit(), typ=2).loc["C(g)", "PR(>F)"]
        assert spec["p-value"] == pytest.approx(ref, rel=1e-9)
    assert study.edits == ()


def test_rank_test_on_the_log_is_the_same_analysis():
    """Ranks are unchanged by the log, so 'rank test, log' is 'rank test, none' (Kruskal and Wallis
    1952): 2 tests x 2 transforms are 3 distinct analyses, the rank line says which choice coincides,
    the disclosure counts 3, and the p-values equal scipy.stats.kruskal on the raw and the logged data."""
    df = _data()
    study = ex.Study(df, "y", "g")
    sweep = robustness_sweep(study, outlier_rules=["none"], tests=["classic", "kruskal"])
    t = sweep.table
    assert sweep.n_combinations == 4 and sweep.n_specifications == 3 == len(t)
    assert study.disclosure.specifications == 3
    rank = t[t["test"] == "kruskal"]
    assert len(rank) == 1 and rank["transform"].iloc[0] == "none"
    assert "transform log" in rank["also reached by"].iloc[0] and "monotone" in rank["also reached by"].iloc[0]
    groups = [v.to_numpy() for _, v in df.groupby("g")["y"]]
    assert stats.kruskal(*groups).pvalue == pytest.approx(stats.kruskal(*map(np.log, groups)).pvalue, rel=1e-12)
    assert float(rank["p-value"].iloc[0]) == pytest.approx(stats.kruskal(*groups).pvalue, rel=1e-9)
    assert any("4 combinations of choices are 3 distinct analyses" in n for n in sweep.notes)
    single = sweep.single_choice
    assert len(single[single["option"] == "log"]) == 1  # the single-choice view still has every option


def test_outlier_rule_that_leaves_out_no_row_is_the_same_analysis():
    """Evenly spread values (largest |studentized residual| well below 3): the studentized rule flags
    no row, so it is the analysis of every row (one line, 'no row left out')."""
    df = pd.DataFrame({"g": np.repeat(["a", "b", "c"], 10),
                       "y": 50 + np.tile(np.linspace(-1, 1, 10), 3) + np.repeat([0.0, 0.3, 0.1], 10)})
    study = ex.Study(df, "y", "g")
    sweep = robustness_sweep(study, outlier_rules=["none", "studentized"], tests=["classic"], transforms=["none"])
    assert sweep.n_combinations == 2 and sweep.n_specifications == 1
    assert "no row left out" in sweep.table["also reached by"].iloc[0]
