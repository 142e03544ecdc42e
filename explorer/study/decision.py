"""The decision: what one analysis concludes, about which term, under which test.

Every surface of the kit (the widget's header and history, the unedited-vs-current
table, each sensitivity scan, the report and the command line) states the decision of
an analysis. It is computed here, once per analysis, from the model specification: the
design, the chosen overall test and alpha. Nothing else reads a p-value and calls it
the decision.

Which term the decision is about follows the hierarchy of the model (Montgomery,
*Design and Analysis of Experiments*, 9th ed., sec. 5.3; Kutner et al., *Applied Linear
Statistical Models*, 5th ed., sec. 19.4):

1. the highest-order interaction whose test rejects at alpha (among several of that
   order, the one with the smallest p-value): "the effect of A depends on B";
2. otherwise the first treatment factor's main effect (the factor listed first is the
   study's factor of interest);
3. blocks are in the model to remove their variation and are never the decision term;
4. terms with a random factor are variance components: when the model has fixed
   treatment terms the decision is read from those; when every treatment term is random
   (a measurement-system study, a random-effects model) the decision reads the F test
   of a variance component, H0: sigma^2[term] = 0, F = MS[term] / its error term (the
   mean square, or Satterthwaite combination, whose expectation equals the term's when
   sigma^2[term] = 0; Montgomery, *Design and Analysis of Experiments*, 8th ed., ch. 13,
   from memory), with the term chosen by rules 1 and 2. ``Decision.error_term`` names
   the denominator, ``test_label`` says it is a variance-component test, and the notes
   say which term and which test.

Main effects of factors that take part in a detected interaction are still reported,
with the caveat that they are averages over the other factor's levels and can hide
effects of opposite sign (a crossover); the simple effects
(:func:`.simple_effects.simple_effects`) say what happens at each level.

With one factor and no blocks the test can be any of :data:`.spec.OVERALL_TESTS`;
designs with several factors or blocks read the F tests of their terms (classic).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..engine.design import model_terms, term_name
from ..engine.results import Results
from ..engine.spec import TEST_LABELS
from ..engine.tables import esc, html_table
from ..formatting import p_equals, show_p
from ..inference.omnibus import PERMUTATION_SEED, PERMUTATIONS, overall_test
from ..rendering import block, html_repr

__all__ = ["TEST_LABELS", "Decision", "TermVerdict", "all_random", "decide", "interaction_verdict"]

DETECTED = "differences detected"
NOT_DETECTED = "no differences detected"
NO_INTERACTION = "no interaction detected"
COMPONENT_DETECTED = "variance component detected (greater than zero)"
COMPONENT_NOT_DETECTED = "no variance component detected"
COMPONENT_TEST = "variance-component F"


def _listing(names: list[str]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def interaction_verdict(factors: tuple[str, ...]) -> str:
    """The plain statement of a detected interaction of ``factors``."""
    if len(factors) == 2:
        return f"the effect of {factors[0]} depends on {factors[1]}"
    return f"the effects of {_listing(list(factors))} depend on one another"


@dataclass(frozen=True, kw_only=True)
class TermVerdict:
    """The test of one treatment term and what it says at alpha.

    ``role`` is 'factor' (one-factor study), 'main effect' or 'interaction'.
    ``significant`` is ``None`` when the test is undefined (``verdict`` says why).
    """

    term: str
    factors: tuple[str, ...]
    role: str
    statistic: float | None
    df_num: float | None
    df_den: float | None
    pvalue: float | None
    significant: bool | None
    verdict: str
    caveat: str = ""
    #: The denominator of the term's F in models with random terms ("" otherwise).
    error_term: str = ""

    def row(self) -> dict[str, Any]:
        out = {"term": self.term, "role": self.role, "statistic": self.statistic, "df (term)": self.df_num,
               "df (residual)": self.df_den, "p-value": self.pvalue, "verdict": self.verdict, "caveat": self.caveat}
        if self.error_term:
            out["tested against"] = self.error_term
        return out


@dataclass(frozen=True, kw_only=True)
class Decision:
    """What an analysis concludes: the headline term, its verdict and everything needed to read it.

    ``term`` is the term the decision is about (see the module docstring for how it is
    chosen), ``verdict`` the plain statement and ``significant`` whether the test of
    that term rejects at ``alpha`` (``None`` when the test is undefined on this view).
    ``test`` is the key of the overall test (``"classic"``, ``"welch"``, ...),
    ``test_label`` its short name and ``method`` how it was computed. ``caveat`` is
    what a reader must keep in mind (empty when nothing). ``terms`` holds the verdict
    on every treatment term, headline included.
    """

    term: str
    factors: tuple[str, ...]
    role: str
    verdict: str
    significant: bool | None
    pvalue: float | None
    statistic: float | None
    df_num: float | None
    df_den: float | None
    test: str
    test_label: str
    method: str
    alpha: float
    caveat: str
    terms: tuple[TermVerdict, ...]
    notes: tuple[str, ...] = field(default=())
    pair: tuple[str, str] | None = None
    #: The denominator of the decision's F in models with random terms ("" otherwise).
    error_term: str = ""

    @property
    def simple_effects_pair(self) -> tuple[str, str] | None:
        """(factor, within) whose simple effects and interaction chart explain this decision: the first two
        factors of the headline interaction, else the first two fixed factors; ``None`` with one factor."""
        return self.pair

    def sentence(self) -> str:
        """One line: ``"A × B: the effect of A depends on B at alpha 0.05 (classic F, p = 6.066e-08)"``."""
        if self.pvalue is None:
            return f"{self.term}: {self.verdict}"
        test = self.test_label
        if self.error_term and self.error_term != "residual":
            test += f" against {self.error_term}"
        shown = show_p(self.pvalue)
        p = f"p {shown}" if shown.startswith("<") else f"p = {shown}"  # "p < 1e-10", not "p = < 1e-10"
        return f"{self.term}: {self.verdict} at alpha {self.alpha:g} ({test}, {p})"

    def verdict_for(self, term: str) -> TermVerdict:
        """The verdict on one treatment term (``KeyError`` naming the terms when absent)."""
        for t in self.terms:
            if t.term == term:
                return t
        raise KeyError(f"no treatment term {term!r} in this decision; terms: {[t.term for t in self.terms]}")

    def agrees_with(self, other: Decision) -> bool:
        """Same term and same verdict."""
        return self.term == other.term and self.significant == other.significant

    def to_dict(self) -> dict[str, Any]:
        """Plain values (for files and the command line)."""
        return {
            "term": self.term, "role": self.role, "verdict": self.verdict, "significant": self.significant,
            "pvalue": self.pvalue, "statistic": self.statistic, "df_num": self.df_num, "df_den": self.df_den,
            "test": self.test, "method": self.method, "alpha": self.alpha, "caveat": self.caveat,
            "error_term": self.error_term, "sentence": self.sentence(),
        }

    def to_frame(self) -> pd.DataFrame:
        """One line per treatment term, the headline term first."""
        ordered = [self.verdict_for(self.term)] + [t for t in self.terms if t.term != self.term]
        return pd.DataFrame([t.row() for t in ordered])

    @html_repr
    def _repr_html_(self) -> str:
        notes = ((self.caveat,) if self.caveat else ()) + self.notes
        return block("decision", [f"<div><b>{esc(self.sentence())}</b></div>",
                                  html_table(self.to_frame(), f"Verdict on every term ({self.method})", notes)])


def _significant(p: float | None, alpha: float) -> bool | None:
    return None if p is None or not math.isfinite(p) else bool(p < alpha)  # never a verdict from NaN


def _oneway(results: Results) -> Decision:
    spec = results.spec
    factor = spec.factors[0]
    out = overall_test(results, spec.test)
    sig = _significant(out.pvalue, spec.alpha)
    if sig is None:
        verdict = "no test on this view" + (f" ({out.notes[0]})" if out.notes else "")
    else:
        verdict = DETECTED if sig else NOT_DETECTED
    method = out.method
    if spec.test == "permutation":
        method = (f"permutation F ({out.permutations} of up to {PERMUTATIONS} orderings, seed {PERMUTATION_SEED}; "
                  f"Monte Carlo SE of p {out.monte_carlo_se:.2g})")
    tv = TermVerdict(term=factor, factors=(factor,), role="factor", statistic=out.statistic, df_num=out.df_num,
                     df_den=out.df_den, pvalue=out.pvalue, significant=sig, verdict=verdict)
    return Decision(term=factor, factors=(factor,), role="factor", verdict=verdict, significant=sig,
                    pvalue=out.pvalue, statistic=out.statistic, df_num=out.df_num, df_den=out.df_den,
                    test=spec.test, test_label=TEST_LABELS[spec.test], method=method, alpha=spec.alpha, caveat="",
                    terms=(tv,), notes=tuple(out.notes))


def _term_verdicts(results: Results) -> tuple[list[TermVerdict], list[str]]:
    """The F verdict of every fixed treatment term of a multi-factor partition, and notes.

    Blocks are left out; so are terms with a random factor (variance components) when the
    model has fixed treatment terms. A term tested against another error term (mixed
    models) carries that error term's name and df. When every treatment term is random,
    each verdict is about the term's variance component.
    """
    spec = results.spec
    alpha = spec.alpha
    nesting = spec.nesting
    random = set(spec.random_columns)
    treatment = [t for t in model_terms(spec) if set(t) <= set(spec.factors)]
    fixed = [t for t in treatment if not set(t) & random]
    notes: list[str] = []
    if fixed and len(fixed) < len(treatment):
        notes.append("Terms with a random factor ({}) are variance components; their tests are in the partition, and "
                     "the decision is read from the fixed terms.".format(
                         ", ".join(term_name(t, nesting) for t in treatment if t not in fixed)))
    chosen = {term_name(t, nesting): t for t in (fixed or treatment)}
    components = not fixed and bool(set(c for t in treatment for c in t) & random)
    out = []
    for row in results.partition.rows:
        names = chosen.get(row.source)
        if names is None:
            continue  # blocks, random terms, residual, total
        p = row.pvalue if row.pvalue is not None and np.isfinite(row.pvalue) else None
        sig = _significant(p, alpha)
        inter = len(names) > 1
        if sig is None:
            verdict = "no test on this view"
        elif components:
            verdict = COMPONENT_DETECTED if sig else COMPONENT_NOT_DETECTED
        elif inter:
            verdict = interaction_verdict(names) if sig else NO_INTERACTION
        else:
            verdict = DETECTED if sig else NOT_DETECTED
        df_den = float(row.df_error) if row.df_error is not None else float(results.df_resid)
        out.append(TermVerdict(term=row.source, factors=names, role="interaction" if inter else "main effect",
                               statistic=row.statistic, df_num=float(row.df), df_den=df_den, pvalue=p,
                               significant=sig, verdict=verdict, error_term=row.error_term or ""))
    return out, notes


def all_random(spec: Any) -> bool:
    """True when every treatment term contains a random factor (the decision reads a variance component)."""
    random = set(spec.random_columns)
    treatment = [t for t in model_terms(spec) if set(t) <= set(spec.factors)]
    return bool(treatment) and all(set(t) & random for t in treatment)


def _component_caveat(head: TermVerdict, terms: list[TermVerdict]) -> str:
    """What the variance-component verdict is about, and which test it reads."""
    test = (f"F = MS[{head.term}] / MS[{head.error_term}] on ({head.df_num:g}, {head.df_den:g}) df"
            if head.error_term and "·" not in head.error_term and " + " not in head.error_term
            and " − " not in head.error_term
            else f"F = MS[{head.term}] / ({head.error_term}) on ({head.df_num:g}, {head.df_den:.4g}) df (Satterthwaite)")
    text = (f"Every treatment term is random, so the decision is the test of the variance component of {head.term} "
            f"(H0: σ²[{head.term}] = 0; {test}): it is about the population the levels were drawn from, not "
            "about these levels' means.")
    inter = [t for t in terms if t.role == "interaction"]
    if head.role == "interaction":
        text += " A component of an interaction is read before those of the main effects it contains."
    elif inter:
        tested = "; ".join(f"{t.term}: {p_equals(t.pvalue)}" for t in inter)
        text += f" No interaction component was detected ({tested})."
    return text


def _with_caveats(terms: list[TermVerdict], spec: Any) -> list[TermVerdict]:
    """Main effects of factors in a detected interaction are averages: say so beside each."""
    detected = [t for t in terms if t.role == "interaction" and t.significant]
    out = []
    for t in terms:
        caveat = ""
        if t.role == "main effect" and len(spec.factors) > 1:
            inside = [i for i in detected if t.factors[0] in i.factors]
            others = [f for f in spec.factors if f != t.factors[0]]
            if inside:
                i = min(inside, key=lambda x: x.pvalue if x.pvalue is not None else 1.0)
                rest = _listing([f for f in i.factors if f != t.factors[0]])
                caveat = (f"averaged over the levels of {_listing(others)}; the {i.term} interaction was detected, "
                          f"so this average can hide effects that differ, even in sign, between levels of {rest}")
            else:
                caveat = f"averaged over the levels of {_listing(others)}"
        out.append(TermVerdict(**{**t.__dict__, "caveat": caveat}))
    return out


def _multi(results: Results) -> Decision:
    spec = results.spec
    verdicts, notes = _term_verdicts(results)
    terms = _with_caveats(verdicts, spec)
    interactions = [t for t in terms if t.role == "interaction"]
    head: TermVerdict | None = None
    for order in sorted({len(t.factors) for t in interactions}, reverse=True):
        hits = [t for t in interactions if len(t.factors) == order and t.significant]
        if hits:
            head = min(hits, key=lambda x: x.pvalue if x.pvalue is not None else 1.0)
            break
    components = all_random(spec)
    if head is not None and components:
        caveat = _component_caveat(head, terms)
    elif head is not None:
        a, b = head.factors[0], head.factors[1]
        where = ("the cell means of each combination" if spec.is_mixed else
                 f"the simple effects (study.simple_effects({a!r}, within={b!r})) and the interaction chart")
        caveat = (f"Main effects of {_listing(list(head.factors))} are averages over the other factors' levels and "
                  f"can mislead when the effect of one depends on another; read {where}.")
    elif not terms:
        return _no_term(results, notes)
    else:
        head = next((t for t in terms if t.factors == (spec.factors[0],)), terms[0])
        others = [f for f in spec.factors if f != head.factors[0]]
        if components:
            terms = [TermVerdict(**{**t.__dict__, "caveat": ""}) for t in terms]
            head = next(t for t in terms if t.term == head.term)
        mine = [t for t in interactions if head.factors[0] in t.factors]
        if components:
            caveat = _component_caveat(head, terms)
        elif not others:
            caveat = ""
        elif not mine:
            caveat = (f"The model has no interaction term involving {head.term}, so its effect is taken to be the same "
                      f"at every level of {_listing(others)}.")
        else:
            tested = "; ".join(f"{t.term}: {p_equals(t.pvalue)}" for t in mine)
            caveat = (f"The effect of {head.term} is averaged over the levels of {_listing(others)}; no interaction "
                      f"involving it was detected ({tested}).")
    if spec.blocks:
        notes.append(f"Blocks ({', '.join(spec.blocks)}) are in the model to remove their variation; they are never "
                     "the decision term.")
    if any(t.significant is None for t in terms):
        notes.extend(n for n in results.partition.notes if n not in notes)
    method = f"classic F, type {spec.ss_type} sums of squares"
    if spec.is_mixed:
        method += ", each term against its own error term"
    test_label = TEST_LABELS[spec.test]
    if components:
        test_label = COMPONENT_TEST
        method = (f"F test of a variance component (H0: σ² = 0), type {spec.ss_type} sums of squares, each term "
                  "against its own error term")
        notes.append(f"The decision reads the variance-component F test of {head.term}, against "
                     f"{head.error_term or 'the residual'} (see the partition's 'tested against' column).")
    fixed = [t.factors[0] for t in terms if t.role == "main effect"]
    pair = (head.factors[0], head.factors[1]) if head.role == "interaction" else (
        (fixed[0], fixed[1]) if len(fixed) >= 2 and not spec.is_mixed else None)
    return Decision(term=head.term, factors=head.factors, role=head.role, verdict=head.verdict,
                    significant=head.significant, pvalue=head.pvalue, statistic=head.statistic, df_num=head.df_num,
                    df_den=head.df_den, test=spec.test, test_label=test_label, method=method,
                    alpha=spec.alpha, caveat=caveat, terms=tuple(terms), notes=tuple(notes),
                    pair=None if spec.is_mixed else pair, error_term=head.error_term)


def _no_term(results: Results, notes: list[str]) -> Decision:
    """No treatment term has a row in the partition (e.g. every term aliased): no decision can be read."""
    spec = results.spec
    name = spec.factors[0]
    verdict = "no test on this view (no treatment term could be tested)"
    return Decision(term=name, factors=(name,), role="main effect", verdict=verdict, significant=None, pvalue=None,
                    statistic=None, df_num=None, df_den=None, test=spec.test, test_label=TEST_LABELS[spec.test],
                    method=f"classic F, type {spec.ss_type} sums of squares", alpha=spec.alpha, caveat="",
                    terms=(), notes=tuple(notes) + tuple(results.notes))


def decide(results: Results) -> Decision:
    """The decision of ``results`` under its spec's overall test and alpha (see the module docstring)."""
    if results.spec.is_oneway:
        return _oneway(results)
    return _multi(results)
