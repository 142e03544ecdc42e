"""App mode in a real browser: Voila on 127.0.0.1 serves the explorer for a saved study.

The page shows the saved state, takes one edit through its controls, redraws the table,
and saves the reviewed log. Drives Debian's chromium with Playwright (no browser download).
"""

from __future__ import annotations

import base64
import os
import re
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
from handoff_support import CHROME_ARGS, chromium_path

import explorer as ex
from explorer.engine.tables import fmt

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "coating_thickness.csv"
REASON_6 = "P1007 gauge slip, see the line log"
REASON_70 = "P1071 recoated by mistake"


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    pytest.importorskip("voila")
    if chromium_path() is None:
        pytest.skip("chromium is not installed (apt-get install chromium)")
    root = tmp_path_factory.mktemp("app")
    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6], reason=REASON_6)
    study.drop([70], reason=REASON_70)
    saved = study.save(root / "coating.study.json")
    port = _free_port()
    log = open(root / "voila.log", "w")
    proc = subprocess.Popen(
        [sys.executable, "-m", "explorer", "app", str(saved), "--data", str(DEMO), "--no-browser", "--port", str(port)],
        env={**os.environ, "HOME": str(root), "JUPYTER_PLATFORM_DIRS": "1"}, cwd=root,
        stdout=log, stderr=subprocess.STDOUT, start_new_session=True)  # own group: voila is its child
    base = f"http://127.0.0.1:{port}"
    deadline = time.time() + 90
    while True:
        try:
            urllib.request.urlopen(f"{base}/voila/static/no-such-file", timeout=2)
            break
        except urllib.error.HTTPError:
            break  # the server answers
        except OSError:
            if proc.poll() is not None or time.time() > deadline:
                os.killpg(proc.pid, signal.SIGKILL)
                raise RuntimeError((root / "voila.log").read_text()) from None
            time.sleep(0.3)
    token = re.search(r"\?token=([A-Za-z0-9_-]+)", (root / "voila.log").read_text()).group(1)
    yield f"{base}/?token={token}", saved, study
    proc.terminate()  # the command passes SIGTERM on to Voila and removes its page
    try:
        proc.wait(timeout=30)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


def test_app_page_buttons_save_the_review_and_write_the_report(tmp_path):
    """Without a browser: the page's buttons write the reviewed log and the report beside the original."""
    pytest.importorskip("ipywidgets")
    from explorer.app import app_page, review_paths

    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6], reason=REASON_6)
    saved = study.save(tmp_path / "coating.study.json")
    page = app_page(saved, DEMO)
    page.explorer.study.drop([70], reason=REASON_70)
    assert page.children[1] is page.actions  # the buttons are above the explorer
    save, report, status = page.actions.children
    save.click()
    assert "Saved 2 edit(s)" in status.value
    log_path, report_path = page.review_files
    link = re.search(r"<a class='vx-app-download' download='([^']+)' href='data:application/json;base64,([^']+)'",
                     status.value)
    assert link and link.group(1) == log_path.name and str(tmp_path) not in status.value
    assert base64.b64decode(link.group(2)) == log_path.read_bytes()  # the link holds the saved file
    assert log_path.name == "coating-reviewed.study.json"
    assert ex.Study.load(log_path, DEMO).results.partition == page.explorer.study.results.partition
    assert ex.Study.load(saved, DEMO).edits[-1].reason == REASON_6  # the sender's file is untouched
    report.click()
    assert report_path.exists() and REASON_70 in report_path.read_text(encoding="utf-8")
    assert f"download='{report_path.name}' href='data:text/html;base64," in status.value
    page.explorer.study.undo()
    save.click()  # the page replaces its own file
    report.click()
    assert "Wrote the report" in status.value and len(ex.Study.load(log_path, DEMO).edits) == 1
    # a second page on the same study file never replaces the first review
    second = app_page(saved, DEMO)
    assert second.review_files == review_paths(saved) != page.review_files
    assert second.review_files[0].name == "coating-reviewed-2.study.json"


@pytest.mark.browser
def test_app_shows_saved_state_takes_an_edit_and_saves(served, tmp_path):
    from playwright.sync_api import expect, sync_playwright

    expect.set_options(timeout=90_000)
    base, saved, study = served
    restored = ex.Study.load(saved, DEMO)
    restored.restore([70], reason="")
    f_saved, f_after = fmt(study.results.statistic()), fmt(restored.results.statistic())
    assert f_saved != f_after
    with sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(str(tmp_path / "profile"), executable_path=chromium_path(),
                                                   args=CHROME_ARGS, headless=True,
                                                   viewport={"width": 1400, "height": 1000})
        ctx.route("**/*", lambda r: r.continue_() if r.request.url.startswith(
            ("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")) else r.abort())  # loopback only
        page = ctx.pages[0] if ctx.pages else ctx.new_page()
        page.set_default_timeout(90_000)
        page.goto(base)
        header = page.locator(".vx-header")
        table = page.locator(".vx-partition").first
        # The saved state: two rows left out, with their reasons, and the current F.
        expect(header).to_contain_text("112 rows in analysis, 2 left out")
        expect(table).to_contain_text(f_saved)
        left_out = page.locator(".vx-left-out select")
        expect(left_out.locator("option")).to_have_count(2)
        expect(left_out).to_contain_text(REASON_70)
        # One edit through the page: restore row 70 from the list of rows left out.
        left_out.select_option(label=f"row 70: {REASON_70}")
        page.get_by_role("button", name="Restore chosen").click()
        expect(header).to_contain_text("113 rows in analysis, 1 left out")
        expect(table).to_contain_text(f_after)
        # The reviewed log is saved beside the original and replays to the same state.
        save_button = page.get_by_role("button", name="Save the edit log")
        assert save_button.bounding_box()["y"] < header.bounding_box()["y"]  # the buttons come first
        save_button.click()
        expect(page.locator(".vx-app-status")).to_contain_text("Saved 3 edit(s)")
        # The file is offered as a download in the browser, not as a path on the server.
        link = page.locator(".vx-app-status a.vx-app-download")
        expect(link).to_have_attribute("download", "coating-reviewed.study.json")
        assert str(saved.parent) not in page.locator(".vx-app-status").inner_text()
        with page.expect_download() as got:
            link.click()
        fetched = Path(got.value.path()).read_bytes()
        assert fetched == saved.with_name("coating-reviewed.study.json").read_bytes()
        page.screenshot(path=str(tmp_path / "app.png"), full_page=True)
        ctx.close()
    reviewed = saved.with_name("coating-reviewed.study.json")
    again = ex.Study.load(reviewed, DEMO)
    assert again.results.partition == restored.results.partition
    assert [e.reason for e in again.edits][:2] == [REASON_6, REASON_70]
