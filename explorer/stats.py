"""The kit's statistical functions, in one documented public module.

Each function takes the frozen :class:`~explorer.Results` of an analysis (``study.results``),
or for the sensitivity scans a study, and returns a frozen result value with
``to_frame()`` and an HTML view; none edits a study. The study's own methods
(``study.battery()``, ``study.case_deletion()``, ...) call these same functions.

========================  ==============================================================
omnibus tests             :func:`classic_f`, :func:`welch_f`, :func:`brown_forsythe_f`,
                          :func:`kruskal_wallis`, :func:`permutation_f`
assumption checks         :func:`levene`, :func:`bartlett`, :func:`shapiro_residuals`,
                          :func:`recommend`
comparisons               :func:`tukey`, :func:`games_howell`, :func:`pairwise_t`,
                          :func:`dunnett`, :func:`simultaneous_pairs`,
                          :func:`adjust_pvalues`, :func:`compact_letters`
effect sizes and power    :func:`effect_sizes`, :func:`noncentrality_interval`,
                          :func:`f_test_power`, :func:`group_size_for_power`,
                          :func:`power_plan`
residual screens          :func:`bonferroni_outlier_test`, :func:`grubbs_test`,
                          :func:`grubbs_critical`, :func:`robust_z_screen`
planned questions         :func:`contrasts`, :func:`control_contrasts`,
                          :func:`later_levels_contrasts`, :func:`trend`,
                          :func:`equivalence`, :func:`simple_effects`
two levels, ranks, robust :func:`welch_t`, :func:`mann_whitney`, :func:`dunn`,
                          :func:`friedman`, :func:`trimmed_means_test`,
                          :func:`hc3_tests`, :func:`box_cox`
bundles and designs       :func:`run_battery`, :func:`repeated_measures`,
                          :func:`measurement_system`
sensitivity scans         :func:`influence_measures`, :func:`case_deletion_scan`,
                          :func:`flip_finder`, :func:`regroup_scan`,
                          :func:`robustness_sweep`, :func:`unit_deletion`,
                          :func:`row_deletion`
distributions             :func:`srange_sf`, :func:`srange_cdf`, :func:`srange_ppf`
                          (studentized range)
========================  ==============================================================

Examples
--------
An invented coating line: three nozzles, four panels each, film thickness in micrometres.

>>> import pandas as pd
>>> import explorer as ex
>>> df = pd.DataFrame({
...     "nozzle": ["A"] * 4 + ["B"] * 4 + ["C"] * 4,
...     "thickness_um": [50.1, 49.8, 50.4, 50.0, 51.2, 51.5, 50.9, 51.3, 49.6, 49.9, 50.2, 49.7],
... })
>>> results = ex.Study(df, "thickness_um", "nozzle").results
>>> welch = ex.stats.welch_f(results)
>>> round(welch.statistic, 2), bool(welch.pvalue < 0.01)
(30.42, True)
>>> pairs = ex.stats.tukey(results)
>>> pairs.method, pairs.family_size
('Tukey', 3)
>>> [f"{a}-{b}" for a, b, hit in zip(pairs.first, pairs.second, pairs.significant(0.05)) if hit]
['A-B', 'B-C']

Where each is defined (and its references) is in its own module under
:mod:`explorer.engine`, :mod:`explorer.inference` and :mod:`explorer.sensitivity`;
everything not listed here is internal to the kit and may change between releases.
"""

from __future__ import annotations

from .engine.noncentral_f import noncentrality_interval
from .engine.pairwise import adjust_pvalues, simultaneous_pairs
from .engine.studentized_range import srange_cdf, srange_ppf, srange_sf
from .inference.assumptions import bartlett, levene, recommend, shapiro_residuals
from .inference.battery import run_battery
from .inference.box_cox import box_cox
from .inference.comparisons import dunnett, games_howell, pairwise_t, tukey
from .inference.contrasts import contrasts, control_contrasts, later_levels_contrasts
from .inference.effect_sizes import effect_sizes
from .inference.equivalence import equivalence
from .inference.letters import compact_letters
from .inference.measurement_system import measurement_system
from .inference.omnibus import brown_forsythe_f, classic_f, kruskal_wallis, permutation_f, welch_f
from .inference.outliers import bonferroni_outlier_test, grubbs_critical, grubbs_test, robust_z_screen
from .inference.power import f_test_power, group_size_for_power, power_plan
from .inference.rank_followups import dunn, friedman
from .inference.repeated_measures import repeated_measures
from .inference.robust_terms import hc3_tests
from .inference.simple_effects import simple_effects
from .inference.trends import trend
from .inference.trimmed_means import trimmed_means_test
from .inference.two_levels import mann_whitney, welch_t
from .sensitivity.case_deletion import case_deletion_scan
from .sensitivity.flip import flip_finder
from .sensitivity.influence import influence_measures
from .sensitivity.regroup import regroup_scan
from .sensitivity.sweep import robustness_sweep
from .sensitivity.unit_deletion import row_deletion, unit_deletion

__all__ = [
    "classic_f", "welch_f", "brown_forsythe_f", "kruskal_wallis", "permutation_f",
    "levene", "bartlett", "shapiro_residuals", "recommend",
    "tukey", "games_howell", "pairwise_t", "dunnett", "simultaneous_pairs", "adjust_pvalues", "compact_letters",
    "effect_sizes", "noncentrality_interval", "f_test_power", "group_size_for_power", "power_plan",
    "bonferroni_outlier_test", "grubbs_test", "grubbs_critical", "robust_z_screen",
    "contrasts", "control_contrasts", "later_levels_contrasts", "trend", "equivalence", "simple_effects",
    "welch_t", "mann_whitney", "dunn", "friedman", "trimmed_means_test", "hc3_tests", "box_cox",
    "run_battery", "repeated_measures", "measurement_system",
    "influence_measures", "case_deletion_scan", "flip_finder", "regroup_scan", "robustness_sweep",
    "unit_deletion", "row_deletion",
    "srange_sf", "srange_cdf", "srange_ppf",
]
