"""Huge and tiny responses: F and p are those of the same data rescaled by a power of two.

F, p-values, effect sizes and decisions are invariant to the unit of the response. Each
test builds moderate invented data ``base``, multiplies it by an exact power of two
(``np.ldexp``: no rounding) into the range where squares overflow (|y| near 1e300) or
underflow (|y| near 1e-300), and checks the kit against the reference run on ``base``:
scipy ``f_oneway`` / ``kruskal`` / ``levene`` / ``tukey_hsd`` and statsmodels
``anova_lm`` for the statistics, and the kit's own scans on ``base`` (themselves
checked against refits elsewhere) for the sensitivity tools. Sums of squares are those
of the data divided by the stated unit ``2**dataset.unit_exponent``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.engine.groupstats import GroupStats
from explorer.engine.oneway import oneway_partition

SHIFTS = [997, -997, 1020, -1060, 500, -700]  # powers of two: 1e300, 1e-300, 1e307, 1e-319 (subnormal), ...


def _base(seed: int = 5, n_per: int = 9) -> pd.DataFrame:
    """Invented readings of three coating nozzles: unbalanced, with a real difference."""
    rng = np.random.default_rng(seed)
    g = np.repeat(["N1", "N2", "N3"], [n_per, n_per + 2, n_per - 1])
    y = 3.0 + rng.normal(size=g.size) + (g == "N2") * 1.2
    return pd.DataFrame({"nozzle": g, "y": y, "shift": np.tile(["day", "night"], g.size)[: g.size]})


def _scaled(frame: pd.DataFrame, k: int) -> pd.DataFrame:
    out = frame.copy()
    out["y"] = np.ldexp(frame["y"].to_numpy(), k)
    return out


def _close(a: float | None, b: float, rtol: float = 1e-10) -> bool:
    return a is not None and np.isfinite(a) and abs(a - b) <= rtol * max(abs(b), 1e-300)


@pytest.mark.parametrize("k", SHIFTS)
def test_oneway_f_and_p_equal_the_rescaled_data(k):
    """Reference: scipy f_oneway on the data times 2**-k (exact)."""
    frame = _scaled(_base(), k)
    # The input rescaled by 2**-k, exactly (subnormal inputs carry fewer digits than base: use what they hold).
    base = frame.assign(y=np.ldexp(frame.y.to_numpy(), -k))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no overflow or underflow warning anywhere in the kit
        s = ex.Study(frame, "y", "nozzle")
        r = s.results
    ref = stats.f_oneway(*[base.y[base.nozzle == lv] for lv in ("N1", "N2", "N3")])
    assert _close(r.statistic(), ref.statistic) and _close(r.pvalue(), ref.pvalue, 1e-8)
    assert s.decision.significant == (ref.pvalue < 0.05)
    e = s.dataset.unit_exponent
    assert e != 0 and any("2**" in n or "2^" in n for n in s.dataset.notes)
    # Sums of squares and means are those of the data in units of 2**e.
    ssb_ref = sum(len(v) * (v.mean() - base.y.mean()) ** 2 for _, v in base.groupby("nozzle").y)
    assert _close(r.partition.rows[0].sum_sq, float(np.ldexp(ssb_ref, 2 * (k - e))), 1e-9)
    means = np.ldexp(base.groupby("nozzle").y.mean().to_numpy(), k - e)
    assert np.allclose(r.levels["nozzle"].mean, means, rtol=1e-12, atol=0)
    assert any("unit" in n for n in r.notes)


@pytest.mark.parametrize("k", [997, -997])
def test_factorial_types_equal_statsmodels_on_the_rescaled_data(k):
    """Reference: statsmodels anova_lm (typ 1, 2, 3, sum-to-zero coding) on the unscaled data."""
    smf = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    base = _base(n_per=12)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = ex.Study(_scaled(base, k), "y", ["nozzle", "shift"]).results
    model = smf.ols("y ~ C(nozzle, Sum) * C(shift, Sum)", data=base).fit()
    for typ, name in ((1, "I"), (2, "II"), (3, "III")):
        ref = anova_lm(model, typ=typ)
        row = r.partitions[name].row("nozzle")
        assert _close(row.statistic, ref.loc["C(nozzle, Sum)", "F"], 1e-9)
        assert _close(row.pvalue, ref.loc["C(nozzle, Sum)", "PR(>F)"], 1e-7)


@pytest.mark.parametrize("k", [997, -997])
def test_battery_matches_scipy_on_the_rescaled_data(k):
    """References: scipy f_oneway(equal_var=False) (Welch), kruskal, levene (median), tukey_hsd on the unscaled data."""
    base = _base()
    groups = [base.y[base.nozzle == lv].to_numpy() for lv in ("N1", "N2", "N3")]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = ex.Study(_scaled(base, k), "y", "nozzle").battery()
    assert _close(b.welch.pvalue, stats.f_oneway(*groups, equal_var=False).pvalue, 1e-7)
    assert _close(b.kruskal_wallis.pvalue, stats.kruskal(*groups).pvalue, 1e-10)
    assert _close(b.levene.pvalue, stats.levene(*groups, center="median").pvalue, 1e-9)
    tk = stats.tukey_hsd(*groups)
    for idx, (a, c) in enumerate(((0, 1), (0, 2), (1, 2))):
        assert abs(b.tukey.pvalue[idx] - tk.pvalue[a, c]) < 2e-5
    assert b.effect_sizes is not None and b.effect_sizes.ci_proportion is not None
    assert not b.grubbs.flagged and not b.robust_z.flagged


@pytest.mark.parametrize("k", [997, -997])
def test_scans_equal_the_scans_of_the_unscaled_data(k):
    """Reference: the same scans on the unscaled data (checked against refits in the sensitivity tests)."""
    base = _base()
    plain = ex.Study(base, "y", "nozzle")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        big = ex.Study(_scaled(base, k), "y", "nozzle")
        cd, cd0 = big.case_deletion(), plain.case_deletion()
        rg, rg0 = big.regroup_scan(), plain.regroup_scan()
        fl, fl0 = big.flip_finder(), plain.flip_finder()
        sw, sw0 = big.robustness_sweep(), plain.robustness_sweep()
        inf, inf0 = big.influence(), plain.influence()
    assert np.allclose(cd.pvalue, cd0.pvalue, rtol=1e-8, equal_nan=True)
    assert np.allclose(rg.move_fits.pvalue, rg0.move_fits.pvalue, rtol=1e-8, equal_nan=True)
    assert np.allclose(rg.merge_fits.pvalue, rg0.merge_fits.pvalue, rtol=1e-8, equal_nan=True)
    assert fl.rows == fl0.rows and fl.found == fl0.found
    assert np.allclose(sw.table["p-value"].astype(float), sw0.table["p-value"].astype(float), rtol=1e-7)
    assert np.allclose(inf.cooks_distance, inf0.cooks_distance, rtol=1e-8)


def test_values_spanning_the_whole_float_range_are_handled():
    """|y| up to 1.7e308 of both signs: the shift itself would overflow; reference f_oneway on y / 2**1000."""
    rng = np.random.default_rng(2)
    base = rng.uniform(-0.9, 0.9, 24) + np.repeat([0.0, 0.3, 0.5], 8)
    y = np.ldexp(base, 1024 - 1)  # up to ~1.6e308
    frame = pd.DataFrame({"g": np.repeat(["a", "b", "c"], 8), "y": y})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = ex.Study(frame, "y", "g").results
    ref = stats.f_oneway(*np.split(base, 3))
    assert _close(r.statistic(), ref.statistic, 1e-10) and _close(r.pvalue(), ref.pvalue, 1e-8)


def test_decimal_text_near_1e300_from_csv(tmp_path):
    """Decimal text (not a power of two): reference f_oneway on the parsed floats times 2**-e (exact)."""
    base = _base()
    path = tmp_path / "huge.csv"
    text = ["nozzle,y"] + [f"{g},{v:.12f}e300" for g, v in zip(base.nozzle, base.y)]
    path.write_text("\n".join(text) + "\n")
    s = ex.Study(path, "y", "nozzle")
    vals = np.array([float(f"{v:.12f}e300") for v in base.y])
    ref = stats.f_oneway(*[np.ldexp(vals[base.nozzle.to_numpy() == lv], -s.dataset.unit_exponent)
                           for lv in ("N1", "N2", "N3")])
    assert _close(s.results.statistic(), ref.statistic, 1e-9)


def test_ordinary_data_keep_their_unit():
    """Data inside the safe range are not rescaled (unit exponent 0, no note)."""
    for k in (0, 150, -150):
        s = ex.Study(_scaled(_base(), k), "y", "nozzle")
        assert s.dataset.unit_exponent == 0
        assert not any("unit" in n for n in s.results.notes)


def test_a_decision_is_never_drawn_from_nan():
    """Sums of squares that are not finite give no F test (a note says why), never 'no differences' from NaN."""
    gs = GroupStats(labels=("a", "b"), n=np.array([3, 3]), mean=np.array([0.0, 1.0]), m2=np.array([np.inf, 1.0]))
    table, _, notes = oneway_partition(gs, "g")
    assert table.rows[0].statistic is None and table.rows[0].pvalue is None
    assert any("not finite" in n for n in notes)


@pytest.mark.parametrize("k", [997, -997])
def test_summary_backed_study_matches_the_row_study(k):
    """DuckDB summaries of the rescaled data give the row study's F and p (reference: f_oneway on base)."""
    pytest.importorskip("duckdb")
    base = _base()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        s = ex.SummaryStudy(_scaled(base, k), "y", "nozzle", sample_size=0)
    ref = stats.f_oneway(*[base.y[base.nozzle == lv] for lv in ("N1", "N2", "N3")])
    assert _close(s.results.statistic(), ref.statistic, 1e-9) and _close(s.results.pvalue(), ref.pvalue, 1e-7)


@pytest.mark.parametrize("k_y,k_x", [(997, 0), (0, 997), (0, -997), (-997, 997)])
def test_covariates_far_from_one_match_statsmodels_on_the_rescaled_data(k_y, k_x):
    """Analysis of covariance with a response and/or covariate times 2**k: the treatment F equals statsmodels
    ols('y ~ C(nozzle, Sum) + x') anova_lm(typ=2) on the unscaled data (F is invariant to both units)."""
    smf = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    base = _base(n_per=10)
    base = base.assign(x=np.random.default_rng(9).normal(size=len(base)))
    frame = base.assign(y=np.ldexp(base.y.to_numpy(), k_y), x=np.ldexp(base.x.to_numpy(), k_x))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        s = ex.Study(frame, "y", "nozzle", covariates=["x"])
    ref = anova_lm(smf.ols("y ~ C(nozzle, Sum) + x", data=base).fit(), typ=2)
    assert _close(s.results.statistic("nozzle"), ref.loc["C(nozzle, Sum)", "F"], 1e-9)
    assert _close(s.results.pvalue("nozzle"), ref.loc["C(nozzle, Sum)", "PR(>F)"], 1e-7)


@pytest.mark.parametrize("transform,fn", [("log", np.log), ("sqrt", np.sqrt)])
@pytest.mark.parametrize("k", [996, -996])
def test_transforms_of_values_far_from_one(transform, fn, k):
    """log and square root of the data times 2**k: reference f_oneway on the transformed unscaled data
    (log adds a constant, the square root multiplies by 2**(k/2): F is unchanged)."""
    base = _base().assign(y=lambda d: d.y + 5.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = ex.Study(_scaled(base, k), "y", "nozzle", transform=transform).results
    ref = stats.f_oneway(*[fn(base.y[base.nozzle == lv]) for lv in ("N1", "N2", "N3")])
    assert _close(r.statistic(), ref.statistic, 1e-8) and _close(r.pvalue(), ref.pvalue, 1e-6)
