"""Multi-factor and mixed-model results: what an edit makes at once, what it defers, and that
the deferred parts equal the parts of a fresh analysis read in full.

An edit of a multi-factor study makes the partition (each F against its own error term,
with its p-value), the expected mean squares and the variance-component estimates and
shares at once; the level tables, marginal means, effect sizes, cell table and per-row
fit, the components' Satterthwaite df and intervals, and the measurement-system lines'
df and intervals are made when first read (:mod:`explorer.engine.deferred`). The layout
facts a complete balanced layout keeps from one edit to the next (design, E(MS), cell
labels) come from small caches; the parts made late, after those caches were emptied and
refilled by other studies, must equal a fresh analysis bit for bit.

Outside references beside the bit-for-bit checks: statsmodels ``anova_lm`` for the mean
squares, scipy ``stats.chi2`` for the chi-square intervals, Satterthwaite's df by hand
(Satterthwaite 1946, Biometrics Bulletin 2, 110-114).
"""

from __future__ import annotations

import copy
import pickle

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine import balanced, cells, ems, variance_components
from explorer.engine.analysis import analyze
from explorer.engine.deferred import is_made

DEFERRED_PARTS = ("uncorrected", "levels", "marginal_means", "term_effects", "cells", "fit")


def gauge(parts: int = 10, operators: int = 3, reps: int = 3, seed: int = 0) -> pd.DataFrame:
    """Invented measurement study (parts x operators x repeats)."""
    rng = np.random.default_rng(seed)
    p_eff, o_eff = rng.normal(scale=2.0, size=parts), rng.normal(scale=0.5, size=operators)
    po = rng.normal(scale=0.3, size=(parts, operators))
    rows = [(f"P{p:02d}", f"O{o}", 50 + p_eff[p] + o_eff[o] + po[p, o] + rng.normal(scale=0.4))
            for p in range(parts) for o in range(operators) for _ in range(reps)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def _empty_layout_caches() -> None:
    for cache in (balanced._PLANS, balanced._EMS, balanced._COUNTS, cells._LABELS, ems._DENOMINATORS,
                  variance_components._INVERSES):
        cache.clear()


def _frames_equal(a, b) -> None:
    pd.testing.assert_frame_equal(a.to_frame(), b.to_frame(), check_exact=True)


def _same_results(late, fresh) -> None:
    """Every part of ``late`` (made late) equals ``fresh``'s (read at once), bit for bit."""
    for k in fresh.partitions:
        _frames_equal(late.partitions[k], fresh.partitions[k])
    _frames_equal(late.uncorrected, fresh.uncorrected)
    assert list(late.levels) == list(fresh.levels) and list(late.marginal_means) == list(fresh.marginal_means)
    for f in fresh.levels:
        _frames_equal(late.levels[f], fresh.levels[f])
        assert late.levels[f].display == fresh.levels[f].display
    for f in fresh.marginal_means:
        _frames_equal(late.marginal_means[f], fresh.marginal_means[f])
    _frames_equal(late.term_effects, fresh.term_effects)
    assert late.term_effects.notes == fresh.term_effects.notes
    _frames_equal(late.cells, fresh.cells)
    _frames_equal(late.fit, fresh.fit)
    if fresh.expected_mean_squares is not None:
        _frames_equal(late.expected_mean_squares, fresh.expected_mean_squares)
    if fresh.variance_components is not None:
        assert late.variance_components.components == fresh.variance_components.components
        _frames_equal(late.variance_components, fresh.variance_components)
    assert (late.notes, late.n_used, late.dropped, late.r_squared, late.ms_resid, late.method) == (
        fresh.notes, fresh.n_used, fresh.dropped, fresh.r_squared, fresh.ms_resid, fresh.method)
    object.__setattr__(fresh, "disclosure_source", late.disclosure_source)
    assert late.to_text() == fresh.to_text() and late._repr_html_() == fresh._repr_html_()


def test_an_edit_makes_the_tests_and_components_at_once_and_defers_the_rest():
    study = ex.Study(gauge(), "y", ["part", "operator"], random=["part", "operator"])
    study.drop_unit("part", "P03", reason="check")
    res = study.results
    assert all(not is_made(res, name) for name in DEFERRED_PARTS)
    vc = res.variance_components
    assert all(not is_made(c, f) for c in vc.components for f in ("df", "ci_low", "ci_high"))
    table = study.measurement_system("part", "operator")
    assert all(not is_made(x, f) for x in table.lines for f in ("df", "ci_low", "ci_high"))
    # what was made at once: each F against its error term, the components and their shares
    assert res.partition.row("part").error_term == "part × operator"
    assert res.pvalue("part") is not None and res.pvalue("part × operator") is not None
    assert sum(c.share for c in vc.components) == pytest.approx(1.0)
    assert table.line("gauge R&R").variance > 0 and table.distinct_categories is not None
    assert not any(is_made(c, "df") for c in vc.components)  # the measurement table did not make them
    first = vc.components[0].ci_low
    assert is_made(vc.components[0], "ci_low") and vc.components[0].ci_low is first  # made once, then kept


@pytest.mark.parametrize("edits", [
    [("drop_unit", "part", "P03")],
    [("drop_unit", "part", "P03"), ("restore_unit", "part", "P03"), ("drop_unit", "operator", "O1")],
    [("drop", [7])],  # unbalanced: QR engine and REML
    [("drop_unit", "part", "P00"), ("drop", [40])],
])
def test_parts_made_late_equal_a_fresh_analysis(edits):
    study = ex.Study(gauge(), "y", ["part", "operator"], random=["part", "operator"])
    for kind, *args in edits:
        getattr(study, kind)(*args, reason="check")
    late = study.results
    ms_late = study.measurement_system("part", "operator", tolerance=10.0)
    _empty_layout_caches()  # other layouts fill the caches before the deferred parts are read
    ex.Study(gauge(parts=6, seed=4), "y", ["part", "operator"], random=["part"]).drop_unit("part", "P01", reason="x")
    fresh = analyze(study.dataset, study.view, study.spec)
    for name in ("levels", "marginal_means", "term_effects", "cells", "fit", "variance_components"):
        getattr(fresh, name)
    _same_results(late, fresh)
    from explorer.inference.measurement_system import measurement_system

    ms_fresh = measurement_system(fresh, "part", "operator", tolerance=10.0)
    assert ms_late.lines == ms_fresh.lines
    pd.testing.assert_frame_equal(ms_late.to_frame(), ms_fresh.to_frame(), check_exact=True)


@pytest.mark.parametrize("kw", [
    {"random": ["part"]},  # mixed: operator fixed (marginal means), part random
    {},  # fixed effects
    {"random": ["part", "operator"], "variance_method": "moments"},
])
def test_other_models_made_late_equal_a_fresh_analysis(kw):
    study = ex.Study(gauge(parts=6), "y", ["part", "operator"], **kw)
    study.drop_unit("part", "P02", reason="check")
    study.drop([3], reason="check")
    late = study.results
    _empty_layout_caches()
    fresh = analyze(study.dataset, study.view, study.spec)
    _same_results(late, fresh)


def test_blocks_made_late_equal_a_fresh_analysis():
    rng = np.random.default_rng(2)
    frame = pd.DataFrame([(f"T{t}", f"B{b}", 10 + t + rng.normal()) for t in range(3) for b in range(5)],
                         columns=["treatment", "block", "y"])
    study = ex.Study(frame, "y", ["treatment"], blocks="block")
    study.drop([4], reason="check")
    late = study.results
    fresh = analyze(study.dataset, study.view, study.spec)
    _same_results(late, fresh)
    assert late.blocking == fresh.blocking


def test_deferred_intervals_match_scipy_and_satterthwaite_by_hand():
    """The intervals made on first read are the chi-square intervals of the anova_lm mean squares."""
    frame = gauge()
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    study.drop_unit("part", "P05", reason="check")
    vc = study.results.variance_components
    kept = frame[frame.part != "P05"]
    t = anova_lm(ols("y ~ C(part) * C(operator)", data=kept).fit(), typ=1)
    ms, df = t.sum_sq / t.df, t.df
    r, o = 3, 3
    # residual: exact chi-square interval on its df
    resid = vc.component("residual")
    lo, hi = df["Residual"] * ms["Residual"] / stats.chi2.ppf([0.975, 0.025], df["Residual"])
    assert (resid.df, resid.ci_low, resid.ci_high) == pytest.approx((df["Residual"], lo, hi), rel=1e-12)
    # part: (MS_P - MS_PO) / (o r), Satterthwaite's df
    est = (ms["C(part)"] - ms["C(part):C(operator)"]) / (o * r)
    nu = est**2 / ((ms["C(part)"] / (o * r)) ** 2 / df["C(part)"]
                   + (ms["C(part):C(operator)"] / (o * r)) ** 2 / df["C(part):C(operator)"])
    part = vc.component("part")
    assert part.estimate == pytest.approx(est, rel=1e-12)
    assert part.df == pytest.approx(nu, rel=1e-10)
    assert (part.ci_low, part.ci_high) == pytest.approx(tuple(nu * est / stats.chi2.ppf([0.975, 0.025], nu)),
                                                        rel=1e-10)
    # the measurement table's repeatability line is the residual's interval
    line = study.measurement_system("part", "operator").line("repeatability")
    assert (line.df, line.ci_low, line.ci_high) == pytest.approx((df["Residual"], lo, hi), rel=1e-12)


def test_copies_and_pickles_carry_the_deferred_parts_made():
    study = ex.Study(gauge(parts=5), "y", ["part", "operator"], random=["part", "operator"])
    study.drop_unit("part", "P01", reason="check")
    res = analyze(study.dataset, study.view, study.spec)  # (a study's results read its live disclosure)
    table = study.measurement_system("part", "operator")
    fresh = analyze(study.dataset, study.view, study.spec)
    assert not is_made(res, "term_effects") and not is_made(res.variance_components.components[0], "df")
    for other in (pickle.loads(pickle.dumps(res)), copy.deepcopy(res)):
        assert other.variance_components.components == fresh.variance_components.components
        _frames_equal(other.term_effects, fresh.term_effects)
    back = pickle.loads(pickle.dumps(table))
    assert back.lines == table.lines


def test_cached_layout_arrays_are_read_only():
    study = ex.Study(gauge(parts=4), "y", ["part", "operator"], random=["part", "operator"])
    res = study.drop_unit("part", "P01", reason="check")
    coef = res.expected_mean_squares.coefficients
    with pytest.raises(ValueError):
        coef[0, 0] = 1.0
    plan = next(iter(balanced._PLANS.values()))
    with pytest.raises(ValueError):
        plan.cov[0, 0] = 1.0
