"""The watch page's web server: standard library only, this computer only, a fixed set of answers.

What it guards, and how:

- **Only this computer.** It listens on 127.0.0.1 and nowhere else, and answers only requests
  whose ``Host`` is ``127.0.0.1:PORT`` or ``localhost:PORT`` (a web page elsewhere cannot reach it
  through a name that points here).
- **No path reaches the disk.** The answers are the page, its style and script, the state as
  JSON, and ``files/NAME`` where NAME is exactly one of the files the last run of the report wrote
  (read back from simkit's own output folder, without following links).  Anything else, ``..``
  included, is 404; any method but GET and HEAD is 405.
- **Nothing runs in the report.** Every answer carries a Content-Security-Policy; the report and
  its pictures are served sandboxed, with no scripts.
"""

from __future__ import annotations

import json
import sys
import threading
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any
from urllib.parse import parse_qs, unquote, urlsplit

from simkit.errors import UsageError
from simkit.watch.page import CSS, SCRIPT, page_html
from simkit.watch.state import LiveState

#: The only address the server listens on.
HOST = "127.0.0.1"
#: A page waits at most this long for news before it asks again (s).
LONG_POLL = 15.0

PAGE_POLICY = ("default-src 'none'; script-src 'self'; style-src 'self'; connect-src 'self'; img-src 'self' data:; "
               "frame-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
FILE_POLICY = "default-src 'none'; img-src 'self' data:; style-src 'unsafe-inline'; frame-ancestors 'self'; sandbox"

CONTENT_TYPES = {".html": "text/html; charset=utf-8", ".md": "text/markdown; charset=utf-8",
                 ".png": "image/png", ".svg": "image/svg+xml", ".cir": "text/plain; charset=utf-8",
                 ".json": "application/json", ".csv": "text/csv; charset=utf-8"}


def content_type(name: str) -> str:
    suffix = name[name.rfind("."):] if "." in name else ""
    return CONTENT_TYPES.get(suffix, "application/octet-stream")


class WatchServer(ThreadingHTTPServer):
    """The HTTP server of one watch: knows its state and which Host headers are its own."""

    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, state: LiveState, port: int) -> None:
        self.state = state
        try:
            super().__init__((HOST, port), Handler)
        except OSError as exc:
            raise UsageError(f"--port {port}: cannot listen on {HOST}:{port} ({exc.strerror or exc}); choose "
                             "another port, or --port 0 for any free one") from None
        self.port = int(self.server_address[1])
        self.hosts = {f"127.0.0.1:{self.port}", f"localhost:{self.port}"}

    def handle_error(self, request: Any, client_address: Any) -> None:
        if isinstance(sys.exc_info()[1], ConnectionError):
            return  # a page closed or reloaded while it was being answered: nothing to say
        super().handle_error(request, client_address)

    @property
    def url(self) -> str:
        return f"http://{HOST}:{self.port}/"

    def serve_in_background(self) -> threading.Thread:
        thread = threading.Thread(target=self.serve_forever, kwargs={"poll_interval": 0.2}, name="simkit-watch",
                                  daemon=True)
        thread.start()
        return thread


class Handler(BaseHTTPRequestHandler):
    server: WatchServer
    server_version = "simkit-watch"
    sys_version = ""

    def log_message(self, format: str, *args: Any) -> None:
        pass  # the terminal shows the design's runs, not every request

    def _send(self, status: int, body: bytes, ctype: str, policy: str = PAGE_POLICY) -> None:
        self.send_response(status)
        self.send_header("Content-Type", ctype)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
        self.send_header("Referrer-Policy", "no-referrer")
        self.send_header("Content-Security-Policy", policy)
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _refuse(self, status: HTTPStatus, why: str) -> None:
        self._send(status, f"{status.value} {status.phrase}: {why}\n".encode(), "text/plain; charset=utf-8")

    def do_GET(self) -> None:
        host = self.headers.get("Host", "")
        if host not in self.server.hosts:
            self._refuse(HTTPStatus.FORBIDDEN, "this server answers only to 127.0.0.1 and localhost")
            return
        parts = urlsplit(self.path)
        path = parts.path
        if path == "/":
            self._send(200, page_html().encode("utf-8"), "text/html; charset=utf-8")
        elif path == "/page.js":
            self._send(200, SCRIPT.encode("utf-8"), "text/javascript; charset=utf-8")
        elif path == "/page.css":
            self._send(200, CSS.encode("utf-8"), "text/css; charset=utf-8")
        elif path == "/state":
            self._state(parts.query)
        elif path.startswith("/files/"):
            name = unquote(path[len("/files/"):])
            served = self.server.state.file(name)  # exact names the last report wrote, nothing else
            if served is None:
                self._refuse(HTTPStatus.NOT_FOUND, "not a file of the current report")
            else:
                self._send(200, served.data, served.content_type, FILE_POLICY)
        else:
            self._refuse(HTTPStatus.NOT_FOUND, "no such page")

    def do_HEAD(self) -> None:
        self.do_GET()

    def _not_allowed(self) -> None:
        self._refuse(HTTPStatus.METHOD_NOT_ALLOWED, "this server only answers GET and HEAD")

    do_POST = do_PUT = do_DELETE = do_PATCH = do_OPTIONS = _not_allowed

    def _state(self, query: str) -> None:
        try:
            after = int(parse_qs(query).get("after", ["-1"])[0])
        except ValueError:
            after = -1
        state = self.server.state
        if after >= 0:
            state.wait(after, LONG_POLL)
        body = json.dumps(state.snapshot(), allow_nan=False).encode("utf-8")
        self._send(200, body, "application/json")
