"""Panel "Colleague's study": load a colleague's study file onto this study's data, see the two edit
logs and analyses side by side and the edits that make the decisions differ, and adopt their edits
one by one (:meth:`explorer.study.Study.compare`, :meth:`StudyComparison.adopt`).

The file is chosen by upload (it comes from the reader's own machine, also when the notebook
runs on a server) or by a path on the machine the kernel runs on. A file that cannot be read,
was saved on other data or analyses something else is refused in the panel's status line;
nothing changes.
"""

from __future__ import annotations

import tempfile
import weakref
from pathlib import Path
from typing import Any

import ipywidgets as W

from explorer.engine import ExplorerError
from explorer.study import Study
from explorer.study.compare import StudyComparison

from ..formatting import esc
from .panels import PanelContext, panel

__all__ = ["ColleaguePanel", "colleague_panel"]

GROUP = "Colleague's study"
_BUTTON = {"width": "auto", "flex": "0 0 auto"}


class ColleaguePanel:
    """The panel's widgets and state for one study (kept while the study is shown)."""

    def __init__(self, study: Study) -> None:
        self.study = study
        self.other: Study | None = None
        self.label = ""
        self.comparison: StudyComparison | None = None
        self.upload = W.FileUpload(accept=".json", multiple=False, description="Upload a study file",
                                   layout=W.Layout(**_BUTTON))
        self.upload.add_class("vx-colleague-upload")
        self.path_box = W.Text(placeholder="or the path of a study file on this machine",
                               layout=W.Layout(width="min(100%, 340px)"))
        self.path_box.add_class("vx-colleague-path")
        self.load_button = W.Button(description="Load", layout=W.Layout(**_BUTTON))
        self.load_button.add_class("vx-colleague-load")
        self.status = W.HTML()
        self.status.add_class("vx-colleague-status")
        self.result = W.HTML()
        self.result.add_class("vx-colleague-result")
        self.adopt_box = W.VBox()
        self.adopt_box.add_class("vx-colleague-adopt")
        self.upload.observe(lambda _: self._uploaded(), "value")
        self.load_button.on_click(lambda _: self.load_path(self.path_box.value))
        intro = W.HTML("<div class='vx-small'>A colleague's study file of the same data: their edits and "
                       "analysis beside yours, which edits make the decisions differ, and their edits to adopt "
                       "one by one (each recorded with where it came from).</div>")
        chooser = W.HBox([self.upload, self.path_box, self.load_button],
                         layout=W.Layout(flex_flow="row wrap", align_items="center"))
        self.widget = W.VBox([intro, chooser, self.status, self.result, self.adopt_box])
        self.widget.add_class("vx-colleague")

    # ------------------------------------------------------------- loading
    def _say(self, text: str, kind: str = "ok") -> None:
        self.status.value = f"<span class='vx-status-{kind}'>{esc(text)}</span>"

    def load_path(self, path: str | Path, label: str | None = None) -> bool:
        """Load a study file onto this study's data; refused (status line, nothing changed) when it cannot."""
        text = str(path).strip()
        if not text:
            self._say("Give the path of a study file, or upload one.", "error")
            return False
        try:
            other = self.study.load_other(text)
            comparison = self.study.compare(other, label=label or Path(text).name)
        except (ExplorerError, OSError) as exc:
            self._say(f"Not loaded: {exc}", "error")
            return False
        self.other, self.label = other, label or Path(text).name
        self._show(comparison)
        self._say(f"Loaded {self.label}: {len(other.edits)} edit(s) in effect there.")
        return True

    def load_bytes(self, name: str, content: bytes) -> bool:
        """Load an uploaded study file (its bytes go through the same checks as a file on disk)."""
        with tempfile.TemporaryDirectory() as folder:
            path = Path(folder) / "uploaded.study.json"
            path.write_bytes(content)
            return self.load_path(path, label=Path(name).name or "uploaded study file")

    def _uploaded(self) -> None:
        files = self.upload.value
        if not files:
            return
        item = files[0]
        self.load_bytes(str(item.get("name", "")), bytes(item.get("content", b"")))

    # ------------------------------------------------------------- showing
    def refresh(self) -> None:
        """Compare again with the loaded study (after an edit here, or an adopted edit)."""
        if self.other is None:
            return
        try:
            self._show(self.study.compare(self.other, label=self.label))
        except ExplorerError as exc:
            self._say(f"Cannot compare now: {exc}", "error")

    def _show(self, comparison: StudyComparison) -> None:
        self.comparison = comparison
        self.result.value = comparison._repr_html_()
        rows: list[W.Widget] = []
        if comparison.only_theirs:
            rows.append(W.HTML("<div class='vx-card-title'>Their edits not in yours</div>"))
        for i, e in enumerate(comparison.only_theirs):
            button = W.Button(description="Adopt", layout=W.Layout(**_BUTTON),
                              tooltip="Apply this edit here with their reason; its origin is recorded")
            button.add_class("vx-colleague-adopt-button")
            button.on_click(lambda _, k=i: self.adopt(k))
            text = W.HTML(f"<span class='vx-small'>{esc(e.describe())}: {esc(e.reason or '(no reason given)')}"
                          "</span>", layout=W.Layout(flex="1 1 200px", min_width="0"))
            rows.append(W.HBox([button, text], layout=W.Layout(flex_flow="row wrap", align_items="center")))
        self.adopt_box.children = rows

    def adopt(self, index: int) -> bool:
        """Adopt their ``index``-th edit missing from this study; refused edits leave the study unchanged."""
        if self.comparison is None:
            self._say("Load a colleague's study file first.", "error")
            return False
        edit = self.comparison.only_theirs[index]
        try:
            self.comparison.adopt(edit)
        except ExplorerError as exc:
            self._say(f"Not adopted ({edit.describe()}): {exc}", "error")
            return False
        self.refresh()
        self._say(f"Adopted from {self.label}: {edit.describe()}.")
        return True


_PANELS: weakref.WeakKeyDictionary[Study, ColleaguePanel] = weakref.WeakKeyDictionary()


@panel("colleague", "Compare with a colleague's study", group=GROUP, order=1)
def colleague_panel(ctx: PanelContext) -> Any:
    """One panel per study shown; redrawn (compared again) whenever the current view changes."""
    if hasattr(ctx.study, "sample_study"):
        return ("<div class='vx-small'>Not available for a summary-backed study: its edits are conditions run "
                "where the data are kept, and are not compared edit by edit here.</div>")
    held = _PANELS.get(ctx.study)
    if held is None:
        held = _PANELS[ctx.study] = ColleaguePanel(ctx.study)
    else:
        held.refresh()
    return held.widget
