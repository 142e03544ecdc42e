"""Multiple comparisons (explorer.inference.comparisons).

Outside references: NIST/SEMATECH e-Handbook section 7.4.7.1 (Tukey's 95% simultaneous
intervals, four levels of five; printed to 2 decimals); scipy.stats.tukey_hsd (its
docstring example and unbalanced data; scipy 1.17); scipy.stats.dunnett docstring
example (printed p-values, which scipy computes by quasi-Monte Carlo) and
scipy.stats.multivariate_t.cdf at high precision; pingouin.pairwise_gameshowell
(pingouin 0.7); statsmodels.stats.multitest.multipletests (Holm, Bonferroni).
"""

from __future__ import annotations

import numpy as np
import pingouin as pg
import pytest
from groups_support import (
    NIST_TUKEY_GROUPS,
    frame_from_groups,
    random_groups,
    study_from_groups,
)
from scipy import stats
from statsmodels.stats.multitest import multipletests

from explorer.engine.errors import ExplorerError
from explorer.inference.comparisons import (
    adjust_pvalues,
    dunnett,
    games_howell,
    pairwise_t,
    simultaneous_pairs,
    tukey,
)

# scipy.stats.tukey_hsd docstring example (three groups of five).
SCIPY_TUKEY_GROUPS = [
    [24.5, 23.5, 26.4, 27.1, 29.9],
    [28.4, 34.2, 29.5, 32.2, 30.1],
    [26.1, 28.3, 24.3, 26.2, 27.8],
]


def test_tukey_nist_handbook_intervals() -> None:
    """e-Handbook 7.4.7.1: mu2-mu1 (0.29, 4.47); mu3-mu1 (1.13, 5.31); mu1-mu4 (-2.25, 1.93);
    mu2-mu3 (-2.93, 1.25); mu3-mu4 (0.97, 5.15) (2 printed decimals)."""
    table = tukey(study_from_groups(NIST_TUKEY_GROUPS).results)
    printed = {("L2", "L1"): (0.29, 4.47), ("L3", "L1"): (1.13, 5.31), ("L1", "L4"): (-2.25, 1.93),
               ("L2", "L3"): (-2.93, 1.25), ("L3", "L4"): (0.97, 5.15)}
    for (a, b), (lo, hi) in printed.items():
        row = table.pair(a, b)
        sign = 1 if row["first"] == a else -1
        got = sorted((sign * row["95% simultaneous low"], sign * row["95% simultaneous high"]))
        assert got == pytest.approx([lo, hi], abs=0.0051)
    assert table.method == "Tukey" and table.family_size == 6 and "studentized range" in table.adjustment


def _tukey_matches_scipy(groups) -> None:
    ref = stats.tukey_hsd(*groups)
    ci = ref.confidence_interval(0.95)
    table = tukey(study_from_groups(groups).results)
    i, j = np.triu_indices(len(groups), 1)
    np.testing.assert_allclose(table.difference, ref.statistic[i, j], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(table.pvalue, ref.pvalue[i, j], rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(table.ci_low, ci.low[i, j], rtol=1e-7)
    np.testing.assert_allclose(table.ci_high, ci.high[i, j], rtol=1e-7)


def test_tukey_matches_scipy_docstring_example() -> None:
    """scipy.stats.tukey_hsd docstring data: differences, p-values and 95% intervals."""
    _tukey_matches_scipy(SCIPY_TUKEY_GROUPS)


def test_tukey_kramer_matches_scipy_unbalanced() -> None:
    """Unequal sizes: scipy.stats.tukey_hsd (Tukey-Kramer) and the table is named Tukey-Kramer."""
    groups = random_groups([6, 9, 7, 12, 5], seed=4)
    _tukey_matches_scipy(groups)
    table = tukey(study_from_groups(groups).results)
    assert table.method == "Tukey-Kramer" and table.family_size == 10
    assert any("Kramer" in n for n in table.notes)


def test_tukey_does_not_switch_method_when_an_edit_unbalances() -> None:
    """Dropping one row renames Tukey to Tukey-Kramer; the numbers are the Kramer formula
    on the new sizes (same computation), checked against scipy.stats.tukey_hsd."""
    study = study_from_groups(NIST_TUKEY_GROUPS)
    before = tukey(study.results)
    study.drop([0], reason="test: unbalance the design")
    after = tukey(study.results)
    assert (before.method, after.method) == ("Tukey", "Tukey-Kramer")
    assert before.adjustment == after.adjustment and before.family_size == after.family_size
    ref = stats.tukey_hsd(NIST_TUKEY_GROUPS[0][1:], *NIST_TUKEY_GROUPS[1:])
    i, j = np.triu_indices(4, 1)
    np.testing.assert_allclose(after.pvalue, ref.pvalue[i, j], rtol=1e-6)


def test_simultaneous_pairs_general_matrix() -> None:
    """The general entry point with a k x k SE matrix reproduces tukey(); bad shapes are refused."""
    res = study_from_groups(SCIPY_TUKEY_GROUPS).results
    n = res.groups.n.astype(float)
    se = np.sqrt(res.ms_resid * (1 / n[:, None] + 1 / n[None, :]))
    table = simultaneous_pairs(res.groups.labels, res.groups.original_means, se, res.df_resid)
    np.testing.assert_allclose(table.pvalue, tukey(res).pvalue, rtol=1e-14)
    bonf = simultaneous_pairs(res.groups.labels, res.groups.original_means, se, res.df_resid, method="bonferroni")
    assert bonf.adjustment == "Bonferroni"
    half = stats.t.isf(0.05 / 2 / 3, res.df_resid) * bonf.se
    np.testing.assert_allclose(bonf.ci_high - bonf.difference, half, rtol=1e-12)
    with pytest.raises(ExplorerError, match="3x3"):
        simultaneous_pairs(res.groups.labels, res.groups.original_means, se[:2, :2], res.df_resid)


def test_games_howell_matches_pingouin() -> None:
    """Differences, SE, t, Welch df and p-values vs pingouin.pairwise_gameshowell; intervals
    vs d +- q(0.95; k, df_ij) se / sqrt(2) with scipy.stats.studentized_range.ppf."""
    groups = random_groups([6, 9, 7, 12], seed=2, spread_step=0.8)
    frame = frame_from_groups(groups)
    ref = pg.pairwise_gameshowell(data=frame, dv="y", between="level")
    table = games_howell(study_from_groups(groups).results)
    assert list(ref["A"]) == list(table.first) and list(ref["B"]) == list(table.second)
    np.testing.assert_allclose(table.difference, ref["diff"], rtol=1e-12)
    np.testing.assert_allclose(table.se, ref["se"], rtol=1e-12)
    np.testing.assert_allclose(table.statistic, ref["T"], rtol=1e-12)
    np.testing.assert_allclose(table.df, ref["df"], rtol=1e-12)
    np.testing.assert_allclose(table.pvalue, ref["pval"], rtol=1e-5, atol=1e-12)
    q = stats.studentized_range.ppf(0.95, 4, table.df)
    np.testing.assert_allclose(table.ci_high, table.difference + q / np.sqrt(2) * table.se, rtol=1e-8)
    assert table.method == "Games-Howell" and table.family_size == 6


def test_games_howell_single_observation_level_is_undefined() -> None:
    table = games_howell(study_from_groups([[1.0, 2.0, 3.5], [2.0], [4.0, 5.5, 6.1]]).results)
    assert np.isnan(table.pvalue[0]) and np.isfinite(table.pvalue[1]) and "one observation" in table.notes[0]
    assert table.to_frame()["p-value (studentized range, 3 means, Welch df per pair)"].isna().sum() == 2


DUNNETT_SAMPLES = [[3.8, 2.7, 4.0, 2.4], [2.8, 3.4, 3.7, 2.2, 2.0]]
DUNNETT_CONTROL = [2.9, 3.0, 2.5, 2.6, 3.2]


@pytest.fixture(scope="module")
def dunnett_results():
    return study_from_groups([DUNNETT_CONTROL, *DUNNETT_SAMPLES], ["control", "s1", "s2"]).results


@pytest.mark.parametrize(("alternative", "printed"), [("two-sided", [0.58325114, 0.99819341]),
                                                      ("greater", [0.30230596, 0.69115597])])
def test_dunnett_scipy_docstring(dunnett_results, alternative: str, printed: list[float]) -> None:
    """scipy.stats.dunnett docstring: statistics [0.90874545, -0.05007117] and the printed
    p-values; scipy's are quasi-Monte Carlo estimates, so agreement is to 2e-4."""
    table = dunnett(dunnett_results, "control", alternative=alternative)  # type: ignore[arg-type]
    np.testing.assert_allclose(table.statistic, [0.90874545, -0.05007117], atol=5e-9)
    np.testing.assert_allclose(table.pvalue, printed, atol=2e-4)
    assert table.family_size == 2 and "Dunnett" in table.adjustment


def test_dunnett_against_multivariate_t(dunnett_results) -> None:
    """Two-sided adjusted p = P(max |T_i| > |t|) from scipy.stats.multivariate_t.cdf (2e5 points)
    with Dunnett's correlations; the intervals have that coverage at their critical value."""
    table = dunnett(dunnett_results, "control")
    n = np.array([5.0, 4.0, 5.0])
    lam = np.sqrt(n[1:] / (n[1:] + n[0]))
    corr = np.outer(lam, lam)
    np.fill_diagonal(corr, 1.0)
    mvt = stats.multivariate_t(shape=corr, df=11)
    for t, p in zip(np.abs(table.statistic), table.pvalue):
        ref = 1 - mvt.cdf(np.full(2, t), lower_limit=np.full(2, -t), maxpts=200_000)
        assert p == pytest.approx(ref, abs=2e-5)
    crit = (table.ci_high[0] - table.difference[0]) / table.se[0]
    cover = mvt.cdf(np.full(2, crit), lower_limit=np.full(2, -crit), maxpts=200_000)
    assert cover == pytest.approx(0.95, abs=2e-5)


def test_dunnett_one_sided_intervals_and_bad_control(dunnett_results) -> None:
    less = dunnett(dunnett_results, "control", alternative="less")
    assert np.all(np.isneginf(less.ci_low)) and "at most" in less.notes[0]
    with pytest.raises(ExplorerError, match="Did you mean 'control'"):
        dunnett(dunnett_results, "Control ")


@pytest.mark.parametrize("method", ["holm", "bonferroni"])
def test_adjustments_match_statsmodels(method: str) -> None:
    """Holm and Bonferroni adjusted p-values vs statsmodels multipletests (ties included)."""
    p = np.array([0.01, 0.04, 0.03, 0.04, 0.2, 0.0001, 0.5, 0.03])
    ref = multipletests(p, method=method)[1]
    np.testing.assert_allclose(adjust_pvalues(p, method), ref, rtol=1e-14)


def test_pairwise_t_table_names_its_family() -> None:
    """Pooled-variance pairwise t: unadjusted p from scipy.stats.t; Holm via multipletests."""
    res = study_from_groups(random_groups([6, 9, 7, 12], seed=2)).results
    raw = pairwise_t(res, adjust="none")
    want = 2 * stats.t.sf(np.abs(raw.statistic), res.df_resid)
    np.testing.assert_allclose(raw.pvalue, want, rtol=1e-12)
    holm = pairwise_t(res, adjust="holm")
    np.testing.assert_allclose(holm.pvalue, multipletests(raw.pvalue, method="holm")[1], rtol=1e-12)
    assert holm.adjustment == "Holm" and holm.family_size == 6 and "family of 6" in holm.title
    assert "Bonferroni intervals" in holm.notes[0]
    with pytest.raises(ExplorerError, match="adjust"):
        pairwise_t(res, adjust="sidak")  # type: ignore[arg-type]
