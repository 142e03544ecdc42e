"""The explorer: an ipywidgets shell that turns controls and chart clicks into study edits.

It owns no statistics. Every control change or chart pick becomes a call on its
:class:`~explorer.study.Study` (drop, restore, reassign, merge_levels, rename_level,
undo, redo, reset) with the reason typed in the reason box; the study's change event
then redraws the panels whose inputs changed (tables first, then charts). A refused
edit shows in the status line and never raises into the notebook.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import replace
from typing import Any

import altair as alt
import ipywidgets as W
import pandas as pd

from explorer.charts import HistoryStep
from explorer.engine import ExplorerError
from explorer.engine.spec import OVERALL_TESTS
from explorer.study import Study, StudyEvent

from ..engine.tables import esc
from ..formatting import scale, show_reading
from . import (  # noqa: F401  (register the built-in panels)
    battery_panels,
    colleague_panel,
    core_panels,
    fragility_panels,
    interaction_panels,
    mixed_panels,
    planned_panels,
)
from .controls import (
    COMPARISON_CHOICES,
    OMNIBUS_CHOICES,
    TRANSFORM_CHOICES,
    ExplorerControls,
    terms_choices,
    terms_value,
)
from .edit_actions import EditActions, level_steps
from .host import PanelCard
from .panels import PanelContext, Settings, panels_in_order
from .resize import ResizeRelay
from .stylesheet import STYLESHEET

__all__ = ["COMPARISON_CHOICES", "OMNIBUS_CHOICES", "TRANSFORM_CHOICES", "Explorer", "explore", "level_steps",
           "terms_choices", "terms_value"]


def _offline() -> str:
    """Load the chart runtime from the local vl-convert bundle (charts are blank offline otherwise)."""
    try:
        alt.JupyterChart.enable_offline()
        return ""
    except Exception as exc:  # noqa: BLE001  vl-convert missing or too old: charts then need the network
        return f"Charts load their runtime from the network ({exc}); install vl-convert-python to work offline."


class Explorer(EditActions, ExplorerControls, W.VBox):
    """Notebook dashboard for one :class:`~explorer.study.Study`.

    Parameters
    ----------
    study : the study to explore (the explorer edits it in place; ``explorer.study``
        is always the current one, also after the response or factors are changed).
    panels : keys of the registered panels to show (all registered panels by default).
    max_points : most rows a chart draws; above it charts draw a stated sample.
    """

    def __init__(self, study: Study, *, panels: Sequence[str] | None = None, max_points: int = 5000,
                 **kwargs: Any) -> None:
        self._offline_note = _offline()
        self.study = study
        self._unsubscribe = study.on_change(self._on_study_change)
        self._batch = 0
        self._dirty = False
        self._refreshing = False
        self._picked: tuple[Any, ...] = ()
        self._picked_from = ""
        self._ids_of: tuple[Any, dict[str, Any]] | None = None  # chart text id -> row id, per dataset
        self.history: list[HistoryStep] = []
        self._record("unedited data")
        self.settings = Settings(alpha=study.spec.alpha, comparisons=study.comparisons, max_points=max_points)
        self._build_controls()
        self.cards = {p.key: PanelCard(p, self._on_pick) for p in panels_in_order(panels)}
        super().__init__(children=self._layout(), **kwargs)
        self.add_class("vx-explorer")
        self._status(self._offline_note or "Ready. Click a point to pick it, write a reason, then choose an action.",
                     "warn" if self._offline_note else "ok")
        self.refresh(force=True)

    # ================================================================= layout
    def _section(self, title: str, *items: W.Widget) -> W.VBox:
        box = W.VBox([W.HTML(f"<div class='vx-card-title'>{esc(title)}</div>"), *items],
                     layout=W.Layout(margin="0 0 8px 0"))
        box.add_class("vx-section")
        return box

    def _layout(self) -> list[W.Widget]:
        """The decision card (with the cautions), status, then the body: controls beside the results (one
        column when narrow, see :mod:`.stylesheet`)."""
        controls = W.VBox([
            self._section("Model", self.response_picker, self.factor_picker, self.alpha_picker,
                          self.omnibus_picker, self.comparison_picker, self.transform_picker, self.terms_picker),
            self._section("Edit the picked rows", self.picked_label, W.HBox([self.clear_pick_button]), self.reason_box,
                          W.HBox([self.drop_button, self.restore_button]),
                          W.HBox([self.move_button, self.move_target])),
            self._section("Steps", W.HBox([self.undo_button, self.redo_button, self.reset_button])),
            self._section("Rows left out (with reasons)", self.left_out_list, self.restore_chosen_button),
            self._section("Levels: original → new name (same name = merged)", self.level_editor, self.regroup_button),
        ])
        controls.add_class("vx-controls")
        main = W.Box([c.widget for c in self.cards.values() if c.panel.group == "main"])
        main.add_class("vx-main")
        groups: dict[str, list[PanelCard]] = {}
        for c in self.cards.values():
            if c.panel.group != "main":
                groups.setdefault(c.panel.group, []).append(c)
        pages = []
        for cs in groups.values():
            page = W.Box([c.widget for c in cs])
            page.add_class("vx-tab-grid")
            pages.append(page)
        self.tabs = W.Tab(children=pages)
        self.tabs.add_class("vx-tabs")
        self.tabs.titles = tuple(groups)
        self._tab_groups = list(groups)
        self.tabs.observe(lambda _: self.refresh(), "selected_index")
        content = W.Box([main, self.tabs])
        content.add_class("vx-content")
        body = W.Box([controls, content])
        body.add_class("vx-body")
        return [W.HTML(STYLESHEET), ResizeRelay(), self.header, self.status, body]

    # ================================================================= state
    def _context(self) -> PanelContext:
        return PanelContext(study=self.study, settings=self.settings, history=tuple(self.history),
                            replace_study=lambda s: self.set_study(s, action="model roles"))

    def _record(self, action: str) -> None:
        d = self.study.decision
        self.history.append(HistoryStep(step=len(self.history), action=action, pvalue=d.pvalue,
                                        r_squared=self.study.results.r_squared, edits_in_effect=len(self.study.edits),
                                        term=d.term, test=d.test_label, significant=d.significant))

    def _on_study_change(self, study: Study, event: StudyEvent) -> None:
        if event.kind == "spec":
            last = study.ledger.entries[-1] if len(study.ledger) else None
            self._record(f"{last.what}: {last.new}"
                         if last is not None and last.kind == "specification" and last.what != "overall test"
                         else f"overall test: {study.decision.test_label}")
            self.settings = replace(self.settings, alpha=study.spec.alpha, comparisons=study.comparisons)
            self._show_choices(study)  # a choice made in code shows in the pickers (nothing recorded again)
        elif event.kind != "search":
            what = event.edit.describe() if event.edit is not None else "all edits"
            self._record(what if event.kind == "edit" else f"{event.kind}: {what}")
        if self._batch or self._refreshing:
            self._dirty = True  # e.g. a scan counted its alternatives while a panel was drawn
            return
        self.refresh()

    @contextmanager
    def _one_redraw(self) -> Iterator[None]:
        """Several edits from one action redraw once, at the end."""
        self._batch += 1
        try:
            yield
        finally:
            self._batch -= 1
            if not self._batch and self._dirty:
                self._dirty = False
                self.refresh()

    def _status(self, text: str, kind: str = "ok") -> None:
        self.status.value = f"<div class='vx-status-{kind}'>{esc(text)}</div>"

    # ================================================================= picking
    def _on_pick(self, source: str, rows: list[str]) -> None:
        if not rows and source != self._picked_from:
            return  # another chart was redrawn; keep the pick made elsewhere
        ds = self.study.dataset
        if self._ids_of is None or self._ids_of[0] is not ds:
            self._ids_of = (ds, {str(r): ds.row_id(i) for i, r in enumerate(ds.row_ids.tolist())})
        lookup = self._ids_of[1]
        self._picked = tuple(lookup[r] for r in rows if r in lookup)
        self._picked_from = source
        self._show_picked()
        if self._picked:
            self._status(f"Picked {len(self._picked)} row(s). Write a reason, then choose an action.")

    def _show_picked(self) -> None:
        if not self._picked:
            self.picked_label.value = "<span class='vx-small'>No rows picked. Click a point in a chart.</span>"
            return
        ds, view = self.study.dataset, self.study.view
        f = self.study.spec.factors[0]
        parts = []
        for r in self._picked[:8]:
            try:
                p = int(ds.positions([r])[0])
            except ExplorerError:
                continue
            state = "in analysis" if view.kept[p] else "left out"
            with scale(of=self.study.display_scale()):
                value = show_reading(ds.y_original[p])
            parts.append(f"row {r} ({f} {view.level_of(p, f)}, {value}, {state})")
        more = f" and {len(self._picked) - 8} more" if len(self._picked) > 8 else ""
        self.picked_label.value = f"<span class='vx-picked-rows'>Picked: {esc('; '.join(parts))}{more}</span>"

    # ================================================================= model choices
    def _on_comparison_choice(self, _: Any) -> None:
        """The comparison method is a specification choice: the study records it (see ``Study.set_comparisons``)."""
        choice = self.comparison_picker.value
        if choice == self.study.comparisons:
            return
        try:
            self.study.set_comparisons(choice)
        except ExplorerError as exc:
            self.comparison_picker.value = self.study.comparisons
            self._status(str(exc), "error")
            return
        self._status(f"Levels are now compared by {dict((v, k) for k, v in COMPARISON_CHOICES)[choice]} "
                     "(recorded as a specification choice).")

    def _show_choices(self, study: Study) -> None:
        """Every model picker shows the study's current choice; their handlers see no change."""
        if study.spec.alpha not in [v for _, v in self.alpha_picker.options]:
            self.alpha_picker.options = list(self.alpha_picker.options) + [(f"{study.spec.alpha:g}", study.spec.alpha)]
        with self._hold_pickers():
            self.alpha_picker.value = study.spec.alpha
        self.omnibus_picker.value = study.spec.test
        self.comparison_picker.value = study.comparisons
        self._sync_model_pickers(study)

    def _sync_model_pickers(self, study: Study) -> None:
        """Show the study's transform and terms in their pickers (the handlers are held: nothing recorded)."""
        self._syncing = True
        try:
            self._fill_model_pickers(study)
        finally:
            self._syncing = False

    def _fill_model_pickers(self, study: Study) -> None:
        transform = study.spec.transform
        options = list(TRANSFORM_CHOICES)
        if transform not in [v for _, v in options]:
            options.append((f"Box-Cox power {transform:g}" if isinstance(transform, float) else str(transform), transform))
        self.transform_picker.options = options
        self.transform_picker.value = transform
        # A summary-backed study holds cell summaries of the response as read: a transform needs every row.
        summaries = hasattr(study, "sample_study")
        self.transform_picker.disabled = summaries
        self.transform_picker.tooltip = ("A summary-backed study holds each cell's count, mean and sum of squares of "
                                         "the response; a transform needs every row" if summaries else None)
        for picker in (self.response_picker, self.factor_picker):  # respecify reads the rows again
            picker.disabled = summaries
            picker.tooltip = ("A summary-backed study keeps its response and factors; build a new one for others"
                              if summaries else None)
        self.terms_picker.options = terms_choices(study.spec)
        self.terms_picker.value = terms_value(study.spec)
        self.terms_picker.disabled = len(study.spec.factors) < 2

    def _on_transform_choice(self, _: Any) -> None:
        """The transform of the response is a specification choice (``Study.set_transform``, recorded)."""
        choice = self.transform_picker.value
        if getattr(self, "_syncing", False) or choice == self.study.spec.transform:
            return
        reason = self.reason_box.value.strip()
        try:
            with self._one_redraw():
                self.study.set_transform(choice, reason=reason)
        except ExplorerError as exc:
            self.transform_picker.value = self.study.spec.transform
            self._status(str(exc), "error")
            return
        self._status(f"The response is now analysed as {self.transform_picker.label} (recorded as a specification "
                     "choice).")

    def _on_terms_choice(self, _: Any) -> None:
        """The model's terms are a specification choice (``Study.set_terms``, recorded)."""
        choice = self.terms_picker.value
        if getattr(self, "_syncing", False) or choice == terms_value(self.study.spec) or choice == "listed":
            return
        try:
            with self._one_redraw():
                self.study.set_terms(max_order=None if choice == 0 else int(choice), interactions=True)
        except ExplorerError as exc:
            self.terms_picker.value = terms_value(self.study.spec)
            self._status(str(exc), "error")
            return
        self._status(f"The model now has {self.terms_picker.label} (recorded as a specification choice).")

    def _on_test_choice(self, _: Any) -> None:
        """The overall test is part of the model: the study reads its decision from it (recorded)."""
        choice = self.omnibus_picker.value
        if choice == self.study.spec.test:
            return
        try:
            self.study.set_test(choice)
        except ExplorerError as exc:
            self.omnibus_picker.value = self.study.spec.test
            self._status(str(exc), "error")
            return
        self._status(f"The decision is now read from the {OVERALL_TESTS[choice]} test (recorded as a specification "
                     "choice).")

    def _on_model_choice(self, _: Any) -> None:
        response = self.response_picker.value
        factors = tuple(self.factor_picker.value)
        alpha = float(self.alpha_picker.value)
        spec = self.study.spec
        if (response, factors, alpha) == (spec.response, spec.factors, spec.alpha):
            return
        if not factors:
            self._status("Pick at least one factor.", "error")
            return
        if response in factors:
            self._status(f"{response!r} is the response; it cannot also be a factor.", "error")
            return
        if (response, factors) == (spec.response, spec.factors):  # alpha only: the same study, recorded
            try:
                self.study.set_alpha(alpha)
            except ExplorerError as exc:
                with self._hold_pickers():
                    self.alpha_picker.value = spec.alpha
                self._status(f"alpha {alpha:g} refused: {exc}", "error")
                return
            self._status(f"Decisions are now read at alpha {alpha:g} (recorded as a specification choice).")
            return
        try:
            new, skipped = self._rebuilt(response, factors, alpha)
        except Exception as exc:  # noqa: BLE001  never raise into the notebook
            with self._hold_pickers():  # the pickers show the model still analysed
                self.response_picker.value = spec.response
                self.factor_picker.value = tuple(spec.factors)
            self._status(f"Could not analyse {response} by {', '.join(factors)}: {exc}", "error")
            return
        self.set_study(new, action=f"model: {response} by {', '.join(factors)}, alpha {alpha:g}")
        note = f" {len(skipped)} edit(s) no longer apply and were skipped." if skipped else ""
        self._status(f"Now analysing {response} by {', '.join(factors)} at alpha {alpha:g}; edits carried over.{note}",
                     "warn" if skipped else "ok")

    def _rebuilt(self, response: str, factors: tuple[str, ...], alpha: float) -> tuple[Study, list[Any]]:
        """The study on another response or factors (``Study.respecify``: the original file is read again,
        the edits in effect replayed, the ledger continued with each change recorded)."""
        new = self.study.respecify(response=response, factors=factors, alpha=alpha)
        return new, list(new.edits_not_carried)

    def set_study(self, study: Study, action: str = "new study") -> None:
        """Show another study (e.g. one loaded from a saved file); the history keeps going."""
        self._unsubscribe()
        self.study = study
        self._unsubscribe = study.on_change(self._on_study_change)
        self.settings = replace(self.settings, alpha=study.spec.alpha, comparisons=study.comparisons)
        self._picked, self._picked_from = (), ""
        self._record(action)
        with self._hold_pickers():
            self.response_picker.value = study.spec.response
            self.factor_picker.value = tuple(study.spec.factors)
            if study.spec.alpha not in [v for _, v in self.alpha_picker.options]:
                self.alpha_picker.options = list(self.alpha_picker.options) + [(f"{study.spec.alpha:g}", study.spec.alpha)]
            self.alpha_picker.value = study.spec.alpha
        self.omnibus_picker.value = study.spec.test  # the study's own test (no new choice recorded)
        self.comparison_picker.value = study.comparisons  # likewise
        self._sync_model_pickers(study)
        self.refresh(force=True)

    @contextmanager
    def _hold_pickers(self) -> Iterator[None]:
        pickers = (self.response_picker, self.factor_picker, self.alpha_picker)
        for w in pickers:
            w.unobserve(self._on_model_choice, "value")
        try:
            yield
        finally:
            for w in pickers:
                w.observe(self._on_model_choice, "value")

    # ================================================================= redraw
    def refresh(self, force: bool = False) -> None:
        """Redraw what changed: header and tables first, then charts; hidden tabs when opened."""
        self._refreshing = True
        try:
            with scale(of=self.study.display_scale()):  # one formatter: the study's decimals and units
                self._redraw(force)
        finally:
            self._refreshing = False
        if self._dirty and not self._batch:
            self._dirty = False
            with scale(of=self.study.display_scale()):
                self._refresh_header()  # a scan added to the disclosure count while drawing
                ctx = self._context()
                for card in self.cards.values():
                    if card.panel.group == "main":
                        card.update(ctx)
                    else:
                        card.refresh_live(ctx)  # one number everywhere: the live lines of the tabs too

    def _redraw(self, force: bool) -> None:
        ctx = self._context()
        self._refresh_header()
        self._refresh_controls()
        main = [c for c in self.cards.values() if c.panel.group == "main"]
        for card in sorted(main, key=lambda c: c.chart is not None):
            card.update(ctx, force=force)
        self._refresh_tab(ctx, force=force)
        self._show_picked()

    def _refresh_tab(self, ctx: PanelContext | None = None, force: bool = False) -> None:
        idx = self.tabs.selected_index
        if idx is None or idx >= len(self._tab_groups):
            return
        ctx = ctx or self._context()
        for card in self.cards.values():
            if card.panel.group == self._tab_groups[idx]:
                card.update(ctx, force=force)
        errors = [c.error for c in self.cards.values() if c.error]
        if errors:
            self._status("Some panels could not be drawn: " + "; ".join(errors), "warn")

    def _refresh_header(self) -> None:
        """The decision card (:mod:`explorer.study.decision_card`), its disclosure count read now."""
        self.header.value = self.study.decision_card().html()

    def _refresh_controls(self) -> None:
        study = self.study
        reasons: dict[Any, str] = {}
        for e in study.edits:
            for r in getattr(e, "rows", ()):
                reasons[r] = e.reason if e.kind == "drop" else reasons.get(r, "")
        self.left_out_list.options = [(f"row {r}: {reasons.get(r) or '(no reason given)'}", r) for r in study.dropped]
        f = study.spec.factors[0]
        self.move_target.options = tuple(study.levels(f))
        self.undo_button.disabled = not study.edits
        self.redo_button.disabled = not study.redo_edits
        self.reset_button.disabled = not study.edits
        mapping = {fac: self._original_to_current(fac) for fac in study.spec.factors}
        key = tuple((fac, tuple(m.items())) for fac, m in mapping.items())
        if key == self._level_key:
            return  # same levels: keep the editor (and anything typed in it)
        self._level_key = key
        for old in self._level_widgets:
            old.close()
        rows: list[W.Widget] = []
        self._level_boxes = {}
        for fac, current in mapping.items():
            boxes = {}
            rows.append(W.HTML(f"<div class='vx-small'><b>{esc(fac)}</b></div>"))
            for orig, now in current.items():
                box = W.Text(value=now or "", placeholder="new name", layout=W.Layout(width="110px"),
                             disabled=now is None)
                boxes[orig] = box
                shown = now if now is not None else "(no rows left at this level)"
                text = f"{orig} →" if shown == orig else f"{orig} (now {shown}) →"
                label = W.HTML(f"<span class='vx-small'>{esc(text)}</span>",
                               layout=W.Layout(width="170px"))
                rows.append(W.HBox([label, box]))
                self._level_widgets += [label, box]
            self._level_boxes[fac] = boxes
        self.level_editor.children = rows
        self._level_widgets += rows


def explore(data: pd.DataFrame | str, response: str, factors: str | Sequence[str], **kwargs: Any) -> Explorer:
    """Open the explorer on a table: ``explore(df, response="thickness_um", factors="nozzle")``.

    Parameters
    ----------
    data : pandas.DataFrame or str
        The table, or the path of a CSV, Parquet or Excel file.
    response : str
        The response column.
    factors : str or sequence of str
        The treatment factor(s).
    **kwargs
        Passed to :class:`~explorer.Study` (blocks, interactions, ss_type, alpha, ...)
        except ``panels`` and ``max_points``, which go to :class:`Explorer`.

    Returns
    -------
    Explorer
        The notebook widget on a new :class:`~explorer.Study`; ``.study`` is that study.

    References
    ----------
    Montgomery, D. C. (2017). Design and Analysis of Experiments, 9th ed., ch. 3 (the
    analysis it opens on).

    Examples
    --------
    >>> import explorer as ex
    >>> widget = ex.explore(ex.example_data("coating"), response="thickness_um", factors="nozzle")
    >>> widget.study.decision.verdict
    'differences detected'
    """
    ex_kwargs = {k: kwargs.pop(k) for k in ("panels", "max_points") if k in kwargs}
    return Explorer(Study(data, response=response, factors=factors, **kwargs), **ex_kwargs)
