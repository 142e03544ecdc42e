"""Regroup scan: merge each pair of levels, or move each row to each other level.

Two questions engineers are asked about a grouping: *what if these two levels are
really one?* (same supplier, same batch of material) and *what if this unit was logged
under the wrong level?* Both change only two groups' sufficient statistics, so every
alternative is a closed-form update (the pooled-group formula of Chan, Golub and
LeVeque 1983 for a merge; Welford's downdate and update for a move), evaluated in one
vectorised pass. Alternatives that flip the decision are listed first.

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). The American Statistician 37(3),
242-247 (pooling group statistics).
Welford, B. P. (1962). Technometrics 4(3), 419-420.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.disclosure import Disclosure
from ..engine.errors import ExplorerError
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import result_frame, show_p
from ..rendering import html_repr
from .alternatives import (
    AlternativeFits,
    leave_one_out,
)
from .case_deletion import nullable
from .chosen_test import STATISTIC_NAMES, ChosenTest
from .scan_target import scan_target
from .study_like import StudyLike, VerdictLike

__all__ = ["RegroupScan", "regroup_scan"]


@dataclass(frozen=True, kw_only=True, eq=False)
class RegroupScan:
    """The decision's test after each merge of two levels and each move of one row to another level.

    ``factor`` is the factor regrouped, ``term`` the term whose decision is scored and
    ``test`` the overall test. Merges: ``merge_levels[i]`` pairs with ``merge_fits``
    entry ``i``. Moves: row ``move_rows[j]`` from ``move_from[j]`` to ``move_to[j]``
    pairs with ``move_fits`` entry ``j``.
    """

    factor: str
    alpha: float
    base_pvalue: float | None
    base_significant: bool
    merge_levels: tuple[tuple[str, str], ...]
    merge_fits: AlternativeFits
    move_rows: np.ndarray
    move_from: np.ndarray
    move_to: np.ndarray
    move_fits: AlternativeFits
    term: str = ""
    test: str = "classic"
    disclosure: Disclosure | None = None
    notes: tuple[str, ...] = field(default=())

    def _flips(self, fits: AlternativeFits) -> np.ndarray:
        return fits.significant(self.alpha) != self.base_significant

    @property
    def merge_flips(self) -> list[tuple[str, str]]:
        return [m for m, f in zip(self.merge_levels, self._flips(self.merge_fits)) if f]

    @property
    def move_flips(self) -> list[tuple[object, str, str]]:
        idx = np.flatnonzero(self._flips(self.move_fits))
        return list(zip(self.move_rows[idx].tolist(), self.move_from[idx].tolist(), self.move_to[idx].tolist()))

    def _frame(self, fits: AlternativeFits, kind: str, change: list[str], row: list, src: list, dst: list) -> pd.DataFrame:
        flips = self._flips(fits)
        frame = pd.DataFrame(
            {
                "kind": kind,
                "change": change,
                "row": pd.array(row, dtype=object),
                "from": src,
                "to": dst,
                STATISTIC_NAMES[self.test]: nullable(fits.statistic),
                "p-value": nullable(fits.pvalue),
                "significant": fits.significant(self.alpha),
                "flips decision": flips,
                "eta squared": nullable(fits.eta_squared),
                "df (term)": fits.df_between,
                "df (residual)": fits.df_within,
                "note": fits.notes(),
            }
        )
        return frame

    def merges_frame(self) -> pd.DataFrame:
        ch = [f"merge {a} + {b}" for a, b in self.merge_levels]
        f = self._frame(self.merge_fits, "merge", ch, [None] * len(ch),
                        [a for a, _ in self.merge_levels], [b for _, b in self.merge_levels])
        return f.sort_values(["flips decision", "p-value"], ascending=[False, not self.base_significant]).reset_index(drop=True)

    def moves_frame(self) -> pd.DataFrame:
        ch = [f"move row {r} {a} -> {b}" for r, a, b in zip(self.move_rows.tolist(), self.move_from, self.move_to)]
        f = self._frame(self.move_fits, "move", ch, self.move_rows.tolist(), list(self.move_from), list(self.move_to))
        return f.sort_values(["flips decision", "p-value"], ascending=[False, not self.base_significant]).reset_index(drop=True)

    def to_frame(self) -> pd.DataFrame:
        """Merges then moves, each with the flips first (then p-values moving furthest from the decision)."""
        return result_frame(pd.concat([self.merges_frame(), self.moves_frame()], ignore_index=True))

    @html_repr
    def _repr_html_(self) -> str:
        merges = self.merges_frame()
        moves = self.moves_frame()
        moves = moves[moves["flips decision"]].head(20)
        cap1 = (f"Merging two levels of {self.factor} ({len(merges)} pairs; decision on {self.term}, p now "
                f"{show_p(self.base_pvalue)}): {len(self.merge_flips)} flip the decision at alpha {self.alpha:g}")
        cap2 = f"Moving one row to another level: {len(self.move_flips)} of {self.move_rows.size} moves flip the decision"
        notes = self.notes + ((self.disclosure.sentence_then(),) if self.disclosure else ())
        return ("<div>" + html_table(merges, cap1) + html_table(moves, cap2, notes) + "</div>")


def regroup_scan(
    study: StudyLike, *, factor: str | None = None, term: str | None = None, alpha: float | None = None,
    moves: bool = True, record: bool = True,
) -> RegroupScan:
    """Every merge of two levels and every move of one row to another level of a factor of ``study``.

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    factor : str, optional
        The factor to regroup in factorial and block designs (default the first).
    term : str, optional
        The term whose decision is scored (default: the term of ``study.decision``).
    alpha : float, optional
        Level of the decisions (default the study's).
    moves : bool, default True
        Whether to score the ``n (k - 1)`` moves of one row as well as the merges.
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    RegroupScan
        The decision under each merge and each move. One-factor studies use closed-form
        updates of the group statistics (rank sums for Kruskal-Wallis, shared
        permutations for the permutation F); factorial and block designs cell fits.

    References
    ----------
    Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
    sample variance. The American Statistician 37(3), 242-247 (pooling group statistics).

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle")
    >>> scan = ex.stats.regroup_scan(study, moves=False)
    >>> scan.merge_levels, scan.merge_fits.pvalue.round(4).tolist()
    ((('A', 'B'), ('A', 'C'), ('B', 'C')), [0.0444, 0.0, 0.2797])
    """
    if getattr(study.spec, "covariates", ()):
        raise ExplorerError(
            "the regroup scan scores merges and moves from cell means, which do not carry a covariate; with covariates "
            "try a merge as an edit (study.merge_levels, then undo) or list plausible merges in the robustness sweep "
            "(study.robustness_sweep(merges=[...]): each is refitted with the covariates)")
    target = scan_target(study, "regroup scan", term)
    name, verdict, data = target.term, target.verdict, target.oneway
    if data is None:
        return _factorial_regroup(study, factor, name, verdict, alpha, moves, record)
    if factor is not None and factor != data.factor:
        raise ExplorerError(f"factor {factor!r} is not the factor of this one-factor study ({data.factor!r})")
    spec = study.spec
    a = alpha_or(alpha, data.alpha)
    chosen = ChosenTest(data, spec, a)
    gs, k = data.stats, data.k
    labels = data.labels
    # Merges: the pooled group takes the first level's place, the second is emptied.
    pairs = [(i, j) for i in range(k) for j in range(i + 1, k)]
    P = len(pairs)
    n_m = np.repeat(gs.n[None, :].astype(float), P, axis=0)
    mean_m = np.repeat(gs.mean[None, :], P, axis=0)
    m2_m = np.repeat(gs.m2[None, :], P, axis=0)
    for r, (i, j) in enumerate(pairs):
        pooled = gs.merged([i, j], f"{labels[i]}+{labels[j]}")
        n_m[r, i], mean_m[r, i], m2_m[r, i] = pooled.n[i], pooled.mean[i], pooled.m2[i]
        n_m[r, j], mean_m[r, j], m2_m[r, j] = 0.0, 0.0, 0.0
    merge_fits = chosen.merges(n_m, mean_m, m2_m, pairs)
    # Moves: row i leaves its group g (downdate) and joins h (update).
    rows_l, src_l, dst_l = [], [], []
    n_parts, mean_parts, m2_parts = [], [], []
    if moves and k >= 2:
        down_n, down_mean, down_m2 = leave_one_out(data)
        g = data.codes
        all_rows = np.arange(data.n)
        nb = gs.n.astype(float)
        for h in range(k):
            idx = all_rows[g != h]
            m = idx.size
            if m == 0:
                continue
            N = np.repeat(nb[None, :], m, axis=0)
            M = np.repeat(gs.mean[None, :], m, axis=0)
            S = np.repeat(gs.m2[None, :], m, axis=0)
            gi = g[idx]
            N[np.arange(m), gi] = down_n[idx]
            M[np.arange(m), gi] = down_mean[idx]
            S[np.arange(m), gi] = down_m2[idx]
            d = data.y[idx] - gs.mean[h]
            N[:, h] = nb[h] + 1
            M[:, h] = gs.mean[h] + d / (nb[h] + 1)
            S[:, h] = gs.m2[h] + d * d * (nb[h] / (nb[h] + 1))
            n_parts.append(N)
            mean_parts.append(M)
            m2_parts.append(S)
            rows_l.append(idx)
            src_l.append(gi)
            dst_l.append(np.full(m, h))
    if n_parts:
        ridx = np.concatenate(rows_l)
        src = np.concatenate(src_l)
        dst = np.concatenate(dst_l)
        order = np.lexsort((dst, ridx))
        ridx, src, dst = ridx[order], src[order], dst[order]
        move_fits = chosen.moves(np.vstack(n_parts)[order], np.vstack(mean_parts)[order], np.vstack(m2_parts)[order],
                                 ridx, dst)
    else:
        move_fits = chosen.moves(np.zeros((0, k)), np.zeros((0, k)), np.zeros((0, k)), np.zeros(0, dtype=np.int64),
                                 np.zeros(0, dtype=np.int64))
        ridx = src = dst = np.zeros(0, dtype=np.int64)
    lab = np.asarray(labels, dtype=object)
    base_p = verdict.pvalue
    count = P + int(ridx.size)
    notes = [("A merge pools two levels into one (one df fewer for the term); a move puts one row under "
             "another level (a unit logged under the wrong level)."), f"Test: {chosen.how}."]
    if spec.test == "permutation":
        notes.append("Each merge and move is a permutation test of that grouping, all from the same orderings.")
    if record:
        study.record_search("regroup scan", count)
    return RegroupScan(
        factor=data.factor, alpha=a, base_pvalue=base_p, base_significant=bool(base_p is not None and base_p < a),
        merge_levels=tuple((labels[i], labels[j]) for i, j in pairs), merge_fits=merge_fits,
        move_rows=data.row_ids[ridx], move_from=lab[src], move_to=lab[dst], move_fits=move_fits,
        term=name, test=spec.test, disclosure=study.disclosure if record else None,
        notes=tuple(notes),
    )


def _take(f: AlternativeFits, order: np.ndarray) -> AlternativeFits:
    return AlternativeFits(**{name: getattr(f, name)[order] for name in AlternativeFits.__dataclass_fields__})



def _factorial_regroup(study: StudyLike, factor: str | None, term: str, verdict: VerdictLike, alpha: float | None,
                       moves: bool, record: bool) -> RegroupScan:
    from .cell_regroup import cell_regroup

    spec = study.spec
    a = alpha_or(alpha, spec.alpha)
    found = cell_regroup(study, factor, term=term, moves=moves)
    base_p = verdict.pvalue
    if record:
        study.record_search("regroup scan", len(found.pairs) + int(found.move_rows.size))
    return RegroupScan(
        factor=found.factor, alpha=a, base_pvalue=base_p, base_significant=bool(base_p is not None and base_p < a),
        merge_levels=found.pairs, merge_fits=found.merge_fits, move_rows=found.move_rows, move_from=found.move_from,
        move_to=found.move_to, move_fits=found.move_fits, term=term, test="classic",
        disclosure=study.disclosure if record else None,
        notes=found.notes,
    )
