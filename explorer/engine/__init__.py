"""The engine: data, edits, model specification, group and cell statistics, fits, numerics.

The lowest layer of the kit. It imports only numpy, pandas and scipy, and nothing from
the layers above it (inference, sensitivity, study and the shells).
"""

from .analysis import analyze
from .blocking import BlockingEfficiency, blocking_efficiency
from .cellfit import CellFit, fit_cells
from .cells import CellLayout, CellTable, layout_cells
from .dataset import Dataset, SetAsideRow, build_dataset
from .design import model_terms, term_name
from .design_checks import check_design
from .disclosure import Disclosure
from .edits import DropRows, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, edit_from_dict
from .errors import (
    ColumnError,
    DataError,
    DesignError,
    EditError,
    ExplorerError,
    OutputError,
    PredicateError,
    ReplayError,
)
from .factorial import factorial_from_cells, fit_factorial
from .groupstats import GroupStats, group_stats
from .marginal_means import MarginalMeans, marginal_means
from .pairwise import PairwiseTable, adjust_pvalues, simultaneous_pairs
from .results import Fit, LevelTable, Results, TwoSampleT
from .spec import ModelSpec
from .studentized_range import srange_cdf, srange_ppf, srange_sf
from .tables import AnovaTable, TermRow
from .term_effects import TermEffect, TermEffects, term_effects
from .view import DataView

__all__ = [
    "analyze", "BlockingEfficiency", "blocking_efficiency", "CellFit", "fit_cells", "CellLayout", "CellTable",
    "layout_cells", "Dataset", "SetAsideRow", "build_dataset", "model_terms", "term_name", "check_design",
    "Disclosure", "DropRows", "Edit", "MergeLevels", "Reassign", "RenameLevel", "RestoreRows", "edit_from_dict",
    "ColumnError", "DataError", "DesignError", "EditError", "ExplorerError", "OutputError", "PredicateError", "ReplayError",
    "factorial_from_cells", "fit_factorial", "GroupStats", "group_stats", "MarginalMeans", "marginal_means",
    "PairwiseTable", "adjust_pvalues", "simultaneous_pairs", "Fit", "LevelTable", "Results", "TwoSampleT",
    "ModelSpec", "srange_cdf", "srange_ppf", "srange_sf", "AnovaTable", "TermRow", "TermEffect", "TermEffects",
    "term_effects", "DataView",
]
