"""Omnibus tests beside the classic F (explorer.inference.omnibus).

Outside references: statsmodels.stats.oneway.anova_oneway (statsmodels 0.15) for
Welch (use_var='unequal') and Brown-Forsythe (use_var='bf', both Mehrotra's df
and the original k - 1); a seeded simulation of the Brown-Forsythe type I error
(Mehrotra 1997); scipy.stats.kruskal and scipy.stats.f_oneway (scipy 1.17);
scipy.stats.permutation_test for the permutation F.
"""

from __future__ import annotations

import numpy as np
import pytest
from groups_support import random_groups, study_from_groups
from scipy import stats
from statsmodels.stats.oneway import anova_oneway

from explorer.engine.errors import ExplorerError
from explorer.inference.omnibus import (
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
    """Brown-Forsythe F*: statistic, Satterthwaite df, Mehrotra's (1997) numerator df and its
    p-value as the test's p-value ('df_num', 'pvalue'), and the original k - 1 df reading
    ('pvalue2') as a typed field, against statsmodels anova_oneway(use_var='bf')."""
    ref = anova_oneway(groups, use_var="bf")
    got = brown_forsythe_f(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.df_den == pytest.approx(ref.df_denom, rel=1e-12)
    assert got.df_num == pytest.approx(ref.df_num, rel=1e-12)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-10)
    assert got.original_df_num == len(groups) - 1
    assert got.original_pvalue == pytest.approx(ref.pvalue2, rel=1e-10)
    assert "k - 1" in got._repr_html_()


def _rejection_rates(sizes: tuple[int, ...], sds: tuple[float, ...], reps: int, seed: int) -> tuple[float, float]:
    """Share of ``reps`` null data sets (equal means, normal, unequal SDs) where the
    Brown-Forsythe test rejects at 5%: (Mehrotra df, original k - 1 df). Each data set is
    drawn through its sufficient statistics (level mean ~ N(0, sd^2/n), centred SS ~
    sd^2 chi^2(n-1), independent for normal data), exact in distribution and fast."""
    from explorer.engine.fitrows import RowSet
    from explorer.engine.groupstats import GroupStats
    from explorer.engine.oneway import oneway_from_stats
    from explorer.engine.spec import ModelSpec

    rng = np.random.default_rng(seed)
    n = np.asarray(sizes)
    sd = np.asarray(sds, dtype=float)
    labels = tuple(f"L{i}" for i in range(len(n)))
    spec = ModelSpec(response="y", factors=("level",))
    hits = np.zeros(2)
    for _ in range(reps):
        gs = GroupStats(labels=labels, n=n, mean=rng.standard_normal(len(n)) * sd / np.sqrt(n),
                        m2=rng.chisquare(n - 1) * sd**2)
        bf = brown_forsythe_f(oneway_from_stats(gs, spec, rows=RowSet.empty()))
        hits += (bf.pvalue < 0.05, bf.original_pvalue < 0.05)
    return float(hits[0] / reps), float(hits[1] / reps)


def test_brown_forsythe_type_one_error_mehrotra_near_nominal() -> None:
    """Simulated type I error at alpha 0.05 (seeded; 4,000 null data sets per design, so the
    Monte-Carlo SE of a rate r is sqrt(r (1 - r) / 4000): 0.0034 at 5%, 0.0044 at 8.4%).

    Mehrotra (1997) reports the original k - 1 numerator df liberal under unequal variances
    and his corrected df close to nominal. (a) Six levels of five, one SD five times the
    others (the case quoted in the issue: 0.083 with k - 1 against 0.064 with Mehrotra's df;
    a 1e5-replicate run of this design gives 0.085 and 0.066): both rates within 4 SE of
    those figures. (b) Six levels of ten, one SD six times the others: k - 1 inflated (about
    0.099), Mehrotra within 4 SE of 0.05. The reported p-value is Mehrotra's in both."""
    reps = 4000

    def se(r: float) -> float:
        return float(np.sqrt(r * (1 - r) / reps))

    mehrotra, original = _rejection_rates((5,) * 6, (1,) * 5 + (5.0,), reps, seed=20)
    assert abs(original - 0.084) < 4 * se(0.084) and abs(mehrotra - 0.065) < 4 * se(0.065)
    assert original - mehrotra > 4 * se(0.08)
    mehrotra, original = _rejection_rates((10,) * 6, (1,) * 5 + (6.0,), reps, seed=21)
    assert original > 0.05 + 8 * se(0.05)
    assert abs(mehrotra - 0.05) < 4 * se(0.05)


def test_kruskal_matches_scipy_with_ties(groups, results) -> None:
    """H with tie correction (the data are rounded to 0.1, so there are ties) vs scipy.stats.kruskal."""
    ref = stats.kruskal(*groups)
    got = kruskal_wallis(results)
    assert got.tie_correction < 1
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
    se = a.monte_carlo_se
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


def test_extras_are_typed_fields_and_the_old_keys_warn(results) -> None:
    """Extras are attributes; the string-keyed reading of the last release warns and gives the same value."""
    a = permutation_f(results, 99, seed=2)
    assert (a.permutations, a.seed) == (99, 2) and a.tie_correction is None
    assert [label for label, _ in a.extras()] == ["permutations", "seed", "Monte-Carlo SE of p"]
    with pytest.warns(DeprecationWarning, match=r"read \.monte_carlo_se"):
        assert a.detail("Monte-Carlo SE of p") == a.monte_carlo_se
    with pytest.warns(DeprecationWarning, match="details is deprecated"):
        assert dict(a.details)["seed"] == 2
    with pytest.raises(KeyError, match="tie correction"):
        a.detail("tie correction")
    assert "Monte-Carlo SE of p" in a._repr_html_()
