"""Restricted maximum likelihood (REML) for variance-components models, from cell summaries.

Model: y = X beta + sum_k Z_k u_k + e, u_k ~ N(0, sigma^2_k I) for each random term k
(one effect per level combination of its columns), e ~ N(0, sigma^2 I). Every random
term is constant within a cell, so the likelihood depends on the rows only through the
cell counts n_c, cell means and the pooled within-cell sum of squares; the fit below is
exact for the full data while its size is the number of cells and random levels.

The criterion is the profiled REML deviance of Bates, Maechler, Bolker and Walker
(2015, sec. 3.4) with relative standard deviations theta_k = sigma_k / sigma:

    d(theta) = log|L|^2 + log|R_X|^2 + (N - p) (1 + log(2 pi r^2 / (N - p)))

where L L' = Lambda' Z' W Z Lambda + I, R_X is the Cholesky factor of the Schur
complement X'WX - X'WZ Lambda (L L')^-1 Lambda' Z'WX, W = diag(n_c), and r^2 the
penalized residual sum of squares (within-cell SS + weighted cell-level part).
sigma^2 = r^2 / (N - p). theta is found by projected Newton steps (theta >= 0) from the
method-of-moments start.

References
----------
Patterson, H. D. and Thompson, R. (1971). Recovery of inter-block information when
block sizes are unequal. Biometrika 58, 545-554.
Bates, D., Maechler, M., Bolker, B. and Walker, S. (2015). Fitting linear mixed-effects
models using lme4. Journal of Statistical Software 67(1).
Searle, S. R., Casella, G. and McCulloch, C. E. (1992). Variance Components, ch. 6.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import linalg, optimize

__all__ = ["RemlFit", "reml_fit"]


@dataclass(frozen=True, kw_only=True, eq=False)
class RemlFit:
    """REML estimates: ``variances[k]`` of each random term, ``sigma2`` of the residual.

    ``covariance`` is the asymptotic covariance of (variances..., sigma2) from the
    inverse of the observed REML information (``None`` when an estimate sits on the
    boundary zero); ``converged`` and ``deviance`` describe the optimisation.
    """

    variances: np.ndarray
    sigma2: float
    deviance: float
    covariance: np.ndarray | None
    converged: bool
    iterations: int


class _Criterion:
    """The REML deviance of a cell-level variance-components model (see module docstring)."""

    def __init__(self, x: np.ndarray, z_blocks: Sequence[np.ndarray], n_c: np.ndarray, ybar: np.ndarray,
                 ss_within: float) -> None:
        self.x = x
        self.sizes = [z.shape[1] for z in z_blocks]
        self.z = np.hstack(z_blocks) if z_blocks else np.zeros((x.shape[0], 0))
        self.w = n_c.astype(float)
        self.n = float(self.w.sum())
        self.p = x.shape[1]
        self.ss_within = float(ss_within)
        wz = self.z * self.w[:, None]
        wx = x * self.w[:, None]
        self.ztwz = self.z.T @ wz
        self.ztwx = self.z.T @ wx
        self.xtwx = x.T @ wx
        self.ztwy = wz.T @ ybar
        self.xtwy = wx.T @ ybar
        self.ytwy = float(np.dot(self.w * ybar, ybar))
        self.diagonal = len(self.sizes) == 1 or bool(np.count_nonzero(self.ztwz - np.diag(np.diag(self.ztwz))) == 0)

    def parts(self, theta: np.ndarray) -> tuple[float, float, float]:
        """(log|L|^2 + log|R_X|^2, r^2, residual df) at ``theta``."""
        lam = np.repeat(theta, self.sizes)
        if self.diagonal:
            d = lam * lam * np.diag(self.ztwz) + 1.0
            logdet_l = float(np.sum(np.log(d)))
            cu = lam * self.ztwy / d  # L^-1 ... solves with a diagonal L L'
            cx = (lam[:, None] * self.ztwx) / d[:, None]
            ztwx_l = lam[:, None] * self.ztwx
            ztwy_l = lam * self.ztwy
        else:
            m = lam[:, None] * self.ztwz * lam[None, :] + np.eye(lam.size)
            chol = linalg.cho_factor(m, lower=True, check_finite=False)
            logdet_l = 2.0 * float(np.sum(np.log(np.diag(chol[0]))))
            ztwx_l = lam[:, None] * self.ztwx
            ztwy_l = lam * self.ztwy
            cx = linalg.cho_solve(chol, ztwx_l, check_finite=False)
            cu = linalg.cho_solve(chol, ztwy_l, check_finite=False)
        schur = self.xtwx - ztwx_l.T @ cx
        rhs = self.xtwy - ztwx_l.T @ cu
        rx = linalg.cholesky(schur, lower=True, check_finite=False)
        logdet_x = 2.0 * float(np.sum(np.log(np.abs(np.diag(rx)))))
        beta = linalg.cho_solve((rx, True), rhs, check_finite=False)
        # r^2 = y'Wy - [b' u'] [X'Wy; Lambda'Z'Wy] at the joint solution, plus the within-cell SS
        u = cu - cx @ beta
        r2 = self.ytwy - float(beta @ self.xtwy) - float(u @ ztwy_l) + self.ss_within
        return logdet_l + logdet_x, max(r2, 0.0), self.n - self.p

    def profiled(self, theta: np.ndarray) -> float:
        logdets, r2, dfr = self.parts(np.abs(theta))
        return float(logdets + dfr * (1.0 + np.log(2.0 * np.pi * max(r2, 1e-300) / dfr)))

    def full(self, variances: np.ndarray) -> float:
        """The deviance as a function of (sigma^2_1, ..., sigma^2_k, sigma^2) (not profiled)."""
        sigma2 = variances[-1]
        if sigma2 <= 0 or np.any(variances[:-1] < 0):
            return np.inf
        theta = np.sqrt(variances[:-1] / sigma2)
        logdets, r2, dfr = self.parts(theta)
        return float(logdets + dfr * np.log(2.0 * np.pi * sigma2) + r2 / sigma2)


def _hessian(f: Callable[[np.ndarray], float], x: np.ndarray) -> np.ndarray | None:
    """Central-difference Hessian; ``None`` when a step leaves the parameter space (near the boundary)."""
    k = x.size
    h = 1e-4 * np.maximum(np.abs(x), 1e-8)
    out = np.empty((k, k))
    f0 = f(x)
    for i in range(k):
        for j in range(i, k):
            ei = np.zeros(k)
            ej = np.zeros(k)
            ei[i] = h[i]
            ej[j] = h[j]
            if i == j:
                vals = [f(x + ei), f0, f(x - ei)]
                if not np.all(np.isfinite(vals)):
                    return None
                v = (vals[0] - 2 * vals[1] + vals[2]) / (h[i] ** 2)
            else:
                vals = [f(x + ei + ej), f(x + ei - ej), f(x - ei + ej), f(x - ei - ej)]
                if not np.all(np.isfinite(vals)):
                    return None
                v = (vals[0] - vals[1] - vals[2] + vals[3]) / (4 * h[i] * h[j])
            out[i, j] = out[j, i] = v
    return out


def _derivatives(f: Callable[[np.ndarray], float], x: np.ndarray, f0: float) -> tuple[np.ndarray, np.ndarray]:
    """Finite-difference gradient and Hessian of ``f`` at ``x >= 0`` (one-sided at the boundary)."""
    k = x.size
    h = 1e-4 * np.maximum(x, 1e-2)
    g = np.empty(k)
    hess = np.empty((k, k))
    fp = np.empty(k)
    fm = np.empty(k)
    for i in range(k):
        e = np.zeros(k)
        e[i] = h[i]
        fp[i] = f(x + e)
        if x[i] - h[i] >= 0:
            fm[i] = f(x - e)
            g[i] = (fp[i] - fm[i]) / (2 * h[i])
            hess[i, i] = (fp[i] - 2 * f0 + fm[i]) / h[i] ** 2
        else:  # forward differences at the boundary
            f2 = f(x + 2 * e)
            fm[i] = np.nan
            g[i] = (-3 * f0 + 4 * fp[i] - f2) / (2 * h[i])
            hess[i, i] = (f2 - 2 * fp[i] + f0) / h[i] ** 2
    for i in range(k):
        for j in range(i + 1, k):
            e = np.zeros(k)
            e[i], e[j] = h[i], h[j]
            hess[i, j] = hess[j, i] = (f(x + e) - fp[i] - fp[j] + f0) / (h[i] * h[j])
    return g, hess


def _projected_newton(f: Callable[[np.ndarray], float], x0: np.ndarray, max_iter: int = 100) -> tuple[np.ndarray, bool, int]:
    """Minimise ``f`` over x >= 0 by Newton steps on the free coordinates with a backtracking line search."""
    x = np.maximum(np.asarray(x0, float), 0.0)
    fx = f(x)
    for it in range(1, max_iter + 1):
        g, hess = _derivatives(f, x, fx)
        free = (x > 0) | (g < 0)
        if not free.any():
            return x, True, it
        gf = g[free]
        hf = hess[np.ix_(free, free)]
        try:
            w, v = np.linalg.eigh(hf)
            w = np.maximum(np.abs(w), 1e-8 * max(1.0, float(np.max(np.abs(w)))))
            step_f = -(v @ ((v.T @ gf) / w))
        except np.linalg.LinAlgError:  # pragma: no cover
            step_f = -gf
        step = np.zeros_like(x)
        step[free] = step_f
        t = 1.0
        while True:
            cand = np.maximum(x + t * step, 0.0)
            fc = f(cand)
            if fc <= fx + 1e-4 * t * float(g @ (cand - x)) or t < 1e-10:
                break
            t *= 0.5
        moved = float(np.max(np.abs(cand - x) / np.maximum(np.abs(x), 1e-3)))
        improved = fx - fc
        x, fx = (cand, fc) if fc <= fx else (x, fx)
        if moved < 1e-10 or (0 <= improved < 1e-13 and moved < 1e-7):
            return x, True, it
    return x, False, max_iter


def reml_fit(
    x: np.ndarray,
    z_blocks: Sequence[np.ndarray],
    n_c: np.ndarray,
    ybar: np.ndarray,
    ss_within: float,
    start: Sequence[float] | None = None,
) -> RemlFit:
    """REML variance components of a cell-level model.

    Parameters
    ----------
    x : (cells x p) full-rank fixed-effects design of the cells.
    z_blocks : one (cells x levels) indicator matrix per random term.
    n_c : observations per cell; ``ybar`` the cell means (any common shift);
    ss_within : pooled within-cell (pure error) sum of squares.
    start : starting relative standard deviations theta (default 1 for every term).

    The profiled deviance is minimised over theta >= 0 by projected Newton steps with
    finite-difference derivatives (one variance ratio per random term, so the
    steps are small), stopping when theta moves less than 1e-10 relative.
    """
    crit = _Criterion(x, z_blocks, n_c, ybar, ss_within)
    k = len(crit.sizes)
    theta0 = np.asarray(start if start is not None else np.ones(k), dtype=float)
    theta0 = np.where(np.isfinite(theta0) & (theta0 > 0), theta0, 0.5)
    theta, converged, iterations = _projected_newton(crit.profiled, theta0)
    if not converged:  # a derivative-free search from where Newton stopped
        nm = optimize.minimize(crit.profiled, theta, method="Nelder-Mead",
                               options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 4000})
        if nm.fun <= crit.profiled(theta):
            theta = np.abs(nm.x)
        converged = bool(nm.success)
    logdets, r2, dfr = crit.parts(theta)
    sigma2 = r2 / dfr
    variances = theta**2 * sigma2
    cov: np.ndarray | None = None
    if np.all(theta > 1e-6) and sigma2 > 0:
        params = np.append(variances, sigma2)
        hess = _hessian(crit.full, params)
        if hess is not None:
            try:
                cov = np.linalg.inv(0.5 * hess)
                if not np.all(np.isfinite(cov)) or np.any(np.diag(cov) <= 0):
                    cov = None
            except np.linalg.LinAlgError:
                cov = None
    return RemlFit(variances=variances, sigma2=float(sigma2), deviance=float(crit.profiled(theta)),
                   covariance=cov, converged=converged, iterations=iterations)
