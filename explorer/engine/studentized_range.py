"""The studentized range distribution, vectorised over the degrees of freedom.

``Q = R / S`` where ``R`` is the range of ``k`` independent standard normals and
``nu S^2`` is an independent chi-square on ``nu`` df. Its distribution function is

    P(Q <= q) = int_0^inf f_nu(s) P_R(q s) ds,
    P_R(w) = k int phi(z) [Phi(z) - Phi(z - w)]^(k-1) dz,

(Hartley 1944; Copenhaver and Holland 1988). Both integrals are taken with the
trapezoidal rule on the whole line (in ``z`` and in ``t = log s``), which converges
geometrically for these smooth, fast-decaying integrands. The step of the outer grid is
the smaller of half the spread of ``log S`` for each ``nu`` and 0.7 of the spread of
``log R`` for ``k`` (with many means the range is concentrated, and ``P_R(q s)`` rises
from zero to one over a short stretch of ``log s``). Each point gets its own
number of nodes (rounded up to one of a few sizes, so points of one size are computed
together and a result never depends on the other points of the batch). The upper tail
is integrated directly (never ``1 - cdf``), so small p-values keep their relative
accuracy. Checked against ``scipy.stats.studentized_range`` in the tests (k from 2 to
2,000, df from 1 to infinity); the point of this module is speed: Tukey-Kramer and
Games-Howell tables need many tail probabilities and quantiles at different df, and an
adaptive integrator costs tens of milliseconds each. Quantiles at many distinct df
(Games-Howell: one Welch df per pair) are solved at Chebyshev nodes in ``log df`` and
interpolated, the interpolant checked at the midpoints between its nodes. Two shortcuts
lose nothing in double precision: a tail whose ``P(Q <= q)`` is bounded below 1.1e-17 is
1, and nodes where ``q s`` is below the point where ``P_R`` is 1e-18 are not looked up.

References
----------
Hartley, H. O. (1944). Studentizing the range. Biometrika 33, 305-308.
Copenhaver, M. D. and Holland, B. (1988). Computation of the distribution of the
maximum studentized range statistic. J. Stat. Comput. Simul. 30, 1-15.
Trefethen, L. N. and Weideman, J. A. C. (2014). The exponentially convergent
trapezoidal rule. SIAM Review 56(3), 385-458.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import special

from .errors import ExplorerError
from .numerics import read_only

__all__ = ["srange_cdf", "srange_ppf", "srange_sf", "outer_grid"]

_LOG_CUTOFF = 40.0  # outer grid spans log-density within e^-40 of its peak
_HW = 1.0 / 32.0  # step of the table of the range distribution
_W_MAX = 20.0


@lru_cache(maxsize=32)
def _range_table(k: int) -> tuple[np.ndarray, np.ndarray]:
    """log P(range > w) and its derivative on a grid of w (cached per k).

    The upper tail of the range of k standard normals is
    ``k int phi(z) Phi(z)^(k-1) [1 - (1 - Phi(z-w)/Phi(z))^(k-1)] dz``, written so that
    no two nearly equal numbers are subtracted; its density is
    ``k (k-1) int phi(z) phi(z-w) [Phi(z) - Phi(z-w)]^(k-2) dz``.
    """
    h = 1.0 / 16.0
    z = np.arange(-9.0, _W_MAX / 2 + 10.0 + h / 2, h)
    phi = np.exp(-0.5 * z * z) / np.sqrt(2 * np.pi)
    cdf = special.ndtr(z)
    w = np.arange(0.0, _W_MAX + _HW / 2, _HW)
    zw = z[None, :] - w[:, None]
    low = special.ndtr(zw)
    with np.errstate(divide="ignore", invalid="ignore", under="ignore"):
        ratio = np.clip(low / cdf, 0.0, 1.0)
        sf_in = cdf ** (k - 1) * -np.expm1((k - 1) * np.log1p(-ratio))
        pdf_in = (k - 1) * np.exp(-0.5 * zw * zw) / np.sqrt(2 * np.pi) * np.maximum(cdf - low, 0.0) ** (k - 2)
    sf = k * h * (np.nan_to_num(sf_in, nan=0.0) @ phi)
    sf[0] = 1.0
    pdf = k * h * (np.nan_to_num(pdf_in, nan=0.0) @ phi)
    log_sf = np.log(np.maximum(sf, 1e-300))
    dlog = -pdf / np.maximum(sf, 1e-300)
    return read_only(log_sf), read_only(dlog)


@lru_cache(maxsize=32)
def _range_cubics(k: int) -> np.ndarray:
    """Cubic Hermite coefficients (in the local coordinate t in [0, 1]) of log P(range > w)."""
    log_sf, dlog = _range_table(k)
    y0, y1 = log_sf[:-1], log_sf[1:]
    d0, d1 = dlog[:-1] * _HW, dlog[1:] * _HW
    coef = np.stack([y0, d0, 3 * (y1 - y0) - 2 * d0 - d1, 2 * (y0 - y1) + d0 + d1], axis=1)
    return read_only(coef)


def _range_sf_pdf(w: np.ndarray, k: int, want_pdf: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """P(range > w) and the range density at ``w`` (cubic Hermite interpolation in log P)."""
    coef = _range_cubics(k)
    last = coef.shape[0]
    x = np.minimum(np.maximum(w, 0.0) / _HW, float(last))
    i = np.minimum(x.astype(np.int64), last - 1)
    t = x - i
    c = coef[i]
    c0, c1, c2, c3 = c[..., 0], c[..., 1], c[..., 2], c[..., 3]
    val = c0 + t * (c1 + t * (c2 + t * c3))
    der = (c1 + t * (2 * c2 + 3 * t * c3)) / _HW if want_pdf else None
    beyond = w > last * _HW
    if beyond.any():  # continue the log tail linearly (p-values below about 1e-40)
        log_sf, dlog = _range_table(k)
        val = np.where(beyond, log_sf[last] + dlog[last] * (w - last * _HW), val)
        if der is not None:
            der = np.where(beyond, dlog[last], der)
    with np.errstate(under="ignore"):
        sf = np.exp(val)
    return sf, (None if der is None else -der * sf)


@lru_cache(maxsize=64)
def _log_range_width(k: int) -> float:
    """Spread of ``log R`` for the range of k normals: (log w_0.9 - log w_0.1) / 2.563 (1.0 for k = 2,
    0.068 for k = 2,000), from the table of the range distribution."""
    log_sf, _ = _range_table(k)
    sf = np.exp(log_sf)
    w = np.arange(sf.size) * _HW
    w10, w90 = np.interp(-0.9, -sf, w), np.interp(-0.1, -sf, w)
    return float((np.log(w90) - np.log(w10)) / 2.563)


@lru_cache(maxsize=64)
def _range_cdf_floor(k: int) -> float:
    """A range ``w`` below which ``P(range <= w) < 1e-18`` for k normals (0 when none is found).

    ``P(range <= w) = k int phi(z) [Phi(z) - Phi(z - w)]^(k-1) dz`` summed in logs (the
    difference taken on the side where it does not cancel), on a grid of w in steps of 1/64.
    The bound is set 1e-18, not the 5.5e-17 that rounds ``1 - P`` to 1, as a margin for the
    quadrature (scipy gives 1.9e-17 where this gives 1e-17 at k = 2,000).
    """
    h = 1.0 / 64.0
    z = np.arange(-12.0, 12.0 + h / 2, h)
    w = np.arange(1.0 / 64.0, _W_MAX, 1.0 / 64.0)
    zw = z[None, :] - w[:, None]
    upper = z[None, :] > w[:, None] / 2
    with np.errstate(divide="ignore", invalid="ignore"):
        diff = np.where(upper, special.ndtr(-zw) - special.ndtr(-z)[None, :], special.ndtr(z)[None, :] - special.ndtr(zw))
        log_in = -0.5 * z * z - 0.5 * np.log(2 * np.pi) + (k - 1) * np.log(np.maximum(diff, 0.0))
    peak = np.max(log_in, axis=1, keepdims=True)
    with np.errstate(invalid="ignore", under="ignore"):
        log_cdf = np.log(k * h) + peak[:, 0] + np.log(np.exp(log_in - peak).sum(axis=1))
    below = np.flatnonzero(~(log_cdf < np.log(1e-18)))
    first = int(below[0]) if below.size else w.size
    return float(w[first - 1]) if first > 0 else 0.0


#: df grid (ratio 1.01) holding the point above which S = sqrt(chi2_df / df) has probability below 1e-17.
_S0_DF = np.exp(np.arange(np.log(0.25), np.log(1e8), np.log(1.01)))
_S0 = np.sqrt(special.chdtri(_S0_DF, 1e-17) / _S0_DF)


def _certainly_one(q: np.ndarray, k: int, df: np.ndarray) -> np.ndarray:
    """Points whose upper tail is 1 in double precision: ``P(Q <= q) <= P(S > s0) + P(R <= q s0) < 1.1e-17``
    (below the 5.5e-17 that rounds ``1 - P`` to 1).

    ``s0`` is read at the grid df just below each df (S's tail point falls as df grows, so
    this overstates it, on the safe side); infinite df has ``s0 = 1``.
    """
    floor = _range_cdf_floor(k)
    if floor <= 0:
        return np.zeros(q.shape, dtype=bool)
    at = np.searchsorted(_S0_DF, df, side="right") - 1
    s0 = np.where(np.isinf(df), 1.0, _S0[np.clip(at, 0, _S0.size - 1)])
    return (at >= 0) & (q * s0 < floor)


_GRID_CACHE: dict[tuple[int, bytes], tuple[np.ndarray, np.ndarray]] = {}


def outer_grid(df: np.ndarray, k: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Cached nodes and weights of the outer integral for ``df`` (the last few df vectors; a pure
    function of df and, through the step, of the number of means ``k``; k = 2 for other uses)."""
    key = (int(k), np.ascontiguousarray(df, dtype=float).tobytes())
    hit = _GRID_CACHE.get(key)
    if hit is None:
        if len(_GRID_CACHE) > 16:
            _GRID_CACHE.clear()
        dfa = np.asarray(df, dtype=float)
        hit = _GRID_CACHE[key] = _grid(dfa, int(np.max(_nodes(dfa, k), initial=1)), k)
    return hit


#: Steps of the outer grid as shares of the spreads of log S and log R.
_STEP_S = 0.5
_STEP_R = 0.7

#: Node counts a point may get (its own need rounded up): points of one size are computed together.
_SIZES = np.array([9, 12, 16, 23, 32, 45, 64, 91, 128, 181, 256, 362, 512, 724, 1024, 1448, 2048, 2896, 4096])


def _ends(df: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Finite mask, df used and the ends of the span in log s where the log-density of S is within e^-40."""
    finite = np.isfinite(df)
    nu = np.where(finite, df, 1.0)
    a = np.sqrt(_LOG_CUTOFF / nu)
    return finite, nu, -(a + _LOG_CUTOFF / nu), a + 0.25 * np.sqrt(1 / nu)


def _nodes(df: np.ndarray, k: int) -> np.ndarray:
    """Number of nodes each df needs: the span over a step of half the narrower of the spreads of
    log S (``1 / sqrt(2 nu)``) and log R (:func:`_log_range_width`), at most 0.15; rounded up to
    one of :data:`_SIZES`; one node for infinite df."""
    finite, nu, t_lo, t_hi = _ends(np.asarray(df, dtype=float))
    h_want = np.minimum(np.minimum(_STEP_S / np.sqrt(2 * nu), 0.15), _STEP_R * _log_range_width(k))
    need = np.ceil((t_hi - t_lo) / h_want) + 1
    sizes = _SIZES[np.minimum(np.searchsorted(_SIZES, need), _SIZES.size - 1)]
    return np.where(finite, sizes, 1).astype(np.int64)


def _grid(df: np.ndarray, nodes: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``s`` (shape (len(df), nodes)) and normalised weights of ``S = sqrt(chi2_nu / nu)``.

    Trapezoidal rule in ``t = log s`` over the span where the log-density is within
    e^-40 of its peak; weights are normalised to sum to one. Infinite df gives the
    single node ``s = 1``.
    """
    df = np.asarray(df, dtype=float)
    finite, nu, t_lo, t_hi = _ends(df)
    m = max(int(nodes), 1)
    x = np.linspace(0.0, 1.0, m)
    t = t_lo[:, None] + (t_hi - t_lo)[:, None] * x[None, :]
    logg = nu[:, None] * t - 0.5 * nu[:, None] * np.exp(2 * t)
    with np.errstate(under="ignore"):
        g = np.exp(logg - logg.max(axis=1, keepdims=True))
    if m > 1:
        g[:, 0] *= 0.5
        g[:, -1] *= 0.5
    w = g / g.sum(axis=1, keepdims=True)
    s = np.exp(t)
    if not finite.all():
        s[~finite] = 1.0
        w[~finite] = 0.0
        w[~finite, 0] = 1.0
    return read_only(s), read_only(w)


#: Points x nodes evaluated at once: bounds the working memory (about 30 arrays of this many floats,
#: ~60 MiB) whatever the number of comparisons; a 2,000-level table has 2e6 pairs.
_BLOCK_CELLS = 1 << 18


def _blocks(n: int, nodes: int) -> list[slice]:
    rows = max(1, _BLOCK_CELLS // max(nodes, 1))
    return [slice(i, min(i + rows, n)) for i in range(0, n, rows)]


def _integrate(q: np.ndarray, k: int, s: np.ndarray, wts: np.ndarray, want_pdf: bool
               ) -> tuple[np.ndarray, np.ndarray | None]:
    """The outer sums. For the tail alone, nodes where ``q s`` is below the range's 1e-18 point
    (:func:`_range_cdf_floor`) have ``P(range > q s) = 1`` to that accuracy and are not looked up."""
    x = q[:, None] * s
    floor = 0.0 if want_pdf else _range_cdf_floor(k)
    if floor > 0:  # node by node, so a point's value never depends on the block it was computed in
        low = x < floor
        vals = np.ones(x.shape)
        high = ~low
        vals[high] = _range_sf_pdf(x[high], k, False)[0]
        return (vals * wts).sum(axis=1), None
    sf, pdf = _range_sf_pdf(x, k, want_pdf)
    return (sf * wts).sum(axis=1), (None if pdf is None else (pdf * s * wts).sum(axis=1))


def _sf_pdf(q: np.ndarray, k: int, df: np.ndarray, grid: tuple[np.ndarray, np.ndarray] | None = None,
            want_pdf: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Upper tail and density of Q at ``q`` (1-d arrays of equal length, or broadcastable).

    ``grid`` (nodes and weights per point) may be passed when it is already known.
    Otherwise each point gets the nodes its df needs (:func:`_nodes`) and points of one
    size are taken together in blocks (:data:`_BLOCK_CELLS`); one df for every point
    shares one grid row. Without ``want_pdf`` the density is not computed (zeros).
    """
    q, df = np.broadcast_arrays(np.asarray(q, dtype=float), np.asarray(df, dtype=float))
    shape = q.shape
    qf, dff = q.ravel(), df.ravel()
    out_sf = np.empty(qf.size)
    out_pdf = np.zeros(qf.size)
    if qf.size == 0:
        return out_sf.reshape(shape), out_pdf.reshape(shape)
    if grid is not None or bool(np.all(dff == dff[0])):
        s_all, w_all = grid if grid is not None else outer_grid(dff[:1], k)
        for block in _blocks(qf.size, s_all.shape[1]):
            s, wts = (s_all[block], w_all[block]) if grid is not None else (s_all, w_all)
            sf, pdf = _integrate(qf[block], k, s, wts, want_pdf)
            out_sf[block] = sf
            if pdf is not None:
                out_pdf[block] = pdf
        return out_sf.reshape(shape), out_pdf.reshape(shape)
    sizes = _nodes(dff, k)
    order = np.argsort(sizes, kind="stable")
    bounds = np.flatnonzero(np.diff(sizes[order])) + 1
    for group in np.split(order, bounds):
        m = int(sizes[group[0]])
        for block in _blocks(group.size, m):
            idx = group[block]
            s, wts = _grid(dff[idx], m, k)
            sf, pdf = _integrate(qf[idx], k, s, wts, want_pdf)
            out_sf[idx] = sf
            if pdf is not None:
                out_pdf[idx] = pdf
    return out_sf.reshape(shape), out_pdf.reshape(shape)


def _check(k: int) -> int:
    if isinstance(k, bool) or not isinstance(k, (int, np.integer, float)) or int(k) != k or k < 2:
        raise ExplorerError(f"the number of means k must be an integer of at least 2, not {k!r}")
    return int(k)


def _check_df(df: np.ndarray | float) -> np.ndarray:
    d = np.asarray(df, dtype=float)
    bad = ~(d > 0)  # NaN, zero and negative
    if bad.any():
        raise ExplorerError(f"the degrees of freedom must be positive (inf allowed), not {d[bad].ravel()[0]!r}"
                            + (f" ({int(bad.sum())} such values)" if bad.sum() > 1 else ""))
    return d


def srange_sf(q: np.ndarray | float, k: int, df: np.ndarray | float) -> np.ndarray:
    """Upper-tail probability ``P(Q > q)`` of the studentized range (vectorised over q and df).

    Parameters
    ----------
    q : float or numpy.ndarray
        Values of the range statistic.
    k : int
        Number of means.
    df : float or numpy.ndarray
        Degrees of freedom of the variance estimate (``inf`` allowed).

    Returns
    -------
    numpy.ndarray
        The tail probabilities (NaN where q is NaN). Degrees of freedom must be positive.

    References
    ----------
    Hartley, H. O. (1944). Studentizing the range. Biometrika 33, 305-308.
    Copenhaver, M. D. and Holland, B. (1988). Computation of the distribution of the
    maximum studentized range statistic. J. Stat. Comput. Simul. 30, 1-15.

    Examples
    --------
    >>> import explorer as ex
    >>> ex.stats.srange_sf(3.877, 3, 12).round(4).tolist()
    0.0439
    """
    k = _check(k)
    q, df = np.broadcast_arrays(np.asarray(q, dtype=float), _check_df(df))
    nan = np.isnan(q)
    qq = np.where(nan, 0.0, np.maximum(q, 0.0))
    one = _certainly_one(qq, k, df)
    sf = np.ones(q.shape)
    rest = ~one
    if rest.any():
        sf[rest] = _sf_pdf(qq[rest], k, df[rest], want_pdf=False)[0]
    return np.where(nan, np.nan, np.clip(np.where(q <= 0, 1.0, sf), 0.0, 1.0))


def srange_cdf(q: np.ndarray | float, k: int, df: np.ndarray | float) -> np.ndarray:
    """``P(Q <= q)`` of the studentized range (``1 - sf``; meant for central and upper quantiles).

    Parameters
    ----------
    q : float or numpy.ndarray
        Values of the range statistic.
    k : int
        Number of means.
    df : float or numpy.ndarray
        Degrees of freedom of the variance estimate.

    Returns
    -------
    numpy.ndarray
        The cumulative probabilities.

    References
    ----------
    Hartley, H. O. (1944). Studentizing the range. Biometrika 33, 305-308.

    Examples
    --------
    >>> import explorer as ex
    >>> ex.stats.srange_cdf([2.0, 3.877], 3, 12).round(4).tolist()
    [0.6352, 0.9561]
    """
    return 1.0 - srange_sf(q, k, df)


def _newton_block(p: float, k: int, q: np.ndarray, grid: tuple[np.ndarray, np.ndarray], tol: float,
                  one: np.ndarray) -> np.ndarray:
    for _ in range(100):
        sf, pdf = _sf_pdf(q, k, one, grid)
        f = (1 - p) - sf
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(pdf > 0, f / pdf, 0.0)
        step = np.where(np.isfinite(step), step, 0.0)
        q = q - step
        if np.all(np.abs(step) <= tol * np.maximum(1.0, q)):
            break
    return q


def _newton_from_left(p: float, k: int, df: np.ndarray, q: np.ndarray, tol: float,
                      nodes: int | None = None) -> np.ndarray:
    """Solve ``P(Q > q) = 1 - p`` by Newton steps from a point at or left of the root.

    In the upper tail ``1 - p - sf(q)`` is increasing and concave, so Newton iterates
    started on the left stay on the left and increase monotonically to the root.
    Each df gets the nodes it needs (:func:`_nodes`); df of one size are solved together
    in blocks, each with its own grid, so memory stays bounded. ``nodes`` gives every df
    the same node count (a quantile then varies smoothly with df, as interpolation needs).
    """
    df = np.asarray(df, dtype=float)
    out = np.array(q, dtype=float, copy=True)
    sizes = _nodes(df, k) if nodes is None else np.full(df.shape, int(nodes))
    order = np.argsort(sizes, kind="stable")
    for group in np.split(order, np.flatnonzero(np.diff(sizes[order])) + 1):
        if group.size == 0:
            continue
        m = int(sizes[group[0]])
        for block in _blocks(group.size, m):
            idx = group[block]
            grid = outer_grid(df[idx], k) if nodes is None and group.size == df.size else _grid(df[idx], m, k)
            out[idx] = _newton_block(p, k, out[idx], grid, tol, np.ones(idx.size))
    return out


@lru_cache(maxsize=256)
def _ppf_infinite_df(p: float, k: int) -> float:
    """Quantile of the range of k standard normals (infinite df), by bisection then Newton."""
    lo, hi = 0.0, 4.0
    df = np.array([np.inf])
    while _sf_pdf(np.array([hi]), k, df)[0][0] > 1 - p:
        lo, hi = hi, hi * 2
    for _ in range(60):  # bisection to a point left of the root, close enough for Newton
        mid = 0.5 * (lo + hi)
        if _sf_pdf(np.array([mid]), k, df)[0][0] > 1 - p:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-3:
            break
    return float(_newton_from_left(p, k, df, np.array([lo]), 1e-13)[0])


def srange_ppf(p: float, k: int, df: np.ndarray | float, *, tol: float = 1e-12) -> np.ndarray:
    """Quantile ``q`` with ``P(Q <= q) = p`` for each df (``0.5 <= p < 1``).

    Parameters
    ----------
    p : float
        Probability, at least 0.5.
    k : int
        Number of means.
    df : float or numpy.ndarray
        Degrees of freedom.
    tol : float, default 1e-12
        Relative tolerance of the Newton steps.

    Returns
    -------
    numpy.ndarray
        The quantile for each df. Starts from the infinite-df quantile, which lies at or
        left of every finite-df quantile in the upper tail, and takes Newton steps. With
        more than 64 distinct df, the quantiles are interpolated in ``log df`` from
        Chebyshev nodes (relative error at most 2e-9 at the check points; see
        :func:`_ppf_interpolated`), so a table of two million Welch df costs a few
        hundred solves.

    References
    ----------
    Copenhaver, M. D. and Holland, B. (1988). J. Stat. Comput. Simul. 30, 1-15.
    Tables of the upper 5% point (k = 3, 12 df: 3.77) in Montgomery, Design and
    Analysis of Experiments, appendix table VII (from memory).

    Examples
    --------
    >>> import explorer as ex
    >>> ex.stats.srange_ppf(0.95, 3, [12, 120]).round(3).tolist()
    [3.773, 3.356]
    """
    k = _check(k)
    if not 0.5 <= p < 1:
        raise ExplorerError(f"probability must be in [0.5, 1) for studentized-range quantiles, not {p!r}")
    df = np.atleast_1d(_check_df(df))
    q0 = _ppf_infinite_df(float(p), k)
    out = np.full(df.shape, q0)
    finite = np.isfinite(df)
    if not finite.any():
        return out
    distinct, where = np.unique(df[finite], return_inverse=True)
    if distinct.size <= _DIRECT_DF:
        solved = _newton_from_left(p, k, distinct, np.full(distinct.shape, q0), tol)
    else:
        solved = _ppf_interpolated(float(p), k, distinct, q0, tol)
    out[finite] = solved[where.reshape(-1)]
    return out


#: Up to this many distinct df the quantiles are solved one by one; beyond, interpolated in log df.
_DIRECT_DF = 64
#: Relative error allowed to the interpolated quantile at the check points.
_INTERP_RTOL = 2e-9


def _ppf_interpolated(p: float, k: int, df: np.ndarray, q0: float, tol: float) -> np.ndarray:
    """Quantiles at many distinct df from a Chebyshev interpolant in ``log df``.

    Solves at N + 1 Chebyshev points (of the second kind) of ``[log min df, log max df]``,
    then at the N midpoints between them (the points the 2N grid adds); when the degree-N
    interpolant meets the solved midpoints within a relative 2e-9 (or ``100 tol``; the
    cubic table of the range distribution puts a floor of about 1e-9 under any solve), the
    degree-2N interpolant through all 2N + 1 points is used. N doubles from 16 up to 256;
    past that every df is solved by itself. Quantiles are analytic in ``log df`` on
    ``df >= 1``, so the series converges geometrically (Trefethen 2013, Approximation
    Theory and Approximation Practice, ch. 8). Every node is solved with the node count
    of the smallest df, so the solved quantiles are one smooth function of df.
    """
    from numpy.polynomial import chebyshev

    lo, hi = float(np.log(df[0])), float(np.log(df[-1]))
    rtol = max(_INTERP_RTOL, 100 * tol)
    nodes = int(np.max(_nodes(df[:1], k)))  # the smallest df needs the most; one count keeps q(df) smooth

    def at(theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x = np.cos(theta)
        d = np.exp(0.5 * (hi + lo) + 0.5 * (hi - lo) * x)
        return x, _newton_from_left(p, k, d, np.full(d.shape, q0), tol, nodes)

    n = 16
    x, y = at(np.pi * np.arange(n + 1) / n)
    while n <= 256:
        xm, ym = at(np.pi * (np.arange(n) + 0.5) / n)
        coef = chebyshev.chebfit(x, y, n)
        if np.max(np.abs(chebyshev.chebval(xm, coef) / ym - 1.0)) <= rtol:
            x, y = np.concatenate([x, xm]), np.concatenate([y, ym])
            coef = chebyshev.chebfit(x, y, 2 * n)
            xs = np.clip((2 * np.log(df) - (hi + lo)) / (hi - lo), -1.0, 1.0)
            return np.asarray(chebyshev.chebval(xs, coef), dtype=float)
        x, y = np.concatenate([x, xm]), np.concatenate([y, ym])
        n *= 2
    return _newton_from_left(p, k, df, np.full(df.shape, q0), tol)  # pragma: no cover - not met in the tests
