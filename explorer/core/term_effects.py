"""Per-term effect sizes of a multi-factor partition: partial eta and omega squared.

For a term with sum of squares SS_t on df_t degrees of freedom, residual mean square
MS_E and N observations:

* partial eta squared  = SS_t / (SS_t + SS_E)
* partial omega squared = (SS_t - df_t MS_E) / (SS_t + (N - df_t) MS_E)

Partial omega squared is less biased; it is negative when the term's mean square is
below the residual mean square (reported as computed, with a note).

References
----------
Cohen, J. (1973). Eta-squared and partial eta-squared in fixed factor ANOVA designs.
Educational and Psychological Measurement 33, 107-112.
Olejnik, S. and Algina, J. (2003). Generalized eta and omega squared statistics.
Psychological Methods 8(4), 434-447 (Table 2, partial omega squared).
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from .tables import AnovaTable, html_table

__all__ = ["TermEffect", "TermEffects", "term_effects"]


@dataclass(frozen=True, kw_only=True)
class TermEffect:
    """Effect sizes of one term; ``None`` when undefined (see the table's notes)."""

    term: str
    df: int
    partial_eta_squared: float | None
    partial_omega_squared: float | None


@dataclass(frozen=True, kw_only=True)
class TermEffects:
    """Effect sizes of every model term, from the partition of type ``ss_type``."""

    rows: tuple[TermEffect, ...]
    ss_type: str
    notes: tuple[str, ...] = ()

    def __getitem__(self, term: str) -> TermEffect:
        for r in self.rows:
            if r.term == term:
                return r
        raise KeyError(f"no term {term!r}; terms are {[r.term for r in self.rows]}")

    def __len__(self) -> int:
        return len(self.rows)

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame(
            {
                "term": [r.term for r in self.rows],
                "df": [r.df for r in self.rows],
                "partial eta²": pd.array([r.partial_eta_squared for r in self.rows], dtype="Float64"),
                "partial omega²": pd.array([r.partial_omega_squared for r in self.rows], dtype="Float64"),
            }
        )

    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), f"Effect size of each term (type {self.ss_type} sums of squares)", self.notes)


def term_effects(table: AnovaTable, terms: tuple[str, ...], n: int) -> TermEffects:
    """Partial eta and omega squared of ``terms`` from a partition with a ``residual`` row."""
    resid = table.row("residual")
    ss_e, ms_e = resid.sum_sq, resid.mean_sq
    rows, notes = [], []
    for name in terms:
        r = table.row(name)
        denom_eta = r.sum_sq + ss_e
        eta = r.sum_sq / denom_eta if denom_eta > 0 else None
        omega = None
        if ms_e is not None and ms_e > 0:
            omega = (r.sum_sq - r.df * ms_e) / (r.sum_sq + (n - r.df) * ms_e)
            if omega < 0:
                notes.append(
                    f"Partial omega² of {name!r} is negative: its mean square is below the residual mean square "
                    "(no effect detectable); read it as zero."
                )
        rows.append(TermEffect(term=name, df=r.df, partial_eta_squared=eta, partial_omega_squared=omega))
    if ms_e is None or ms_e <= 0:
        notes.append("Partial omega² is undefined: the residual mean square is zero.")
    return TermEffects(rows=tuple(rows), ss_type=table.ss_type, notes=tuple(notes))
