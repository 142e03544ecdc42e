"""A colleague's study file in the explorer, in JupyterLab with headless Chromium: uploaded through
the tab "Colleague's study", compared with the open study, and one of their edits adopted.

At 1,100 px with the file browser open nothing in the panel is wider than its box; screenshots
go to ``artifacts/``.
"""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest
from conftest import ARTIFACTS, KERNEL_IDLE_JS, TOKEN

import explorer as ex

pytestmark = pytest.mark.browser

DATA = Path(__file__).resolve().parents[2] / "data" / "coating_thickness.csv"
KW = {"response": "thickness_um", "factors": "nozzle", "id_column": "panel"}

CELL = r'''
import shutil, explorer as ex
shutil.copy({data!r}, "coating_thickness.csv")
study = ex.Study("coating_thickness.csv", response="thickness_um", factors="nozzle", id_column="panel")
study.drop(["P1007"], reason="gauge slip, line log 14 March")
study.drop(["P1040"], reason="scratched before measuring")
e = ex.Explorer(study)
e
'''

OVERFLOW_JS = """() => {
  const root = document.querySelector('.vx-colleague');
  const out = [];
  for (const el of [root, ...root.querySelectorAll('*')]) {
    if (!(el instanceof HTMLElement)) continue;
    const cs = getComputedStyle(el);
    if (cs.display === 'none' || cs.display === 'inline' || el.clientWidth === 0) continue;
    if (el.scrollWidth > el.clientWidth + 1)
      out.push(`${el.tagName.toLowerCase()}.${String(el.className).split(/\\s+/).slice(0, 2).join('.')} `
               + `${el.scrollWidth} > ${el.clientWidth}: ${(el.innerText || '').slice(0, 50)}`);
  }
  return out;
}"""


def _colleague_file(folder: Path) -> Path:
    theirs = ex.Study(DATA, **KW)
    theirs.drop(["P1007"], reason="reading below the gauge's range")
    theirs.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="one supplier, one nozzle design")
    return theirs.save(folder / "colleague.study.json")


def test_upload_compare_and_adopt_a_colleagues_edit(lab, page, tmp_path):
    from playwright.sync_api import expect

    base, folder = lab
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(CELL.format(data=str(DATA)).strip())])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nbformat.write(nb, folder / "colleague.ipynb")
    upload = _colleague_file(tmp_path)  # on the reader's machine, not in the server's folder
    page.set_viewport_size({"width": 1100, "height": 1000})
    page.goto(f"{base}/lab/tree/colleague.ipynb?token={TOKEN}&reset")
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.evaluate("() => { window.jupyterapp.commands.execute('filebrowser:activate'); "
                  "window.jupyterapp.commands.execute('notebook:run-all-cells'); }")  # fire, don't await
    card = page.locator(".vx-explorer .vx-dcard")
    expect(card).to_contain_text("2 edit(s) in effect")
    page.locator(".vx-explorer .lm-TabBar-tab", has_text="Colleague's study").click()
    button = page.locator(".vx-colleague-upload")
    expect(button).to_be_visible()
    with page.expect_file_chooser() as chooser:  # the upload button opens the browser's file dialog
        button.click()
    chooser.value.set_files(str(upload))
    result = page.locator(".vx-colleague-result")
    expect(result).to_contain_text("The two edit logs")
    expect(result).to_contain_text("one supplier, one nozzle design")
    expect(page.locator(".vx-colleague-status")).to_contain_text("Loaded colleague.study.json")
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.wait_for_timeout(500)
    found = page.evaluate(OVERFLOW_JS)
    assert not found, "elements of the panel wider than their box:\n" + "\n".join(found)
    ARTIFACTS.mkdir(exist_ok=True)
    page.locator(".vx-colleague").screenshot(path=str(ARTIFACTS / "colleague-1100-loaded.png"))
    page.locator(".vx-colleague-adopt-button").first.click()
    expect(page.locator(".vx-colleague-status")).to_contain_text("Adopted from colleague.study.json")
    expect(card).to_contain_text("3 edit(s) in effect")
    expect(page.locator(".vx-colleague-adopt-button")).to_have_count(0)  # nothing of theirs left to adopt
    page.locator(".vx-colleague").screenshot(path=str(ARTIFACTS / "colleague-1100-adopted.png"))
