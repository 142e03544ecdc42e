"""Flip finder: constructed data with known critical rows, exact vs greedy, a documented greedy miss."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.engine.errors import ExplorerError
from explorer.sensitivity.flip import flip_finder

BASE_A = [0.1, -0.3, 0.4, 0.0, -0.2, 0.3, -0.1, 0.2]
BASE_B = [0.2, -0.1, 0.3, 0.0, 0.1, -0.2, 0.4, 0.05]


def _frame(c_values: list[float]) -> pd.DataFrame:
    """Levels a and b do not differ; level c (the last rows) sits far away."""
    return pd.DataFrame({"g": list("a" * 8 + "b" * 8 + "c" * len(c_values)), "y": BASE_A + BASE_B + c_values})


def _p(df: pd.DataFrame, removed: list) -> float:
    d = df.drop(index=removed)
    return stats.f_oneway(*[v.to_numpy() for _, v in d.groupby("g")["y"]]).pvalue


def test_finds_the_one_row_holding_significance():
    """Constructed: the lone row of level c (row 16) holds the significance; f_oneway (scipy) confirms each step's p."""
    df = _frame([6.0])
    study = ex.Study(df, "y", "g")
    for method in ("exact", "greedy"):
        res = flip_finder(study, method=method)
        assert res.found and res.rows == (16,) and res.method == method
        assert res.pvalues[0] == pytest.approx(_p(df, [16]), rel=1e-10)
        assert res.pvalues[0] >= 0.05 and res.base_significant


def test_finds_the_two_rows_holding_significance():
    """Constructed: level c has two far rows; either alone keeps it significant, both out do not (scipy f_oneway)."""
    df = _frame([6.0, 6.2])
    study = ex.Study(df, "y", "g")
    res = flip_finder(study, method="exact")
    assert res.found and sorted(res.rows) == [16, 17] and res.exact_up_to == 2
    assert res.flipping_sets_at_size == 1
    assert all(_p(df, [i]) < 0.05 for i in range(18)) and _p(df, [16, 17]) >= 0.05
    for step, p in enumerate(res.pvalues):
        assert p == pytest.approx(_p(df, list(res.rows[: step + 1])), rel=1e-10)
    greedy = flip_finder(study, method="greedy")
    assert sorted(greedy.rows) == [16, 17]


def test_from_not_significant_to_significant():
    """Other direction: a wild value in level b hides the difference; removing it makes f_oneway significant."""
    df = pd.DataFrame({"g": list("aaaaabbbbb"), "y": [1.0, 1.1, 0.9, 1.05, 0.95, 1.5, 1.6, 1.4, 1.55, -3.0]})
    study = ex.Study(df, "y", "g")
    assert not study.decision.significant
    res = flip_finder(study)
    assert res.found and res.rows == (9,) and not res.base_significant
    assert res.pvalues[0] == pytest.approx(_p(df, [9]), rel=1e-10) and res.pvalues[0] < 0.05


#: Found by a seeded search (numpy default_rng(297)); kept as literals. Not significant (p = 0.209).
GREEDY_MISS = pd.DataFrame({
    "g": list("aaaaabbbbbccccc"),
    "y": [2.2, 0.5, -1.4, -1.5, -0.6, 2.3, 2.0, 1.4, 2.0, 1.0, -3.7, -2.8, 1.7, 2.0, 1.7],
})


def test_documented_case_where_greedy_is_not_optimal():
    """Greedy removes row 0 first and needs three rows; the exhaustive search (checked by brute force with
    scipy f_oneway over all pairs) finds the pair (10, 11)."""
    study = ex.Study(GREEDY_MISS, "y", "g")
    exact = flip_finder(study, method="exact")
    greedy = flip_finder(study, method="greedy")
    assert sorted(exact.rows) == [10, 11]
    assert len(greedy.rows) == 3 and greedy.rows[0] == 0 and greedy.found
    singles = [i for i in range(15) if _p(GREEDY_MISS, [i]) < 0.05]
    pairs = [c for c in itertools.combinations(range(15), 2) if _p(GREEDY_MISS, list(c)) < 0.05]
    assert singles == [] and pairs == [(10, 11)]


@pytest.mark.parametrize("seed", range(6))
def test_exact_and_greedy_agree_where_both_find_a_single_row(seed):
    """When a single row flips the decision, both searches find a single row that flips it (f_oneway check)."""
    rng = np.random.default_rng(seed)
    y = np.round(rng.normal(size=15) * 2, 1) + np.repeat([0.0, 1.8, 0.0], 5)
    df = pd.DataFrame({"g": np.repeat(list("abc"), 5), "y": y})
    study = ex.Study(df, "y", "g")
    exact = flip_finder(study, method="exact", max_size=1)
    greedy = flip_finder(study, method="greedy", max_steps=1)
    assert exact.found == greedy.found
    if exact.found:
        assert exact.rows == greedy.rows
        base = _p(df, [])
        assert (_p(df, list(exact.rows)) < 0.05) != (base < 0.05)


def test_budget_bound_is_reported():
    """With a budget below C(n, 2) the exact search covers single rows only and says so."""
    study = ex.Study(GREEDY_MISS, "y", "g")
    res = flip_finder(study, method="exact", budget=50)
    assert not res.found and res.exact_up_to == 1 and res.sets_examined == 15
    assert "no set of up to 1 row" in res.notes[0]
    auto = flip_finder(study, budget=50)
    assert auto.method == "greedy" and "none smaller than 2 rows" in " ".join(auto.notes)


def test_pairwise_decision_flip():
    """Tukey-Kramer decision for one pair: q by hand, tail from scipy.stats.studentized_range (scipy's tukey_hsd
    needs two rows per level, which the found set does not leave)."""
    df = _frame([0.9, 1.1, 0.7, 1.3])
    study = ex.Study(df, "y", "g")
    res = flip_finder(study, pair=("a", "c"))
    assert res.found and res.base_significant
    kept = df.drop(index=list(res.rows))
    groups = {k: v.to_numpy() for k, v in kept.groupby("g")["y"]}
    n = sum(v.size for v in groups.values())
    msw = sum(((v - v.mean()) ** 2).sum() for v in groups.values()) / (n - len(groups))
    a, c = groups["a"], groups["c"]
    q = abs(a.mean() - c.mean()) / np.sqrt(msw / 2 * (1 / a.size + 1 / c.size))
    ref = stats.studentized_range.sf(q, len(groups), n - len(groups))
    assert res.pvalues[-1] == pytest.approx(ref, rel=1e-6)
    assert res.pvalues[-1] >= 0.05
    with pytest.raises(ExplorerError, match="no level 'z'"):
        flip_finder(study, pair=("a", "z"))


def test_records_the_search():
    """The sets scored are added to the study's disclosure and shown with the result."""
    study = ex.Study(_frame([6.0]), "y", "g")
    res = flip_finder(study)
    assert study.disclosure.specifications == res.sets_examined > 0
    assert res.disclosure is not None and "alternative analyses" in res._repr_html_()


def _two_way_pair() -> tuple[pd.DataFrame, pd.DataFrame]:
    rng = np.random.default_rng(4)
    a = rng.choice(list("xyz"), 40)
    b = rng.choice(list("pq"), 40)
    first = pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=40) + (a == "x") * 0.9 + (b == "p") * 0.5})
    second = pd.DataFrame({"a": a, "b": b, "y": rng.normal(size=40) + (a == "x") * 1.3 + (b == "p") * 0.5})
    return first, second


def test_two_way_flip_single_row_and_greedy_match_statsmodels():
    """Two-way with interaction: the flip set's p-values after each step equal statsmodels anova_lm(typ=2) refits;
    the single-row case is found exactly, the two-row case greedily; the user's study keeps no edits."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    for df, size, method in zip(_two_way_pair(), (1, 2), ("exact", "greedy")):
        study = ex.Study(df, "y", ["a", "b"])
        res = flip_finder(study)
        assert res.found and len(res.rows) == size and res.method == method and res.exact_up_to == 1
        for k, p in enumerate(res.pvalues):
            d = df.drop(index=list(res.rows[: k + 1]))
            ref = anova_lm(smf.ols("y ~ C(a) * C(b)", d).fit(), typ=2).loc["C(a)", "PR(>F)"]
            assert p == pytest.approx(ref, rel=1e-9)
        assert (res.pvalues[-1] < 0.05) != res.base_significant
        assert study.edits == () and study.disclosure.specifications == res.sets_examined
    with pytest.raises(ExplorerError, match="one-factor"):
        flip_finder(ex.Study(df, "y", ["a", "b"]), pair=("x", "y"))


def test_string_row_ids_come_back_as_given(demo_csv):
    """Demo data indexed by panel id: the flip rows are the panel ids (one- and two-factor); the lone row of the
    demo's planted pair that flips it alone is P1007 (documented in data/README.md)."""
    df = pd.read_csv(demo_csv).set_index("panel")
    assert flip_finder(ex.Study(df, "thickness_um", "nozzle")).rows == ("P1007",)
    res = flip_finder(ex.Study(df, "thickness_um", ["nozzle", "shift"]), method="greedy")
    assert res.rows[0] == "P1007" and isinstance(res.rows[0], str)
