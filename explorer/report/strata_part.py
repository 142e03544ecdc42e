"""The hand-off part of random-factor, nested and repeated-measures designs.

Expected mean squares and error terms, the variance components of the unedited data and
of the current view, the measurement-system table (two random factors), the
repeated-measures tests (subjects) and, as the sensitivity check these designs get, each
unit of every random column left out in turn (``record=False``: writing a report does not
add to the study's count of alternatives).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from ..engine.tables import esc
from .extras import Part, as_html, as_text

if TYPE_CHECKING:
    from ..study.study import Study

__all__ = ["strata_part"]

TITLE = "Strata, error terms and variance components"


def _pieces(study: "Study") -> list[tuple[str, Any]]:
    res, base = study.results, study.baseline
    spec = study.spec
    out: list[tuple[str, Any]] = []
    if res.expected_mean_squares is not None:
        out.append(("Expected mean squares (current view)", res.expected_mean_squares))
    if base.variance_components is not None:
        out.append(("Variance components, unedited data", base.variance_components))
    if study.edits and res.variance_components is not None:
        out.append(("Variance components, current view", res.variance_components))
        if base.variance_components is not None and base.variance_components.method != res.variance_components.method:
            out.append(("Estimator", f"The estimator changed with the edits: {base.variance_components.method} on the "
                        f"unedited data, {res.variance_components.method} now."))
    if len(spec.random) == 2:
        a, b = spec.random
        nest = dict(spec.nested)
        part, operator = (a, b) if nest.get(a) == (b,) or (nest.get(b) != (a,) and
                                                           len(study.view.levels[a]) >= len(study.view.levels[b])) else (b, a)
        out.append((f"Measurement system (parts: {part}; operators: {operator})",
                    study.measurement_system(part, operator)))
    if spec.subject is not None and spec.within:
        out.append(("Repeated measures: sphericity, epsilons, multivariate tests", study.repeated_measures()))
    for col in spec.random_columns:
        out.append((f"Each {col} left out in turn", study.unit_deletion(col, record=False)))
    return out


def strata_part(study: "Study") -> Part:
    """The part, or a note when the design has no random, nested or subject terms."""
    if not study.spec.is_mixed:
        return Part(title=TITLE, note="every factor is fixed: each term is tested against the residual")
    try:
        pieces = _pieces(study)
    except Exception as exc:  # a failing optional part must not stop the hand-off
        return Part(title=TITLE, note=f"could not be computed on this study: {exc}")
    body_html, body_text = [], []
    for heading, obj in pieces:
        body_html.append(f"<h3>{esc(heading)}</h3>" + (as_html(obj) if not isinstance(obj, str)
                                                               else f"<p>{esc(obj)}</p>"))
        body_text.append(f"{heading}\n{as_text(obj) if not isinstance(obj, str) else obj}")
    return Part(title=TITLE, html="".join(body_html), text="\n\n".join(body_text))
