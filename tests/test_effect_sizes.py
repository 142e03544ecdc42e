"""Effect sizes and their noncentral-F intervals (explorer.inference.effect_sizes).

Outside references: NIST/SEMATECH e-Handbook 7.4.3.3 partition (SS treatments 27.897,
SS error 17.452, MS error 1.454, total 45.349; eta and omega squared follow from the
printed values); scipy.stats.ncf (direct noncentral F: the interval limits put the
observed F at the 97.5% and 2.5% points); statsmodels confint_effectsize_oneway
(statsmodels 0.15) for the noncentrality, f and eta-squared intervals.
"""

from __future__ import annotations

import numpy as np
import pytest
from groups_support import NIST_TUKEY_GROUPS, random_groups, study_from_groups
from scipy import stats
from statsmodels.stats.oneway import confint_effectsize_oneway

from explorer.inference.effect_sizes import effect_sizes, noncentrality_interval


@pytest.fixture(scope="module")
def nist():
    return effect_sizes(study_from_groups(NIST_TUKEY_GROUPS[:3]).results, confidence=0.95)


def test_estimates_from_handbook_partition(nist) -> None:
    """e-Handbook 7.4.3.3: eta2 = 27.897/45.349, omega2 = (27.897 - 2*1.454)/(45.349 + 1.454),
    epsilon2 = (27.897 - 2*1.454)/45.349, f = sqrt(eta2/(1-eta2)); 3-4 printed digits."""
    assert nist.eta_squared == pytest.approx(27.897 / 45.349, rel=2e-4)
    assert nist.omega_squared == pytest.approx((27.897 - 2 * 1.454) / (45.349 + 1.454), rel=5e-4)
    assert nist.epsilon_squared == pytest.approx((27.897 - 2 * 1.454) / 45.349, rel=5e-4)
    eta2 = 27.897 / 45.349
    assert nist.cohens_f == pytest.approx(np.sqrt(eta2 / (1 - eta2)), rel=5e-4)


def test_interval_inverts_noncentral_f(nist) -> None:
    """Direct computation with scipy.stats.ncf: at the limits the observed F sits at the
    97.5% (lower limit) and 2.5% (upper limit) points; P = lambda / (lambda + N)."""
    f_obs = study_from_groups(NIST_TUKEY_GROUPS[:3]).results.statistic()
    lo, hi = nist.ci_lambda
    assert stats.ncf.cdf(f_obs, 2, 12, lo) == pytest.approx(0.975, abs=1e-9)
    assert stats.ncf.cdf(f_obs, 2, 12, hi) == pytest.approx(0.025, abs=1e-9)
    assert nist.ci_proportion == pytest.approx((lo / (lo + 15), hi / (hi + 15)), rel=1e-12)
    assert nist.ci_f == pytest.approx((np.sqrt(lo / 15), np.sqrt(hi / 15)), rel=1e-12)


def test_interval_matches_statsmodels() -> None:
    """statsmodels confint_effectsize_oneway on unbalanced data: nc, f and eta intervals
    (its ``ci_eta`` is for eta, the square root of the proportion; statsmodels solves to
    about 1e-4 relative). The default interval is 1 - 2 alpha = 90% at alpha 0.05
    (Steiger 2004), so statsmodels is called with alpha=0.10."""
    res = study_from_groups(random_groups([8, 11, 9, 14], seed=5, shift=1.5)).results
    assert res.pvalue() < 0.01
    ours = effect_sizes(res)
    assert ours.confidence == pytest.approx(0.90)
    ref = confint_effectsize_oneway(res.statistic(), (3, res.df_resid), nobs=res.n_used, alpha=0.10)
    np.testing.assert_allclose(ours.ci_lambda, ref.ci_nc, rtol=1e-3)
    np.testing.assert_allclose(ours.ci_f, ref.ci_f, rtol=1e-3)
    np.testing.assert_allclose(ours.ci_proportion, np.square(ref.ci_eta), rtol=1e-3)


def test_floor_at_zero_when_f_below_one() -> None:
    """F < 1: omega2 and epsilon2 are negative before the floor, reported as 0 with a note;
    the lower limit of the interval is 0."""
    rng = np.random.default_rng(0)
    base = rng.normal(0, 1, 12)
    res = study_from_groups([base, base[::-1] + 0.01, np.roll(base, 3)]).results
    assert res.statistic() < 1
    es = effect_sizes(res)
    raw = dict(es.raw)
    assert raw["omega squared"] < 0 and raw["epsilon squared"] < 0
    assert es.omega_squared == 0.0 and es.epsilon_squared == 0.0
    assert es.ci_proportion[0] == 0.0 and any("floor" in n for n in es.notes)
    assert not es.to_frame()["estimate"].isna().any()


def test_noncentrality_interval_zero_effect_edge() -> None:
    """F = 0: no noncentrality puts it above the 2.5% point, so both limits are 0."""
    assert noncentrality_interval(0.0, 3, 20) == (0.0, 0.0)
