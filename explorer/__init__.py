"""variance explorer: analysis of variance you can edit, defend and hand off, in a notebook.

The public surface: the study types (:class:`Study`, :class:`SummaryStudy`, the edit
records), the notebook widget (:func:`explore`, :class:`Explorer`), the errors,
:class:`ModelSpec`, the result types, the statistical functions in
:mod:`explorer.stats`, and :func:`example_data` (the small invented tables the examples
use). ``explore`` / ``Explorer`` and ``SummaryStudy`` load lazily, so the statistics
work without ipywidgets, altair, duckdb or pyspark installed.

Everything else lives in the layered packages (:mod:`explorer.engine`,
:mod:`explorer.inference`, :mod:`explorer.sensitivity`, :mod:`explorer.study`) and is
internal. Names this module exported before (``explorer.tukey``, ``explorer.analyze``,
...) still resolve for one release, with a :class:`DeprecationWarning` naming their new
home.
"""

from __future__ import annotations

import importlib
import warnings
from typing import Any

from . import stats
from ._version import __version__
from .engine.blocking import BlockingEfficiency
from .engine.cells import CellTable
from .engine.dataset import Dataset
from .engine.disclosure import Disclosure
from .engine.edits import DropRows, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, edit_from_dict
from .engine.errors import (
    ColumnError,
    DataError,
    DesignError,
    EditError,
    ExplorerError,
    OutputError,
    PredicateError,
    ReplayError,
)
from .engine.example_data import example_data
from .engine.groupstats import GroupStats
from .engine.marginal_means import MarginalMeans
from .engine.pairwise import PairwiseTable
from .engine.results import Fit, LevelTable, Results, TwoSampleT
from .engine.spec import ModelSpec
from .engine.tables import AnovaTable, TermRow
from .engine.term_effects import TermEffect, TermEffects
from .engine.variance_components import VarianceComponents
from .inference.assumptions import CheckResult, Recommendation
from .inference.battery import Battery
from .inference.contrasts import ContrastTable
from .inference.effect_sizes import EffectSizes
from .inference.equivalence import EquivalenceTable
from .inference.letters import LetterDisplay
from .inference.measurement_system import MeasurementSystem
from .inference.omnibus import OmnibusTest
from .inference.outliers import OutlierScreen
from .inference.power import PowerPlan
from .inference.rank_followups import DunnTable, FriedmanTest
from .inference.repeated_measures import RepeatedMeasures
from .inference.robust_terms import RobustTermTests
from .inference.simple_effects import SimpleEffects
from .inference.trimmed_means import TrimmedMeansTest
from .inference.two_levels import MannWhitney, WelchT
from .sensitivity.case_deletion import CaseDeletionScan
from .sensitivity.flip import FlipSearch
from .sensitivity.influence import Influence
from .sensitivity.regroup import RegroupScan
from .sensitivity.sweep import SweepResult
from .sensitivity.unit_deletion import UnitDeletionScan
from .study.decision import Decision
from .study.study import Study, StudyEvent

#: the study types
STUDY_TYPES = ["Study", "StudyEvent", "SummaryStudy", "Disclosure", "Decision", "Dataset", "Edit", "DropRows", "RestoreRows",
               "Reassign", "MergeLevels", "RenameLevel", "edit_from_dict"]
#: small invented tables for the documentation's examples
DATA = ["example_data"]
#: the notebook widget's entry points (loaded lazily)
WIDGET = ["explore", "Explorer"]
#: every error the kit raises on purpose derives from ExplorerError
ERRORS = ["ExplorerError", "DataError", "ColumnError", "DesignError", "EditError", "PredicateError", "ReplayError",
          "OutputError"]
#: frozen result values (each with ``to_frame()`` and an HTML view)
RESULT_TYPES = [
    "Results", "AnovaTable", "TermRow", "Fit", "LevelTable", "TwoSampleT", "GroupStats", "CellTable", "MarginalMeans",
    "TermEffect", "TermEffects", "BlockingEfficiency", "VarianceComponents", "OmnibusTest", "CheckResult",
    "Recommendation", "PairwiseTable", "LetterDisplay", "EffectSizes", "PowerPlan", "OutlierScreen", "Battery",
    "RepeatedMeasures", "MeasurementSystem", "Influence", "CaseDeletionScan", "FlipSearch", "RegroupScan",
    "SweepResult", "UnitDeletionScan", "ContrastTable", "EquivalenceTable", "SimpleEffects", "WelchT", "MannWhitney",
    "DunnTable", "FriedmanTest", "TrimmedMeansTest", "RobustTermTests",
]

__all__ = [*STUDY_TYPES, *DATA, *WIDGET, *ERRORS, "ModelSpec", *RESULT_TYPES, "stats", "__version__"]

#: names exported before the public surface was trimmed -> where they live now (one release)
_MOVED_NAMES = {
    **{name: "explorer.stats" for name in stats.__all__},
    **{name: "explorer.engine" for name in (
        "analyze", "build_dataset", "SetAsideRow", "DataView", "group_stats", "fit_cells", "CellFit", "CellLayout",
        "layout_cells", "model_terms", "term_name", "check_design", "factorial_from_cells", "fit_factorial",
        "marginal_means", "term_effects", "blocking_efficiency")},
    **{name: "explorer.sensitivity" for name in ("AlternativeFits", "evaluate_alternatives")},
}


def __getattr__(name: str) -> Any:
    if name in WIDGET:
        from . import widget

        return getattr(widget, name)
    if name == "SummaryStudy":  # studies on cell summaries computed by DuckDB or Spark (engines load lazily)
        from .summaries import SummaryStudy

        return SummaryStudy
    if name in _MOVED_NAMES:
        home = _MOVED_NAMES[name]
        warnings.warn(f"explorer.{name} is deprecated and will be removed in the next release; use {home}.{name}",
                      DeprecationWarning, stacklevel=2)
        return getattr(importlib.import_module(home), name)
    raise AttributeError(f"module 'explorer' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(__all__) | set(globals()))
