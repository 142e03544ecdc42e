"""Case deletion for models with covariates: closed-form downdates of the cross-products.

Leaving row i out of a least-squares fit with model matrix X changes (X'X)^-1 by the
Sherman-Morrison rank-one downdate, and the residual sum of squares by

    RSS_(i) = RSS - e_i^2 / (1 - h_i)

(e_i the residual and h_i the leverage of row i in that model; Cook and Weisberg 1982,
sec. 2.2; Belsley, Kuh and Welsch 1980). Every term's sum of squares is the difference
of the residual sums of two nested models (:func:`explorer.engine.cellfit.model_comparisons`,
the study's SS type), so one QR per model compared gives every term's F test with each
row left out, in O(n p^2) per model instead of n refits:

    SS_term,(i) = SS_term - (e_small,i^2/(1 - h_small,i) - e_big,i^2/(1 - h_big,i)).

A row with leverage one in the full model (alone in its cell, or the only row that
fixes a covariate slope) cannot be downdated: it is refitted directly, and when the
model cannot be fitted without it the row gets status 4 with the reason.

References
----------
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, ch. 2-3.
Sherman, J. and Morrison, W. J. (1950). Adjustment of an inverse matrix corresponding to
a change in one element of a given matrix. Ann. Math. Stat. 21, 124-127.
"""

from __future__ import annotations

import numpy as np

from ..engine.cellfit import model_comparisons
from ..engine.covariate_fit import covariate_sequence
from ..engine.distributions import f_sf
from ..engine.errors import DesignError
from ..engine.groupstats import group_stats
from ..engine.numerics import is_zero_ss
from ..engine.row_model import design_of
from .alternatives import OnewayInput
from .cell_deletion import TermDeletions
from .study_like import StudyLike

__all__ = ["covariate_deletion"]

_ONE = 1 - 1e-10


def _residual_and_leverage(x: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    q, _ = np.linalg.qr(x)
    return z - q @ (q.T @ z), np.sum(q * q, axis=1)


def covariate_deletion(study: StudyLike) -> TermDeletions:
    """Every term's F test with each kept row left out (as :func:`.cell_deletion.cell_deletion`)."""
    from ..engine.analysis import analyze

    res = study.results
    spec = study.spec
    dataset = study.dataset
    pos = np.asarray(res.fit.positions)
    if pos.size != int(res.groups.n_total):
        raise DesignError("the case-deletion scan needs every kept row; this study's results carry a sample")
    y = np.asarray(dataset.y)[pos]
    codes = np.asarray(res.fit.group, dtype=np.int64)
    cells = group_stats(y, codes, tuple(res.groups.labels), dataset.offset)
    data = OnewayInput(factor="cell", y=y, codes=codes, labels=cells.labels, row_ids=np.asarray(res.fit.row_ids),
                       positions=pos, offset=float(dataset.offset), alpha=float(spec.alpha), stats=cells)
    design = design_of(res, res.covariate_values)
    terms = design.terms
    sequence = covariate_sequence(terms, spec)
    z = y - float(np.mean(y))
    n = y.size
    ss_type = spec.ss_type
    pairs = model_comparisons(terms, sequence, design.nesting)[ss_type]
    cache: dict[tuple[int, ...], tuple[np.ndarray, np.ndarray]] = {}

    def model(ts: tuple) -> tuple[np.ndarray, np.ndarray]:  # type: ignore[type-arg]
        cols = tuple(int(c) for c in design.columns_of(ts))
        if cols not in cache:
            cache[cols] = _residual_and_leverage(design.matrix[:, cols], z)
        return cache[cols]

    e_full, h_full = model(terms)
    safe = h_full < _ONE
    with np.errstate(divide="ignore", invalid="ignore"):
        drop_full = np.where(safe, e_full**2 / (1 - h_full), np.nan)
    rss = float(e_full @ e_full)
    df_resid = np.full(n, n - design.n_params - 1, dtype=np.int64)
    resid = rss - drop_full
    ss: dict = {}
    df_t: dict = {}
    for t, (big, small) in pairs.items():
        eb, hb = model(big)
        es, hs = model(small)
        base = float(np.sum((eb - es) ** 2))  # the term's SS on all rows, from the projections
        with np.errstate(divide="ignore", invalid="ignore"):
            change = np.where(safe, es**2 / (1 - hs) - eb**2 / (1 - hb), np.nan)
        ss[t] = np.maximum(base - change, 0.0)
        s = design.slices[t]
        df_t[t] = s.stop - s.start
    status = np.zeros(n, dtype=np.int8)
    notes = ["Each row left out by the closed-form downdate RSS - e²/(1 - h) of every model compared "
             "(Cook and Weisberg 1982), no refits."]
    for i in np.flatnonzero(~safe):  # leverage one: refit without the row
        kept = study.view.kept.copy()
        kept[pos[i]] = False
        try:
            r = analyze(dataset, study.view.replace(kept=kept), spec)
        except DesignError as exc:
            status[i] = 4
            notes.append(f"Leaving out row {data.row_ids[i]} leaves the model inestimable: {exc}")
            continue
        table = r.partitions.get(ss_type, r.partition)
        for t in terms:
            try:
                ss[t][i] = table.row(design.name(t)).sum_sq
            except KeyError:
                ss[t][i] = np.nan
        resid[i] = r.partition.row("residual").sum_sq
        df_resid[i] = r.df_resid
    if np.any(~safe):
        notes.append(f"{int((~safe).sum())} row(s) with leverage one were refitted directly.")
    zero = is_zero_ss(resid, n, data.scale())
    status[(status == 0) & zero] = 3
    status[(status == 0) & (df_resid < 1)] = 2
    ok = status == 0
    per_term: dict[str, dict[str, np.ndarray]] = {}
    for t in terms:
        stat = np.full(n, np.nan)
        p = np.full(n, np.nan)
        stat[ok] = (ss[t][ok] / df_t[t]) / (resid[ok] / df_resid[ok])
        p[ok] = f_sf(stat[ok], float(df_t[t]), df_resid[ok].astype(float))
        per_term[design.name(t)] = {"statistic": stat, "pvalue": p, "ss": ss[t], "df": np.full(n, df_t[t])}
    per_term["residual"] = {"ss": resid, "df": df_resid}
    return TermDeletions(per_term=per_term, status=status, cells=data, notes=notes)
