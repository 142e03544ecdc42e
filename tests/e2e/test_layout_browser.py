"""The explorer fits the screen it is opened on: JupyterLab with its file browser open, at 800,
1,100 and 1,500 px wide, in headless Chromium.

At each width, on the main view and on every tab, no element inside the explorer is wider
than its own box (``scrollWidth <= clientWidth``: nothing clipped, nothing scrolls sideways),
and a screenshot of the whole explorer goes to ``artifacts/``.
"""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest
from conftest import ARTIFACTS, KERNEL_IDLE_JS, TOKEN

pytestmark = pytest.mark.browser

WIDTHS = (800, 1100, 1500)

# The demo data with the kinds of edit a reviewer meets: a row left out, a row moved to
# another level, two levels merged; units on the response.
CELL = r'''
import shutil, explorer as ex
shutil.copy({data!r}, "coating_thickness.csv")
study = ex.Study("coating_thickness.csv", response="thickness_um", factors="nozzle", id_column="panel", units="µm")
study.drop(["P1007"], reason="gauge slip, see the line log")
study.reassign("P1040", "nozzle", "N1", reason="line log says this panel was sprayed through N1")
study.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="N2 and N3 come from one supplier")
e = ex.Explorer(study)
e
'''

# Every element of the explorer (and of its output area) whose content is wider than its box.
OVERFLOW_JS = """() => {
  const root = document.querySelector('.vx-explorer');
  const out = [];
  for (const el of [root, ...root.querySelectorAll('*')]) {
    if (!(el instanceof HTMLElement)) continue;
    const cs = getComputedStyle(el);
    if (cs.display === 'none' || cs.display === 'inline' || el.clientWidth === 0) continue;
    if (el.offsetParent === null && cs.position !== 'fixed') continue;   // in a hidden tab
    if (el.scrollWidth > el.clientWidth + 1) {
      const cls = (el.className && el.className.baseVal === undefined ? el.className : '') || '';
      out.push(`${el.tagName.toLowerCase()}.${String(cls).trim().split(/\\s+/).slice(0, 3).join('.')}`
               + ` scrollWidth ${el.scrollWidth} > clientWidth ${el.clientWidth}: `
               + (el.innerText || '').slice(0, 60).replace(/\\s+/g, ' '));
    }
  }
  const area = root.closest('.jp-OutputArea-output') || root.parentElement;
  if (area.scrollWidth > area.clientWidth + 1) out.push(`output area scrollWidth ${area.scrollWidth} > ${area.clientWidth}`);
  return out;
}"""


def _notebook(folder: Path) -> str:
    data = Path(__file__).resolve().parents[2] / "data" / "coating_thickness.csv"
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(CELL.format(data=str(data)).strip())])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nbformat.write(nb, folder / "layout.ipynb")
    return "layout.ipynb"


def _settle(page) -> None:
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.wait_for_timeout(700)  # charts re-measure their container after a resize


def _shot(page, width: int, name: str) -> None:
    """The whole explorer: the window is made tall enough (same width) that nothing scrolls away."""
    ARTIFACTS.mkdir(exist_ok=True)
    height = page.evaluate("() => document.querySelector('.vx-explorer').scrollHeight")
    page.set_viewport_size({"width": width, "height": min(int(height) + 700, 16000)})
    page.locator(".vx-explorer").scroll_into_view_if_needed()
    page.wait_for_timeout(300)
    page.locator(".vx-explorer").screenshot(path=str(ARTIFACTS / name))
    page.set_viewport_size({"width": width, "height": 1000})


def _tab_names(page) -> list[str]:
    return page.locator(".vx-explorer .lm-TabBar-tab .lm-TabBar-tabLabel").all_inner_texts()


def test_explorer_fits_800_1100_1500_with_file_browser_open(lab, page):
    from playwright.sync_api import expect

    base, folder = lab
    page.set_viewport_size({"width": WIDTHS[0], "height": 1000})
    page.goto(f"{base}/lab/tree/{_notebook(folder)}?token={TOKEN}&reset")
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.evaluate("() => { window.jupyterapp.commands.execute('filebrowser:activate'); "
                  "window.jupyterapp.commands.execute('notebook:run-all-cells'); }")  # fire, don't await
    expect(page.locator(".vx-chart-observations .mark-symbol path").first).to_be_visible()
    assert page.evaluate("() => !window.jupyterapp.shell.leftCollapsed"), "the file browser should be open"
    tabs = _tab_names(page)
    assert tabs, "the explorer shows its tabs"
    problems: dict[str, list[str]] = {}
    for width in WIDTHS:
        page.set_viewport_size({"width": width, "height": 1000})
        for i, tab in enumerate([None, *tabs]):
            if tab is not None:
                page.locator(".vx-explorer .lm-TabBar-tab").nth(i - 1).click()
            _settle(page)
            where = f"{width}px/{tab or 'main'}"
            found = page.evaluate(OVERFLOW_JS)
            if found:
                problems[where] = found
            slug = (tab or "main").lower().replace(" ", "-")
            _shot(page, width, f"layout-{width}-{slug}.png")
        box = page.locator(".vx-explorer").bounding_box()
        print(f"\n[layout] {width}px window: explorer {box['width']:.0f} px wide")
    assert not problems, "elements wider than their box:\n" + "\n".join(
        f"{k}: {v}" for k, vs in problems.items() for v in vs[:8])


def test_decision_card_is_in_the_first_screen_at_1100(lab, page):
    """At 1,100 x 800 px with the file browser open, the decision card is wholly in the window the
    notebook opens in, nothing in it overflows, and a caution line opens to its full text."""
    from playwright.sync_api import expect

    base, folder = lab
    name = _notebook(folder).replace("layout", "card")
    (folder / "layout.ipynb").rename(folder / name)
    page.set_viewport_size({"width": 1100, "height": 800})
    page.goto(f"{base}/lab/tree/{name}?token={TOKEN}&reset")
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.evaluate("() => { window.jupyterapp.commands.execute('filebrowser:activate'); "
                  "window.jupyterapp.commands.execute('notebook:run-all-cells'); }")  # fire, don't await
    card = page.locator(".vx-explorer .vx-dcard")
    expect(card).to_be_visible()
    expect(page.locator(".vx-chart-observations .mark-symbol path").first).to_be_visible()
    _settle(page)
    page.evaluate("() => { const s = document.querySelector('.jp-WindowedPanel-outer, .jp-Notebook'); "
                  "if (s) s.scrollTop = 0; }")  # the notebook as it opens: top of the first cell
    page.wait_for_timeout(300)
    box = card.bounding_box()
    print(f"\n[card] 1100x800 window: card at y {box['y']:.0f}-{box['y'] + box['height']:.0f} px, "
          f"{box['width']:.0f} px wide")
    assert box["y"] >= 0 and box["y"] + box["height"] <= 800, f"the card is not wholly in the first screen: {box}"
    expect(card).to_contain_text("The 3 edit(s) in effect change the decision.")
    expect(card).to_contain_text("alternative analyses examined")
    found = [p for p in page.evaluate(OVERFLOW_JS) if "vx-dcard" in p]
    assert not found, "card elements wider than their box:\n" + "\n".join(found)
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "card-1100-first-screen.png"))
    card.locator("summary").first.click()
    expect(card.locator("details").first).to_contain_text("An observation is not an outlier because it is inconvenient")
    card.screenshot(path=str(ARTIFACTS / "card-1100-caution-open.png"))
