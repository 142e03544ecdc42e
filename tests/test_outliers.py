"""Outlier screens on residuals (explorer.inference.outliers).

Outside references: NIST/SEMATECH e-Handbook 1.3.5.17.1 (Grubbs' two-sided critical
value formula; printed values 2.127, 2.290, 2.708 at N = 8, 10, 20, alpha 0.05);
statsmodels OLSInfluence.resid_studentized_external and OLSResults.outlier_test
(Bonferroni) on the same one-way fit (statsmodels 0.15); scipy.stats.median_abs_deviation
for the robust z rule of Iglewicz and Hoaglin (1993).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from groups_support import frame_from_groups, random_groups
from scipy import stats

import explorer as ex
from explorer.inference.outliers import (
    GRUBBS_MIN_N,
    bonferroni_outlier_test,
    grubbs_critical,
    grubbs_test,
    robust_z_screen,
)


@pytest.mark.parametrize(("n", "printed"), [(8, 2.127), (10, 2.290), (20, 2.708)])
def test_grubbs_critical_printed_values(n: int, printed: float) -> None:
    """e-Handbook 1.3.5.17.1 printed critical values (3 decimals)."""
    assert grubbs_critical(n, 0.05) == pytest.approx(printed, abs=5e-4)


@pytest.mark.parametrize("n", [3, 7, 15, 50, 137, 1000])
def test_grubbs_critical_formula(n: int) -> None:
    """G = ((N-1)/sqrt(N)) sqrt(t^2/(N-2+t^2)), t = upper alpha/(2N) point of t(N-2) (scipy.stats.t.isf)."""
    t = stats.t.isf(0.05 / (2 * n), n - 2)
    assert grubbs_critical(n) == pytest.approx((n - 1) / np.sqrt(n) * np.sqrt(t * t / (n - 2 + t * t)), rel=1e-12)


@pytest.fixture(scope="module")
def planted():
    """Four levels with one planted wild value; string row ids to check that ids come back."""
    groups = random_groups([10, 12, 9, 11], seed=8)
    frame = frame_from_groups(groups)
    frame.index = [f"r{i}" for i in range(len(frame))]
    frame.loc["r15", "y"] += 9.0
    return frame, ex.Study(frame, response="y", factors="level")


def test_studentized_matches_statsmodels(planted) -> None:
    """External studentized residuals and the smallest Bonferroni p vs statsmodels outlier_test."""
    frame, study = planted
    fit = smf.ols("y ~ C(level)", data=frame.reset_index(drop=True)).fit()
    screen = bonferroni_outlier_test(study.results)
    np.testing.assert_allclose(screen.scores, fit.get_influence().resid_studentized_external, rtol=1e-9)
    ref = fit.outlier_test(method="bonferroni")
    assert screen.smallest_pvalue == pytest.approx(ref["bonferroni(p)"].min(), rel=1e-8)
    n, df = len(frame), fit.df_resid - 1
    assert screen.threshold == pytest.approx(stats.t.isf(0.05 / (2 * n), df), rel=1e-12)
    assert screen.flagged == ("r15",)
    flagged_sm = frame.index[np.asarray(ref["bonferroni(p)"] < 0.05)].tolist()
    assert list(screen.flagged) == flagged_sm


def test_grubbs_and_robust_z_flag_the_planted_row(planted) -> None:
    """Grubbs on residuals (direct formula) and the MAD rule (scipy median_abs_deviation)."""
    frame, study = planted
    e = study.results.fit.residuals
    g = grubbs_test(study.results)
    assert g.statistic == pytest.approx(np.max(np.abs(e - e.mean())) / np.std(e, ddof=1), rel=1e-12)
    assert g.flagged == ("r15",) and g.threshold == pytest.approx(grubbs_critical(len(e)))
    z = robust_z_screen(study.results)
    med = np.median(e)
    np.testing.assert_allclose(z.scores, 0.6745 * (e - med) / stats.median_abs_deviation(e), rtol=1e-12)
    assert "r15" in z.flagged and z.threshold == 3.5
    assert study.edits == () and study.results.n_used == len(frame)  # screens never edit


def test_guards() -> None:
    """Grubbs is not run below its n guard; a zero MAD stops the robust rule; both say why."""
    small = ex.Study(frame_from_groups([[1.0, 2.0, 3.1], [2.0, 4.0, 4.4]]), response="y", factors="level")
    g = grubbs_test(small.results)
    assert not g.ran and g.flagged == () and str(GRUBBS_MIN_N) in g.notes[0]
    flat = ex.Study(frame_from_groups([[1.0] * 5, [2.0] * 5, [3.0, 4.0]]), response="y", factors="level")
    r = robust_z_screen(flat.results)
    assert not r.ran and "MAD is zero" in r.notes[0]
    assert isinstance(r.to_frame(), pd.DataFrame) and r.to_frame().empty


def test_agrees_with_the_influence_table(planted) -> None:
    """The screen's studentized residuals equal those of explorer.sensitivity.influence (one statistic, two views)."""
    from explorer.sensitivity.influence import influence_measures

    _, study = planted
    fit = study.results.fit
    infl = influence_measures(fit.residuals, fit.leverage, study.results.df_resid, row_ids=fit.row_ids)
    np.testing.assert_allclose(bonferroni_outlier_test(study.results).scores, infl.studentized_external, rtol=1e-12)
