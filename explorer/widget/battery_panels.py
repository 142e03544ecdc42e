"""Panels of the one-way battery (:func:`explorer.inference.battery.run_battery`), in the tab
"Tests". The overall-test and comparison pickers of the explorer choose
what is featured; the battery itself always computes every test.

Studies with several factors or blocks get the multi-factor counterparts instead: the
partition under all three types of sums of squares, Shapiro-Wilk on the model residuals,
Tukey-Kramer comparisons of the least-squares means of each factor with letters, partial
effect sizes and blocking efficiency, and the influence screen.
"""

from __future__ import annotations

from collections import OrderedDict
from typing import Any

import pandas as pd

from explorer.engine import Results
from explorer.engine.tables import esc, html_table
from explorer.inference.assumptions import bartlett, levene, shapiro_residuals
from explorer.inference.battery import Battery, run_battery
from explorer.inference.letters import compact_letters

from .panels import PanelContext, explains_refusals, panel

__all__ = ["battery_for", "chosen_omnibus"]

GROUP = "Tests"
_CACHE: OrderedDict[tuple, tuple[Results, Battery]] = OrderedDict()
_LETTERS = {"tukey-kramer": "tukey", "games-howell": "games-howell", "holm": "pairwise-t", "dunnett": "tukey"}
_OMNIBUS = {"classic": "classic", "welch": "welch", "brown-forsythe": "brown_forsythe",
            "kruskal": "kruskal_wallis", "permutation": "permutation"}


def battery_for(ctx: PanelContext) -> Battery:
    """The battery of the current view with the explorer's choices (shared by the panels, kept per view)."""
    res = ctx.results
    s = ctx.settings
    control = res.groups.labels[0] if s.comparisons == "dunnett" else None
    key = (id(res), s.alpha, s.comparisons)
    hit = _CACHE.get(key)
    if hit is not None and hit[0] is res:
        return hit[1]
    options = {"alpha": s.alpha, "letters_from": _LETTERS.get(s.comparisons, "tukey"),
               "pairwise_adjust": "holm", "control": control}
    # A summary-backed study splits its battery between exact summaries and its sample.
    bat = ctx.study.battery(**options) if hasattr(ctx.study, "sample_study") else run_battery(res, **options)  # type: ignore[arg-type]
    _CACHE[key] = (res, bat)
    while len(_CACHE) > 6:
        _CACHE.popitem(last=False)
    return bat


def chosen_omnibus(bat: Battery, choice: str) -> Any:
    """The battery's entry for the study's test (``None`` when the battery did not run it)."""
    return getattr(bat, _OMNIBUS.get(choice, "classic"), None)


@panel("overall_tests", "Tests of equal level means", group=GROUP, order=10)
@explains_refusals
def overall_tests(ctx: PanelContext) -> str:
    if not ctx.results.spec.is_oneway:
        return _multi_factor_partitions(ctx.results, ctx.study.decision)
    bat = battery_for(ctx)
    d = ctx.study.decision
    caveat = f" {esc(d.caveat)}" if d.caveat else ""
    head = (f"<div class='vx-decision'><b>The decision ({esc(d.method)})</b>: "
            f"{esc(d.sentence())}.{caveat}</div>")
    return head + html_table(bat.omnibus_frame(), "All tests of equal means on this view") + bat.recommendation._repr_html_()


@panel("assumption_checks", "Assumption checks", group=GROUP, order=20)
@explains_refusals
def assumption_checks(ctx: PanelContext) -> str:
    if not ctx.results.spec.is_oneway:
        rows = ctx.row_results
        checks = [levene(rows), bartlett(rows), shapiro_residuals(rows)]
        table = html_table(pd.DataFrame([c.row() for c in checks]),
                           "Checks of equal spread across the cells and normal residuals")
        return table + ("<div class='vx-small'>Several factors: the groups compared for spread are the cells "
                        "of the design.</div>")
    bat = battery_for(ctx)
    return html_table(bat.checks_frame(), "Checks of equal spread and normal residuals")


@panel("comparisons", "Comparisons between levels", group=GROUP, order=30)
@explains_refusals
def comparisons(ctx: PanelContext) -> str:
    res = ctx.results
    if not res.spec.is_oneway:
        parts = []
        for factor in res.spec.factors:
            table = res.compare_means(factor)
            parts.append(table._repr_html_() + compact_letters(table, alpha=ctx.settings.alpha)._repr_html_())
        return "".join(parts) + (
            "<div class='vx-small'>Several factors: levels are compared through their least-squares means "
            "(Tukey-Kramer), whatever comparison is picked.</div>")
    bat = battery_for(ctx)
    table = {"tukey-kramer": bat.tukey, "games-howell": bat.games_howell, "holm": bat.pairwise_t,
             "dunnett": bat.dunnett}.get(ctx.settings.comparisons) or bat.tukey
    return table._repr_html_() + bat.letters._repr_html_()


@panel("effect_power", "Effect sizes and power", group=GROUP, order=40)
@explains_refusals
def effect_power(ctx: PanelContext) -> str:
    res = ctx.results
    if not res.spec.is_oneway:
        extras = [res.term_effects, res.blocking, res.cells if res.cells is not None and not res.cells.balanced else None]
        return "".join(x._repr_html_() for x in extras if x is not None)
    bat = battery_for(ctx)
    parts = [x._repr_html_() for x in (bat.effect_sizes, bat.power) if x is not None]
    return "".join(parts) + "".join(f"<div class='vx-small'>{esc(n)}</div>" for n in bat.notes)


@panel("screens", "Outlier screens (flag only)", group=GROUP, order=50)
@explains_refusals
def screens(ctx: PanelContext) -> str:
    if not ctx.results.spec.is_oneway:
        return ctx.study.influence()._repr_html_() + (
            "<div class='vx-small'>Screens flag rows for a closer look; nothing is left out unless you do it, "
            "with a reason.</div>")
    bat = battery_for(ctx)
    return "".join(s._repr_html_() for s in bat.screens) + (
        "<div class='vx-small'>Screens flag rows for a closer look; nothing is left out unless you do it, "
        "with a reason.</div>")


def _multi_factor_partitions(res: Results, decision: Any) -> str:
    """The partition under each type of sums of squares (they differ when the cells are unbalanced)."""
    parts = [f"<div class='vx-decision'><b>{esc(decision.sentence())}</b></div>",
             decision._repr_html_()]
    for ss_type in ("I", "II", "III"):
        table = res.partitions.get(ss_type)
        if table is not None:
            parts.append(table._repr_html_())
    return "".join(parts)
