"""Tests of model terms with a heteroscedasticity-consistent (HC3) covariance.

The classic F of a term assumes one error variance for every row. The HC3 covariance of
the coefficients, ``(X'X)^-1 X' diag(e_i^2 / (1 - h_i)^2) X (X'X)^-1`` (MacKinnon and
White 1985; Long and Ervin 2000 recommend HC3 for small samples), does not. Each term is
tested by a Wald statistic W on the row-level sum-to-zero coded model
(:mod:`explorer.engine.row_model`), reported as F = W / df on (df, residual df):

* type III: the term's coefficients are zero, in the full model;
* type II: W(term and every term containing it) - W(every term containing it), the
  robust counterpart of "the term adjusted for every term not containing it" (with the
  classic covariance it gives the type II F exactly).

Rows alone in their cell of a saturated model have leverage one and no HC3 weight; the
test is then refused with the reason.

References
----------
MacKinnon, J. G. and White, H. (1985). Some heteroskedasticity-consistent covariance
matrix estimators with improved finite sample properties. J. Econometrics 29, 305-325.
Long, J. S. and Ervin, L. H. (2000). Using heteroscedasticity consistent standard errors
in the linear regression model. The American Statistician 54, 217-224.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..engine.design import contains
from ..engine.distributions import f_sf
from ..engine.errors import DesignError, ExplorerError
from ..engine.fitrows import every_kept_row
from ..engine.results import Results
from ..engine.row_model import RowFit, design_of, fit_rows, hc_meat
from ..engine.tables import html_table
from ..rendering import html_repr

__all__ = ["RobustTermTests", "hc3_tests"]


@dataclass(frozen=True, kw_only=True, eq=False)
class RobustTermTests:
    """HC3 Wald tests of each model term (F = W/df), beside the classic F of the same type."""

    ss_type: str
    terms: tuple[str, ...]
    df: tuple[int, ...]
    statistic: np.ndarray
    pvalue: np.ndarray
    classic_statistic: np.ndarray
    classic_pvalue: np.ndarray
    df_resid: int
    alpha: float
    notes: tuple[str, ...] = field(default=())

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"term": list(self.terms), "df": list(self.df), "F (HC3)": self.statistic,
                             "p-value (HC3)": self.pvalue, "F (classic)": self.classic_statistic,
                             "p-value (classic)": self.classic_pvalue,
                             "residual df": np.full(len(self.terms), self.df_resid)})

    def row(self, term: str) -> dict[str, float]:
        i = self.terms.index(term)
        return {"statistic": float(self.statistic[i]), "pvalue": float(self.pvalue[i])}

    @property
    def title(self) -> str:
        return f"Terms tested with HC3 standard errors (type {self.ss_type}, robust to unequal variances)"

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame(), self.title, self.notes)

    def to_text(self) -> str:
        f = self.to_frame()
        return f"{self.title}\n{f.to_string(index=False)}\n" + "\n".join(self.notes)


def _wald(fit: RowFit, cov: np.ndarray, cols: list[int]) -> float:
    if not cols:
        return 0.0
    b = fit.coef[cols]
    v = cov[np.ix_(cols, cols)]
    return float(b @ np.linalg.solve(v, b))


def hc3_tests(
    results: Results, *, ss_type: str | None = None, covariates: dict[str, Any] | None = None
) -> RobustTermTests:
    """HC3 Wald F tests of every term of ``results``' fixed-effects model (types II or III).

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    ss_type : {'II', 'III'}, optional
        The study's type by default (type I has no robust counterpart here: type II is
        used and a note says so).
    covariates : dict, optional
        Covariate columns of an analysis of covariance (read from the results when
        they carry them).

    Returns
    -------
    RobustTermTests
        For each term the Wald F on its df with the HC3 covariance, its p-value, and the
        classic F beside it.

    References
    ----------
    MacKinnon, J. G. and White, H. (1985). Some heteroskedasticity-consistent
    covariance matrix estimators with improved finite sample properties. J.
    Econometrics 29, 305-325.
    Long, J. S. and Ervin, L. H. (2000). Using heteroscedasticity consistent standard
    errors in the linear regression model. The American Statistician 54, 217-224.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("lines"), "thickness_um", ["nozzle", "speed"]).results
    >>> tests = ex.stats.hc3_tests(results)
    >>> tests.terms, [bool(p < 0.05) for p in tests.pvalue]
    (('nozzle', 'speed', 'nozzle × speed'), [True, False, True])
    """
    spec = results.spec
    if spec.is_mixed:
        raise DesignError("HC3 tests are for fixed-effects models; this model has random, nested or subject terms")
    kind = (ss_type or spec.ss_type).upper()
    notes: list[str] = []
    if kind == "I":
        kind = "II"
        notes.append("Sequential (type I) tests have no HC3 counterpart here; type II is shown.")
    if kind not in ("II", "III"):
        raise ExplorerError(f"ss_type must be 'II' or 'III', not {ss_type!r}")
    every_kept_row(results.fit, results.n_used, "HC3 tests")
    cov_values = covariates if covariates is not None else getattr(results, "covariate_values", None)
    design = design_of(results, cov_values)
    y = np.asarray(results.fit.y, dtype=float) - float(results.groups.offset)
    fit = fit_rows(design, y, types=("II", "III"))
    lev = fit.leverage
    if np.any(lev > 1 - 1e-10):
        m = int(np.sum(lev > 1 - 1e-10))
        raise DesignError(f"{m} row(s) have leverage one (each alone in its cell of this model): their HC3 weight "
                          "is undefined. Fit a model without the interaction, or restore rows")
    cov = hc_meat(fit, "hc3")
    names, dfs, stats, ps, cstats, cps = [], [], [], [], [], []
    table = results.partitions.get(kind, results.partition) if results.partitions else results.partition
    for t in design.terms:
        s = design.slices[t]
        own = list(range(s.start, s.stop))
        if kind == "III":
            w = _wald(fit, cov, own)
        else:
            bigger = [u for u in design.terms if contains(u, t, design.nesting)]
            extra = [c for u in bigger for c in range(design.slices[u].start, design.slices[u].stop)]
            w = _wald(fit, cov, own + extra) - _wald(fit, cov, extra)
        r = len(own)
        f = w / r
        name = design.name(t)
        names.append(name)
        dfs.append(r)
        stats.append(f)
        ps.append(float(f_sf(f, r, fit.df_resid)))
        try:
            row = table.row(name)
            cstats.append(np.nan if row.statistic is None else row.statistic)
            cps.append(np.nan if row.pvalue is None else row.pvalue)
        except KeyError:
            cstats.append(np.nan)
            cps.append(np.nan)
    notes.append("HC3 (MacKinnon and White 1985): each row's squared residual inflated by 1/(1 - leverage)^2; "
                 "F = Wald statistic / df on the residual df.")
    if kind == "III":
        notes.append("Type III with sum-to-zero coding: each term's coefficients tested in the full model.")
    if any(np.isfinite(p) and (p < results.spec.alpha) != (q < results.spec.alpha) for p, q in zip(cps, ps)):
        notes.append(f"The robust and classic tests disagree at alpha {results.spec.alpha:g} for at least one term: "
                     "the spreads may differ between cells.")
    return RobustTermTests(ss_type=kind, terms=tuple(names), df=tuple(dfs), statistic=np.asarray(stats),
                           pvalue=np.asarray(ps), classic_statistic=np.asarray(cstats, dtype=float),
                           classic_pvalue=np.asarray(cps, dtype=float), df_resid=fit.df_resid,
                           alpha=float(spec.alpha), notes=tuple(notes))

