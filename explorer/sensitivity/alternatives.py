"""Many alternative one-way analyses at once, from group sufficient statistics.

The sensitivity tools (case deletion, regrouping, the flip finder, the sweep) all ask
the same question many times: *what would the F test say if the groups had these
counts, means and centred sums of squares?* :func:`evaluate_alternatives` answers it
for a whole batch in one vectorised pass: arrays of shape ``(alternatives, groups)``
in, one F, p-value, effect size and status per alternative out. Groups with no
observations drop out of that alternative (fewer levels, so fewer df for the term).

The downdate and update formulas for one observation leaving or joining a group are
Welford's (1962), in the form of Chan, Golub and LeVeque (1983): with ``d = y - mean``,

* leaving a group of ``n``:  ``mean' = mean - d/(n-1)``, ``m2' = m2 - d^2 n/(n-1)``;
* joining a group of ``n``:  ``mean' = mean + d/(n+1)``, ``m2' = m2 + d^2 n/(n+1)``.

The subtraction in the first loses digits only when the leaving observation carries
nearly all of its group's sum of squares; :func:`leave_one_out` recomputes those few
groups exactly (at most one row per group can be in that state).

References
----------
Welford, B. P. (1962). Note on a method for calculating corrected sums of squares and
products. Technometrics 4(3), 419-420.
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..engine.distributions import f_sf
from ..engine.errors import DesignError
from ..engine.groupstats import GroupStats, group_stats
from ..engine.numerics import is_zero_ss, response_scale
from ..inference.omnibus_batch import UNDEFINED, TestBatch, brown_forsythe_batch, welch_batch
from .study_like import StudyLike

__all__ = [
    "STATUS_NOTES",
    "AlternativeFits",
    "OnewayInput",
    "base_fit",
    "deletion_fits",
    "evaluate_alternatives",
    "fits_from_sums",
    "leave_one_out",
    "oneway_input",
    "with_test",
    "MOMENT_TESTS",
]

#: Why an alternative has no F test (status code -> plain sentence).
STATUS_NOTES: dict[int, str] = {
    0: "",
    1: "fewer than two levels with observations: no F test",
    2: "no residual degrees of freedom (every level has one observation): no F test",
    3: "residual sum of squares is zero (every observation equals its level mean): F undefined",
    4: "the model cannot be fitted after this change (an emptied cell or a factor left with one level; see notes)",
    **{code: note for code, note in UNDEFINED.items() if code > 4},
}
#: Tests :func:`evaluate_alternatives` computes from group counts, means and sums of squares alone.
MOMENT_TESTS = ("classic", "welch", "brown-forsythe")

#: Share of a group's sum of squares below which a downdated value is recomputed exactly.
_REFINE_BELOW = 1e-4


@dataclass(frozen=True, kw_only=True, eq=False)
class OnewayInput:
    """The kept rows of a one-factor study, ready for the sensitivity scans.

    ``y`` is on the dataset's shifted scale (``y + offset`` is the response);
    ``codes`` index the non-empty levels ``labels``; ``stats`` are their sufficient
    statistics. ``positions`` are the rows' positions among the dataset's usable rows.
    """

    factor: str
    y: np.ndarray
    codes: np.ndarray
    labels: tuple[str, ...]
    row_ids: np.ndarray
    positions: np.ndarray
    offset: float
    alpha: float
    stats: GroupStats

    @property
    def n(self) -> int:
        return int(self.y.size)

    @property
    def k(self) -> int:
        return len(self.labels)

    def scale(self) -> float:
        """Magnitude used to decide that a residual sum of squares is zero (:func:`~explorer.engine.numerics.response_scale`)."""
        return response_scale(self.offset, self.stats.mean)


def oneway_input(study: StudyLike, what: str = "this scan") -> OnewayInput:
    """Collect the current view of a one-factor ``study`` for a scan.

    Raises :class:`DesignError` for studies with several factors or blocks (the scans
    here work on the groups of a single factor).
    """
    spec = study.spec
    if not spec.is_oneway:
        raise DesignError(
            f"{what} works on one-factor studies; this study has factors {list(spec.columns)}. "
            "Make a one-factor study of the factor of interest (Study(data, response, factors='...')) to scan it."
        )
    res = study.results
    dataset = study.dataset
    if int(np.asarray(res.fit.positions).size) != int(res.groups.n_total):
        raise DesignError(
            f"{what} needs every kept row, but this study's results carry {np.asarray(res.fit.positions).size} "
            f"of {res.groups.n_total} rows; load the full table to scan it"
        )
    pos = np.asarray(res.fit.positions)
    y = np.asarray(dataset.y)[pos]
    codes = np.asarray(res.fit.group, dtype=np.int64)
    labels = tuple(res.groups.labels)
    gs = group_stats(y, codes, labels, dataset.offset)
    return OnewayInput(
        factor=spec.factors[0], y=y, codes=codes, labels=labels, row_ids=np.asarray(res.fit.row_ids),
        positions=pos, offset=float(dataset.offset), alpha=float(spec.alpha), stats=gs,
    )


@dataclass(frozen=True, kw_only=True, eq=False)
class AlternativeFits:
    """One-way F tests of a batch of alternatives (arrays of length ``m``).

    ``status`` is 0 where the test is defined, else a key of :data:`STATUS_NOTES`;
    ``statistic``, ``pvalue`` and ``eta_squared`` are NaN exactly where undefined
    (result tables turn them into missing values with the note).
    """

    levels: np.ndarray
    n: np.ndarray
    df_between: np.ndarray
    df_within: np.ndarray
    ss_between: np.ndarray
    ss_within: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    eta_squared: np.ndarray
    status: np.ndarray

    def significant(self, alpha: float) -> np.ndarray:
        """True where the F test rejects at ``alpha`` (False where it is undefined)."""
        with np.errstate(invalid="ignore"):
            return (self.status == 0) & (self.pvalue < alpha)

    def notes(self) -> list[str]:
        return [STATUS_NOTES[int(s)] for s in self.status]


def evaluate_alternatives(n: np.ndarray, mean: np.ndarray, m2: np.ndarray, scale: float,
                          test: str = "classic") -> AlternativeFits:
    """One-way test ``test`` for each row of ``(m, k)`` arrays of group statistics.

    ``test`` is 'classic' (F), 'welch' or 'brown-forsythe' (:data:`MOMENT_TESTS`); the
    sums of squares and eta squared are the classic partition's in every case. ``scale``
    is the magnitude of the data (offset or largest mean) used, as in the one-way
    engine, to call a residual sum of squares zero. Groups with ``n == 0`` are absent
    from that alternative.
    """
    if test not in MOMENT_TESTS:
        raise ValueError(f"{test!r} is not computed from group moments; use one of {MOMENT_TESTS}")
    n = np.atleast_2d(np.asarray(n, dtype=np.float64))
    mean = np.atleast_2d(np.asarray(mean, dtype=np.float64))
    m2 = np.atleast_2d(np.asarray(m2, dtype=np.float64))
    present = n > 0
    levels = present.sum(axis=1)
    total = n.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        gm = np.where(total > 0, (n * np.where(present, mean, 0.0)).sum(axis=1) / np.maximum(total, 1), 0.0)
    dev = np.where(present, mean - gm[:, None], 0.0)
    ssb = (n * dev * dev).sum(axis=1)
    ssw = np.where(present, np.maximum(m2, 0.0), 0.0).sum(axis=1)
    fits = fits_from_sums(ssb, ssw, levels, total, scale)
    if test == "classic":
        return fits
    with np.errstate(divide="ignore", invalid="ignore"):
        var = np.where(n > 1, np.maximum(m2, 0.0) / (n - 1), np.nan)
    batch = (welch_batch if test == "welch" else brown_forsythe_batch)(n, np.where(present, mean, 0.0), var)
    return with_test(fits, batch)


def with_test(fits: AlternativeFits, batch: TestBatch) -> AlternativeFits:
    """``fits`` (classic sums of squares) with the statistic, df, p-value and status of another test."""
    return replace(fits, statistic=batch.statistic, pvalue=batch.pvalue, df_between=batch.df_num,
                   df_within=batch.df_den, status=batch.status)


def fits_from_sums(
    ssb: np.ndarray, ssw: np.ndarray, levels: np.ndarray, total: np.ndarray, scale: float
) -> AlternativeFits:
    """F tests from the between and within sums of squares, level counts and totals of each alternative."""
    ssb = np.asarray(ssb, dtype=np.float64)
    ssw = np.asarray(ssw, dtype=np.float64)
    levels = np.asarray(levels, dtype=np.int64)
    total = np.asarray(total, dtype=np.int64)
    df_b = levels - 1
    df_w = total - levels
    status = np.zeros(ssb.shape[0], dtype=np.int8)
    zero = is_zero_ss(ssw, total, scale)
    status[zero] = 3
    status[df_w < 1] = 2
    status[levels < 2] = 1
    ok = status == 0
    stat = np.full(ssb.shape[0], np.nan)
    p = np.full(ssb.shape[0], np.nan)
    eta = np.full(ssb.shape[0], np.nan)
    if ok.any():
        f = (ssb[ok] / df_b[ok]) / (ssw[ok] / df_w[ok])
        stat[ok] = f
        p[ok] = f_sf(f, df_b[ok], df_w[ok])
    defined = (levels >= 2) & (ssb + ssw > 0)
    eta[defined] = ssb[defined] / (ssb[defined] + ssw[defined])
    return AlternativeFits(
        levels=levels, n=total, df_between=df_b, df_within=df_w,
        ss_between=ssb, ss_within=ssw, statistic=stat, pvalue=p, eta_squared=eta, status=status,
    )


def leave_one_out(data: OnewayInput) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each row's own group with that row left out: count, mean and ``m2`` per row.

    Welford's downdate; a group left with one observation gets ``m2 = 0`` exactly and
    an emptied group count zero. Where the downdated ``m2`` falls below ``1e-4`` of
    the group's, it is recomputed by a two-pass sum (at most one row per group can be
    in that state), so every value keeps at least twelve significant digits.
    """
    gs, y, g = data.stats, data.y, data.codes
    ng = gs.n.astype(np.float64)[g]
    d = y - gs.mean[g]
    with np.errstate(divide="ignore", invalid="ignore"):
        new_mean = np.where(ng > 1, gs.mean[g] - d / (ng - 1), 0.0)
        new_m2 = np.where(ng > 2, gs.m2[g] - d * d * (ng / (ng - 1)), 0.0)
    new_m2 = np.maximum(new_m2, 0.0)
    risky = np.flatnonzero((ng > 2) & (new_m2 < _REFINE_BELOW * gs.m2[g]))
    for i in risky:
        members = np.flatnonzero(g == g[i])
        rest = y[members[members != i]]
        c = rest.mean()
        r = rest - c
        new_mean[i] = c + r.sum() / r.size
        new_m2[i] = float(np.dot(r, r) - r.sum() ** 2 / r.size)
    return ng - 1, new_mean, new_m2


def _others(gs: GroupStats) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per group g: weight, mean, between-SS and within-SS of all the other groups pooled."""
    k = gs.k
    n = gs.n.astype(np.float64)
    w = np.empty(k)
    c = np.zeros(k)
    r = np.zeros(k)
    sw = np.empty(k)
    for g in range(k):
        o = np.arange(k) != g
        w[g] = n[o].sum()
        sw[g] = gs.m2[o].sum()
        if w[g] > 0:
            c[g] = np.dot(n[o], gs.mean[o]) / w[g]
            dv = gs.mean[o] - c[g]
            r[g] = np.dot(n[o], dv * dv)
    return w, c, r, sw


def deletion_fits(data: OnewayInput) -> tuple[AlternativeFits, np.ndarray, np.ndarray]:
    """The F test with each row left out in turn, O(n + k^2).

    The between sum of squares with row ``i`` (group ``g``) left out is that of two
    clusters, the other groups and the downdated group ``g``:
    ``R_g + W_g n'_g / (W_g + n'_g) (mean'_g - c_g)^2``, with ``W_g``, ``c_g``, ``R_g``
    the weight, mean and between sum of squares of the other groups. Every term is
    non-negative, so nothing cancels. Returns the fits and each row's downdated group
    count and mean (for pairwise comparisons).
    """
    g = data.codes
    new_n, new_mean, new_m2 = leave_one_out(data)
    w, c, r, sw = _others(data.stats)
    wg = w[g]
    with np.errstate(divide="ignore", invalid="ignore"):
        pooled = np.where(wg + new_n > 0, wg * new_n / (wg + new_n), 0.0)
    dev = new_mean - c[g]
    ssb = r[g] + pooled * dev * dev
    ssw = sw[g] + new_m2
    levels = data.k - (new_n == 0).astype(np.int64)
    total = np.full(data.n, data.n - 1, dtype=np.int64)
    return fits_from_sums(ssb, ssw, levels, total, data.scale()), new_n, new_mean


def base_fit(data: OnewayInput) -> AlternativeFits:
    """The F test on all rows (a batch of one)."""
    gs = data.stats
    return evaluate_alternatives(gs.n[None, :], gs.mean[None, :], gs.m2[None, :], data.scale())
