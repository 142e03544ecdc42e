"""Accuracy of the one-way partition on the NIST StRD analysis-of-variance sets.

Reference: NIST Statistical Reference Datasets (ANOVA), certified values in each file's
header, read from the installed scipy wheel (``scipy/stats/tests/data/nist_anova``).
Second reference: exact rational arithmetic (``fractions``) on the same float64 inputs.
Scores are log relative errors (LRE, McCullough 1998); each test prints its table.
"""

from __future__ import annotations

import pandas as pd
import pytest
from nist_strd import SETS, available, exact_oneway, lre, read_set

import explorer as ex

pytestmark = pytest.mark.skipif(not available(), reason="NIST StRD files not found in the installed scipy")

QUANTITIES = ("ss_between", "ss_within", "ms_between", "ms_within", "f", "r_squared", "resid_sd")


def _ours(study: ex.Study) -> dict[str, float]:
    r = study.results
    b, w = r.partition.rows[0], r.partition.rows[1]
    return {
        "ss_between": b.sum_sq, "ss_within": w.sum_sq, "ms_between": b.mean_sq, "ms_within": w.mean_sq,
        "f": b.statistic, "r_squared": r.r_squared, "resid_sd": r.residual_sd,
    }


def _certified(s) -> dict[str, float]:
    return {q: getattr(s, q) for q in QUANTITIES}


def _frame(s) -> pd.DataFrame:
    return pd.DataFrame({"level": s.levels, "y": [float(t) for t in s.texts]})


def _print_table(title: str, rows: dict[str, dict[str, float]]) -> None:
    print(f"\n{title}")
    print(f"{'set':8s} " + " ".join(f"{q:>10s}" for q in QUANTITIES))
    for name, scores in rows.items():
        print(f"{name:8s} " + " ".join(f"{scores[q]:10.1f}" for q in QUANTITIES))


@pytest.mark.parametrize("name", SETS)
def test_df_exact(name):
    """Degrees of freedom equal the certified ones exactly (NIST StRD header)."""
    s = read_set(name)
    study = ex.Study(_frame(s), "y", "level")
    rows = study.results.partition.rows
    assert (rows[0].df, rows[1].df) == (s.df_between, s.df_within)


def test_no_digits_lost_against_exact_arithmetic():
    """LRE >= 13 on every set against exact rational arithmetic on the same float64 inputs.

    Reference: Python ``fractions`` on the float64 values parsed from the NIST StRD files.
    """
    table = {}
    for name in SETS:
        s = read_set(name)
        df = _frame(s)
        exact = exact_oneway(df["y"].tolist(), s.levels)
        ours = _ours(ex.Study(df, "y", "level"))
        table[name] = {q: lre(ours[q], exact[q]) for q in QUANTITIES}
    _print_table("LRE against exact arithmetic on float64 inputs (DataFrame path)", table)
    for name, scores in table.items():
        assert min(scores.values()) >= 13, (name, scores)


def test_certified_values_from_float_input():
    """LRE >= 9.5 against the NIST certified values on sets with 7 or fewer constant digits.

    Parsed as float64, SmLs07-09 (13 constant leading digits) cannot reach this whatever
    the algorithm; they are printed but held to the text-path test below.
    """
    table = {}
    for name in SETS:
        s = read_set(name)
        table[name] = {q: lre(v, _certified(s)[q]) for q, v in _ours(ex.Study(_frame(s), "y", "level")).items()}
    _print_table("LRE against NIST certified values (DataFrame path)", table)
    for name in SETS:
        if read_set(name).leading_digits <= 7:
            assert min(table[name].values()) >= 9.5, (name, table[name])


def test_certified_values_from_decimal_text(tmp_path):
    """Read from their own decimal text (CSV), every set reaches LRE >= 13 against NIST certified values.

    The exact decimal shift at load time (explorer.engine.decimal_shift) keeps the digits
    that float64 parsing of 13-leading-digit values would lose.
    """
    table = {}
    for name in SETS:
        s = read_set(name)
        path = tmp_path / f"{name}.csv"
        path.write_text("level,y\n" + "\n".join(f"{g},{t}" for g, t in zip(s.levels, s.texts)) + "\n")
        ours = _ours(ex.Study(path, "y", "level"))
        table[name] = {q: lre(v, _certified(s)[q]) for q, v in ours.items()}
    _print_table("LRE against NIST certified values (decimal text path)", table)
    for name, scores in table.items():
        assert min(scores.values()) >= 13, (name, scores)
