"""Simple effects with the full model's residual mean square (checked against statsmodels OLS f_test)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import patsy
import pytest
import statsmodels.formula.api as smf
from decision_support import ADDITIVE, CROSSOVER
from statsmodels.stats.multitest import multipletests

import explorer as ex
from explorer.engine.errors import ExplorerError


def _reference(df: pd.DataFrame, formula: str, factor: str, within: str, averaged: dict[str, list[str]] | None = None
               ) -> tuple[list[float], list[float], dict]:
    """statsmodels OLS of the full model; at each level of ``within`` the Wald F test (model.f_test) that the
    least-squares means of ``factor`` are equal, the means averaged with equal weight over ``averaged``."""
    fit = smf.ols(formula, df).fit()
    info = fit.model.data.model_spec  # the patsy DesignInfo of the fitted formula
    fa = sorted(df[factor].unique())
    fb = sorted(df[within].unique())
    extra = averaged or {}
    grid_other = pd.MultiIndex.from_product(list(extra.values()), names=list(extra)).to_frame(index=False) if extra \
        else pd.DataFrame(index=[0])
    rows = {}
    for a in fa:
        for b in fb:
            new = grid_other.assign(**{factor: a, within: b, "y": 0.0})
            (x,) = patsy.build_design_matrices([info], new)
            rows[(a, b)] = np.asarray(x).mean(axis=0)
    f_vals, p_vals = [], []
    for b in fb:
        L = np.array([rows[(a, b)] - rows[(fa[-1], b)] for a in fa[:-1]])
        t = fit.f_test(L)
        f_vals.append(float(np.squeeze(t.fvalue)))
        p_vals.append(float(t.pvalue))
    means = {k: float(v @ fit.params.to_numpy()) for k, v in rows.items()}
    return f_vals, p_vals, means


def _unbalanced(seed: int = 3) -> pd.DataFrame:
    """Every cell of 3 x 4 x 2 twice, plus 30 rows at random cells (unbalanced)."""
    rng = np.random.default_rng(seed)
    grid = pd.MultiIndex.from_product([["a1", "a2", "a3"], ["b1", "b2", "b3", "b4"], ["w1", "w2"], [0, 1]],
                                      names=["A", "B", "W", "r"]).to_frame(index=False).drop(columns="r")
    extra = grid.sample(30, replace=True, random_state=seed)
    df = pd.concat([grid, extra], ignore_index=True)
    effect = {("a1", "b1"): 2.0, ("a2", "b2"): -1.5, ("a3", "b4"): 1.0}
    df["y"] = 50 + rng.normal(size=len(df)) + [effect.get((a, b), 0.0) for a, b in zip(df.A, df.B)]
    return df


def test_crossover_matches_statsmodels():
    """Balanced crossover: F, p and least-squares cell means equal statsmodels OLS f_test on the full model
    (y ~ C(A, Sum) * C(B, Sum)); Holm-adjusted p-values equal multipletests(method='holm')."""
    se = ex.Study(CROSSOVER, "y", ["A", "B"]).simple_effects("A", within="B")
    f, p, means = _reference(CROSSOVER, "y ~ C(A, Sum) * C(B, Sum)", "A", "B")
    np.testing.assert_allclose(se.statistic, f, rtol=1e-9)
    np.testing.assert_allclose(se.pvalue, p, rtol=1e-9)
    np.testing.assert_allclose(se.adjusted_pvalue, multipletests(p, method="holm")[1], rtol=1e-12)
    got = {(r.A, r.B): r._5 for r in se.cells.itertuples()}
    for key, v in means.items():
        assert got[key] == pytest.approx(v, rel=1e-12)
    assert se.significant.all() and se.adjustment == "holm" and se.family_size == 2
    assert se.interaction == "A × B" and se.interaction_pvalue == pytest.approx(6.07e-8, rel=1e-2)
    assert "full model's residual mean square" in se.notes[-1]


def test_unbalanced_three_factors_average_over_the_third():
    """Unbalanced 3 x 4 x 2 with every interaction: tests of A within B (means averaged over W) and of B within A
    against statsmodels OLS f_test of the full model y ~ C(A, Sum) * C(B, Sum) * C(W, Sum)."""
    df = _unbalanced()
    study = ex.Study(df, "y", ["A", "B", "W"])
    formula = "y ~ C(A, Sum) * C(B, Sum) * C(W, Sum)"
    for factor, within in (("A", "B"), ("B", "A")):
        se = study.simple_effects(factor, within=within, adjust="bonferroni")
        f, p, means = _reference(df, formula, factor, within, {"W": ["w1", "w2"]})
        np.testing.assert_allclose(se.statistic, f, rtol=1e-8)
        np.testing.assert_allclose(se.pvalue, p, rtol=1e-8)
        np.testing.assert_allclose(se.adjusted_pvalue, np.minimum(np.asarray(p) * len(p), 1), rtol=1e-12)
        col = "mean (least squares)"
        for _, r in se.cells.iterrows():
            assert r[col] == pytest.approx(means[(r[factor], r[within])], rel=1e-10)
        assert se.df_den == len(df) - 24 and se.family_size == df[within].nunique()


def test_blocks_and_additive_models():
    """With a block the means average over it (statsmodels f_test, y ~ C(A, Sum) * C(B, Sum) + C(day, Sum)); with
    no interaction term every level gives the same F numerator direction and a note says so."""
    df = _unbalanced(5).rename(columns={"W": "day"})
    se = ex.Study(df, "y", ["A", "B"], blocks="day").simple_effects("A", within="B", adjust="none")
    f, p, _ = _reference(df, "y ~ C(A, Sum) * C(B, Sum) + C(day, Sum)", "A", "B", {"day": ["w1", "w2"]})
    np.testing.assert_allclose(se.statistic, f, rtol=1e-8)
    np.testing.assert_allclose(se.adjusted_pvalue, p, rtol=1e-8)
    add = ex.Study(ADDITIVE, "y", ["A", "B"], interactions=False).simple_effects("A", within="B")
    f, p, _ = _reference(ADDITIVE, "y ~ C(A, Sum) + C(B, Sum)", "A", "B")
    np.testing.assert_allclose(add.statistic, f, rtol=1e-9)
    assert add.interaction is None and any("no A × B term" in n for n in add.notes)


def test_intervals_follow_alpha_and_bad_requests_are_refused():
    """Cell-mean intervals at 1 - alpha (t quantile on the residual df, scipy.stats.t)."""
    from scipy import stats

    study = ex.Study(CROSSOVER, "y", ["A", "B"], alpha=0.01)
    se = study.simple_effects("B", within="A")
    half = stats.t.ppf(0.995, se.df_den) * se.cells["standard error"]
    np.testing.assert_allclose(se.cells["99% CI high"] - se.cells["mean (least squares)"], half, rtol=1e-10)
    with pytest.raises(ExplorerError, match="not a treatment factor"):
        study.simple_effects("C", within="A")
    with pytest.raises(ExplorerError, match="two different factors"):
        study.simple_effects("A", within="A")
    with pytest.raises(ExplorerError, match="adjust must be one of"):
        study.simple_effects("A", within="B", adjust="tukey")
    with pytest.raises(ExplorerError, match="two or more factors"):
        ex.Study(CROSSOVER, "y", "A").simple_effects("A", within="B")
    assert "Simple effects of B" in se._repr_html_() and len(se.verdicts()) == 2


def test_chart_report_text_and_widget_show_the_interaction():
    """The chart draws the simple-effects cell means (chart.to_dict data = the table); the report, the command-line
    text and the widget's Tests tab show them for the decision's pair of factors."""
    from explorer import charts
    from explorer.report import report_html
    from explorer.report.text_summary import summary_text

    study = ex.Study(CROSSOVER, "y", ["A", "B"])
    assert study.decision.simple_effects_pair == ("A", "B")
    effects = study.simple_effects("A", within="B")
    spec = charts.interaction_chart(effects).to_dict()
    data = next(iter(spec["datasets"].values()))
    assert [round(d["mean"], 12) for d in data] == [round(v, 12) for v in effects.cells["mean (least squares)"]]
    assert "A × B: p = 6.07e-08." in spec["title"]["subtitle"]
    page = report_html(study, charts=False)
    assert "id='interaction'" in page and "Simple effects of A at each level of B" in page
    text = summary_text(study, cautions=False)
    assert "Simple effects of A at each level of B" in text and "A at B = b1: differences detected" in text
    e = ex.Explorer(study)
    e.tabs.selected_index = e._tab_groups.index("Tests")
    assert e.cards["interaction"].chart is not None
    assert "Simple effects of A" in e.cards["simple_effects"].html.value
    one = ex.Study(CROSSOVER, "y", "A")
    assert one.decision.simple_effects_pair is None and "id='interaction'" not in report_html(one, charts=False)


def _pair_reference(df: pd.DataFrame, formula: str, factor: str, within: str,
                    averaged: dict[str, list[str]] | None = None) -> pd.DataFrame:
    """statsmodels OLS of the full model; every pair of ``factor`` levels at each level of ``within`` by
    model.t_test of the difference of the two least-squares means (rows of the design averaged as above)."""
    fit = smf.ols(formula, df).fit()
    info = fit.model.data.model_spec
    fa, fb = sorted(df[factor].unique()), sorted(df[within].unique())
    extra = averaged or {}
    grid_other = pd.MultiIndex.from_product(list(extra.values()), names=list(extra)).to_frame(index=False) if extra \
        else pd.DataFrame(index=[0])
    rows = {}
    for a in fa:
        for b in fb:
            (x,) = patsy.build_design_matrices([info], grid_other.assign(**{factor: a, within: b, "y": 0.0}))
            rows[(a, b)] = np.asarray(x).mean(axis=0)
    out = []
    for b in fb:
        for i, a1 in enumerate(fa):
            for a2 in fa[i + 1:]:
                t = fit.t_test(rows[(a1, b)] - rows[(a2, b)])
                out.append({"within": b, "first": a1, "second": a2, "difference": float(np.squeeze(t.effect)),
                            "se": float(np.squeeze(t.sd)), "t": float(np.squeeze(t.tvalue)),
                            "p": float(np.squeeze(t.pvalue)), "df": float(fit.df_resid)})
    return pd.DataFrame(out)


@pytest.mark.parametrize("adjust", ["holm", "bonferroni", "none"])
def test_pairs_within_simple_effects_match_statsmodels(adjust):
    """Unbalanced 3 x 4 x 2 (means averaged over W): every pair of A at each level of B equals statsmodels OLS
    t_test of the same contrast (difference, SE, t, p to 1e-9); the adjustment over the one family of 12
    comparisons equals multipletests; Bonferroni intervals at 1 - alpha from scipy.stats.t."""
    from scipy import stats

    df = _unbalanced()
    study = ex.Study(df, "y", ["A", "B", "W"])
    pairs = study.simple_effects("A", within="B").pairs(adjust=adjust)
    ref = _pair_reference(df, "y ~ C(A, Sum) * C(B, Sum) * C(W, Sum)", "A", "B", {"W": ["w1", "w2"]})
    got = pairs.to_frame()
    assert list(zip(got["B"], got["first"], got["second"])) == list(zip(ref.within, ref["first"], ref.second))
    np.testing.assert_allclose(got["difference"], ref.difference, rtol=1e-9)
    np.testing.assert_allclose(got["standard error"], ref.se, rtol=1e-9)
    np.testing.assert_allclose(got["t"], ref.t, rtol=1e-9)
    np.testing.assert_allclose(got["p-value"], ref.p, rtol=1e-9)
    want = ref.p.to_numpy() if adjust == "none" else multipletests(ref.p, method=adjust)[1]
    np.testing.assert_allclose(got[f"p-value ({adjust})"], want, rtol=1e-9)
    m = 1 if adjust == "none" else 12
    crit = stats.t.ppf(1 - 0.05 / 2 / m, ref.df.iloc[0])
    np.testing.assert_allclose(got["95% CI low"], ref.difference - crit * ref.se, rtol=1e-9)
    assert pairs.family_size == 12 and pairs.df == int(ref.df.iloc[0])
    assert ("one family of 12" in pairs.family) == (adjust != "none")


def test_pairs_tukey_per_level_on_the_crossover():
    """Balanced crossover with three levels of A: Tukey-Kramer at each level of B from the full model's residual
    mean square; p and the interval's critical value from scipy.stats.studentized_range with 3 means on the
    residual df; differences and SE equal statsmodels t_test; alpha 0.01 gives 99% intervals."""
    from scipy import stats

    rng = np.random.default_rng(4)
    grid = pd.MultiIndex.from_product([["a1", "a2", "a3"], ["b1", "b2"], range(4)], names=["A", "B", "r"])
    df = grid.to_frame(index=False).drop(columns="r")
    df["y"] = 10 + rng.normal(size=len(df)) + np.where(df.B == "b1", 1.0, -1.0) * (df.A == "a1") * 2
    study = ex.Study(df, "y", ["A", "B"], alpha=0.01)
    pairs = study.simple_effects("A", within="B").pairs(adjust="tukey")
    ref = _pair_reference(df, "y ~ C(A, Sum) * C(B, Sum)", "A", "B")
    got = pairs.to_frame()
    dfr = ref.df.iloc[0]
    np.testing.assert_allclose(got["difference"], ref.difference, rtol=1e-9)
    np.testing.assert_allclose(got["standard error"], ref.se, rtol=1e-9)
    np.testing.assert_allclose(got["p-value (tukey)"], stats.studentized_range.sf(np.sqrt(2) * np.abs(ref.t), 3, dfr),
                               rtol=1e-6)
    crit = stats.studentized_range.ppf(0.99, 3, dfr) / np.sqrt(2)
    np.testing.assert_allclose(got["99% CI high"], ref.difference + crit * ref.se, rtol=1e-6)
    assert pairs.family_size == 3 and "at each of the 2 levels of B" in pairs.family
    assert pairs.confidence == pytest.approx(0.99) and pairs.alpha == pytest.approx(0.01)
    with pytest.raises(ExplorerError, match="adjust must be one of"):
        study.simple_effects("A", within="B").pairs(adjust="scheffe")


def test_pairs_are_shown_beside_the_simple_effects_in_report_and_text():
    """The report section, the text summary (command line) and the widget's table carry the Holm pairs with their
    family stated; more than PAIRS_SHOWN comparisons are left to .pairs()."""
    from explorer.inference.simple_effects import PAIRS_SHOWN
    from explorer.report import report_html
    from explorer.report.text_summary import summary_text

    study = ex.Study(CROSSOVER, "y", ["A", "B"])
    effects = study.simple_effects("A", within="B")
    shown = effects.shown_pairs()
    assert shown is not None and shown.adjustment == "holm"
    assert shown.title in effects._repr_html_()
    assert shown.title in report_html(study, charts=False).replace("&#x27;", "'")
    assert shown.title in summary_text(study, cautions=False)
    grid = pd.MultiIndex.from_product([[f"a{i:02d}" for i in range(12)], ["b1", "b2"], range(2)],
                                      names=["A", "B", "r"]).to_frame(index=False)
    grid["y"] = np.random.default_rng(0).normal(size=len(grid))
    many = ex.Study(grid, "y", ["A", "B"]).simple_effects("A", within="B")
    assert 2 * 66 > PAIRS_SHOWN and many.shown_pairs() is None and len(many.pairs().to_frame()) == 132
