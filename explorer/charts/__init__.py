"""Pure chart builders: results and studies in, Altair charts out (no widget code).

Each builder is a function of its inputs only and is tested through ``chart.to_dict()``.
Row-level charts carry a click selection named ``pick`` on the ``row`` field.
"""

from .equivalence import equivalence_chart, equivalence_frame
from .frames import (
    MAX_POINTS,
    RowColumns,
    fit_frame,
    observation_frame,
    row_columns,
    thin,
)
from .history import HistoryStep, history_chart
from .influence import cooks_distance_chart, influence_of
from .interaction import interaction_chart, interaction_frame
from .observations import PICK, observations_chart
from .partition import BASELINE_LABEL, CURRENT_LABEL, partition_chart, partition_frame
from .residuals import normal_probability_chart, residuals_fitted_chart
from .sensitivity import case_deletion_chart, specification_curve_chart

__all__ = [
    "BASELINE_LABEL",
    "CURRENT_LABEL",
    "MAX_POINTS",
    "PICK",
    "HistoryStep",
    "RowColumns",
    "case_deletion_chart",
    "cooks_distance_chart",
    "equivalence_chart",
    "equivalence_frame",
    "fit_frame",
    "history_chart",
    "influence_of",
    "interaction_chart",
    "interaction_frame",
    "normal_probability_chart",
    "observation_frame",
    "observations_chart",
    "partition_chart",
    "partition_frame",
    "residuals_fitted_chart",
    "row_columns",
    "specification_curve_chart",
    "thin",
]
