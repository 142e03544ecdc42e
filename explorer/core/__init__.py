"""The core of the kit: data, edits, analyses and sensitivity. Imports only numpy, pandas, scipy."""

from .analysis import analyze
from .dataset import Dataset, SetAsideRow, build_dataset
from .edits import DropRows, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, edit_from_dict
from .errors import ColumnError, DataError, DesignError, EditError, ExplorerError, ReplayError
from .groupstats import GroupStats, group_stats
from .results import Fit, LevelTable, Results, TwoSampleT
from .spec import ModelSpec
from .study import Disclosure, Study, StudyEvent
from .tables import AnovaTable, TermRow
from .view import DataView

__all__ = [
    "analyze", "Dataset", "SetAsideRow", "build_dataset", "DropRows", "Edit", "MergeLevels", "Reassign",
    "RenameLevel", "RestoreRows", "edit_from_dict", "ColumnError", "DataError", "DesignError", "EditError",
    "ExplorerError", "ReplayError", "GroupStats", "group_stats", "Fit", "LevelTable", "Results", "TwoSampleT",
    "ModelSpec", "Disclosure", "Study", "StudyEvent", "AnovaTable", "TermRow", "DataView",
]
