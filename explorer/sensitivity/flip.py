"""Flip finder: the fewest rows whose removal changes the decision.

Works in both directions: if the decision's test currently rejects at alpha, it looks
for the smallest set of rows whose removal makes it not reject, and the other way
round. The decision scored is the study's (its term and chosen overall test) unless the
caller names another term; on request it does the same for one pairwise decision
instead of the overall one, read by the pairwise comparison that follows the chosen test
(:data:`PAIRWISE_FOR_TEST`: Tukey-Kramer after the classic F, Games-Howell after Welch's
and Brown-Forsythe's, Dunn's rank test with Holm's adjustment after Kruskal-Wallis;
Tukey-Kramer after the permutation F, which has no pairwise counterpart here, and the
result says so), at the same alpha.

Two searches:

* **exact**: every set of 1, 2, ... rows, as long as the number of sets stays within
  ``budget`` (sum of C(n, s) over the sizes tried). Any set it returns is a smallest
  one; when it finds none, no set of that many rows or fewer flips the decision.
* **greedy**: remove the row that moves the test furthest toward the other decision,
  re-score every remaining row, repeat (at most ``max_steps`` removals). Fast, but a
  set it finds need not be the smallest (see the tests for a documented case).

Sets are scored on group sufficient statistics (removal of a set is a closed-form
downdate; Kruskal-Wallis by exact rank downdates); the permutation F scores sets against
the permutation critical value of all rows (stated in the notes). The p-values reported
for each step, and whether the decision flipped, come from a fresh analysis of the
remaining rows under the study's test, as the decision would be read after leaving
those rows out.

References
----------
Broderick, T., Giordano, R. and Meager, R. (2020). An automatic finite-sample
robustness metric: when can dropping a little data make a big difference?
arXiv:2011.14999 (the question; the search here is exhaustive or greedy, not their
linear approximation).
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import special

from ..engine.dataset import RowId
from ..engine.disclosure import Disclosure
from ..engine.errors import DesignError, ExplorerError, closest_names
from ..engine.groupstats import group_stats
from ..engine.spec import alpha_or
from ..engine.studentized_range import srange_ppf, srange_sf
from ..engine.tables import html_table
from ..formatting import p_equals, result_frame, show_p, show_stat
from ..inference.comparisons import games_howell, tukey
from ..inference.rank_followups import dunn, dunn_holm
from ..rendering import html_repr
from .alternatives import OnewayInput, evaluate_alternatives
from .chosen_test import ChosenTest
from .scan_target import scan_target
from .study_like import StudyLike, VerdictLike

__all__ = ["PAIRWISE_FOR_TEST", "FlipSearch", "flip_finder"]

#: The pairwise comparison that scores a pairwise flip under each overall test.
PAIRWISE_FOR_TEST = {"classic": "Tukey-Kramer", "welch": "Games-Howell", "brown-forsythe": "Games-Howell",
                     "kruskal": "Dunn (Holm)", "permutation": "Tukey-Kramer"}
_PAIRWISE_WHY = {
    "classic": "Tukey-Kramer, the pairwise comparison of the classic F (pooled residual mean square)",
    "welch": "Games-Howell, the pairwise comparison that, like Welch's F, gives each level its own variance",
    "brown-forsythe": ("Games-Howell, the pairwise comparison that, like Brown-Forsythe's F*, gives each level its "
                       "own variance"),
    "kruskal": ("Dunn's rank comparison with Holm's adjustment over every pair, the follow-up of Kruskal-Wallis "
                "(mid-ranks of the kept rows)"),
    "permutation": ("Tukey-Kramer: the permutation F has no pairwise counterpart in the kit, so the pair is read by "
                    "the studentized range on the pooled residual mean square"),
}

_CHUNK = 50_000


def _q_crit(alpha: float, k: int, df: np.ndarray) -> np.ndarray:
    """Upper alpha points of the studentized range for each df (the project's fast quadrature)."""
    return np.asarray(srange_ppf(1 - alpha, k, np.asarray(df, dtype=float)), dtype=float).reshape(-1)


@dataclass(frozen=True, kw_only=True, eq=False)
class FlipSearch:
    """The smallest set of rows found whose removal flips the decision.

    ``rows`` are in removal order; ``pvalues[i]`` is the p-value after removing
    ``rows[: i + 1]`` (``base_pvalue`` before any). ``found`` is False when no set
    within the search's reach flips it. ``method`` is 'exact' or 'greedy';
    ``pairwise_method`` names the comparison that scored a pairwise decision (empty for
    the overall one);
    ``exact_up_to`` is the largest set size the exhaustive search covered completely
    (0 when it did not run), so no smaller flipping set exists when the exact search
    found none up to that size.
    """

    target: str
    alpha: float
    base_significant: bool
    base_pvalue: float | None
    found: bool
    method: str
    rows: tuple
    groups: tuple[str, ...]
    pvalues: tuple[float | None, ...]
    exact_up_to: int
    sets_examined: int
    flipping_sets_at_size: int | None
    term: str = ""
    test: str = "classic"
    pairwise_method: str = ""
    disclosure: Disclosure | None = None
    notes: tuple[str, ...] = field(default=())

    @property
    def size(self) -> int | None:
        return len(self.rows) if self.found else None

    def to_frame(self) -> pd.DataFrame:
        """One line per removal step: row, its group, p-value after the step, decision."""
        p = np.array([np.nan if v is None else v for v in self.pvalues], dtype=float)
        return result_frame(
            {
                "step": np.arange(1, len(self.rows) + 1),
                "row": list(self.rows),
                "group": list(self.groups),
                "p-value after removal": pd.array([None if not np.isfinite(v) else v for v in p], dtype="Float64"),
                "significant": [bool(np.isfinite(v) and v < self.alpha) for v in p],
            }
        )

    @html_repr
    def _repr_html_(self) -> str:
        wanted = "not significant" if self.base_significant else "significant"
        if self.found:
            head = (f"{self.target}: removing {len(self.rows)} row(s) makes the decision {wanted} at alpha "
                    f"{self.alpha:g} ({self.method} search; p with all rows = {show_p(self.base_pvalue)})")
        else:
            head = f"{self.target}: no set of rows within the search's reach makes the decision {wanted}"
        notes = self.notes + ((self.disclosure.sentence_then(),) if self.disclosure else ())
        return "<div>" + html_table(self.to_frame(), head, notes) + "</div>"


class _Scorer:
    """Margin of the decision for row sets: > 1 means 'significant'.

    The overall decision uses the study's chosen test (statistic over its critical value
    at alpha); a pairwise decision uses Tukey-Kramer's studentized range.
    """

    def __init__(self, data: OnewayInput, alpha: float, pair: tuple[int, int] | None, chosen: ChosenTest) -> None:
        self.data, self.alpha, self.pair, self.chosen = data, alpha, pair, chosen
        self.pairwise = PAIRWISE_FOR_TEST[chosen.test]
        self._fresh: dict[bytes, float | None] = {}  # fresh p-values by the rows left out (a search asks twice)

    def margin_of(self, sets: np.ndarray, keep: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """(margin, defined) after removing each row set (``(m, s)`` positions) from the kept rows."""
        n, mean, m2 = _removal_stats(self.data, sets, keep)
        if self.pair is None:
            fits = self.chosen.removal(sets, n, mean, m2, keep)
            ok = fits.status == 0
            out = np.full(ok.shape, np.nan)
            crit = self.chosen.critical(fits, self.alpha)
            out[ok] = fits.statistic[ok] / crit[ok]
            return out, ok
        if self.pairwise == "Games-Howell":
            return self._games_howell(n, mean, m2)
        if self.pairwise == "Dunn (Holm)":
            return self._dunn(sets, keep)
        fits = evaluate_alternatives(n, mean, m2, self.data.scale())
        ok = fits.status == 0
        out = np.full(ok.shape, np.nan)
        a, b = self.pair
        ok &= (n[:, a] > 0) & (n[:, b] > 0)
        if not ok.any():
            return out, ok
        msw = fits.ss_within[ok] / fits.df_within[ok]
        q = np.abs(mean[ok, a] - mean[ok, b]) / np.sqrt(msw / 2 * (1 / n[ok, a] + 1 / n[ok, b]))
        lv, dfw = fits.levels[ok], fits.df_within[ok]
        crit = np.empty(q.size)
        for kk in np.unique(lv):
            sel = lv == kk
            dfs, inv = np.unique(dfw[sel], return_inverse=True)
            crit[sel] = _q_crit(self.alpha, int(kk), dfs)[inv]
        out[ok] = q / crit
        return out, ok

    def _log_margin(self, p: np.ndarray, ok: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """log(p) / log(alpha): above 1 exactly when p < alpha (inf at p = 0)."""
        out = np.full(ok.shape, np.nan)
        ok = ok & np.isfinite(p)
        with np.errstate(divide="ignore"):
            out[ok] = np.log(p[ok]) / math.log(self.alpha)
        return out, ok

    def _games_howell(self, n: np.ndarray, mean: np.ndarray, m2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Games-Howell p of the pair after each removal (own variances, Welch df, studentized range over the
        levels left), as a margin."""
        a, b = self.pair  # type: ignore[misc]
        na, nb = n[:, a], n[:, b]
        ok = (na > 1) & (nb > 1)
        p = np.full(na.shape, np.nan)
        with np.errstate(divide="ignore", invalid="ignore"):
            va, vb = m2[:, a] / (na - 1) / na, m2[:, b] / (nb - 1) / nb
            se = np.sqrt(va + vb)
            df = (va + vb) ** 2 / (va * va / (na - 1) + vb * vb / (nb - 1))
            q = math.sqrt(2.0) * np.abs(mean[:, a] - mean[:, b]) / se
        ok &= (se > 0) & np.isfinite(q) & np.isfinite(df)
        levels = (n > 0).sum(axis=1)
        for kk in np.unique(levels[ok]):
            sel = ok & (levels == kk)
            p[sel] = np.asarray(srange_sf(q[sel], int(kk), df[sel]), dtype=float).reshape(-1)
        return self._log_margin(p, ok)

    def _dunn(self, sets: np.ndarray, keep: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        """Dunn's Holm-adjusted p of the pair after each removal (mid-ranks re-read by exact downdates), as a
        margin."""
        n, rank_sum, tie = self.chosen.rank_parts(sets, keep)
        adjusted = dunn_holm(n, rank_sum, tie)
        a, b = sorted(self.pair)  # type: ignore[arg-type]
        k = n.shape[1]
        col = a * k - a * (a + 1) // 2 + (b - a - 1)  # position of (a, b) among the upper-triangle pairs
        p = adjusted[:, col]
        return self._log_margin(p, np.isfinite(p))

    def pvalue(self, keep: np.ndarray) -> float | None:
        """p-value of the decision on the kept rows, computed afresh (the overall test, or the pairwise
        comparison of :data:`PAIRWISE_FOR_TEST` from its own function in :mod:`explorer.inference`)."""
        key = np.flatnonzero(~keep).tobytes()
        if key not in self._fresh:
            self._fresh[key] = self._fresh_pvalue(keep)
        return self._fresh[key]

    def _fresh_pvalue(self, keep: np.ndarray) -> float | None:
        if self.pair is None:
            return self.chosen.refit(keep)
        res = self.chosen.refit_results(keep)
        if res is None:
            return None
        labels = tuple(self.data.labels[i] for i in self.pair)
        if any(lv not in res.groups.labels for lv in labels):
            return None
        try:
            if self.pairwise == "Dunn (Holm)":
                ranked = dunn(res)
                first, second, pvals = ranked.first, ranked.second, np.asarray(ranked.adjusted, dtype=float)
            else:
                table = games_howell(res) if self.pairwise == "Games-Howell" else tukey(res)
                first, second, pvals = table.first, table.second, np.asarray(table.pvalue, dtype=float)
        except DesignError:
            return None
        for u, v, p in zip(first, second, pvals):
            if {u, v} == set(labels):
                return float(p) if np.isfinite(p) else None
        return None

    def flipped(self, keep: np.ndarray, want_sig: bool) -> tuple[bool, float | None]:
        """Whether the decision on the kept rows is the wanted one (fresh analysis), and its p-value."""
        p = self.pvalue(keep)
        return (p is not None and ((p < self.alpha) if want_sig else (p >= self.alpha))), p


def _removal_stats(data: OnewayInput, sets: np.ndarray, keep_mask: np.ndarray | None = None):  # type: ignore[no-untyped-def]
    """Group statistics after removing each row set (``(m, s)`` positions): closed-form downdates."""
    gs = data.stats if keep_mask is None else group_stats(data.y[keep_mask], data.codes[keep_mask], data.labels, data.offset)
    m, _s = sets.shape
    k = data.k
    g = data.codes[sets]
    d = data.y[sets] - gs.mean[g]
    key = (np.arange(m)[:, None] * k + g).ravel()
    r = np.bincount(key, minlength=m * k).reshape(m, k).astype(float)
    sr = np.bincount(key, weights=d.ravel(), minlength=m * k).reshape(m, k)
    qr = np.bincount(key, weights=(d * d).ravel(), minlength=m * k).reshape(m, k)
    n_new = gs.n[None, :] - r
    with np.errstate(divide="ignore", invalid="ignore"):
        mean_new = np.where(n_new > 0, gs.mean[None, :] - sr / n_new, 0.0)
        m2_new = np.where(n_new > 1, (gs.m2[None, :] - qr) - sr * sr / n_new, 0.0)
    return n_new, mean_new, np.maximum(m2_new, 0.0)


def _exact(scorer: _Scorer, want_sig: bool, budget: int, max_size: int) -> tuple[np.ndarray | None, int, int, int]:
    """Smallest flipping set by exhaustive search; returns (set, covered size, sets examined, count at size)."""
    d = scorer.data
    examined = 0
    covered = 0
    for s in range(1, max_size + 1):
        total = math.comb(d.n, s)
        if examined + total > budget:
            break
        best, best_m, count = None, None, 0
        combos = itertools.combinations(range(d.n), s)
        while True:
            chunk = np.fromiter(itertools.chain.from_iterable(itertools.islice(combos, _CHUNK)), dtype=np.int64)
            if chunk.size == 0:
                break
            sets = chunk.reshape(-1, s)
            margin, ok = scorer.margin_of(sets)
            hit = ok & ((margin > 1) if want_sig else (margin <= 1))
            count += int(hit.sum())
            if hit.any():
                idx = np.flatnonzero(hit)
                j = idx[np.argmax(margin[idx])] if want_sig else idx[np.argmin(margin[idx])]
                if best is None or (margin[j] > best_m if want_sig else margin[j] < best_m):
                    best, best_m = sets[j], margin[j]
        examined += total
        covered = s
        if best is not None:
            return best, covered, examined, count
    return None, covered, examined, 0


def _greedy(scorer: _Scorer, want_sig: bool, max_steps: int) -> tuple[list[int], bool, int]:
    """Remove the row that moves the margin most toward the other decision, re-scoring each time."""
    d = scorer.data
    keep = np.ones(d.n, dtype=bool)
    chosen: list[int] = []
    examined = 0
    for _ in range(max_steps):
        cand = np.flatnonzero(keep)
        margin, ok = scorer.margin_of(cand[:, None], keep)
        examined += cand.size
        if not ok.any():
            break
        score = np.where(ok, margin if want_sig else -margin, -np.inf)
        j = int(cand[np.argmax(score)])
        chosen.append(j)
        keep[j] = False
        mj = margin[np.argmax(score)]
        if ((mj > 1) if want_sig else (mj <= 1)) and scorer.flipped(keep, want_sig)[0]:
            return chosen, True, examined
    return chosen, False, examined


def flip_finder(
    study: StudyLike,
    *,
    term: str | None = None,
    pair: tuple[str, str] | None = None,
    method: str = "auto",
    budget: int = 200_000,
    max_size: int = 5,
    max_steps: int = 30,
    alpha: float | None = None,
    record: bool = True,
) -> FlipSearch:
    """Find the fewest rows of ``study`` whose removal flips the decision.

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    term : str, optional
        The term whose decision is scored (default: the term of ``study.decision``).
    pair : (str, str), optional
        Two level names to flip that pairwise decision instead (one factor), read by the
        comparison that follows the study's test (:data:`PAIRWISE_FOR_TEST`; the result's
        ``pairwise_method`` and notes say which).
    method : {'auto', 'exact', 'greedy'}, default 'auto'
        'exact' (exhaustive up to ``budget`` sets and ``max_size`` rows), 'greedy', or
        'auto' (exact first; greedy when the exact search finds nothing within reach).
    budget : int, default 200_000
        Largest number of row sets the exact search may score.
    max_size : int, default 5
        Largest set the exact search tries.
    max_steps : int, default 30
        Most removals the greedy search makes.
    alpha : float, optional
        Level of the decisions (default the study's).
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    FlipSearch
        The rows found (if any), the p-value after removing them, how far the exact
        search reached and how many sets it examined.

    References
    ----------
    Broderick, T., Giordano, R. and Meager, R. (2020). An automatic finite-sample
    robustness metric: when can dropping a little data make a big difference?
    arXiv:2011.14999 (the question; the search here is exhaustive or greedy).

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle")
    >>> search = ex.stats.flip_finder(study, pair=("A", "C"))
    >>> search.found, len(search.rows)
    (True, 4)
    """
    if method not in ("auto", "exact", "greedy"):
        raise ExplorerError(f"method must be 'auto', 'exact' or 'greedy', not {method!r}")
    for name, value in (("budget", budget), ("max_size", max_size), ("max_steps", max_steps)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
            raise ExplorerError(f"{name} must be a whole number of 1 or more, not {value!r}")
    scanned = scan_target(study, "flip finder", term)
    name, verdict, data = scanned.term, scanned.verdict, scanned.oneway
    spec = study.spec
    if data is None:
        if pair is not None:
            raise ExplorerError("pairwise flips are searched in one-factor studies; for this design search the "
                                "F test of a term (leave out pair=)")
        return _factorial_flip(study, name, verdict, method, max_steps, alpha, record)
    a = alpha_or(alpha, data.alpha)
    chosen = ChosenTest(data, spec, a)
    pair_idx = None
    target = f"{chosen.statistic_name} test of {data.factor} ({spec.test})"
    if pair is not None:
        idx = []
        for lv in pair:
            if str(lv) not in data.labels:
                near = closest_names(str(lv), data.labels)
                hint = f" Did you mean {near[0]!r}?" if near else ""
                raise ExplorerError(f"{data.factor!r} has no level {lv!r} with kept rows (levels: {list(data.labels)}).{hint}")
            idx.append(data.labels.index(str(lv)))
        if idx[0] == idx[1]:
            raise ExplorerError("a pairwise decision needs two different levels")
        pair_idx = (idx[0], idx[1])
        target = f"{pair[0]} vs {pair[1]} ({PAIRWISE_FOR_TEST[spec.test]})"
    scorer = _Scorer(data, a, pair_idx, chosen)
    keep_all = np.ones(data.n, dtype=bool)
    base_p = verdict.pvalue if pair is None else scorer.pvalue(keep_all)
    base_sig = base_p is not None and base_p < a
    want_sig = not base_sig
    notes: list[str] = []
    rows_found: list[int] = []
    found = False
    used = method
    covered = examined = 0
    at_size: int | None = None
    if method in ("auto", "exact"):
        best, covered, examined, count = _exact(scorer, want_sig, budget, max_size)
        used = "exact"
        if best is not None:
            keep = keep_all.copy()
            keep[best] = False
            ok, p_set = scorer.flipped(keep, want_sig)
            if ok:
                found, at_size = True, count
                rows_found = _order_within(scorer, list(best.tolist()), want_sig)
                notes.append(f"Exact search: every set of up to {covered} row(s) was scored ({examined} sets); "
                             f"{count} set(s) of {covered} row(s) flip the decision, the one shown moves it furthest.")
            else:
                notes.append(f"Exact search: the best-scored set of {covered} row(s) does not flip the decision when "
                             f"the remaining rows are tested afresh ({p_equals(p_set)}).")
                covered -= 1
        else:
            notes.append(f"Exact search: no set of up to {covered} row(s) flips the decision ({examined} sets scored; "
                         f"budget {budget}, at most {max_size} rows).")
    if not found and method in ("auto", "greedy"):
        picked, found, g_examined = _greedy(scorer, want_sig, max_steps)
        used = "greedy"
        examined += g_examined
        rows_found = picked
        notes.append("Greedy search: each step removes the row that moves the test furthest toward the other "
                     "decision; the set need not be the smallest possible"
                     + (f" (none smaller than {covered + 1} rows exists: exact search)." if covered else "."))
        if not found:
            notes.append(f"Greedy search stopped after {len(picked)} removal(s) without flipping the decision.")
    pvals: list[float | None] = []
    keep = keep_all.copy()
    for j in rows_found:
        keep[j] = False
        pvals.append(scorer.pvalue(keep))
    if pair is not None:
        notes.append(f"Pairwise decision: {_PAIRWISE_WHY[spec.test]}, at alpha {a:g}.")
    if pair is None:
        notes.append(f"Test: {chosen.how}.")
        if spec.test == "permutation":
            notes.append(f"Row sets are scored by F against the permutation critical value of all rows "
                         f"({show_stat(chosen.critical_value(a))}); each step's p-value and the flip itself are "
                         "checked by a permutation test of the remaining rows.")
    if record:
        study.record_search("flip finder", examined)
    return FlipSearch(
        target=target, alpha=a, base_significant=base_sig, base_pvalue=base_p, found=found, method=used,
        rows=tuple(_py_id(data.row_ids[j]) for j in rows_found),
        groups=tuple(data.labels[data.codes[j]] for j in rows_found), pvalues=tuple(pvals),
        exact_up_to=covered, sets_examined=examined, flipping_sets_at_size=at_size, term=name, test=spec.test,
        pairwise_method="" if pair is None else PAIRWISE_FOR_TEST[spec.test],
        disclosure=study.disclosure if record else None,
        notes=tuple(notes),
    )


def _py_id(v: object) -> RowId:
    """A row id as a plain Python value (numpy integers become int)."""
    out = v.item() if isinstance(v, np.generic) else v
    return out if isinstance(out, (int, str)) else str(out)


def _order_within(scorer: _Scorer, rows: list[int], want_sig: bool) -> list[int]:
    """Order a found set greedily so that the p-value after each step reads as a path."""
    if len(rows) <= 1:
        return rows
    keep = np.ones(scorer.data.n, dtype=bool)
    out: list[int] = []
    left = list(rows)
    while left:
        cand = np.asarray(left)
        margin, ok = scorer.margin_of(cand[:, None], keep)
        score = np.where(ok, margin if want_sig else -margin, -np.inf)
        j = int(cand[np.argmax(score)])
        out.append(j)
        left.remove(j)
        keep[j] = False
    return out


def _factorial_flip(study: StudyLike, name: str, verdict: VerdictLike, method: str, max_steps: int, alpha: float | None,
                    record: bool) -> FlipSearch:
    """Flip finder for factorial and block designs, on the F test of the term ``name``.

    Exact for single rows (the case-deletion scan covers every row); beyond one row,
    greedy: leave out the row that moves the F test furthest toward the other decision
    on a private copy of the study, re-scan, repeat. The user's study is not changed.
    """
    from ..engine.errors import EditError
    from .case_deletion import case_deletion_scan

    spec = study.spec
    a = alpha_or(alpha, spec.alpha)
    base_p = verdict.pvalue
    base_sig = base_p is not None and base_p < a
    want_sig = not base_sig
    term = f"F test of {name}"
    scan = case_deletion_scan(study, term=name, alpha=a, record=False)
    examined = int(scan.row_ids.size)
    notes: list[str] = []
    found = False
    rows: list = []
    pvals: list[float | None] = []
    groups: list[str] = []
    covered = 0
    at_size: int | None = None

    def margins(sc) -> np.ndarray:  # type: ignore[no-untyped-def]
        with np.errstate(divide="ignore", invalid="ignore"):
            crit = special.fdtri(sc.df_between.astype(float), sc.df_within.astype(float), 1 - a)
            return np.where(sc.status == 0, sc.statistic / crit, np.nan)

    if method in ("auto", "exact"):
        covered = 1
        m = margins(scan)
        hit = np.isfinite(m) & ((m > 1) if want_sig else (m <= 1))
        if hit.any():
            idx = np.flatnonzero(hit)
            j = idx[np.argmax(m[idx])] if want_sig else idx[np.argmin(m[idx])]
            found, at_size = True, int(hit.sum())
            rows, pvals, groups = [_py_id(scan.row_ids[j])], [float(scan.pvalue[j])], [str(scan.group[j])]
            notes.append(f"Exact search over single rows (the case-deletion scan): {at_size} row(s) flip the decision.")
        else:
            notes.append("Exact search: no single row flips the decision (sets of two or more rows are searched "
                         "exhaustively in one-factor studies only).")
    if not found and method in ("auto", "greedy"):
        tmp = type(study).from_dataset(study.dataset, spec)  # a private copy
        for e in study.edits:
            tmp.apply(e)
        rows, pvals, groups = [], [], []
        sc = scan
        for _ in range(max_steps):
            m = margins(sc)
            score = np.where(np.isfinite(m), m if want_sig else -m, -np.inf)
            moved = False
            for j in np.argsort(-score, kind="stable"):
                if not np.isfinite(score[j]):
                    break
                try:
                    tmp.drop([_py_id(sc.row_ids[j])], reason="flip finder (private copy)")
                except EditError:
                    continue
                rows.append(_py_id(sc.row_ids[j]))
                groups.append(str(sc.group[j]))
                pvals.append(tmp.results.pvalue(name))
                moved = True
                break
            if not moved:
                break
            p_now = pvals[-1]
            if p_now is not None and ((p_now < a) if want_sig else (p_now >= a)):
                found = True
                break
            sc = case_deletion_scan(tmp, term=name, alpha=a, record=False)
            examined += int(sc.row_ids.size)
        method_used = "greedy"
        notes.append("Greedy search: each step leaves out the row that moves the F test furthest toward the other "
                     "decision, then re-scans; the set need not be the smallest possible"
                     + (" (no single row flips it: exact search)." if covered else "."))
        if not found:
            notes.append(f"Greedy search stopped after {len(rows)} removal(s) without flipping the decision.")
    else:
        method_used = "exact"
    if record:
        study.record_search("flip finder", examined)
    return FlipSearch(
        target=term, alpha=a, base_significant=base_sig, base_pvalue=base_p, found=found, method=method_used,
        rows=tuple(rows), groups=tuple(groups), pvalues=tuple(pvals), exact_up_to=covered, sets_examined=examined,
        flipping_sets_at_size=at_size, term=name, test="classic", disclosure=study.disclosure if record else None,
        notes=tuple(notes),
    )
