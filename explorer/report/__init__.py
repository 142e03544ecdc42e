"""Hand-off: a static HTML report, replay code and plain-text summaries of a study.

Importing this package does not import altair or vl-convert; the report loads them only
when it draws its charts.
"""

from .cautions import CAUTIONS, cautions_html, cautions_text
from .html_report import report_html, write_report
from .replay_code import edit_to_code, study_to_code
from .sensitivity_summary import SensitivitySummary, sensitivity_summary
from .text_summary import results_text, summary_text

__all__ = [
    "CAUTIONS", "cautions_html", "cautions_text", "report_html", "write_report", "edit_to_code", "study_to_code",
    "SensitivitySummary", "sensitivity_summary", "results_text", "summary_text",
]
