"""Intervals follow the analysis alpha.

Comparison intervals default to 1 - alpha and agree with the letters at that alpha; the
effect-size statement "the interval excludes zero" reads the 1 - 2 alpha interval, which
excludes zero exactly when the F test rejects at alpha (Steiger 2004, Psychol. Methods 9).

Outside references: scipy.stats.tukey_hsd(...).confidence_interval(0.99) (its docstring
data; scipy 1.17), scipy.stats.tukey_hsd(equal_var=False) for Games-Howell,
scipy.stats.multivariate_t for Dunnett's 99% coverage (scipy.stats.dunnett docstring data;
its own quasi-Monte Carlo confidence_interval(0.99) loosely), scipy.stats.t
quantiles for Bonferroni intervals, statsmodels OLS ``t_test(...).conf_int(alpha=0.01)``
for least-squares means (statsmodels 0.15), statsmodels ``confint_effectsize_oneway`` at
alpha 0.10 for the 90% effect-size interval, scipy.stats.f_oneway for the p = 0.040 case.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from groups_support import frame_from_groups, random_groups
from scipy import stats
from statsmodels.stats.oneway import confint_effectsize_oneway

import explorer as ex
from explorer.inference.battery import run_battery
from explorer.inference.comparisons import dunnett, games_howell, pairwise_t, tukey
from explorer.inference.effect_sizes import effect_sizes
from explorer.inference.letters import compact_letters

SCIPY_TUKEY_GROUPS = [  # scipy.stats.tukey_hsd docstring example
    [24.5, 23.5, 26.4, 27.1, 29.9],
    [28.4, 34.2, 29.5, 32.2, 30.1],
    [26.1, 28.3, 24.3, 26.2, 27.8],
]
DUNNETT_SAMPLES = [[3.8, 2.7, 4.0, 2.4], [2.8, 3.4, 3.7, 2.2, 2.0]]  # scipy.stats.dunnett docstring
DUNNETT_CONTROL = [2.9, 3.0, 2.5, 2.6, 3.2]
#: Three levels of six with the classic F at p = 0.0398 (scipy.stats.f_oneway).
P040_GROUPS = [
    [4.1, 5.3, 4.8, 5.9, 4.4, 5.0],
    [5.2, 4.6, 6.1, 5.5, 5.8, 4.9],
    [5.66, 6.36, 5.16, 6.46, 5.46, 6.06],
]


def _study(groups, alpha: float, names=None) -> ex.Study:
    return ex.Study(frame_from_groups(groups, names), "y", "level", alpha=alpha)


def _pairs(table, labels):
    index = {lab: i for i, lab in enumerate(labels)}
    return [(index[a], index[b]) for a, b in zip(table.first, table.second)]


def test_tukey_intervals_at_alpha_001_match_scipy() -> None:
    """alpha 0.01: Tukey intervals are 99% by default, equal to scipy tukey_hsd(...)
    .confidence_interval(0.99), and each pair's interval excludes 0 exactly when its
    p-value is below 0.01 and the two levels share no letter."""
    res = _study(SCIPY_TUKEY_GROUPS, 0.01).results
    table = tukey(res)
    ci = stats.tukey_hsd(*SCIPY_TUKEY_GROUPS).confidence_interval(0.99)
    assert table.confidence == pytest.approx(0.99)
    assert "99% simultaneous low" in table.to_frame().columns
    for k, (i, j) in enumerate(_pairs(table, res.groups.labels)):
        assert table.ci_low[k] == pytest.approx(ci.low[i, j], rel=1e-7)
        assert table.ci_high[k] == pytest.approx(ci.high[i, j], rel=1e-7)
    _intervals_agree_with_letters(table, 0.01)


def _intervals_agree_with_letters(table, alpha: float) -> None:
    letters = compact_letters(table, alpha=alpha)
    excludes = (table.ci_low > 0) | (table.ci_high < 0)
    assert np.array_equal(excludes, table.significant(alpha))
    for (a, b), ex_ in zip(zip(table.first, table.second), excludes):
        share = bool(set(letters.letter_of(a)) & set(letters.letter_of(b)))
        assert share != bool(ex_), (a, b)


def test_games_howell_and_bonferroni_intervals_at_alpha_001() -> None:
    """Games-Howell 99% intervals = scipy tukey_hsd(equal_var=False).confidence_interval(0.99);
    Bonferroni pairwise t: d +- t(1 - 0.01/(2m); df) se (scipy.stats.t)."""
    groups = random_groups([6, 9, 7, 12], seed=2, spread_step=0.8, shift=1.2)
    res = _study(groups, 0.01).results
    gh = games_howell(res)
    ci = stats.tukey_hsd(*groups, equal_var=False).confidence_interval(0.99)
    for k, (i, j) in enumerate(_pairs(gh, res.groups.labels)):
        assert gh.ci_low[k] == pytest.approx(ci.low[i, j], rel=1e-6, abs=1e-9)
        assert gh.ci_high[k] == pytest.approx(ci.high[i, j], rel=1e-6, abs=1e-9)
    _intervals_agree_with_letters(gh, 0.01)
    bonf = pairwise_t(res, adjust="bonferroni")
    half = stats.t.isf(0.01 / 2 / 6, res.df_resid) * bonf.se
    np.testing.assert_allclose(bonf.ci_high - bonf.difference, half, rtol=1e-10)
    assert bonf.confidence == pytest.approx(0.99)
    _intervals_agree_with_letters(bonf, 0.01)


def test_dunnett_intervals_at_alpha_001() -> None:
    """scipy.stats.dunnett docstring data at alpha 0.01: the intervals are 99% by default; at
    their critical value the two-sided family coverage from scipy.stats.multivariate_t.cdf
    (4e5 points, Dunnett's correlations) is 0.99; scipy's own confidence_interval(0.99) is a
    quasi-Monte Carlo estimate that moves by about 0.5% between seeds (1e-2 here)."""
    res = _study([DUNNETT_CONTROL, *DUNNETT_SAMPLES], 0.01, names=["control", "s1", "s2"]).results
    table = dunnett(res, "control")
    assert table.confidence == pytest.approx(0.99)
    n = np.array([5.0, 4.0, 5.0])
    lam = np.sqrt(n[1:] / (n[1:] + n[0]))
    corr = np.outer(lam, lam)
    np.fill_diagonal(corr, 1.0)
    crit = (table.ci_high[0] - table.difference[0]) / table.se[0]
    cover = stats.multivariate_t(shape=corr, df=11).cdf(np.full(2, crit), lower_limit=np.full(2, -crit),
                                                         maxpts=400_000)
    assert cover == pytest.approx(0.99, abs=2e-5)
    ref = stats.dunnett(*DUNNETT_SAMPLES, control=DUNNETT_CONTROL, rng=np.random.default_rng(0)).confidence_interval(0.99)
    np.testing.assert_allclose(table.ci_low, ref.low, rtol=1e-2)
    np.testing.assert_allclose(table.ci_high, ref.high, rtol=1e-2)


def test_least_squares_means_and_their_comparisons_at_alpha_001() -> None:
    """Two factors at alpha 0.01: least-squares-mean intervals are 99% and equal statsmodels
    t_test(L).conf_int(alpha=0.01); Tukey-Kramer comparisons of them are 99% simultaneous
    (half width q(0.99; k, df) se / sqrt(2), scipy.stats.studentized_range) and agree with
    their letters at 0.01."""
    from statsmodels.formula.api import ols

    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"fa": rng.choice(["a1", "a2", "a3"], 70), "fb": rng.choice(["b1", "b2"], 70, p=[0.7, 0.3])})
    frame["y"] = rng.normal(size=70) + frame.fa.map({"a1": 0, "a2": 1, "a3": 2}) + (frame.fb == "b2") * 2
    res = ex.Study(frame, "y", ["fa", "fb"], interactions=False, alpha=0.01).results
    mm = res.marginal_means["fa"]
    model = ols("y ~ C(fa, Sum) + C(fb, Sum)", frame).fit()
    L = np.array([[1, 1, 0, 0], [1, 0, 1, 0], [1, -1, -1, 0]], dtype=float)
    ref = np.asarray(model.t_test(L).conf_int(alpha=0.01))
    assert mm.confidence == pytest.approx(0.99)
    np.testing.assert_allclose(mm.ci_low, ref[:, 0], rtol=1e-9)
    np.testing.assert_allclose(mm.ci_high, ref[:, 1], rtol=1e-9)
    comp = res.compare_means("fa")
    q = stats.studentized_range.ppf(0.99, 3, res.df_resid)
    np.testing.assert_allclose(comp.ci_high - comp.difference, q / np.sqrt(2) * comp.se, rtol=1e-6)
    assert comp.confidence == pytest.approx(0.99)
    _intervals_agree_with_letters(comp, 0.01)
    assert res.levels["fa"].confidence == pytest.approx(0.99)


def test_battery_intervals_follow_its_alpha() -> None:
    """The battery at alpha 0.01 shows 99% comparison intervals and 98% effect-size
    intervals (1 - 2 alpha); an explicit confidence still wins for the comparisons."""
    res = _study(SCIPY_TUKEY_GROUPS, 0.05).results
    bat = run_battery(res, alpha=0.01)
    assert all(t.confidence == pytest.approx(0.99) for t in bat.comparisons)
    assert bat.effect_sizes.confidence == pytest.approx(0.98)
    assert dict(bat.options)["confidence"] == pytest.approx(0.99)
    assert run_battery(res, confidence=0.9).tukey.confidence == 0.9


def test_effect_size_statement_at_p_040_uses_the_interval_matching_the_f_test() -> None:
    """p = 0.040 at alpha 0.05 (scipy.stats.f_oneway): the 90% (1 - 2 alpha) interval of the
    proportion of variance explained excludes zero, as the F test does (Steiger 2004), and it
    equals statsmodels confint_effectsize_oneway(alpha=0.10); the 95% interval would not
    (its lower limit is 0 whenever p > 0.025). At p = 0.06 the statement is the reverse."""
    ref_p = stats.f_oneway(*P040_GROUPS).pvalue
    assert ref_p == pytest.approx(0.040, abs=5e-4)
    res = _study(P040_GROUPS, 0.05).results
    es = effect_sizes(res)
    assert es.confidence == pytest.approx(0.90)
    assert es.excludes_zero is True
    assert es.ci_proportion[0] > 0
    assert any("excludes no effect" not in n and "excludes zero" in n for n in es.notes)
    ref = confint_effectsize_oneway(res.statistic(), (2, res.df_resid), nobs=res.n_used, alpha=0.10)
    np.testing.assert_allclose(es.ci_proportion, np.square(ref.ci_eta), rtol=1e-3)
    wide = effect_sizes(res, confidence=0.95)
    assert wide.ci_proportion[0] == 0.0
    assert wide.excludes_zero is True  # the statement still reads the interval that matches the F test
    assert not any("does not exclude" in n for n in wide.notes)
    shifted = [P040_GROUPS[0], P040_GROUPS[1], [x - 0.1 for x in P040_GROUPS[2]]]
    assert 0.05 < stats.f_oneway(*shifted).pvalue < 0.1
    none = effect_sizes(_study(shifted, 0.05).results)
    assert none.excludes_zero is False and none.ci_proportion[0] == 0.0
    assert any("does not exclude" in n for n in none.notes)
