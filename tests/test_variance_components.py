"""Variance components: moments on balanced data (the EMS algebra), REML on unbalanced data.

Outside references:
- Balanced two-way random model and nested model: the closed-form ANOVA estimators
  (Montgomery, Design and Analysis of Experiments, 8th ed., ch. 13-14; Searle, Casella
  & McCulloch 1992, ch. 4; from memory), computed here by hand from statsmodels
  ``anova_lm`` mean squares; Satterthwaite (1946) df and chi-square intervals by hand
  with ``scipy.stats.chi2``.
- REML: statsmodels ``MixedLM`` (``reml=True``) on unbalanced generated data, 1e-6
  relative: a random intercept with a fixed factor, two nested random levels, and two
  crossed random factors (variance components through ``vc_formula``).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.anova import anova_lm

import explorer as ex


def crossed(parts=8, operators=3, reps=2, seed=0, sd_part=2.0, sd_op=0.7, sd_po=0.4) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    p_eff = rng.normal(scale=sd_part, size=parts)
    o_eff = rng.normal(scale=sd_op, size=operators)
    po = rng.normal(scale=sd_po, size=(parts, operators))
    rows = [(f"P{i:02d}", f"O{j}", 10 + p_eff[i] + o_eff[j] + po[i, j] + rng.normal(scale=0.5))
            for i in range(parts) for j in range(operators) for _ in range(reps)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def ms_table(frame, formula):
    t = anova_lm(smf.ols(formula, data=frame).fit(), typ=1)
    t["ms"] = t.sum_sq / t.df
    return t


def test_balanced_two_way_random_moments_are_the_ems_algebra():
    """sigma²_P = (MS_P - MS_PO)/(o r), sigma²_O = (MS_O - MS_PO)/(p r), sigma²_PO = (MS_PO - MS_E)/r, exactly."""
    frame = crossed()
    res = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"]).results
    vc = res.variance_components
    assert vc.method == "method of moments (ANOVA estimates)"
    t = res.partition
    msp, mso, mspo, mse = (t.row(s).mean_sq for s in ("part", "operator", "part × operator", "residual"))
    assert vc.component("part").estimate == (msp - mspo) / 6
    assert vc.component("operator").estimate == (mso - mspo) / 16
    assert vc.component("part × operator").estimate == (mspo - mse) / 2
    assert vc.component("residual").estimate == mse
    ref = ms_table(frame, "y ~ C(part) * C(operator)")
    assert msp == pytest.approx(ref.loc["C(part)", "ms"], rel=1e-12)
    # Satterthwaite df and interval of the part component, by hand
    est = (msp - mspo) / 6
    nu = est**2 / ((msp / 6) ** 2 / 7 + (mspo / 6) ** 2 / 14)
    c = vc.component("part")
    assert c.df == pytest.approx(nu, rel=1e-12)
    assert c.ci_low == pytest.approx(nu * est / stats.chi2.ppf(0.975, nu), rel=1e-10)
    assert c.ci_high == pytest.approx(nu * est / stats.chi2.ppf(0.025, nu), rel=1e-10)
    e = vc.component("residual")
    assert e.df == 24 and e.ci_low == pytest.approx(24 * mse / stats.chi2.ppf(0.975, 24), rel=1e-10)
    shares = [x.share for x in vc.components]
    assert sum(shares) == pytest.approx(1.0)


def test_negative_estimate_rule():
    """A negative moment estimate is shown as computed, counts as zero in shares, and a note says so."""
    for seed in range(200):
        frame = crossed(seed=seed, sd_po=0.0, reps=3)
        vc = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"]).results.variance_components
        c = vc.component("part × operator")
        if c.estimate < 0:
            break
    else:  # pragma: no cover
        pytest.fail("no negative estimate in 200 seeds")
    assert c.share == 0.0 and c.sd == 0.0 and c.ci_low is None
    assert vc.total == pytest.approx(sum(x.estimate for x in vc.components if x.estimate > 0))
    assert any("Negative estimate for part × operator" in n and "counted as zero" in n for n in vc.notes)


def test_balanced_nested_moments():
    """Nested: sigma²_lot = (MS_lot(supplier) - MS_E) / n (Montgomery ch. 14, from memory)."""
    rng = np.random.default_rng(4)
    rows = [(s, f"L{lot}", 5 + rng.normal() + 2 * (lot == 1)) for s in ("S1", "S2", "S3") for lot in range(4)
            for _ in range(3)]
    frame = pd.DataFrame(rows, columns=["supplier", "lot", "y"])
    res = ex.Study(frame, "y", ["supplier", "lot"], random=["lot"], nested={"lot": "supplier"}).results
    t = res.partition
    assert res.variance_components.component("lot (within supplier)").estimate == (
        (t.row("lot (within supplier)").mean_sq - t.row("residual").mean_sq) / 3)


def mixedlm_reml(formula, frame, **kw) -> dict[str, float]:
    """MixedLM's REML optimum: its best fit, then its own profiled REML log-likelihood maximised to a
    tight tolerance (its default optimisers stop 1e-5 short of the optimum on these flat likelihoods).

    Returns the variances by name: "group" (random intercept), each vc_formula name, "residual".
    """
    from scipy import optimize
    from statsmodels.regression.mixed_linear_model import MixedLMParams

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = smf.mixedlm(formula, frame, **kw)
        fits = [model.fit(reml=True, method=[m]) for m in ("powell", "lbfgs")]
        best = max(fits, key=lambda f: f.llf)
        k_re = model.k_re
        names = list(model.exog_vc.names) if model.k_vc else []
        start = np.concatenate([np.diag(best.cov_re.to_numpy() / best.scale) if k_re else [],
                                np.asarray(best.vcomp) / best.scale]).astype(float)

        def parts(logx):
            x = np.exp(logx)
            cov_re = np.diag(x[:k_re]) if k_re else np.zeros((0, 0))
            return cov_re, x[k_re:]

        def neg(logx):
            cov_re, vcomp = parts(logx)
            return -model.loglike(MixedLMParams.from_components(cov_re=cov_re, vcomp=vcomp), profile_fe=True)

        opt = optimize.minimize(neg, np.log(start), method="Nelder-Mead",
                                options={"xatol": 1e-12, "fatol": 1e-15, "maxiter": 20000})
        assert -opt.fun >= best.llf - 1e-12
        cov_re, vcomp = parts(opt.x)
        fe = model.get_fe_params(cov_re, vcomp)
        fe = fe[0] if isinstance(fe, tuple) else fe
        scale = float(model.get_scale(fe, cov_re, vcomp))
    out = {"residual": scale}
    if k_re:
        out["group"] = float(cov_re[0, 0]) * scale
    out.update({n: float(v) * scale for n, v in zip(names, vcomp)})
    return out


def unbalanced_random_intercept(seed=1, subjects=40) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for s in range(subjects):
        u = rng.normal(scale=1.5)
        for _ in range(int(rng.integers(1, 7))):
            dose = str(rng.choice(["low", "mid", "high"]))
            rows.append((f"s{s:03d}", dose, 20 + u + {"low": 0, "mid": 0.5, "high": 1.0}[dose] + rng.normal()))
    return pd.DataFrame(rows, columns=["subject", "dose", "y"])


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_reml_random_intercept_matches_mixedlm(seed):
    """statsmodels MixedLM REML, random intercept + fixed dose, unbalanced: both variances to 1e-6."""
    frame = unbalanced_random_intercept(seed)
    res = ex.Study(frame, "y", ["dose", "subject"], random=["subject"], interactions=False).results
    vc = res.variance_components
    assert vc.method == "REML"
    ref = mixedlm_reml("y ~ C(dose)", frame, groups="subject")
    assert vc.component("subject").estimate == pytest.approx(ref["group"], rel=1e-6)
    assert vc.component("residual").estimate == pytest.approx(ref["residual"], rel=1e-6)


def test_reml_nested_levels_match_mixedlm():
    """Two nested random levels (batch within plant, both random), unbalanced: MixedLM with a vc_formula."""
    rng = np.random.default_rng(8)
    rows = []
    for p in range(12):
        pe = rng.normal(scale=1.2)
        for b in range(int(rng.integers(2, 5))):
            be = rng.normal(scale=0.8)
            for _ in range(int(rng.integers(1, 5))):
                rows.append((f"p{p}", f"b{b}", 3 + pe + be + rng.normal(scale=0.6)))
    frame = pd.DataFrame(rows, columns=["plant", "batch", "y"])
    res = ex.Study(frame, "y", ["plant", "batch"], random=["plant", "batch"], nested={"batch": "plant"}).results
    vc = res.variance_components
    ref = mixedlm_reml("y ~ 1", frame, groups="plant", re_formula="1", vc_formula={"batch": "0 + C(batch)"})
    assert vc.component("plant").estimate == pytest.approx(ref["group"], rel=1e-6)
    assert vc.component("batch (within plant)").estimate == pytest.approx(ref["batch"], rel=1e-6)
    assert vc.component("residual").estimate == pytest.approx(ref["residual"], rel=1e-6)


def test_reml_crossed_random_factors_match_mixedlm():
    """Crossed part and operator, both random, unbalanced (rows dropped): MixedLM, one group, two vc terms."""
    frame = crossed(parts=10, operators=4, reps=2, seed=5, sd_po=0.0)
    frame = frame.drop(index=np.random.default_rng(5).choice(len(frame), 12, replace=False)).reset_index(drop=True)
    res = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"], interactions=False).results
    vc = res.variance_components
    frame["one"] = 1
    ref = mixedlm_reml("y ~ 1", frame, groups="one", re_formula="0",
                       vc_formula={"part": "0 + C(part)", "operator": "0 + C(operator)"})
    for name in ("part", "operator", "residual"):
        assert vc.component(name).estimate == pytest.approx(ref[name], rel=1e-6)


def test_reml_on_balanced_data_equals_moments_when_positive():
    frame = crossed(seed=3, sd_po=1.0)
    mom = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"]).results.variance_components
    reml = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"],
                    variance_method="reml").results.variance_components
    assert reml.method == "REML"
    for a, b in zip(mom.components, reml.components):
        assert a.estimate > 0 and b.estimate == pytest.approx(a.estimate, rel=1e-6)


def test_edit_that_unbalances_switches_to_reml_with_a_note():
    frame = crossed(seed=2)
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    assert study.baseline.variance_components.method.startswith("method of moments")
    study.drop(0, reason="invented: smudged reading")
    vc = study.results.variance_components
    assert vc.method == "REML" and any("Unbalanced data: REML" in n for n in vc.notes)
