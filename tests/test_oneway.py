"""One-way engine: worked examples, reference-library agreement and invariants."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.formula.api import ols

import explorer as ex

# NIST/SEMATECH e-Handbook of Statistical Methods, section 7.4.3.3 (one-way, 3 levels of 5).
HANDBOOK_7433 = {
    "1": [6.9, 5.4, 5.8, 4.6, 4.0],
    "2": [8.3, 6.8, 7.8, 9.2, 6.5],
    "3": [8.0, 10.5, 8.1, 6.9, 9.3],
}


def _frame(groups: dict[str, list[float]]) -> pd.DataFrame:
    return pd.DataFrame(
        {"level": [g for g, v in groups.items() for _ in v], "y": [x for v in groups.values() for x in v]}
    )


def test_handbook_7433_partition():
    """NIST/SEMATECH e-Handbook 7.4.3.3: SS 27.897 / 17.452 / 45.349, MS 13.949 / 1.454, F 9.59, CT 779.041."""
    r = ex.Study(_frame(HANDBOOK_7433), "y", "level").results
    b, w, t = r.partition.rows
    assert (b.df, w.df, t.df) == (2, 12, 14)
    assert round(b.sum_sq, 3) == 27.897 and round(w.sum_sq, 3) == 17.452 and round(t.sum_sq, 3) == 45.349
    assert round(b.mean_sq, 3) == 13.949 and round(w.mean_sq, 3) == 1.454
    assert round(b.statistic, 2) == 9.59
    assert round(r.uncorrected.row("mean (correction term)").sum_sq, 3) == 779.041
    np.testing.assert_allclose(r.levels["level"].mean, [5.34, 7.72, 8.56], atol=5e-3)
    # F(0.95; 2, 12) = 3.89 in the handbook: the decision at 0.05 is "differences".
    assert r.pvalue() < 0.05


def test_handbook_7435_interval_for_difference():
    """NIST/SEMATECH e-Handbook 7.4.3.5: level 3 - level 1 = 3.22, 95% CI (1.557, 4.883), t(0.975;12)=2.179.

    The handbook interval uses the pooled residual mean square; the two-level pooled t
    of the study restricted to levels 1 and 3 uses the pooled SD of those two levels
    only, so the check is done with the full-model MSE from the level table.
    """
    r = ex.Study(_frame(HANDBOOK_7433), "y", "level").results
    lt = r.levels["level"]
    diff = lt.mean[2] - lt.mean[0]
    half = stats.t.ppf(0.975, r.df_resid) * np.sqrt(r.ms_resid * (1 / 5 + 1 / 5))
    assert round(diff, 2) == 3.22
    # The handbook rounds its intermediate values; its bounds agree with exact ones to 0.002.
    assert (diff - half, diff + half) == pytest.approx((1.557, 4.883), abs=2e-3)
    assert round(stats.t.ppf(0.975, r.df_resid), 3) == 2.179


def test_two_levels_t_squared_equals_f():
    """Pooled two-sample t (scipy.stats.ttest_ind, equal_var=True): t^2 = F and the p-values agree."""
    rng = np.random.default_rng(1)
    df = pd.DataFrame({"g": ["a"] * 7 + ["b"] * 11, "y": np.r_[rng.normal(0, 1, 7), rng.normal(0.8, 1, 11)]})
    r = ex.Study(df, "y", "g").results
    ref = stats.ttest_ind(df.y[df.g == "a"], df.y[df.g == "b"], equal_var=True)
    assert r.two_groups.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert r.two_groups.pvalue == pytest.approx(ref.pvalue, rel=1e-10)
    assert r.two_groups.statistic**2 == pytest.approx(r.statistic(), rel=1e-12)
    assert r.two_groups.pvalue == pytest.approx(r.pvalue(), rel=1e-10)


@st.composite
def unbalanced(draw):
    k = draw(st.integers(2, 6))
    sizes = [draw(st.integers(2, 12)) for _ in range(k)]
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    loc = draw(st.floats(-1e4, 1e4))
    scale = draw(st.floats(0.01, 100))
    y = np.concatenate([rng.normal(loc + rng.normal(0, scale), scale, s) for s in sizes])
    g = np.repeat([f"L{i}" for i in range(k)], sizes)
    return pd.DataFrame({"g": g, "y": y})


@settings(max_examples=40, deadline=None)
@given(unbalanced())
def test_agrees_with_scipy_and_statsmodels(df):
    """scipy.stats.f_oneway and statsmodels ols + anova_lm agree to 1e-10 relative on unbalanced data."""
    r = ex.Study(df, "y", "g").results
    groups = [df.y[df.g == lv].to_numpy() for lv in sorted(df.g.unique())]
    ref = stats.f_oneway(*groups)
    assert r.statistic() == pytest.approx(ref.statistic, rel=1e-10)
    assert r.pvalue() == pytest.approx(ref.pvalue, rel=1e-8, abs=1e-300)
    table = sm.stats.anova_lm(ols("y ~ C(g)", data=df).fit())
    assert r.partition.rows[0].sum_sq == pytest.approx(table.loc["C(g)", "sum_sq"], rel=1e-9)
    assert r.partition.rows[1].sum_sq == pytest.approx(table.loc["Residual", "sum_sq"], rel=1e-9)


def _summary(r):
    return [x if x is not None else -1.0 for row in r.partition.rows for x in (row.df, row.sum_sq, row.statistic, row.pvalue)]


def test_invariants_order_shift_scale():
    """Theory: row order changes nothing; adding a constant leaves SS unchanged; scaling by c scales SS by c^2."""
    df = _frame(HANDBOOK_7433)
    base = ex.Study(df, "y", "level").results
    shuffled = df.sample(frac=1, random_state=3).reset_index(drop=True)
    assert _summary(ex.Study(shuffled, "y", "level").results) == pytest.approx(_summary(base), rel=1e-13)
    shifted = df.assign(y=df.y + 1e6)
    rs = ex.Study(shifted, "y", "level").results
    assert rs.partition.rows[0].sum_sq == pytest.approx(base.partition.rows[0].sum_sq, rel=1e-9)
    assert rs.statistic() == pytest.approx(base.statistic(), rel=1e-9)
    scaled = ex.Study(df.assign(y=df.y * 7.5), "y", "level").results
    assert scaled.partition.rows[1].sum_sq == pytest.approx(base.partition.rows[1].sum_sq * 7.5**2, rel=1e-12)
    assert scaled.statistic() == pytest.approx(base.statistic(), rel=1e-12)
    b, w, t = base.partition.rows
    assert b.sum_sq + w.sum_sq == pytest.approx(t.sum_sq, rel=1e-15)
    u = base.uncorrected.rows
    assert u[0].sum_sq + u[1].sum_sq + u[2].sum_sq == pytest.approx(float((df.y**2).sum()), rel=1e-12)


def test_level_table_against_direct_computation():
    """Level SD/SE and own-SD CI from numpy/scipy.stats.t directly (textbook formulas)."""
    df = _frame(HANDBOOK_7433)
    lt = ex.Study(df, "y", "level").results.levels["level"]
    for i, vals in enumerate(HANDBOOK_7433.values()):
        v = np.array(vals)
        assert lt.sd[i] == pytest.approx(v.std(ddof=1), rel=1e-12)
        half = stats.t.ppf(0.975, 4) * v.std(ddof=1) / np.sqrt(5)
        assert (lt.own_low[i], lt.own_high[i]) == pytest.approx((v.mean() - half, v.mean() + half), rel=1e-12)


def test_residuals_fitted_leverage():
    """Fitted values are level means, residuals sum to zero per level, leverage is 1/n_i (one-way hat matrix)."""
    r = ex.Study(_frame(HANDBOOK_7433), "y", "level").results
    assert np.allclose(r.fit.fitted, np.repeat([5.34, 7.72, 8.56], 5))
    assert np.allclose(r.fit.residuals + r.fit.fitted, r.fit.y)
    assert np.allclose(r.fit.leverage, 0.2)


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
def test_one_factor_table_says_the_types_coincide(ss_type):
    """One factor: whatever type is asked for, the table records it and its caption says that
    types I, II and III coincide (one term: each type's SS is the between-level SS; Montgomery,
    DAE ch. 3), never "type I" for a study asked for type III. Same through the general engine."""
    from explorer.engine.dataset import build_dataset
    from explorer.engine.factorial import fit_factorial
    from explorer.engine.spec import ModelSpec
    from explorer.engine.view import initial_view

    frame = pd.DataFrame({"g": list("aabbbccc"), "y": [1.0, 2.0, 4.0, 5.0, 5.5, 7.0, 8.0, 9.5]})
    table = ex.Study(frame, "y", "g", ss_type=ss_type).results.partition
    assert table.ss_type == ss_type and table.types_coincide
    caption = table._repr_html_()
    assert "types I, II and III sums of squares coincide" in caption and f"type {ss_type} sums" not in caption
    ds = build_dataset(frame, "y", ["g"])
    general = fit_factorial(ds, initial_view(ds), ModelSpec(response="y", factors=("g",), ss_type=ss_type),
                            positions=np.arange(ds.n)).partition
    assert general.types_coincide and general.ss_type == ss_type
    assert not ex.Study(frame.assign(h=list("xyxyxyxy")), "y", ["g", "h"]).results.partition.types_coincide
