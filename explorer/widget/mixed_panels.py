"""Panels of random-factor, nested and repeated-measures designs (tab "Strata and components").

* model roles: pickers that set each column's role (fixed, random, nested in another
  column, subject, within) and rebuild the study with the edits carried over;
* expected mean squares and the error term of each test;
* variance components, unedited beside current (chart and table);
* the measurement-system table when the model has exactly two random factors;
* per-subject profiles and the sphericity tests when the study has subjects.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import ipywidgets as W

from explorer.charts.mixed import profile_chart, variance_components_chart
from explorer.engine import ExplorerError
from explorer.engine.spec import ModelSpec
from explorer.study import Study

from ..engine.tables import esc
from .panels import PanelContext, explains_refusals, panel, view_token

__all__ = ["ROLES", "RolePickers", "respecified"]

GROUP = "Strata and components"
ROLES = ("fixed", "random", "nested in", "subject", "within")


def respecified(study: Study, roles: dict[str, str], parents: dict[str, str]) -> Study:
    """A new study on the same data with the column roles given (``Study.respecify``: the edits in effect
    are replayed, the ledger continues with each change of role recorded as a specification choice).

    ``roles[column]`` is one of :data:`ROLES`; ``parents[column]`` names the column a
    ``"nested in"`` column is nested in (it is random when listed in ``random`` too; here a
    nested column is taken as random, as lots, batches and parts within operators are).
    """
    spec = study.spec
    subject = [c for c, r in roles.items() if r == "subject"]
    if len(subject) > 1:
        raise ExplorerError(f"only one column can be the subject; picked {subject}")
    within = tuple(c for c, r in roles.items() if r == "within")
    if within and not subject:
        raise ExplorerError("within factors need a subject column")
    nested = {c: parents[c] for c, r in roles.items() if r == "nested in"}
    for c, p in nested.items():
        if not p or p == c:
            raise ExplorerError(f"pick the column {c!r} is nested in")
    random = tuple(c for c, r in roles.items() if r in ("random", "nested in") and c not in subject)
    columns = list(spec.factors) + ([spec.subject] if spec.subject else [])
    factors = tuple(c for c in columns if c not in subject)
    new_spec = replace(spec, factors=factors, random=tuple(c for c in random if c in factors + spec.blocks),
                       nested=tuple((c, (p,)) for c, p in nested.items()),  # type: ignore[arg-type]
                       subject=subject[0] if subject else None, within=within)
    ModelSpec(**{f: getattr(new_spec, f) for f in new_spec.__dataclass_fields__})  # validate now, clear message
    return study.respecify(factors=factors, terms=spec.terms, max_order=spec.max_order, random=new_spec.random,
                           nested=dict(nested) or None, subject=new_spec.subject, within=within)


class RolePickers(W.VBox):
    """One role picker per column (and the column it is nested in); "Apply roles" rebuilds the study."""

    def __init__(self, ctx: PanelContext, on_study: Any = None) -> None:
        study = ctx.study
        spec = study.spec
        columns = list(spec.factors + spec.blocks) + ([spec.subject] if spec.subject else [])
        self._study = study
        self._on_study = on_study
        self.pickers: dict[str, W.Dropdown] = {}
        self.parents: dict[str, W.Dropdown] = {}
        rows = []
        nest = dict(spec.nested)
        for c in columns:
            role = ("subject" if c == spec.subject else "within" if c in spec.within else
                    "nested in" if c in nest else "random" if c in spec.random else "fixed")
            self.pickers[c] = W.Dropdown(options=list(ROLES), value=role, description=c,
                                         layout=W.Layout(width="260px", max_width="100%"),
                                         style={"description_width": "110px"})
            others = [o for o in columns if o != c]
            self.parents[c] = W.Dropdown(options=[""] + others, value=(nest.get(c) or ("",))[0],
                                         description="in", layout=W.Layout(width="170px", max_width="100%"),
                                         style={"description_width": "30px"})
            # side by side where they fit, the parent picker under the role picker in a narrow card
            rows.append(W.HBox([self.pickers[c], self.parents[c]], layout=W.Layout(flex_flow="row wrap")))
        self.apply_button = W.Button(description="Apply roles", button_style="primary")
        self.status = W.HTML()
        self.apply_button.on_click(lambda _: self.apply())
        super().__init__(rows + [W.HBox([self.apply_button, self.status])])

    def apply(self) -> Study | None:
        roles = {c: p.value for c, p in self.pickers.items()}
        parents = {c: p.value for c, p in self.parents.items()}
        try:
            new = respecified(self._study, roles, parents)
        except ExplorerError as exc:
            self.status.value = f"<span class='vx-small'>Not applied: {esc(str(exc))}</span>"
            return None
        self.status.value = "<span class='vx-small'>Roles applied; edits carried over.</span>"
        if self._on_study is not None:
            self._on_study(new)
        return new


@panel("model_roles", "Roles of the columns (fixed, random, nested, subject, within)", group=GROUP, order=5,
       token=view_token)
def _roles(ctx: PanelContext) -> Any:
    return RolePickers(ctx, ctx.replace_study)


@panel("expected_mean_squares", "Expected mean squares and error terms", group=GROUP, order=10, token=view_token)
@explains_refusals
def _ems(ctx: PanelContext) -> Any:
    res = ctx.results
    if res.expected_mean_squares is None:
        return "<div class='vx-small'>Every factor is fixed: each term is tested against the residual.</div>"
    return res.expected_mean_squares._repr_html_() + res.partition._repr_html_()


@panel("variance_components", "Variance components, unedited and current", group=GROUP, order=20, token=view_token)
@explains_refusals
def _components(ctx: PanelContext) -> Any:
    chart = variance_components_chart(ctx.baseline, ctx.results)
    if chart is None:
        return "<div class='vx-small'>No random factors: no variance components to estimate.</div>"
    return chart


@panel("components_table", "Variance components table", group=GROUP, order=25, token=view_token)
@explains_refusals
def _components_table(ctx: PanelContext) -> Any:
    return ctx.results.variance_components


@panel("measurement_system", "Measurement system (two random factors)", group=GROUP, order=30, token=view_token)
@explains_refusals
def _gauge(ctx: PanelContext) -> Any:
    spec = ctx.study.spec
    if len(spec.random) != 2:
        return None
    nest = dict(spec.nested)
    a, b = spec.random
    if nest.get(a) == (b,):
        part, operator = a, b
    elif nest.get(b) == (a,):
        part, operator = b, a
    else:  # crossed: the column with more levels is taken as the parts
        na, nb = len(ctx.study.view.levels[a]), len(ctx.study.view.levels[b])
        part, operator = (a, b) if na >= nb else (b, a)
    table = ctx.study.measurement_system(part, operator)
    return (f"<div class='vx-small'>Parts: {esc(part)}; operators: {esc(operator)}.</div>"
            + table._repr_html_())


@panel("profiles", "Each subject across the within levels", group=GROUP, order=40, token=view_token)
@explains_refusals
def _profiles(ctx: PanelContext) -> Any:
    if ctx.study.spec.subject is None or not ctx.study.spec.within:
        return None
    return profile_chart(ctx.study)


@panel("sphericity", "Sphericity, epsilons and multivariate tests", group=GROUP, order=50, token=view_token)
@explains_refusals
def _sphericity(ctx: PanelContext) -> Any:
    if ctx.study.spec.subject is None or not ctx.study.spec.within:
        return None
    return ctx.study.repeated_measures()
