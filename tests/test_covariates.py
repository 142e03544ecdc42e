"""Analysis of covariance: the study with covariates, its checks, adjusted means, edits and scans.

Outside references (statsmodels 0.15): ``ols('y ~ pre + C(nozzle, Sum)')`` with ``anova_lm``
types 1 (covariate entered first), 2 and 3; the homogeneity-of-slopes F as statsmodels'
``compare_f_test`` of ``y ~ C(nozzle) * pre`` against ``y ~ C(nozzle) + pre``; least-squares
(adjusted) means as ``t_test`` of the fitted model at the covariate mean. Adjusted means by
hand: ``ybar_i - b_w (xbar_i - xbar)``, b_w the pooled within-level slope
``sum_i S_xy,i / sum_i S_xx,i`` (Montgomery, Design and Analysis of Experiments, sec. 15.3,
the adjusted treatment means; formula from memory). Case deletion against statsmodels refits
with each row left out. HC3 tests with the covariate against ``anova_lm(robust='hc3')``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.errors import ColumnError, DataError, DesignError, ExplorerError
from explorer.inference.contrasts import contrasts
from explorer.inference.robust_terms import hc3_tests


def coating(seed=0, n=(9, 10, 11), slope=0.3, slopes=None) -> pd.DataFrame:
    """Invented scenario: coating thickness by nozzle, adjusted for the panel's thickness before coating."""
    rng = np.random.default_rng(seed)
    rows = []
    for j, (lev, m) in enumerate(zip("ABC", n)):
        b = slope if slopes is None else slopes[j]
        for _ in range(m):
            pre = rng.normal(50 + 2 * j, 5)
            rows.append({"nozzle": lev, "pre_thickness": round(pre, 2),
                         "thickness": round(10 + b * pre + 0.8 * (lev == "B") + rng.normal(0, 1), 3)})
    return pd.DataFrame(rows)


def test_sequential_enters_the_covariate_first():
    """Type I: covariate, then treatment (differences of statsmodels OLS residual sums; patsy itself would put the
    categorical term first)."""
    df = coating()
    res = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"], ss_type="I").results
    ssr = {f: smf.ols(f"thickness ~ {f}", df).fit().ssr for f in ("1", "pre_thickness", "pre_thickness + C(nozzle)")}
    assert res.partition.row("pre_thickness").sum_sq == pytest.approx(ssr["1"] - ssr["pre_thickness"], rel=1e-9)
    assert res.partition.row("nozzle").sum_sq == pytest.approx(
        ssr["pre_thickness"] - ssr["pre_thickness + C(nozzle)"], rel=1e-9)


@pytest.mark.parametrize("typ", ["II", "III"])
def test_partition_matches_statsmodels(typ):
    df = coating()
    res = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"], ss_type=typ).results
    fit = smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", df).fit()
    ref = anova_lm(fit, typ={"II": 2, "III": 3}[typ])
    for ours, theirs in (("nozzle", "C(nozzle, Sum)"), ("pre_thickness", "pre_thickness")):
        row = res.partition.row(ours)
        assert row.sum_sq == pytest.approx(ref.loc[theirs, "sum_sq"], rel=1e-9)
        assert row.statistic == pytest.approx(ref.loc[theirs, "F"], rel=1e-9)
        assert row.pvalue == pytest.approx(ref.loc[theirs, "PR(>F)"], rel=1e-8)
    assert res.df_resid == fit.df_resid
    assert res.ms_resid == pytest.approx(fit.mse_resid, rel=1e-10)
    np.testing.assert_allclose(res.fit.residuals, fit.resid.to_numpy(), atol=1e-9)
    np.testing.assert_allclose(res.fit.leverage, fit.get_influence().hat_matrix_diag, rtol=1e-9)


def test_slope_check_is_stated_first_and_matches_statsmodels():
    df = coating(slopes=(0.1, 0.3, 0.6))
    res = ex.Study(df, "thickness", "nozzle", covariates="pre_thickness").results
    wide = smf.ols("thickness ~ C(nozzle) * pre_thickness", df).fit()
    narrow = smf.ols("thickness ~ C(nozzle) + pre_thickness", df).fit()
    f, p, dfn = wide.compare_f_test(narrow)
    check = res.covariates.slope_check
    assert check.statistic == pytest.approx(f, rel=1e-9) and check.pvalue == pytest.approx(p, rel=1e-8)
    assert check.df_num == dfn
    assert res.notes[0].startswith("Homogeneity of slopes, checked before the adjusted test")
    assert res.partition.notes[0] == res.notes[0]
    assert check.slopes_differ and "covariate mean only" in check.sentence()


def test_adjusted_means_by_hand_and_tukey_kramer():
    df = coating()
    res = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"]).results
    xbar = df.pre_thickness.mean()
    sxy = sxx = 0.0
    for _, g in df.groupby("nozzle"):
        dx = g.pre_thickness - g.pre_thickness.mean()
        sxy += float((dx * (g.thickness - g.thickness.mean())).sum())
        sxx += float((dx * dx).sum())
    b = sxy / sxx
    hand = [g.thickness.mean() - b * (g.pre_thickness.mean() - xbar) for _, g in df.groupby("nozzle")]
    mm = res.marginal_means["nozzle"]
    np.testing.assert_allclose(mm.estimate, hand, rtol=1e-12)
    assert res.covariates.slope[0] == pytest.approx(b, rel=1e-12)
    fit = smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", df).fit()
    L = np.array([[1, xbar, 1, 0], [1, xbar, 0, 1], [1, xbar, -1, -1]])
    cols = ["Intercept", "pre_thickness", "C(nozzle, Sum)[S.A]", "C(nozzle, Sum)[S.B]"]
    L = L[:, [cols.index(c) for c in fit.params.index]]
    ref = fit.t_test(L)
    np.testing.assert_allclose(mm.se, np.ravel(ref.sd), rtol=1e-9)
    table = res.compare_means("nozzle")
    ab = table.pair("A", "B")
    assert abs(ab["difference"]) == pytest.approx(abs(hand[0] - hand[1]), rel=1e-10)
    # contrasts read the adjusted means
    c = contrasts(res, "nozzle", {"A": -1, "C": 1})
    assert c.means == "adjusted means"
    assert c.estimate[0] == pytest.approx(hand[2] - hand[0], rel=1e-10)


def test_two_factors_with_a_covariate():
    rng = np.random.default_rng(3)
    df = pd.DataFrame({"A": np.repeat(list("ab"), 12), "B": np.tile(list("xyz"), 8), "x": rng.normal(0, 1, 24)})
    df["y"] = 1 + 0.5 * df.x + (df.A == "b") + rng.normal(0, 0.5, 24)
    df = df.drop(index=[0, 7])
    res = ex.Study(df, "y", ["A", "B"], covariates=["x"]).results
    ref = anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum) + x", df).fit(), typ=2)
    assert res.partition.row("A × B").statistic == pytest.approx(ref.loc["C(A, Sum):C(B, Sum)", "F"], rel=1e-9)
    assert res.partition.row("x").pvalue == pytest.approx(ref.loc["x", "PR(>F)"], rel=1e-8)


def test_edits_and_save_replay(tmp_path):
    df = coating()
    csv = tmp_path / "c.csv"
    df.to_csv(csv, index=False)
    study = ex.Study(csv, "thickness", "nozzle", covariates=["pre_thickness"])
    study.drop([3, 12], reason="invented: panels scratched before coating")
    ref = anova_lm(smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", df.drop(index=[3, 12])).fit(), typ=2)
    assert study.results.pvalue("nozzle") == pytest.approx(ref.loc["C(nozzle, Sum)", "PR(>F)"], rel=1e-8)
    doc = study.to_dict()
    assert doc["spec"]["covariates"] == ["pre_thickness"]
    again = ex.Study.from_dict(doc, csv)
    assert again.results.pvalue("nozzle") == study.results.pvalue("nozzle")
    assert "covariates=['pre_thickness']" in study.to_code()
    changed = df.copy()
    changed.loc[5, "pre_thickness"] += 1
    with pytest.raises(ExplorerError, match="differ|changed"):
        ex.Study.from_dict(doc, changed)


def test_missing_and_bad_covariates():
    df = coating()
    df.loc[4, "pre_thickness"] = np.nan
    study = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"])
    assert any(s.row == 4 and "missing pre_thickness" in s.reason for s in study.set_aside)
    bad = coating()
    bad["pre_thickness"] = bad["pre_thickness"].astype(object)
    bad.loc[2, "pre_thickness"] = "thick"
    with pytest.raises(DataError, match="non-numeric"):
        ex.Study(bad, "thickness", "nozzle", covariates=["pre_thickness"])
    with pytest.raises(ColumnError, match="not in the table"):
        ex.Study(coating(), "thickness", "nozzle", covariates=["pre_thicknes"])
    with pytest.raises(ExplorerError, match="covariate"):
        ex.Study(coating(), "thickness", "nozzle", covariates=["nozzle"])
    flat = coating()
    flat["pre_thickness"] = 5.0
    with pytest.raises(DesignError, match="one value"):
        ex.Study(flat, "thickness", "nozzle", covariates=["pre_thickness"])


def test_case_deletion_by_downdate_matches_refits():
    df = coating(n=(6, 7, 8))
    study = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"])
    scan = study.case_deletion()
    assert "downdate" in scan.how
    for i in range(len(df)):
        ref = anova_lm(smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", df.drop(index=i)).fit(), typ=2)
        assert scan.statistic[i] == pytest.approx(ref.loc["C(nozzle, Sum)", "F"], rel=1e-9)
        assert scan.term_pvalues["pre_thickness"][i] == pytest.approx(ref.loc["pre_thickness", "PR(>F)"], rel=1e-8)


def test_scans_with_covariates():
    df = coating()
    study = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"])
    infl = study.influence()
    fit = smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", df).fit()
    np.testing.assert_allclose(infl.to_frame()["Cook's distance"].to_numpy(),
                               fit.get_influence().cooks_distance[0], rtol=1e-8)
    sweep = study.robustness_sweep(outlier_rules=["none"], merges=[["A", "C"]], record=False)
    merged = df.assign(nozzle=df.nozzle.replace({"A": "A+C", "C": "A+C"}))
    ref = anova_lm(smf.ols("thickness ~ pre_thickness + C(nozzle, Sum)", merged).fit(), typ=2)
    row = sweep.table[(sweep.table["merges"] == "A+C") & (sweep.table["transform"] == "none")].iloc[0]
    assert row["p-value"] == pytest.approx(ref.loc["C(nozzle, Sum)", "PR(>F)"], rel=1e-8)
    with pytest.raises(ExplorerError, match="covariate"):
        study.regroup_scan()
    flip = study.flip_finder()
    assert flip.term == "nozzle"


def test_hc3_with_the_covariate():
    df = coating()
    res = ex.Study(df, "thickness", "nozzle", covariates=["pre_thickness"]).results
    r = hc3_tests(res)
    ref = anova_lm(smf.ols("thickness ~ C(nozzle, Sum) + pre_thickness", df).fit(), typ=2, robust="hc3")
    got = dict(zip(r.terms, r.statistic))
    assert got["nozzle"] == pytest.approx(ref.loc["C(nozzle, Sum)", "F"], rel=1e-9)
    assert got["pre_thickness"] == pytest.approx(ref.loc["pre_thickness", "F"], rel=1e-9)


def test_report_and_widget_with_covariates(tmp_path):
    pytest.importorskip("ipywidgets")
    from explorer.widget.panels import PANELS, PanelContext, Settings

    study = ex.Study(coating(), "thickness", "nozzle", covariates=["pre_thickness"])
    study.contrast("nozzle", "control", control="A")
    page = study.report(tmp_path / "r.html").read_text()
    assert "Homogeneity of slopes, checked before the adjusted test" in page
    assert "adjusted means of nozzle" in page
    ctx = PanelContext(study=study, settings=Settings())
    for key, p in PANELS.items():
        if key in ("overall_tests", "planned_analyses", "partition_table"):
            out = p.build(ctx)
            assert out is None or "Traceback" not in str(out)
