"""Fixtures for the browser tests: a JupyterLab server on 127.0.0.1 and headless Debian Chromium.

The server gets a temporary root, HOME and settings folder and a known token; the browser
may reach only the loopback address. Tests skip, saying why, only when no Chromium (or no
playwright) can be found.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from pathlib import Path

import pytest

TOKEN = "explorer-e2e"
ARTIFACTS = Path(__file__).resolve().parents[2] / "artifacts"
CHROME_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync"]
KERNEL_IDLE_JS = """() => {
  const w = window.jupyterapp && window.jupyterapp.shell.currentWidget;
  const k = w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel;
  return !!k && k.connectionStatus === 'connected' && k.status === 'idle';
}"""


def chromium_path() -> str | None:
    return os.environ.get("CHROMIUM") or shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.fixture(scope="module")
def browser_ready() -> str:
    path = chromium_path()
    if not path:
        pytest.skip("browser test skipped: no Chromium found (install Debian's chromium: apt-get install chromium, "
                    "or set CHROMIUM=/path/to/chromium)")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        pytest.skip("browser test skipped: python playwright is not installed (pip install -e '.[test]')")
    return path


@pytest.fixture(scope="module")
def lab(tmp_path_factory: pytest.TempPathFactory, browser_ready: str) -> Iterator[tuple[str, Path]]:
    """One JupyterLab server per test module; yields its base URL and notebook folder."""
    root = tmp_path_factory.mktemp("lab")
    (root / "nb").mkdir()
    news = root / "settings" / "@jupyterlab" / "apputils-extension"
    news.mkdir(parents=True)
    (news / "notification.jupyterlab-settings").write_text('{"fetchNews": "false"}')
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    log = open(root / "jupyter.log", "w")  # noqa: SIM115  (closed after the server stops)
    proc = subprocess.Popen(
        [sys.executable, "-m", "jupyterlab", "--no-browser", "--allow-root", "--ip=127.0.0.1", f"--port={port}",
         f"--IdentityProvider.token={TOKEN}", f"--ServerApp.root_dir={root / 'nb'}",
         f"--LabApp.user_settings_dir={root / 'settings'}", f"--LabApp.workspaces_dir={root / 'ws'}",
         "--LabApp.news_url=None", "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
         "--LabApp.extension_manager=readonly", "--LabApp.expose_app_in_browser=True"],
        env={**os.environ, "HOME": str(root), "JUPYTER_PLATFORM_DIRS": "1", "TMPDIR": str(root)},
        stdout=log, stderr=subprocess.STDOUT)
    base, deadline = f"http://127.0.0.1:{port}", time.time() + 120
    while True:
        try:
            urllib.request.urlopen(f"{base}/api/status?token={TOKEN}", timeout=2)
            break
        except OSError:
            if proc.poll() is not None or time.time() > deadline:
                proc.kill()
                raise RuntimeError(f"jupyter lab did not start; see {root / 'jupyter.log'}") from None
            time.sleep(0.25)
    yield base, root / "nb"
    try:  # a graceful shutdown also stops the kernels
        urllib.request.urlopen(urllib.request.Request(f"{base}/api/shutdown?token={TOKEN}", method="POST"), timeout=5)
        proc.wait(timeout=20)
    except Exception:  # noqa: BLE001  (any failure: stop it the hard way)
        proc.kill()
        proc.wait(timeout=10)
    log.close()


@pytest.fixture
def page(tmp_path: Path, browser_ready: str) -> Iterator[object]:
    from playwright.sync_api import expect, sync_playwright

    expect.set_options(timeout=150_000)  # kernel start + chart runtime on a busy 2-core machine
    with sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(
            str(tmp_path / "profile"), executable_path=browser_ready, args=CHROME_ARGS, headless=True,
            viewport={"width": 1700, "height": 1700})
        ctx.route("**/*", lambda r: r.continue_() if r.request.url.startswith(
            ("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")) else r.abort())  # loopback only
        pg = ctx.pages[0] if ctx.pages else ctx.new_page()
        pg.set_default_timeout(150_000)
        yield pg
        ctx.close()
