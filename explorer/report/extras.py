"""Optional parts of a hand-off: the test battery and the sensitivity summary.

These come from other parts of the kit (``study.battery()`` and the sensitivity engine
in the statistical packages). Each is looked up when the report is written; a part that is
missing or fails leaves a short note in its place instead of stopping the report, so a
hand-off can always be written. Every part is a :class:`Part` with an HTML and a text
form, shared by the HTML report and the command line.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..engine.tables import esc
from ..formatting import text_table

if TYPE_CHECKING:
    from ..study.study import Study

__all__ = ["Part", "battery_part", "planned_part", "sensitivity_part", "as_html", "as_text", "frame_text"]


@dataclass(frozen=True, kw_only=True)
class Part:
    """One section of a hand-off: a title, its HTML and its plain text; ``note`` when absent."""

    title: str
    html: str = ""
    text: str = ""
    note: str | None = None

    @property
    def present(self) -> bool:
        return self.note is None


def as_html(obj: Any) -> str:
    """HTML of a result object (its ``_repr_html_``, else its frame, else its text)."""
    if hasattr(obj, "_repr_html_"):
        out = obj._repr_html_()
        if out:
            return str(out)
    if hasattr(obj, "to_frame"):
        from ..engine.tables import html_table

        return html_table(obj.to_frame())
    return f"<pre>{esc(str(obj))}</pre>"


def frame_text(frame: pd.DataFrame) -> str:
    """A table as aligned text through the one formatter (:func:`explorer.formatting.text_table`)."""
    return text_table(frame)


def as_text(obj: Any) -> str:
    """Plain text of a result object (``to_text``, else its frame, else ``str``)."""
    if hasattr(obj, "to_text"):
        return str(obj.to_text())
    if hasattr(obj, "to_frame"):
        frame = obj.to_frame()
        if isinstance(frame, pd.DataFrame):
            return frame_text(frame)
    return str(obj)


def _call(title: str, fn: Callable[[], Any], missing: str) -> Part:
    try:
        value = fn()
    except (AttributeError, ImportError):
        return Part(title=title, note=missing)
    except Exception as exc:  # a failing optional part must not stop the hand-off
        return Part(title=title, note=f"could not be computed on this study: {exc}")
    return Part(title=title, html=as_html(value), text=as_text(value))


def _frame_of(obj: Any, method: str = "to_frame") -> str | None:
    fn = getattr(obj, method, None)
    frame = fn() if callable(fn) else None
    return frame_text(frame) if isinstance(frame, pd.DataFrame) else None


def battery_text(battery: Any) -> str:
    """The battery as text: tests, checks, the suggested test, comparisons, letters, effect sizes."""
    parts = [_frame_of(battery, "omnibus_frame"), _frame_of(battery, "checks_frame")]
    rec = getattr(battery, "recommendation", None)
    if rec is not None and hasattr(rec, "test"):
        parts.append(f"Suggested overall test (information, not a switch): {rec.test}. {getattr(rec, 'sentence', '')}")
    for table in getattr(battery, "comparisons", ()):
        parts.append(f"{getattr(table, 'method', 'comparisons')}:\n{_frame_of(table)}")
    for name in ("letters", "effect_sizes"):
        part = getattr(battery, name, None)
        if part is not None:
            parts.append(_frame_of(part))
    flagged = getattr(battery, "flagged_rows", None)
    if callable(flagged):
        parts.append("Rows flagged by the outlier screens (none left out): "
                     + "; ".join(f"{k}: {', '.join(map(str, v)) or 'none'}" for k, v in flagged().items()))
    return "\n\n".join(p for p in parts if p)


def battery_part(study: "Study") -> Part:
    """The one-way test battery on the current state (``study.battery()``)."""
    part = _call(
        "Checks, comparisons and effect sizes",
        lambda: study.battery(),  # type: ignore[attr-defined]
        "the test battery is not part of this version of the kit",
    )
    if part.present:
        try:
            text = battery_text(study.battery())  # type: ignore[attr-defined]
        except Exception:  # keep the generic text
            return part
        return Part(title=part.title, html=part.html, text=text)
    return part


def sensitivity_part(study: "Study", *, charts: bool = True) -> Part:
    """The sensitivity summary on the current state.

    ``study.sensitivity()`` when the study offers one; otherwise the summary composed
    here from the scans (:mod:`.sensitivity_summary`: flip-critical rows, regroup flips,
    the robustness share and its curve).
    """
    title = "Sensitivity of the decision"
    if hasattr(study, "sensitivity"):
        return _call(title, lambda: study.sensitivity(), "")  # type: ignore[attr-defined]
    from ..engine.errors import DesignError
    from .sensitivity_summary import curve_html, sensitivity_summary
    from .svg_charts import sensitivity_figures

    try:
        summary = sensitivity_summary(study)
    except ImportError:
        return Part(title=title, note="the sensitivity engine is not part of this version of the kit")
    except DesignError as exc:
        return Part(title=title, note=str(exc))
    except Exception as exc:  # a failing optional part must not stop the hand-off
        return Part(title=title, note=f"could not be computed on this study: {exc}")
    parts = [summary._repr_html_()]
    if charts:
        figures = sensitivity_figures(summary.deletion, summary.sweep)
        parts.append("<div class='vx-figures'>" + "".join(f.html() for f in figures) + "</div>")
    parts.append(curve_html(summary))
    return Part(title=title, html="".join(parts), text=summary.to_text())


def planned_part(study: "Study", *, charts: bool = True) -> Part:
    """The study's planned analyses (contrasts, trends, equivalence, follow-ups) on the current state."""
    title = "Planned analyses"
    planned = getattr(study, "planned", None)
    if not callable(planned):
        return Part(title=title, note="planned analyses are not part of this version of the kit")
    try:
        outcomes = planned()
    except Exception as exc:  # a failing optional part must not stop the hand-off
        return Part(title=title, note=f"could not be computed on this study: {exc}")
    if not outcomes:
        return Part(title=title, note="none were asked for (study.contrast, study.trend, study.equivalence, ...)")
    parts = [o._repr_html_() for o in outcomes]
    if charts:
        from ..inference.equivalence import EquivalenceTable
        from .svg_charts import equivalence_figures

        tables = [o.value for o in outcomes if isinstance(o.value, EquivalenceTable)]
        if tables:
            parts.append("<div class='vx-figures'>" + "".join(f.html() for f in equivalence_figures(tables)) + "</div>")
    text = "\n\n".join(o.to_text() for o in outcomes)
    return Part(title=title, html="".join(parts), text=text)
