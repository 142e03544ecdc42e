"""The demo notebook: in step with its builder, and it runs top to bottom headless (nbclient)."""

from __future__ import annotations

import importlib
import json
import shutil
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "notebooks" / "demo.ipynb"

nbformat = pytest.importorskip("nbformat")


def test_builder_is_safe_to_import_and_matches_the_committed_notebook(tmp_path, monkeypatch):
    """Importing the builders writes nothing; building gives the committed cells exactly."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(sys, "argv", ["x", str(tmp_path / "victim.ipynb")])
    sys.path.insert(0, str(ROOT / "notebooks"))
    try:
        build = importlib.import_module("build_notebooks")
    finally:
        sys.path.remove(str(ROOT / "notebooks"))
    from explorer.notebooks import demo_notebook

    assert list(tmp_path.iterdir()) == []
    committed = nbformat.read(NOTEBOOK, as_version=4)
    built = demo_notebook()
    assert [(c.cell_type, c.source) for c in committed.cells] == [(c.cell_type, c.source) for c in built.cells]
    out = build.build(tmp_path)
    assert out.read_text(encoding="utf-8") == NOTEBOOK.read_text(encoding="utf-8")


def test_demo_notebook_runs_headless(tmp_path):
    """Executed in a copy of the project layout (notebooks/ beside data/), so nothing is written to the repo."""
    from nbclient import NotebookClient

    (tmp_path / "notebooks").mkdir()
    shutil.copytree(ROOT / "data", tmp_path / "data")
    nb = nbformat.read(NOTEBOOK, as_version=4)
    client = NotebookClient(nb, kernel_name="python3", timeout=240,
                            resources={"metadata": {"path": str(tmp_path / "notebooks")}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", []) if o.output_type == "error"]
    assert errors == []
    saved = json.loads((tmp_path / "notebooks" / "coating.study.json").read_text())
    assert [e["reason"] for e in saved["edits"]][:2] == ["gauge slip, see the line log",
                                                         "recoated by mistake, see the rework sheet"]
    assert [e.get("rows") for e in saved["edits"]][:2] == [["P1007"], ["P1071"]]
    report = (tmp_path / "notebooks" / "coating-report.html").read_text(encoding="utf-8")
    assert "N2 and N3 come from one supplier" in report
    printed = "".join(o.get("text", "") for o in nb.cells[-1].outputs if o.output_type == "stream")
    assert "study.merge_levels('nozzle', ['N2', 'N3'], into='N2+N3'" in printed
    widget_cell = next(c for c in nb.cells if c.source.startswith("ex.Explorer("))
    mimes = {k for o in widget_cell.outputs for k in o.get("data", {})}
    assert "application/vnd.jupyter.widget-view+json" in mimes
