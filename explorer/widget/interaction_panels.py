"""Interaction panels (tab "Tests"): cell means of two factors with intervals, and the simple effects.

They show the pair of factors the study's decision points to (``study.decision.simple_effects_pair``):
the factors of the headline interaction, else the first two factors. One-factor studies and
models with random terms have nothing to show here.
"""

from __future__ import annotations

from typing import Any

from explorer import charts

from .panels import PanelContext, explains_refusals, panel, view_token

__all__: list[str] = []

GROUP = "Tests"


def _effects(ctx: PanelContext) -> Any:
    pair = ctx.study.decision.simple_effects_pair
    if pair is None:
        return None
    return ctx.study.simple_effects(pair[0], within=pair[1])


@panel("interaction", "Interaction: cell means", group=GROUP, order=1, token=view_token)
@explains_refusals
def interaction(ctx: PanelContext) -> Any:
    effects = _effects(ctx)
    return None if effects is None else charts.interaction_chart(effects)


@panel("simple_effects", "Simple effects", group=GROUP, order=2, token=view_token)
@explains_refusals
def simple_effects(ctx: PanelContext) -> Any:
    return _effects(ctx)
