"""The studentized range distribution, vectorised over the degrees of freedom.

``Q = R / S`` where ``R`` is the range of ``k`` independent standard normals and
``nu S^2`` is an independent chi-square on ``nu`` df. Its distribution function is

    P(Q <= q) = int_0^inf f_nu(s) P_R(q s) ds,
    P_R(w) = k int phi(z) [Phi(z) - Phi(z - w)]^(k-1) dz,

(Hartley 1944; Copenhaver and Holland 1988). Both integrals are taken with the
trapezoidal rule on the whole line (in ``z`` and in ``t = log s``), which converges
geometrically for these smooth, fast-decaying integrands; the outer grid is scaled to
the spread of ``log S`` for each ``nu``. The upper tail is integrated directly (never
``1 - cdf``), so small p-values keep their relative accuracy down to about 1e-15.
Checked against ``scipy.stats.studentized_range`` in the tests; the point of this
module is speed: Tukey-Kramer and Games-Howell tables need many tail probabilities and
quantiles at different df, and an adaptive integrator costs tens of milliseconds each.

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


def _range_sf_pdf(w: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """P(range > w) and the range density at ``w`` (cubic Hermite interpolation in log P)."""
    coef = _range_cubics(k)
    last = coef.shape[0]
    x = np.minimum(np.maximum(w, 0.0) / _HW, float(last))
    i = np.minimum(x.astype(np.int64), last - 1)
    t = x - i
    c = coef[i]
    c0, c1, c2, c3 = c[..., 0], c[..., 1], c[..., 2], c[..., 3]
    val = c0 + t * (c1 + t * (c2 + t * c3))
    der = (c1 + t * (2 * c2 + 3 * t * c3)) / _HW
    beyond = w > last * _HW
    if beyond.any():  # continue the log tail linearly (p-values below about 1e-40)
        log_sf, dlog = _range_table(k)
        val = np.where(beyond, log_sf[last] + dlog[last] * (w - last * _HW), val)
        der = np.where(beyond, dlog[last], der)
    with np.errstate(under="ignore"):
        sf = np.exp(val)
    return sf, -der * sf


_GRID_CACHE: dict[bytes, tuple[np.ndarray, np.ndarray]] = {}


def outer_grid(df: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cached :func:`_grid` (the last few df vectors; a pure function of df)."""
    key = np.ascontiguousarray(df, dtype=float).tobytes()
    hit = _GRID_CACHE.get(key)
    if hit is None:
        if len(_GRID_CACHE) > 16:
            _GRID_CACHE.clear()
        hit = _GRID_CACHE[key] = _grid(np.asarray(df, dtype=float))
    return hit


def _span(df: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, int]:
    """Finite mask, df used, ends of the span in log s, and the number of nodes M for ``df``."""
    finite = np.isfinite(df)
    nu = np.where(finite, df, 1.0)
    a = np.sqrt(_LOG_CUTOFF / nu)
    t_lo = -(a + _LOG_CUTOFF / nu)
    t_hi = a + 0.25 * np.sqrt(1 / nu)
    sigma = 1 / np.sqrt(2 * nu)
    h_want = np.minimum(0.5 * sigma, 0.15)
    m = int(np.clip(np.max(np.ceil((t_hi - t_lo) / h_want)) + 1, 9, 600)) if finite.any() else 1
    return finite, nu, t_lo, t_hi, m


def _grid(df: np.ndarray, nodes: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``s`` (shape (len(df), M)) and normalised weights of ``S = sqrt(chi2_nu / nu)``.

    Trapezoidal rule in ``t = log s`` over the span where the log-density is within
    e^-40 of its peak; weights are normalised to sum to one. Infinite df gives the
    single node ``s = 1``. ``nodes`` sets M (blocks of one batch share the batch's M, so
    a result does not depend on how the batch was cut).
    """
    df = np.asarray(df, dtype=float)
    finite, nu, t_lo, t_hi, m = _span(df)
    m = m if nodes is None else nodes  # a block of a larger batch uses the batch's node count
    x = np.linspace(0.0, 1.0, m)
    t = t_lo[:, None] + (t_hi - t_lo)[:, None] * x[None, :]
    logg = nu[:, None] * t - 0.5 * nu[:, None] * np.exp(2 * t)
    with np.errstate(under="ignore"):
        g = np.exp(logg - logg.max(axis=1, keepdims=True))
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


def _sf_pdf(q: np.ndarray, k: int, df: np.ndarray, grid: tuple[np.ndarray, np.ndarray] | None = None
            ) -> tuple[np.ndarray, np.ndarray]:
    """Upper tail and density of Q at ``q`` (1-d arrays of equal length, or broadcastable).

    ``grid`` (nodes and weights per point) may be passed when it is already known. Points
    are taken in blocks (:data:`_BLOCK_CELLS`); one df for every point shares one grid row.
    """
    q, df = np.broadcast_arrays(np.asarray(q, dtype=float), np.asarray(df, dtype=float))
    shape = q.shape
    qf, dff = q.ravel(), df.ravel()
    out_sf = np.empty(qf.size)
    out_pdf = np.empty(qf.size)
    one_df = qf.size > 0 and grid is None and bool(np.all(dff == dff[0]))
    if one_df:
        s1, w1 = outer_grid(dff[:1])
        nodes = s1.shape[1]
    else:
        nodes = grid[0].shape[1] if grid is not None else (_span(dff)[4] if dff.size else 1)
    small = grid is None and not one_df and qf.size * nodes <= _BLOCK_CELLS
    for block in _blocks(qf.size, nodes):
        if one_df:
            s, wts = s1, w1
        elif grid is not None:
            s, wts = grid[0][block], grid[1][block]
        else:
            s, wts = outer_grid(dff[block]) if small else _grid(dff[block], nodes)
        sf, pdf = _range_sf_pdf(qf[block, None] * s, k)
        out_sf[block] = (sf * wts).sum(axis=1)
        out_pdf[block] = (pdf * s * wts).sum(axis=1)
    return out_sf.reshape(shape), out_pdf.reshape(shape)


def _check(k: int) -> int:
    if isinstance(k, bool) or not isinstance(k, (int, np.integer, float)) or int(k) != k or k < 2:
        raise ExplorerError(f"the number of means k must be an integer of at least 2, not {k!r}")
    return int(k)


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
        The tail probabilities, accurate relative to their size down to about 1e-15.

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
    q = np.asarray(q, dtype=float)
    sf, _ = _sf_pdf(np.maximum(q, 0.0), k, np.asarray(df, dtype=float))
    return np.clip(np.where(q <= 0, 1.0, sf), 0.0, 1.0)


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


def _newton_from_left(p: float, k: int, df: np.ndarray, q: np.ndarray, tol: float,
                      m_nodes: int | None = None) -> np.ndarray:
    """Solve ``P(Q > q) = 1 - p`` by Newton steps from a point at or left of the root.

    In the upper tail ``1 - p - sf(q)`` is increasing and concave, so Newton iterates
    started on the left stay on the left and increase monotonically to the root.
    Many df are solved in blocks, each with its own grid (of the batch's node count
    ``m_nodes``), so memory stays bounded.
    """
    nodes = m_nodes if m_nodes is not None else _span(df)[4]
    if df.size * nodes > _BLOCK_CELLS:
        out = np.empty(df.size)
        for block in _blocks(df.size, nodes):
            out[block] = _newton_from_left(p, k, df[block], q[block], tol, nodes)
        return out
    grid = outer_grid(df) if m_nodes is None else _grid(df, m_nodes)
    for _ in range(100):
        sf, pdf = _sf_pdf(q, k, df, grid)
        f = (1 - p) - sf
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(pdf > 0, f / pdf, 0.0)
        step = np.where(np.isfinite(step), step, 0.0)
        q = q - step
        if np.all(np.abs(step) <= tol * np.maximum(1.0, q)):
            break
    return q


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
        left of every finite-df quantile in the upper tail, and takes Newton steps.

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
    df = np.atleast_1d(np.asarray(df, dtype=float))
    q0 = _ppf_infinite_df(float(p), k)
    if np.all(np.isinf(df)):
        return np.full(df.shape, q0)
    return _newton_from_left(p, k, df, np.full(df.shape, q0), tol)
