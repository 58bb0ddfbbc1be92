"""A progress bar on stderr: redrawn in place on a terminal, a line now and then in a log file."""

from __future__ import annotations

import sys
import time
from typing import TextIO


def _clock(seconds: float) -> str:
    s = round(seconds)
    return f"{s // 3600}:{s // 60 % 60:02d}:{s % 60:02d}" if s >= 3600 else f"{s // 60}:{s % 60:02d}"


class Progress:
    """Counts finished points and shows how many are left and about how long they will take."""

    WIDTH = 28

    def __init__(self, total: int, done: int = 0, label: str = "points", stream: TextIO | None = None,
                 enabled: bool = True) -> None:
        self.total = total
        self.done = done
        self.failed = 0
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = enabled and total > 0
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self._start = time.monotonic()
        self._first = done  # points already done before this run (resumed)
        self._last_draw = 0.0
        self._last_tenth = -1
        self._drawn = False

    def update(self, failed: bool = False) -> None:
        self.done += 1
        self.failed += int(failed)
        self._draw()

    def note(self, text: str) -> None:
        """A message on its own line, without breaking the bar."""
        if not self.enabled:
            return
        if self.tty and self._drawn:
            self.stream.write("\r\033[K")
        self.stream.write(text.rstrip("\n") + "\n")
        self._drawn = False
        if self.tty:
            self._draw(force=True)

    def line(self) -> str:
        frac = self.done / self.total if self.total else 1.0
        filled = round(frac * self.WIDTH)
        bar = "#" * filled + "." * (self.WIDTH - filled)
        elapsed = time.monotonic() - self._start
        new = self.done - self._first
        left = self.total - self.done
        eta = f", about {_clock(elapsed / new * left)} left" if new and left else ""
        fail = f", {self.failed} failed" if self.failed else ""
        return f"simkit: [{bar}] {self.done}/{self.total} {self.label}{fail}, {_clock(elapsed)}{eta}"

    def _draw(self, force: bool = False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if self.tty:
            if force or now - self._last_draw >= 0.1 or self.done == self.total:
                self.stream.write("\r\033[K" + self.line())
                self.stream.flush()
                self._last_draw = now
                self._drawn = True
            return
        tenth = int(10 * self.done / self.total)
        if force or tenth != self._last_tenth or now - self._last_draw >= 30:
            self.stream.write(self.line() + "\n")
            self.stream.flush()
            self._last_tenth = tenth
            self._last_draw = now

    def start(self) -> None:
        if self.done < self.total:
            self._draw(force=True)

    def finish(self) -> None:
        if self.enabled and self.tty and self._drawn:
            self.stream.write("\n")
            self.stream.flush()
            self._drawn = False
