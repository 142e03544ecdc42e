"""Case-deletion scan: the analysis with each kept row left out in turn.

For every row at once: the study's chosen overall test (its statistic, p-value and
decision at alpha), the effect size (eta squared) and the largest change in any
pairwise comparison if that row alone were left out. The term scored is the one the
study's decision is about unless the caller names another. Each deletion changes one
group's sufficient statistics, so the scan is a closed-form downdate per row
(:func:`.alternatives.leave_one_out`), O(n k) in all, not n refits; Kruskal-Wallis uses
exact rank downdates and the permutation F shared permutations (:mod:`.chosen_test`).
Rows whose deletion flips the decision are listed first.

References
----------
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression. Chapman and
Hall, ch. 3 (case deletion).
Welford, B. P. (1962). Technometrics 4(3), 419-420 (the downdate).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.disclosure import Disclosure
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import result_frame, show_p
from ..rendering import html_repr
from .alternatives import (
    STATUS_NOTES,
    OnewayInput,
)
from .chosen_test import STATISTIC_NAMES, ChosenTest
from .scan_target import scan_target
from .study_like import StudyLike, VerdictLike

__all__ = ["CaseDeletionScan", "case_deletion_scan", "nullable"]


def nullable(a: np.ndarray) -> pd.array:
    """Float array as a pandas nullable column (missing where NaN)."""
    a = np.asarray(a, dtype=np.float64)
    out = pd.array(a, dtype="Float64")
    out[~np.isfinite(a)] = pd.NA
    return out


@dataclass(frozen=True, kw_only=True, eq=False)
class CaseDeletionScan:
    """The analysis with each row left out (arrays follow ``row_ids``).

    ``term`` is the term scored and ``test`` the overall test (a key of
    :data:`explorer.engine.spec.OVERALL_TESTS`); ``how`` says how the scan computed it.
    ``statistic``/``pvalue``/``eta_squared`` are NaN where the test is undefined after
    the deletion (``status`` > 0; the sentence is in ``STATUS_NOTES``). ``pair`` names
    the pairwise comparison whose t statistic (difference of means over its standard
    error from the residual mean square) changes most; ``pair_t_before`` and
    ``pair_t_after`` give it. ``flips`` marks rows whose deletion changes the decision
    on ``term``. ``permutations_used`` (permutation test only) is the number of
    orderings behind each row's p-value.
    """

    factor: str
    alpha: float
    row_ids: np.ndarray
    group: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    eta_squared: np.ndarray
    df_between: np.ndarray
    df_within: np.ndarray
    status: np.ndarray
    pair: np.ndarray
    pair_t_before: np.ndarray
    pair_t_after: np.ndarray
    base_statistic: float | None
    base_pvalue: float | None
    base_significant: bool
    term: str = ""
    test: str = "classic"
    how: str = ""
    term_pvalues: dict[str, np.ndarray] = field(default_factory=dict)
    permutations_used: np.ndarray | None = None
    disclosure: Disclosure | None = None
    notes: tuple[str, ...] = field(default=())

    @property
    def significant(self) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            return (self.status == 0) & (self.pvalue < self.alpha)

    @property
    def flips(self) -> np.ndarray:
        return self.significant != self.base_significant

    @property
    def flip_rows(self) -> list:
        """Row ids whose deletion alone flips the decision, strongest first."""
        o = self._order()
        return self.row_ids[o[self.flips[o]]].tolist()

    def _order(self) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            move = np.abs(np.log(self.pvalue) - np.log(self.base_pvalue or np.nan))
        move = np.where(np.isfinite(move), move, np.inf if self.base_pvalue is None else -1.0)
        return np.lexsort((-move, ~self.flips))

    def to_frame(self) -> pd.DataFrame:
        """One line per row, flip rows first, then by how far the p-value moves."""
        o = self._order()
        with np.errstate(invalid="ignore"):
            change = self.pvalue - (self.base_pvalue if self.base_pvalue is not None else np.nan)
        extra = {} if self.permutations_used is None else {"orderings used": self.permutations_used[o].astype(np.int64)}
        return result_frame(
            {
                "row": self.row_ids[o],
                "group": self.group[o],
                STATISTIC_NAMES[self.test]: nullable(self.statistic[o]),
                "p-value": nullable(self.pvalue[o]),
                "change in p-value": nullable(change[o]),
                "significant": self.significant[o],
                "flips decision": self.flips[o],
                "eta squared": nullable(self.eta_squared[o]),
                "df (term)": self.df_between[o],
                "df (residual)": self.df_within[o],
                "pair changing most": self.pair[o],
                "pair t (all rows)": nullable(self.pair_t_before[o]),
                "pair t (row left out)": nullable(self.pair_t_after[o]),
                "note": [STATUS_NOTES[int(s)] for s in self.status[o]],
                **extra,
                **{f"p-value ({t})": nullable(p[o]) for t, p in self.term_pvalues.items()},
            }
        )

    @html_repr
    def _repr_html_(self) -> str:
        frame = self.to_frame().head(20)
        n_flip = int(self.flips.sum())
        caption = (
            f"Leaving out one row at a time ({self.row_ids.size} rows): {n_flip} deletion(s) flip the decision on "
            f"{self.term} at alpha {self.alpha:g} (p with all rows = {show_p(self.base_pvalue)})"
        )
        notes = self.notes + ((self.disclosure.sentence_then(),) if self.disclosure else ())
        return "<div>" + html_table(frame, caption, notes) + "</div>"


def _pairwise_change(
    data: OnewayInput, new_n: np.ndarray, new_mean: np.ndarray, msw: np.ndarray, base_msw: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pair with the largest change in its t statistic, per deleted row (O(n k), group by group).

    For a row of group ``a``, the pairs ``(a, b)`` see the downdated mean and count of
    ``a``; every other pair sees only the new residual mean square, so among those the
    pair with the largest ``|t|`` moves most.
    """
    gs, g = data.stats, data.codes
    k, n = data.k, data.n
    nb = gs.n.astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        tb = (gs.mean[:, None] - gs.mean[None, :]) / np.sqrt(base_msw * (1 / nb[:, None] + 1 / nb[None, :]))
    tb = np.where(np.isfinite(tb), tb, np.nan)
    np.fill_diagonal(tb, np.nan)
    code = np.full(n, k * k)
    t_before = np.full(n, np.nan)
    t_after = np.full(n, np.nan)
    for a in range(k):
        idx = np.flatnonzero(g == a)
        if idx.size == 0:
            continue
        others = np.array([b for b in range(k) if b != a], dtype=np.int64)
        m = msw[idx][:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            ta = (new_mean[idx][:, None] - gs.mean[others][None, :]) / np.sqrt(
                m * (1 / new_n[idx][:, None] + 1 / nb[others][None, :]))
        ta[new_n[idx] == 0, :] = np.nan
        before = np.broadcast_to(tb[a, others], ta.shape)
        codes_a = a * k + others
        sub = np.abs(tb)
        sub[a, :] = np.nan
        sub[:, a] = np.nan
        if k >= 3 and not np.all(np.isnan(sub)):
            i, j = np.unravel_index(np.nanargmax(sub), sub.shape)
            with np.errstate(divide="ignore", invalid="ignore"):
                extra = tb[i, j] * np.sqrt(base_msw / m)
            ta = np.hstack([ta, extra])
            before = np.hstack([before, np.full((idx.size, 1), tb[i, j])])
            codes_a = np.append(codes_a, i * k + j)
        change = np.abs(ta - before)
        change = np.where(np.isfinite(change), change, -1.0)
        best = np.argmax(change, axis=1)
        rows = np.arange(idx.size)
        found = change[rows, best] >= 0
        sel = idx[found]
        code[sel] = codes_a[best[found]]
        t_before[sel] = before[rows, best][found]
        t_after[sel] = ta[rows, best][found]
    labels = data.labels
    names = np.array([f"{labels[i]} vs {labels[j]}" for i in range(k) for j in range(k)] + [""], dtype=object)
    return names[code], t_before, t_after


def case_deletion_scan(study: StudyLike, *, term: str | None = None, alpha: float | None = None,
                       record: bool = True) -> CaseDeletionScan:
    """Leave each kept row of ``study`` out in turn and score the decision each time.

    Parameters
    ----------
    study : Study
        The study to scan; it is not edited (the alternatives examined are added to its
        count of searches unless ``record=False``).
    term : str, optional
        The term whose decision is scored (default: the term of ``study.decision``).
    alpha : float, optional
        Level of the decisions (default the study's).
    record : bool, default True
        Whether the alternatives examined count in the study's disclosure.

    Returns
    -------
    CaseDeletionScan
        For each row: the statistic and p-value of the study's chosen test with that row
        left out, whether the decision changes, the largest change in a pairwise t
        (one factor) or every term's p-value (several factors).

    References
    ----------
    Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 3.
    Welford, B. P. (1962). Technometrics 4(3), 419-420 (the downdate).

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle")
    >>> scan = ex.stats.case_deletion_scan(study)
    >>> int(scan.pvalue.argmax()), bool((scan.pvalue < 0.05).all())
    (7, True)
    """
    target = scan_target(study, "case-deletion scan", term)
    name, verdict, data = target.term, target.verdict, target.oneway
    if data is None:
        return _factorial_scan(study, name, verdict, alpha, record)
    spec = study.spec
    a = alpha_or(alpha, data.alpha)
    chosen = ChosenTest(data, spec, a)
    deleted = chosen.deletion()
    fits, new_n, new_mean, used = deleted.fits, deleted.n, deleted.mean, deleted.permutations_used
    with np.errstate(divide="ignore", invalid="ignore"):
        df_w = data.n - 1 - fits.levels
        msw = np.where((fits.ss_within > 0) & (df_w > 0), fits.ss_within / df_w, np.nan)
    gs = data.stats
    base_msw = float(gs.ss_within / (data.n - data.k)) if data.n > data.k and gs.ss_within > 0 else np.nan
    pair, t_before, t_after = _pairwise_change(data, new_n, new_mean, msw, base_msw)
    notes = [f"Test: {chosen.how}.",
             ("Pair t: difference of the two level means over its standard error from the residual mean square "
              "of the fit in question (all rows, or the row left out).")]
    single = int((data.stats.n == 1).sum())
    if single:
        notes.append(f"{single} level(s) have one observation; leaving it out removes the level (one df fewer for the term).")
    if record:
        study.record_search("case deletion", data.n)
    base_p = verdict.pvalue
    return CaseDeletionScan(
        factor=data.factor, alpha=a, row_ids=data.row_ids, group=np.asarray(data.labels, dtype=object)[data.codes],
        statistic=fits.statistic, pvalue=fits.pvalue, eta_squared=fits.eta_squared, df_between=fits.df_between,
        df_within=fits.df_within, status=fits.status, pair=pair, pair_t_before=t_before, pair_t_after=t_after,
        base_statistic=verdict.statistic, base_pvalue=base_p,
        base_significant=bool(base_p is not None and base_p < a), term=name, test=spec.test, how=chosen.how,
        permutations_used=used, disclosure=study.disclosure if record else None,
        notes=tuple(notes),
    )


def _factorial_scan(study: StudyLike, name: str, verdict: VerdictLike, alpha: float | None, record: bool) -> CaseDeletionScan:
    """Case deletion for multi-factor designs (see :mod:`.cell_deletion`): the decision on ``name`` is
    scored, every term's p-value is listed."""
    from .cell_deletion import cell_deletion, eta_squared_total
    from .covariate_deletion import covariate_deletion

    spec = study.spec
    a = alpha_or(alpha, spec.alpha)
    with_cov = bool(getattr(spec, "covariates", ()))
    deletions = (covariate_deletion if with_cov else cell_deletion)(study)
    per_term, status, data, notes = deletions.per_term, deletions.status, deletions.cells, deletions.notes
    m = per_term[name]
    if record:
        study.record_search("case deletion", data.n)
    base_p = verdict.pvalue
    empty = np.full(data.n, np.nan)
    how = ("classic F from closed-form downdates of the cross-products (covariates)" if with_cov else
           "classic F from quadratic updates of the cell means")
    notes = [f"Test: classic F of {name!r} ({spec.ss_type} sums of squares) from "
             + ("rank-one downdates of every model compared (the model has covariates)." if with_cov else
                "quadratic updates of the cell means (three cell fits per cell).")] + notes + [
        "Pairwise changes are computed for one-factor studies only."]
    return CaseDeletionScan(
        factor=name, alpha=a, row_ids=data.row_ids, group=np.asarray(data.labels, dtype=object)[data.codes],
        statistic=m["statistic"], pvalue=m["pvalue"], eta_squared=eta_squared_total(data, m["ss"]),
        df_between=m["df"].astype(np.int64), df_within=per_term["residual"]["df"].astype(np.int64), status=status,
        pair=np.full(data.n, "", dtype=object), pair_t_before=empty, pair_t_after=empty,
        base_statistic=verdict.statistic, base_pvalue=base_p,
        base_significant=bool(base_p is not None and base_p < a),
        term=name, test="classic", how=how,
        term_pvalues={t: v["pvalue"] for t, v in per_term.items() if t != "residual"},
        disclosure=study.disclosure if record else None,
        notes=tuple(notes),
    )
