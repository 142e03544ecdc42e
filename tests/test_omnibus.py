"""Omnibus tests beside the classic F (explorer.core.omnibus).

Outside references: statsmodels.stats.oneway.anova_oneway (statsmodels 0.15) for
Welch (use_var='unequal') and Brown-Forsythe (use_var='bf', both its original and
Mehrotra df); scipy.stats.kruskal and scipy.stats.f_oneway (scipy 1.17);
scipy.stats.permutation_test for the permutation F.
"""

from __future__ import annotations

import numpy as np
import pytest
from groups_support import random_groups, study_from_groups
from scipy import stats
from statsmodels.stats.oneway import anova_oneway

from explorer.core.errors import ExplorerError
from explorer.core.omnibus import (
    brown_forsythe_f,
    classic_f,
    kruskal_wallis,
    permutation_f,
    welch_f,
)

SIZES = [5, 8, 12, 6]


@pytest.fixture(scope="module")
def groups() -> list[np.ndarray]:
    return random_groups(SIZES, seed=3, spread_step=0.7, shift=0.5, digits=1)


@pytest.fixture(scope="module")
def results(groups):
    return study_from_groups(groups).results


def test_welch_matches_statsmodels(groups, results) -> None:
    """Welch F, its df and p against statsmodels anova_oneway(use_var='unequal')."""
    ref = anova_oneway(groups, use_var="unequal")
    got = welch_f(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.df_num == pytest.approx(ref.df_num, rel=1e-12)
    assert got.df_den == pytest.approx(ref.df_denom, rel=1e-12)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-10)
    assert "variances may differ" in got.assumes


def test_brown_forsythe_matches_statsmodels(groups, results) -> None:
    """Brown-Forsythe F*: statistic, Satterthwaite df and the k-1 df p-value ('pvalue2'), plus
    Mehrotra's df and p-value ('df_num', 'pvalue'), against statsmodels anova_oneway(use_var='bf')."""
    ref = anova_oneway(groups, use_var="bf")
    got = brown_forsythe_f(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.df_den == pytest.approx(ref.df_denom, rel=1e-12)
    assert got.pvalue == pytest.approx(ref.pvalue2, rel=1e-10)
    assert got.detail("Mehrotra numerator df") == pytest.approx(ref.df_num, rel=1e-12)
    assert got.detail("Mehrotra p-value") == pytest.approx(ref.pvalue, rel=1e-10)


def test_kruskal_matches_scipy_with_ties(groups, results) -> None:
    """H with tie correction (the data are rounded to 0.1, so there are ties) vs scipy.stats.kruskal."""
    ref = stats.kruskal(*groups)
    got = kruskal_wallis(results)
    assert got.detail("tie correction") < 1
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-10)


def test_classic_matches_scipy(groups, results) -> None:
    """The classic F as an omnibus result equals scipy.stats.f_oneway."""
    ref = stats.f_oneway(*groups)
    got = classic_f(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-10)


def test_permutation_f_seeded_and_close_to_scipy(groups, results) -> None:
    """Seeded: same seed, same p. Against scipy.stats.permutation_test of the F statistic
    (different random permutations): agreement within 4 Monte-Carlo standard errors."""
    a = permutation_f(results, 4999, seed=11)
    b = permutation_f(results, 4999, seed=11)
    assert a.pvalue == b.pvalue
    se = a.detail("Monte-Carlo SE of p")
    assert se == pytest.approx(np.sqrt(a.pvalue * (1 - a.pvalue) / 4999))
    ref = stats.permutation_test(groups, lambda *s, axis: stats.f_oneway(*s, axis=axis).statistic,
                                 permutation_type="independent", vectorized=True, n_resamples=4999,
                                 alternative="greater", rng=5)
    assert abs(a.pvalue - ref.pvalue) < 4 * np.sqrt(2) * se
    with pytest.raises(ExplorerError, match="permutations"):
        permutation_f(results, 0)


def test_undefined_cases_say_why() -> None:
    """A level of one observation: Welch and Brown-Forsythe give None with a note, never NaN."""
    res = study_from_groups([[1.0, 2.0, 3.5], [2.0], [4.0, 5.5, 6.1]]).results
    for test in (welch_f(res), brown_forsythe_f(res)):
        assert test.statistic is None and test.pvalue is None
        assert "one observation" in test.notes[0]
    flat = study_from_groups([[1.0, 1.0, 1.0], [2.0, 3.0, 4.0]]).results
    assert welch_f(flat).pvalue is None and "zero spread" in welch_f(flat).notes[0]
