"""Influence diagnostics of the fitted model: leverage, studentized residuals, Cook's distance, DFFITS.

Everything follows from the residuals ``e``, the leverages ``h`` (diagonal of the hat
matrix; ``1/n_g`` for a one-way model, the cell's hat value for a cell-means model)
and the residual mean square ``s^2`` on ``n - p`` df:

* internally studentized residual ``r = e / (s sqrt(1 - h))``;
* externally studentized residual ``t = r sqrt((n - p - 1) / (n - p - r^2))``
  (the residual scaled by the fit without that row; Belsley, Kuh and Welsch 1980);
* Cook's distance ``D = r^2 h / (p (1 - h))`` (Cook 1977);
* DFFITS ``t sqrt(h / (1 - h))`` (Belsley, Kuh and Welsch 1980);
* Bonferroni outlier test: ``min(1, n * 2 P(T > |t|))`` with ``T ~ t(n - p - 1)``
  (Weisberg 2005, section 9.4.3).

Rows with leverage one (the only observation of a level or cell) fit exactly; their
scaled residuals and distances are undefined and left out with a note.

References
----------
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19(1), 15-18.
Belsley, D. A., Kuh, E. and Welsch, R. E. (1980). Regression Diagnostics. Wiley, ch. 2.
Weisberg, S. (2005). Applied Linear Regression, 3rd ed. Wiley, ch. 9.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from ..engine.disclosure import Disclosure
from ..engine.distributions import t_sf
from ..engine.numerics import is_zero_ss, response_scale
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import result_frame, show_stat
from ..rendering import html_repr
from .study_like import StudyLike

__all__ = ["Influence", "influence", "influence_measures"]


def _nullable(a: np.ndarray) -> pd.array:
    return pd.array([None if not np.isfinite(v) else float(v) for v in a], dtype="Float64")


@dataclass(frozen=True, kw_only=True, eq=False)
class Influence:
    """Per-row influence measures and the cut-off rules used to flag rows.

    Arrays follow ``row_ids``; entries that are undefined (leverage one, no residual
    df, zero residual mean square) are NaN in the arrays, missing in :meth:`to_frame`,
    and explained in ``notes``.
    """

    row_ids: np.ndarray
    group: np.ndarray
    residuals: np.ndarray
    leverage: np.ndarray
    studentized_internal: np.ndarray
    studentized_external: np.ndarray
    cooks_distance: np.ndarray
    dffits: np.ndarray
    outlier_pvalue: np.ndarray
    n: int
    n_params: int
    df_resid: int
    cutoffs: dict[str, float]
    cutoff_rules: dict[str, str]
    disclosure: Disclosure | None = None
    notes: tuple[str, ...] = field(default=())

    def flagged(self, rule: str) -> np.ndarray:
        """Boolean mask of rows beyond the named cut-off (a key of ``cutoffs``)."""
        c = self.cutoffs[rule]
        with np.errstate(invalid="ignore"):
            if rule == "studentized":
                return np.abs(self.studentized_external) > c
            if rule == "cooks_4_over_n" or rule == "cooks_f_median":
                return self.cooks_distance > c
            if rule == "leverage":
                return self.leverage > c
            if rule == "dffits":
                return np.abs(self.dffits) > c
            if rule == "outlier_test":
                return self.outlier_pvalue < c
        raise KeyError(f"no cut-off {rule!r}; the cut-offs are {list(self.cutoffs)}")

    def to_frame(self) -> pd.DataFrame:
        """One row per observation (full precision) with a column per flag."""
        frame = pd.DataFrame(
            {
                "row": self.row_ids,
                "group": self.group,
                "residual": self.residuals,
                "leverage": self.leverage,
                "studentized residual (internal)": _nullable(self.studentized_internal),
                "studentized residual (external)": _nullable(self.studentized_external),
                "Cook's distance": _nullable(self.cooks_distance),
                "DFFITS": _nullable(self.dffits),
                "outlier test p (Bonferroni)": _nullable(self.outlier_pvalue),
            }
        )
        for rule in self.cutoffs:
            frame[f"beyond {rule}"] = self.flagged(rule)
        return result_frame(frame)

    @html_repr
    def _repr_html_(self) -> str:
        frame = self.to_frame()
        flags = frame[[c for c in frame.columns if c.startswith("beyond ")]].any(axis=1)
        shown = frame[flags].drop(columns=[c for c in frame.columns if c.startswith("beyond ")])
        rules = "; ".join(f"{v} ({show_stat(self.cutoffs[k])})" for k, v in self.cutoff_rules.items())
        notes = (f"Cut-offs: {rules}.",) + self.notes
        if self.disclosure is not None:
            notes += (self.disclosure.sentence_then(),)
        caption = f"Influence: {len(shown)} of {self.n} rows beyond a cut-off"
        return "<div>" + html_table(shown, caption, notes) + "</div>"


def influence_measures(
    residuals: np.ndarray,
    leverage: np.ndarray,
    df_resid: int,
    *,
    row_ids: np.ndarray | None = None,
    group: np.ndarray | None = None,
    alpha: float = 0.05,
    scale: float = 1.0,
) -> Influence:
    """Influence measures from residuals, leverages and the residual df of a least-squares fit.

    Parameters
    ----------
    residuals, leverage : numpy.ndarray
        Residuals and leverages (hat-matrix diagonal) of the kept rows.
    df_resid : int
        Residual df of the fit (``p = n - df_resid`` fitted parameters).
    row_ids : numpy.ndarray, optional
        Row ids to label the rows (positions when not given).
    group : numpy.ndarray, optional
        Each row's level or cell, for display.
    alpha : float, default 0.05
        Level of the Bonferroni outlier test flag.
    scale : float, default 1.0
        Magnitude of the response, which decides when the residual mean square counts
        as zero (:func:`explorer.engine.numerics.is_zero_ss`).

    Returns
    -------
    Influence
        Internally and externally studentized residuals, Cook's distance, DFFITS,
        Bonferroni outlier p-values and the stated cut-offs.

    References
    ----------
    Cook, R. D. (1977). Detection of influential observation in linear regression.
    Technometrics 19(1), 15-18.
    Belsley, D. A., Kuh, E. and Welsch, R. E. (1980). Regression Diagnostics, ch. 2.

    Examples
    --------
    >>> import explorer as ex
    >>> fit = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results.fit
    >>> infl = ex.stats.influence_measures(fit.residuals, fit.leverage, 9)
    >>> round(float(infl.cooks_distance.max()), 3), infl.n_params
    (0.279, 3)
    """
    e = np.asarray(residuals, dtype=np.float64)
    h = np.asarray(leverage, dtype=np.float64)
    n = int(e.size)
    df = int(df_resid)
    p = n - df
    notes: list[str] = []
    rss = float(np.dot(e, e))
    nan = np.full(n, np.nan)
    r = t = cook = dff = pout = nan
    exact = h >= 1 - 1e-12
    if df < 1 or is_zero_ss(rss, n, scale):
        notes.append("No residual variation (no residual df or every residual zero): scaled residuals are undefined.")
    else:
        s2 = rss / df
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(exact, np.nan, e / np.sqrt(s2 * (1 - h)))
            cook = r * r * h / (p * (1 - h))
            if df > 1:
                room = df - r * r
                t = np.where(room > 0, r * np.sqrt((df - 1) / room), np.nan)
                dff = t * np.sqrt(h / (1 - h))
                pout = np.minimum(1.0, n * 2 * t_sf(np.abs(t), df - 1))
            else:
                notes.append("One residual df: leaving a row out leaves none, so external studentized "
                             "residuals, DFFITS and the outlier test are undefined.")
        if exact.any():
            ids = np.asarray(row_ids)[exact][:8].tolist() if row_ids is not None else np.flatnonzero(exact)[:8].tolist()
            notes.append(f"{int(exact.sum())} row(s) fit exactly (leverage 1: the only observation of a level or cell), "
                         f"e.g. {ids}; their scaled residuals and distances are undefined.")
    cutoffs = {
        "studentized": 3.0,
        "cooks_4_over_n": 4.0 / n,
        "cooks_f_median": float(stats.f.ppf(0.5, p, df)) if df >= 1 and p >= 1 else float("inf"),
        "leverage": 2.0 * p / n,
        "dffits": 2.0 * np.sqrt(p / n),
        "outlier_test": float(alpha),
    }
    rules = {
        "studentized": "|external studentized residual| > 3",
        "cooks_4_over_n": "Cook's distance > 4/n",
        "cooks_f_median": "Cook's distance > median of F(p, n-p) (Cook 1977)",
        "leverage": "leverage > 2p/n",
        "dffits": "|DFFITS| > 2 sqrt(p/n) (Belsley, Kuh and Welsch 1980)",
        "outlier_test": f"Bonferroni outlier test p < {alpha:g}",
    }
    return Influence(
        row_ids=np.arange(n) if row_ids is None else np.asarray(row_ids),
        group=np.zeros(n, dtype=object) if group is None else np.asarray(group),
        residuals=e, leverage=h, studentized_internal=r, studentized_external=t, cooks_distance=cook,
        dffits=dff, outlier_pvalue=pout, n=n, n_params=p, df_resid=df, cutoffs=cutoffs, cutoff_rules=rules,
        notes=tuple(notes),
    )


def influence(study: StudyLike, *, alpha: float | None = None) -> Influence:
    """Influence measures of the current model of ``study`` (one-way or factorial).

    Uses the fit's residuals and leverages (``study.results.fit``), so any model the
    engine fits is covered; ``p`` is the number of fitted parameters ``n - df_resid``.
    """
    res = study.results
    fit = res.fit
    spec = study.spec
    labels = np.asarray(res.groups.labels, dtype=object)
    group = labels[np.asarray(fit.group)] if len(labels) else None
    scale = response_scale(study.dataset.offset, fit.y)
    out = influence_measures(
        fit.residuals, fit.leverage, res.df_resid, row_ids=fit.row_ids, group=group,
        alpha=alpha_or(alpha, spec.alpha), scale=scale,
    )
    return dataclasses.replace(out, disclosure=study.disclosure)
