"""Run many points: journal, resume, workers (local or cluster), progress, result files.

:func:`execute` is shared by ``sweep`` and ``spread``.  Before anything runs it checks the
output folder (never replacing files simkit did not write, never mixing two different runs in one
journal) and records every point that is not a valid design as an error row.  Then the remaining
points go to the workers; each finished point is appended to the journal at once, the CSV and
JSON are rebuilt from the journal now and then and at the end (also after Ctrl-C), and running the
same command again resumes where the journal stops.
"""

from __future__ import annotations

import hashlib
import os
import signal
import sys
import time
from collections.abc import Callable, Generator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TextIO

from simkit import __version__
from simkit.errors import UsageError
from simkit.figures import FIGURES
from simkit.report.outputs import OutputDir
from simkit.sweep import table
from simkit.sweep.journal import Opened, open_journal
from simkit.sweep.pool import Outcome, ProcessPool
from simkit.sweep.progress import Progress
from simkit.sweep.specs import Point, VarySpec, build_points, combine, si_value
from simkit.sweep.worker import Evaluate, prepare, simulate_point

#: Rebuild the CSV/JSON while running at most this often, s (the journal is written per point).
REBUILD_EVERY = 20.0


def default_jobs() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


@dataclass
class RunOptions:
    """How to run the points (the same for sweep and spread)."""

    out: Path
    jobs: int | None = None  # None: the core count
    scheduler: str | None = None  # Dask scheduler address
    timeout: float | None = 600.0  # s per point (local workers)
    force: bool = False
    retry_failed: bool = False
    progress: bool = True
    stream: TextIO | None = None  # progress and notes (default stderr)
    evaluate: Evaluate = simulate_point
    prepare: Callable[[], None] = prepare


@dataclass
class RunReport:
    """What a sweep or spread did, for the command's summary."""

    kind: str
    out: Path
    total: int
    finished: int
    failed: int
    computed: int  # points simulated by this command (the rest came from the journal)
    resumed: bool
    seconds: float
    files: list[Path] = field(default_factory=list)
    entries: list[dict[str, Any]] = field(default_factory=list)  # finished rows, point order
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def complete(self) -> bool:
        return self.finished == self.total


class _Terminated(Exception):
    """SIGTERM, turned into an orderly stop (the journal is safe either way)."""


def design_digest(path: str | Path) -> str:
    from simkit.design.loader import read_design_bytes
    from simkit.errors import DesignError

    try:
        return hashlib.sha256(read_design_bytes(path)).hexdigest()
    except DesignError:
        return ""


def execute(kind: str, header: dict[str, Any], identity: dict[str, Any], inputs: Sequence[str],
            points: Sequence[Point], opts: RunOptions, outputs: Sequence[str] = (),
            finish: Callable[[OutputDir, list[dict[str, Any]]], dict[str, Any]] | None = None) -> RunReport:
    """Run every point not yet in the journal and write ``<kind>.csv`` and ``<kind>.json``.

    Parameters
    ----------
    kind : str
        ``"sweep"`` or ``"spread"``: names the files.
    header : dict
        What the JSON result says about the run (design, options).
    identity : dict
        What makes two runs the same run (resume) or different (refused without --force).
    inputs : sequence of str
        The PATHs of the varied or drawn values: the first columns.
    points : sequence of Point
        Every point, with its design or its error.
    opts : RunOptions
        Workers, output folder, timeout, force.
    outputs : sequence of str
        Further file names the command writes into the folder (checked before the run).
    finish : callable, optional
        Called with the output folder and the finished rows at the end; returns extra JSON fields
        (a spread's summary) and may write further files.
    """
    stream = opts.stream if opts.stream is not None else sys.stderr
    if opts.scheduler:
        from simkit.sweep.cluster import check_address

        check_address(opts.scheduler)
    with OutputDir(opts.out, force=opts.force) as out:  # locked for the whole run: one writer per folder
        names = [f"{kind}.csv", f"{kind}.json", *outputs]
        out.check(names)
        journal = open_journal(out.path / f"{kind}.journal", {"kind": kind, "simkit": __version__, **identity},
                               opts.force)
        t_start = time.monotonic()
        try:
            return _execute(kind, header, inputs, points, opts, out, journal, stream, finish, t_start, names)
        finally:
            journal.close()


def entry(point: Point, result: dict[str, Any], attempts: int) -> dict[str, Any]:
    """A finished point as the journal keeps it (and the API's ``Sweep.entries``): its values in SI, what
    the evaluation gave, and how many workers it took (0 for a point that is not a valid design)."""
    return {
        "point": point.index,
        "values": {p: si_value(v) for p, v in point.values.items()},
        "metrics": result.get("metrics") or {},
        **({"check": result.get("check"), "verdicts": result.get("verdicts") or {}} if result.get("check") else {}),
        "warnings": list(result.get("warnings") or []),
        "error": result.get("error"),
        "seconds": result.get("seconds"),
        "worker": result.get("worker"),
        "rss_mb": result.get("rss_mb"),
        "attempts": attempts,
    }


def _execute(kind: str, header: dict[str, Any], inputs: Sequence[str], points: Sequence[Point], opts: RunOptions,
             out: OutputDir, journal: Opened, stream: TextIO,
             finish: Callable[[OutputDir, list[dict[str, Any]]], dict[str, Any]] | None,
             t_start: float, names: Sequence[str]) -> RunReport:
    by_index = {p.index: p for p in points}
    stale = [i for i in journal.entries if i not in by_index]
    if stale:
        raise UsageError(f"{journal.path}: holds point {stale[0]}, which this {kind} does not have; "
                         "pass --force to start afresh")
    # Points that are not valid designs are finished at once: an error row each.
    for p in points:
        if p.design is None and p.index not in journal.entries:
            journal.append(entry(p, {"error": p.error}, 0))
    todo = [p for p in points if p.index not in journal.entries
            or (opts.retry_failed and journal.entries[p.index].get("error") and p.design is not None)]

    def rebuild() -> list[dict[str, Any]]:
        entries = [journal.entries[i] for i in sorted(journal.entries) if i in by_index]
        out.write(f"{kind}.csv", table.csv_text(inputs, entries))
        out.write(f"{kind}.json", table.json_document(kind, header, inputs, entries, len(points)))
        return entries

    progress = Progress(len(points), len(points) - len(todo), "points" if kind == "sweep" else "runs", stream,
                        enabled=opts.progress)
    if journal.resumed and opts.progress:
        progress.note(f"simkit: resuming {journal.path}: {len(points) - len(todo)} of {len(points)} "
                      f"{'points' if kind == 'sweep' else 'runs'} already done")
    rebuild()
    computed = 0
    old_term = _install_sigterm()
    last_rebuild = time.monotonic()
    # A generator: nothing starts until the loop asks for the first outcome.
    stream_of = outcomes([(p.index, p.design) for p in todo], opts.evaluate, opts.prepare, jobs=opts.jobs,
                         timeout=opts.timeout, scheduler=opts.scheduler)
    try:
        progress.start()
        for outcome in stream_of:
            row = entry(by_index[outcome.point], outcome.result, outcome.attempts)
            journal.append(row)
            computed += 1
            if row["error"]:
                label = ", ".join(f"{k}={v}" for k, v in by_index[outcome.point].values.items())
                progress.note(f"simkit: point {outcome.point} ({label}) failed: "
                              f"{table.one_line(row['error'], 200)}")
            progress.update(failed=bool(row["error"]))
            if time.monotonic() - last_rebuild > REBUILD_EVERY:
                rebuild()
                last_rebuild = time.monotonic()
    except (KeyboardInterrupt, _Terminated):
        progress.finish()
        rebuild()
        done = sum(1 for p in points if p.index in journal.entries)
        print(f"simkit: stopped; {done} of {len(points)} done and kept in {journal.path}. "
              "Run the same command again to go on from there.", file=stream)
        raise KeyboardInterrupt from None
    finally:
        stream_of.close()  # stops the workers even when the interruption came between two points
        _restore_sigterm(old_term)
        progress.finish()
    entries = rebuild()
    extra: dict[str, Any] = {}
    if finish is not None:
        extra = finish(out, entries)
        if extra:
            out.write(f"{kind}.json", table.json_document(kind, header, inputs, entries, len(points), extra))
    files = [out.path / n for n in names if (out.path / n).exists()]
    failed = sum(1 for e in entries if e.get("error"))
    return RunReport(kind, out.path, len(points), len(entries), failed, computed, journal.resumed,
                     time.monotonic() - t_start, files, entries, extra)


def outcomes(tasks: Sequence[tuple[int, Any]], evaluate: Evaluate, prepare: Callable[[], None] = prepare,
             jobs: int | None = None, timeout: float | None = 600.0,
             scheduler: str | None = None) -> Generator[Outcome, None, None]:
    """Evaluate ``(point, payload)`` tasks on worker processes (or a Dask cluster), yielding each as it finishes.

    ``jobs`` None means the core count.  Nothing starts until the first outcome is asked for; close
    the generator to stop the workers early.
    """
    if not tasks:
        return _nothing()
    if scheduler:
        from simkit.sweep.cluster import cluster_outcomes

        return cluster_outcomes(scheduler, tasks, evaluate, prepare)
    workers = min(jobs or default_jobs(), len(tasks))  # never more workers than points
    pool = ProcessPool(jobs=workers, evaluate=evaluate, prepare=prepare, timeout=timeout)
    return pool.run(tasks)


def _nothing() -> Generator[Outcome, None, None]:
    yield from ()


def _install_sigterm() -> Any:
    def on_term(signum: int, frame: Any) -> None:
        raise _Terminated

    try:
        return signal.signal(signal.SIGTERM, on_term)
    except ValueError:  # not the main thread
        return None


def _restore_sigterm(old: Any) -> None:
    if old is not None:
        try:
            signal.signal(signal.SIGTERM, old)
        except ValueError:  # pragma: no cover
            pass


# --- sweep -------------------------------------------------------------------------------------


def with_check(opts: RunOptions, check: bool, kind: str = "sweep") -> RunOptions:
    """The options with each point also checked (``--check``), unless a custom evaluation is set.

    A spread's runs start from the closed-form estimate (repeatable to the last digit); a sweep's
    points from their nearest solved neighbour (faster)."""
    from dataclasses import replace

    from simkit.sweep import worker

    if opts.evaluate is not simulate_point:
        return opts
    if kind == "spread":
        return replace(opts, evaluate=worker.simulate_draw_and_check if check else worker.simulate_draw)
    return replace(opts, evaluate=worker.simulate_and_check) if check else opts


def run_sweep(design_file: str | Path, varies: Sequence[str], opts: RunOptions, paired: bool = False,
              overrides: Sequence[str] = (), plot: Sequence[str] = (), check: bool = False,
              report: bool = False) -> RunReport:
    """``simkit sweep``: every point of the --vary grid (or pairs), resumable.

    Parameters
    ----------
    design_file : str or Path
        The TOML design file.
    varies : sequence of str
        ``PATH=SPEC`` strings as given to ``--vary``.
    opts : RunOptions
        Output folder, workers, timeout, force.
    paired : bool
        ``--zip``: pair the lists point by point instead of a grid.
    overrides : sequence of str
        ``--set PATH=VALUE`` applied to every point first.
    plot : sequence of str
        Figure keys to plot against the first varied value (``sweep.png``).
    check : bool
        ``--check``: also run ``simkit check`` on every point and add its verdicts to the rows.
    report : bool
        ``--report``: also write report.md and report.html (with the plot) into the folder.
    """
    from simkit.design.loader import apply_overrides, design_from_dict, read_toml
    from simkit.sweep.specs import parse_vary

    specs = [parse_vary(v) for v in varies]
    value_sets = combine(specs, paired)
    origin = str(design_file)
    data = apply_overrides(read_toml(design_file), overrides, origin)
    base = design_from_dict(data, origin=origin)  # the design itself must make sense (exit 2)
    plot = list(plot)
    if plot:
        _check_plot(plot)
    points = build_points(data, origin, specs, value_sets)
    digest = design_digest(design_file)
    identity = {"design_sha256": digest, "set": list(overrides), "vary": [f"{s.path}={s.text}" for s in specs],
                "zip": paired, "check": check}
    header = {"design": base.title, "design_file": origin, "design_sha256": digest, "set": list(overrides),
              "vary": [{"path": s.path, "spec": s.text, "steps": s.kind, "values": [si_value(v) for v in s.values]}
                       for s in specs],
              "zip": paired, "check": check}
    inputs = [s.path for s in specs]

    def finish(out: OutputDir, entries: list[dict[str, Any]]) -> dict[str, Any]:
        if plot:
            from simkit.sweep.plot import sweep_figure_bytes

            out.write("sweep.png", sweep_figure_bytes(entries, specs, plot, paired, base.title))
        if report:
            from simkit.sweep.report import write_sweep_report

            write_sweep_report(out, entries, specs, plot, paired, base.title, design_file, overrides, len(points))
        return {}

    extra_files = (["sweep.png"] if plot else []) + (_sweep_report_files() if report else [])
    return execute("sweep", header, identity, inputs, points, with_check(opts, check), extra_files, finish)


def _sweep_report_files() -> list[str]:
    from simkit.sweep.report import sweep_report_files

    return sweep_report_files()


def _check_plot(figures: Sequence[str]) -> None:
    bad = [f for f in figures if f not in FIGURES]
    if bad:
        raise UsageError(f"--plot {bad[0]}: not a figure; choose from {', '.join(FIGURES)}")


def plot_list(text: str | None) -> list[str]:
    """``--plot ripple_pp_v,vout_dc_v`` as a list."""
    if not text:
        return []
    return [s.strip() for s in text.split(",") if s.strip()]


__all__ = ["RunOptions", "RunReport", "VarySpec", "entry", "execute", "outcomes", "plot_list", "run_sweep",
           "with_check"]
