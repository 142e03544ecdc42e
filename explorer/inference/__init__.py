"""Inference on a fitted model: omnibus tests, assumption checks, comparisons, letters,
effect sizes, power, residual screens and the one-way battery that bundles them.

Reads :class:`~explorer.engine.Results`; imports only the engine below it.
"""

from .assumptions import CheckResult, Recommendation, bartlett, levene, recommend, shapiro_residuals
from .battery import Battery, run_battery
from .comparisons import dunnett, games_howell, pairwise_t, tukey
from .effect_sizes import EffectSizes, effect_sizes, noncentrality_interval
from .letters import LetterDisplay, compact_letters
from .omnibus import OmnibusTest, brown_forsythe_f, classic_f, kruskal_wallis, permutation_f, welch_f
from .outliers import OutlierScreen, bonferroni_outlier_test, grubbs_critical, grubbs_test, robust_z_screen
from .power import PowerPlan, f_test_power, group_size_for_power, power_plan

__all__ = [
    "CheckResult", "Recommendation", "bartlett", "levene", "recommend", "shapiro_residuals", "Battery",
    "run_battery", "dunnett", "games_howell", "pairwise_t", "tukey", "EffectSizes", "effect_sizes",
    "noncentrality_interval", "LetterDisplay", "compact_letters", "OmnibusTest", "brown_forsythe_f", "classic_f",
    "kruskal_wallis", "permutation_f", "welch_f", "OutlierScreen", "bonferroni_outlier_test", "grubbs_critical",
    "grubbs_test", "robust_z_screen", "PowerPlan", "f_test_power", "group_size_for_power", "power_plan",
]
