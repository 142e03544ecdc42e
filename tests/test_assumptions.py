"""Assumption checks and the suggestion they point to (explorer.inference.assumptions).

Outside references: scipy.stats.levene (centre 'mean', 'median', 'trimmed'),
scipy.stats.bartlett and scipy.stats.shapiro (scipy 1.17), the latter applied to the
residuals computed directly as value minus its level mean.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from groups_support import random_groups, study_from_groups
from scipy import stats

from explorer.engine.errors import ExplorerError
from explorer.inference.assumptions import bartlett, levene, recommend, shapiro_residuals


@pytest.fixture(scope="module")
def groups() -> list[np.ndarray]:
    return random_groups([25, 28, 42, 36], seed=3, spread_step=0.7, shift=0.5, digits=1)


@pytest.fixture(scope="module")
def results(groups):
    return study_from_groups(groups).results


@pytest.mark.parametrize("center", ["median", "mean", "trimmed"])
def test_levene_matches_scipy(groups, results, center: str) -> None:
    """Levene's W for each centre vs scipy.stats.levene(..., center=center)."""
    ref = stats.levene(*groups, center=center)
    got = levene(results, center=center)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-8)
    assert center.split()[0] in got.method or (center == "median" and "median" in got.method)


def test_levene_trimmed_cut_matches_scipy(groups, results) -> None:
    """A 20% cut each end vs scipy.stats.levene(center='trimmed', proportiontocut=0.2)."""
    ref = stats.levene(*groups, center="trimmed", proportiontocut=0.2)
    assert levene(results, center="trimmed", proportion_to_cut=0.2).statistic == pytest.approx(ref.statistic, rel=1e-10)
    with pytest.raises(ExplorerError, match="center"):
        levene(results, center="mode")  # type: ignore[arg-type]


def test_bartlett_matches_scipy(groups, results) -> None:
    """Bartlett's T from level variances alone vs scipy.stats.bartlett on the raw groups."""
    ref = stats.bartlett(*groups)
    got = bartlett(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-8)


def test_shapiro_on_model_residuals(groups, results) -> None:
    """W on residuals (value minus level mean), not on raw groups, vs scipy.stats.shapiro."""
    resid = np.concatenate([g - g.mean() for g in groups])
    ref = stats.shapiro(resid)
    got = shapiro_residuals(results)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-7)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-5)
    assert got.within_limits and "5000" in got.limits


def test_shapiro_states_its_limits() -> None:
    """Above 5000 residuals: computed, flagged outside the limits, and no warning escapes."""
    big = study_from_groups(random_groups([2600, 2600], seed=1)).results
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        got = shapiro_residuals(big)
    assert not got.within_limits and got.pvalue is not None and "5000" in got.notes[0]


def test_bartlett_undefined_with_single_observation() -> None:
    """A level of one: Bartlett's test is undefined and says which level."""
    res = study_from_groups([[1.0, 2.0, 3.5], [2.0], [4.0, 5.5, 6.1]]).results
    got = bartlett(res)
    assert got.pvalue is None and "'L2'" in got.notes[0]


def test_recommendation_is_information_not_a_pretest_switch() -> None:
    """The suggestion is Welch's F whatever the checks show (Delacre, Leys, Mora and Lakens 2019,
    Int. Rev. Soc. Psychol. 32(1): Welch's F by default; Delacre, Lakens and Leys 2017: a pretest
    should not pick the test); the sentence says so, names the test the decision reads (the
    classic F by default) and reports what the checks show: unequal spreads, equal spreads with
    normal residuals, and skewed small groups."""
    rng = np.random.default_rng(7)
    spread = study_from_groups([rng.normal(0, s, 30) for s in (0.5, 1.0, 4.0)]).results
    rec = recommend(spread, levene(spread), shapiro_residuals(spread))
    assert rec.test == "Welch F" and rec.spreads_differ and "Games-Howell" in rec.sentence
    assert "spreads look different" in rec.sentence and "far off" in rec.sentence
    calm = study_from_groups([rng.normal(0, 1, 30) for _ in range(3)]).results
    rec = recommend(calm, levene(calm), shapiro_residuals(calm))
    assert rec.test == "Welch F" and rec.spreads_differ is False and "spreads look similar" in rec.sentence
    skew = study_from_groups([np.exp(rng.normal(0, 1.0, 12)) for _ in range(3)]).results
    rec = recommend(skew, levene(skew), shapiro_residuals(skew))
    assert rec.spreads_differ is False and rec.residuals_non_normal
    assert rec.test == "Welch F" and "small groups" in rec.sentence and "rank test" in rec.sentence
    for text in (rec.sentence, rec._repr_html_()):
        assert "not a switch" in text and "Delacre" in text
    assert rec.chosen == "classic F" and "classic F" in rec.sentence
    assert any("32(1)" in r for r in rec.references) and any("30(1)" in r for r in rec.references)


def test_shapiro_on_two_factor_residuals_matches_scipy_on_statsmodels_residuals():
    """Shapiro-Wilk on the residuals of a two-factor model: scipy.stats.shapiro on the
    residuals of statsmodels ols('y ~ C(a) * C(b)') gives the same W and p."""
    import pandas as pd
    from scipy import stats as sps
    from statsmodels.formula.api import ols

    import explorer as ex
    from explorer.inference.assumptions import shapiro_residuals

    rng = np.random.default_rng(11)
    df = pd.DataFrame({"a": rng.choice(["x", "y", "z"], 90), "b": rng.choice(["p", "q"], 90)})
    df["y"] = rng.gamma(2.0, 1.0, 90) + (df.a == "y") * 0.5
    ours = shapiro_residuals(ex.Study(df, "y", ["a", "b"]).results)
    ref = sps.shapiro(ols("y ~ C(a) * C(b)", data=df).fit().resid)
    assert ours.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert ours.pvalue == pytest.approx(ref.pvalue, rel=1e-6)


def _unbalanced_cells(seed: int, blocks: bool = False):
    """A 3 x 3 layout with 3-8 rows per cell (unbalanced), spreads that differ by cell."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    rows = [(a, b) for a in "xyz" for b in "pqr" for _ in range(int(rng.integers(3, 9)))]
    df = pd.DataFrame(rows, columns=["a", "b"])
    df["y"] = (rng.normal(0, 1, len(df)) * (1 + 2 * (df.a == "z")) + (df.a == "y") * 1.0
               + (df.b == "r") * 2.0 + 1e6)
    return df


@pytest.mark.parametrize("center", ["median", "mean", "trimmed"])
@pytest.mark.parametrize("model", ["full", "additive", "block"])
def test_levene_and_bartlett_across_cells_of_a_two_factor_design(center: str, model: str) -> None:
    """Levene (each centre) and Bartlett across the cells equal scipy.stats.levene(center=...)
    and scipy.stats.bartlett on the cell groups, whatever the model: full factorial, additive
    factors and a factor with an additive block, on a 3 x 3 unbalanced layout with a 1e6 offset.

    Levene's W is the one-way F on |y - centre of its cell| (Levene 1960; Brown and Forsythe
    1974): the deviations are from the cell centre, not the model residuals (a non-saturated
    model's residuals do not average to zero within a cell)."""
    from scipy import stats as sps

    import explorer as ex

    df = _unbalanced_cells(5)
    cells = [grp.to_numpy() for _, grp in df.groupby(["a", "b"])["y"]]
    if model == "block":
        study = ex.Study(df, "y", "a", blocks="b")
    else:
        study = ex.Study(df, "y", ["a", "b"], interactions=model == "full")
    res = study.results
    lev, bar = levene(res, center=center, proportion_to_cut=0.2), bartlett(res)  # type: ignore[arg-type]
    ref_l = sps.levene(*cells, center=center, proportiontocut=0.2)
    ref_b = sps.bartlett(*cells)
    assert lev.statistic == pytest.approx(ref_l.statistic, rel=1e-8)
    assert lev.pvalue == pytest.approx(ref_l.pvalue, rel=1e-7)
    assert bar.statistic == pytest.approx(ref_b.statistic, rel=1e-9)
    assert bar.pvalue == pytest.approx(ref_b.pvalue, rel=1e-8)


def test_levene_mean_centre_additive_model_is_not_read_from_residuals() -> None:
    """The reported case: a 3 x 3 unbalanced additive model, mean centre. The residuals of the
    additive fit are not deviations from the cell means, so |residual| gives another W; ours
    must equal scipy.stats.levene(center='mean') over the cells and differ from the F on
    |residual|."""
    from scipy import stats as sps

    import explorer as ex

    df = _unbalanced_cells(0)
    cells = [grp.to_numpy() for _, grp in df.groupby(["a", "b"])["y"]]
    res = ex.Study(df, "y", ["a", "b"], interactions=False).results
    ref = sps.levene(*cells, center="mean").statistic
    from_residuals = sps.f_oneway(*[np.abs(res.fit.residuals[res.fit.group == c]) for c in range(9)]).statistic
    assert abs(from_residuals - ref) > 1e-3 * ref  # the two readings differ on this design
    assert levene(res, center="mean").statistic == pytest.approx(ref, rel=1e-8)
