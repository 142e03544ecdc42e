"""Robustness sweep: the decision under every combination of defensible analysis choices.

A multiverse analysis (Steegen et al. 2016) of a one-factor study, laid out so that it
can be drawn as a specification curve (Simonsohn et al. 2020). The choices crossed:

* **outlier rule**: keep every row; leave out rows whose externally studentized
  residual exceeds 3 in absolute value; rows whose Cook's distance exceeds 4/n; rows
  the Bonferroni outlier test flags at alpha (one pass on the model of that
  specification, see :mod:`.influence`);
* **test**: the study's chosen overall test first (the default specification is the
  study's own analysis), then the classic F, Welch's F for unequal variances (Welch
  1951) and the rank-based Kruskal-Wallis test (Kruskal and Wallis 1952); any of the
  overall tests may be listed (:data:`.spec.OVERALL_TESTS`);
* **transform** of the response: the study's own (first; see ``study.set_transform``), the
  response as measured and the natural log by default; the square root and Box-Cox powers
  when listed. A transform the response cannot take (the log of zero) is left out with a
  note;
* **merges**: every subset of the level merges the user marks as plausible.

Every combination is computed; combinations that are the same analysis (a rank test on
the log and on the raw response, an outlier rule that leaves out no row) are counted
once, and the table says which choices coincide (:mod:`.sweep_coincide`). The result
gives the share of distinct specifications that reach the current decision, the single choice that moves the p-value most from the
default specification (first option of each choice), and a tidy table with one line
per specification, ranked by p-value.

References
----------
Steegen, S., Tuerlinckx, F., Gelman, A. and Vanpaemel, W. (2016). Increasing
transparency through a multiverse analysis. Perspectives on Psychological Science
11(5), 702-712.
Simonsohn, U., Simmons, J. P. and Nelson, L. D. (2020). Specification curve analysis.
Nature Human Behaviour 4, 1208-1214.
Welch, B. L. (1951). On the comparison of several mean values: an alternative
approach. Biometrika 38, 330-336.
Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion variance
analysis. JASA 47, 583-621.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.disclosure import Disclosure
from ..engine.errors import DesignError, ExplorerError
from ..engine.numerics import response_scale
from ..engine.oneway import fit_oneway
from ..engine.results import Results
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import result_frame, show_p
from ..inference.omnibus import PERMUTATION_SEED, PERMUTATIONS, overall_test
from ..rendering import html_repr
from .alternatives import OnewayInput
from .case_deletion import nullable
from .cell_sweep import factorial_rows
from .scan_target import scan_target
from .study_like import StudyLike
from .sweep_choices import (
    DEFAULT_TESTS,
    OUTLIER_RULES,
    TESTS,
    TRANSFORMS,
    check_merge_names,
    check_options,
    check_transforms,
    outlier_keep,
    transformed_responses,
)
from .sweep_coincide import distinct_analyses

#: How the sweep computes a permutation specification.
_HOW_SWEPT = (f"up to {PERMUTATIONS} seeded orderings, seed {PERMUTATION_SEED}, drawn until its decision at the "
              "study's alpha is settled")

__all__ = ["OUTLIER_RULES", "TESTS", "TRANSFORMS", "SweepResult", "robustness_sweep"]


@dataclass(frozen=True, kw_only=True, eq=False)
class SweepResult:
    """Every specification of the sweep, with summaries for the report and the chart.

    ``table`` has one line per distinct analysis (columns: the four choices, n, rows left
    out, statistic, df, p-value, significant, agrees with the current decision, rank by
    p-value, note, and the other combinations of choices that are the same analysis).
    ``n_specifications`` counts distinct analyses, ``n_combinations`` every combination
    of choices. ``single_choice`` has one line per non-default option: the p-value of the
    default specification with only that choice changed.
    """

    alpha: float
    current_significant: bool
    default_pvalue: float | None
    table: pd.DataFrame
    single_choice: pd.DataFrame
    share_agreeing: float | None
    share_significant: float | None
    n_specifications: int
    term: str = ""
    test: str = "classic"
    disclosure: Disclosure | None = None
    notes: tuple[str, ...] = field(default=())
    n_combinations: int | None = None

    @property
    def strongest_choice(self) -> dict | None:
        """The single change from the default that moves the p-value most (on the log scale)."""
        sc = self.single_choice.dropna(subset=["change in log10 p"])
        if sc.empty:
            return None
        row = sc.loc[sc["change in log10 p"].abs().astype(float).idxmax()]
        return {k: (v.item() if hasattr(v, "item") else v) for k, v in row.items()}

    def to_frame(self) -> pd.DataFrame:
        """The specification-curve table (a copy)."""
        return result_frame(self.table.copy())

    @html_repr
    def _repr_html_(self) -> str:
        verdict = "significant" if self.current_significant else "not significant"
        share = "—" if self.share_agreeing is None else f"{self.share_agreeing:.0%}"
        cap = (f"Robustness sweep of {self.term}: {self.n_specifications} specifications; {share} agree with the "
               f"current decision ({verdict} at alpha {self.alpha:g}, {self.test} test)")
        best = self.strongest_choice
        notes = list(self.notes)
        if best is not None:
            notes.insert(0, f"The single choice that moves p most: {best['choice']} = {best['option']} "
                            f"(p {show_p(self.default_pvalue)} -> {show_p(best['p-value'])}).")
        if self.disclosure is not None:
            notes.append(self.disclosure.sentence_then())
        shown = self.table.drop(columns=["rows left out"])
        return "<div>" + html_table(shown, cap, tuple(notes)) + "</div>"


def _merge_codes(data: OnewayInput, merges: Sequence[Sequence[str]], chosen: tuple[int, ...]):  # type: ignore[no-untyped-def]
    """Level codes and labels after the chosen merges (overlapping merges pool transitively)."""
    parent = list(range(data.k))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for m in chosen:
        idx = [data.labels.index(lv) for lv in merges[m]]
        for j in idx[1:]:
            parent[find(j)] = find(idx[0])
    roots = sorted({find(i) for i in range(data.k)})
    new_index = {r: i for i, r in enumerate(roots)}
    remap = np.array([new_index[find(i)] for i in range(data.k)])
    labels = tuple("+".join(data.labels[j] for j in range(data.k) if find(j) == r) for r in roots)
    return remap[data.codes], labels


def _fit(yt: np.ndarray, codes: np.ndarray, labels: tuple[str, ...], data: OnewayInput, keep: np.ndarray,
         offset: float, spec: object) -> Results | str:
    """The one-way fit of the kept rows of one specification, or why there is none."""
    try:
        return fit_oneway(yt[keep], codes[keep], labels, row_ids=data.row_ids[keep], positions=data.positions[keep],
                          offset=offset, spec=spec)  # type: ignore[arg-type]
    except DesignError as exc:
        return str(exc)


def _check_merges(data: OnewayInput, merges: Sequence[Sequence[str]]) -> list[tuple[str, ...]]:
    return check_merge_names(data.factor, data.labels, merges)


def _oneway_rows(study, data, outlier_rules, tests, transforms, merges, a, notes):  # type: ignore[no-untyped-def]
    merge_list = _check_merges(data, merges)
    responses = transformed_responses(study.dataset, data.positions, transforms, notes)
    subsets = [c for r in range(len(merge_list) + 1) for c in itertools.combinations(range(len(merge_list)), r)]
    spec = study.spec
    rows = []
    for t, (yt, off) in responses.items():
        for subset in subsets:
            codes, labels = _merge_codes(data, merge_list, subset)
            merge_name = "; ".join("+".join(merge_list[i]) for i in subset) or "none"
            fit_all = _fit(yt, codes, labels, data, np.ones(data.n, dtype=bool), off, spec)
            scale = response_scale(off, yt)
            for rule in outlier_rules:
                keep = np.ones(data.n, dtype=bool)
                if isinstance(fit_all, Results):
                    keep = outlier_keep(fit_all, rule, a, scale, data.row_ids)
                res = _fit(yt, codes, labels, data, keep, off, spec)
                left_out = data.row_ids[~keep].tolist()
                for test in tests:
                    stat = d1 = d2 = p = None
                    if isinstance(res, Results):
                        out = overall_test(res, test)
                        stat, d1, d2, p = out.statistic, out.df_num, out.df_den, out.pvalue
                        note = " ".join(out.notes) if p is None else ""
                    else:
                        note = res
                    rows.append({
                        "outlier rule": rule, "test": test, "transform": t, "merges": merge_name,
                        "n": int(keep.sum()), "levels": len(np.unique(codes[keep])),
                        "rows left out": left_out, "left out": len(left_out),
                        "statistic": stat, "df (term)": d1, "df (residual)": d2, "p-value": p, "note": note,
                    })
    return rows, responses


def robustness_sweep(
    study: StudyLike,
    *,
    term: str | None = None,
    outlier_rules: Sequence[str] = tuple(OUTLIER_RULES),
    tests: Sequence[str] | None = None,
    transforms: Sequence[object] | None = None,
    merges: Sequence[Sequence[str]] = (),
    alpha: float | None = None,
    record: bool = True,
) -> SweepResult:
    """Run every combination of the listed choices on ``study``: a specification curve.

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    term : str, optional
        The term whose decision is scored (default: the term of ``study.decision``).
    outlier_rules : sequence of str
        Rules for leaving rows out ('none', 'studentized', 'cooks', 'outlier_test').
    tests : sequence of str, optional
        Overall tests; default the study's, then the classic F, Welch F and
        Kruskal-Wallis (factorial designs: the classic F only).
    transforms : sequence, optional
        Response transforms ('none', 'log', 'sqrt' or Box-Cox powers), starting from
        the study's own.
    merges : sequence of sequences of str
        Level groups of the first factor that are plausible to pool, e.g.
        ``[["N2", "N3"]]``; every subset of them is a specification.
    alpha : float, optional
        Level of the decisions (default the study's).
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    SweepResult
        One row per distinct analysis with its p-value and decision, the share that
        agrees with the current decision and the single choice that moves the p-value
        most. The first option of each choice is the study's own analysis.

    References
    ----------
    Steegen, S., Tuerlinckx, F., Gelman, A. and Vanpaemel, W. (2016). Increasing
    transparency through a multiverse analysis. Perspect. Psychol. Sci. 11(5), 702-712.
    Simonsohn, U., Simmons, J. P. and Nelson, L. D. (2020). Specification curve
    analysis. Nature Human Behaviour 4, 1208-1214.

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle")
    >>> sweep = ex.stats.robustness_sweep(study, outlier_rules=["none"], tests=["classic", "welch"])
    >>> sweep.n_specifications, sweep.share_agreeing
    (4, 1.0)
    """
    spec = study.spec
    target = scan_target(study, "robustness sweep", term)
    name, verdict = target.term, target.verdict
    a = alpha_or(alpha, spec.alpha)
    outlier_rules = check_options("outlier_rules", outlier_rules, OUTLIER_RULES)
    if tests is None:
        tests = tuple(dict.fromkeys((spec.test, *DEFAULT_TESTS)))
    tests = check_options("tests", tests, TESTS)
    transforms = check_transforms(transforms, spec.transform)
    notes: list[str] = []
    if target.oneway is not None:
        rows, responses = _oneway_rows(study, target.oneway, outlier_rules, tests, transforms, merges, a, notes)
    else:
        if tests != ("classic",):
            notes.append("Welch, Brown-Forsythe, rank and permutation tests are one-factor tests; this design is swept "
                         "with the classic F test only.")
            tests = ("classic",)
        rows, responses = factorial_rows(study, name, outlier_rules, transforms, merges, a, notes)
    if not rows:
        raise ExplorerError("the robustness sweep has no analysis to run: " + " ".join(notes))
    notes.insert(0, f"Scored: the decision on {name}; the default specification is the study's own analysis "
                    f"({tests[0]} test).")
    if "permutation" in tests:
        notes.append(f"Test: each permutation specification is a fresh permutation F of its own rows ({_HOW_SWEPT}).")
    every = pd.DataFrame(rows)
    table, coincide = distinct_analyses(every)
    notes.extend(coincide)
    p = table["p-value"].astype(float).to_numpy()
    defined = np.isfinite(p)
    sig = defined & (np.nan_to_num(p, nan=1.0) < a)
    base_p = verdict.pvalue
    current = bool(base_p is not None and base_p < a)
    table["significant"] = sig
    table["agrees with current decision"] = np.where(defined, sig == current, False)
    rank = np.full(p.size, np.nan)
    order = np.argsort(np.where(defined, p, np.inf), kind="stable")
    rank[order[: int(defined.sum())]] = np.arange(1, int(defined.sum()) + 1)
    table["rank"] = pd.array([None if not np.isfinite(v) else int(v) for v in rank], dtype="Int64")
    for c in ("statistic", "df (term)", "df (residual)", "p-value"):
        table[c] = nullable(table[c].astype(float).to_numpy())
    table = table.sort_values(["rank"], na_position="last").reset_index(drop=True)
    table.insert(0, "specification", np.arange(1, len(table) + 1))
    merge_names = tuple(sorted(set(table["merges"]), key=lambda s: (s != "none", s)))
    choices: dict[str, tuple[str, ...]] = {"outlier rule": outlier_rules, "test": tests,
                                           "transform": tuple(responses), "merges": merge_names}
    defaults = {"outlier rule": outlier_rules[0], "test": tests[0], "transform": next(iter(responses), None), "merges": "none"}

    def pick(spec: dict) -> pd.Series:
        m = np.ones(len(every), dtype=bool)
        for col, val in spec.items():
            m &= (every[col] == val).to_numpy()
        return every[m].iloc[0] if m.any() else None

    d_row = pick(defaults)
    default_p = None if d_row is None or pd.isna(d_row["p-value"]) else float(d_row["p-value"])
    single = []
    for col, opts in choices.items():
        for opt in opts:
            if opt == defaults[col]:
                continue
            r = pick({**defaults, col: opt})
            pv = None if r is None or pd.isna(r["p-value"]) else float(r["p-value"])
            ch = None
            if pv is not None and default_p is not None and pv > 0 and default_p > 0:
                ch = float(np.log10(pv) - np.log10(default_p))
            single.append({"choice": col, "option": opt, "p-value": pv, "change in log10 p": ch,
                           "significant": pv is not None and pv < a,
                           "changes decision": pv is not None and default_p is not None and (pv < a) != (default_p < a)})
    single_df = pd.DataFrame(single, columns=["choice", "option", "p-value", "change in log10 p", "significant",
                                              "changes decision"])
    for c in ("p-value", "change in log10 p"):
        single_df[c] = pd.array([None if v is None or not np.isfinite(v) else float(v) for v in single_df[c]],
                                dtype="Float64")
    n_def = int(defined.sum())
    if n_def < len(table):
        notes.append(f"{len(table) - n_def} specification(s) have no test (see the note column); shares count the rest.")
    notes.append("Outlier rules are applied once, on the fit of that specification (transform and merges included), "
                 "not repeated until nothing is flagged.")
    if record:
        study.record_search("robustness sweep", len(table))
    return SweepResult(
        alpha=a, current_significant=current, default_pvalue=default_p, table=table, single_choice=single_df,
        share_agreeing=float(table["agrees with current decision"].sum() / n_def) if n_def else None,
        share_significant=float(sig.sum() / n_def) if n_def else None, n_specifications=len(table),
        term=name, test=tests[0], disclosure=study.disclosure if record else None,
        notes=tuple(notes), n_combinations=len(every),
    )
