"""Planned contrasts of a factor's level means: user weights and built-in sets.

A contrast is a weighted sum ``psi = sum_i c_i mu_i`` of the level means with weights
that sum to zero. Its estimate is ``c' m`` (level means, least-squares means or adjusted
means: :mod:`.level_means`), its standard error ``sqrt(c' V c)`` with ``V`` the means'
covariance (the model's residual mean square included), and ``t = psi / se`` on the
error df of those means (full-model residual df in factorial designs).

Built-in sets (all k - 1 contrasts unless said):

* each level against a control (``mu_i - mu_control``);
* each level against the mean of the later levels (``mu_i - mean(mu_{i+1}, ..., mu_k)``,
  in the factor's level order);
* orthogonal polynomials of ordered numeric levels (:mod:`.trends`).

Orthogonality is reported two ways: the weights are orthogonal (``sum c1 c2 = 0``, the
textbook condition for equal n) and the estimates are uncorrelated (``c1' V c2 = 0``, the
condition that matters with unequal n or least-squares means).

Family adjustment, named in the table: 'none', 'holm' (Holm 1979; intervals are
Bonferroni's, which Holm has none of its own), 'bonferroni', 'scheffe' (Scheffe 1953,
any contrast among the k means: ``F = t^2/(k-1)`` on (k - 1, df)) and, for the control
set of a one-factor study, 'dunnett' (Dunnett 1955, through
:func:`explorer.inference.comparisons.dunnett`). Intervals are 1 - alpha of the analysis
unless a confidence is given.

References
----------
Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and Analyzing
Data, 3rd ed., ch. 4-5 (contrasts, orthogonality with unequal n, Scheffe, Bonferroni).
Holm, S. (1979). Scand. J. Stat. 6, 65-70. Scheffe, H. (1953). Biometrika 40, 87-104.
Dunnett, C. W. (1955). JASA 50, 1096-1121.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from numbers import Real
from typing import Any

import numpy as np
import pandas as pd
from scipy import special

from ..engine.distributions import f_sf, t_ppf, t_two_sided_p
from ..engine.errors import DesignError, ExplorerError
from ..engine.pairwise import adjust_pvalues
from ..engine.results import Results
from ..engine.tables import html_table
from ..formatting import p_equals, show_df, show_measure, show_p, show_stat
from ..rendering import html_repr
from .level_means import LevelMeans, level_means

__all__ = [
    "check_weight_spec", "weight_sets", "MAX_CONTRASTS",
    "ADJUSTMENTS", "ContrastTable", "JointTest", "contrasts", "control_contrasts", "later_levels_contrasts",
    "contrast_table", "parse_weights",
]

ADJUSTMENTS = ("none", "holm", "bonferroni", "scheffe", "dunnett")

#: Contrasts one request may hold.
MAX_CONTRASTS = 1000


@dataclass(frozen=True, kw_only=True)
class JointTest:
    """An F test of several contrasts at once (Wald form ``psi' (C V C')^-1 psi / r``)."""

    label: str
    statistic: float | None
    df_num: int
    df_den: float
    pvalue: float | None

    def sentence(self) -> str:
        return (f"{self.label}: F = {show_stat(self.statistic)} on ({self.df_num}, {show_df(self.df_den)}) df, "
                f"{p_equals(self.pvalue)}.")


@dataclass(frozen=True, kw_only=True, eq=False)
class ContrastTable:
    """A family of contrasts of one factor's level means.

    Rows follow ``names``; ``weights`` is (contrasts x levels) over ``labels``.
    ``pvalue`` is each contrast's own p-value, ``adjusted`` the family-adjusted one
    (by ``adjustment``); intervals ``ci_low``/``ci_high`` are at ``confidence``, made
    simultaneous by ``interval_method``. ``correlation`` is the correlation matrix of the
    estimates; ``orthogonal`` says whether they are uncorrelated, ``weights_orthogonal``
    whether the weights are (sum c1 c2 = 0).
    """

    factor: str
    family: str
    means: str
    labels: tuple[str, ...]
    names: tuple[str, ...]
    weights: np.ndarray
    estimate: np.ndarray
    se: np.ndarray
    statistic: np.ndarray
    df: float
    pvalue: np.ndarray
    adjusted: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    confidence: float
    alpha: float
    adjustment: str
    interval_method: str
    correlation: np.ndarray
    orthogonal: bool
    weights_orthogonal: bool
    joint: tuple[JointTest, ...] = ()
    notes: tuple[str, ...] = field(default=())

    @property
    def significant(self) -> np.ndarray:
        """Which contrasts the family-adjusted p-value declares nonzero at the analysis alpha."""
        with np.errstate(invalid="ignore"):
            out: np.ndarray = np.asarray(self.adjusted < self.alpha) & np.isfinite(self.adjusted)
            return out

    @property
    def title(self) -> str:
        return (f"Contrasts of the {self.means} of {self.factor} ({self.family}): "
                f"{self.adjustment_label}, family of {len(self.names)}")

    @property
    def adjustment_label(self) -> str:
        return {"none": "no family adjustment", "holm": "Holm adjustment", "bonferroni": "Bonferroni adjustment",
                "scheffe": "Scheffe adjustment", "dunnett": "Dunnett adjustment"}[self.adjustment]

    def weights_text(self, i: int) -> str:
        """The contrast as text, e.g. ``+1 × '2' − 1 × '0.5'``."""
        parts = []
        for w, lab in zip(self.weights[i], self.labels):
            if w == 0:
                continue
            sign = "−" if w < 0 else "+"
            parts.append(f"{sign} {abs(w):.4g} × {lab!r}")
        text = " ".join(parts)
        return text[2:] if text.startswith("+ ") else text

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        frame = pd.DataFrame({
            "contrast": list(self.names),
            "weights": [self.weights_text(i) for i in range(len(self.names))],
            "estimate": self.estimate, "standard error": self.se, "t": self.statistic,
            "df": np.full(len(self.names), self.df), "p-value": self.pvalue,
            f"p-value ({self.adjustment})": self.adjusted,
            f"{pct} low ({self.interval_method})": self.ci_low,
            f"{pct} high ({self.interval_method})": self.ci_high,
        })
        return frame

    @html_repr
    def _repr_html_(self) -> str:
        notes = [j.sentence() for j in self.joint] + list(self.notes)
        return html_table(self.to_frame(), self.title, tuple(notes))

    def to_text(self) -> str:
        frame = self.to_frame()
        body = frame.astype(object).where(frame.notna(), "").to_string(index=False)
        extra = "\n".join([j.sentence() for j in self.joint] + list(self.notes))
        return f"{self.title}\n{body}" + (f"\n{extra}" if extra else "")

    def __repr__(self) -> str:
        rows = "; ".join(f"{n}: {show_measure(e)} (p {show_p(p)})" for n, e, p in zip(self.names, self.estimate, self.adjusted))
        return f"ContrastTable({self.factor!r}, {self.family}, {self.adjustment}: {rows})"


# ---------------------------------------------------------------------- weights
def _number(v: Any, where: str) -> float:
    if isinstance(v, bool) or not isinstance(v, (Real, np.integer, np.floating)):
        raise ExplorerError(f"{where}: a weight must be a number, not {v!r}")
    x = float(v)
    if not np.isfinite(x):
        raise ExplorerError(f"{where}: a weight must be a finite number, not {v!r}")
    return x


def _one(weights: Mapping[Any, Any], lm: LevelMeans, name: str) -> np.ndarray:
    if not isinstance(weights, Mapping) or not weights:
        raise ExplorerError(f"contrast {name!r}: give the weights as {{level: weight}}, e.g. {{'0.5': -1, '2': 1}}")
    c = np.zeros(len(lm.labels))
    for level, w in weights.items():
        i = lm.index(str(level) if not isinstance(level, str) else level, what=f"contrast {name!r}: level")
        c[i] += _number(w, f"contrast {name!r}, level {level!r}")
    _sum_check(c, name)
    return c


def _sum_check(c: np.ndarray, name: str) -> None:
    scale = float(np.max(np.abs(c))) if c.size else 0.0
    if scale == 0:
        raise ExplorerError(f"contrast {name!r} has every weight zero")
    if abs(float(np.sum(c / scale))) > 1e-9 * len(c):
        raise ExplorerError(
            f"contrast {name!r}: the weights sum to {float(np.sum(c)):.6g}, not zero; a contrast compares means, so "
            "its weights sum to zero (e.g. {'a': -1, 'b': 0.5, 'c': 0.5})"
        )


def weight_sets(spec: Any) -> list[tuple[str, Any]]:
    """``(name, {level: weight})`` pairs of a user's contrast specification (names may be empty); at most
    :data:`MAX_CONTRASTS` of them (their correlation matrix is contrasts x contrasts)."""
    if isinstance(spec, (Mapping, Sequence)) and not isinstance(spec, (str, bytes)) and len(spec) > MAX_CONTRASTS:
        many = isinstance(spec, Sequence) or all(isinstance(v, Mapping) for v in spec.values())
        if many:
            raise ExplorerError(f"{len(spec):,} contrasts in one request; at most {MAX_CONTRASTS:,} (ask for fewer, "
                                "or for a built-in set)")
    if isinstance(spec, Mapping) and spec and all(isinstance(v, Mapping) for v in spec.values()):
        return [(str(k), v) for k, v in spec.items()]
    if isinstance(spec, Mapping):
        return [("", spec)]
    if isinstance(spec, Sequence) and not isinstance(spec, (str, bytes)) and spec:
        return [(f"contrast {i + 1}", v) for i, v in enumerate(spec)]
    raise ExplorerError("contrasts are given as {level: weight}, {name: {level: weight}} or a list of "
                        f"{{level: weight}}; got {spec!r}")


def check_weight_spec(spec: Any) -> None:
    """The checks on contrast weights that need no data: shape, numbers, finite, not all zero, sum zero.

    Run when a request is made or read from a study file, so a broken request is refused
    before it is kept (the level names are checked against the data when it runs).
    """
    for name, w in weight_sets(spec):
        label = name or "contrast"
        if not isinstance(w, Mapping) or not w:
            raise ExplorerError(f"contrast {label!r}: give the weights as {{level: weight}}, e.g. {{'0.5': -1, '2': 1}}")
        _sum_check(np.array([_number(v, f"contrast {label!r}, level {k!r}") for k, v in w.items()]), label)


def parse_weights(spec: Any, lm: LevelMeans) -> tuple[tuple[str, ...], np.ndarray]:
    """Names and (contrasts x levels) weights from a user's contrast specification.

    ``spec`` is one mapping ``{level: weight}``, a mapping ``{name: {level: weight}}``, or a
    list of ``{level: weight}`` mappings (named 'contrast 1', 'contrast 2', ...).
    """
    items = weight_sets(spec)
    names, rows = [], []
    for name, w in items:
        c = _one(w, lm, name or "contrast")
        rows.append(c)
        names.append(name or _auto_name(c, lm.labels))
    if len(set(names)) != len(names):
        raise ExplorerError(f"two contrasts share the name {[n for n in names if names.count(n) > 1][0]!r}")
    return tuple(names), np.vstack(rows)


def _auto_name(c: np.ndarray, labels: tuple[str, ...]) -> str:
    pos = [lab for w, lab in zip(c, labels) if w > 0]
    neg = [lab for w, lab in zip(c, labels) if w < 0]
    return f"{' + '.join(pos)} vs {' + '.join(neg)}"


# ---------------------------------------------------------------------- the table
def _check_adjust(adjust: str, family: str, oneway: bool) -> str:
    a = str(adjust).lower()
    if a not in ADJUSTMENTS:
        raise ExplorerError(f"adjust must be one of {list(ADJUSTMENTS)}, not {adjust!r}")
    if a == "dunnett" and not (family == "each level vs a control" and oneway):
        raise ExplorerError("the Dunnett adjustment is for each level against a control in a one-factor study; "
                            "use 'holm', 'bonferroni' or 'scheffe'")
    return a


def _wald(c: np.ndarray, est: np.ndarray, v: np.ndarray, df: float, label: str) -> JointTest:
    cv = c @ v @ c.T
    r = int(np.linalg.matrix_rank(cv))
    if r == 0:
        return JointTest(label=label, statistic=None, df_num=0, df_den=df, pvalue=None)
    w = float(est @ np.linalg.pinv(cv) @ est)
    f = w / r
    return JointTest(label=label, statistic=f, df_num=r, df_den=df, pvalue=float(f_sf(f, r, df)))


def contrast_table(
    results: Results,
    lm: LevelMeans,
    names: Sequence[str],
    weights: np.ndarray,
    *,
    family: str,
    adjust: str | None = None,
    confidence: float | None = None,
    joint: Sequence[tuple[str, np.ndarray]] = (),
    notes: Sequence[str] = (),
    control: str | None = None,
) -> ContrastTable:
    """Estimates, tests and intervals of the contrasts ``weights`` (rows) of the means ``lm``."""
    c = np.atleast_2d(np.asarray(weights, dtype=float))
    m, k = c.shape
    alpha = float(results.spec.alpha)
    conf = 1 - alpha if confidence is None else float(confidence)
    if not 0 < conf < 1:
        raise ExplorerError(f"confidence must be between 0 and 1, not {confidence!r}")
    adj = _check_adjust(adjust if adjust is not None else ("none" if m == 1 else "holm"), family,
                        results.spec.is_oneway)
    # Each contrast is computed with its weights scaled to a largest weight of 1 and the estimate and
    # standard error scaled back: t and p do not depend on the scale, and weights near 1e300 or 1e-300
    # neither overflow nor underflow the variance.
    scale = np.max(np.abs(c), axis=1)
    cn = c / scale[:, None]
    est_n = cn @ lm.shifted  # weights sum to zero: the offset cancels
    cov = cn @ lm.covariance @ cn.T
    var = np.diag(cov).copy()
    se_n = np.sqrt(np.maximum(var, 0.0))
    df = lm.df
    out_notes = list(notes)
    if not np.all(se_n > 0):
        raise DesignError("the contrasts have no standard error: the residual mean square is zero "
                          "(every observation equals its fitted value)")
    t = est_n / se_n
    with np.errstate(over="ignore"):
        est, se = est_n * scale, se_n * scale
    if not (np.all(np.isfinite(est)) and np.all(np.isfinite(se))):
        raise ExplorerError(f"contrast weights as large as {float(np.max(scale)):g} put the estimate beyond the range "
                            "of floating point; scale the weights down (t and p do not depend on the scale)")
    p = np.asarray(t_two_sided_p(t, df), dtype=float)
    interval = {"none": "per contrast", "holm": "Bonferroni", "bonferroni": "Bonferroni", "scheffe": "Scheffe",
                "dunnett": "Dunnett"}[adj]
    if adj in ("none", "holm", "bonferroni"):
        padj = adjust_pvalues(p, adj)
        crit = float(t_ppf(1 - (1 - conf) / (2 * (1 if adj == "none" else m)), df))
        if adj == "holm" and m > 1:
            out_notes.append("Holm's procedure has no simultaneous intervals of its own; the intervals shown are "
                             "Bonferroni's (wider), so an interval may reach zero where Holm's p-value is below alpha.")
    elif adj == "scheffe":
        r = k - 1
        padj = np.asarray(f_sf(t * t / r, r, df), dtype=float)
        crit = float(np.sqrt(r * special.fdtri(r, df, conf)))
        out_notes.append(f"Scheffe: protects every contrast among the {k} means (F on {r} and {show_df(df)} df), "
                         "including ones chosen after seeing the data.")
    else:  # dunnett, one-way control set
        from .comparisons import dunnett

        table = dunnett(results, str(control), confidence=conf)
        order = [table.first.index(lab) for lab in _treatments(c, lm.labels)]
        padj = np.asarray(table.pvalue)[order]
        lo, hi = np.asarray(table.ci_low)[order], np.asarray(table.ci_high)[order]
        crit = None
    if crit is not None:
        lo, hi = est - crit * se, est + crit * se
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.sqrt(np.outer(var, var))
    off = ~np.eye(m, dtype=bool)
    orth = bool(m == 1 or np.all(np.abs(corr[off]) < 1e-9))
    w_orth = bool(m == 1 or np.all(np.abs((cn @ cn.T)[off]) < 1e-9))
    if m > 1:
        if orth:
            out_notes.append("The estimates are uncorrelated (orthogonal contrasts under this design).")
        elif w_orth:
            out_notes.append("The weights are orthogonal (sum of products zero) but the estimates are correlated "
                             "under this design (unequal counts or adjusted means); see correlation.")
        else:
            out_notes.append("The contrasts are not orthogonal: their estimates are correlated (see correlation).")
    joints = tuple(_wald(jc, jc @ lm.shifted, lm.covariance, df, label) for label, jc in joint)
    return ContrastTable(
        factor=lm.factor, family=family, means=lm.kind, labels=lm.labels, names=tuple(names), weights=c,
        estimate=est, se=se, statistic=t, df=df, pvalue=p, adjusted=np.clip(padj, 0.0, 1.0), ci_low=lo, ci_high=hi,
        confidence=conf, alpha=alpha, adjustment=adj, interval_method=interval, correlation=corr, orthogonal=orth,
        weights_orthogonal=w_orth, joint=joints, notes=tuple(out_notes),
    )


def _treatments(c: np.ndarray, labels: tuple[str, ...]) -> list[str]:
    return [labels[int(np.argmax(row))] for row in c]


def contrasts(results: Results, factor: str | None, weights: Any, *, adjust: str | None = None,
              confidence: float | None = None) -> ContrastTable:
    """User-defined contrasts of ``factor``'s means.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    factor : str or None
        The factor whose level means are compared (``None``: the study's first factor).
    weights : mapping or list of mappings
        One ``{level: weight}`` (weights summing to zero; levels left out weigh 0), a
        mapping ``{name: {level: weight}}``, or a list of ``{level: weight}``.
    adjust : {'holm', 'bonferroni', 'scheffe', 'dunnett', 'none'}, optional
        Family-wise adjustment over the contrasts (default: none for one contrast,
        Holm's for several).
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    ContrastTable
        Each contrast's estimate, standard error, t, p-value (and adjusted p-value) and
        interval; a joint F test of the whole set when it has several.

    References
    ----------
    Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and
    Analyzing Data, 3rd ed., ch. 4-5.
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J.
    Stat. 6, 65-70.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> table = ex.stats.contrasts(results, "nozzle", {"B": 1, "A": -0.5, "C": -0.5})
    >>> round(float(table.estimate[0]), 3), bool(table.pvalue[0] < 0.001)
    (1.262, True)
    """
    lm = level_means(results, factor)
    names, c = parse_weights(weights, lm)
    joint = [("All these contrasts zero at once", c)] if len(names) > 1 else []
    return contrast_table(results, lm, names, c, family="user-defined", adjust=adjust, confidence=confidence,
                          joint=joint)


def control_contrasts(results: Results, factor: str | None, control: str, *, adjust: str | None = None,
                      confidence: float | None = None) -> ContrastTable:
    """Each level against ``control`` (``mu_i - mu_control``).

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    factor : str or None
        The factor whose level means are compared (``None``: the study's first factor).
    control : str
        The reference level.
    adjust : str, optional
        Dunnett's adjustment by default in a one-factor study, Holm's otherwise.
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    ContrastTable
        One contrast per other level.

    References
    ----------
    Dunnett, C. W. (1955). A multiple comparison procedure for comparing several
    treatments with a control. JASA 50, 1096-1121.
    Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and
    Analyzing Data, 3rd ed., ch. 4-5.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> table = ex.stats.control_contrasts(results, "nozzle", "A")
    >>> table.names, table.adjustment
    (('B vs A', 'C vs A'), 'dunnett')
    """
    lm = level_means(results, factor)
    c0 = lm.index(control, what="control level")
    rows, names = [], []
    for i, lab in enumerate(lm.labels):
        if i == c0:
            continue
        w = np.zeros(len(lm.labels))
        w[i], w[c0] = 1.0, -1.0
        rows.append(w)
        names.append(f"{lab} vs {lm.labels[c0]}")
    if not rows:
        raise DesignError(f"{lm.factor!r} has no level besides the control {control!r} in this view")
    default = "dunnett" if results.spec.is_oneway and len(rows) > 1 else ("none" if len(rows) == 1 else "holm")
    return contrast_table(results, lm, names, np.vstack(rows), family="each level vs a control",
                          adjust=adjust or default, confidence=confidence, control=lm.labels[c0])


def later_levels_contrasts(results: Results, factor: str | None, *, adjust: str | None = None,
                           confidence: float | None = None) -> ContrastTable:
    """Each level against the mean of the levels after it, in the factor's level order.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    factor : str or None
        The factor whose level means are compared (``None``: the study's first factor).
    adjust : {'holm', 'bonferroni', 'scheffe', 'dunnett', 'none'}, optional
        Family-wise adjustment over the contrasts (default: none for one contrast,
        Holm's for several).
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    ContrastTable
        The k - 1 contrasts; with equal counts (one factor) the set is orthogonal and
        the table says whether it is here.

    References
    ----------
    Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and
    Analyzing Data, 3rd ed., ch. 4-5. (Helmert-type contrasts)

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("oven"), "hardness", "temperature").results
    >>> table = ex.stats.later_levels_contrasts(results, "temperature")
    >>> len(table.names), table.orthogonal
    (3, True)
    """
    lm = level_means(results, factor)
    k = len(lm.labels)
    rows, names = [], []
    for i in range(k - 1):
        w = np.zeros(k)
        w[i] = 1.0
        w[i + 1:] = -1.0 / (k - i - 1)
        rows.append(w)
        later = lm.labels[i + 1] if i == k - 2 else f"mean of {', '.join(lm.labels[i + 1:])}"
        names.append(f"{lm.labels[i]} vs {later}")
    return contrast_table(results, lm, names, np.vstack(rows), family="each level vs the mean of later levels",
                          adjust=adjust, confidence=confidence)

