"""One call that runs the whole one-way battery on a :class:`Results`.

:func:`run_battery` bundles the omnibus tests, the assumption checks and the
suggestion they point to, the multiple comparisons with a letter display, effect sizes
with intervals, power and the outlier screens. It is recomputed after each edit: all of
it works from the group sufficient statistics except the rank, spread, normality,
permutation and residual screens, which read the kept rows once.

The battery always reports the same tests, whatever the data: an edit that unbalances
the groups or makes their spreads unequal changes the *suggestion* and the names the
tables carry (Tukey -> Tukey-Kramer), never which computation is shown.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import pandas as pd

from ..engine.errors import DesignError, ExplorerError
from ..engine.spec import alpha_or
from ..engine.tables import html_table
from ..formatting import Scale, p_equals, result_frame, scale, show_share, text_table
from ..rendering import block, footnote, html_repr, note, small
from .assumptions import (
    CheckResult,
    Recommendation,
    bartlett,
    levene,
    recommend,
    shapiro_residuals,
)
from .comparisons import (
    MAX_DUNNETT,
    Alternative,
    PairwiseTable,
    dunnett,
    games_howell,
    pairwise_t,
    tukey,
)
from .effect_sizes import EffectSizes, effect_sizes
from .letters import MAX_LEVELS as MAX_LETTER_LEVELS
from .letters import LetterDisplay, compact_letters
from .omnibus import (
    OmnibusTest,
    brown_forsythe_f,
    classic_f,
    kruskal_wallis,
    permutation_f,
    welch_f,
)
from .on_demand import OnDemand, resolve
from .outliers import (
    OutlierScreen,
    bonferroni_outlier_test,
    grubbs_test,
    robust_z_screen,
)
from .power import PowerPlan, power_plan

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["EAGER_PAIRS", "Battery", "comparison_parts", "run_battery"]

#: Comparison tables with more pairs than this (about 200 levels) are computed when first read.
EAGER_PAIRS = 20_000
_PAIRWISE = ("tukey", "games_howell", "pairwise_t")


def _letters_not_built(results: Results, why: str, alpha: float) -> LetterDisplay:
    gs = results.groups
    order = np.argsort(-np.asarray(gs.original_means), kind="stable")
    return LetterDisplay(labels=tuple(gs.labels[i] for i in order), estimates=np.asarray(gs.original_means)[order],
                         letters=tuple("" for _ in order), method="none", alpha=alpha,
                         notes=(f"No letters: {why}.",))


def comparison_parts(
    results: Results,
    *,
    confidence: float,
    pairwise_adjust: str,
    letters_from: str,
    alpha: float,
    control: str | None,
    dunnett_alternative: Alternative,
) -> dict[str, Any]:
    """The battery's comparison tables, letters and Dunnett table, each bounded in memory and time.

    Above :data:`EAGER_PAIRS` pairs the three all-pairs tables are :class:`OnDemand`
    (computed when first read); letters stop at :data:`letters.MAX_LEVELS` levels or
    when the display would need too many letters; Dunnett's table at
    :data:`comparisons.MAX_DUNNETT` comparisons. Each limit reached adds a note.
    """
    k = results.groups.k
    pairs = k * (k - 1) // 2
    notes: list[str] = []
    makers: dict[str, tuple[str, Callable[[], PairwiseTable]]] = {
        "tukey": ("Tukey-Kramer", lambda: tukey(results, confidence=confidence)),
        "games_howell": ("Games-Howell", lambda: games_howell(results, confidence=confidence)),
        "pairwise_t": ("pairwise t", lambda: pairwise_t(results, adjust=pairwise_adjust,  # type: ignore[arg-type]
                                                         confidence=confidence)),
    }
    tables: dict[str, Any] = {}
    for name, (what, make) in makers.items():
        tables[name] = make() if pairs <= EAGER_PAIRS else OnDemand(what, pairs, make)
    if pairs > EAGER_PAIRS:
        notes.append(
            f"With {k:,} levels each table of all pairs holds {pairs:,} comparisons: the Tukey-Kramer, Games-Howell "
            "and pairwise t tables are computed when first read (battery.tukey, ...), Games-Howell can take "
            "minutes at this size; displays show the first rows."
        )
    letters: LetterDisplay | None = None
    if k > MAX_LETTER_LEVELS:
        why = f"letters are built for at most {MAX_LETTER_LEVELS} levels, this view has {k:,}"
    else:
        try:
            letters = compact_letters(resolve(tables[letters_from.replace("-", "_")]), alpha=alpha)
        except ExplorerError as exc:
            why = str(exc)
    if letters is None:
        letters = _letters_not_built(results, why, alpha)
        notes.append(f"No letters: {why}.")
    dun = None
    if control is not None:
        if k - 1 > MAX_DUNNETT and str(control) in results.groups.labels:
            notes.append(f"No Dunnett table: it is computed for at most {MAX_DUNNETT} comparisons with the control, "
                         f"this view has {k - 1:,}.")
        else:  # an unknown control is the caller's mistake: refused
            dun = dunnett(results, control, alternative=dunnett_alternative, confidence=confidence)
    return {**tables, "dunnett": dun, "letters": letters, "notes": notes}


@dataclass(frozen=True, kw_only=True, eq=False)
class Battery:
    """Everything the one-way battery computed on one view, with the options it ran with."""

    alpha: float
    classic: OmnibusTest
    welch: OmnibusTest
    brown_forsythe: OmnibusTest
    kruskal_wallis: OmnibusTest
    permutation: OmnibusTest | None
    levene: CheckResult
    bartlett: CheckResult
    shapiro: CheckResult
    recommendation: Recommendation
    tukey: PairwiseTable = field(repr=False)  # computed when first read above EAGER_PAIRS pairs (see OnDemand)
    games_howell: PairwiseTable = field(repr=False)
    pairwise_t: PairwiseTable = field(repr=False)
    dunnett: PairwiseTable | None
    letters: LetterDisplay
    effect_sizes: EffectSizes | None
    power: PowerPlan | None
    studentized: OutlierScreen
    grubbs: OutlierScreen
    robust_z: OutlierScreen
    options: tuple[tuple[str, object], ...] = ()
    notes: tuple[str, ...] = field(default=())
    display: Scale | None = None  # the readings' decimals and units of the results it ran on

    def __getattribute__(self, name: str) -> Any:
        return resolve(object.__getattribute__(self, name))

    @property
    def deferred(self) -> tuple[str, ...]:
        """Comparison tables not computed yet (large families are computed when first read)."""
        return tuple(n for n in _PAIRWISE if isinstance(object.__getattribute__(self, n), OnDemand)
                     and not object.__getattribute__(self, n).ready)

    @property
    def omnibus(self) -> tuple[OmnibusTest, ...]:
        tests = [self.classic, self.welch, self.brown_forsythe, self.kruskal_wallis]
        return tuple(tests + ([self.permutation] if self.permutation is not None else []))

    @property
    def checks(self) -> tuple[CheckResult, ...]:
        return (self.levene, self.bartlett, self.shapiro)

    @property
    def comparisons(self) -> tuple[PairwiseTable, ...]:
        return tuple(t for t in (self.tukey, self.games_howell, self.pairwise_t, self.dunnett) if t is not None)

    @property
    def screens(self) -> tuple[OutlierScreen, ...]:
        return (self.studentized, self.grubbs, self.robust_z)

    def flagged_rows(self) -> dict[str, tuple[object, ...]]:
        """Row ids flagged by each outlier screen (nothing is ever dropped by the battery)."""
        return {s.method: s.flagged for s in self.screens}

    def omnibus_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame([t.row() for t in self.omnibus])
        for c in ("statistic", "df (numerator)", "df (denominator)", "p-value"):
            frame[c] = pd.array([None if v is None else float(v) for v in frame[c]], dtype="Float64")
        return result_frame(frame)

    def checks_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame([c.row() for c in self.checks])
        for c in ("statistic", "p-value"):
            frame[c] = pd.array([None if v is None else float(v) for v in frame[c]], dtype="Float64")
        return result_frame(frame)

    def to_frame(self) -> pd.DataFrame:
        """The omnibus tests (the other parts have their own ``to_frame``)."""
        return self.omnibus_frame()

    def to_text(self) -> str:
        """Short plain text: the tests, the checks, the suggested test, the featured comparisons, effect
        size, power and the rows the screens flag (``print(battery)``)."""
        with scale(of=self.display or Scale()):
            tests = self.omnibus_frame()[["test", "statistic", "df (numerator)", "df (denominator)", "p-value"]]
            checks = self.checks_frame()[["check", "statistic", "p-value"]]
            table = self.tukey.to_frame()
            keep = [c for c in table.columns if c in ("first", "second", "difference") or c.startswith("p-value")
                    or "low" in c or "high" in c]
            parts = [f"Tests of equal level means (alpha {self.alpha:g}):", text_table(tests), "",
                     "Assumption checks:", text_table(checks), "",
                     f"Suggested test: {self.recommendation.test}.", "",
                     f"{self.tukey.method} comparisons:", text_table(table[keep]), "",
                     "Letters (same letter: not declared different): "
                     + ", ".join(f"{lv} {lt}" for lv, lt in zip(self.letters.labels, self.letters.letters))]
            if self.effect_sizes is not None:
                e = self.effect_sizes
                lo, hi = e.ci_proportion if e.ci_proportion else (None, None)
                parts.append(f"eta squared {show_share(e.eta_squared)} ({e.confidence:.0%} interval "
                             f"{show_share(lo)} to {show_share(hi)}); omega squared {show_share(e.omega_squared)}")
            if self.power is not None:
                parts.append(f"power of the F test {show_share(self.power.power)}")
            flagged = "; ".join(f"{k}: {', '.join(map(str, v))}" for k, v in self.flagged_rows().items() if v)
            parts.append(f"Rows flagged by the screens (none left out): {flagged or 'none'}")
            parts += list(self.notes)
        return "\n".join(parts)

    def __str__(self) -> str:
        return self.to_text()

    def __repr__(self) -> str:
        return (f"<Battery at alpha {self.alpha:g}: classic F {p_equals(self.classic.pvalue)}, "
                f"Welch F {p_equals(self.welch.pvalue)}, suggested {self.recommendation.test}; print() for the tables>")

    @html_repr
    def _repr_html_(self) -> str:
        with scale(of=self.display or Scale()):
            return self._html()

    def _html(self) -> str:
        parts = [
            html_table(self.omnibus_frame(), "Tests of equal level means"),
            html_table(self.checks_frame(), "Assumption checks"),
            self.recommendation._repr_html_(),
        ]
        waiting = self.deferred
        for name in (*_PAIRWISE, "dunnett"):
            if name in waiting:
                part = object.__getattribute__(self, name)
                parts.append(small(f"{part.what}: {part.size:,} comparisons, computed when first read "
                                   f"(battery.{name})."))
            elif getattr(self, name) is not None:
                parts.append(getattr(self, name)._repr_html_())
        parts.append(self.letters._repr_html_())
        if self.effect_sizes is not None:
            parts.append(self.effect_sizes._repr_html_())
        if self.power is not None:
            parts.append(self.power._repr_html_())
        for s in self.screens:
            parts.append(s._repr_html_())
        parts.append(
            footnote("Screens flag rows for a look; leaving a row out needs a documented reason.")
        )
        parts.extend(note(n) for n in self.notes)
        return block("battery", parts)


def run_battery(
    results: Results,
    *,
    alpha: float | None = None,
    confidence: float | None = None,
    effect_confidence: float | None = None,
    levene_center: Literal["median", "mean", "trimmed"] = "median",
    letters_from: Literal["tukey", "games-howell", "pairwise-t"] = "tukey",
    pairwise_adjust: Literal["holm", "bonferroni", "none"] = "holm",
    control: str | None = None,
    dunnett_alternative: Alternative = "two-sided",
    permutations: int = 0,
    seed: int = 0,
    effect_f: float | None = None,
    target_power: float = 0.8,
    robust_cutoff: float = 3.5,
) -> Battery:
    """Run every one-way check on ``results`` and return them as one frozen :class:`Battery`.

    Parameters
    ----------
    results : Results
        The analysis of a one-factor study.
    alpha : float, optional
        Level for decisions, letters and screens (the spec's alpha by default).
    confidence : float, optional
        Coverage of the comparison intervals (``1 - alpha`` by default, so that an
        interval excludes zero exactly when its pair is declared different).
    effect_confidence : float, optional
        Coverage of the effect-size intervals (``1 - 2 alpha`` by default, the interval
        that matches the F test).
    levene_center : {'median', 'mean', 'trimmed'}, default 'median'
        Centre of Levene's test ('median' = Brown-Forsythe).
    letters_from : {'tukey', 'games-howell', 'pairwise-t'}, default 'tukey'
        Which comparison table the letters are built from.
    pairwise_adjust : {'holm', 'bonferroni', 'none'}, default 'holm'
        Adjustment of the pairwise t table.
    control : str, optional
        A level to compare the others with (Dunnett); no Dunnett table when None.
    dunnett_alternative : {'two-sided', 'greater', 'less'}, default 'two-sided'
        Direction of Dunnett's comparisons.
    permutations : int, default 0
        Number of permutations for the permutation F (0 = not run).
    seed : int, default 0
        Seed of the permutation F.
    effect_f : float, optional
        Cohen's f for the power (the observed one when None).
    target_power : float, default 0.8
        Power the needed group size is computed for.
    robust_cutoff : float, default 3.5
        Cutoff of the robust z screen.

    Returns
    -------
    Battery
        Omnibus tests, assumption checks and the suggestion, comparisons and letters,
        effect sizes and power, residual screens; tables of more than 20,000 pairs are
        computed when first read.

    References
    ----------
    The references of each part: :func:`welch_f`, :func:`levene`, :func:`tukey`,
    :func:`compact_letters`, :func:`effect_sizes`, :func:`power_plan`,
    :func:`bonferroni_outlier_test` in :mod:`explorer.stats`.

    Examples
    --------
    >>> import explorer as ex
    >>> results = ex.Study(ex.example_data("coating"), "thickness_um", "nozzle").results
    >>> battery = ex.stats.run_battery(results, control="A")
    >>> round(battery.welch.pvalue, 5), battery.letters.letter_of("B"), battery.dunnett.family_size
    (0.00073, 'a', 2)
    """
    if not results.spec.is_oneway:
        raise DesignError("the one-way battery needs a one-way analysis (one factor, no blocks)")
    a = alpha_or(alpha, results.spec.alpha)
    if not 0 < a < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")
    if letters_from not in ("tukey", "games-howell", "pairwise-t"):
        raise ExplorerError(f"letters_from must be 'tukey', 'games-howell' or 'pairwise-t', not {letters_from!r}")
    confidence = 1 - a if confidence is None else float(confidence)
    spread = levene(results, center=levene_center)
    normal = shapiro_residuals(results)
    n = results.groups.n
    notes: list[str] = []
    compared = comparison_parts(results, confidence=confidence, pairwise_adjust=pairwise_adjust,
                                letters_from=letters_from, alpha=a, control=control,
                                dunnett_alternative=dunnett_alternative)
    notes.extend(compared.pop("notes"))
    if not np.all(n == n[0]):
        notes.append(
            f"Group sizes are unequal ({int(n.min())} to {int(n.max())}): the same tests are reported as for equal "
            "sizes; Tukey's table uses Kramer's standard errors and is named Tukey-Kramer."
        )
    options: tuple[tuple[str, object], ...] = (
        ("alpha", a), ("confidence", confidence), ("effect_confidence", effect_confidence),
        ("levene_center", levene_center),
        ("letters_from", letters_from), ("pairwise_adjust", pairwise_adjust), ("control", control),
        ("dunnett_alternative", dunnett_alternative), ("permutations", int(permutations)), ("seed", int(seed)),
        ("effect_f", effect_f), ("target_power", target_power), ("robust_cutoff", robust_cutoff),
    )
    try:
        sizes: EffectSizes | None = effect_sizes(results, confidence=effect_confidence, alpha=a)
    except ExplorerError as exc:
        sizes = None
        notes.append(f"No effect sizes: {exc}.")
    try:
        plan: PowerPlan | None = power_plan(results, effect_f=effect_f, alpha=a, target_power=target_power)
    except ExplorerError as exc:
        plan = None
        notes.append(f"No power: {exc}.")
    if not permutations:
        notes.append("Permutation F not run (pass permutations=9999, say, to run it).")
    return Battery(
        alpha=a,
        classic=classic_f(results),
        welch=welch_f(results),
        brown_forsythe=brown_forsythe_f(results),
        kruskal_wallis=kruskal_wallis(results),
        permutation=permutation_f(results, permutations, seed=seed) if permutations else None,
        levene=spread,
        bartlett=bartlett(results),
        shapiro=normal,
        recommendation=recommend(results, spread, normal, alpha=a),
        **compared,
        effect_sizes=sizes,
        power=plan,
        studentized=bonferroni_outlier_test(results, alpha=a),
        grubbs=grubbs_test(results, alpha=a),
        robust_z=robust_z_screen(results, cutoff=robust_cutoff),
        options=options,
        notes=tuple(notes),
        display=results.display_scale(),
    )
