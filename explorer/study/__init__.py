"""The state a user holds: the study (dataset, model specification, edit log with undo and
redo, events, the disclosure ledger) and its file.

The top of the statistical layers: it may import engine, inference and sensitivity.
"""

from ..engine.disclosure import Disclosure
from .decision import Decision, TermVerdict, decide
from .decision_card import DecisionCard
from .ledger import Ledger, LedgerEntry
from .study import Study, StudyEvent

__all__ = ["Study", "StudyEvent", "Disclosure", "Decision", "DecisionCard", "Ledger", "LedgerEntry", "TermVerdict",
           "decide"]
