"""The study's analysis methods: thin calls from a study to the inference tests and the sensitivity scans.

:class:`AnalysisMethods` is mixed into :class:`~explorer.study.study.Study`; each method
reads the study's current results (or, for a scan, the study itself) and returns the result
of the named function, which cites its method. None of them edits the study.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from ..inference.battery import Battery
    from ..inference.measurement_system import MeasurementSystem
    from ..inference.repeated_measures import RepeatedMeasures
    from ..inference.simple_effects import SimpleEffects
    from ..sensitivity.case_deletion import CaseDeletionScan
    from ..sensitivity.flip import FlipSearch
    from ..sensitivity.influence import Influence
    from ..sensitivity.regroup import RegroupScan
    from ..sensitivity.study_like import StudyLike
    from ..sensitivity.sweep import SweepResult
    from ..sensitivity.unit_deletion import UnitDeletionScan

__all__ = ["AnalysisMethods"]


class AnalysisMethods:
    """Study methods that run an analysis or a scan on the study (mixed into :class:`~explorer.study.study.Study`)."""

    def simple_effects(self: StudyLike, factor: str, within: str, **options: Any) -> SimpleEffects:
        """The test of ``factor`` at each level of ``within`` with the full model's residual mean square and a
        stated family-wise adjustment (see :func:`explorer.inference.simple_effects.simple_effects`)."""
        from ..inference.simple_effects import simple_effects

        return simple_effects(self.results, factor, within, **options)

    def battery(
        self: StudyLike,
        *,
        alpha: float | None = None,
        confidence: float | None = None,
        effect_confidence: float | None = None,
        levene_center: str = "median",
        letters_from: str = "tukey",
        pairwise_adjust: str = "holm",
        control: str | None = None,
        dunnett_alternative: str = "two-sided",
        permutations: int = 0,
        seed: int = 0,
        effect_f: float | None = None,
        target_power: float = 0.8,
        robust_cutoff: float = 3.5,
    ) -> Battery:
        """The one-way battery on the current view: every overall test, check, comparison, effect size,
        power and outlier screen (:func:`explorer.inference.battery.run_battery`).

        Parameters
        ----------
        alpha : level for decisions, letters and screens (the study's alpha by default).
        confidence : coverage of the comparison intervals (``1 - alpha`` by default).
        effect_confidence : coverage of the effect-size intervals (``1 - 2 alpha`` by default).
        levene_center : centre of Levene's test: 'median' (Brown-Forsythe), 'mean' or 'trimmed'.
        letters_from : table the letters come from: 'tukey', 'games-howell' or 'pairwise-t'.
        pairwise_adjust : adjustment of the pairwise t table: 'holm', 'bonferroni' or 'none'.
        control : a level to compare every other level with (adds Dunnett's table; none by default).
        dunnett_alternative : 'two-sided', 'greater' or 'less' (Dunnett).
        permutations : number of permutations of the permutation F (0: not run; 9999 is usual).
        seed : seed of the permutation F, so that it repeats.
        effect_f : Cohen's f the power is computed for (the observed one by default).
        target_power : power the needed group size is computed for.
        robust_cutoff : |robust z| above which the median/MAD screen flags a row.
        """
        from ..inference.battery import run_battery

        return run_battery(
            self.results, alpha=alpha, confidence=confidence, effect_confidence=effect_confidence,
            levene_center=levene_center, letters_from=letters_from, pairwise_adjust=pairwise_adjust,  # type: ignore[arg-type]
            control=control, dunnett_alternative=dunnett_alternative, permutations=permutations,  # type: ignore[arg-type]
            seed=seed, effect_f=effect_f, target_power=target_power, robust_cutoff=robust_cutoff)

    def repeated_measures(self: StudyLike, *, multivariate: bool = True) -> RepeatedMeasures:
        """Sphericity, epsilons, corrected p-values and multivariate tests (studies with subject= and within=)."""
        from ..inference.repeated_measures import repeated_measures

        return repeated_measures(self.results, multivariate=multivariate)

    def measurement_system(
        self: StudyLike, part: str, operator: str, *, tolerance: float | None = None, multiplier: float = 6.0
    ) -> MeasurementSystem:
        """Repeatability, reproducibility, part-to-part and total (see :mod:`explorer.inference.measurement_system`)."""
        from ..inference.measurement_system import measurement_system

        return measurement_system(self.results, part, operator, tolerance=tolerance, multiplier=multiplier)

    # ----------------------------------------------------------------- sensitivity (reads, never edits)
    def unit_deletion(self: StudyLike, column: str, **options: Any) -> UnitDeletionScan:
        """Each subject, operator, part or other level of ``column`` left out in turn, refitted
        (see :func:`explorer.sensitivity.unit_deletion.unit_deletion`)."""
        from ..sensitivity.unit_deletion import unit_deletion

        return unit_deletion(self, column, **options)

    def row_deletion(self: StudyLike, **options: Any) -> UnitDeletionScan:
        """Each kept row left out in turn by a full refit (for models with random terms)."""
        from ..sensitivity.unit_deletion import row_deletion

        return row_deletion(self, **options)

    def influence(self: StudyLike, **options: Any) -> Influence:
        """Leverage, studentized residuals, Cook's distance, DFFITS (see :func:`explorer.sensitivity.influence.influence`)."""
        from ..sensitivity.influence import influence

        return influence(self, **options)

    def case_deletion(self: StudyLike, **options: Any) -> CaseDeletionScan:
        """Each kept row left out in turn (see :func:`explorer.sensitivity.case_deletion.case_deletion_scan`)."""
        from ..sensitivity.case_deletion import case_deletion_scan

        return case_deletion_scan(self, **options)

    def flip_finder(self: StudyLike, **options: Any) -> FlipSearch:
        """The fewest rows whose removal flips the decision (see :func:`explorer.sensitivity.flip.flip_finder`)."""
        from ..sensitivity.flip import flip_finder

        return flip_finder(self, **options)

    def regroup_scan(self: StudyLike, **options: Any) -> RegroupScan:
        """Every merge of two levels and move of one row (see :func:`explorer.sensitivity.regroup.regroup_scan`)."""
        from ..sensitivity.regroup import regroup_scan

        return regroup_scan(self, **options)

    def robustness_sweep(self: StudyLike, **options: Any) -> SweepResult:
        """Every combination of outlier rule, test, transform and merges.

        See :func:`explorer.sensitivity.sweep.robustness_sweep`.
        """
        from ..sensitivity.sweep import robustness_sweep

        return robustness_sweep(self, **options)
