"""The core of the kit: data, edits, analyses and sensitivity. Imports only numpy, pandas, scipy."""

from .analysis import analyze
from .dataset import Dataset, SetAsideRow, build_dataset
from .edits import DropRows, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, edit_from_dict
from .errors import ColumnError, DataError, DesignError, EditError, ExplorerError, OutputError, ReplayError
from .groupstats import GroupStats, group_stats
from .results import Fit, LevelTable, Results, TwoSampleT
from .spec import ModelSpec
from .study import Disclosure, Study, StudyEvent
from .tables import AnovaTable, TermRow
from .view import DataView

__all__ = [
    "analyze", "Dataset", "SetAsideRow", "build_dataset", "DropRows", "Edit", "MergeLevels", "Reassign",
    "RenameLevel", "RestoreRows", "edit_from_dict", "ColumnError", "DataError", "DesignError", "EditError",
    "ExplorerError", "OutputError", "ReplayError", "GroupStats", "group_stats", "Fit", "LevelTable", "Results", "TwoSampleT",
    "ModelSpec", "Disclosure", "Study", "StudyEvent", "AnovaTable", "TermRow", "DataView",
]

# One-way battery: omnibus tests, checks, comparisons, letters, effect sizes, power, screens.
from .assumptions import CheckResult, Recommendation, bartlett, levene, recommend, shapiro_residuals
from .battery import Battery, run_battery
from .comparisons import PairwiseTable, adjust_pvalues, dunnett, games_howell, pairwise_t, simultaneous_pairs, tukey
from .effect_sizes import EffectSizes, effect_sizes, noncentrality_interval
from .letters import LetterDisplay, compact_letters
from .omnibus import OmnibusTest, brown_forsythe_f, classic_f, kruskal_wallis, permutation_f, welch_f
from .outliers import OutlierScreen, bonferroni_outlier_test, grubbs_critical, grubbs_test, robust_z_screen
from .power import PowerPlan, f_test_power, group_size_for_power, power_plan
from .studentized_range import srange_cdf, srange_ppf, srange_sf

__all__ += [
    "CheckResult", "Recommendation", "bartlett", "levene", "recommend", "shapiro_residuals", "Battery",
    "run_battery", "PairwiseTable", "adjust_pvalues", "dunnett", "games_howell", "pairwise_t",
    "simultaneous_pairs", "tukey", "EffectSizes", "effect_sizes", "noncentrality_interval", "LetterDisplay",
    "compact_letters", "OmnibusTest", "brown_forsythe_f", "classic_f", "kruskal_wallis", "permutation_f",
    "welch_f", "OutlierScreen", "bonferroni_outlier_test", "grubbs_critical", "grubbs_test", "robust_z_screen",
    "PowerPlan", "f_test_power", "group_size_for_power", "power_plan", "srange_cdf", "srange_ppf", "srange_sf",
]

# Multi-factor designs: crossed factors, interactions, additive blocks, Types I/II/III.
from .blocking import BlockingEfficiency, blocking_efficiency
from .cellfit import CellFit, fit_cells
from .cells import CellLayout, CellTable, layout_cells
from .design import model_terms, term_name
from .design_checks import check_design
from .factorial import factorial_from_cells, fit_factorial
from .marginal_means import MarginalMeans, marginal_means
from .term_effects import TermEffect, TermEffects, term_effects

__all__ += [
    "BlockingEfficiency", "blocking_efficiency", "CellFit", "fit_cells", "CellLayout", "CellTable", "layout_cells",
    "model_terms", "term_name", "check_design", "factorial_from_cells", "fit_factorial", "MarginalMeans",
    "marginal_means", "TermEffect", "TermEffects", "term_effects",
]

# Sensitivity: influence, case deletion, flip finder, regroup scan, robustness sweep (read the study, never edit it).
from .alternatives import AlternativeFits, evaluate_alternatives
from .case_deletion import CaseDeletionScan, case_deletion_scan
from .flip import FlipSearch, flip_finder
from .influence import Influence, influence_measures  # study.influence() for a study
from .regroup import RegroupScan, regroup_scan
from .sweep import SweepResult, robustness_sweep

__all__ += [
    "AlternativeFits", "evaluate_alternatives", "CaseDeletionScan", "case_deletion_scan", "FlipSearch",
    "flip_finder", "Influence", "influence_measures", "RegroupScan", "regroup_scan", "SweepResult",
    "robustness_sweep",
]

# Refusals of conditions on columns (summary-backed studies).
from .errors import PredicateError

__all__ += ["PredicateError"]
