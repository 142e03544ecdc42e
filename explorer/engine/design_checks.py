"""Checks of a crossed design before it is fitted, with messages that say what to do.

A factorial analysis can fail quietly: an empty cell makes an interaction partly
inestimable, one observation per cell leaves no residual, a factor nested in another
cannot be separated from it. These checks find such problems from the cell layout
(no rows needed) and either raise :class:`DesignError` naming the cells, terms and
remedies, or return notes for the results.

References
----------
Searle, S. R. (1987). Linear Models for Unbalanced Data, ch. 4 and 5 (empty cells,
estimability, connectedness).
Montgomery, D. C. Design and Analysis of Experiments, ch. 5 (one observation per
cell) and ch. 14 (nested designs).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from itertools import combinations

import numpy as np

from .cells import CellLayout
from .design import model_terms, term_columns, term_name
from .errors import DesignError, preview
from .spec import ModelSpec

__all__ = ["check_design"]


def _role(column: str, spec: ModelSpec) -> str:
    return "block column" if column in spec.blocks else "factor"


def _check_levels(layout: CellLayout, spec: ModelSpec) -> list[str]:
    notes = []
    for col, lv in zip(layout.columns, layout.levels):
        if len(lv) < 2:
            raise DesignError(
                f"{_role(col, spec)} {col!r} has observations at one level only ({lv[0]!r}) in this view, "
                f"so it has no effect to estimate; restore rows, undo a merge, or leave {col!r} out of the model"
            )
        absent = layout.absent_levels.get(col)
        if absent:
            notes.append(f"Level(s) {preview(list(absent))} of {col!r} have no observations in this view and are left out.")
    return notes


def _declared(a: str, b: str, spec: ModelSpec) -> bool:
    """True when the spec says one of the two columns is nested in the other (directly or through others)."""
    nesting = spec.nesting
    return b in term_columns((a,), nesting) or a in term_columns((b,), nesting)


def _check_nesting(layout: CellLayout, spec: ModelSpec) -> None:
    """Raise when one grouping column is nested in (or confounded with) another without being declared so."""
    if layout.n_cells == math.prod(layout.n_levels):
        return  # every combination observed and every column at two or more levels: each level meets several
    for i, j in combinations(range(len(layout.columns)), 2):
        a, b = layout.columns[i], layout.columns[j]
        if _declared(a, b, spec):
            continue
        nb = max(len(layout.levels[j]), 1)
        keys = np.unique(layout.cell_levels[:, i] * nb + layout.cell_levels[:, j])  # sorted as the (a, b) pairs
        pairs = np.stack(np.divmod(keys, nb), axis=1)
        per_b = np.bincount(pairs[:, 1], minlength=len(layout.levels[j]))
        per_a = np.bincount(pairs[:, 0], minlength=len(layout.levels[i]))
        b_in_a = bool(np.all(per_b == 1))
        a_in_b = bool(np.all(per_a == 1))
        if not (b_in_a or a_in_b):
            continue
        examples = [f"{layout.levels[j][bl]!r} with {layout.levels[i][al]!r}" for al, bl in pairs[:4].tolist()]
        if b_in_a and a_in_b:
            raise DesignError(
                f"{a!r} and {b!r} group the rows the same way (each level of one occurs with exactly one level "
                f"of the other: {', '.join(examples)}, ...), so their effects cannot be separated; "
                "keep only one of them in the model"
            )
        inner, outer = (b, a) if b_in_a else (a, b)
        raise DesignError(
            f"{inner!r} is nested in {outer!r}: each level of {inner!r} occurs under one level of {outer!r} only "
            f"({', '.join(examples)}, ...). A crossed analysis cannot separate the two; analyse "
            f"factors=[{outer!r}] (the {inner!r}-to-{inner!r} variation then sits in the residual) or "
            f"factors=[{inner!r}] alone, or declare it nested=" + "{" + f"{inner!r}: {outer!r}" + "}"
            + (f" (or subject={inner!r} when it names the unit measured repeatedly)" if inner not in spec.factors else "")
        )


def _check_subjects(layout: CellLayout, spec: ModelSpec) -> list[str]:
    """Between factors constant within each subject; within factors varying within subjects."""
    if spec.subject is None:
        return []
    j = layout.columns.index(spec.subject)
    for f in spec.between:
        i = layout.columns.index(f)
        pairs = np.unique(layout.cell_levels[:, [j, i]], axis=0)
        per_subject = np.bincount(pairs[:, 0], minlength=layout.n_levels[j])
        bad = np.flatnonzero(per_subject > 1)
        if bad.size:
            who = layout.levels[j][int(bad[0])]
            seen = [layout.levels[i][lv] for lv in pairs[pairs[:, 0] == bad[0], 1].tolist()]
            raise DesignError(
                f"{f!r} changes within subject {who!r} (levels {preview(seen)}): a factor that varies within "
                f"subjects belongs in within=, or the subject labels are reused across {f!r} levels "
                "(give each subject a unique label)"
            )
    notes = []
    for w in spec.within:
        i = layout.columns.index(w)
        pairs = np.unique(layout.cell_levels[:, [j, i]], axis=0)
        per_subject = np.bincount(pairs[:, 0], minlength=layout.n_levels[j])
        if np.all(per_subject <= 1):
            raise DesignError(
                f"within factor {w!r} does not vary within any subject (each subject is seen at one level): it is "
                "a between-subject factor; leave it out of within="
            )
        if np.any(per_subject < layout.n_levels[i]):
            notes.append(f"Some subjects are not observed at every level of {w!r}: the within-subject tests use "
                         "the unbalanced-data expected mean squares, and sphericity cannot be checked.")
    return notes


def _check_empty_cells(layout: CellLayout, spec: ModelSpec) -> list[str]:
    nested = set(spec.nesting)
    factors = [f for f in spec.factors if f not in nested]
    if len(factors) < 2 and spec.subject is None and not nested:
        factors = list(spec.factors)
    missing = layout.missing_combinations(factors) if factors else []
    if not missing:
        return []
    shown = preview([", ".join(f"{f}={lv}" for f, lv in zip(factors, combo)) for combo in missing], 6)
    interactions = [t for t in model_terms(spec) if len(t) > 1 and not (set(t) & nested) and set(t) <= set(factors)]
    bad = [term_name(t) for t in interactions if layout.missing_combinations(list(t))]
    if interactions and not bad:
        return []  # a fraction whose interaction terms are all complete: the layout notes describe it
    if bad:
        raise DesignError(
            f"empty cells: no observations at {shown}. With empty cells the interaction term(s) "
            f"{', '.join(bad)} cannot be estimated in full and the marginal means of the levels involved are "
            "undefined. Fit the additive model (interactions=False), merge a sparse level into a neighbouring one "
            "(merge_levels), or restore left-out rows"
        )
    return [
        (f"Empty cells ({shown}): the additive model predicts them from the main effects; "
        "its marginal means assume there is no interaction.")
    ]


def _n_params(layout: CellLayout, spec: ModelSpec) -> int:
    sizes = dict(zip(layout.columns, layout.n_levels))
    return 1 + sum(int(np.prod([sizes[c] - 1 for c in t])) for t in model_terms(spec))


def _check_replication(layout: CellLayout, cell_n: np.ndarray, spec: ModelSpec) -> list[str]:
    if not np.all(cell_n == 1) or spec.is_mixed or spec.terms is not None:
        return []  # the fit counts the df of explicit, nested and subject terms itself
    n = int(cell_n.sum())
    cols = " and ".join(repr(c) for c in layout.columns)
    if n - _n_params(layout, spec) < 1:
        raise DesignError(
            f"every cell (combination of {cols}) has one observation, so no residual degrees of freedom remain "
            "and the interaction cannot be tested; fit the additive model (interactions=False), whose residual "
            "is the interaction (assumed absent)"
        )
    if spec.blocks:
        return [
            ("One observation per cell: the residual is the block-by-treatment variation, assumed to be "
            "random error (the usual randomized complete block assumption).")
        ]
    if len(spec.factors) > 1 and not spec.interactions:
        return [("One observation per cell: the interaction cannot be tested; the additive model's residual "
                "contains any interaction (assumed absent).")]
    return ["One observation per cell: the highest-order interaction is not in the model and serves as the residual."]


def _dataset_notes(spec: ModelSpec, dataset_notes: Sequence[str]) -> list[str]:
    """Notes the dataset made about the model's columns (e.g. a numeric column used as a factor)."""
    return [note for note in dataset_notes if any(f"{c!r}" in note for c in spec.columns)]


def check_design(
    layout: CellLayout, cell_n: np.ndarray, spec: ModelSpec, dataset_notes: Sequence[str] = ()
) -> tuple[str, ...]:
    """Check a crossed design before fitting; return notes or raise :class:`DesignError`.

    Checks, in order: every column has two or more observed levels; no column is
    nested in or confounded with another; no empty cells when interactions are in the
    model (which cells; which terms become inestimable; remedies); one observation per
    cell (no residual for a saturated model; offer the additive model); and passes on
    the dataset's notes about the model's columns (a numeric column used as a factor).
    """
    notes = _dataset_notes(spec, dataset_notes)
    notes += _check_levels(layout, spec)
    notes += _check_subjects(layout, spec)
    _check_nesting(layout, spec)
    notes += _check_empty_cells(layout, spec)
    notes += _check_replication(layout, cell_n, spec)
    return tuple(notes)
