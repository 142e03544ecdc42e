"""The state a user holds: the study (dataset, model specification, edit log with undo and
redo, events, disclosure) and its file.

The top of the statistical layers: it may import engine, inference and sensitivity.
"""

from ..engine.disclosure import Disclosure
from .decision import Decision, TermVerdict, decide
from .decision_card import DecisionCard
from .study import Study, StudyEvent

__all__ = ["Study", "StudyEvent", "Disclosure", "Decision", "DecisionCard", "TermVerdict", "decide"]
