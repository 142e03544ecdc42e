"""The partition of a model with random terms: each F test against its own error term.

For every row the error term (denominator) is the mean square, or combination of mean
squares, whose expectation equals the row's expectation when the row's effect is
absent (:mod:`.ems`). The table names it in a "tested against" column with its df
(Satterthwaite's where synthesized).

References
----------
Montgomery, D. C. Design and Analysis of Experiments, 8th ed., ch. 13 (random and mixed
models, approximate F tests) and ch. 14 (nested and split-plot designs), from memory.
Satterthwaite, F. E. (1946). Biometrics Bulletin 2, 110-114.
"""

from __future__ import annotations

import weakref
from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from .cellfit import SS_TYPES, CellFit
from .distributions import f_sf
from .ems import (
    RESIDUAL,
    ErrorTerm,
    ExpectedMeanSquares,
    complete_balanced,
    error_terms,
    expected_mean_squares,
    random_indicators,
)
from .spec import ModelSpec
from .tables import AnovaTable, TermRow

__all__ = ["mixed_partition", "mixed_tables"]

CODING = "sum-to-zero"


def _notes(ems: ExpectedMeanSquares, errors: dict[str, ErrorTerm]) -> list[str]:
    notes = [
        ("Each F uses the error term whose expected mean square equals the term's when its effect is absent "
         "(unrestricted mixed model; 'tested against' names it).")
    ]
    if ems.method.startswith("unbalanced"):
        notes.append(
            f"Unbalanced data: expected mean squares of the type {ems.ss_type} sums of squares by Hartley's "
            "synthesis; the F tests of random terms and of terms tested against combinations are approximate."
        )
    synth = [name for name, e in errors.items() if e.synthesized and e.parts]
    if synth:
        notes.append(f"No single mean square serves as error term for {', '.join(synth)}: the denominator is a "
                     "combination of mean squares with Satterthwaite's df.")
    bad = [name for name, e in errors.items() if e.parts and (e.mean_sq is None or e.mean_sq <= 0)]
    if bad:
        notes.append(f"The synthesized error term of {', '.join(bad)} is not positive, so its F is undefined.")
    inexact = [name for name, e in errors.items() if e.parts and not e.exact]
    if inexact:
        notes.append(f"No combination of mean squares matches the null expectation of {', '.join(inexact)} "
                     "exactly; its F test is approximate.")
    none = [name for name, e in errors.items() if not e.parts]
    if none:
        notes.append(f"No mean square estimates the null expectation of {', '.join(none)}: no F test.")
    return notes


#: E(MS) of one complete layout labelled with each SS type (the three coincide there), by the "I" table.
_BY_TYPE: "weakref.WeakKeyDictionary[ExpectedMeanSquares, dict[str, ExpectedMeanSquares]]" = weakref.WeakKeyDictionary()


def _each_type(ems: ExpectedMeanSquares) -> dict[str, ExpectedMeanSquares]:
    """``ems`` as the table of each SS type; kept while ``ems`` lives (a balanced layout's E(MS) are reused)."""
    each = _BY_TYPE.get(ems)
    if each is None:
        each = _BY_TYPE[ems] = {k: replace(ems, ss_type=k) for k in SS_TYPES}
    return dict(each)


def mixed_tables(
    fit: CellFit, spec: ModelSpec, cell_levels: np.ndarray, columns: Sequence[str], zero_resid: bool,
    *, balanced_ems: ExpectedMeanSquares | None = None,
) -> tuple[dict[str, AnovaTable], dict[str, ExpectedMeanSquares]]:
    """The partition and E(MS) for each SS type; complete balanced layouts are computed once
    (the three types coincide there). ``balanced_ems`` are the exact-count E(MS) of a
    layout already known to be complete and balanced (:func:`.balanced.balanced_ems`)."""
    tables: dict[str, AnovaTable] = {}
    ems_by_type: dict[str, ExpectedMeanSquares] = {}
    if balanced_ems is not None or complete_balanced(fit, cell_levels, columns):
        ems = balanced_ems if balanced_ems is not None else expected_mean_squares(fit, spec, cell_levels, columns, "I")
        table, _, _ = mixed_partition(fit, spec, cell_levels, columns, "I", zero_resid, ems=ems)
        for k in SS_TYPES:
            tables[k] = replace(table, ss_type=k) if k != "I" else table
        return tables, _each_type(ems)
    indicators = random_indicators(fit, spec, cell_levels, columns)
    for k in SS_TYPES:
        ems_by_type[k] = expected_mean_squares(fit, spec, cell_levels, columns, k, indicators=indicators)
        tables[k] = mixed_partition(fit, spec, cell_levels, columns, k, zero_resid, ems=ems_by_type[k])[0]
    return tables, ems_by_type


def mixed_partition(
    fit: CellFit, spec: ModelSpec, cell_levels: np.ndarray, columns: Sequence[str], ss_type: str, zero_resid: bool,
    *, ems: ExpectedMeanSquares | None = None,
) -> tuple[AnovaTable, ExpectedMeanSquares, dict[str, ErrorTerm]]:
    """The partition with each F against its error term, the E(MS) table and the error terms."""
    if ems is None:
        ems = expected_mean_squares(fit, spec, cell_levels, columns, ss_type)
    names = [fit.name(t) for t in fit.terms]
    ms = {name: fit.ss[ss_type][t] / fit.df[ss_type][t] for name, t in zip(names, fit.terms)}
    ms[RESIDUAL] = fit.ss_resid / fit.df_resid
    dfs = {name: float(fit.df[ss_type][t]) for name, t in zip(names, fit.terms)}
    dfs[RESIDUAL] = float(fit.df_resid)
    errors = error_terms(ems, ms, dfs)
    tested: dict[str, tuple[float, float, float]] = {}  # row -> (F, df, error df)
    for name, t in zip(names, fit.terms):
        e = errors[name]
        if (e.parts and e.mean_sq is not None and e.mean_sq > 0 and e.df is not None
                and not (zero_resid and any(n == RESIDUAL for n, _ in e.parts))):
            tested[name] = (ms[name] / e.mean_sq, fit.df[ss_type][t], e.df)
    if tested:  # every p-value from one call (the same numbers as one call each)
        f_df = np.array(list(tested.values()), dtype=float).T
        pvalues = dict(zip(tested, f_sf(f_df[0], f_df[1], f_df[2]).tolist()))
    rows = []
    for name, t in zip(names, fit.terms):
        e = errors[name]
        F = p = None
        if name in tested:
            F, p = tested[name][0], pvalues[name]
        rows.append(TermRow(source=name, df=fit.df[ss_type][t], sum_sq=fit.ss[ss_type][t], mean_sq=ms[name],
                            statistic=F, pvalue=p, error_term=e.label, ms_error=e.mean_sq, df_error=e.df))
    rows.append(TermRow(source=RESIDUAL, df=fit.df_resid, sum_sq=fit.ss_resid, mean_sq=0.0 if zero_resid else ms[RESIDUAL]))
    rows.append(TermRow(source="total (corrected)", df=fit.n - 1, sum_sq=fit.ss_total))
    notes = _notes(ems, errors)
    if zero_resid:
        notes.append("F against the residual is undefined: the residual sum of squares is zero.")
    notes.extend(a.sentence() for a in fit.aliased)
    aliased = tuple((a.name, ", ".join(a.aliased_with)) for a in fit.aliased)
    table = AnovaTable(rows=tuple(rows), ss_type=ss_type, coding=CODING, notes=tuple(notes), aliased=aliased)
    return table, ems, errors
