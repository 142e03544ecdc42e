"""App mode: the explorer as a page for colleagues who do not write code.

``variance-explorer app STUDY.json --data DATA`` serves a one-cell notebook with Voila on
127.0.0.1; the cell calls :func:`app_page`, which loads the saved study on its data and
shows, above the :class:`~explorer.widget.Explorer`, two buttons: save the edit log (to a
new file beside the original, so the colleague's review never overwrites the sender's
file) and write the offline report. Each written file is then offered as a download link
(the file's bytes in a ``data:`` address), so a colleague on a remote or headless server
gets the file in their own browser rather than a path on the server.
"""

from __future__ import annotations

import base64
from collections.abc import Callable
from pathlib import Path

import ipywidgets as W

from .engine import ExplorerError
from .engine.tables import esc
from .study import Study
from .widget import Explorer

__all__ = ["app_page", "download_link", "review_paths"]


def review_paths(study_file: str | Path) -> tuple[Path, Path]:
    """Where the page saves the reviewed log and the report: beside the original study file.

    The first pair of names not taken yet (``-reviewed``, ``-reviewed-2``, ...), so a
    review never replaces the sender's file or an earlier review; the page then keeps
    writing to the pair it chose.
    """
    p = Path(study_file)
    stem = p.name.removesuffix(".json").removesuffix(".study")
    for n in range(1, 10_000):
        tag = "reviewed" if n == 1 else f"reviewed-{n}"
        pair = p.with_name(f"{stem}-{tag}.study.json"), p.with_name(f"{stem}-{tag}-report.html")
        if not (pair[0].exists() or pair[1].exists()):
            return pair
    raise ExplorerError(f"too many reviews of {p.name!r} in its folder; move some away")


_MEDIA_TYPES = {".json": "application/json", ".html": "text/html"}


def download_link(path: str | Path, label: str) -> str:
    """An ``<a download>`` link holding the file's bytes (no server route, no server path shown)."""
    p = Path(path)
    media = _MEDIA_TYPES.get(p.suffix.lower(), "application/octet-stream")
    payload = base64.b64encode(p.read_bytes()).decode("ascii")
    return (f"<a class='vx-app-download' download='{esc(p.name)}' href='data:{media};base64,{payload}'>"
            f"{esc(label)} ({esc(p.name)})</a>")


def app_page(study_file: str | Path, data: str | Path) -> W.VBox:
    """The app page: a title line, the save/report buttons with their download links, then the explorer."""
    study = Study.load(study_file, data=data)
    explorer = Explorer(study)
    log_path, report_path = review_paths(study_file)
    title = W.HTML(
        f"<h2 class='vx-app-title'>{esc(study.spec.response)} by {esc(', '.join(study.spec.factors))}</h2>"
        f"<div class='vx-small'>Saved study <code>{esc(Path(study_file).name)}</code> on data "
        f"<code>{esc(Path(data).name)}</code>: {len(study.edits)} edit(s) loaded. Pick points, write a "
        "reason, edit; then save your review.</div>"
    )
    save = W.Button(description="Save the edit log", icon="save", layout=W.Layout(width="auto"))
    save.add_class("vx-app-save")
    report = W.Button(description="Write the report", icon="file", layout=W.Layout(width="auto"))
    report.add_class("vx-app-report")
    status = W.HTML()
    status.add_class("vx-app-status")

    def run(action: str, write: Callable[[], object], done: Callable[[], str], path: Path, label: str) -> None:
        try:
            write()
            link = download_link(path, label)
        except (OSError, ExplorerError) as exc:
            status.value = f"<span class='vx-status-error'>{action}: {esc(str(exc))}</span>"
            return
        status.value = f"<span class='vx-status-ok'>{esc(done())}</span> {link}"

    written: set[Path] = set()  # files this page wrote: it may replace those, and nothing else

    def write_once(path: Path, write: Callable[[bool], object]) -> None:
        write(path in written)
        written.add(path)

    save.on_click(lambda _: run("Not saved", lambda: write_once(log_path, lambda again: explorer.study.save(
        log_path, overwrite=again)), lambda: f"Saved {len(explorer.study.edits)} edit(s).", log_path,
        "Download the edit log"))
    report.on_click(lambda _: run("No report", lambda: write_once(report_path, lambda again: explorer.study.report(
        report_path, overwrite=again)), lambda: "Wrote the report.", report_path, "Download the report"))
    actions = W.HBox([save, report, status], layout=W.Layout(flex_flow="row wrap", align_items="center"))
    actions.add_class("vx-app-actions")
    page = W.VBox([title, actions, explorer])
    page.add_class("vx-app")
    page.explorer = explorer  # type: ignore[attr-defined]
    page.review_files = (log_path, report_path)  # type: ignore[attr-defined]
    page.actions = actions  # type: ignore[attr-defined]
    return page
