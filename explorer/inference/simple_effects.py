"""Simple effects: the test of one factor at each level of another, on the full model.

When the effect of A depends on B, the main effect of A (an average over B) can hide
effects of opposite sign; the question becomes *does A matter at each level of B?* The
answer here keeps the full model: the cell means are the model's least-squares means of
each (A, B) combination (averaged with equal weight over any other factors and blocks),
and the test of A at level b is the Wald F of "all A means at b are equal",
``F = (C m)' (C V C')^-1 (C m) / (a - 1)``, with ``V`` the means' covariance from the
full model's residual mean square, on (a - 1, residual df) degrees of freedom. For a
two-factor model with interaction this is the classic simple-effects F: the sum of squares
of A within level b over (a - 1), divided by the full model's residual mean square
(Kirk 2013, sec. 9.6; Maxwell, Delaney and Kelley 2018, ch. 7). The tests at the levels of
B form a family; their p-values are adjusted family-wise (Holm 1979 by default) and the
adjustment is stated.

:meth:`SimpleEffects.pairs` compares the levels of A two at a time at each level of B:
the difference of two least-squares cell means, its standard error from the same
covariance (full model's residual mean square), t on the residual df. The family and its
adjustment are stated: Holm or Bonferroni over every comparison at every level of B (one
family of ``b a (a - 1) / 2``), Tukey-Kramer's studentized range of ``a`` means at each
level of B (a family per level, the levels of B not adjusted against one another), or
none. Intervals are at ``1 - alpha`` with the matching simultaneous critical value
(Bonferroni's for Holm, whose step-down has no simple intervals).

References
----------
Kirk, R. E. (2013). Experimental Design: Procedures for the Behavioral Sciences, 4th ed.
SAGE, sec. 9.6 (simple main effects with the pooled error term).
Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and Analyzing
Data, 3rd ed. Routledge, ch. 7.
Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
Statist. 6, 65-70.
Searle, S. R., Speed, F. M. and Milliken, G. A. (1980). Population marginal means in the
linear model. The American Statistician 34, 216-221.
Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
numbers of replications. Biometrics 12, 307-310.
Hayter, A. J. (1984). A proof of the conjecture that the Tukey-Kramer multiple
comparisons procedure is conservative. Ann. Statist. 12, 61-75.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..engine.cellfit import CellFit, fit_cells
from ..engine.distributions import f_sf, t_ppf, t_two_sided_p
from ..engine.errors import DesignError, ExplorerError, closest_names
from ..engine.pairwise import adjust_pvalues
from ..engine.results import Results
from ..engine.spec import alpha_or
from ..engine.studentized_range import srange_ppf, srange_sf
from ..engine.tables import html_table
from ..formatting import p_equals, show_ss
from ..rendering import block, html_repr

__all__ = ["ADJUSTMENTS", "PAIR_ADJUSTMENTS", "PAIRS_SHOWN", "SimpleEffects", "SimplePairs", "simple_effects"]

#: Family-wise adjustments offered for the tests at the levels of the second factor.
ADJUSTMENTS = {"holm": "Holm (1979) step-down", "bonferroni": "Bonferroni", "none": "none (each test at alpha)"}
#: Adjustments offered for the pairwise comparisons within the simple effects.
PAIR_ADJUSTMENTS = {**ADJUSTMENTS, "tukey": "Tukey-Kramer (studentized range)"}
#: Most pairwise comparisons shown beside the simple effects (more: ``.pairs()`` lists them).
PAIRS_SHOWN = 60


@dataclass(frozen=True, kw_only=True, eq=False)
class SimplePairs:
    """Every pair of levels of ``factor`` compared at each level of ``within`` (least-squares means).

    ``table`` has one line per comparison: the level of ``within``, the two levels, the
    difference (first minus second), its standard error, t on ``df`` (the full model's
    residual df), the unadjusted and adjusted p-values, the interval at ``confidence``
    and whether the adjusted p is below ``alpha``. ``family`` says what the adjustment
    covers.
    """

    factor: str
    within: str
    table: pd.DataFrame
    adjustment: str
    family: str
    family_size: int
    df: int
    alpha: float
    confidence: float
    notes: tuple[str, ...] = field(default=())

    @property
    def title(self) -> str:
        return (f"Pairs of {self.factor} at each level of {self.within} ({PAIR_ADJUSTMENTS[self.adjustment]}; "
                f"{self.family})")

    def to_frame(self) -> pd.DataFrame:
        return self.table.copy()

    @html_repr
    def _repr_html_(self) -> str:
        return block("simple-pairs", [html_table(self.table, self.title, self.notes)])


@dataclass(frozen=True, kw_only=True, eq=False)
class SimpleEffects:
    """The test of ``factor`` at each level of ``within`` (arrays follow ``levels``), and the cell means.

    ``pvalue`` are the unadjusted p-values, ``adjusted_pvalue`` the family-wise adjusted
    ones (``adjustment`` over ``family_size`` tests); ``significant`` reads the adjusted
    ones at ``alpha``. ``cells`` has one line per (``within`` level, ``factor`` level):
    least-squares mean, standard error, interval at ``confidence``, count and raw mean.
    ``interaction_pvalue`` is the full model's test of the interaction of the two
    factors (``None`` when the model has no such term).
    """

    factor: str
    within: str
    levels: tuple[str, ...]
    statistic: np.ndarray
    df_num: np.ndarray
    df_den: int
    pvalue: np.ndarray
    adjusted_pvalue: np.ndarray
    adjustment: str
    family_size: int
    alpha: float
    ms_resid: float
    confidence: float
    cells: pd.DataFrame
    interaction: str | None
    interaction_pvalue: float | None
    notes: tuple[str, ...] = field(default=())
    factor_levels: tuple[str, ...] = ()
    means: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    covariance: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)), repr=False)

    def pairs(self, *, adjust: str = "holm", alpha: float | None = None,
              confidence: float | None = None) -> SimplePairs:
        """Every pair of levels of ``factor`` at each level of ``within``, on the full model.

        Parameters
        ----------
        adjust : {'holm', 'bonferroni', 'tukey', 'none'}, default 'holm'
            Holm or Bonferroni over every comparison at every level of ``within`` (one
            family); 'tukey': Tukey-Kramer's studentized range of the ``factor`` means at
            each level of ``within`` (one family per level); 'none'.
        alpha : float, optional
            Level of the verdicts (default the simple effects').
        confidence : float, optional
            Level of the intervals (default ``1 - alpha``).

        Returns
        -------
        SimplePairs
            Differences of least-squares cell means with standard errors from the full
            model's residual mean square, t, p-values, adjusted p-values and intervals.

        References
        ----------
        Kirk, R. E. (2013). Experimental Design, 4th ed., sec. 9.6.
        Kramer, C. Y. (1956). Biometrics 12, 307-310.
        Holm, S. (1979). Scand. J. Statist. 6, 65-70.
        """
        if adjust not in PAIR_ADJUSTMENTS:
            raise ExplorerError(f"adjust must be one of {list(PAIR_ADJUSTMENTS)}, not {adjust!r}")
        level = alpha_or(alpha, self.alpha)
        conf = 1 - level if confidence is None else float(confidence)
        if not 0 < conf < 1:
            raise ExplorerError(f"confidence must be between 0 and 1, not {confidence!r}")
        fa, fb = self.factor_levels, self.levels
        a, b = len(fa), len(fb)
        first, second = np.triu_indices(a, 1)
        rows = []
        for j in range(b):
            for i, k in zip(first, second):
                u, v = i * b + j, k * b + j
                d = float(self.means[u] - self.means[v])
                var = float(self.covariance[u, u] + self.covariance[v, v] - 2 * self.covariance[u, v])
                rows.append((fb[j], fa[i], fa[k], d, float(np.sqrt(max(var, 0.0)))))
        frame = pd.DataFrame(rows, columns=[self.within, "first", "second", "difference", "standard error"])
        diff, se = frame["difference"].to_numpy(), frame["standard error"].to_numpy()
        with np.errstate(divide="ignore", invalid="ignore"):
            t = diff / se
        df = float(self.df_den)
        p = np.asarray(t_two_sided_p(t, df), dtype=float)
        m = int(np.isfinite(p).sum())
        per_level = a * (a - 1) // 2
        if adjust == "tukey":
            adjusted = np.asarray(srange_sf(np.sqrt(2.0) * np.abs(t), a, df), dtype=float).reshape(-1)
            crit = float(np.asarray(srange_ppf(conf, a, df)).reshape(-1)[0]) / np.sqrt(2.0)
            family = f"a family of {per_level} pairs at each of the {b} levels of {self.within}"
        else:
            adjusted = adjust_pvalues(p, adjust)
            tail = (1 - conf) / 2 / (m if adjust != "none" else 1)
            crit = float(t_ppf(1 - tail, df))
            family = (f"one family of {m} comparisons over every level of {self.within}" if adjust != "none"
                      else "each comparison at alpha")
        pct = f"{conf:.0%}"
        frame["t"] = t
        frame["p-value"] = p
        frame[f"p-value ({adjust})"] = adjusted
        frame[f"{pct} CI low"] = diff - crit * se
        frame[f"{pct} CI high"] = diff + crit * se
        frame["significant"] = np.isfinite(adjusted) & (adjusted < level)
        notes = [f"Differences of least-squares cell means; standard errors from the full model's residual mean "
                 f"square ({show_ss(self.ms_resid)} on {self.df_den} df), t on {self.df_den} df."]
        if adjust == "holm":
            notes.append("Holm's step-down has no simple intervals: the intervals are Bonferroni's over the same "
                         "family.")
        if adjust == "tukey":
            notes.append(f"Tukey-Kramer: studentized range of {a} means on {self.df_den} df at each level of "
                         f"{self.within}, with each pair's own standard error; exact for balanced cells, Kramer's "
                         "(1956) approximation otherwise (shown conservative for independent means, Hayter 1984).")
        if self.interaction is None:
            notes.append(f"The model has no {self.factor} × {self.within} term, so the differences are the same at "
                         f"every level of {self.within}.")
        return SimplePairs(factor=self.factor, within=self.within, table=frame, adjustment=adjust, family=family,
                           family_size=m if adjust != "tukey" else per_level, df=self.df_den, alpha=level,
                           confidence=conf, notes=tuple(notes))

    @property
    def significant(self) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            out: np.ndarray = np.isfinite(self.adjusted_pvalue) & (self.adjusted_pvalue < self.alpha)
            return out

    def verdicts(self) -> list[str]:
        """One plain line per level of ``within``."""
        out = []
        for lv, p, sig in zip(self.levels, self.adjusted_pvalue, self.significant):
            if not np.isfinite(p):
                out.append(f"{self.factor} at {self.within} = {lv}: no test")
            else:
                word = "differences detected" if sig else "no differences detected"
                out.append(f"{self.factor} at {self.within} = {lv}: {word} (adjusted {p_equals(float(p))})")
        return out

    def to_frame(self) -> pd.DataFrame:
        """One line per level of ``within``: F, df, p, adjusted p, verdict."""
        return pd.DataFrame({
            self.within: list(self.levels),
            "F": self.statistic,
            "df (term)": self.df_num,
            "df (residual)": self.df_den,
            "p-value": self.pvalue,
            f"p-value ({self.adjustment})": self.adjusted_pvalue,
            "significant": self.significant,
        })

    def cells_frame(self) -> pd.DataFrame:
        return self.cells.copy()

    @html_repr
    def _repr_html_(self) -> str:
        cap = (f"Simple effects of {self.factor} at each level of {self.within} (full model's residual mean square, "
               f"{self.df_den} df; {ADJUSTMENTS[self.adjustment]} adjustment over {self.family_size} tests)")
        pct = f"{self.confidence:.0%}"
        parts = [html_table(self.to_frame(), cap, self.notes),
                 html_table(self.cells, f"Cell means (least squares) with {pct} intervals")]
        shown = self.shown_pairs()
        if shown is not None:
            parts.append(html_table(shown.to_frame(), shown.title, shown.notes))
        return block("simple-effects", parts)

    def shown_pairs(self) -> SimplePairs | None:
        """The pairs shown beside the simple effects (Holm over one family), or ``None`` when there are more
        than :data:`PAIRS_SHOWN` comparisons (``.pairs()`` lists them)."""
        a, b = len(self.factor_levels), len(self.levels)
        if a < 2 or b * a * (a - 1) // 2 > PAIRS_SHOWN:
            return None
        return self.pairs()


def _layout(results: Results) -> tuple[tuple[str, ...], list[tuple[str, ...]], np.ndarray]:
    """Columns, levels and cell level codes of the fitted cells, rebuilt from the results."""
    if results.cells is None:
        raise ExplorerError("simple effects need a study with two or more factors")
    cells = results.cells
    columns = tuple(cells.columns)
    levels: list[tuple[str, ...]] = []
    for j, c in enumerate(columns):
        seen = list(dict.fromkeys(lab[j] for lab in cells.labels))
        order = results.marginal_means[c].labels if c in results.marginal_means else tuple(seen)
        levels.append(tuple(lv for lv in order if lv in seen))
    codes = np.array([[levels[j].index(lab[j]) for j in range(len(columns))] for lab in cells.labels], dtype=np.int64)
    return columns, levels, codes


def _cell_rows(fit: CellFit, factor: str, within: str, a: int, b: int) -> np.ndarray:
    """Rows L of the least-squares means of every (factor level, within level), averaged over other columns."""
    design = fit.design
    L = np.zeros((a * b, design.n_params))
    L[:, 0] = 1.0
    pair = {factor, within}
    for t in design.terms:
        if not set(t) <= pair:
            continue  # terms of other columns average to zero under sum-to-zero coding
        for i in range(a):
            for j in range(b):
                row = np.ones(1)
                for name in t:
                    row = np.kron(row, design.contrasts[name][i if name == factor else j])
                L[i * b + j, design.slices[t]] = row
    return L


def simple_effects(results: Results, factor: str, within: str, *, adjust: str = "holm",
                   alpha: float | None = None, confidence: float | None = None) -> SimpleEffects:
    """The test of ``factor`` at each level of ``within`` with the full model's residual mean square.

    Parameters
    ----------
    results : Results
        Results of a multi-factor study (two or more treatment factors).
    factor, within : str
        Two different treatment factors.
    adjust : {'holm', 'bonferroni', 'none'}, default 'holm'
        Family-wise adjustment over the levels of ``within``.
    alpha : float, optional
        Level of the verdicts (default the study's).
    confidence : float, optional
        Level of the cell-mean intervals (default ``1 - alpha``).

    Returns
    -------
    SimpleEffects
        F, df, p-value and adjusted p-value of ``factor`` at each level of ``within``,
        the least-squares cell means with intervals, and the interaction's p-value.

    References
    ----------
    Kirk, R. E. (2013). Experimental Design, 4th ed., sec. 9.6 (simple main effects
    with the pooled error term).
    Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and
    Analyzing Data, 3rd ed., ch. 7.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("lines"), "thickness_um", ["nozzle", "speed"]).results
    >>> effects = ex.stats.simple_effects(results, "speed", "nozzle")
    >>> effects.levels, effects.adjusted_pvalue.round(4).tolist()
    (('A', 'B', 'C'), [0.2922, 0.0249, 0.0096])
    """
    spec = results.spec
    a_level = alpha_or(alpha, spec.alpha)
    conf = 1 - a_level if confidence is None else float(confidence)
    if adjust not in ADJUSTMENTS:
        raise ExplorerError(f"adjust must be one of {list(ADJUSTMENTS)}, not {adjust!r}")
    if len(spec.factors) < 2:
        raise ExplorerError(f"simple effects need a study with two or more factors; this one has {list(spec.factors)}")
    if spec.is_mixed:
        raise DesignError("simple effects here use the residual mean square of a fixed-effects model; this model tests "
                          "its terms against other error terms (random, nested or subject terms), so they are not "
                          "offered for it")
    for name in (factor, within):
        if name not in spec.factors:
            near = closest_names(str(name), spec.factors)
            hint = f" Did you mean {near[0]!r}?" if near else ""
            raise ExplorerError(f"{name!r} is not a treatment factor of this study ({list(spec.factors)}).{hint}")
    if factor == within:
        raise ExplorerError("simple effects need two different factors: the one tested and the one it is tested within")
    columns, levels, codes = _layout(results)
    fit = fit_cells(results.groups, codes, columns, [len(lv) for lv in levels], spec)
    ms = results.ms_resid
    if not ms or not ms > 0:
        raise DesignError("the residual mean square is zero, so the simple effects have no F test")
    fa, fb = levels[columns.index(factor)], levels[columns.index(within)]
    a, b = len(fa), len(fb)
    L = _cell_rows(fit, factor, within, a, b)
    est = L @ fit.coef + fit.stats.offset
    cov = ms * (L @ fit.cov_unscaled @ L.T)
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    half = t_ppf(0.5 + conf / 2, fit.df_resid) * se
    stat = np.full(b, np.nan)
    df_num = np.full(b, a - 1, dtype=np.int64)
    notes: list[str] = []
    jf, jw = columns.index(factor), columns.index(within)
    for j in range(b):
        idx = [i * b + j for i in range(a)]
        present = [i for i in range(a) if np.any((codes[:, jf] == i) & (codes[:, jw] == j))]
        C = np.zeros((a - 1, a))
        C[:, :-1] = np.eye(a - 1)
        C[:, -1] = -1.0
        m, V = est[idx], cov[np.ix_(idx, idx)]
        d, S = C @ m, C @ V @ C.T
        stat[j] = float(d @ np.linalg.solve(S, d)) / (a - 1)
        if len(present) < a:
            notes.append(f"At {within} = {fb[j]} some levels of {factor} have no observations; their means come from "
                         "the model (additive parts only).")
    p = np.asarray(f_sf(stat, df_num.astype(float), float(fit.df_resid)), dtype=float)
    adjusted = adjust_pvalues(p, adjust)
    n_cell = np.zeros(a * b)
    raw = np.full(a * b, np.nan)
    tab = results.cells
    for c, lab in enumerate(tab.labels):  # type: ignore[union-attr]
        i, j = fa.index(lab[jf]), fb.index(lab[jw])
        prev = n_cell[i * b + j]
        n_cell[i * b + j] += tab.n[c]  # type: ignore[union-attr]
        raw[i * b + j] = (np.nan_to_num(raw[i * b + j]) * prev + tab.mean[c] * tab.n[c]) / n_cell[i * b + j]  # type: ignore[union-attr]
    pct = f"{conf:.0%}"
    order = [i * b + j for j in range(b) for i in range(a)]  # by level of `within`, then of `factor`
    cells = pd.DataFrame({
        within: [fb[j] for j in range(b) for _ in range(a)],
        factor: [fa[i] for _ in range(b) for i in range(a)],
        "n": n_cell[order].astype(np.int64), "raw mean": raw[order], "mean (least squares)": est[order],
        "standard error": se[order], f"{pct} CI low": (est - half)[order], f"{pct} CI high": (est + half)[order],
    })
    inter = None
    inter_p = None
    for t in fit.terms:
        if set(t) == {factor, within}:
            inter = " × ".join(t)
            inter_p = results.partition.row(inter).pvalue
    if inter is None:
        notes.append(f"The model has no {factor} × {within} term, so the effect of {factor} is the same at every level "
                     f"of {within}: these tests differ only in precision.")
    others = [c for c in columns if c not in (factor, within)]
    if others:
        notes.append(f"Cell means are averaged with equal weight over {', '.join(others)}.")
    notes.append(f"Tests use the full model's residual mean square ({show_ss(ms)} on {fit.df_resid} df); the family is "
                 f"the {b} tests at the levels of {within}, adjusted by {ADJUSTMENTS[adjust]}.")
    return SimpleEffects(
        factor=factor, within=within, levels=fb, statistic=stat, df_num=df_num, df_den=int(fit.df_resid), pvalue=p,
        adjusted_pvalue=adjusted, adjustment=adjust, family_size=int(np.isfinite(p).sum()), alpha=a_level,
        ms_resid=float(ms), confidence=conf, cells=cells, interaction=inter, interaction_pvalue=inter_p,
        notes=tuple(notes), factor_levels=fa, means=est, covariance=cov,
    )
