"""Checks of the classic F test's assumptions on the current view, and what they point to.

Levene's test of equal spreads with a visible choice of centre, Bartlett's test (from
the level variances alone), Shapiro-Wilk on the model residuals (not on raw groups),
each with the sample-size limits it is valid for, and a plain sentence that suggests
an overall test as information (Welch's F, named before looking at the data) and says
what the checks show. Nothing here changes which tests the kit reports or which one the
decision reads.

References
----------
Levene, H. (1960). Robust tests for equality of variances. In Contributions to
Probability and Statistics, Stanford Univ. Press, 278-292.
Brown, M. B. and Forsythe, A. B. (1974). Robust tests for the equality of variances.
JASA 69, 364-367 (median and trimmed-mean centres).
Bartlett, M. S. (1937). Properties of sufficiency and statistical tests. Proc. R. Soc.
Lond. A 160, 268-282.
Shapiro, S. S. and Wilk, M. B. (1965). An analysis of variance test for normality.
Biometrika 52, 591-611; Royston, P. (1995). Remark AS R94. Appl. Stat. 44, 547-551.
Delacre, M., Leys, C., Mora, Y. L. and Lakens, D. (2019). Taking parametric assumptions
seriously: arguments for the use of Welch's F-test instead of the classical F-test in
one-way ANOVA. International Review of Social Psychology 32(1), 13.
Delacre, M., Lakens, D. and Leys, C. (2017). Why psychologists should by default use
Welch's t-test instead of Student's t-test. Int. Rev. Soc. Psychol. 30(1), 92-101.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, ClassVar, Literal

import numpy as np
import pandas as pd
from scipy import special, stats

from ..engine.distributions import f_sf
from ..engine.errors import ExplorerError
from ..engine.groupstats import group_stats
from ..engine.spec import TEST_LABELS, alpha_or
from ..engine.tables import esc
from ..formatting import p_equals, result_frame, show_df, show_stat
from ..rendering import footnote, html_repr, note
from .oneway_inputs import row_sample_notes
from .result_extras import WithExtras

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["CheckResult", "Recommendation", "bartlett", "levene", "recommend", "shapiro_residuals"]

Center = Literal["median", "mean", "trimmed"]

#: Shapiro-Wilk limits of scipy's implementation of Royston's (1995) algorithm.
SHAPIRO_MIN_N = 3
SHAPIRO_MAX_N = 5000


@dataclass(frozen=True, kw_only=True)
class CheckResult(WithExtras):
    """One assumption check: what it tests, its statistic, p-value and the limits it holds in.

    ``center`` is Levene's centre ('median', 'mean' or 'trimmed'; ``None`` for the other checks).
    """

    method: str
    tests: str
    statistic: float | None
    df: tuple[float, ...]
    pvalue: float | None
    limits: str
    within_limits: bool = True
    notes: tuple[str, ...] = field(default=())
    center: str | None = None

    EXTRAS: ClassVar[tuple[tuple[str, str], ...]] = (("centre", "center"),)

    def row(self) -> dict[str, object]:
        return {"check": self.method, "tests": self.tests, "statistic": self.statistic,
                "df": ", ".join(show_df(d) for d in self.df), "p-value": self.pvalue, "limits": self.limits}

    def to_frame(self) -> pd.DataFrame:
        return result_frame([self.row()])

    @html_repr
    def _repr_html_(self) -> str:
        notes = "".join(note(n) for n in self.notes)
        return (
            f"<div><b>{esc(self.method)}</b> ({esc(self.tests)}): statistic {show_stat(self.statistic)}, "
            f"{p_equals(self.pvalue)}. <i>{esc(self.limits)}</i>{notes}</div>"
        )


def _sorted_by_group(values: np.ndarray, g: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Values sorted inside each group (groups in code order) and each group's start."""
    by_value = np.argsort(values)
    order = by_value[np.argsort(g[by_value].astype(np.int16 if len(n) < 30000 else np.int64), kind="stable")]
    starts = np.r_[0, np.cumsum(n)[:-1]].astype(np.int64)
    return values[order], starts


def levene(results: Results, *, center: Center = "median", proportion_to_cut: float = 0.05) -> CheckResult:
    """Levene's test of equal spreads: the one-way F on ``|y - centre of its level|``.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``); with several factors or blocks the groups are
        the cells of the design.
    center : {'median', 'mean', 'trimmed'}, default 'median'
        The centre of each group: the median (Brown and Forsythe's variant, robust, the
        usual default), the mean (Levene's original) or the mean after cutting
        ``proportion_to_cut`` of the values from each end (as ``scipy.stats.levene``).
    proportion_to_cut : float, default 0.05
        Share cut from each end for ``center='trimmed'``.

    Returns
    -------
    CheckResult
        F with its df and p-value; ``center`` records the centre used.

    Notes
    -----
    Every centre is the group's own, whatever model was fitted. The deviations are
    computed from the residuals minus their cell centre: the fitted value is constant
    within a cell, so this equals ``y - centre`` exactly while the response offset costs
    no digits. (The residuals of a non-saturated model, additive factors or blocks, do
    not average to zero within a cell, so they are not themselves deviations from the
    cell mean.)

    References
    ----------
    Levene, H. (1960). Robust tests for equality of variances. In Contributions to
    Probability and Statistics, Stanford Univ. Press, 278-292.
    Brown, M. B. and Forsythe, A. B. (1974). Robust tests for the equality of variances.
    JASA 69, 364-367.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> check = ex.stats.levene(results)
    >>> round(check.statistic, 3), check.df, check.center
    (0.038, (2.0, 9.0), 'median')
    """
    if center not in ("median", "mean", "trimmed"):
        raise ExplorerError(f"center must be 'median', 'mean' or 'trimmed', not {center!r}")
    if not 0 <= proportion_to_cut < 0.5:
        raise ExplorerError(f"proportion_to_cut must be in [0, 0.5), not {proportion_to_cut!r}")
    fit = results.fit
    gs = results.groups
    g, k = fit.group, gs.k
    n = np.bincount(g, minlength=k)  # the rows at hand (all kept rows, or a sample)
    e = np.asarray(fit.residuals, dtype=float)
    if center == "mean":
        c = np.bincount(g, weights=e, minlength=k) / np.maximum(n, 1)
        z = np.abs(e - c[g])
    else:
        srt, starts = _sorted_by_group(e, g, n)
        m = np.maximum(n, 1)  # levels without rows get a dummy centre that no row uses
        last = len(srt) - 1
        if center == "median":
            lo = np.minimum(starts + (m - 1) // 2, last)
            hi = np.minimum(starts + m // 2, last)
            c = 0.5 * (srt[lo] + srt[hi])
        else:
            cut = (proportion_to_cut * m).astype(np.int64)
            cs = np.r_[0.0, np.cumsum(srt)]
            a, b = np.minimum(starts + cut, last), np.minimum(starts + m - cut, last + 1)
            c = (cs[b] - cs[a]) / np.maximum(b - a, 1)
        z = np.abs(e - c[g])
    zs = group_stats(z, g, gs.labels).nonempty()
    big_n = int(n.sum())
    df1, df2 = zs.k - 1, big_n - zs.k
    notes = row_sample_notes(results)
    names = {"median": "Levene (median centre, Brown-Forsythe)", "mean": "Levene (mean centre)",
             "trimmed": f"Levene (trimmed-mean centre, {proportion_to_cut:g} cut each end)"}
    limits = "Needs at least two observations in some level; robust to non-normality with the median centre."
    if zs.ss_within <= 0 or df1 < 1 or df2 < 1:
        return CheckResult(method=names[center], tests="equal spreads across levels", statistic=None,
                           df=(df1, df2), pvalue=None, limits=limits, center=center,
                           notes=notes + (("Every absolute deviation equals its level's mean deviation (or too few "
                                          "rows): the F is undefined."),))
    f = (zs.ss_between / df1) / (zs.ss_within / df2)
    return CheckResult(method=names[center], tests="equal spreads across levels", statistic=float(f),
                       df=(float(df1), float(df2)), pvalue=float(f_sf(f, df1, df2)), limits=limits,
                       center=center, notes=notes)


def bartlett(results: Results) -> CheckResult:
    """Bartlett's (1937) test of equal variances, from the level variances alone.

    Parameters
    ----------
    results : Results
        The analysis (``study.results``); with several factors the groups are the cells
        of the design.

    Returns
    -------
    CheckResult
        The chi-square statistic on ``k - 1`` df and its p-value.

    Notes
    -----
    ``T = [(N-k) ln s_p^2 - sum (n_i-1) ln s_i^2] / C``, chi-square on ``k-1`` df. Exact
    only for normal data: heavy tails make it reject too often (use Levene then).

    References
    ----------
    Bartlett, M. S. (1937). Properties of sufficiency and statistical tests. Proc. R.
    Soc. Lond. A 160, 268-282.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> check = ex.stats.bartlett(results)
    >>> round(check.statistic, 3), check.df
    (0.011, (2.0,))
    """
    gs = results.groups
    n = gs.n.astype(float)
    var = gs.variances()
    k = gs.k
    limits = "Each level needs two or more observations and some spread; sensitive to non-normality."
    bad = [lab for lab, c, v in zip(gs.labels, n, var) if c < 2 or not v > 0]
    if bad:
        return CheckResult(method="Bartlett", tests="equal variances (normal data)", statistic=None,
                           df=(float(k - 1),), pvalue=None, limits=limits, within_limits=False,
                           notes=(f"Undefined: level(s) {', '.join(map(repr, bad))} have one observation or no spread.",))
    dfw = n - 1
    big = dfw.sum()
    sp2 = np.dot(dfw, var) / big
    num = big * np.log(sp2) - np.dot(dfw, np.log(var))
    c = 1 + (np.sum(1 / dfw) - 1 / big) / (3 * (k - 1))
    t = float(num / c)
    return CheckResult(method="Bartlett", tests="equal variances (normal data)", statistic=t, df=(float(k - 1),),
                       pvalue=float(special.chdtrc(k - 1, t)), limits=limits)


def shapiro_residuals(results: Results) -> CheckResult:
    """Shapiro-Wilk W on the model residuals.

    Parameters
    ----------
    results : Results
        The analysis of any model the engines fit (one-way, factorial, blocked).

    Returns
    -------
    CheckResult
        W and its p-value, with the limits the test holds in.

    Notes
    -----
    Valid for ``3 <= n <= 5000`` residuals; above 5000 W is still computed but the
    p-value approximation is unverified (said in the result). Residuals of a fitted
    model are slightly correlated (n - k df), which the test ignores.

    References
    ----------
    Shapiro, S. S. and Wilk, M. B. (1965). An analysis of variance test for normality.
    Biometrika 52, 591-611.
    Royston, P. (1995). Remark AS R94. Appl. Stat. 44, 547-551.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("lines"), "thickness_um", ["nozzle", "speed"]).results
    >>> check = ex.stats.shapiro_residuals(results)
    >>> round(check.statistic, 3), check.within_limits
    (0.987, True)
    """
    e = np.asarray(results.fit.residuals, dtype=float)  # residuals of any fitted model
    n = len(e)
    limits = f"p-value approximation valid for {SHAPIRO_MIN_N} to {SHAPIRO_MAX_N} residuals (Royston 1995)."
    if n < SHAPIRO_MIN_N:
        return CheckResult(method="Shapiro-Wilk (residuals)", tests="normal residuals", statistic=None, df=(),
                           pvalue=None, limits=limits, within_limits=False,
                           notes=(f"Not computed: {n} residuals, fewer than {SHAPIRO_MIN_N}.",))
    if np.ptp(e) <= 0:
        return CheckResult(method="Shapiro-Wilk (residuals)", tests="normal residuals", statistic=None, df=(),
                           pvalue=None, limits=limits,
                           notes=("Not computed: every residual is zero.",))
    notes: list[str] = list(row_sample_notes(results))
    within = n <= SHAPIRO_MAX_N
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = stats.shapiro(e)
    if not within:
        notes.append(
            f"{n} residuals is above {SHAPIRO_MAX_N}: the p-value may be inaccurate, and at this size trivial "
            "departures from normality are detected; judge the normal quantile plot instead."
        )
    return CheckResult(method="Shapiro-Wilk (residuals)", tests="normal residuals", statistic=float(res.statistic),
                       df=(), pvalue=float(res.pvalue), limits=limits, within_limits=within, notes=tuple(notes))


#: The reference behind the suggested default (checked: Int. Rev. Soc. Psychol. 32(1), doi 10.5334/irsp.198).
WELCH_DEFAULT_REFERENCE = (
    "Delacre, M., Leys, C., Mora, Y. L. and Lakens, D. (2019). Taking parametric assumptions seriously: "
    "arguments for the use of Welch's F-test instead of the classical F-test in one-way ANOVA. "
    "International Review of Social Psychology 32(1), 13"
)
#: Why a pretest should not pick the test (two groups; the same argument for k groups).
PRETEST_REFERENCE = (
    "Delacre, M., Lakens, D. and Leys, C. (2017). Why psychologists should by default use Welch's t-test "
    "instead of Student's t-test. International Review of Social Psychology 30(1), 92-101"
)

_TEST_NAMES = TEST_LABELS


@dataclass(frozen=True, kw_only=True)
class Recommendation:
    """The suggested overall test, stated as information, and what the checks show.

    ``test`` is named before looking at the data (Welch's F for one factor; Delacre et
    al. 2019), so it does not move with the checks: choosing the test from a pretest
    of spreads or normality at the analysis alpha changes the error rates of the whole
    procedure (Delacre et al. 2017). ``chosen`` is the overall test the study's
    decision reads; ``spreads_differ``/``residuals_non_normal`` are what the checks
    show at alpha (``None`` when a check could not be computed).
    """

    test: str
    sentence: str
    spreads_differ: bool | None
    residuals_non_normal: bool | None
    balanced: bool
    chosen: str = "classic F"
    references: tuple[str, ...] = (WELCH_DEFAULT_REFERENCE, PRETEST_REFERENCE)

    @html_repr
    def _repr_html_(self) -> str:
        refs = "".join(footnote(f"{r}.") for r in self.references)
        return (f"<div><b>Suggested overall test (information, not a switch): {esc(self.test)}.</b> "
                f"{esc(self.sentence)}{refs}</div>")


def recommend(results: Results, spread: CheckResult, normality: CheckResult, *, alpha: float | None = None,
              large_group: int = 30) -> Recommendation:
    """The suggested overall test as information, with what the spread and normality checks show.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study (``study.results``).
    spread : CheckResult
        A test of equal spreads (:func:`levene` or :func:`bartlett`).
    normality : CheckResult
        A test of normal residuals (:func:`shapiro_residuals`).
    alpha : float, optional
        Level at which the checks are read; the analysis alpha when not given.
    large_group : int, default 30
        Group size from which the sentence treats the levels as large samples.

    Returns
    -------
    Recommendation
        The suggested test, a sentence saying what the checks show and which test the
        study's decision reads, and the references behind the suggestion.

    Notes
    -----
    The suggestion is Welch's F (Games-Howell for pairs) whatever the checks say: it
    keeps its type I error rate when level variances differ and loses little power when
    they are equal. The checks are reported, not used to switch: a test picked by a
    pretest at the analysis alpha has error rates of its own that neither test's
    p-value describes. The study's decision reads the overall test chosen for it
    (``results.spec.test``); nothing here changes which tests are reported.

    References
    ----------
    Delacre, M., Leys, C., Mora, Y. L. and Lakens, D. (2019). Taking parametric
    assumptions seriously: arguments for the use of Welch's F-test instead of the
    classical F-test in one-way ANOVA. Int. Rev. Soc. Psychol. 32(1), 13.
    Delacre, M., Lakens, D. and Leys, C. (2017). Why psychologists should by default use
    Welch's t-test instead of Student's t-test. Int. Rev. Soc. Psychol. 30(1), 92-101.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> advice = ex.stats.recommend(results, ex.stats.levene(results), ex.stats.shapiro_residuals(results))
    >>> advice.test, advice.chosen
    ('Welch F', 'classic F')
    """
    a = alpha_or(alpha, results.spec.alpha)
    n = results.groups.n
    balanced = bool(np.all(n == n[0]))
    differ = None if spread.pvalue is None else spread.pvalue < a
    nonnormal = None if normality.pvalue is None else normality.pvalue < a
    chosen_key = str(getattr(results.spec, "test", "classic"))
    chosen = _TEST_NAMES.get(chosen_key, chosen_key)
    bal = "equal" if balanced else f"unequal ({int(n.min())} to {int(n.max())})"
    sp = (("spreads look different" if differ else "spreads look similar") if differ is not None
          else "spreads could not be compared")
    sp += f" ({spread.method}, {p_equals(spread.pvalue)})" if spread.pvalue is not None else ""
    nm = (("residuals depart from normal" if nonnormal else "residuals look normal") if nonnormal is not None
          else "normality could not be checked")
    nm += f" (Shapiro-Wilk, {p_equals(normality.pvalue)})" if normality.pvalue is not None else ""
    parts = [
        "Welch's F (Games-Howell for pairs) is suggested before looking at the data: it keeps its error rate "
        "whether or not the level spreads are equal and loses little power when they are, which is why "
        "Delacre, Leys, Mora and Lakens (2019) recommend it as the default.",
        f"The decision reads the overall test chosen for this study: {chosen} (the classic F unless another is "
        "chosen); choose it before seeing the results.",
        "The checks are information, not a switch: picking the test from a pretest of spreads or normality at "
        "the analysis alpha changes the error rates of the whole procedure (Delacre, Lakens and Leys 2017).",
        f"At alpha {a:g}: {sp}; {nm}.",
    ]
    if differ and chosen_key == "classic":
        parts.append(f"With {bal} group sizes the classic F can be far off when spreads differ; read it beside "
                     "Welch's F, which is reported with it.")
    if nonnormal and int(n.min()) < large_group:
        parts.append(f"With non-normal residuals and small groups (smallest {int(n.min())}) the F tests rely on "
                     "approximate normality; the rank test and the permutation F are reported beside them.")
    elif nonnormal:
        parts.append(f"Every level has at least {large_group} observations, so the F tests are robust to this "
                     "non-normality.")
    if differ is None and nonnormal is None:
        parts.append("No check could be computed on this view.")
    return Recommendation(test="Welch F", sentence=" ".join(parts), spreads_differ=differ,
                          residuals_non_normal=nonnormal, balanced=balanced, chosen=chosen)
