"""Per-term effect sizes of multi-factor designs (explorer.engine.term_effects).

Outside references: pingouin.anova(effsize='n2' and 'np2') on balanced two-factor data
(pingouin 0.5; its plain eta² divides by the total SS, which for unbalanced data is not
the sum of its SS column, so unbalanced data are checked by hand); hand formulas of
Olejnik and Algina (2003, Table 2) from statsmodels anova_lm(typ=2) sums of squares;
statsmodels confint_effectsize_oneway (noncentral-F interval, alpha 0.10, nobs = N) for
the intervals; statsmodels FTestPowerF2 (noncentrality f^2 (df_num + df_denom + ncc),
ncc = N - df_num - df_denom so that it is N f^2) and scipy.stats.ncf for power; the
one-way effect sizes and power of the same data for a one-factor model.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.oneway import confint_effectsize_oneway
from statsmodels.stats.power import FTestPowerF2

import explorer as ex


def _frame(seed: int, balanced: bool) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    if balanced:
        rows = [(a, b) for a in "abc" for b in "xy" for _ in range(6)]
    else:
        rows = [(a, b) for a in "abc" for b in "xy" for _ in range(int(rng.integers(3, 10)))]
    frame = pd.DataFrame(rows, columns=["fa", "fb"])
    frame["y"] = rng.normal(size=len(frame)) + (frame.fa == "c") * 1.2 + (frame.fb == "y") * 0.4
    return frame


def test_plain_and_partial_eta_squared_match_pingouin_on_balanced_data() -> None:
    """Balanced 3 x 2: plain eta² = pingouin 'n2', partial = pingouin 'np2'; omega² and
    partial omega² by Olejnik and Algina's (2003) formulas."""
    frame = _frame(5, balanced=True)
    eff = ex.Study(frame, "y", ["fa", "fb"]).results.term_effects
    n2 = pg.anova(data=frame, dv="y", between=["fa", "fb"], effsize="n2")
    np2 = pg.anova(data=frame, dv="y", between=["fa", "fb"], effsize="np2")
    for ours, theirs in (("fa", "fa"), ("fb", "fb"), ("fa × fb", "fa * fb")):
        assert eff[ours].eta_squared == pytest.approx(float(n2.set_index("Source").loc[theirs, "n2"]), rel=1e-9)
        assert eff[ours].partial_eta_squared == pytest.approx(
            float(np2.set_index("Source").loc[theirs, "np2"]), rel=1e-9)
    aov = pg.anova(data=frame, dv="y", between=["fa", "fb"]).set_index("Source")
    ss_t, df_t, mse = aov.loc["fa", "SS"], aov.loc["fa", "DF"], aov.loc["Residual", "MS"]
    sst = float(((frame.y - frame.y.mean()) ** 2).sum())
    assert eff["fa"].omega_squared == pytest.approx((ss_t - df_t * mse) / (sst + mse), rel=1e-9)


def test_unbalanced_plain_measures_by_hand_and_intervals_and_power() -> None:
    """Unbalanced 3 x 2, type II: eta² = SS_t / SS_total and omega² = (SS_t - df_t MS_E) /
    (SS_total + MS_E) from statsmodels anova_lm(typ=2); the 90% (1 - 2 alpha) interval of the
    partial proportion and of f = statsmodels confint_effectsize_oneway(F_t, (df_t, df_E),
    alpha=0.10, nobs=N); excludes_zero agrees with each term's F test at 0.05 (Steiger 2004);
    power = statsmodels FTestPowerF2 with f^2 = SS_t / SS_E and noncentrality N f^2 = scipy.stats.ncf."""
    frame = _frame(8, balanced=False)
    res = ex.Study(frame, "y", ["fa", "fb"]).results
    eff = res.term_effects
    assert eff.confidence == pytest.approx(0.90) and eff.alpha == 0.05
    ref = anova_lm(ols("y ~ C(fa, Sum) * C(fb, Sum)", frame).fit(), typ=2)
    sst = float(((frame.y - frame.y.mean()) ** 2).sum())
    n = len(frame)
    ss_e, df_e = ref.loc["Residual", "sum_sq"], int(ref.loc["Residual", "df"])
    mse = ss_e / df_e
    for ours, theirs in (("fa", "C(fa, Sum)"), ("fb", "C(fb, Sum)"), ("fa × fb", "C(fa, Sum):C(fb, Sum)")):
        ss_t, df_t, f_t, p_t = (ref.loc[theirs, c] for c in ("sum_sq", "df", "F", "PR(>F)"))
        row = eff[ours]
        assert row.eta_squared == pytest.approx(ss_t / sst, rel=1e-9)
        assert row.omega_squared == pytest.approx((ss_t - df_t * mse) / (sst + mse), rel=1e-9)
        ci = confint_effectsize_oneway(f_t, (df_t, df_e), alpha=0.10, nobs=n)
        np.testing.assert_allclose(row.ci_partial, np.square(ci.ci_eta), rtol=1e-3, atol=1e-9)
        np.testing.assert_allclose(row.ci_f, ci.ci_f, rtol=1e-3, atol=1e-9)
        assert row.excludes_zero == (p_t < 0.05)
        f2 = ss_t / ss_e
        assert row.cohens_f == pytest.approx(np.sqrt(f2), rel=1e-9)
        want = FTestPowerF2().power(f2, df_t, df_e, 0.05, ncc=n - df_t - df_e)
        assert row.power == pytest.approx(want, rel=1e-6)
        crit = stats.f.isf(0.05, df_t, df_e)
        assert row.power == pytest.approx(stats.ncf.sf(crit, df_t, df_e, n * f2), rel=1e-9)
    assert any(r.excludes_zero for r in eff.rows) and not all(r.excludes_zero for r in eff.rows)
    frame_cols = eff.to_frame().columns
    assert {"eta²", "omega²", "partial eta²", "partial omega²", "power at alpha 0.05"} <= set(frame_cols)


def test_one_factor_term_effects_equal_the_oneway_effect_sizes_and_power() -> None:
    """One factor through the general engine: partial = plain eta², and the interval and power
    equal the one-way effect_sizes (same 1 - 2 alpha interval) and power_plan at the observed f."""
    from explorer.engine.dataset import build_dataset
    from explorer.engine.factorial import fit_factorial
    from explorer.engine.spec import ModelSpec
    from explorer.engine.view import initial_view
    from explorer.inference.effect_sizes import effect_sizes
    from explorer.inference.power import power_plan

    frame = _frame(3, balanced=False)[["fa", "y"]]
    ds = build_dataset(frame, "y", ["fa"])
    general = fit_factorial(ds, initial_view(ds), ModelSpec(response="y", factors=("fa",)),
                            positions=np.arange(ds.n)).term_effects["fa"]
    oneway = ex.Study(frame, "y", "fa").results
    es, plan = effect_sizes(oneway), power_plan(oneway)
    assert general.eta_squared == pytest.approx(general.partial_eta_squared, rel=1e-12)
    assert general.eta_squared == pytest.approx(es.eta_squared, rel=1e-10)
    assert general.omega_squared == pytest.approx(es.omega_squared, rel=1e-10)
    np.testing.assert_allclose(general.ci_partial, es.ci_proportion, rtol=1e-8)
    assert general.power == pytest.approx(plan.power, rel=1e-9)
    assert general.excludes_zero == es.excludes_zero


def test_terms_tested_against_another_error_term_get_no_interval() -> None:
    """A fixed, B random: A and B are tested against A × B (not the residual), so the
    residual-based noncentral-F interval and power would not describe their tests; they are
    left out with a note, while A × B (tested against the residual) keeps them."""
    rng = np.random.default_rng(11)
    rows = [(a, b) for a in "pqr" for b in "vwxyz" for _ in range(3)]
    frame = pd.DataFrame(rows, columns=["A", "B"])
    frame["y"] = rng.normal(size=len(frame)) + frame.B.map(dict(zip("vwxyz", rng.normal(size=5))))
    eff = ex.Study(frame, "y", ["A", "B"], random=["B"]).results.term_effects
    assert eff["A"].ci_partial is None and eff["A"].power is None and eff["A"].eta_squared is not None
    assert eff["A × B"].ci_partial is not None and eff["A × B"].power is not None
    assert any("another error term" in n for n in eff.notes)
