"""Influence diagnostics: agreement with statsmodels OLSInfluence on one-way and two-way models."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

import explorer as ex
from explorer.sensitivity.influence import influence


def _oneway(seed: int = 1) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = np.repeat(list("abcd"), [5, 7, 3, 9])
    y = rng.normal(size=g.size) + np.repeat([0.0, 1.0, -0.5, 0.3], [5, 7, 3, 9]) + 50
    y[4] += 4.0  # one clear outlier
    return pd.DataFrame({"g": g, "y": y})


def _check(inf, oi, order) -> None:  # type: ignore[no-untyped-def]
    np.testing.assert_allclose(inf.leverage, oi.hat_matrix_diag[order], rtol=0, atol=1e-9)
    np.testing.assert_allclose(inf.studentized_internal, oi.resid_studentized_internal[order], rtol=0, atol=1e-9)
    np.testing.assert_allclose(inf.studentized_external, oi.resid_studentized_external[order], rtol=0, atol=1e-9)
    np.testing.assert_allclose(inf.cooks_distance, oi.cooks_distance[0][order], rtol=0, atol=1e-9)
    np.testing.assert_allclose(inf.dffits, oi.dffits[0][order], rtol=0, atol=1e-9)


def test_oneway_matches_statsmodels():
    """statsmodels OLSInfluence (hat values, studentized residuals, Cook's distance, DFFITS) on y ~ C(g), to 1e-9."""
    df = _oneway()
    study = ex.Study(df, "y", "g")
    inf = influence(study)
    oi = OLSInfluence(smf.ols("y ~ C(g)", df).fit())
    _check(inf, oi, np.asarray(inf.row_ids))
    assert inf.n_params == 4 and inf.df_resid == df.shape[0] - 4


@pytest.mark.parametrize("interactions", [True, False])
def test_two_way_matches_statsmodels(interactions):
    """statsmodels OLSInfluence on y ~ C(a)*C(b) (cell means) and y ~ C(a)+C(b) (additive), unbalanced, to 1e-9."""
    rng = np.random.default_rng(7)
    a = rng.choice(list("xyz"), 60)
    b = rng.choice(list("pq"), 60)
    df = pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=60) + (a == "x") * 1.0 + (b == "p") * 0.5})
    study = ex.Study(df, "y", ["a", "b"], interactions=interactions)
    inf = influence(study)
    formula = "y ~ C(a) * C(b)" if interactions else "y ~ C(a) + C(b)"
    oi = OLSInfluence(smf.ols(formula, df).fit())
    _check(inf, oi, np.asarray(inf.row_ids))
    assert inf.n_params == (6 if interactions else 4)


def test_bonferroni_outlier_test_matches_statsmodels():
    """statsmodels RegressionResults.outlier_test(method='bonf'): Bonferroni-adjusted p of the external residuals."""
    df = _oneway()
    inf = influence(ex.Study(df, "y", "g"))
    ref = smf.ols("y ~ C(g)", df).fit().outlier_test(method="bonf")
    np.testing.assert_allclose(inf.outlier_pvalue, ref["bonf(p)"].to_numpy()[np.asarray(inf.row_ids)], rtol=1e-9)
    assert inf.flagged("outlier_test").tolist() == (ref["bonf(p)"].to_numpy() < 0.05).tolist()


def test_cutoffs_are_stated():
    """Cut-offs: Cook's 4/n and the median of F(p, n-p) (Cook 1977), 2p/n, 2 sqrt(p/n); medians from scipy.stats.f."""
    df = _oneway()
    inf = influence(ex.Study(df, "y", "g"))
    n, p = df.shape[0], 4
    assert inf.cutoffs["cooks_4_over_n"] == pytest.approx(4 / n)
    assert inf.cutoffs["cooks_f_median"] == pytest.approx(stats.f.median(p, n - p), rel=1e-12)
    assert inf.cutoffs["leverage"] == pytest.approx(2 * p / n)
    assert inf.cutoffs["dffits"] == pytest.approx(2 * np.sqrt(p / n))
    assert set(inf.cutoff_rules) == set(inf.cutoffs)
    assert inf.flagged("cooks_4_over_n").tolist() == (inf.cooks_distance > 4 / n).tolist()
    assert "Cook" in inf._repr_html_()


def test_single_observation_level_is_undefined_not_nan():
    """A level with one row has leverage 1 (statsmodels: hat value 1); its scaled residuals are missing with a note."""
    df = pd.DataFrame({"g": list("aaabbbbc"), "y": [1.0, 2.0, 1.5, 3.0, 3.5, 2.5, 3.2, 9.0]})
    study = ex.Study(df, "y", "g")
    inf = influence(study)
    oi = OLSInfluence(smf.ols("y ~ C(g)", df).fit())
    assert inf.leverage[7] == pytest.approx(oi.hat_matrix_diag[7]) and inf.leverage[7] == pytest.approx(1.0)
    frame = inf.to_frame()
    assert frame["Cook's distance"].isna().tolist() == [False] * 7 + [True]
    assert any("leverage 1" in n for n in inf.notes)
    np.testing.assert_allclose(inf.cooks_distance[:7], oi.cooks_distance[0][:7], atol=1e-9)


def test_reads_the_study_and_carries_the_disclosure():
    """The diagnostics leave the study unchanged and carry its disclosure (edits and searches so far)."""
    df = _oneway()
    study = ex.Study(df, "y", "g")
    study.drop([0], reason="test")
    before = study.results
    inf = influence(study)
    assert study.results is before and 0 not in inf.row_ids.tolist()
    assert inf.disclosure is not None and inf.disclosure.edits_in_effect == 1
