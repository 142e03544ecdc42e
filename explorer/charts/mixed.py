"""Charts of random-factor and repeated-measures designs: variance components and profiles.

* :func:`variance_components_chart`: each variance component of the unedited data beside
  the current view (bars; a negative moment estimate is drawn at zero and its computed
  value is in the tooltip), so an edit that moves variance between strata shows at once.
* :func:`profile_chart`: one line per subject across the levels of a within factor (the
  subject's cell means), coloured by between-subject group, with the rows as pickable
  points.
"""

from __future__ import annotations

import altair as alt
import numpy as np
import pandas as pd

from explorer.engine import Results
from explorer.study import Study

from .observations import pick_param, row_marks
from .partition import BASELINE_LABEL, CURRENT_LABEL
from .style import BASELINE, CURRENT, HEIGHT, IN_ANALYSIS, WIDTH, finish, response_title

__all__ = ["components_frame", "profile_chart", "profile_frame", "variance_components_chart"]


def components_frame(results: Results, label: str) -> pd.DataFrame:
    """The variance components of ``results`` as a tidy frame (empty without random terms)."""
    vc = results.variance_components
    if vc is None:
        return pd.DataFrame(columns=["view", "source", "order", "variance", "estimate", "share", "low", "high",
                                     "method"])
    return pd.DataFrame({
        "view": label,
        "source": [c.source for c in vc.components],
        "order": range(len(vc.components)),
        "variance": [c.truncated for c in vc.components],
        "estimate": [c.estimate for c in vc.components],
        "share": [c.share for c in vc.components],
        "low": [c.ci_low for c in vc.components],
        "high": [c.ci_high for c in vc.components],
        "method": vc.method,
    })


def variance_components_chart(baseline: Results, current: Results, *, width: int = WIDTH,
                              height: int = HEIGHT) -> alt.TopLevelMixin | None:
    """Bars of each variance component, unedited data and current view side by side (None without random terms)."""
    frame = pd.concat([components_frame(baseline, BASELINE_LABEL), components_frame(current, CURRENT_LABEL)],
                      ignore_index=True)
    if frame.empty:
        return None
    order = list(dict.fromkeys(frame["source"]))
    bars = alt.Chart(frame).mark_bar().encode(
        y=alt.Y("source:N", sort=order, title=None),
        yOffset=alt.YOffset("view:N", sort=[BASELINE_LABEL, CURRENT_LABEL]),
        x=alt.X("variance:Q", title="variance component (negative estimates drawn at 0)"),
        color=alt.Color("view:N", title=None, scale=alt.Scale(domain=[BASELINE_LABEL, CURRENT_LABEL],
                                                              range=[BASELINE, CURRENT])),
        tooltip=[alt.Tooltip("view:N"), alt.Tooltip("source:N"), alt.Tooltip("estimate:Q", format=".4g",
                                                                                title="estimate as computed"),
                 alt.Tooltip("share:Q", format=".1%", title="share of variance"),
                 alt.Tooltip("low:Q", format=".4g", title="interval low"),
                 alt.Tooltip("high:Q", format=".4g", title="interval high"), alt.Tooltip("method:N")],
    ).properties(width=width, height=height)
    methods = frame.groupby("view", sort=False)["method"].first()
    sub = [f"{view}: {m}" for view, m in methods.items()]
    if methods.nunique() > 1:
        sub.append("The estimator changed with the edits (balance lost or regained).")
    return finish(bars, "Variance components, unedited and current", sub)


def profile_frame(study: Study, within: str | None = None) -> pd.DataFrame:
    """Kept rows with subject, within level, between group and the subject's mean at that level."""
    spec = study.spec
    if spec.subject is None or not spec.within:
        raise ValueError("a profile needs a study with subject= and within=")
    w = within or spec.within[0]
    view, data = study.view, study.dataset
    pos = np.flatnonzero(view.kept)
    frame = pd.DataFrame({
        "row": [str(r) for r in data.row_ids[pos]],
        "subject": view.labels(spec.subject)[pos],
        "level": view.labels(w)[pos],
        "y": data.y_original[pos],
    })
    frame["state"] = IN_ANALYSIS
    frame["aria"] = [f"row {r}: {spec.subject} {s}, {w} {lv}, {spec.response} {v:.6g}"
                     for r, s, lv, v in zip(frame["row"], frame["subject"], frame["level"], frame["y"])]
    between = spec.between
    frame["group"] = (pd.Series([" / ".join(map(str, t)) for t in zip(*(view.labels(b)[pos] for b in between))])
                      if between else "all subjects")
    frame["subject mean"] = frame.groupby(["subject", "level"])["y"].transform("mean")
    return frame


def profile_chart(study: Study, within: str | None = None, *, width: int = WIDTH,
                  height: int = HEIGHT) -> alt.TopLevelMixin:
    """One line per subject across the levels of ``within`` (default the first within factor); rows pickable."""
    spec = study.spec
    frame = profile_frame(study, within)
    w = within or spec.within[0]
    levels = [lv for lv in study.view.levels[w] if lv in set(frame["level"])]
    base = alt.Chart(frame)
    x = alt.X("level:N", sort=levels, title=w)
    lines = base.mark_line(opacity=0.55, strokeWidth=1.2).encode(
        x=x, y=alt.Y("mean(subject mean):Q", title=response_title(spec)),
        detail="subject:N", color=alt.Color("group:N", title=" / ".join(spec.between) or None),
        tooltip=[alt.Tooltip("subject:N"), alt.Tooltip("group:N")],
    )
    pick = pick_param()
    points = row_marks(base.encode(x=x, y=alt.Y("y:Q")), pick,
                       [alt.Tooltip("row:N"), alt.Tooltip("subject:N"), alt.Tooltip("level:N"),
                        alt.Tooltip("y:Q", format=".4g")], size=30, legend=False)
    # the lines' colours (groups) and the points' (row state) are two scales: shared, the points' explicit
    # domain would leave the groups without a colour and the lines undrawn
    chart = alt.layer(lines, points).resolve_scale(color="independent").properties(width=width, height=height)
    return finish(chart, f"Each {spec.subject} across {w}",
                  "Lines join each subject's means; click a point to pick its row.")
