"""App mode lets no one else in: token, Host check, same-origin websockets, idle kernels culled.

Each lock is checked with real HTTP and websocket requests against ``variance-explorer app``
running Voila on 127.0.0.1 (one server for the module, idle kernels culled after 6 s).
"""

from __future__ import annotations

import asyncio
import http.client
import json
import os
import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

import explorer as ex

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "coating_thickness.csv"
IDLE_SECONDS = 6


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _get(port: int, path: str, headers: dict | None = None, timeout: float = 120) -> tuple[int, dict, bytes]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        conn.request("GET", path, headers=headers or {})
        resp = conn.getresponse()
        return resp.status, {k.lower(): v for k, v in resp.getheaders()}, resp.read()
    finally:
        conn.close()


@pytest.fixture(scope="module")
def app(tmp_path_factory):
    pytest.importorskip("voila")
    root = tmp_path_factory.mktemp("app")
    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6], reason="gauge slip")
    saved = study.save(root / "coating.study.json")
    port = _free_port()
    log_path = root / "app.log"
    proc = subprocess.Popen(
        [sys.executable, "-m", "explorer", "app", str(saved), "--data", str(DEMO), "--no-browser", "--port", str(port),
         "--idle-minutes", str(IDLE_SECONDS / 60), "--", "--MappingKernelManager.cull_interval=1"],
        env={**os.environ, "HOME": str(root), "JUPYTER_PLATFORM_DIRS": "1", "PYTHONPATH": str(ROOT)}, cwd=root,
        stdout=open(log_path, "w"), stderr=subprocess.STDOUT, start_new_session=True)
    deadline = time.time() + 180
    while True:
        try:
            if _get(port, "/voila/static/voila.js", timeout=5)[0] == 200:
                break
        except OSError:
            pass
        if proc.poll() is not None or time.time() > deadline:
            os.killpg(proc.pid, signal.SIGKILL)
            raise RuntimeError(log_path.read_text())
        time.sleep(0.5)
    token = re.search(r"\?token=([A-Za-z0-9_-]+)", log_path.read_text()).group(1)
    yield port, token, proc, log_path
    proc.terminate()
    try:
        proc.wait(timeout=30)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


def _open_page(port: int, token: str) -> tuple[str, str]:
    """Load the page with the token; return the session cookie and the page's kernel id."""
    status, headers, body = _get(port, f"/?token={token}")
    assert status == 200, body[:500]
    kernel = re.search(rb'"kernelId":\s*"([0-9a-f-]{36})"', body).group(1).decode()
    return headers["set-cookie"].split(";", 1)[0], kernel


def test_the_token_is_random_and_required(app):
    port, token, _, log_path = app
    assert len(token) >= 40  # 32 random bytes, URL-safe base64
    assert f"http://127.0.0.1:{port}/?token={token}" in log_path.read_text()  # printed for the user
    for path in ("/", "/?token=wrong", "/?token="):
        status, headers, body = _get(port, path)
        assert status in (302, 403) and b"kernelId" not in body, (path, status)
    cookie, kernel = _open_page(port, token)
    assert _get(port, f"/api/kernels/{kernel}", {"Cookie": cookie})[0] == 200
    assert _get(port, f"/api/kernels/{kernel}")[0] == 403  # the kernel API needs the token too


def test_the_token_is_on_no_command_line(app):
    """Command lines are readable by every user of the machine (ps); the token travels in the environment."""
    port, token, proc, _ = app
    _open_page(port, token)
    seen = 0
    for pid in filter(str.isdigit, os.listdir("/proc")):
        try:
            cmdline = Path(f"/proc/{pid}/cmdline").read_bytes()
        except OSError:
            continue
        if b"explorer" in cmdline or b"ipykernel" in cmdline:
            seen += 1
            assert token.encode() not in cmdline
    assert seen >= 3  # the command, the server and at least one kernel


@pytest.mark.parametrize("host", ["evil.example", "evil.example:{port}", "192.0.2.1:{port}", "127.0.0.1.evil.example",
                                  "localhost.evil.example:{port}", ""])
def test_foreign_host_is_refused_on_every_route(app, host):
    """DNS rebinding: a page on another name that resolves to 127.0.0.1 sends its own Host."""
    port, token, _, _ = app
    for path in (f"/?token={token}", "/voila/static/voila.js", f"/api/kernels?token={token}", "/login"):
        status, _, body = _get(port, path, {"Host": host.format(port=port)})
        assert status in (400, 403), (host, path, status)
        assert b"kernelId" not in body


@pytest.mark.parametrize("host", ["localhost:{port}", "127.0.0.1:{port}", "127.0.0.2:{port}"])
def test_own_addresses_are_served(app, host):
    port, _, _, _ = app
    assert _get(port, "/voila/static/voila.js", {"Host": host.format(port=port)})[0] == 200


async def _websocket(port: int, kernel: str, headers: dict) -> str:
    from tornado.httpclient import HTTPClientError, HTTPRequest
    from tornado.websocket import websocket_connect

    request = HTTPRequest(f"ws://127.0.0.1:{port}/api/kernels/{kernel}/channels", headers=headers)
    try:
        conn = await asyncio.wait_for(websocket_connect(request), 60)
    except HTTPClientError as exc:
        return f"refused {exc.code}"
    conn.write_message(json.dumps({
        "header": {"msg_id": "probe", "msg_type": "kernel_info_request", "username": "", "session": "probe",
                   "version": "5.3"},
        "parent_header": {}, "metadata": {}, "content": {}, "channel": "shell", "buffers": [],
    }))
    for _ in range(50):
        msg = await asyncio.wait_for(conn.read_message(), 60)
        if msg is None:
            return "closed"
        if isinstance(msg, str) and '"kernel_info_reply"' in msg:
            conn.close()
            return "open"
    conn.close()
    return "open, no reply"


def test_cross_origin_websocket_is_refused(app):
    port, token, _, _ = app
    cookie, kernel = _open_page(port, token)
    same = {"Cookie": cookie, "Origin": f"http://127.0.0.1:{port}"}

    async def attempts() -> list[str]:
        return list(await asyncio.gather(
            _websocket(port, kernel, {"Cookie": cookie, "Origin": "http://evil.example"}),
            _websocket(port, kernel, {"Cookie": cookie, "Origin": f"http://evil.example:{port}"}),
            _websocket(port, kernel, {"Cookie": cookie, "Origin": "null"}),
            _websocket(port, kernel, {"Origin": f"http://127.0.0.1:{port}"}),  # no token, no cookie
            _websocket(port, kernel, same),
        ))

    results = asyncio.run(attempts())
    assert results[:4] == ["refused 403"] * 4, results
    assert results[4] == "open", results


def test_idle_kernel_is_culled(app):
    """Each page load starts a kernel; with no page open it is shut down after the idle time."""
    port, token, _, _ = app
    cookie, kernel = _open_page(port, token)
    assert _get(port, f"/api/kernels/{kernel}", {"Cookie": cookie})[0] == 200
    deadline = time.time() + 60 + IDLE_SECONDS
    while _get(port, f"/api/kernels/{kernel}", {"Cookie": cookie})[0] == 200:
        assert time.time() < deadline, "the idle kernel is still running"
        time.sleep(1)
    assert _get(port, f"/api/kernels/{kernel}", {"Cookie": cookie})[0] == 404


def test_dry_run_shows_no_token_and_the_locks(capsys, tmp_path):
    pytest.importorskip("voila")
    from explorer.cli import main

    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    saved = study.save(tmp_path / "s.study.json")
    assert main(["app", str(saved), "--data", str(DEMO), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "-m explorer.app_server" in out and "cull_idle_timeout=900" in out and "token" not in out


def test_host_and_origin_rules():
    from explorer.app_server import host_allowed, origin_allowed

    assert host_allowed("127.0.0.1:8866", "127.0.0.1") and host_allowed("localhost", "127.0.0.1")
    assert host_allowed("[::1]:8866", "127.0.0.1") and host_allowed("10.0.0.5:80", "10.0.0.5")
    assert not host_allowed("evil.example:8866", "127.0.0.1") and not host_allowed(None, "127.0.0.1")
    assert not host_allowed("127.0.0.1.nip.example", "127.0.0.1")
    assert origin_allowed("http://127.0.0.1:8866", "127.0.0.1:8866") and origin_allowed(None, "127.0.0.1:8866")
    assert not origin_allowed("http://evil.example", "127.0.0.1:8866")
    assert not origin_allowed("http://127.0.0.1:9999", "127.0.0.1:8866")
