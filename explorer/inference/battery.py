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

import html
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np
import pandas as pd

from ..engine.errors import DesignError, ExplorerError
from ..engine.tables import html_table
from .assumptions import (
    CheckResult,
    Recommendation,
    bartlett,
    levene,
    recommend,
    shapiro_residuals,
)
from .comparisons import (
    Alternative,
    PairwiseTable,
    dunnett,
    games_howell,
    pairwise_t,
    tukey,
)
from .effect_sizes import EffectSizes, effect_sizes
from .letters import LetterDisplay, compact_letters
from .omnibus import (
    OmnibusTest,
    brown_forsythe_f,
    classic_f,
    kruskal_wallis,
    permutation_f,
    welch_f,
)
from .outliers import (
    OutlierScreen,
    bonferroni_outlier_test,
    grubbs_test,
    robust_z_screen,
)
from .power import PowerPlan, power_plan

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["Battery", "run_battery"]


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
    tukey: PairwiseTable
    games_howell: PairwiseTable
    pairwise_t: PairwiseTable
    dunnett: PairwiseTable | None
    letters: LetterDisplay
    effect_sizes: EffectSizes | None
    power: PowerPlan | None
    studentized: OutlierScreen
    grubbs: OutlierScreen
    robust_z: OutlierScreen
    options: tuple[tuple[str, object], ...] = ()
    notes: tuple[str, ...] = field(default=())

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
        return frame

    def checks_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame([c.row() for c in self.checks])
        for c in ("statistic", "p-value"):
            frame[c] = pd.array([None if v is None else float(v) for v in frame[c]], dtype="Float64")
        return frame

    def to_frame(self) -> pd.DataFrame:
        """The omnibus tests (the other parts have their own ``to_frame``)."""
        return self.omnibus_frame()

    def _repr_html_(self) -> str:
        parts = [
            html_table(self.omnibus_frame(), "Tests of equal level means"),
            html_table(self.checks_frame(), "Assumption checks"),
            self.recommendation._repr_html_(),
        ]
        for t in self.comparisons:
            parts.append(t._repr_html_())
        parts.append(self.letters._repr_html_())
        if self.effect_sizes is not None:
            parts.append(self.effect_sizes._repr_html_())
        if self.power is not None:
            parts.append(self.power._repr_html_())
        for s in self.screens:
            parts.append(s._repr_html_())
        parts.append(
            "<div style='font-size:90%;color:#555'>Screens flag rows for a look; leaving a row out needs a "
            "documented reason.</div>"
        )
        parts.extend(f"<div style='color:#8a4b00'>{html.escape(n)}</div>" for n in self.notes)
        return "<div class='vx-battery'>" + "".join(parts) + "</div>"


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
    """Run every one-way check on ``results`` (a one-way :class:`Results`).

    Parameters
    ----------
    alpha : level for decisions, letters and screens (the spec's alpha by default).
    confidence : coverage of the comparison intervals (``1 - alpha`` by default, so that
        an interval excludes zero exactly when its pair is declared different).
    effect_confidence : coverage of the effect-size intervals (``1 - 2 alpha`` by
        default, the interval that matches the F test; Steiger 2004).
    levene_center : centre of Levene's test ('median' = Brown-Forsythe).
    letters_from : which comparison table the letters are built from.
    pairwise_adjust : adjustment of the pairwise t table ('holm', 'bonferroni', 'none').
    control : a level to compare the others with (Dunnett); no Dunnett table when None.
    dunnett_alternative : 'two-sided', 'greater' or 'less'.
    permutations : number of permutations for the permutation F (0 = not run).
    seed : seed of the permutation F.
    effect_f : Cohen's f for the power (the observed one when None).
    target_power : power the needed group size is computed for.
    robust_cutoff : cutoff of the robust z screen.
    """
    if not results.spec.is_oneway:
        raise DesignError("the one-way battery needs a one-way analysis (one factor, no blocks)")
    a = results.spec.alpha if alpha is None else float(alpha)
    if not 0 < a < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")
    if letters_from not in ("tukey", "games-howell", "pairwise-t"):
        raise ExplorerError(f"letters_from must be 'tukey', 'games-howell' or 'pairwise-t', not {letters_from!r}")
    confidence = 1 - a if confidence is None else float(confidence)
    spread = levene(results, center=levene_center)
    normal = shapiro_residuals(results)
    tk = tukey(results, confidence=confidence)
    gh = games_howell(results, confidence=confidence)
    pt = pairwise_t(results, adjust=pairwise_adjust, confidence=confidence)
    source = {"tukey": tk, "games-howell": gh, "pairwise-t": pt}[letters_from]
    n = results.groups.n
    notes: list[str] = []
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
        tukey=tk,
        games_howell=gh,
        pairwise_t=pt,
        dunnett=dunnett(results, control, alternative=dunnett_alternative, confidence=confidence)
        if control is not None else None,
        letters=compact_letters(source, alpha=a),
        effect_sizes=sizes,
        power=plan,
        studentized=bonferroni_outlier_test(results, alpha=a),
        grubbs=grubbs_test(results, alpha=a),
        robust_z=robust_z_screen(results, cutoff=robust_cutoff),
        options=options,
        notes=tuple(notes),
    )
