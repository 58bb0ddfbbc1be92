"""Progress of long runs: the hook the analyses call, and the one-line terminal view the command line shows.

The interface (for any front end: the command line's status line, a watch page, a test):

- :func:`listen` (a context manager) hands every :class:`Update` made inside it to a listener,
  a callable taking one ``Update``.  Listeners nest; each gets every update.  Nothing is sent
  when no one listens, so analyses pay nothing for it.
- :func:`stage` (a context manager) names the part of a bigger job the updates inside belong to
  (``check``: "corner 2 of 5: high mains, light load").
- :func:`report` is what an analysis calls: which analysis, how much simulated time it has
  done, and how much it will do when that is known.  :func:`callback` gives it in the
  ``(analysis, done, total)`` form the analysis functions take as their ``progress`` argument,
  or None when no one listens.

The state lives in context variables: a listener set in one thread (or asyncio task) does not
see another's updates.  Worker processes of a sweep report through the sweep's own progress.

:class:`TerminalLine` is the command line's listener: after ``delay`` seconds (so short runs
print nothing) it keeps one line on a terminal's stderr up to date, and clears it at the end.
"""

from __future__ import annotations

import contextlib
import contextvars
import shutil
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TextIO


@dataclass(frozen=True)
class Update:
    """One progress report."""

    analysis: str  # "steady state", "switch-on", "steady keying", ...
    done: float  # s of simulated time this analysis has done
    total: float | None  # s of simulated time it will do, when known
    stage: str  # the part of a bigger job ("" outside any stage)
    elapsed: float  # wall-clock s since the outermost listen() began

    @property
    def share(self) -> float | None:
        """Done over total, 0..1, when the total is known."""
        if self.total is None or self.total <= 0:
            return None
        return min(max(self.done / self.total, 0.0), 1.0)


Listener = Callable[[Update], None]
#: The form the analysis functions take: (analysis, simulated time done, simulated time to do or None).
Callback = Callable[[str, float, "float | None"], None]

_LISTENERS: contextvars.ContextVar[tuple[Listener, ...]] = contextvars.ContextVar("simkit_progress_listeners",
                                                                                  default=())
_STAGE: contextvars.ContextVar[str] = contextvars.ContextVar("simkit_progress_stage", default="")
_START: contextvars.ContextVar[float] = contextvars.ContextVar("simkit_progress_start", default=0.0)


@contextlib.contextmanager
def listen(listener: Listener) -> Iterator[None]:
    """Send every update made inside the block to ``listener`` (as well as to any outer listener)."""
    outer = _LISTENERS.get()
    token = _LISTENERS.set((*outer, listener))
    start = _START.set(_START.get() if outer else time.monotonic())
    try:
        yield
    finally:
        _START.reset(start)
        _LISTENERS.reset(token)


@contextlib.contextmanager
def stage(name: str) -> Iterator[None]:
    """Name the part of a bigger job that the updates inside the block belong to."""
    token = _STAGE.set(name)
    try:
        yield
    finally:
        _STAGE.reset(token)


def report(analysis: str, done: float, total: float | None = None) -> None:
    """Tell every listener how far an analysis is (simulated seconds done, and to do when known)."""
    listeners = _LISTENERS.get()
    if not listeners:
        return
    update = Update(analysis, float(done), None if total is None else float(total), _STAGE.get(),
                    time.monotonic() - _START.get())
    for listener in listeners:
        listener(update)


def callback() -> Callback | None:
    """:func:`report` when someone listens (for the ``progress`` argument of the analyses), else None."""
    return report if _LISTENERS.get() else None


def _seconds(s: float) -> str:
    if s >= 100:
        return f"{s:.0f} s"
    if s >= 1:
        return f"{s:.3g} s"
    return f"{s * 1e3:.3g} ms"


def update_text(u: Update) -> str:
    """One update in words: the analysis, how far it is, and the part of the job it belongs to."""
    if u.total is not None and u.total > 0:
        share = u.share or 0.0
        what = f"{u.analysis}: {_seconds(u.done)} of {_seconds(u.total)} simulated ({100 * share:.0f} %)"
    else:
        what = f"{u.analysis}: {_seconds(u.done)} simulated"
    return what + (f" [{u.stage}]" if u.stage else "")


def line_text(u: Update) -> str:
    """One update as the status line shows it."""
    return f"simkit: {update_text(u)}, {u.elapsed:.0f} s"


class TerminalLine:
    """A listener that keeps one status line on a terminal: shown after ``delay`` seconds, redrawn at most
    every ``interval`` seconds, cleared by :meth:`close`.  Silent when the stream is not a terminal or
    ``enabled`` is false."""

    def __init__(self, stream: TextIO, enabled: bool = True, delay: float = 2.0, interval: float = 0.2) -> None:
        self.stream = stream
        self.enabled = enabled and bool(getattr(stream, "isatty", lambda: False)())
        self.delay = delay
        self.interval = interval
        self._shown = 0  # characters on the line now
        self._last = -1e9

    def __call__(self, u: Update) -> None:
        if not self.enabled or u.elapsed < self.delay:
            return
        now = time.monotonic()
        if now - self._last < self.interval:
            return
        self._last = now
        width = max(shutil.get_terminal_size((100, 20)).columns - 1, 20)
        text = line_text(u)[:width]
        self.stream.write("\r" + text + " " * max(self._shown - len(text), 0))
        self.stream.flush()
        self._shown = len(text)

    def close(self) -> None:
        """Clear the line (before the command prints its results or warnings)."""
        if self._shown:
            self.stream.write("\r" + " " * self._shown + "\r")
            self.stream.flush()
            self._shown = 0


@contextlib.contextmanager
def terminal(stream: TextIO, enabled: bool = True, delay: float = 2.0) -> Iterator[TerminalLine]:
    """Listen with a :class:`TerminalLine` on ``stream`` for the block, and clear it afterwards."""
    line = TerminalLine(stream, enabled, delay)
    try:
        with listen(line):
            yield line
    finally:
        line.close()
