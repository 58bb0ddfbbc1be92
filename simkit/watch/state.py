"""What the watch page shows, shared between the thread that runs the design and the threads that serve it.

:class:`LiveState` is the one place the runner writes (stage, progress, figures, error, report
files) and the server reads (:meth:`LiveState.snapshot`, as JSON).  Each change bumps a version
number; :meth:`LiveState.wait` lets a request wait for the next version (long polling), so a
page learns of a change as soon as it happens without asking many times a second.
"""

from __future__ import annotations

import math
import threading
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from simkit.figures import FIGURES
from simkit.progress import Update, update_text
from simkit.safety import CAUTION_POINTS

#: The stages of one run, in order: (key, words shown on the page).
STAGES: tuple[tuple[str, str], ...] = (
    ("read", "reading the design file"),
    ("simulate", "simulating"),
    ("check", "checking the ratings"),
    ("report", "drawing the report"),
)
#: Progress reports closer together than this do not wake the pages (s).
PROGRESS_EVERY = 0.2


@dataclass
class Served:
    """One file of the report, as read back from simkit's output folder."""

    data: bytes
    content_type: str


@dataclass
class _Run:
    number: int
    started: float  # time.monotonic()
    stage: str = "read"
    detail: str = ""


@dataclass
class LiveState:
    """The watch page's state; every method is safe to call from any thread."""

    design_file: str
    title: str = ""
    version: int = 0
    status: str = "starting"  # starting | running | ready | error
    run: _Run | None = None
    error: dict[str, Any] | None = None
    result: dict[str, Any] | None = None
    report: dict[str, Any] | None = None
    files: dict[str, Served] = field(default_factory=dict)
    runs: int = 0
    _cond: threading.Condition = field(default_factory=threading.Condition, repr=False)
    _last_progress: float = 0.0

    # -- the runner's side ---------------------------------------------------------------------

    def _changed(self) -> None:
        self.version += 1
        self._cond.notify_all()

    def start_run(self) -> int:
        with self._cond:
            self.runs += 1
            self.run = _Run(self.runs, time.monotonic())
            self.status = "running"
            self._changed()
            return self.runs

    def stage(self, key: str, detail: str = "") -> None:
        with self._cond:
            if self.run is not None:
                self.run.stage = key
                self.run.detail = detail
            self._changed()

    def progress(self, update: Update) -> None:
        """A progress report (a :func:`simkit.progress.listen` listener's): which analysis, simulated time done
        and to do, and the part of the run it belongs to (a check's "corner 2 of 5: ...")."""
        text = update_text(update)  # as the terminal's status line words it
        with self._cond:
            if self.run is None:
                return
            self.run.detail = text
            now = time.monotonic()
            if now - self._last_progress >= PROGRESS_EVERY:
                self._last_progress = now
                self._changed()

    def figures(self, number: int, title: str, metrics: Mapping[str, float], warnings: list[str]) -> None:
        """A run's figures, shown as soon as the simulation ends (the report follows)."""
        with self._cond:
            previous = self.result["figures"] if self.result else []
            before = {f["name"]: f["value"] for f in previous}
            self.title = title
            self.result = {"number": number, "title": title, "figures": _figure_rows(metrics, before),
                           "warnings": list(warnings), "verdicts": None, "check_error": "",
                           "finished": time.strftime("%H:%M:%S")}
            self.error = None
            self._changed()

    def verdicts(self, counts: Mapping[str, Any] | None, error: str = "") -> None:
        with self._cond:
            if self.result is not None:
                self.result["verdicts"] = dict(counts) if counts is not None else None
                self.result["check_error"] = error
            self._changed()

    def publish_report(self, number: int, files: dict[str, Served]) -> None:
        with self._cond:
            self.files = dict(files)
            self.report = {"number": number, "files": list(files)}
            self._changed()

    def finish(self, seconds: float) -> None:
        with self._cond:
            if self.result is not None:
                self.result["seconds"] = round(seconds, 2)
            self.run = None
            self.status = "ready"
            self._changed()

    def fail(self, message: str, kind: str) -> None:
        """The latest attempt failed: show why, keep the last good result and report."""
        with self._cond:
            self.error = {"message": message, "kind": kind, "at": time.strftime("%H:%M:%S"),
                          "run": self.run.number if self.run else self.runs}
            self.run = None
            self.status = "error"
            self._changed()

    def superseded(self) -> None:
        """The file changed during a run: that run stops, the next one starts at once."""
        with self._cond:
            self.run = None
            self._changed()

    # -- the server's side ---------------------------------------------------------------------

    def wait(self, after: int, timeout: float) -> None:
        """Return when the version is past ``after``, or after ``timeout`` seconds."""
        with self._cond:
            self._cond.wait_for(lambda: self.version > after, timeout=timeout)

    def file(self, name: str) -> Served | None:
        with self._cond:
            return self.files.get(name)

    def snapshot(self) -> dict[str, Any]:
        """The state as the page reads it (JSON-ready)."""
        with self._cond:
            run = None
            if self.run is not None:
                run = {"number": self.run.number, "stage": self.run.stage, "detail": self.run.detail,
                       "elapsed_s": round(time.monotonic() - self.run.started, 2),
                       "stages": [{"key": k, "words": w} for k, w in STAGES]}
            return {"version": self.version, "design": {"file": self.design_file, "title": self.title},
                    "status": self.status, "run": run, "error": self.error, "result": self.result,
                    "report": self.report, "cautions": list(CAUTION_POINTS)}



def _figure_rows(metrics: Mapping[str, float], before: Mapping[str, float | None]) -> list[dict[str, Any]]:
    """Every figure with its value shown, and its change since the last good run."""
    from simkit.report.compare import change_text
    from simkit.report.text import show

    order = [k for k in FIGURES if k in metrics] + [k for k in metrics if k not in FIGURES]
    rows = []
    for k in order:
        v = metrics[k]
        value = float(v) if isinstance(v, (int, float)) and math.isfinite(v) else None
        old = before.get(k)
        change = "" if old is None or value is None else change_text(k, value - old, old)
        rows.append({"name": k, "value": value, "shown": show(k, v), "change": "" if change == "same" else change,
                     "meaning": FIGURES[k].meaning if k in FIGURES else ""})
    return rows
