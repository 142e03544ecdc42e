"""The tab of random-factor and repeated-measures designs ("Strata and components") in a real
front end: JupyterLab in headless Chromium, the file browser open, at 800 and 1,100 px.

For an invented measurement study (parts x operators, both random, one part left out) the
tab opens and shows the expected mean squares with the error term of each F ("tested
against"), the variance-component chart (unedited beside current), the components table
and the measurement-system table; for an invented between x within repeated-measures
study it shows the per-subject profile chart and the sphericity tests. At each width no
element inside the explorer is wider than its own box, and screenshots of the tab go to
``artifacts/`` (``mixed-<study>-<width>.png``).
"""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest
from conftest import ARTIFACTS, KERNEL_IDLE_JS, TOKEN
from test_layout_browser import OVERFLOW_JS

pytestmark = pytest.mark.browser

TAB = "Strata and components"
WIDTHS = (800, 1100)

GAUGE = r'''
import numpy as np, pandas as pd, explorer as ex
rng = np.random.default_rng(1)  # invented measurement study: 8 parts x 3 operators x 2 repeats
p_eff, o_eff = rng.normal(scale=2.0, size=8), rng.normal(scale=0.4, size=3)
rows = [(f"P{p}", f"O{o}", 20 + p_eff[p] + o_eff[o] + rng.normal(scale=0.3))
        for p in range(8) for o in range(3) for _ in range(2)]
study = ex.Study(pd.DataFrame(rows, columns=["part", "operator", "diameter_mm"]), "diameter_mm",
                 ["part", "operator"], random=["part", "operator"], units="mm")
study.drop_unit("part", "P5", reason="invented: part chipped before the third operator")
e = ex.Explorer(study)
e
'''

REPEATED = r'''
import numpy as np, pandas as pd, explorer as ex
rng = np.random.default_rng(2)  # invented panel study: 12 panellists in 2 groups, 4 sessions each
rows = [(f"s{k:02d}", f"g{k % 2}", f"t{t}", 10 + 0.5 * t + 0.8 * (k % 2) + u + rng.normal(scale=0.5))
        for k, u in enumerate(rng.normal(size=12)) for t in range(4)]
study = ex.Study(pd.DataFrame(rows, columns=["panellist", "group", "session", "score"]), "score",
                 ["group", "session"], subject="panellist", within=["session"])
e = ex.Explorer(study)
e
'''


def _notebook(folder: Path, name: str, cell: str) -> str:
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(cell.strip())])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nbformat.write(nb, folder / f"{name}.ipynb")
    return f"{name}.ipynb"


def _open_tab(page, base: str, notebook: str) -> object:
    from playwright.sync_api import expect

    page.set_viewport_size({"width": WIDTHS[0], "height": 1000})
    page.goto(f"{base}/lab/tree/{notebook}?token={TOKEN}&reset")
    page.wait_for_function(KERNEL_IDLE_JS, polling=250)
    page.evaluate("() => { window.jupyterapp.commands.execute('filebrowser:activate'); "
                  "window.jupyterapp.commands.execute('notebook:run-all-cells'); }")  # fire, don't await
    expect(page.locator(".vx-explorer .vx-dcard")).to_be_visible()
    labels = page.locator(".vx-explorer .lm-TabBar-tab .lm-TabBar-tabLabel").all_inner_texts()
    assert TAB in labels, f"no {TAB!r} tab; tabs are {labels}"
    page.locator(".vx-explorer .lm-TabBar-tab").nth(labels.index(TAB)).click()
    expect(page.locator(".vx-explorer .lm-TabBar-tab.lm-mod-current")).to_contain_text(TAB)
    return page.locator(".vx-explorer")


def _shows(explorer, text: str) -> None:
    """The text is rendered (innerText: what is on screen, not the hidden tabs)."""
    from playwright.sync_api import expect

    expect(explorer).to_contain_text(text, use_inner_text=True)


def _fits(page, name: str) -> dict[str, list[str]]:
    """Overflow check and a screenshot of the open tab at each width."""
    problems: dict[str, list[str]] = {}
    ARTIFACTS.mkdir(exist_ok=True)
    for width in WIDTHS:
        page.set_viewport_size({"width": width, "height": 1000})
        page.wait_for_function(KERNEL_IDLE_JS, polling=250)
        page.wait_for_timeout(800)  # charts re-measure their container after a resize
        found = page.evaluate(OVERFLOW_JS)
        if found:
            problems[f"{name} {width}px"] = found
        height = page.evaluate("() => document.querySelector('.vx-explorer').scrollHeight")
        page.set_viewport_size({"width": width, "height": min(int(height) + 700, 16000)})
        page.locator(".vx-explorer").scroll_into_view_if_needed()
        page.wait_for_timeout(400)
        page.locator(".vx-explorer").screenshot(path=str(ARTIFACTS / f"mixed-{name}-{width}.png"))
        box = page.locator(".vx-explorer").bounding_box()
        print(f"\n[mixed] {name} at {width}px: explorer {box['width']:.0f} px wide")
    return problems


def test_strata_tab_of_a_measurement_study(lab, page):
    from playwright.sync_api import expect

    base, folder = lab
    tab = _open_tab(page, base, _notebook(folder, "gauge", GAUGE))
    _shows(tab, "Expected mean squares and error terms")
    _shows(tab, "tested against")
    _shows(tab, "σ² + 2 σ²[part × operator] + 14 σ²[operator]")  # 7 parts x 2 repeats after the edit
    _shows(tab, "part × operator")
    _shows(tab, "Variance components, unedited and current")
    bars = page.locator(".vx-chart-variance_components .mark-rect path")
    expect(bars.and_(page.locator('[aria-label*="source: part; view: current view"]'))).to_be_visible()
    _shows(tab, "Measurement system (two random factors)")
    _shows(tab, "repeatability")
    _shows(tab, "number of distinct categories")
    expect(page.locator(".vx-explorer .vx-dcard")).to_contain_text("variance component")
    problems = _fits(page, "gauge")
    assert not problems, "elements wider than their box:\n" + "\n".join(
        f"{k}: {v}" for k, vs in problems.items() for v in vs[:8])


def test_strata_tab_of_a_repeated_measures_study(lab, page):
    from playwright.sync_api import expect

    base, folder = lab
    tab = _open_tab(page, base, _notebook(folder, "panel", REPEATED))
    _shows(tab, "tested against")
    _shows(tab, "panellist (within group)")
    _shows(tab, "Each subject across the within levels")
    expect(page.locator(".vx-chart-profiles .mark-line path").first).to_be_visible()
    _shows(tab, "Sphericity, epsilons and multivariate tests")
    _shows(tab, "Sphericity of the within-subject terms (Mauchly)")
    _shows(tab, "Within-subject F tests with epsilon-corrected df")
    expect(page.locator(".vx-explorer .vx-dcard")).to_contain_text("against panellist (within group)")
    problems = _fits(page, "repeated")
    assert not problems, "elements wider than their box:\n" + "\n".join(
        f"{k}: {v}" for k, vs in problems.items() for v in vs[:8])
