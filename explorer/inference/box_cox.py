"""Box-Cox: the profile likelihood of a power transform of the response under the study's model.

For a positive response y and power lambda, ``y(lambda) = (y^lambda - 1)/lambda`` (the
log at lambda = 0). With the model's fixed-effects design X (the study's factors, blocks
and interactions), the log-likelihood maximised over the coefficients and the error
variance is, up to a constant,

    l(lambda) = (lambda - 1) sum(log y) - n/2 log(RSS(lambda) / n),

RSS(lambda) the residual sum of squares of y(lambda) on X (Box and Cox 1964, sec. 3).
Without factors it is scipy's ``boxcox_llf``. It is computed here without overflow: with
u = log y - mean(log y), ``l = -n mean(log y) - n/2 log(RSS(w)/n)`` where
``w = expm1(lambda u)/lambda`` (w = u at lambda = 0) differs from y(lambda) by a factor
and a constant the intercept absorbs. The estimate maximises l (Brent's method, as
scipy); the interval is ``{lambda: l(lambda) >= l(hat) - chi2(1 - alpha; 1)/2}``
(profile likelihood, 1 - alpha of the analysis).

The profile is evidence for a transform, not a switch: choosing one is a model choice the
study records (``study.set_transform``). Simple powers inside the interval (-1, -0.5, 0
= log, 0.5 = square root, 1 = none, 2) are listed.

References
----------
Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations. JRSS B 26, 211-252.
Draper, N. R. and Smith, H. (1998). Applied Regression Analysis, 3rd ed., sec. 13.2.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, special

from ..engine.errors import DesignError, ExplorerError
from ..engine.fitrows import every_kept_row
from ..engine.results import Results
from ..engine.row_model import design_of
from ..engine.tables import html_table
from ..engine.transforms import inverse
from ..formatting import show_number
from ..rendering import html_repr, small

__all__ = ["BoxCoxProfile", "ProfileEstimate", "box_cox", "check_lambdas", "profile_estimate", "profile_loglik",
           "SIMPLE_POWERS"]

#: Powers with a plain name, listed when they fall inside the interval.
SIMPLE_POWERS = {-1.0: "reciprocal", -0.5: "reciprocal square root", 0.0: "log", 0.5: "square root",
                 1.0: "none (as measured)", 2.0: "square"}
_LIMIT = 10.0


def profile_loglik(y: np.ndarray, x: np.ndarray) -> tuple[Callable[[float], float], float]:
    """``l(lambda)`` for a positive response ``y`` and model matrix ``x`` (intercept included), and mean(log y)."""
    logy = np.log(np.asarray(y, dtype=float))
    m = float(np.mean(logy))
    u = logy - m
    n = u.size
    q, _ = np.linalg.qr(x)

    def loglik(lam: float) -> float:
        w = u if lam == 0 else np.expm1(lam * u) / lam
        r = w - q @ (q.T @ w)
        rss = float(r @ r)
        if not np.isfinite(rss) or rss <= 0:
            return -np.inf
        return float(-n * m - 0.5 * n * np.log(rss / n))

    return loglik, m


@dataclass(frozen=True, kw_only=True, eq=False)
class BoxCoxProfile:
    """The estimated power, its profile-likelihood interval and the profile at chosen powers."""

    response: str
    estimate: float
    ci_low: float | None
    ci_high: float | None
    confidence: float
    loglik_max: float
    powers: np.ndarray
    loglik: np.ndarray
    inside: tuple[str, ...]
    current: str | float
    notes: tuple[str, ...] = field(default=())

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"power": self.powers, "log-likelihood": self.loglik,
                             "below the maximum by": self.loglik_max - self.loglik,
                             "inside the interval": ["yes" if self._in(p) else "no" for p in self.powers]})

    def _in(self, p: float) -> bool:
        lo = -np.inf if self.ci_low is None else self.ci_low
        hi = np.inf if self.ci_high is None else self.ci_high
        return bool(lo <= p <= hi)

    @property
    def title(self) -> str:
        return (f"Box-Cox power of {self.response}: estimate {show_number(self.estimate)}, {self.confidence:.0%} "
                f"profile-likelihood interval ({show_number(self.ci_low)}, {show_number(self.ci_high)})")

    def sentence(self) -> str:
        names = ", ".join(self.inside) if self.inside else "none of the simple powers"
        return f"Simple powers inside the interval: {names}."

    @html_repr
    def _repr_html_(self) -> str:
        return (html_table(self.to_frame(), self.title, (self.sentence(),) + self.notes)
                + small(f"The analysis now uses: {self.current}"))

    def to_text(self) -> str:
        return f"{self.title}\n{self.sentence()}\n" + "\n".join(self.notes)


def _bound(loglik, target: float, start: float, step: float) -> float | None:  # type: ignore[no-untyped-def]
    """The power beyond ``start`` (in the direction of ``step``) where the profile falls to ``target``."""
    a = start
    b = start + step
    while abs(b) <= _LIMIT:
        if loglik(b) < target:
            return float(optimize.brentq(lambda v: loglik(v) - target, min(a, b), max(a, b), xtol=1e-10))
        a, b = b, b + step
        step *= 1.5
    return None


@dataclass(frozen=True, kw_only=True)
class ProfileEstimate:
    """The power that maximises a profile log-likelihood (``estimate``), the ends of its
    interval (``None`` when an end lies beyond the search range), the log-likelihood at the
    estimate and notes on what was not found."""

    estimate: float
    low: float | None
    high: float | None
    loglik: float
    notes: tuple[str, ...]


def profile_estimate(loglik: Callable[[float], float], confidence: float) -> ProfileEstimate:
    """The maximum of a profile log-likelihood of the power and its likelihood interval.

    Brent's method from the bracket (-2, 2) for the maximum (as ``scipy.stats.boxcox``);
    the interval ends where the profile falls chi2(confidence; 1)/2 below it.
    """
    opt = optimize.minimize_scalar(lambda v: -loglik(v), bracket=(-2.0, 2.0), method="brent")
    lam = float(opt.x)
    notes: list[str] = []
    if abs(lam) > _LIMIT:
        lam = float(np.clip(lam, -_LIMIT, _LIMIT))
        notes.append(f"The likelihood keeps rising beyond a power of {_LIMIT:g}; no power transform settles this response.")
    top = loglik(lam)
    target = top - 0.5 * float(special.chdtri(1, 1 - confidence))
    lo = _bound(loglik, target, lam, -0.25)
    hi = _bound(loglik, target, lam, 0.25)
    if lo is None or hi is None:
        notes.append(f"The interval has no {'lower' if lo is None else 'upper'} end within ±{_LIMIT:g}.")
    return ProfileEstimate(estimate=lam, low=lo, high=hi, loglik=top, notes=tuple(notes))


def check_lambdas(lambdas: object) -> np.ndarray:
    """The powers at which to show the profile: a non-empty list of finite numbers in [-10, 10] (the powers a
    transform may take), at most 1,000 of them."""
    ok = isinstance(lambdas, (list, tuple, np.ndarray)) and 0 < len(lambdas) <= 1000 and all(
        not isinstance(v, (bool, np.bool_)) and isinstance(v, (int, float, np.integer, np.floating)) for v in lambdas)
    if not ok:
        raise ExplorerError(f"lambdas is a list of Box-Cox powers (numbers, 1 to 1,000 of them), not {lambdas!r}")
    out = np.asarray(lambdas, dtype=float)
    if not np.all(np.isfinite(out)) or np.any(np.abs(out) > 10):
        raise ExplorerError(f"each of lambdas must be a finite number between -10 and 10, not {out.tolist()}")
    return out


def box_cox(results: Results, *, lambdas: list[float] | None = None, confidence: float | None = None) -> BoxCoxProfile:
    """Box-Cox profile of the measured response under ``results``' model.

    Parameters
    ----------
    results : Results
        The analysis of a fixed-effects study whose kept values are all above zero.
    lambdas : list of float, optional
        Powers at which the profile is tabulated (default -2 to 2 by 0.5 and the
        estimate).
    confidence : float, optional
        Coverage of the likelihood interval of the power (``1 - alpha`` by default).

    Returns
    -------
    BoxCoxProfile
        The power that maximises the profile likelihood, its interval, the simple
        powers inside it and the tabulated profile: evidence for a transform, not a
        switch (``study.set_transform`` records a choice).

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations. JRSS B 26,
    211-252.
    Draper, N. R. and Smith, H. (1998). Applied Regression Analysis, 3rd ed., sec. 13.2.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> profile = ex.stats.box_cox(results)
    >>> round(profile.estimate, 2), profile.inside[:2]
    (0.95, ('reciprocal (-1)', 'reciprocal square root (-0.5)'))
    """
    spec = results.spec
    if spec.is_mixed:
        raise DesignError("the Box-Cox profile is computed for fixed-effects models; this model has random terms")
    conf = 1 - spec.alpha if confidence is None else float(confidence)
    if not 0 < conf < 1:
        raise ExplorerError(f"confidence must be between 0 and 1, not {confidence!r}")
    chosen = None if lambdas is None else check_lambdas(lambdas)
    measured = inverse(np.asarray(every_kept_row(results.fit, results.n_used, "the Box-Cox profile").y, dtype=float),
                       spec.transform)
    bad = ~(measured > 0)
    if np.any(bad):
        ids = np.asarray(results.fit.row_ids)[bad][:8].tolist()
        raise DesignError(
            f"Box-Cox needs every kept value of {spec.response!r} above zero; {int(bad.sum())} are zero or below "
            f"(rows {ids}, smallest {float(np.min(measured)):.6g}). Shift the response by a constant you can justify "
            "before the analysis, or use the rank or trimmed-means tests"
        )
    x = design_of(results, getattr(results, "covariate_values", None)).matrix
    loglik, _ = profile_loglik(measured, x)
    best = profile_estimate(loglik, conf)
    lam, lo, hi, top, notes = best.estimate, best.low, best.high, best.loglik, list(best.notes)
    powers = np.unique(np.r_[np.arange(-2.0, 2.01, 0.5), [round(lam, 4)]] if chosen is None else chosen)
    ll = np.array([loglik(float(p)) for p in powers])
    inside = tuple(f"{name} ({p:g})" for p, name in SIMPLE_POWERS.items()
                   if (lo is None or p >= lo) and (hi is None or p <= hi))
    notes.append("Evidence for a transform, not a switch: study.set_transform(...) records the choice.")
    return BoxCoxProfile(response=spec.response, estimate=lam, ci_low=lo, ci_high=hi, confidence=conf,
                         loglik_max=top, powers=powers, loglik=ll, inside=inside, current=spec.transform,
                         notes=tuple(notes))
