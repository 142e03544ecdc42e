"""Repeated measures: within-subject F tests, sphericity, epsilons, multivariate tests.

Outside references (test-only oracles): pingouin ``rm_anova``, ``mixed_anova``,
``sphericity`` and ``epsilon`` on pingouin's bundled data sets and on generated data;
statsmodels ``AnovaRM`` (univariate within-subject F); statsmodels ``MANOVA`` on the
orthonormally transformed scores for the multivariate statistics; the Huynh-Feldt
(1976) and Lecoutre (1991) formulas by hand.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.multivariate.manova import MANOVA
from statsmodels.stats.anova import AnovaRM

import explorer as ex
from explorer.engine.errors import DesignError
from explorer.inference.repeated_measures import repeated_measures

pg = pytest.importorskip("pingouin")


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pingouin's pandas deprecation warnings
        yield


def generated(subjects=12, times=4, groups=0, seed=0, corr=0.6) -> pd.DataFrame:
    """Invented repeated measures with non-spherical errors (AR-like), optional between groups."""
    rng = np.random.default_rng(seed)
    cov = corr ** np.abs(np.subtract.outer(np.arange(times), np.arange(times))) * np.linspace(1, 3, times)
    rows = []
    for s in range(subjects):
        g = f"g{s % groups}" if groups else None
        e = rng.multivariate_normal(np.zeros(times), cov)
        for t in range(times):
            rows.append((f"s{s:02d}", g, f"t{t}", 10 + 0.3 * t + (0.5 * t if g == "g1" else 0) + e[t]))
    frame = pd.DataFrame(rows, columns=["subject", "group", "time", "y"])
    return frame if groups else frame.drop(columns="group")


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_one_way_within_against_pingouin_and_anovarm(seed):
    """pingouin rm_anova (F, p, GG epsilon, GG p, Mauchly W and p), pingouin epsilon (HF), statsmodels AnovaRM."""
    frame = generated(seed=seed)
    study = ex.Study(frame, "y", ["time"], subject="subject", within=["time"])
    row = study.results.partition.row("time")
    ref = pg.rm_anova(data=frame, dv="y", within="time", subject="subject", correction=True, detailed=True)
    r = ref.set_index("Source").loc["time"]
    assert row.statistic == pytest.approx(r["F"], rel=1e-10)
    assert row.pvalue == pytest.approx(r["p_unc"], rel=1e-8)
    assert row.error_term == "subject × time" or row.error_term == "residual"
    arm = AnovaRM(frame, "y", "subject", within=["time"]).fit().anova_table
    assert row.statistic == pytest.approx(arm.loc["time", "F Value"], rel=1e-10)
    rm = repeated_measures(study.results)
    sph = rm.sphericity[0]
    spher = pg.sphericity(frame, dv="y", within="time", subject="subject")
    assert sph.mauchly_w == pytest.approx(spher.W, rel=1e-8)
    assert sph.chi_square == pytest.approx(spher.chi2, rel=1e-8)
    # Box's second-order term: pingouin (following R) puts 3k where Anderson (2003) has 3p in w2, so the
    # p-values differ in the 4th digit at p = 3; with three times (p = 2) the term vanishes: equal (below).
    assert sph.pvalue == pytest.approx(spher.pval, rel=2e-3)
    assert sph.pvalue_first_order == pytest.approx(stats.chi2.sf(spher.chi2, 5), rel=1e-10)
    assert sph.greenhouse_geisser == pytest.approx(pg.epsilon(frame, dv="y", within="time", subject="subject"),
                                                   rel=1e-10)
    assert sph.huynh_feldt == pytest.approx(
        pg.epsilon(frame, dv="y", within="time", subject="subject", correction="hf"), rel=1e-10)
    _, F, df1, p_gg, _ = sph.corrected[0]
    p_gg_ref = pg.rm_anova(data=frame, dv="y", within="time", subject="subject", correction=True)["p_GG_corr"].iloc[0]
    assert p_gg == pytest.approx(p_gg_ref, rel=1e-8)


def test_mauchly_with_two_df_equals_pingouin_exactly():
    frame = generated(times=3, seed=5)
    rm = repeated_measures(ex.Study(frame, "y", ["time"], subject="subject", within=["time"]).results)
    spher = pg.sphericity(frame, dv="y", within="time", subject="subject")
    assert rm.sphericity[0].pvalue == pytest.approx(spher.pval, rel=1e-10)


def test_huynh_feldt_and_lecoutre_by_hand():
    """HF (1976): (N p e - 2) / (p (N - g - p e)); Lecoutre (1991): N - g + 1 in place of N; capped at 1."""
    frame = generated(subjects=14, groups=2, seed=4, corr=0.8)
    rm = repeated_measures(ex.Study(frame, "y", ["group", "time"], subject="subject", within=["time"]).results)
    s = rm.sphericity[0]
    n, g, p, e = 14, 2, 3, s.greenhouse_geisser
    assert s.huynh_feldt == pytest.approx(min(1.0, (n * p * e - 2) / (p * (n - g - p * e))), rel=1e-12)
    assert s.huynh_feldt_lecoutre == pytest.approx(min(1.0, ((n - g + 1) * p * e - 2) / (p * (n - g - p * e))),
                                                   rel=1e-12)


@pytest.mark.parametrize("data", ["bundled", "generated"])
def test_mixed_between_within_against_pingouin(data):
    """pingouin mixed_anova: F and p of the between, within and interaction terms, GG epsilon, Mauchly."""
    if data == "bundled":
        frame = pg.read_dataset("mixed_anova")
        dv, within, between, subject = "Scores", "Time", "Group", "Subject"
    else:
        frame = generated(subjects=16, groups=2, seed=9)
        dv, within, between, subject = "y", "time", "group", "subject"
    study = ex.Study(frame, dv, [between, within], subject=subject, within=[within])
    ref = pg.mixed_anova(data=frame, dv=dv, within=within, between=between, subject=subject,
                         correction=True).set_index("Source")
    t = study.results.partition
    for ours, theirs in [(between, between), (within, within), (f"{between} × {within}", "Interaction")]:
        assert t.row(ours).statistic == pytest.approx(ref.loc[theirs, "F"], rel=1e-9)
        assert t.row(ours).pvalue == pytest.approx(ref.loc[theirs, "p_unc"], rel=1e-8)
    assert t.row(between).error_term == f"{subject} (within {between})"
    rm = repeated_measures(study.results)
    s = rm.sphericity[0]
    assert s.greenhouse_geisser == pytest.approx(ref.loc[within, "eps"], rel=1e-8)
    assert s.mauchly_w == pytest.approx(ref.loc[within, "W_spher"], rel=1e-8)
    assert s.pvalue == pytest.approx(ref.loc[within, "p_spher"], rel=2e-3)  # 3k vs 3p in w2 (see above)
    gg = {src: p for src, _, _, p, _ in s.corrected}
    assert gg[within] == pytest.approx(ref.loc[within, "p_GG_corr"], rel=1e-8)


def test_two_within_factors_against_pingouin_and_anovarm():
    """pingouin rm_anova with two within factors (bundled rm_anova2): F, GG epsilon, GG p, Mauchly; AnovaRM F."""
    frame = pg.read_dataset("rm_anova2")
    study = ex.Study(frame, "Performance", ["Time", "Metric"], subject="Subject", within=["Time", "Metric"])
    ref = pg.rm_anova(data=frame, dv="Performance", within=["Time", "Metric"], subject="Subject",
                      correction=True).set_index("Source")
    arm = AnovaRM(frame, "Performance", "Subject", within=["Time", "Metric"]).fit().anova_table
    rm = repeated_measures(study.results)
    by_term = {s.term: s for s in rm.sphericity}
    for ours, theirs, arm_name in [("Time", "Time", "Time"), ("Metric", "Metric", "Metric"),
                                   ("Time × Metric", "Time * Metric", "Time:Metric")]:
        row = study.results.partition.row(ours)
        assert row.statistic == pytest.approx(ref.loc[theirs, "F"], rel=1e-9)
        assert row.statistic == pytest.approx(arm.loc[arm_name, "F Value"], rel=1e-9)
        s = by_term[ours]
        assert s.greenhouse_geisser == pytest.approx(ref.loc[theirs, "eps"], rel=1e-8)
        assert s.corrected[0][3] == pytest.approx(ref.loc[theirs, "p_GG_corr"], rel=1e-8)
        if s.df > 1:
            assert s.mauchly_w == pytest.approx(ref.loc[theirs, "W_spher"], rel=1e-8)


def test_multivariate_tests_against_statsmodels_manova():
    """Wilks, Pillai, Hotelling-Lawley, Roy for time and group × time = statsmodels MANOVA on transformed scores."""
    frame = generated(subjects=20, groups=3, seed=2, times=4)
    study = ex.Study(frame, "y", ["group", "time"], subject="subject", within=["time"])
    rm = repeated_measures(study.results)
    wide = frame.pivot(index="subject", columns="time", values="y")
    groups = frame.groupby("subject")["group"].first().reindex(wide.index)
    c = np.array([[1, -1, 0, 0], [0, 1, -1, 0], [0, 0, 1, -1]], float).T  # any basis of contrasts
    z = pd.DataFrame(wide.to_numpy() @ c, columns=["d1", "d2", "d3"])
    z["group"] = groups.to_numpy()
    ref = MANOVA.from_formula("d1 + d2 + d3 ~ C(group, Sum)", data=z).mv_test()
    names = {"Wilks' lambda": "Wilks' lambda", "Pillai's trace": "Pillai's trace",
             "Hotelling-Lawley trace": "Hotelling-Lawley trace", "Roy's largest root": "Roy's greatest root"}
    for source, key in [("time", "Intercept"), ("group × time", "C(group, Sum)")]:
        ours = next(m for m in rm.multivariate if m.source == source)
        table = ref.results[key]["stat"]
        for name, value, F, _df1, df2, p in ours.statistics:
            r = table.loc[names[name]]
            assert value == pytest.approx(float(r["Value"]), rel=1e-8)
            assert F == pytest.approx(float(r["F Value"]), rel=1e-8)
            assert df2 == pytest.approx(float(r["Den DF"]), rel=1e-10)
            assert p == pytest.approx(float(r["Pr > F"]), rel=1e-6)


def test_subject_errors():
    frame = generated(subjects=8, groups=2, seed=1)
    bad = frame.copy()
    bad.loc[0, "group"] = "g1" if bad.loc[0, "group"] == "g0" else "g0"
    with pytest.raises(DesignError, match="changes within subject"):
        ex.Study(bad, "y", ["group", "time"], subject="subject", within=["time"])
    with pytest.raises(DesignError, match="does not vary within any subject"):
        ex.Study(frame, "y", ["group", "time"], subject="subject", within=["time", "group"])
    incomplete = frame.drop(index=[0])
    study = ex.Study(incomplete, "y", ["group", "time"], subject="subject", within=["time"])
    assert any("not observed at every level" in n for n in study.results.notes)
    with pytest.raises(ex.ExplorerError, match="lack some combination"):
        repeated_measures(study.results)


def test_residual_note_names_the_subject_interaction():
    frame = generated(seed=3)
    notes = ex.Study(frame, "y", ["time"], subject="subject", within=["time"]).results.notes
    assert "the residual is the subject × time interaction" in " ".join(notes)
