"""One panel on screen: a titled card that shows whatever its builder returns.

The card keeps one ``alt.JupyterChart`` per chart panel and swaps only its chart on a
redraw, so the widget stays in place in the page. It redraws only when the panel's
token changes, and a builder that fails shows its error in the card instead of raising.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable
from typing import Any, cast

import altair as alt
import ipywidgets as W

from explorer.charts import PICK
from explorer.charts.style import split_subtitle

from ..engine.tables import esc
from ..rendering import styled
from .panels import Panel, PanelContext

__all__ = ["EMBED_OPTIONS", "PanelCard", "parse_pick"]

#: SVG so that every point is a DOM node (clickable and testable); no export menu.
EMBED_OPTIONS = {"renderer": "svg", "actions": False}

_UNSET = object()


def parse_pick(raw: dict | None) -> list[str] | None:
    """Row ids (as text) in a raw ``_vl_selections`` payload of the ``pick`` selection; ``None`` if absent."""
    if not raw or PICK not in raw:
        return None
    from altair.utils.selection import PointSelection

    sel = raw[PICK] or {}
    value = PointSelection.from_vega(PICK, signal=sel.get("value"), store=sel.get("store", [])).value
    return [str(v["row"]) for v in value if isinstance(v, dict) and "row" in v]


def _param_names(spec: dict) -> list[str]:
    names = [p.get("name") for p in spec.get("params", [])]
    for key in ("layer", "vconcat", "hconcat"):
        for sub in spec.get(key, []):
            names += _param_names(sub)
    return sorted(str(n) for n in names)


class PanelCard:
    """Widget and redraw logic of one :class:`Panel`."""

    def __init__(self, spec: Panel, on_pick: Callable[[str, list[str]], None]) -> None:
        self.panel = spec
        self._on_pick = on_pick
        self._token: Any = _UNSET
        self.chart: alt.JupyterChart | None = None
        self.html = W.HTML()
        self.html.add_class(f"vx-panel-{spec.key}")
        self.body = W.Box(layout=W.Layout(flex_flow="column"))
        self.note = W.HTML()  # a chart's subtitle, as text the browser wraps to the card's width
        self.note.add_class("vx-chart-note")
        self.title = W.HTML(f"<div class='vx-card-title'>{esc(spec.title)}</div>")
        self.live = W.HTML()  # the panel's live line (see Panel.live), redrawn on every refresh
        self.live.add_class("vx-live")
        parts = [self.title, self.body] + ([self.live] if spec.live is not None else [])
        self.widget = W.VBox(parts, layout=W.Layout(padding="4px 8px", border="1px solid #e2e2e2"))
        self.widget.add_class("vx-card")
        self.widget.add_class(f"vx-card-{spec.key}")
        self.error: str = ""

    @property
    def stale(self) -> bool:
        return self._token is _UNSET

    def mark_stale(self) -> None:
        self._token = _UNSET

    def update(self, ctx: PanelContext, *, force: bool = False) -> bool:
        """Redraw if the token changed (or ``force``); return whether it redrew. The live line is
        redrawn every time, after the panel (whose scan may have added to the count)."""
        try:
            token: Hashable = self.panel.token(ctx)
        except Exception:  # noqa: BLE001  a token that fails means "always redraw"
            token = object()
        if not force and token == self._token:
            self.refresh_live(ctx)
            return False
        try:
            return self._rebuild(ctx, token)
        finally:
            self.refresh_live(ctx)

    def refresh_live(self, ctx: PanelContext) -> None:
        """Redraw the live line from the study as it is now (cheap: no panel is rebuilt)."""
        if self.panel.live is None:
            return
        try:
            text = self.panel.live(ctx)
        except Exception as exc:  # noqa: BLE001  a panel must never break the explorer
            text = f"<div class='vx-status-error'>{esc(str(exc))}</div>"
        if self.live.value != text:
            self.live.value = text

    def _rebuild(self, ctx: PanelContext, token: Hashable) -> bool:
        self._token = token
        with styled():  # the explorer's stylesheet is on the page: results add no <style> of their own
            try:
                out = self.panel.build(ctx)
                self.error = ""
            except Exception as exc:  # noqa: BLE001  a panel must never break the explorer
                self.error = f"{self.panel.title}: {type(exc).__name__}: {exc}"
                self._show_html(f"<div class='vx-status-error'>This panel could not be drawn: {esc(str(exc))}</div>")
                return True
            self._show(out)
        return True

    # ----------------------------------------------------------------- display
    def _show(self, out: Any) -> None:
        if out is None:
            self._show_html("<div class='vx-small'>Nothing to show for this study.</div>")
        elif isinstance(out, alt.TopLevelMixin):
            self._show_chart(out)
        elif isinstance(out, W.Widget):
            self._kind("html")
            self.body.children = (out,)
        elif isinstance(out, str):
            self._show_html(out)
        elif hasattr(out, "_repr_html_"):
            self._show_html(out._repr_html_())
        else:
            self._show_html(f"<pre>{esc(repr(out))}</pre>")

    def _kind(self, kind: str) -> None:
        """Mark the card as holding a chart or HTML (the stylesheet gives HTML cards the full row in tabs)."""
        other = "vx-card-html" if kind == "chart" else "vx-card-chart"
        if other in self.widget._dom_classes:
            self.widget.remove_class(other)
        if f"vx-card-{kind}" not in self.widget._dom_classes:
            self.widget.add_class(f"vx-card-{kind}")

    def _show_html(self, text: str) -> None:
        self._kind("html")
        self.note.value = ""
        self.title.layout.display = None
        self.html.value = text
        if self.body.children != (self.html,):
            self.body.children = (self.html,)

    def _show_chart(self, chart: alt.TopLevelMixin) -> None:
        self._kind("chart")
        chart, lines = split_subtitle(chart)
        self.note.value = "".join(f"<div>{esc(str(line))}</div>" for line in lines)
        if isinstance(chart, (alt.Chart, alt.LayerChart)):
            chart = chart.properties(width="container")  # the card's width, whatever the page gives it
        self.title.layout.display = "none"  # a chart carries its own title
        if self.chart is None:
            self.chart = alt.JupyterChart(cast(Any, chart), embed_options=EMBED_OPTIONS)
            self.chart.add_class(f"vx-chart-{self.panel.key}")
            self.chart.observe(self._selection_changed, ["_vl_selections"])
        else:
            # A redraw of the same panel has the same structure with new data: the first draw
            # was validated against the Vega-Lite schema, so the redraw skips the (slow) check
            # and swaps the spec in place. A chart with other selections takes the full path.
            spec = chart.to_dict(validate=False)
            if _param_names(spec) == _param_names(self.chart.spec or {}):
                self.chart.spec = spec
            else:
                self.chart.chart = cast(Any, chart)
        if self.body.children != (self.chart, self.note):
            self.body.children = (self.chart, self.note)

    def _selection_changed(self, change: dict) -> None:
        rows = parse_pick(change.get("new"))
        if rows is not None:
            self._on_pick(self.panel.key, rows)
