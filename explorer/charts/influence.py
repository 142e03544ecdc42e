"""Cook's distance by row.

The distances come from the kit's influence module when it is installed
(``explorer.core.influence``); until then, one-way fits use the closed form below.

References
----------
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19(1), 15-18.
Cook, R. D. and Weisberg, S. (1982). Residuals and Influence in Regression, sec. 3.4.
"""

from __future__ import annotations

import importlib

import altair as alt
import numpy as np

from explorer.core import Results

from .frames import MAX_POINTS, fit_frame, thin
from .observations import pick_param, row_marks
from .style import GUIDE, HEIGHT, KEPT, WIDTH, finish

__all__ = ["cooks_distance", "cooks_distance_chart"]


def _from_influence_module(results: Results) -> np.ndarray | None:
    try:
        mod = importlib.import_module("explorer.core.influence")
    except ImportError:
        return None
    fn = getattr(mod, "cooks_distance", None)
    if fn is None:
        return None
    out = fn(results)
    values = getattr(out, "cooks_distance", getattr(out, "distance", out))
    arr = np.asarray(values, dtype=float)
    return arr if arr.shape == results.fit.residuals.shape else None


def cooks_distance(results: Results) -> tuple[np.ndarray | None, str]:
    """Cook's distance of every row in the fit (NaN where undefined) and a note; ``None`` if not available.

    Closed form for the one-way fit: ``D_i = r_i² h_i / (p · MSE · (1 - h_i)²)`` with ``r_i`` the
    residual, ``h_i = 1 / n_level`` the leverage, ``p`` the number of fitted level means
    and MSE the residual mean square. A row that is alone in its level (h = 1) has no
    defined distance.
    """
    found = _from_influence_module(results)
    if found is not None:
        return found, ""
    if not results.spec.is_oneway:
        return None, "Cook's distance for this design needs the influence module (not installed yet)."
    fit = results.fit
    p = results.groups.k
    mse = results.ms_resid or 0.0
    h = np.asarray(fit.leverage, dtype=float)
    r = np.asarray(fit.residuals, dtype=float)
    d = np.full(r.shape, np.nan)
    ok = (h < 1.0) & (mse > 0)
    d[ok] = r[ok] ** 2 * h[ok] / (p * mse * (1.0 - h[ok]) ** 2)
    note = "" if ok.all() else f"{int((~ok).sum())} row(s) have no defined distance (alone in their level, or zero residual spread)."
    return d, note


def cooks_distance_chart(results: Results, *, max_points: int = MAX_POINTS, width: int = WIDTH,
                         height: int = HEIGHT) -> alt.TopLevelMixin:
    """Cook's distance against table order, with the 4/n rule-of-thumb line; tall spikes pull the fit."""
    d, note = cooks_distance(results)
    if d is None:
        return finish(alt.Chart(alt.Data(values=[{}])).mark_text(text=note, fontSize=12)
                      .properties(width=width, height=60), "Cook's distance by row")
    frame = fit_frame(results)
    frame["distance"] = [None if np.isnan(v) else float(v) for v in d]
    picked = thin(len(frame), max_points, priority=np.nan_to_num(d, nan=0.0))
    frame = frame.iloc[picked.positions].copy()
    frame["state"] = "in analysis"
    frame["aria"] = [f"row {r}: Cook's distance" for r in frame["row"]]
    yard = 4.0 / max(results.n_used, 1)
    base = alt.Chart(frame).encode(x=alt.X("order:Q", title="row (table order)"),
                                   y=alt.Y("distance:Q", title="Cook's distance"))
    stems = base.mark_rule(color=KEPT, opacity=0.5).encode(y2=alt.datum(0))
    tip = [alt.Tooltip("row:N", title="row id"), alt.Tooltip("level:N", title="level"),
           alt.Tooltip("distance:Q", title="Cook's distance", format=".4g"),
           alt.Tooltip("residual:Q", format=".4g"), alt.Tooltip("leverage:Q", format=".4g")]
    guide = alt.Chart().mark_rule(color=GUIDE, strokeDash=[4, 3]).encode(y=alt.datum(yard))
    chart = alt.layer(stems, guide, row_marks(base, pick_param(), tip, size=35, legend=False))
    sub = [f"Dashed line: 4/n = {yard:.3g}, a common rule of thumb for a closer look."]
    sub += [s for s in (note, picked.note) if s]
    return finish(chart.properties(width=width, height=height), "Cook's distance by row", sub)
