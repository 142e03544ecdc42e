"""Serve the app page with Voila, open only to this machine and to whoever holds the token.

``python -m explorer.app_server PAGE.ipynb [Voila options]`` is what ``variance-explorer
app`` runs. It is Voila with four locks:

* **token**: every page and kernel request needs the random token the command made
  (``?token=...`` once; the browser then keeps a cookie). The token reaches this
  process through the environment variable :data:`TOKEN_ENV` (not the command line,
  which other local users can read) and is removed from the environment before any
  kernel starts. An empty value turns the token off (``--no-token``).
* **Host check** (DNS rebinding): a request whose ``Host`` is not a loopback address,
  ``localhost`` or the address the server is bound to gets 403, on every route,
  static files included. Voila itself switches jupyter_server's check off.
* **same-origin websockets**: a websocket whose ``Origin`` is not ``http://<Host>``
  gets 403.
* **idle kernels culled**: each page load starts a kernel; one with no open page for
  ``cull_idle_timeout`` seconds (default :data:`IDLE_SECONDS`) is shut down, checked
  every :data:`CULL_EVERY_SECONDS` seconds.
"""

from __future__ import annotations

import ipaddress
import os
import sys
import tempfile
import webbrowser
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit

import tornado.web
import tornado.websocket
from voila.app import Voila

__all__ = ["GuardedVoila", "TOKEN_ENV", "IDLE_SECONDS", "host_allowed", "origin_allowed", "main"]

TOKEN_ENV = "VARIANCE_EXPLORER_APP_TOKEN"
IDLE_SECONDS = 900
CULL_EVERY_SECONDS = 60


def _host_name(host: str) -> str:
    """The name part of a ``Host`` header (port and IPv6 brackets taken off), lower case."""
    host = host.strip().lower()
    if host.startswith("["):
        return host[1:].split("]", 1)[0]
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


def host_allowed(host: str | None, bound: str) -> bool:
    """True for ``localhost``, a loopback address or the bound address (with any port)."""
    if not host:
        return False
    name = _host_name(host)
    if name in ("localhost", _host_name(bound)):
        return True
    try:
        return ipaddress.ip_address(name).is_loopback
    except ValueError:
        return False


def origin_allowed(origin: str | None, host: str | None) -> bool:
    """A websocket's ``Origin`` must be this very server (scheme http, same host and port)."""
    if origin is None:
        return True  # not a browser; the token still applies
    parts = urlsplit(origin)
    return parts.scheme in ("http", "https") and bool(host) and parts.netloc.lower() == str(host).lower()


class _Guard:
    """Mixed into every handler class the app serves: Host check on every request, Origin on websockets."""

    request: Any
    settings: dict

    def prepare(self, *args: Any, **kwargs: Any) -> Any:
        if not host_allowed(self.request.host, self.settings.get("vx_bound_ip", "127.0.0.1")):
            raise tornado.web.HTTPError(403, "this server answers only requests to its own address")
        return super().prepare(*args, **kwargs)  # type: ignore[misc]

    def check_origin(self, origin: str | None = None) -> bool:
        if isinstance(self, tornado.websocket.WebSocketHandler) and not origin_allowed(
                origin, self.request.headers.get("Host")):
            return False
        parent = getattr(super(), "check_origin", None)
        if parent is None:
            return True
        return bool(parent(origin) if origin is not None else parent())


def _guarded(handler: type) -> type:
    return type(f"Guarded{handler.__name__}", (_Guard, handler), {})


class GuardedVoila(Voila):
    """Voila with the token, Host, Origin and idle-kernel locks described in the module docstring."""

    def init_settings(self) -> dict:
        token = os.environ.pop(TOKEN_ENV, None)  # kernels started later do not inherit it
        if token is not None:
            self.token = token
        settings = super().init_settings()
        settings["allow_remote_access"] = False
        settings["local_hostnames"] = ["localhost"]
        settings["vx_bound_ip"] = self.ip or "127.0.0.1"
        return settings

    def init_handlers(self) -> list:
        out = []
        for spec in super().init_handlers():
            if isinstance(spec, tuple) and len(spec) >= 2 and isinstance(spec[1], type):
                spec = (spec[0], _guarded(spec[1]), *spec[2:])
            out.append(spec)
        return out

    @property
    def display_url(self) -> str:
        """The address with the token, which Voila logs once it listens (it would print '...' otherwise)."""
        url = self._url(self.ip or "localhost")
        token = getattr(self.identity_provider, "token", "")
        return f"{url}?token={token}" if token else url

    def launch_browser(self) -> None:
        """Open the page through a private redirect file, so the token never shows in a process list."""
        try:
            browser = webbrowser.get(self.browser or None)
        except webbrowser.Error as exc:
            self.log.warning("No web browser found: %s.", exc)
            return
        fd, name = tempfile.mkstemp(suffix=".html", dir=self.connection_dir)  # mode 0600, removed at stop
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            url = self.display_url.replace("&", "&amp;").replace('"', "&quot;")
            fh.write(f'<!DOCTYPE html><meta http-equiv="refresh" content="0;url={url}"><a href="{url}">open</a>')
        browser.open(Path(name).as_uri(), new=2)


def main(argv: list[str] | None = None) -> None:
    from traitlets.config import Config

    defaults = Config()
    defaults.MappingKernelManager.cull_idle_timeout = IDLE_SECONDS
    defaults.MappingKernelManager.cull_interval = CULL_EVERY_SECONDS
    defaults.MappingKernelManager.cull_connected = False
    # command-line options (e.g. --MappingKernelManager.cull_idle_timeout=60) are applied over these defaults
    GuardedVoila.launch_instance(argv=list(sys.argv[1:] if argv is None else argv), config=defaults)


if __name__ == "__main__":
    main()
