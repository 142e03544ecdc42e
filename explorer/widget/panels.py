"""The panel registry: how result views plug into the explorer without touching it.

A panel is a title and a builder. The builder gets a :class:`PanelContext` (the study,
the explorer's settings and its step history) and returns what to show:

- an Altair chart: shown through ``alt.JupyterChart``; a chart that carries the ``pick``
  selection on the ``row`` field feeds the explorer's picked rows (click to pick);
- an ipywidgets widget: placed as it is;
- an HTML string, or any object with ``_repr_html_`` (e.g. a result value);
- ``None``: nothing to show for this study (the panel says so).

A panel may also give ``live``: a function of the context returning a short HTML line that
is redrawn on every refresh, even when the panel itself is not rebuilt. Counts that change
while a result stands (the disclosure of the searching done) go there, so that every
panel shows the number the study's ledger holds now, not the one when it was drawn.

Register a panel with :func:`register_panel` (or the :func:`panel` decorator). Panels in
group ``"main"`` sit beside the observations; the others go into tabs named by their
group and are only rebuilt when their tab is open.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Sequence
from dataclasses import dataclass, field
from typing import Any

from explorer.charts import HistoryStep
from explorer.engine import ExplorerError, Results
from explorer.study import Study

from ..engine.tables import esc

__all__ = [
    "PANELS",
    "Panel",
    "PanelContext",
    "Settings",
    "panel",
    "panels_in_order",
    "register_panel",
    "unregister_panel",
    "explains_refusals", "view_token",
]


@dataclass(frozen=True, kw_only=True)
class Settings:
    """Choices made in the explorer's controls that panels may read (the overall test is part of the
    study's model: ``ctx.study.spec.test``, and its decision ``ctx.study.decision``)."""

    alpha: float = 0.05
    comparisons: str = "tukey-kramer"
    max_points: int = 5000


@dataclass(frozen=True, kw_only=True)
class PanelContext:
    """Everything a panel builder may look at."""

    study: Study
    settings: Settings
    history: Sequence[HistoryStep] = ()
    #: Shows another study in the explorer (e.g. the same data with other column roles); None outside one.
    replace_study: Callable[[Study], None] | None = None

    @property
    def results(self) -> Results:
        return self.study.results

    @property
    def baseline(self) -> Results:
        return self.study.baseline

    @property
    def row_results(self) -> Results:
        """Results whose per-row fit matches their degrees of freedom: the study's own, or for a
        summary-backed study those of its seeded sample (its exact results carry only a sample of rows)."""
        sample = getattr(self.study, "sample_study", None)
        return sample().results if callable(sample) else self.study.results


def state_token(ctx: PanelContext) -> Hashable:
    """Default redraw key: the study, its current results object and the settings.

    The objects themselves, not their ``id``: results compare by identity, and holding them
    means a freed object's address can never be mistaken for the current one.
    """
    return (ctx.study, ctx.study.results, ctx.settings)


def view_token(ctx: PanelContext) -> Hashable:
    """Redraw key of panels that ignore the test and comparison pickers (alpha lives in the study)."""
    return (ctx.study, ctx.study.results, ctx.settings.max_points)


@dataclass(frozen=True, kw_only=True)
class Panel:
    """A titled view of a study. ``token(ctx)`` changes when the panel must be redrawn."""

    key: str
    title: str
    build: Callable[[PanelContext], Any]
    group: str = "more"
    order: int = 100
    token: Callable[[PanelContext], Hashable] = field(default=state_token)
    help: str = ""
    live: Callable[[PanelContext], str] | None = None


PANELS: dict[str, Panel] = {}

#: Order of the tabs; groups not listed here follow in the order they were registered.
GROUP_ORDER = ["main", "Model checks", "Tests", "Fragility", "Baseline and history",
               "Levels and edits"]


def register_panel(p: Panel) -> Panel:
    """Add (or replace) a panel; explorers created afterwards show it."""
    PANELS[p.key] = p
    return p


def unregister_panel(key: str) -> None:
    PANELS.pop(key, None)


def panel(key: str, title: str, *, group: str = "more", order: int = 100,
          token: Callable[[PanelContext], Hashable] = state_token, help: str = "",
          live: Callable[[PanelContext], str] | None = None,
          ) -> Callable[[Callable[[PanelContext], Any]], Callable[[PanelContext], Any]]:
    """Decorator form of :func:`register_panel`."""

    def wrap(fn: Callable[[PanelContext], Any]) -> Callable[[PanelContext], Any]:
        register_panel(Panel(key=key, title=title, build=fn, group=group, order=order, token=token, help=help,
                             live=live))
        return fn

    return wrap


def explains_refusals(fn: Callable[[PanelContext], Any]) -> Callable[[PanelContext], Any]:
    """Wrap a builder so that a view the tool refuses gets a sentence instead of an error."""

    def built(ctx: PanelContext) -> Any:
        try:
            return fn(ctx)
        except ExplorerError as exc:
            return f"<div class='vx-small'>Not available for this view: {esc(str(exc))}</div>"

    built.__doc__ = fn.__doc__
    return built


def panels_in_order(keys: Sequence[str] | None = None) -> list[Panel]:
    chosen = [PANELS[k] for k in keys] if keys is not None else list(PANELS.values())
    seen = list(dict.fromkeys(GROUP_ORDER + [p.group for p in chosen]))
    return sorted(chosen, key=lambda p: (seen.index(p.group), p.order, p.key))
