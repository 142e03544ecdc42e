"""Planned contrasts and polynomial trends.

Outside references: statsmodels 0.15 OLS ``t_test`` with the same contrast matrix (on a
cell-means fit ``y ~ C(dose) - 1`` for one factor, and on the sum-coded two-factor fit
with the least-squares-mean matrix for factorial designs); statsmodels ``multipletests``
(Holm, Bonferroni); scipy ``f`` for Scheffe; scipy ``dunnett`` (docstring data) for the
control set. Orthogonal polynomial weights: the equally spaced values printed in every
table of orthogonal polynomials (k = 3: -1 0 1 / 1 -2 1; k = 4: -3 -1 1 3 / 1 -1 -1 1 /
-1 3 -3 1; facts of the trade); for unequal spacing a hand computation from the definition
(Gram-Schmidt on 1, x, x^2 at x = 1, 2, 4: linear -4 -1 5, quadratic 2 -3 1, as in the
worked unequal-spacing derivations of Maxwell, Delaney and Kelley, ch. 6 - the method from
memory, the numbers derived here by hand) and the dose levels 0.5, 1, 2, 4 checked against
the orthogonality conditions directly and against patsy's ``Poly(scores=...)`` coding (an
independent construction of orthogonal polynomials at unequal scores). No published data
set with unequal spacing was at hand to check against; the tests of the contrasts
themselves are statsmodels' ``t_test`` with the same weights.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.multitest import multipletests

import explorer as ex
from explorer.engine.errors import ExplorerError
from explorer.inference.contrasts import contrasts, control_contrasts, later_levels_contrasts
from explorer.inference.level_means import level_means
from explorer.inference.trends import orthogonal_polynomials, trend


def dose_frame(seed: int = 3, sizes=(5, 8, 6, 9)) -> pd.DataFrame:
    """Invented dose-response data: unequal spacing (0.5, 1, 2, 4) and unequal counts."""
    rng = np.random.default_rng(seed)
    doses = [0.5, 1, 2, 4]
    rows = []
    for d, n in zip(doses, sizes):
        for v in rng.normal(10 + 2 * np.log(d) - 0.3 * d, 1.0, n):
            rows.append({"dose": d, "thickness": round(float(v), 3)})
    return pd.DataFrame(rows)


def two_way_frame(seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for i, d in enumerate([0.5, 1, 2, 4]):
        for j, m in enumerate(["M1", "M2", "M3"]):
            for _ in range(int(rng.integers(2, 6))):
                rows.append({"dose": d, "machine": m, "y": 5 + 0.8 * i + 0.5 * j + 0.3 * i * j + rng.normal()})
    return pd.DataFrame(rows)


def _sm_oneway(df: pd.DataFrame):
    return smf.ols("thickness ~ C(dose) - 1", df).fit()


def test_user_contrast_matches_statsmodels_t_test():
    """One contrast: estimate, SE, t, p and 95% interval = statsmodels t_test on the cell-means fit."""
    df = dose_frame()
    study = ex.Study(df, "thickness", "dose")
    table = contrasts(study.results, "dose", {"0.5": -1, "2": 1})
    c = np.array([[-1, 0, 1, 0]])
    ref = _sm_oneway(df).t_test(c)
    assert table.estimate[0] == pytest.approx(float(ref.effect[0]), rel=1e-12)
    assert table.se[0] == pytest.approx(float(ref.sd[0, 0]), rel=1e-10)
    assert table.statistic[0] == pytest.approx(float(ref.tvalue[0, 0]), rel=1e-10)
    assert table.pvalue[0] == pytest.approx(float(ref.pvalue), rel=1e-8)
    lo, hi = ref.conf_int(alpha=0.05)[0]
    assert (table.ci_low[0], table.ci_high[0]) == pytest.approx((lo, hi), rel=1e-10)
    assert table.adjustment == "none" and "no family adjustment" in table.title


def test_several_contrasts_holm_and_orthogonality():
    """Several contrasts: each row = statsmodels t_test; Holm = multipletests; correlation = t_test covariance."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose").results
    w = {"low vs high": {"0.5": 1, "1": 1, "2": -1, "4": -1}, "0.5 vs 1": {"0.5": 1, "1": -1},
         "2 vs 4": {"2": 1, "4": -1}}
    table = contrasts(res, "dose", w)
    c = np.array([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]], dtype=float)
    ref = _sm_oneway(df).t_test(c)
    np.testing.assert_allclose(table.estimate, ref.effect, rtol=1e-12)
    np.testing.assert_allclose(table.pvalue, ref.pvalue, rtol=1e-8)
    np.testing.assert_allclose(table.adjusted, multipletests(ref.pvalue, method="holm")[1], rtol=1e-10)
    # Bonferroni intervals under Holm (Holm has none of its own)
    crit = stats.t.ppf(1 - 0.05 / 6, res.df_resid)
    np.testing.assert_allclose(table.ci_high - table.estimate, crit * table.se, rtol=1e-10)
    assert table.weights_orthogonal
    assert not table.orthogonal  # unequal counts: the estimates are correlated
    cov = c @ _sm_oneway(df).cov_params().to_numpy() @ c.T
    np.testing.assert_allclose(table.correlation, cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov))), atol=1e-12)
    assert table.joint and table.joint[0].df_num == 3


def test_scheffe_and_bonferroni():
    """Scheffe: p from F = t^2/(k-1) on (k-1, df) (scipy.stats.f), interval sqrt((k-1) F_0.95)."""
    res = ex.Study(dose_frame(), "thickness", "dose").results
    t = contrasts(res, "dose", [{"0.5": -1, "4": 1}, {"1": -1, "2": 1}], adjust="scheffe")
    df = res.df_resid
    np.testing.assert_allclose(t.adjusted, stats.f.sf(t.statistic**2 / 3, 3, df), rtol=1e-9)
    np.testing.assert_allclose(t.ci_high - t.estimate, np.sqrt(3 * stats.f.ppf(0.95, 3, df)) * t.se, rtol=1e-9)
    b = contrasts(res, "dose", [{"0.5": -1, "4": 1}, {"1": -1, "2": 1}], adjust="bonferroni")
    np.testing.assert_allclose(b.adjusted, np.minimum(1, 2 * b.pvalue), rtol=1e-12)


def test_interval_follows_alpha():
    """At alpha 0.01 the interval is 99% (statsmodels conf_int(alpha=0.01))."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose", alpha=0.01).results
    t = contrasts(res, "dose", {"1": -1, "4": 1})
    lo, hi = _sm_oneway(df).t_test(np.array([[0, -1, 0, 1]])).conf_int(alpha=0.01)[0]
    assert (t.ci_low[0], t.ci_high[0]) == pytest.approx((lo, hi), rel=1e-10)
    assert t.confidence == pytest.approx(0.99)


def test_control_set_dunnett_matches_scipy():
    """Each level vs control in one factor: Dunnett (scipy.stats.dunnett docstring data, p to 2e-4: scipy uses QMC)."""
    control = [2.9, 3.0, 2.5, 2.6, 3.2]
    a, b = [3.8, 2.7, 4.0, 2.4], [2.8, 3.4, 3.7, 2.2, 2.0]
    df = pd.DataFrame({"y": control + a + b, "g": ["c"] * 5 + ["a"] * 4 + ["b"] * 5})
    res = ex.Study(df, "y", "g").results
    t = control_contrasts(res, "g", "c")
    assert t.adjustment == "dunnett"
    ref = stats.dunnett(a, b, control=control)
    got = dict(zip(t.names, t.adjusted))
    assert got["a vs c"] == pytest.approx(ref.pvalue[0], abs=2e-4)
    assert got["b vs c"] == pytest.approx(ref.pvalue[1], abs=2e-4)


def test_later_levels_set_is_orthogonal_with_equal_counts():
    """Each level vs the mean of later levels: orthogonal with equal counts; estimates = statsmodels t_test."""
    df = dose_frame(sizes=(6, 6, 6, 6))
    res = ex.Study(df, "thickness", "dose").results
    t = later_levels_contrasts(res, "dose")
    c = np.array([[1, -1 / 3, -1 / 3, -1 / 3], [0, 1, -0.5, -0.5], [0, 0, 1, -1]])
    ref = _sm_oneway(df).t_test(c)
    np.testing.assert_allclose(t.estimate, ref.effect, rtol=1e-12)
    np.testing.assert_allclose(t.pvalue, ref.pvalue, rtol=1e-8)
    assert t.orthogonal and t.weights_orthogonal


@pytest.mark.parametrize("x, expected", [
    ([1, 2, 3], [[-1, 0, 1], [1, -2, 1]]),
    ([1, 2, 3, 4], [[-3, -1, 1, 3], [1, -1, -1, 1], [-1, 3, -3, 1]]),
    ([1, 2, 4], [[-4, -1, 5], [2, -3, 1]]),
])
def test_orthogonal_polynomial_weights(x, expected):
    """Printed tables (equal spacing) and the hand-derived unequal spacing 1, 2, 4 (module docstring)."""
    got = orthogonal_polynomials(np.asarray(x, dtype=float))
    for row, exp in zip(got, expected):
        exp = np.asarray(exp, dtype=float)
        np.testing.assert_allclose(row, exp / np.max(np.abs(exp)), atol=1e-12)


def test_trend_unequal_spacing_unequal_counts_against_statsmodels():
    """Trend at doses 0.5, 1, 2, 4 with counts 5, 8, 6, 9: weights orthogonal by definition; t tests = statsmodels."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose").results
    t = trend(res, "dose")
    x = np.array([0.5, 1, 2, 4])
    c = t.weights
    assert t.names == ("linear", "quadratic", "cubic")
    np.testing.assert_allclose(c.sum(axis=1), 0, atol=1e-12)
    # orthogonal to lower-degree powers of x
    assert abs(c[1] @ x) < 1e-12 and abs(c[2] @ x) < 1e-12 and abs(c[2] @ x**2) < 1e-10
    np.testing.assert_allclose(c @ c.T - np.diag(np.diag(c @ c.T)), 0, atol=1e-12)
    ref = _sm_oneway(df).t_test(c)
    np.testing.assert_allclose(t.estimate, ref.effect, rtol=1e-10)
    np.testing.assert_allclose(t.pvalue, ref.pvalue, rtol=1e-7)
    assert not t.orthogonal  # equal weights, unequal counts
    assert "unequal spacing" in t.notes[0]


def test_trend_weighted_by_counts_splits_the_between_sum_of_squares():
    """Count weights: uncorrelated estimates whose squared t times MS_E add up to the between SS (k - 1 degrees)."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose").results
    t = trend(res, "dose", degree=3, weighting="counts")
    assert t.orthogonal
    ss = float(np.sum(t.statistic**2)) * res.ms_resid
    assert ss == pytest.approx(res.partition.rows[0].sum_sq, rel=1e-10)


def test_trend_departure_test():
    """Linear only: the departure F is the Wald test of the quadratic and cubic contrasts (statsmodels f_test)."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose").results
    t = trend(res, "dose", degree=1)
    full = trend(res, "dose", degree=3)
    ref = _sm_oneway(df).f_test(full.weights[1:])
    assert t.joint[0].statistic == pytest.approx(float(ref.fvalue), rel=1e-9)
    assert t.joint[0].pvalue == pytest.approx(float(ref.pvalue), rel=1e-7)


def test_factorial_contrasts_of_least_squares_means():
    """Two factors, unbalanced: contrast of least-squares means = statsmodels t_test on the sum-coded fit (full-model MSE)."""
    df = two_way_frame()
    res = ex.Study(df, "y", ["dose", "machine"]).results
    fit = smf.ols("y ~ C(dose, Sum) * C(machine, Sum)", df).fit()
    # least-squares means of dose: intercept + dose sum-contrast row (other terms average to zero)
    names = list(fit.params.index)
    L = np.zeros((4, len(names)))
    L[:, 0] = 1
    dose_cols = [i for i, n in enumerate(names) if n.startswith("C(dose, Sum)[") and ":" not in n]
    L[:3, dose_cols] = np.eye(3)
    L[3, dose_cols] = -1
    t = trend(res, "dose")
    ref = fit.t_test(t.weights @ L)
    np.testing.assert_allclose(t.estimate, ref.effect, rtol=1e-9)
    np.testing.assert_allclose(t.se, np.ravel(ref.sd), rtol=1e-9)
    np.testing.assert_allclose(t.pvalue, ref.pvalue, rtol=1e-7)
    assert t.df == fit.df_resid
    assert level_means(res, "dose").kind == "least-squares means"
    u = contrasts(res, "dose", {"0.5": -1, "4": 1})
    ref1 = fit.t_test(np.array([-1, 0, 0, 1]) @ L)
    assert u.pvalue[0] == pytest.approx(float(ref1.pvalue), rel=1e-8)


def test_bad_contrasts_are_refused_with_a_reason():
    res = ex.Study(dose_frame(), "thickness", "dose").results
    with pytest.raises(ExplorerError, match="sum to"):
        contrasts(res, "dose", {"0.5": -1, "2": 2})
    with pytest.raises(ExplorerError, match="not a level"):
        contrasts(res, "dose", {"0.25": -1, "2": 1})
    with pytest.raises(ExplorerError, match="must be a number"):
        contrasts(res, "dose", {"0.5": "-1", "2": 1})
    with pytest.raises(ExplorerError, match="finite"):
        contrasts(res, "dose", {"0.5": float("nan"), "2": 1})
    with pytest.raises(ExplorerError, match="every weight zero"):
        contrasts(res, "dose", {"0.5": 0, "2": 0})
    with pytest.raises(ExplorerError, match="not a treatment factor"):
        contrasts(res, "machine", {"a": 1, "b": -1})
    with pytest.raises(ExplorerError, match="adjust"):
        contrasts(res, "dose", {"0.5": -1, "2": 1}, adjust="tukey")
    with pytest.raises(ExplorerError, match="not numbers"):
        trend(ex.Study(pd.DataFrame({"y": [1., 2, 3, 4, 5, 6], "g": list("aabbcc")}), "y", "g").results, "g")


@pytest.mark.parametrize("scale", [1e300, 1e-300, 3.0])
def test_weights_of_any_scale_give_the_same_test(scale):
    """Weights near 1e300 or 1e-300: t and p as statsmodels t_test with unit weights, estimate and SE scaled
    (before, the variance overflowed to inf and gave t = 0, p = 1, or underflowed to a 'zero residual' error)."""
    df = dose_frame()
    res = ex.Study(df, "thickness", "dose").results
    ref = _sm_oneway(df).t_test(np.array([[-1.0, 0, 0, 1]]))
    got = contrasts(res, "dose", {"0.5": -scale, "4": scale})
    assert got.statistic[0] == pytest.approx(float(np.ravel(ref.tvalue)[0]), rel=1e-10)
    assert got.pvalue[0] == pytest.approx(float(ref.pvalue), rel=1e-8)
    assert got.estimate[0] == pytest.approx(scale * float(ref.effect[0]), rel=1e-10)
    assert got.se[0] == pytest.approx(scale * float(np.ravel(ref.sd)[0]), rel=1e-10)


def test_weights_beyond_floating_point_are_refused():
    res = ex.Study(dose_frame(), "thickness", "dose").results
    with pytest.raises(ExplorerError, match="beyond the range of floating point"):
        contrasts(res, "dose", {"0.5": -1e308, "4": 1e308, "1": 1e308, "2": -1e308})


@pytest.mark.parametrize("degree", [0, 4, 1.5, True, "2"])
def test_trend_degree_outside_the_levels_is_refused(degree):
    """Four levels: degrees 1 to 3 only (before, 0 raised ZeroDivisionError, 4 gave four names for three rows,
    1.5 was read as 1)."""
    res = ex.Study(dose_frame(), "thickness", "dose").results
    with pytest.raises(ExplorerError, match="the degree must be a whole number between 1 and 3"):
        trend(res, "dose", degree=degree)


def test_unequal_spacing_weights_match_patsy_poly_scores():
    """Doses 0.5, 1, 2, 4 and the spacing 1, 2, 4, 8, 9: weights proportional to patsy's Poly(scores=...) columns
    (patsy 0.5, an independent Gram-Schmidt of the same powers; its columns are orthonormal, ours scaled to 1)."""
    from patsy.contrasts import Poly

    for x in ([0.5, 1, 2, 4], [1, 2, 4, 8, 9]):
        ref = Poly(scores=x).code_without_intercept(list(range(len(x)))).matrix.T
        ref = ref / np.abs(ref).max(axis=1, keepdims=True)
        ref = ref * np.sign(ref[:, -1:])  # ours: last nonzero weight positive
        np.testing.assert_allclose(orthogonal_polynomials(np.asarray(x, dtype=float)), ref, atol=1e-12)
