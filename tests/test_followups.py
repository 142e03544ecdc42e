"""Equivalence, two-level, rank and robust follow-ups.

Outside references (scipy 1.17, statsmodels 0.15, scikit-posthocs 0.17):
* two one-sided tests: two ``scipy.stats.ttest_ind`` one-sided calls shifted by the margin
  (``alternative='greater'`` on ``a - low`` and ``'less'`` on ``a - high``), and the
  1 - 2 alpha interval of ``scipy.stats.ttest_ind(...).confidence_interval``;
* Welch t and its interval: ``scipy.stats.ttest_ind(equal_var=False)``; Mann-Whitney:
  ``scipy.stats.mannwhitneyu`` (exact with small samples and no ties, asymptotic with ties);
* Dunn: ``scikit_posthocs.posthoc_dunn(p_adjust='holm')``;
* Friedman: ``scipy.stats.friedmanchisquare`` (with ties);
* trimmed means: two levels = Yuen's test, ``scipy.stats.ttest_ind(trim=0.2, equal_var=False)``
  (F = t^2, same df); three levels by hand from ``scipy.stats.trim_mean`` and
  ``scipy.stats.mstats.winsorize`` with Wilcox's formulas (Wilcox 2017, sec. 7.1);
* HC3: ``statsmodels.stats.anova.anova_lm(typ=2|3, robust='hc3')`` on ``C(x, Sum)`` fits.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scikit_posthocs as sp
import statsmodels.formula.api as smf
from scipy import stats
from scipy.stats import mstats
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.errors import DesignError, ExplorerError
from explorer.inference.equivalence import equivalence
from explorer.inference.rank_followups import dunn, friedman
from explorer.inference.robust_terms import hc3_tests
from explorer.inference.trimmed_means import trimmed_means_test
from explorer.inference.two_levels import mann_whitney, welch_t


def two_groups(seed=1, n=(9, 12), shift=0.3):
    rng = np.random.default_rng(seed)
    a = np.round(rng.normal(10 + shift, 1.0, n[0]), 2)
    b = np.round(rng.normal(10, 1.8, n[1]), 2)
    df = pd.DataFrame({"y": np.r_[a, b], "supplier": ["new"] * n[0] + ["current"] * n[1]})
    return a, b, df


def test_tost_pair_matches_two_one_sided_scipy_tests():
    """TOST = two scipy one-sided pooled t tests; the 90% interval = scipy's confidence_interval(0.90)."""
    a, b, df = two_groups()
    res = ex.Study(df, "y", "supplier").results
    t = equivalence(res, "supplier", margin=1.5, pairs=[("new", "current")])
    lo_test = stats.ttest_ind(a - (-1.5), b, alternative="greater")
    hi_test = stats.ttest_ind(a - 1.5, b, alternative="less")
    assert t.p_low[0] == pytest.approx(lo_test.pvalue, rel=1e-9)
    assert t.p_high[0] == pytest.approx(hi_test.pvalue, rel=1e-9)
    assert t.pvalue[0] == pytest.approx(max(lo_test.pvalue, hi_test.pvalue), rel=1e-9)
    ci = stats.ttest_ind(a, b).confidence_interval(0.90)
    assert (t.ci_low[0], t.ci_high[0]) == pytest.approx((ci.low, ci.high), rel=1e-10)
    assert bool(t.equivalent[0]) == (ci.low > -1.5 and ci.high < 1.5)
    asym = equivalence(res, "supplier", margin=(-0.5, 2.0), pairs=[("new", "current")])
    assert asym.p_low[0] == pytest.approx(stats.ttest_ind(a + 0.5, b, alternative="greater").pvalue, rel=1e-9)


def test_tost_vs_control_uses_the_pooled_error():
    """Each level vs a control, three levels: one-sided p-values from the pooled MSE (scipy.stats.t by hand)."""
    rng = np.random.default_rng(4)
    groups = {"c": rng.normal(5, 1, 8), "a": rng.normal(5.2, 1, 10), "b": rng.normal(6.5, 1, 7)}
    df = pd.DataFrame({"y": np.concatenate(list(groups.values())), "g": np.repeat(list(groups), [8, 10, 7])})
    res = ex.Study(df, "y", "g").results
    t = equivalence(res, "g", margin=1.0, control="c")
    mse, dfe = res.ms_resid, res.df_resid
    for i, lev in enumerate(t.first):
        d = groups[lev].mean() - groups["c"].mean()
        se = np.sqrt(mse * (1 / len(groups[lev]) + 1 / 8))
        assert t.p_low[i] == pytest.approx(stats.t.sf((d + 1) / se, dfe), rel=1e-9)
        assert t.p_high[i] == pytest.approx(stats.t.cdf((d - 1) / se, dfe), rel=1e-9)


def test_tost_refuses_missing_or_bad_margins():
    _, _, df = two_groups()
    res = ex.Study(df, "y", "supplier").results
    with pytest.raises(ExplorerError, match="does not propose"):
        equivalence(res, "supplier", margin=None, pairs=[("new", "current")])
    for bad in (0, -1, float("inf"), "1", (1, 2), (0.5, -0.5)):
        with pytest.raises(ExplorerError):
            equivalence(res, "supplier", margin=bad, pairs=[("new", "current")])
    with pytest.raises(ExplorerError, match="either"):
        equivalence(res, "supplier", margin=1)


def test_welch_t_and_interval_match_scipy():
    a, b, df = two_groups()
    res = ex.Study(df, "y", "supplier").results  # level order: current, new
    w = welch_t(res)
    ref = stats.ttest_ind(b, a, equal_var=False)
    assert w.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert w.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert w.df == pytest.approx(ref.df, rel=1e-12)
    ci = ref.confidence_interval(0.95)
    assert (w.ci_low, w.ci_high) == pytest.approx((ci.low, ci.high), rel=1e-10)


@pytest.mark.parametrize("n, rounding", [((6, 7), 4), ((9, 12), 2), ((30, 25), 1)])
def test_mann_whitney_matches_scipy(n, rounding):
    """Exact (no ties, small), asymptotic with ties: scipy.stats.mannwhitneyu (method='auto')."""
    rng = np.random.default_rng(sum(n))
    a = np.round(rng.normal(10.4, 1, n[0]), rounding)
    b = np.round(rng.normal(10.0, 1, n[1]), rounding)
    df = pd.DataFrame({"y": np.r_[a, b], "g": ["A"] * n[0] + ["B"] * n[1]})
    m = mann_whitney(ex.Study(df, "y", "g").results)
    ref = stats.mannwhitneyu(a, b)
    assert m.u == pytest.approx(ref.statistic)
    assert m.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def test_two_level_tests_refuse_three_levels():
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"y": rng.normal(size=12), "g": list("abc") * 4})
    res = ex.Study(df, "y", "g").results
    with pytest.raises(DesignError, match="two levels"):
        welch_t(res)
    with pytest.raises(DesignError, match="two levels"):
        mann_whitney(res)


def test_dunn_matches_scikit_posthocs_with_ties():
    rng = np.random.default_rng(7)
    groups = [np.round(rng.normal(10 + i * 0.5, 1, n), 1) for i, n in enumerate([7, 10, 8, 12])]
    names = ["A", "B", "C", "D"]
    df = pd.DataFrame({"y": np.concatenate(groups), "g": np.repeat(names, [len(g) for g in groups])})
    d = dunn(ex.Study(df, "y", "g").results)
    ref = sp.posthoc_dunn(df, val_col="y", group_col="g", p_adjust="holm")
    np.testing.assert_allclose(d.matrix().loc[names, names].to_numpy(), ref.loc[names, names].to_numpy(), rtol=1e-9)
    raw = sp.posthoc_dunn(df, val_col="y", group_col="g")
    for a, b, p in zip(d.first, d.second, d.pvalue):
        assert p == pytest.approx(raw.loc[a, b], rel=1e-9)


def test_friedman_matches_scipy_with_ties():
    rng = np.random.default_rng(11)
    k, b = 4, 9
    y = np.round(rng.normal(0, 1, (b, k)) + np.arange(k) * 0.4 + rng.normal(0, 2, (b, 1)), 0)
    df = pd.DataFrame({"y": y.ravel(), "treatment": np.tile([f"T{j}" for j in range(k)], b),
                       "block": np.repeat([f"B{i}" for i in range(b)], k)})
    f = friedman(ex.Study(df, "y", "treatment", blocks="block").results)
    ref = stats.friedmanchisquare(*[y[:, j] for j in range(k)])
    assert f.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert f.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert f.df == k - 1


def test_friedman_refuses_replicated_or_incomplete_blocks():
    rng = np.random.default_rng(2)
    df = pd.DataFrame({"y": rng.normal(size=24), "t": list("abc") * 8, "blk": np.repeat(list("wxyz"), 6)})
    with pytest.raises(DesignError, match="one observation"):
        friedman(ex.Study(df, "y", "t", blocks="blk").results)
    with pytest.raises(DesignError, match="block design"):
        friedman(ex.Study(df, "y", "t").results)


def test_trimmed_means_two_levels_is_yuen():
    """Two levels: F = t^2 of Yuen's test (scipy.stats.ttest_ind(trim=0.2, equal_var=False)), same df and p."""
    a, b, df = two_groups(n=(14, 17))
    t = trimmed_means_test(ex.Study(df, "y", "supplier").results)
    ref = stats.ttest_ind(b, a, trim=0.2, equal_var=False)
    assert t.statistic == pytest.approx(ref.statistic**2, rel=1e-10)
    assert t.df_den == pytest.approx(ref.df, rel=1e-10)
    assert t.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def test_trimmed_means_three_levels_by_hand():
    """Three levels against Wilcox's formulas computed here with scipy's trim_mean and winsorize."""
    rng = np.random.default_rng(9)
    groups = [np.r_[rng.normal(10, 1, 15), [25.0]], rng.normal(10.5, 2, 12), rng.normal(11.2, 1.5, 20)]
    df = pd.DataFrame({"y": np.concatenate(groups), "g": np.repeat(["a", "b", "c"], [16, 12, 20])})
    t = trimmed_means_test(ex.Study(df, "y", "g").results)
    k = 3
    tm = np.array([stats.trim_mean(g, 0.2) for g in groups])
    h = np.array([len(g) - 2 * int(np.floor(0.2 * len(g))) for g in groups])
    wv = np.array([np.var(np.asarray(mstats.winsorize(g, limits=(0.2, 0.2))), ddof=1) for g in groups])
    n = np.array([len(g) for g in groups])
    d = (n - 1) * wv / (h * (h - 1))
    w = 1 / d
    u = w.sum()
    xt = (w * tm).sum() / u
    a = (w * (tm - xt) ** 2).sum() / (k - 1)
    s = ((1 - w / u) ** 2 / (h - 1)).sum()
    f = a / (1 + 2 * (k - 2) / (k * k - 1) * s)
    df2 = 1 / (3 * s / (k * k - 1))
    np.testing.assert_allclose(t.trimmed_mean, tm, rtol=1e-12)
    assert t.statistic == pytest.approx(f, rel=1e-10)
    assert t.df_den == pytest.approx(df2, rel=1e-10)
    assert t.pvalue == pytest.approx(stats.f.sf(f, 2, df2), rel=1e-9)


def _two_way(seed=3, interaction=True):
    rng = np.random.default_rng(seed)
    rows = []
    for i, a in enumerate(["a1", "a2", "a3"]):
        for j, b in enumerate(["b1", "b2"]):
            for _ in range(int(rng.integers(3, 8))):
                rows.append({"A": a, "B": b, "y": 1 + 0.5 * i + 0.3 * j + rng.normal(0, 0.5 + i)})
    df = pd.DataFrame(rows)
    return df


@pytest.mark.parametrize("typ", ["II", "III"])
@pytest.mark.parametrize("interactions", [True, False])
def test_hc3_terms_match_statsmodels(typ, interactions):
    df = _two_way()
    res = ex.Study(df, "y", ["A", "B"], interactions=interactions, ss_type=typ).results
    r = hc3_tests(res)
    formula = "y ~ C(A, Sum) * C(B, Sum)" if interactions else "y ~ C(A, Sum) + C(B, Sum)"
    ref = anova_lm(smf.ols(formula, df).fit(), typ=2 if typ == "II" else 3, robust="hc3")
    names = {"A": "C(A, Sum)", "B": "C(B, Sum)", "A × B": "C(A, Sum):C(B, Sum)"}
    for term, f, p in zip(r.terms, r.statistic, r.pvalue):
        assert f == pytest.approx(ref.loc[names[term], "F"], rel=1e-9)
        assert p == pytest.approx(ref.loc[names[term], "PR(>F)"], rel=1e-8)


def test_hc3_one_way_and_leverage_one_refused():
    rng = np.random.default_rng(1)
    df = pd.DataFrame({"y": rng.normal(size=20), "g": np.repeat(list("abcd"), 5)})
    r = hc3_tests(ex.Study(df, "y", "g").results)
    ref = anova_lm(smf.ols("y ~ C(g, Sum)", df).fit(), typ=2, robust="hc3")
    assert r.statistic[0] == pytest.approx(ref.loc["C(g, Sum)", "F"], rel=1e-9)
    df2 = pd.DataFrame({"y": rng.normal(size=10), "A": list("aaaaaabbbb"), "B": list("xxxyyyxxxy")})
    # cell (b, y) has one row: leverage one under the interaction model
    with pytest.raises(DesignError, match="leverage one"):
        hc3_tests(ex.Study(df2, "y", ["A", "B"]).results)


def test_tost_with_a_margin_near_the_float_limit_is_quietly_equivalent():
    """A margin of 1e308 (hostile, but a number): both one-sided t are infinite, p = 0 (scipy.stats.t.sf(inf) = 0),
    and no overflow warning reaches the user."""
    import warnings

    rng = np.random.default_rng(3)
    df = pd.DataFrame({"g": ["a"] * 6 + ["b"] * 6, "y": rng.normal(10, 1, 12)})
    res = ex.Study(df, "y", "g").results
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        table = equivalence(res, "g", margin=1e308, pairs=[("a", "b")])
    assert table.pvalue[0] == stats.t.sf(np.inf, 10) == 0.0
