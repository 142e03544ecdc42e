"""Fragility views: the p-value with each row left out, and the specification curve.

Builders of the results of :mod:`explorer.sensitivity.case_deletion` and
:mod:`explorer.sensitivity.sweep`. Rows whose deletion alone flips the decision are drawn in
the pick colour and carry the ``pick`` selection, so they can be examined (and, with a
documented reason, left out) from the chart.

References
----------
Cook, R. D. (1977). Detection of influential observation in linear regression. Technometrics 19(1).
Simonsohn, U., Simmons, J. P. and Nelson, L. D. (2020). Specification curve analysis.
Nature Human Behaviour 4, 1208-1214.
"""

from __future__ import annotations

import altair as alt
import numpy as np
import pandas as pd

from explorer.sensitivity.case_deletion import CaseDeletionScan
from explorer.sensitivity.sweep import SweepResult

from .frames import MAX_POINTS, thin
from .observations import pick_param
from .style import CURRENT, GUIDE, HEIGHT, LEFT_OUT, PICKED, WIDTH, finish, id_labels, shown

__all__ = ["case_deletion_chart", "specification_curve_chart"]

_FLIP_DOMAIN = ["flips the decision", "same decision"]


def _p_or_none(values: np.ndarray) -> list[float | None]:
    return [float(v) if np.isfinite(v) and v > 0 else None for v in np.asarray(values, dtype=float)]


def case_deletion_chart(scan: CaseDeletionScan, *, max_points: int = MAX_POINTS, width: int = WIDTH,
                        height: int = HEIGHT) -> alt.TopLevelMixin:
    """p-value of the decision's test with each row left out in turn, against table order; flip rows stand out.

    The subtitle names the term and test scored (the study's decision unless the scan was asked for another)."""
    flips = np.asarray(scan.flips, dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        move = np.abs(np.log(np.asarray(scan.pvalue, dtype=float)) - np.log(scan.base_pvalue or np.nan))
    picked = thin(len(flips), max_points, always=flips, priority=np.nan_to_num(move, nan=0.0))
    pos = picked.positions
    frame = pd.DataFrame({
        "row": [str(r) for r in np.asarray(scan.row_ids)[pos].tolist()],
        "order": pos,
        "level": np.asarray(scan.group, dtype=object)[pos].astype(str),
        "p": _p_or_none(np.asarray(scan.pvalue)[pos]),
        "F": [None if not np.isfinite(v) else float(v) for v in np.asarray(scan.statistic, dtype=float)[pos]],
        "effect": np.where(flips[pos], _FLIP_DOMAIN[0], _FLIP_DOMAIN[1]),
    })
    frame["aria"] = [f"row {r}: p-value with the row left out" for r in frame["row"]]
    pick = pick_param()
    tip = [alt.Tooltip("row:N", title="row id"), alt.Tooltip("level:N"),
           alt.Tooltip(f"{shown(frame, 'p', 'p')}:N", title="p-value without this row"),
           alt.Tooltip(f"{shown(frame, 'F', 'stat')}:N", title="statistic without this row"),
           alt.Tooltip("effect:N", title="decision")]
    points = alt.Chart(frame).mark_point(filled=True, opacity=0.9).encode(
        x=alt.X("order:Q", title="row left out (table order)"),
        y=alt.Y("p:Q", title="p-value (log)", scale=alt.Scale(type="log")),
        color=alt.Color("effect:N", title="leaving the row out",
                        scale=alt.Scale(domain=_FLIP_DOMAIN, range=[PICKED, CURRENT])),
        size=alt.when(pick, empty=False).then(alt.value(160)).otherwise(alt.value(40)),
        stroke=alt.when(pick, empty=False).then(alt.value("black")).otherwise(alt.value("white")),
        tooltip=tip, description=alt.Description("aria:N"),
    ).add_params(pick)
    lines = [alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(scan.alpha))]
    if scan.base_pvalue:
        lines.append(alt.Chart().mark_rule(color=LEFT_OUT).encode(y=alt.datum(scan.base_pvalue)))
    n_flip = int(flips.sum())
    labels, named = id_labels(frame, flips[pos], move[pos], "order", "p", what=f"alpha {scan.alpha:g}")
    sub = [(f"Decision on {scan.term} ({scan.test} test): {n_flip} row(s) flip the decision on their own (their p "
            f"crosses alpha). Red dashes: alpha "
            f"{scan.alpha:g}; grey line: p with every row. {named if n_flip else ''}").strip()]
    if picked.note:
        sub.append(picked.note)
    chart = alt.layer(*lines, points, *([labels] if labels is not None else [])).properties(width=width, height=height)
    return finish(chart, "p-value with one row left out", sub)


def specification_curve_chart(sweep: SweepResult, *, width: int = WIDTH, height: int = HEIGHT
                              ) -> alt.TopLevelMixin:
    """Every specification of the sweep ranked by p-value; colour says whether it agrees with the current decision."""
    t = sweep.table
    frame = pd.DataFrame({
        "rank": t["rank"].astype("float64").to_numpy(),
        "p": _p_or_none(t["p-value"].astype("float64").to_numpy(na_value=np.nan)),
        "agrees": np.where(t["agrees with current decision"].to_numpy(dtype=bool), "agrees", "disagrees"),
        "outlier rule": t["outlier rule"].astype(str), "test": t["test"].astype(str),
        "transform": t["transform"].astype(str), "merges": t["merges"].astype(str),
        "left out": t["left out"].to_numpy(),
    })
    frame = frame.dropna(subset=["rank"])
    tip = [alt.Tooltip("rank:Q"), alt.Tooltip(f"{shown(frame, 'p', 'p')}:N", title="p-value"), "outlier rule", "test",
           "transform", "merges", alt.Tooltip("left out:Q", title="rows left out"),
           alt.Tooltip("agrees:N", title="current decision")]
    pts = alt.Chart(frame).mark_point(filled=True, size=45).encode(
        x=alt.X("rank:Q", title="specification (ranked by p-value)"),
        y=alt.Y("p:Q", title="p-value (log)", scale=alt.Scale(type="log")),
        color=alt.Color("agrees:N", title="against the current decision",
                        scale=alt.Scale(domain=["agrees", "disagrees"], range=[CURRENT, PICKED])),
        tooltip=tip,
    )
    cut = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(sweep.alpha))
    share = "—" if sweep.share_agreeing is None else f"{sweep.share_agreeing:.0%}"
    sub = [(f"{sweep.n_specifications} specifications; {share} agree with the current decision. "
            f"Red dashes: alpha {sweep.alpha:g}."), "A result that holds only in a few specifications is fragile."]
    return finish(alt.layer(cut, pts).properties(width=width, height=height), "Specification curve", sub)
