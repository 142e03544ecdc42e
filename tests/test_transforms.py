"""Transforms of the response as a recorded model choice, and the Box-Cox profile.

Outside references (scipy 1.17, statsmodels 0.15): ``scipy.stats.boxcox_llf`` and
``scipy.stats.boxcox(x, alpha=...)`` (estimate and profile-likelihood interval) for the
model with an intercept only; for a one-factor model the profile against
``(lambda - 1) sum(log y) - n/2 log(RSS/n)`` with ``scipy.stats.boxcox(y, lambda)`` and
the residual sum of squares of statsmodels ``ols('t ~ C(g)')`` (Box and Cox 1964, sec. 3);
analyses on the log, square root and a Box-Cox power against ``scipy.stats.f_oneway`` and
statsmodels ``anova_lm`` of the transformed data.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import optimize, stats
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.errors import DataError, DesignError, ExplorerError
from explorer.inference.box_cox import box_cox, profile_estimate, profile_loglik
from explorer.sensitivity.sweep import robustness_sweep


def skewed(seed=1, n=10, k=4):
    rng = np.random.default_rng(seed)
    y = np.round(np.exp(rng.normal(2 + 0.15 * np.repeat(np.arange(k), n), 0.5)), 4)
    return pd.DataFrame({"y": y, "g": np.repeat([f"L{i}" for i in range(k)], n)})


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_intercept_only_profile_matches_scipy(seed):
    """No factor: the profile is scipy's boxcox_llf; estimate and 95% interval = scipy.stats.boxcox(alpha=0.05)."""
    y = np.exp(np.random.default_rng(seed).normal(1, 0.6, 50))
    loglik, _ = profile_loglik(y, np.ones((y.size, 1)))
    for lam in (-1.3, -0.2, 0.0, 0.4, 1.7):
        assert loglik(lam) == pytest.approx(stats.boxcox_llf(lam, y), rel=1e-12)
    best = profile_estimate(loglik, 0.95)
    lam, lo, hi = best.estimate, best.low, best.high
    _, lmax, (clo, chi) = stats.boxcox(y, alpha=0.05)
    assert lam == pytest.approx(lmax, abs=1e-6)
    assert (lo, hi) == pytest.approx((clo, chi), abs=1e-6)


def test_one_factor_profile_against_statsmodels_residuals():
    df = skewed()
    res = ex.Study(df, "y", "g").results
    b = box_cox(res)
    n, slog = len(df), float(np.log(df.y).sum())

    def ref(lam):
        t = stats.boxcox(df.y.to_numpy(), lam)
        ssr = smf.ols("t ~ C(g)", df.assign(t=t)).fit().ssr
        return (lam - 1) * slog - n / 2 * np.log(ssr / n)

    np.testing.assert_allclose(b.loglik, [ref(p) for p in b.powers], rtol=1e-10)
    best = optimize.minimize_scalar(lambda v: -ref(v), bracket=(-2, 2), method="brent").x
    assert b.estimate == pytest.approx(best, abs=1e-5)
    crit = stats.chi2.ppf(0.95, 1) / 2
    assert ref(b.ci_low) == pytest.approx(ref(best) - crit, abs=1e-7)
    assert ref(b.ci_high) == pytest.approx(ref(best) - crit, abs=1e-7)
    assert "log (0)" in b.sentence()


def test_box_cox_refuses_values_at_or_below_zero():
    df = skewed()
    df.loc[3, "y"] = 0.0
    study = ex.Study(df, "y", "g")
    with pytest.raises(DesignError, match="above zero"):
        study.box_cox()
    with pytest.raises(DataError, match="above zero"):
        study.set_transform("log")
    assert study.spec.transform == "none" and study.planned_requests == ()
    study.set_transform("sqrt")  # zero is fine for the square root
    assert study.spec.transform == "sqrt"


@pytest.mark.parametrize("transform, fn", [("log", np.log), ("sqrt", np.sqrt),
                                           (0.37, lambda v: stats.boxcox(v, 0.37))])
def test_analysis_on_the_transformed_response(transform, fn):
    df = skewed()
    study = ex.Study(df, "y", "g")
    study.drop(0, reason="invented: contaminated")
    study.drop(5, reason="invented: contaminated")
    before = study.disclosure
    study.set_transform(transform)
    t = fn(df.y.to_numpy())
    kept = df.assign(t=t).drop(index=[0, 5])
    ref = stats.f_oneway(*[grp.t.to_numpy() for _, grp in kept.groupby("g")])
    assert study.results.pvalue("g") == pytest.approx(ref.pvalue, rel=1e-9)
    assert len(study.edits) == 2  # edits stay in effect
    counted = getattr(study.disclosure, "alternatives", study.disclosure.specifications)
    assert counted == getattr(before, "alternatives", before.specifications) + 1
    assert "Analysed on" in study.results.notes[0]
    study.undo()  # undo an edit: still on the transformed response
    kept1 = df.assign(t=t).drop(index=[0])
    ref1 = stats.f_oneway(*[grp.t.to_numpy() for _, grp in kept1.groupby("g")])
    assert study.results.pvalue("g") == pytest.approx(ref1.pvalue, rel=1e-9)


def test_two_factors_on_the_log_match_statsmodels():
    rng = np.random.default_rng(4)
    df = pd.DataFrame({"A": np.repeat(list("abc"), 8), "B": np.tile(list("xy"), 12)})
    df["y"] = np.exp(rng.normal(1 + (df.A == "b") * 0.3, 0.4))
    df = df.drop(index=[1, 2, 9])
    res = ex.Study(df, "y", ["A", "B"], transform="log").results
    ref = anova_lm(smf.ols("np.log(y) ~ C(A, Sum) * C(B, Sum)", df).fit(), typ=2)
    assert res.partition.row("A").statistic == pytest.approx(ref.loc["C(A, Sum)", "F"], rel=1e-9)
    assert res.partition.row("A × B").pvalue == pytest.approx(ref.loc["C(A, Sum):C(B, Sum)", "PR(>F)"], rel=1e-8)


def test_transform_is_saved_replayed_and_checked(tmp_path):
    df = skewed()
    csv = tmp_path / "d.csv"
    df.to_csv(csv, index=False)
    study = ex.Study(csv, "y", "g")
    study.set_transform(-0.5)
    doc = study.to_dict()
    assert doc["spec"]["transform"] == -0.5
    again = ex.Study.from_dict(doc, csv)
    assert again.results.pvalue("g") == study.results.pvalue("g")
    assert "transform=-0.5" in study.to_code()
    for bad in ("cube", True, float("nan"), 50, None):
        with pytest.raises(ExplorerError):
            ex.Study(df, "y", "g", transform=bad)
    assert ex.Study(df, "y", "g", transform=0).spec.transform == "log"
    assert ex.Study(df, "y", "g", transform=1.0).spec.transform == "none"


def test_sweep_offers_the_chosen_transform():
    """The study's transform is the sweep's default; 'none' and a listed power read the measured values (f_oneway)."""
    df = skewed()
    study = ex.Study(df, "y", "g", transform="log")
    sweep = robustness_sweep(study, tests=["classic"], outlier_rules=["none"], record=False)
    by = dict(zip(sweep.table["transform"], sweep.table["p-value"]))
    groups = [grp.y.to_numpy() for _, grp in df.groupby("g")]
    assert by["log"] == pytest.approx(stats.f_oneway(*[np.log(g) for g in groups]).pvalue, rel=1e-9)
    assert by["none"] == pytest.approx(stats.f_oneway(*groups).pvalue, rel=1e-9)
    assert sweep.table.loc[sweep.table["transform"] == "log", "p-value"].iloc[0] == pytest.approx(
        study.results.pvalue("g"), rel=1e-12)
    sweep2 = robustness_sweep(ex.Study(df, "y", "g"), tests=["classic"], outlier_rules=["none"],
                              transforms=["none", 0.5, "sqrt"], record=False)
    by2 = dict(zip(sweep2.table["transform"], sweep2.table["p-value"]))
    assert by2["power 0.5"] == pytest.approx(stats.f_oneway(*[stats.boxcox(g, 0.5) for g in groups]).pvalue, rel=1e-9)
    assert by2["sqrt"] == pytest.approx(by2["power 0.5"], rel=1e-9)


def test_a_transformed_study_once_dropped_frees_its_data():
    """The memo of transformed datasets keeps none alive: a study that changed its transform, once dropped,
    leaves no copy of its table behind (it used to stay for as long as the process ran)."""
    import gc
    import weakref

    from explorer.engine.transforms import with_transform

    rng = np.random.default_rng(1)
    frame = pd.DataFrame({"g": np.repeat(list("ABC"), 5), "y": rng.uniform(1, 9, 15)})
    study = ex.Study(frame, "y", "g")
    measured = study.dataset
    study.set_transform("log")
    logged = study.dataset
    assert with_transform(measured, "log") is logged  # memoised while held
    gone = weakref.ref(measured), weakref.ref(logged)
    del study, measured, logged
    gc.collect()
    assert gone[0]() is None and gone[1]() is None
