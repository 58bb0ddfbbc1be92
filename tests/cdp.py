"""A headless Chromium driven over the DevTools protocol through a pipe (standard library only).

``chromium --remote-debugging-pipe`` reads JSON commands on file descriptor 3 and writes answers
on 4, each message ended by a NUL byte: no port is opened and no client library is needed.  The
tests use it to keep a page open while they change files, and to read what the page shows.
"""

from __future__ import annotations

import fcntl
import json
import os
import select
import shutil
import subprocess
import sys
import time
from pathlib import Path
from typing import Any


def chromium() -> str:
    for name in (os.environ.get("SIMKIT_CHROMIUM", ""), "chromium", "chromium-browser", "google-chrome"):
        if name and shutil.which(name):
            return str(shutil.which(name))
    raise AssertionError("no chromium: `make test` installs it with scripts/ensure-chromium.sh")


class Browser:
    """One headless Chromium; ``with Browser(profile) as b: page = b.open(url)``."""

    def __init__(self, profile: Path) -> None:
        read_end, self._to_browser = os.pipe()
        self._from_browser, write_end = os.pipe()
        # Chromium's ends moved to descriptors above 9, so putting them on 3 and 4 never overwrites the other.
        to_browser_r = fcntl.fcntl(read_end, fcntl.F_DUPFD, 10)
        from_browser_w = fcntl.fcntl(write_end, fcntl.F_DUPFD, 10)
        os.close(read_end)
        os.close(write_end)
        args = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                "--disable-component-update", "--disable-sync", "--disable-extensions", "--remote-debugging-pipe",
                f"--user-data-dir={profile}", "about:blank"]
        # A small Python step puts the two ends on descriptors 3 and 4, where Chromium expects them, then
        # becomes Chromium (a POSIX shell cannot name descriptors above 9).
        hop = "import os, sys; os.dup2(int(sys.argv[1]), 3); os.dup2(int(sys.argv[2]), 4); " \
              "os.execv(sys.argv[3], sys.argv[3:])"
        self.proc = subprocess.Popen([sys.executable, "-c", hop, str(to_browser_r), str(from_browser_w), chromium(),
                                      *args], pass_fds=(to_browser_r, from_browser_w), stdout=subprocess.DEVNULL,
                                     stderr=subprocess.DEVNULL)
        os.close(to_browser_r)
        os.close(from_browser_w)
        self._buffer = b""
        self._next = 0

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def close(self) -> None:
        try:
            self.send("Browser.close", timeout=10)
        except Exception:
            pass
        try:
            self.proc.wait(10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(10)
        for fd in (self._to_browser, self._from_browser):
            try:
                os.close(fd)
            except OSError:
                pass

    def send(self, method: str, params: dict[str, Any] | None = None, session: str | None = None,
             timeout: float = 30.0) -> dict[str, Any]:
        self._next += 1
        msg: dict[str, Any] = {"id": self._next, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self._to_browser, json.dumps(msg).encode() + b"\0")
        end = time.monotonic() + timeout
        while True:
            while b"\0" not in self._buffer:
                left = end - time.monotonic()
                ready, _, _ = select.select([self._from_browser], [], [], max(left, 0))
                if not ready:
                    raise TimeoutError(f"chromium did not answer {method} within {timeout} s")
                block = os.read(self._from_browser, 1 << 16)
                if not block:
                    raise ConnectionError("chromium closed its pipe")
                self._buffer += block
            raw, _, self._buffer = self._buffer.partition(b"\0")
            answer = json.loads(raw)
            if answer.get("id") == self._next:
                if "error" in answer:
                    raise RuntimeError(f"{method}: {answer['error']}")
                return answer.get("result", {})

    def open(self, url: str) -> Page:
        target = self.send("Target.createTarget", {"url": url})["targetId"]
        session = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        return Page(self, session)


class Page:
    def __init__(self, browser: Browser, session: str) -> None:
        self.browser = browser
        self.session = session

    def evaluate(self, expression: str, await_promise: bool = False) -> Any:
        """The value of a JavaScript expression in the page (None when it throws)."""
        r = self.browser.send("Runtime.evaluate", {"expression": expression, "returnByValue": True,
                                                   "awaitPromise": await_promise}, self.session)
        if "exceptionDetails" in r:
            return None
        return r.get("result", {}).get("value")

    def wait_for(self, expression: str, timeout: float, every: float = 0.1) -> Any:
        """Evaluate until the value is truthy; that value (AssertionError after ``timeout`` s)."""
        end = time.monotonic() + timeout
        while True:
            value = self.evaluate(expression)
            if value:
                return value
            if time.monotonic() > end:
                raise AssertionError(f"the page never gave {expression!r} within {timeout} s")
            time.sleep(every)

