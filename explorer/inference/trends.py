"""Polynomial trend of ordered numeric levels: orthogonal polynomial contrasts.

For levels with numeric values x_1 < ... < x_k (doses, temperatures; spacing may be
unequal) the degree-j contrast is the degree-j polynomial in x that is orthogonal to
every polynomial of lower degree, by Gram-Schmidt on 1, x, x^2, ... under the inner
product ``sum_i w_i a(x_i) b(x_i)``, with contrast weights ``c_j = w * P_j(x)`` (so they
sum to zero):

* ``weighting='equal'`` (default): w_i = 1. The hypotheses concern the population means
  and do not depend on the sample sizes; with unequal counts (or least-squares means)
  the estimates are correlated and their sums of squares do not add up to the factor's
  (the table says so).
* ``weighting='counts'`` (one factor only): w_i = n_i. The estimates are uncorrelated
  and the degree sums of squares add up to the between-levels sum of squares (an
  orthogonal split of it), but the hypotheses are about count-weighted means.

Each contrast is scaled so its largest weight is 1 in absolute value (t and p do not
depend on the scale). Beyond the degrees shown, the departure from a polynomial of that
degree is one F test of the remaining orthogonal contrasts.

References
----------
Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and Analyzing
Data, 3rd ed., ch. 6 (trend analysis; unequal spacing and unequal n).
Robson, D. S. (1959). A simple method for constructing orthogonal polynomials when the
independent variable is unequally spaced. Biometrics 15, 187-191.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ..engine.errors import ExplorerError
from ..engine.results import Results
from .contrasts import ContrastTable, contrast_table
from .level_means import LevelMeans, level_means

__all__ = ["DEGREE_NAMES", "orthogonal_polynomials", "trend"]

DEGREE_NAMES = {1: "linear", 2: "quadratic", 3: "cubic", 4: "quartic", 5: "quintic"}


def orthogonal_polynomials(x: np.ndarray, weights: np.ndarray | None = None, degree: int | None = None) -> np.ndarray:
    """(degree x k) contrast weights of orthogonal polynomials at the points ``x``.

    Row j - 1 holds ``w * P_j(x)`` scaled to a largest absolute weight of 1, with its last
    nonzero weight positive. ``x`` must have distinct values.
    """
    x = np.asarray(x, dtype=float)
    k = x.size
    w = np.ones(k) if weights is None else np.asarray(weights, dtype=float)
    d = k - 1 if degree is None else int(degree)
    if len(np.unique(x)) != k:
        raise ExplorerError("the level values must be distinct to define a polynomial trend")
    if not 1 <= d <= k - 1:
        raise ExplorerError(f"the degree must be between 1 and {k - 1} (one less than the number of levels), not {degree!r}")
    z = (x - np.average(x, weights=w)) / (np.ptp(x) or 1.0)
    vander = np.vander(z, d + 1, increasing=True)
    sw = np.sqrt(w)
    q, _ = np.linalg.qr(sw[:, None] * vander)
    # columns of q are sqrt(w) * P_j(x), orthonormal; P_j(x) = q_j / sqrt(w)
    rows = []
    for j in range(1, d + 1):
        c = sw * q[:, j]  # w * P_j = sqrt(w) * q_j
        c = c / np.max(np.abs(c))
        c[np.abs(c) < 1e-12] = 0.0
        last = c[np.flatnonzero(c)[-1]]
        rows.append(c if last > 0 else -c)
    return np.vstack(rows)


def _level_values(lm: LevelMeans, values: Mapping[Any, Any] | None) -> np.ndarray:
    if values is None:
        out = []
        for lab in lm.labels:
            try:
                out.append(float(lab))
            except ValueError:
                raise ExplorerError(
                    f"the levels of {lm.factor!r} are not numbers ({lab!r}); give their values, e.g. "
                    f"values={{{lm.labels[0]!r}: 0.5, ...}}"
                ) from None
        x = np.asarray(out)
    else:
        if not isinstance(values, Mapping):
            raise ExplorerError("values is a mapping {level: number}")
        missing = [lab for lab in lm.labels if lab not in values and str(lab) not in values]
        if missing:
            raise ExplorerError(f"values has no number for level(s) {missing} of {lm.factor!r}")
        raw = [values.get(lab, values.get(str(lab))) for lab in lm.labels]
        for lab, v in zip(lm.labels, raw):
            if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, float, np.integer, np.floating)):
                raise ExplorerError(f"values: the value of level {lab!r} must be a number, not {v!r}")
        x = np.asarray(raw, dtype=float)
    if not np.all(np.isfinite(x)):
        raise ExplorerError(f"the level values of {lm.factor!r} must be finite numbers, not {x.tolist()}")
    return x


def trend(
    results: Results,
    factor: str | None = None,
    *,
    degree: int | None = None,
    values: Mapping[Any, Any] | None = None,
    weighting: str = "equal",
    adjust: str | None = None,
    confidence: float | None = None,
) -> ContrastTable:
    """Linear, quadratic, ... trend of ``factor``'s means over its numeric level values.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``) of a one-factor or fixed-effects factorial study.
    factor : str, optional
        The factor (default the study's first).
    degree : int, optional
        Highest power; min(k - 1, 3) when not given.
    values : mapping, optional
        Level -> number, when the labels are not numbers (or to use other values).
    weighting : {'equal', 'counts'}, default 'equal'
        Orthogonal over the levels ('equal') or over the observations ('counts').
    adjust : str, optional
        Holm's adjustment by default, named in the table.
    confidence : float, optional
        Coverage of the intervals; ``1 - alpha`` of the analysis when not given.

    Returns
    -------
    ContrastTable
        One orthogonal-polynomial contrast per degree (unequal spacing and counts
        handled); joint tests of the departure from the fitted degree (when k - 1 >
        degree) and of the whole trend set.

    References
    ----------
    Maxwell, S. E., Delaney, H. D. and Kelley, K. (2018). Designing Experiments and
    Analyzing Data, 3rd ed., ch. 6.
    Robson, D. S. (1959). A simple method for constructing orthogonal polynomials when
    the independent variable is unequally spaced. Biometrics 15, 187-191.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("oven"), "hardness", "temperature").results
    >>> table = ex.stats.trend(results, "temperature", degree=2)
    >>> table.names, [bool(p < 0.05) for p in table.pvalue]
    (('linear', 'quadratic'), [True, True])
    """
    lm = level_means(results, factor)
    k = len(lm.labels)
    if k < 2:
        raise ExplorerError(f"{lm.factor!r} needs two or more levels with kept rows for a trend")
    if degree is not None and (isinstance(degree, bool) or not isinstance(degree, (int, np.integer, float))
                               or degree != int(degree) or not 1 <= degree <= k - 1):
        raise ExplorerError(f"the degree must be a whole number between 1 and {k - 1} (one less than the {k} levels of "
                            f"{lm.factor!r} with kept rows), not {degree!r}")
    if weighting not in ("equal", "counts"):
        raise ExplorerError(f"weighting must be 'equal' or 'counts', not {weighting!r}")
    if weighting == "counts" and lm.kind != "level means":
        raise ExplorerError("weighting='counts' is for one-factor studies (level means); least-squares and "
                            "adjusted means take equal weights")
    x = _level_values(lm, values)
    order = np.argsort(x, kind="stable")
    d = min(k - 1, 3) if degree is None else int(degree)
    w = np.asarray(lm.n, dtype=float) if weighting == "counts" else np.ones(k)
    full = np.zeros((k - 1, k))
    full[:, order] = orthogonal_polynomials(x[order], w[order])
    c = full[:d]
    names = tuple(DEGREE_NAMES.get(j, f"degree {j}") for j in range(1, d + 1))
    spacing = np.diff(np.sort(x))
    notes = [f"Level values: {', '.join(f'{lab} = {v:g}' for lab, v in zip(lm.labels, x))}"
             + (" (unequal spacing)." if not np.allclose(spacing, spacing[0]) else " (equal spacing).")]
    notes.append("Orthogonal polynomials with equal weights: hypotheses about the means whatever the counts."
                 if weighting == "equal" else
                 "Orthogonal polynomials weighted by the counts: an orthogonal split of the between-levels sum of "
                 "squares; the hypotheses are about count-weighted means.")
    joint = []
    if d < k - 1:
        joint.append((f"Departure from a {DEGREE_NAMES.get(d, f'degree-{d}')} trend (degrees {d + 1} to {k - 1})",
                      full[d:]))
    return contrast_table(results, lm, names, c, family="polynomial trend", adjust=adjust or ("none" if d == 1 else "holm"),
                          confidence=confidence, joint=joint, notes=notes)
