"""Multi-factor engine: published examples, statsmodels agreement, invariants, edits.

Outside references: Montgomery, Design and Analysis of Experiments (Examples 4.1 and
5.1, values from memory); NIST/SEMATECH e-Handbook 7.4.3.3 and 7.4.7.1; statsmodels
``ols`` + ``anova_lm(typ=1/2/3)`` (Type III with ``C(x, Sum)`` coding),
``OLSInfluence``, ``t_test``; pingouin ``anova`` (partial eta squared); scipy
``tukey_hsd``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.outliers_influence import OLSInfluence

import explorer as ex
from explorer.engine.analysis import analyze
from explorer.engine.cellfit import fit_cells
from explorer.engine.dataset import build_dataset
from explorer.engine.factorial import fit_factorial
from explorer.engine.groupstats import GroupStats
from explorer.engine.spec import ModelSpec
from explorer.engine.view import initial_view

# Montgomery, Design and Analysis of Experiments, Example 5.1 (battery life, hours:
# material type x temperature in degrees F, four batteries per cell). Data from memory.
BATTERY = {
    ("1", "15"): [130, 155, 74, 180], ("1", "70"): [34, 40, 80, 75], ("1", "125"): [20, 70, 82, 58],
    ("2", "15"): [150, 188, 159, 126], ("2", "70"): [136, 122, 106, 115], ("2", "125"): [25, 70, 58, 45],
    ("3", "15"): [138, 110, 168, 160], ("3", "70"): [174, 120, 150, 139], ("3", "125"): [96, 104, 82, 60],
}

# Montgomery, Design and Analysis of Experiments, Example 4.1 (vascular graft: extrusion
# pressure x batch of resin as blocks; percentage of good grafts). Data from memory.
GRAFT = {
    "8500": [90.3, 89.2, 98.2, 93.9, 87.4, 97.9],
    "8700": [92.5, 89.5, 90.6, 94.7, 87.0, 95.8],
    "8900": [85.5, 90.8, 89.6, 86.2, 88.0, 93.4],
    "9100": [82.5, 89.5, 85.6, 87.4, 78.9, 90.7],
}

# NIST/SEMATECH e-Handbook 7.4.3.3 and 7.4.7.1 (one-way, four levels of five).
HANDBOOK_7471 = {
    "1": [6.9, 5.4, 5.8, 4.6, 4.0],
    "2": [8.3, 6.8, 7.8, 9.2, 6.5],
    "3": [8.0, 10.5, 8.1, 6.9, 9.3],
    "4": [5.8, 3.8, 6.1, 5.6, 6.2],
}


def battery() -> pd.DataFrame:
    rows = [(m, t, v) for (m, t), vs in BATTERY.items() for v in vs]
    return pd.DataFrame(rows, columns=["material", "temperature", "life"])


def graft() -> pd.DataFrame:
    rows = [(p, f"batch{b + 1}", v) for p, vs in GRAFT.items() for b, v in enumerate(vs)]
    return pd.DataFrame(rows, columns=["pressure", "batch", "yield_pct"])


def _sm_name(index: str) -> str:
    parts = [p.strip() for p in index.split(":")]
    return " × ".join(p[2:].split(",")[0] for p in parts)


def statsmodels_tables(frame: pd.DataFrame, response: str, factors, blocks=(), interactions=True):
    """statsmodels ols + anova_lm(typ=1/2/3) with sum-to-zero coding; rows keyed by our term names."""
    treat = [f"C({f}, Sum)" for f in factors]
    rhs = ("*" if interactions else "+").join(treat)
    if blocks:
        rhs = " + ".join(f"C({b}, Sum)" for b in blocks) + " + " + rhs
    model = ols(f"{response} ~ {rhs}", frame).fit()
    out = {}
    for typ, key in ((1, "I"), (2, "II"), (3, "III")):
        t = anova_lm(model, typ=typ)
        out[key] = {(_sm_name(i) if i != "Residual" else "residual"): row for i, row in t.iterrows() if i != "Intercept"}
    return out, model


def assert_tables_match(results: ex.Results, ref: dict, rtol: float = 1e-9) -> None:
    for key in ("I", "II", "III"):
        table = results.partitions[key]
        assert table.ss_type == key and table.coding == "sum-to-zero"
        for name, row in ref[key].items():
            mine = table.row(name)
            assert mine.df == int(row["df"]), (key, name)
            np.testing.assert_allclose(mine.sum_sq, row["sum_sq"], rtol=rtol, atol=1e-9 * ref[key]["residual"]["sum_sq"])
            if name != "residual":
                np.testing.assert_allclose(mine.statistic, row["F"], rtol=rtol, atol=1e-12)
                np.testing.assert_allclose(mine.pvalue, row["PR(>F)"], rtol=1e-7, atol=1e-14)


# --------------------------------------------------------------------------- published examples
def test_montgomery_example_5_1_battery_life():
    """Montgomery, DAE, Example 5.1 (from memory): SS 10683.72 / 39118.72 / 9613.78 / 18230.75 / 77646.97,
    df 2 / 2 / 4 / 27 / 35, MS 5341.86 / 19559.36 / 2403.44 / 675.21, F 7.91 / 28.97 / 3.56."""
    r = ex.Study(battery(), "life", ["material", "temperature"]).results
    printed = {
        "material": (2, 10683.72, 5341.86, 7.91),
        "temperature": (2, 39118.72, 19559.36, 28.97),
        "material × temperature": (4, 9613.78, 2403.44, 3.56),
    }
    for name, (df, ss, ms, F) in printed.items():
        row = r.partition.row(name)
        assert row.df == df
        assert round(row.sum_sq, 2) == ss and round(row.mean_sq, 2) == ms and round(row.statistic, 2) == F
    resid, total = r.partition.row("residual"), r.partition.row("total (corrected)")
    assert (resid.df, total.df) == (27, 35)
    assert round(resid.sum_sq, 2) == 18230.75 and round(resid.mean_sq, 2) == 675.21
    assert round(total.sum_sq, 2) == 77646.97
    assert r.pvalue("material × temperature") < 0.05


def test_montgomery_example_4_1_vascular_graft_blocks():
    """Montgomery, DAE, Example 4.1 (from memory): treatments SS 178.17 (df 3, MS 59.39), blocks 192.25
    (df 5, MS 38.45), error 109.89 (df 15, MS 7.33), total 480.31 (df 23), F = 8.11."""
    r = ex.Study(graft(), "yield_pct", "pressure", blocks="batch").results
    assert r.partition.sources == ("pressure", "batch", "residual", "total (corrected)")
    p, b, e, t = r.partition.rows
    assert (p.df, b.df, e.df, t.df) == (3, 5, 15, 23)
    assert round(p.sum_sq, 2) == 178.17 and round(p.mean_sq, 2) == 59.39 and round(p.statistic, 2) == 8.11
    assert round(b.sum_sq, 2) == 192.25 and round(b.mean_sq, 2) == 38.45
    assert round(e.sum_sq, 2) == 109.89 and round(e.mean_sq, 2) == 7.33
    assert round(t.sum_sq, 2) == 480.31
    assert any("randomized complete block" in n for n in r.notes)


def test_relative_efficiency_of_blocking():
    """Relative efficiency, Montgomery DAE ch. 4 formula (from memory), inputs from statsmodels anova_lm(typ=2):
    sigma2_crd = ((b-1) MS_blocks + b(a-1) MS_E) / (ab-1); R = (df_b+1)(df_r+3)/((df_b+3)(df_r+1)) sigma2_crd/MS_E."""
    frame = graft()
    r = ex.Study(frame, "yield_pct", "pressure", blocks="batch").results
    ref = anova_lm(ols("yield_pct ~ C(pressure) + C(batch)", frame).fit(), typ=2)
    a, b = 4, 6
    ms_blk = ref.loc["C(batch)", "sum_sq"] / (b - 1)
    ms_e = ref.loc["Residual", "sum_sq"] / ((a - 1) * (b - 1))
    sigma2 = ((b - 1) * ms_blk + b * (a - 1) * ms_e) / (a * b - 1)
    df_b, df_r = (a - 1) * (b - 1), a * (b - 1)
    expected = (df_b + 1) * (df_r + 3) / ((df_b + 3) * (df_r + 1)) * sigma2 / ms_e
    assert r.blocking is not None
    np.testing.assert_allclose(r.blocking.relative_efficiency, expected, rtol=1e-12)
    np.testing.assert_allclose(r.blocking.variance_ratio, sigma2 / ms_e, rtol=1e-12)
    assert (r.blocking.df_resid_blocked, r.blocking.df_resid_unblocked) == (15, 20)
    assert r.blocking.relative_efficiency > 1  # blocking on resin batch paid off


def test_handbook_7471_tukey_intervals_through_general_engine():
    """NIST/SEMATECH e-Handbook 7.4.7.1: 95% Tukey intervals mu2-mu1 (0.29, 4.47), mu3-mu1 (1.13, 5.31),
    mu1-mu4 (-2.25, 1.93), mu2-mu3 (-2.93, 1.25), mu3-mu4 (0.97, 5.15)."""
    frame = pd.DataFrame([(g, v) for g, vs in HANDBOOK_7471.items() for v in vs], columns=["level", "y"])
    ds = build_dataset(frame, "y", ["level"])
    spec = ModelSpec(response="y", factors=("level",))
    view = initial_view(ds)
    r = fit_factorial(ds, view, spec, positions=np.arange(ds.n))
    c = r.compare_means("level")
    pairs = {(a, b): (lo, hi) for a, b, lo, hi in zip(c.first, c.second, c.ci_low, c.ci_high)}

    def interval(a, b):
        if (a, b) in pairs:
            return pairs[(a, b)]
        lo, hi = pairs[(b, a)]
        return (-hi, -lo)

    printed = {("2", "1"): (0.29, 4.47), ("3", "1"): (1.13, 5.31), ("1", "4"): (-2.25, 1.93),
               ("2", "3"): (-2.93, 1.25), ("3", "4"): (0.97, 5.15)}
    for (a, b), (lo, hi) in printed.items():
        got = interval(a, b)
        assert got == pytest.approx((lo, hi), abs=0.006), (a, b, got)


# --------------------------------------------------------------------------- statsmodels agreement
@st.composite
def designs(draw, balanced: bool):
    n_factors = draw(st.sampled_from([2, 3]))
    sizes = [draw(st.integers(2, 4 if n_factors == 2 else 3)) for _ in range(n_factors)]
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    cells = np.array(np.meshgrid(*[np.arange(k) for k in sizes], indexing="ij")).reshape(n_factors, -1).T
    reps = np.full(len(cells), draw(st.integers(2, 3))) if balanced else rng.integers(1, 5, size=len(cells))
    if not balanced and reps.min() == reps.max():
        reps[0] += 1
    codes = np.repeat(cells, reps, axis=0)
    names = ["fa", "fb", "fc"][:n_factors]
    frame = pd.DataFrame({n: [f"L{c}" for c in codes[:, j]] for j, n in enumerate(names)})
    effect = sum(rng.normal(size=k)[codes[:, j]] for j, k in enumerate(sizes))
    frame["y"] = 1000.0 + effect + rng.normal(scale=draw(st.sampled_from([0.5, 2.0])), size=len(frame))
    frame = frame.sample(frac=1.0, random_state=int(seed % 1000)).reset_index(drop=True)
    return frame, names, draw(st.booleans())


@settings(max_examples=20, deadline=None)
@given(designs(balanced=False))
def test_types_match_statsmodels_unbalanced(case):
    """statsmodels ols + anova_lm(typ=1/2/3), C(x, Sum) coding: unbalanced 2- and 3-factor data, rtol 1e-9."""
    frame, names, interactions = case
    r = ex.Study(frame, "y", names, interactions=interactions).results
    ref, _ = statsmodels_tables(frame, "y", names, interactions=interactions)
    assert_tables_match(r, ref)
    assert any("Unbalanced" in n for n in r.notes)
    assert r.cells is not None and not r.cells.balanced


@settings(max_examples=15, deadline=None)
@given(designs(balanced=True))
def test_types_match_statsmodels_balanced_and_agree(case):
    """statsmodels anova_lm(typ=1/2/3) on balanced data, rtol 1e-9; and the three types are identical."""
    frame, names, interactions = case
    r = ex.Study(frame, "y", names, interactions=interactions).results
    ref, _ = statsmodels_tables(frame, "y", names, interactions=interactions)
    assert_tables_match(r, ref)
    one, two, three = (r.partitions[k] for k in ("I", "II", "III"))
    for a, b, c in zip(one.rows, two.rows, three.rows):
        np.testing.assert_allclose([a.sum_sq, b.sum_sq], c.sum_sq, rtol=1e-9, atol=1e-9 * r.partition.row("residual").sum_sq)
    assert any("Balanced design" in n for n in r.notes)
    for f in names:  # balanced: marginal means are the raw level means
        np.testing.assert_allclose(r.marginal_means[f].estimate, r.levels[f].mean, rtol=1e-12)


@settings(max_examples=10, deadline=None)
@given(st.integers(0, 2**32 - 1), st.booleans())
def test_blocked_factorial_matches_statsmodels(seed, drop_some):
    """statsmodels anova_lm(typ=1/2/3) for block + A*B (blocks entered first in the sequence), rtol 1e-9."""
    rng = np.random.default_rng(seed)
    rows = [(f"A{a}", f"B{b}", f"K{k}") for a in range(3) for b in range(2) for k in range(4)]
    frame = pd.DataFrame(rows, columns=["fa", "fb", "blk"])
    frame["y"] = rng.normal(size=len(frame)) + frame["blk"].str[1].astype(int) * 0.7
    if drop_some:
        frame = frame.drop(index=rng.choice(len(frame), 3, replace=False)).reset_index(drop=True)
    r = ex.Study(frame, "y", ["fa", "fb"], blocks="blk").results
    ref, _ = statsmodels_tables(frame, "y", ["fa", "fb"], blocks=["blk"])
    assert_tables_match(r, ref)
    assert r.partition.sources[:4] == ("fa", "fb", "fa × fb", "blk")


def test_fitted_residuals_leverage_match_statsmodels():
    """statsmodels OLS fittedvalues, resid and OLSInfluence.hat_matrix_diag on unbalanced data, rtol 1e-9."""
    rng = np.random.default_rng(7)
    frame = pd.DataFrame({"fa": rng.choice(["a", "b", "c"], 80), "fb": rng.choice(["x", "y"], 80)})
    frame["y"] = rng.normal(size=80) + (frame.fa == "b") * 2
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    model = ols("y ~ C(fa) * C(fb)", frame).fit()
    np.testing.assert_allclose(r.fit.fitted, model.fittedvalues.to_numpy(), rtol=1e-9)
    assert r.cells is not None and r.cells.fitted is not None  # full factorial: fitted cell means = raw means
    np.testing.assert_allclose(r.cells.fitted, r.cells.mean, rtol=1e-12)
    np.testing.assert_allclose(r.fit.residuals, model.resid.to_numpy(), rtol=1e-7, atol=1e-12)
    np.testing.assert_allclose(r.fit.leverage, OLSInfluence(model).hat_matrix_diag, rtol=1e-9)
    assert r.fit.leverage.sum() == pytest.approx(6)
    np.testing.assert_allclose(r.ms_resid, model.mse_resid, rtol=1e-10)
    np.testing.assert_allclose(r.r_squared, model.rsquared, rtol=1e-10)


def test_marginal_means_match_statsmodels_contrasts():
    """Least-squares means (Searle, Speed and Milliken 1980) = statsmodels t_test of the design rows averaged
    over the grid of the other factor; Tukey-Kramer q and p from those with scipy studentized_range
    (the test uses q = sqrt(2)|t|)."""
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"fa": rng.choice(["a1", "a2", "a3"], 70), "fb": rng.choice(["b1", "b2"], 70, p=[0.8, 0.2])})
    frame["y"] = rng.normal(size=70) + frame.fa.map({"a1": 0, "a2": 1, "a3": 3}) + (frame.fb == "b2") * 2
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    model = ols("y ~ C(fa, Sum) * C(fb, Sum)", frame).fit()
    rows = []
    for a in ["a1", "a2", "a3"]:  # design rows of the grid cells, built by the same formula
        grid = pd.DataFrame({"fa": [a, a], "fb": ["b1", "b2"], "y": [0.0, 0.0]})
        exog = ols("y ~ C(fa, Sum) * C(fb, Sum)", pd.concat([frame, grid], ignore_index=True)).exog
        rows.append(exog[-2:].mean(axis=0))
    L = np.array(rows)
    tt = model.t_test(L)
    mm = r.marginal_means["fa"]
    np.testing.assert_allclose(mm.estimate, np.asarray(tt.effect), rtol=1e-10)
    np.testing.assert_allclose(mm.se, np.asarray(tt.sd).ravel(), rtol=1e-9)
    assert not np.allclose(mm.estimate, r.levels["fa"].mean)  # unbalanced: differ from raw means
    c = r.compare_means("fa")
    d = model.t_test(L[0] - L[1])
    q = abs(float(d.effect[0])) * np.sqrt(2) / float(np.asarray(d.sd).ravel()[0])
    np.testing.assert_allclose(abs(c.statistic[0]) * np.sqrt(2), q, rtol=1e-9)
    np.testing.assert_allclose(c.pvalue[0], stats.studentized_range.sf(q, 3, model.df_resid), rtol=1e-6)


def test_tukey_kramer_one_way_matches_scipy_tukey_hsd():
    """scipy.stats.tukey_hsd (Tukey-Kramer for unequal n): p-values and 95% intervals, one-way through the general engine."""
    rng = np.random.default_rng(11)
    groups = {"g1": rng.normal(0, 1, 6), "g2": rng.normal(1, 1, 9), "g3": rng.normal(0.3, 1, 4)}
    frame = pd.DataFrame([(g, v) for g, vs in groups.items() for v in vs], columns=["g", "y"])
    ds = build_dataset(frame, "y", ["g"])
    r = fit_factorial(ds, initial_view(ds), ModelSpec(response="y", factors=("g",)), positions=np.arange(ds.n))
    c = r.compare_means("g")
    ref = stats.tukey_hsd(*groups.values())
    ci = ref.confidence_interval(0.95)
    for k, (i, j) in enumerate([(0, 1), (0, 2), (1, 2)]):
        np.testing.assert_allclose(c.difference[k], ref.statistic[i, j], rtol=1e-10)
        np.testing.assert_allclose(c.pvalue[k], ref.pvalue[i, j], rtol=1e-5, atol=1e-8)
        np.testing.assert_allclose([c.ci_low[k], c.ci_high[k]], [ci.low[i, j], ci.high[i, j]], rtol=1e-6)


def test_partial_eta_squared_matches_pingouin_and_omega_formula():
    """pingouin.anova(between=[a, b], ss_type=2) 'np2'; partial omega² by Olejnik and Algina (2003) from
    statsmodels anova_lm(typ=2) sums of squares."""
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({"fa": rng.choice(["a", "b", "c"], 60), "fb": rng.choice(["x", "y"], 60)})
    frame["y"] = rng.normal(size=60) + (frame.fa == "c") * 1.5
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    aov = pg.anova(data=frame, dv="y", between=["fa", "fb"], ss_type=2, effsize="np2")
    np2 = dict(zip(aov["Source"], aov["np2"]))
    eff = r.term_effects
    assert eff is not None
    np.testing.assert_allclose(eff["fa"].partial_eta_squared, np2["fa"], rtol=1e-9)
    np.testing.assert_allclose(eff["fb"].partial_eta_squared, np2["fb"], rtol=1e-9)
    np.testing.assert_allclose(eff["fa × fb"].partial_eta_squared, np2["fa * fb"], rtol=1e-9)
    ref = anova_lm(ols("y ~ C(fa) * C(fb)", frame).fit(), typ=2)
    mse, n = ref.loc["Residual", "sum_sq"] / ref.loc["Residual", "df"], len(frame)
    ss, df = ref.loc["C(fa)", "sum_sq"], ref.loc["C(fa)", "df"]
    np.testing.assert_allclose(eff["fa"].partial_omega_squared, (ss - df * mse) / (ss + (n - df) * mse), rtol=1e-9)


# --------------------------------------------------------------------------- one-way agreement
def _oneway_cases():
    from nist_strd import available, read_set

    rng = np.random.default_rng(2)
    frame = pd.DataFrame({"g": rng.choice(list("abcd"), 50), "y": rng.normal(100, 3, 50)})
    yield frame
    if available():
        for name in ("SmLs04", "AtmWtAg"):
            s = read_set(name)
            yield pd.DataFrame({"g": s.levels, "y": [float(t) for t in s.texts]})


@pytest.mark.parametrize("frame", list(_oneway_cases()))
def test_oneway_through_general_engine_equals_oneway_engine(frame):
    """One-way data through the general engine equal the one-way engine (itself checked against the NIST StRD
    analysis-of-variance sets) to 1e-12 relative: partition, fitted values, leverage, level table."""
    ds = build_dataset(frame, "y", ["g"])
    spec = ModelSpec(response="y", factors=("g",))
    view = initial_view(ds)
    one = analyze(ds, view, spec)
    gen = fit_factorial(ds, view, spec, positions=np.arange(ds.n))
    for a, b in zip(one.partition.rows, gen.partition.rows):
        assert a.source == b.source and a.df == b.df
        np.testing.assert_allclose(b.sum_sq, a.sum_sq, rtol=1e-12)
        if a.statistic is not None:
            np.testing.assert_allclose(b.statistic, a.statistic, rtol=1e-12)
            np.testing.assert_allclose(b.pvalue, a.pvalue, rtol=1e-11)
    np.testing.assert_allclose(gen.fit.fitted, one.fit.fitted, rtol=1e-12)
    np.testing.assert_allclose(gen.fit.leverage, one.fit.leverage, rtol=1e-12)
    np.testing.assert_allclose(gen.levels["g"].mean, one.levels["g"].mean, rtol=1e-12)
    np.testing.assert_allclose(gen.marginal_means["g"].estimate, one.levels["g"].mean, rtol=1e-12)


# --------------------------------------------------------------------------- rows-free entry point
def test_fit_cells_from_summaries_equals_row_fit():
    """The rows-free entry point on summaries computed by pandas groupby gives the row-based partition
    (which matches statsmodels anova_lm above), rtol 1e-12."""
    frame = battery()
    study = ex.Study(frame, "life", ["material", "temperature"])
    g = frame.groupby(["material", "temperature"], sort=True)["life"]
    summary = g.agg(["count", "mean", "var"]).reset_index()
    lv_m = sorted(frame.material.unique(), key=int)
    lv_t = sorted(frame.temperature.unique(), key=int)
    cell_levels = np.column_stack([summary.material.map(lv_m.index), summary.temperature.map(lv_t.index)])
    stats_ = GroupStats(
        labels=tuple(map(str, summary.index)), n=summary["count"].to_numpy(), mean=summary["mean"].to_numpy(),
        m2=(summary["var"] * (summary["count"] - 1)).to_numpy(),
    )
    cf = fit_cells(stats_, cell_levels, ("material", "temperature"), (3, 3), study.spec)
    for k in ("I", "II", "III"):
        for t in cf.terms:
            name = " × ".join(t)
            np.testing.assert_allclose(cf.ss[k][t], study.results.partitions[k].row(name).sum_sq, rtol=1e-12)
    np.testing.assert_allclose(cf.ss_resid, study.results.partition.row("residual").sum_sq, rtol=1e-12)


# --------------------------------------------------------------------------- edits through the study
def test_edit_log_with_two_factors_matches_refit_on_edited_data():
    """Drop, reassign in either factor, merge levels of either factor: each state equals statsmodels
    anova_lm(typ=1/2/3) on the correspondingly edited table; undo returns the baseline exactly."""
    frame = battery()
    original = frame.copy(deep=True)
    study = ex.Study(frame, "life", ["material", "temperature"], ss_type="III")
    base = study.results
    edited = frame.copy()

    study.drop([0, 13], reason="meter fault")
    edited = edited.drop(index=[0, 13])
    assert_tables_match(study.results, statsmodels_tables(edited, "life", ["material", "temperature"])[0])

    study.reassign(5, "temperature", "125", reason="logged in wrong chamber")
    edited.loc[5, "temperature"] = "125"
    study.reassign(20, "material", "3", reason="label swap")
    edited.loc[20, "material"] = "3"
    assert_tables_match(study.results, statsmodels_tables(edited, "life", ["material", "temperature"])[0])

    study.merge_levels("material", ["1", "2"], into="1+2", reason="same supplier")
    edited["material"] = edited["material"].replace({"1": "1+2", "2": "1+2"})
    study.merge_levels("temperature", ["15", "70"], into="cool", reason="same regime")
    edited["temperature"] = edited["temperature"].replace({"15": "cool", "70": "cool"})
    r = study.results
    assert_tables_match(r, statsmodels_tables(edited, "life", ["material", "temperature"])[0])
    assert r.partition.ss_type == "III"
    assert set(r.marginal_means["material"].labels) == {"1+2", "3"}

    while study.edits:
        study.undo()
    for a, b in zip(study.results.partition.rows, base.partition.rows):
        assert a == b
    pd.testing.assert_frame_equal(frame, original)


def test_results_display_and_frames():
    """Tables render (HTML, frames) without NaN leaking from undefined values; the partition states type and coding."""
    r = ex.Study(battery().iloc[1:], "life", ["material", "temperature"]).results
    html = r._repr_html_()
    assert "Marginal (least-squares) means" in html and "partial eta" in html
    assert r.cells is not None and r.cells.counts("material", "temperature").to_numpy().sum() == 35
    assert r.partition.coding == "sum-to-zero" and r.partition.ss_type == "II"
    assert r.compare_means().to_frame().shape[0] == 3
    assert r.spec.factors[0] == "material"


# --------------------------------------------------------------------------- degenerate and hard data
def test_zero_residual_gives_undefined_tests_not_nan():
    """Every observation equal to its cell mean: F and p undefined (None) with a note; no warnings, no NaN."""
    frame = pd.DataFrame([(a, b) for a in "xyz" for b in "pq" for _ in range(2)], columns=["fa", "fb"])
    frame["y"] = frame.fa.map({"x": 1.0, "y": 2.0, "z": 4.0}) + frame.fb.map({"p": 0.0, "q": 0.5})
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    assert r.partition.row("fa").statistic is None and r.partition.row("fa").pvalue is None
    assert any("F is undefined" in n for n in r.partition.notes)
    assert r.term_effects is not None and r.term_effects["fa"].partial_omega_squared is None
    np.testing.assert_allclose(r.marginal_means["fa"].estimate, [1.25, 2.25, 4.25], rtol=1e-12)


def test_shift_invariance_with_large_offset():
    """Sums of squares are invariant to adding a constant (definition); statsmodels anova_lm(typ=2) on the
    unshifted data as the reference, with a 1e8 offset and unit-scale effects. rtol 1e-7: adding 1e8 in
    float64 rounds each input by up to 7.5e-9, which bounds the agreement whatever the algorithm."""
    rng = np.random.default_rng(9)
    frame = pd.DataFrame({"fa": rng.choice(["a", "b", "c"], 90), "fb": rng.choice(["x", "y", "z"], 90)})
    frame["y"] = rng.normal(size=90) + (frame.fa == "b") * 0.5
    shifted = frame.assign(y=frame["y"] + 1e8)
    r = ex.Study(shifted, "y", ["fa", "fb"]).results
    ref = anova_lm(ols("y ~ C(fa) * C(fb)", frame).fit(), typ=2)
    for name, key in (("fa", "C(fa)"), ("fb", "C(fb)"), ("fa × fb", "C(fa):C(fb)"), ("residual", "Residual")):
        np.testing.assert_allclose(r.partition.row(name).sum_sq, ref.loc[key, "sum_sq"], rtol=1e-7)
