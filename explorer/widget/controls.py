"""The explorer's controls: the model pickers, the edit buttons and boxes, and what the pickers offer.

:class:`ExplorerControls` builds the widgets and wires each to its handler on the
:class:`~explorer.widget.explorer.Explorer` it is mixed into; the choice lists and the
response/factor candidates are read from the study's table and spec. No statistics.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import ipywidgets as W
import pandas as pd

from explorer.engine.spec import OVERALL_TESTS

if TYPE_CHECKING:
    from collections.abc import Sequence

    from explorer.study import Study

__all__ = ["COMPARISON_CHOICES", "OMNIBUS_CHOICES", "TRANSFORM_CHOICES", "ExplorerControls", "terms_choices",
           "terms_value"]

OMNIBUS_CHOICES = [(label, name) for name, label in OVERALL_TESTS.items()]
COMPARISON_CHOICES = [("Tukey-Kramer (all pairs)", "tukey-kramer"), ("Games-Howell (all pairs, unequal SD)", "games-howell"),
                      ("Dunnett (each level against the first)", "dunnett"), ("t tests, Holm-adjusted", "holm")]
TRANSFORM_CHOICES: list[tuple[str, str | float]] = [("none", "none"), ("log", "log"), ("square root", "sqrt")]
_ALPHAS = [0.01, 0.05, 0.10]


def terms_choices(spec: Any) -> list[tuple[str, Any]]:
    """The model-terms picker's options for a spec: all interactions, main effects only, or interactions of
    up to k factors; terms listed through the API show as such (pick another option to replace them)."""
    k = len(spec.factors)
    out: list[tuple[str, Any]] = [("all interactions", 0), ("main effects only", 1)]
    out += [(f"interactions of up to {m} factors", m) for m in range(2, k)]
    if spec.terms is not None:
        out.append(("as listed: " + ", ".join(" × ".join(t) for t in spec.terms), "listed"))
    return out


def terms_value(spec: Any) -> Any:
    """The picker's value for a spec's terms (see :func:`terms_choices`)."""
    if spec.terms is not None:
        return "listed"
    if not spec.interactions:
        return 1
    return 0 if spec.max_order is None or spec.max_order >= len(spec.factors) else spec.max_order


_BUTTON = {"width": "auto", "flex": "0 0 auto"}


def _factor_candidates(table: pd.DataFrame, response: str, limit: int = 60) -> list[str]:
    out = []
    for c in table.columns:
        col = table[c]
        if str(c) == response:
            continue
        if not pd.api.types.is_numeric_dtype(col.dtype) or col.nunique(dropna=True) <= limit:
            out.append(str(c))
    return out


def _response_candidates(table: pd.DataFrame) -> list[str]:
    return [str(c) for c in table.columns
            if pd.api.types.is_numeric_dtype(table[c].dtype) and not pd.api.types.is_bool_dtype(table[c].dtype)]


class ExplorerControls:
    """Builds the explorer's control widgets (mixed into :class:`~explorer.widget.explorer.Explorer`)."""

    study: Study

    if TYPE_CHECKING:  # provided by Explorer and its EditActions
        def _sync_model_pickers(self, study: Study) -> None: ...

        def _on_model_choice(self, _: Any) -> None: ...

        def _on_test_choice(self, _: Any) -> None: ...

        def _on_comparison_choice(self, _: Any) -> None: ...

        def _on_transform_choice(self, _: Any) -> None: ...

        def _on_terms_choice(self, _: Any) -> None: ...

        def pick(self, rows: Sequence[Any]) -> None: ...

        def leave_out_picked(self) -> bool: ...

        def restore_picked(self) -> bool: ...

        def restore_chosen(self) -> bool: ...

        def move_picked(self, level: str) -> bool: ...

        def undo(self) -> bool: ...

        def redo(self) -> bool: ...

        def reset(self) -> bool: ...

        def apply_regrouping(self) -> bool: ...

    def _build_controls(self) -> None:
        study = self.study
        table = study.dataset.table
        self.response_picker = W.Dropdown(description="response", options=_response_candidates(table),
                                          value=study.spec.response)
        self.factor_picker = W.SelectMultiple(description="factors", options=_factor_candidates(table, study.spec.response),
                                              value=tuple(study.spec.factors), rows=4)
        alphas = sorted(set(_ALPHAS) | {study.spec.alpha})
        self.alpha_picker = W.Dropdown(description="alpha", options=[(f"{a:g}", a) for a in alphas],
                                       value=study.spec.alpha)
        self.omnibus_picker = W.Dropdown(description="overall test", options=OMNIBUS_CHOICES, value=study.spec.test)
        self.comparison_picker = W.Dropdown(description="comparisons", options=COMPARISON_CHOICES,
                                            value=study.comparisons)
        self.transform_picker = W.Dropdown(description="transform", options=TRANSFORM_CHOICES)
        self.terms_picker = W.Dropdown(description="model terms")
        self._sync_model_pickers(study)
        for w in (self.response_picker, self.factor_picker, self.alpha_picker, self.omnibus_picker, self.comparison_picker,
                  self.transform_picker, self.terms_picker):
            w.style.description_width = "90px"
            w.layout.width = "300px"
        self.response_picker.observe(self._on_model_choice, "value")
        self.factor_picker.observe(self._on_model_choice, "value")
        self.alpha_picker.observe(self._on_model_choice, "value")
        self.omnibus_picker.observe(self._on_test_choice, "value")
        self.comparison_picker.observe(self._on_comparison_choice, "value")
        self.transform_picker.observe(self._on_transform_choice, "value")
        self.terms_picker.observe(self._on_terms_choice, "value")

        self.picked_label = W.HTML()
        self.picked_label.add_class("vx-picked")
        self.reason_box = W.Textarea(placeholder="Reason for the edit (required to leave out or move rows): "
                                                 "lab note, deviation number, what you saw",
                                     layout=W.Layout(width="300px", height="58px"))
        self.reason_box.add_class("vx-reason")
        self.drop_button = W.Button(description="Leave out picked", button_style="warning", layout=W.Layout(**_BUTTON),
                                    tooltip="Leave the picked rows out of the analysis (they stay drawn, grey)")
        self.restore_button = W.Button(description="Restore picked", layout=W.Layout(**_BUTTON))
        self.clear_pick_button = W.Button(description="Clear pick", layout=W.Layout(**_BUTTON))
        self.move_target = W.Combobox(placeholder="level (new name allowed)", ensure_option=False,
                                      layout=W.Layout(width="150px"))
        self.move_button = W.Button(description="Move picked to", layout=W.Layout(**_BUTTON),
                                    tooltip="Reassign the picked rows to the level named on the right")
        self.undo_button = W.Button(description="Undo", icon="undo", layout=W.Layout(**_BUTTON))
        self.redo_button = W.Button(description="Redo", icon="repeat", layout=W.Layout(**_BUTTON))
        self.reset_button = W.Button(description="Back to unedited", layout=W.Layout(**_BUTTON),
                                     tooltip="Undo every edit (they stay available to redo)")
        for b, cls in ((self.drop_button, "drop"), (self.restore_button, "restore"), (self.move_button, "move"),
                       (self.undo_button, "undo"), (self.redo_button, "redo"), (self.reset_button, "reset"),
                       (self.clear_pick_button, "clear")):
            b.add_class(f"vx-btn-{cls}")
        self.drop_button.on_click(lambda _: self.leave_out_picked())
        self.restore_button.on_click(lambda _: self.restore_picked())
        self.move_button.on_click(lambda _: self.move_picked(self.move_target.value))
        self.clear_pick_button.on_click(lambda _: self.pick(()))
        self.undo_button.on_click(lambda _: self.undo())
        self.redo_button.on_click(lambda _: self.redo())
        self.reset_button.on_click(lambda _: self.reset())

        self.left_out_list = W.SelectMultiple(options=[], rows=5, layout=W.Layout(width="300px"))
        self.left_out_list.add_class("vx-left-out")
        self.restore_chosen_button = W.Button(description="Restore chosen", layout=W.Layout(**_BUTTON))
        self.restore_chosen_button.on_click(lambda _: self.restore_chosen())
        self.level_editor = W.VBox()
        self.regroup_button = W.Button(description="Apply level changes", layout=W.Layout(**_BUTTON),
                                       tooltip="Same new name for two levels merges them; a new name renames")
        self.regroup_button.add_class("vx-btn-regroup")
        self.regroup_button.on_click(lambda _: self.apply_regrouping())
        self._level_boxes: dict[str, dict[str, W.Text]] = {}
        self._level_key: Any = None
        self._level_widgets: list[W.Widget] = []

        self.status = W.HTML()
        self.status.add_class("vx-status")
        self.header = W.HTML()
        self.header.add_class("vx-header")
