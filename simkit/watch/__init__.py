"""``simkit watch``: a page on this computer that shows a design's report and runs it again whenever the file is saved.

The main thread watches the design file (and the parts file it names) and runs it: read,
simulate, check, write the report into simkit's own output folder beside the design.  A web
server (:mod:`simkit.watch.server`, standard library) answers the page from another thread; the
page follows each run as it goes, the check's corner runs included (:mod:`simkit.watch.state`).
A save during a run stops that run at its next progress report and starts a new one.  A design
file that does not load, or a run that fails, shows its message on the page while the last good
figures and report stay.
"""

from __future__ import annotations

import hashlib
import os
import signal
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from simkit import progress
from simkit.errors import DesignError, SimkitError, SimulationError, UsageError
from simkit.progress import Update
from simkit.watch.server import WatchServer, content_type
from simkit.watch.state import LiveState, Served

#: How often the design file is looked at (s).
POLL = 0.2
#: A file is read once its size and time stayed the same this long (an editor may write it in steps), s.
SETTLE = 0.15
#: The largest report file served (the biggest picture is well under a megabyte).
MAX_SERVED = 64 * 1024 * 1024


class Superseded(Exception):
    """The design file changed while it was being run: stop, and run the new one."""


def default_out_dir(design: str | Path) -> Path:
    """Where watch writes the report: ``NAME-watch/`` beside the design file."""
    p = Path(design)
    return p.parent / f"{p.stem}-watch"


def check_out_dir(design: str | Path, out: str | Path) -> Path:
    """The output folder must be inside the design's folder: the page serves nothing from anywhere else."""
    folder = Path(design).resolve().parent
    target = Path(out)
    resolved = (target if target.is_absolute() else Path.cwd() / target).resolve()
    if resolved != folder and folder not in resolved.parents:
        raise UsageError(f"--out {out}: watch writes and serves only inside the design's folder ({folder}); "
                         "choose a folder there")
    return target


@dataclass
class Watched:
    """The files a run depends on and what they were when last read."""

    design: Path
    signature: tuple[Any, ...] = ()
    digest: str = ""

    def files(self) -> list[Path]:
        files = [self.design]
        lib = _library_of(self.design)
        if lib is not None:
            files.append(lib)
        return files

    def look(self) -> tuple[Any, ...]:
        """Size, time and identity of every file (a missing file counts as a state of its own)."""
        out: list[Any] = []
        for f in self.files():
            try:
                st = os.stat(f)
                out.append((str(f), st.st_size, st.st_mtime_ns, st.st_ino))
            except OSError:
                out.append((str(f), None))
        return tuple(out)

    def content(self) -> str:
        """A digest of the files' bytes, read as the loader reads them (regular files of design size only)."""
        from simkit.design.loader import read_design_bytes

        h = hashlib.sha256()
        for f in self.files():
            try:
                h.update(read_design_bytes(f))
            except DesignError as exc:  # missing, a FIFO, too big: the run will say so; its state counts here
                h.update(str(exc).encode("utf-8", "replace"))
        return h.hexdigest()


def _library_of(design: Path) -> Path | None:
    """The parts file a design names (``library = "parts.toml"``), if it can be read."""
    from simkit.design.loader import read_toml

    try:
        lib = read_toml(design).get("library")
    except DesignError:
        return None
    return design.parent / lib if isinstance(lib, str) and lib.strip() and lib.isprintable() else None


def _kind(exc: SimkitError) -> str:
    if isinstance(exc, SimulationError):
        return "simulation"
    if isinstance(exc, (DesignError, UsageError)):
        return "design"
    return "other"


class Runner:
    """Runs the design whenever it changes and tells the state each step."""

    def __init__(self, design: str, overrides: Sequence[str], out: Any, state: LiveState,
                 echo: Callable[[str], None]) -> None:
        self.design = design
        self.overrides = tuple(overrides)
        self.out = out
        self.state = state
        self.echo = echo
        self.watched = Watched(Path(design))
        self._started_on: tuple[Any, ...] = ()

    def _check_superseded(self) -> None:
        now = self.watched.look()
        if now == self._started_on:
            return
        if self.watched.content() == self.watched.digest:  # touched or saved unchanged: carry on
            self._started_on = self.watched.signature = now
            return
        raise Superseded

    def _progress(self, update: Update) -> None:
        if _TERM.requested:  # stop at the first safe point (a signal handler may not raise inside ngspice)
            raise KeyboardInterrupt
        self.state.progress(update)
        self._check_superseded()

    def changed(self) -> bool:
        """Whether the files changed since the last run (waiting for a save to finish first)."""
        now = self.watched.look()
        if now == self.watched.signature:
            return False
        time.sleep(SETTLE)
        again = self.watched.look()
        if again != now:
            return False  # still being written: look again next time
        digest = self.watched.content()
        self.watched.signature = again
        if digest == self.watched.digest:
            return False  # saved with the same content
        self.watched.digest = digest
        return True

    def run_once(self) -> None:
        """One run: read, simulate, check, report; any failure is shown and the last good result kept."""
        from simkit.checks import run_checks
        from simkit.design.loader import load_design, read_design_text
        from simkit.pipeline import simulate
        from simkit.report.design_report import write_report

        state = self.state
        self._started_on = self.watched.signature
        number = state.start_run()
        t0 = time.monotonic()
        self.echo(f"simkit: run {number}: {'running' if number == 1 else 'the file changed; running'} {self.design}")
        try:
            # Every simulation inside, the check's corner runs included, reports here: the page follows
            # them, and a save or SIGTERM stops the run at the next report.
            with progress.listen(self._progress):
                design = load_design(self.design, self.overrides)
                text = read_design_text(self.design)
                state.stage("simulate")
                result = simulate(design)
                self._check_superseded()
                state.figures(number, design.title, result.metrics, result.warnings)
                state.stage("check")
                checks, check_error = run_checks(design)
                state.verdicts(checks.summary() if checks is not None else None, check_error)
                self._check_superseded()
                state.stage("report")
                names = write_report(result, self.out, text, Path(self.design).name, self.overrides, checks,
                                     check_error)
                state.publish_report(number, self._read_back(names))
            state.finish(time.monotonic() - t0)
            self.echo(f"simkit: run {number}: done in {time.monotonic() - t0:.1f} s; vout_dc_v "
                      f"{result.metrics.get('vout_dc_v', float('nan')):.6g} V")
        except Superseded:
            self.watched.digest = ""  # run what the file holds once it settles, whatever that is
            state.superseded()
            self.echo(f"simkit: run {number}: the file changed while running; starting again")
        except SimkitError as exc:
            state.fail(str(exc), _kind(exc))
            self.echo(f"simkit: run {number}: {str(exc).splitlines()[0]} (the page keeps the last good result)")
        except (KeyboardInterrupt, SystemExit):
            raise
        except Exception as exc:  # a bug of ours: show it and keep watching
            state.fail(f"internal error: {type(exc).__name__}: {exc}; this is a bug in simkit", "other")
            self.echo(f"simkit: run {number}: internal error: {type(exc).__name__}: {exc}")

    def _read_back(self, names: Sequence[str]) -> dict[str, Served]:
        """The report's files as written into simkit's folder (never through a link), to serve."""
        from simkit.report.outputs import read_regular

        files: dict[str, Served] = {}
        for name in names:
            data = read_regular(self.out.path / name, MAX_SERVED)
            if data is not None:
                files[name] = Served(data, content_type(name))
        return files


def watch(design: str, overrides: Sequence[str] = (), port: int = 8470, out: str | None = None, force: bool = False,
          echo: Callable[[str], None] = print, announce: Callable[[str], None] = print,
          stop: Callable[[], bool] | None = None) -> None:
    """Serve the design's page on ``127.0.0.1:port`` and run the design on every save until Ctrl-C.

    Parameters
    ----------
    design : str
        The design file (it must exist; errors inside it are shown on the page).
    overrides : sequence of str
        ``--set PATH=VALUE`` applied to every run.
    port : int
        The port (0: any free one).
    out : str, optional
        The output folder, inside the design's folder (default ``NAME-watch/`` beside it).
    echo, announce : callable
        Progress lines (stderr) and the page's address (stdout).
    stop : callable, optional
        Returns True to end the watch (tests); otherwise it ends with Ctrl-C or SIGTERM.
    """
    from simkit.design.loader import read_design_bytes
    from simkit.report.outputs import OutputDir

    read_design_bytes(design)  # a missing or unreadable file is a typing mistake: exit 2 now
    folder = check_out_dir(design, out) if out else default_out_dir(design)
    with OutputDir(folder, force=force) as target:
        from simkit.report.design_report import report_files

        target.check(report_files())
        state = LiveState(design_file=Path(design).name)
        server = WatchServer(state, port)
        runner = Runner(design, overrides, target, state, echo)
        old_term = _sigterm_as_interrupt()
        try:
            server.serve_in_background()
            echo(f"simkit: watching {design}; the report is written to {target.path}; Ctrl-C stops")
            announce(server.url)
            while not _TERM.requested and (stop is None or not stop()):
                if runner.changed():
                    runner.run_once()
                    continue  # a save during the run is seen at once
                time.sleep(POLL)
            echo("simkit: stopped watching")
        except KeyboardInterrupt:
            echo("simkit: stopped watching")
        finally:
            server.shutdown()
            server.server_close()
            _restore(old_term)


class _Termination:
    """SIGTERM asks the watch to stop: at the next look at the file, or the next progress report of a run."""

    requested = False


_TERM = _Termination()


def _sigterm_as_interrupt() -> Any:
    def on_term(signum: int, frame: Any) -> None:
        _TERM.requested = True  # no exception here: it could land inside ngspice's callbacks and be lost

    _TERM.requested = False
    try:
        return signal.signal(signal.SIGTERM, on_term)
    except ValueError:  # not the main thread (tests)
        return None


def _restore(old: Any) -> None:
    if old is not None:
        try:
            signal.signal(signal.SIGTERM, old)
        except ValueError:  # pragma: no cover
            pass
