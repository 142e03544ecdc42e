"""Builders for the notebooks the kit ships: the demo and the app page for colleagues.

Importing this module has no side effects; it writes files only when asked
(``notebooks/build_notebooks.py`` regenerates ``notebooks/demo.ipynb``, and the command
line's ``app`` writes an app page into a temporary folder). ``nbformat`` comes with the
``widget`` extra and is imported only when a notebook is built.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

__all__ = ["DEMO_CELLS", "app_cells", "demo_notebook", "app_notebook", "write_notebook"]

#: (kind, source) of each demo cell; paths are relative to the notebooks/ folder.
DEMO_CELLS: tuple[tuple[str, str], ...] = (
    ("markdown", """\
# Coating line: do the four nozzles lay down the same film?

The data are **invented** (see `data/README.md`): 114 steel panels sprayed through four
nozzles, film thickness in micrometres. Two readings look suspect (panels P1007 and
P1071), and nozzles N2 and N3 may come from one supplier. This notebook
walks the whole job: load, explore, find how fragile the decision is, edit with reasons,
save, and hand off. Read the cautions in the README before leaving data out."""),
    ("code", """\
import explorer as ex

study = ex.Study("../data/coating_thickness.csv", response="thickness_um", factors="nozzle",
                 id_column="panel")  # rows are named by panel id
study.results"""),
    ("markdown", """\
## Explore

Click a point to pick it, leave it out with a reason, regroup levels, and watch the
results move beside the unedited baseline. Edits made in code below show up here too."""),
    ("code", """\
ex.Explorer(study)"""),
    ("markdown", """\
## How fragile is the decision?

Which panels, if left out, would flip it? Which regroupings of nozzles would? Each scan
adds the alternatives it examined to the study's disclosure count."""),
    ("code", """\
study.flip_finder()"""),
    ("code", """\
study.regroup_scan(moves=False)"""),
    ("markdown", """\
## Edit, with reasons

Leave out what the line log documents, and pool the two nozzles from one supplier. Each
edit is logged with its reason and time; `study.baseline` keeps the unedited results, and
the explorer above redraws."""),
    ("code", """\
study.drop(["P1007"], reason="gauge slip, see the line log")
study.drop(["P1071"], reason="recoated by mistake, see the rework sheet")
study.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="N2 and N3 come from one supplier")
print("baseline:", study.baseline_decision.sentence())
print("current: ", study.decision.sentence())
study.battery()"""),
    ("markdown", """\
## Save and hand off

The study file holds the model, the edit log with reasons and times, and every row id with a
short digest of its values (not the values); the report opens in any browser without a
network and shows the values it analysed; the replay code rebuilds this state from the
original file. Files are written whole or not at all, and an existing file is replaced only
with `overwrite=True` (here: the files of an earlier run of this notebook)."""),
    ("code", """\
study.save("coating.study.json", overwrite=True)
study.report("coating-report.html", scenario="Coating line: do the four nozzles lay down the same film?",
             overwrite=True)
print(study.disclosure.sentence())
print(study.to_code())"""),
)


def app_cells(study_file: str | Path, data: str | Path) -> tuple[tuple[str, str], ...]:
    """Cells of the app page: load the saved study on its data and show the explorer."""
    return (
        ("code", f"""\
from explorer.app import app_page

app_page({str(study_file)!r}, {str(data)!r})"""),
    )


def _notebook(cells: tuple[tuple[str, str], ...], title: str) -> Any:
    import nbformat

    make = {"markdown": nbformat.v4.new_markdown_cell, "code": nbformat.v4.new_code_cell}
    nb = nbformat.v4.new_notebook(cells=[make[kind](src) for kind, src in cells])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    nb.metadata["title"] = title
    for i, cell in enumerate(nb.cells):
        cell["id"] = f"cell-{i}"  # stable ids: rebuilding gives the same file
    return nb


def demo_notebook() -> Any:
    """The demo notebook (an ``nbformat`` node)."""
    return _notebook(DEMO_CELLS, "variance explorer demo")


def app_notebook(study_file: str | Path, data: str | Path) -> Any:
    """The app page for a saved study, served with Voila by ``variance-explorer app``."""
    return _notebook(app_cells(study_file, data), "variance explorer")


def write_notebook(nb: Any, path: str | Path) -> Path:
    """Write ``nb`` to ``path`` (nbformat 4) and return the path."""
    import nbformat

    p = Path(path)
    nbformat.write(nb, str(p))
    return p
