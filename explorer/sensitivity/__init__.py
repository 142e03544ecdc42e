"""Sensitivity: influence, case and cell deletion, flip finder, regroup scan, robustness sweep.

Every scan reads a study (its dataset, view, results and disclosure) and proposes;
none edits it. Imports the engine and inference below it, never the study package.
"""

from .alternatives import AlternativeFits, evaluate_alternatives
from .case_deletion import CaseDeletionScan, case_deletion_scan
from .flip import FlipSearch, flip_finder
from .influence import Influence, influence_measures  # study.influence() for a study
from .regroup import RegroupScan, regroup_scan
from .sweep import SweepResult, robustness_sweep

__all__ = [
    "AlternativeFits", "evaluate_alternatives", "CaseDeletionScan", "case_deletion_scan", "FlipSearch",
    "flip_finder", "Influence", "influence_measures", "RegroupScan", "regroup_scan", "SweepResult",
    "robustness_sweep",
]
