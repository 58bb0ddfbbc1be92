"""A pool of worker processes (spawned, one ngspice each) that survives its workers dying.

Why not :class:`concurrent.futures.ProcessPoolExecutor`: when one of its workers dies (ngspice
can crash the whole process), the executor breaks and every point in flight fails with it, with
no way to tell which point killed the worker.  Here each worker has its own pipe and is watched
on its own: the point a worker was simulating when it died is tried once more on a fresh worker
and, if that one dies too, recorded as an error; the other workers carry on.  A point that runs
past the timeout has its worker stopped and is recorded as an error (not retried: it would only
take as long again).

Workers ignore Ctrl-C (the parent stops them), and exit by themselves when the parent process
goes away, even when it was killed outright.
"""

from __future__ import annotations

import collections
import multiprocessing
import os
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from multiprocessing.connection import Connection, wait
from typing import Any

from simkit.errors import SimulationError
from simkit.sweep.worker import Evaluate, evaluate_safely

#: How often a worker checks that its parent is still there, s.
PARENT_POLL = 0.5
#: Workers dying before they are ready, this many in a row, stop the run: something is wrong with the set-up.
MAX_START_FAILURES = 3


@dataclass
class Outcome:
    """A finished point as the pool hands it back."""

    point: int
    result: dict[str, Any]  # metrics, warnings, error, seconds, worker, rss_mb
    attempts: int = 1


def _start_method() -> str:
    """``fork`` where it is safe and cheap, else ``spawn``.

    A forked worker starts in milliseconds with the parent's modules already imported, where a
    spawned one spends about 0.3 s importing numpy and simkit again (the whole overhead of a
    short sweep).  Fork is safe here only on Linux, while the parent runs no other thread and has
    not loaded ngspice (a forked copy of a loaded simulator would share its state): otherwise spawn.
    """
    if sys.platform != "linux" or threading.active_count() > 1 or "PySpice" in sys.modules:
        return "spawn"
    return "fork"


def worker_main(conn: Connection, evaluate: Evaluate, prepare: Callable[[], None], parent: int) -> None:
    """A worker process: prepare once, then simulate each point it is sent until told to stop."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C reaches the whole group; the parent decides
    _watch_parent(parent)
    try:
        prepare()
    except Exception as exc:  # e.g. ngspice cannot be loaded: the whole run cannot go on
        try:
            conn.send(("fatal", str(exc)))
        except OSError:
            pass
        return
    try:
        conn.send(("ready",))
    except OSError:
        return
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            return
        if msg is None:
            return
        point, payload = msg
        result = evaluate_safely(evaluate, payload)
        try:
            conn.send(("done", point, result))
        except OSError:  # the parent is gone: nobody to tell
            return


def _watch_parent(parent: int) -> None:
    """Exit when the parent process is gone (killed, power-cut of its terminal, ...)."""

    def loop() -> None:
        while True:
            time.sleep(PARENT_POLL)
            if os.getppid() != parent:
                os._exit(0)

    threading.Thread(target=loop, name="simkit-parent-watch", daemon=True).start()


@dataclass
class _Worker:
    proc: Any  # multiprocessing.Process (spawn context)
    conn: Connection
    task: tuple[int, Any] | None = None
    started: float = 0.0
    done: int = 0
    ready: bool = False  # it has started and prepared; a death before that is not the point's fault


@dataclass
class ProcessPool:
    """Runs points on ``jobs`` worker processes.

    Parameters
    ----------
    jobs : int
        Worker processes (at most one per point in flight).
    evaluate : callable
        Module-level function payload -> dict, run in the workers.
    prepare : callable
        Module-level function run once per worker before its first point.
    timeout : float or None
        Seconds one point may take before its worker is stopped.
    retries : int
        How many more times a point whose worker died is tried.
    max_points_per_worker : int or None
        Replace a worker after this many points (a guard against slow growth in long runs).
    """

    jobs: int
    evaluate: Evaluate
    prepare: Callable[[], None]
    timeout: float | None = None
    retries: int = 1
    max_points_per_worker: int | None = None
    workers_started: int = 0
    _workers: list[_Worker] = field(default_factory=list)
    _start_failures: int = 0

    def run(self, tasks: Sequence[tuple[int, Any]]) -> Iterator[Outcome]:
        """Yield each point's outcome as it finishes (in any order)."""
        ctx = multiprocessing.get_context(_start_method())
        queue: collections.deque[tuple[int, Any]] = collections.deque(tasks)
        attempts: collections.Counter[int] = collections.Counter()
        try:
            while queue or any(w.task is not None for w in self._workers):
                self._dispatch(ctx, queue, attempts)
                busy = [w for w in self._workers if w.task is not None]
                waitables: list[Any] = [w.conn for w in busy] + [w.proc.sentinel for w in busy]
                wait(waitables, timeout=self._wait_time(busy))
                now = time.monotonic()
                done = [o for o in (self._check(w, now, queue, attempts) for w in busy) if o is not None]
                if done:
                    # The workers go on with their next points while the caller records these.
                    self._dispatch(ctx, queue, attempts)
                yield from done
        finally:
            self.close()

    def _dispatch(self, ctx: Any, queue: collections.deque[tuple[int, Any]],
                  attempts: collections.Counter[int]) -> None:
        """Give every idle worker a point; start a worker only for a point no idle one will take."""
        while queue and len(self._workers) < self.jobs and \
                sum(1 for w in self._workers if w.task is None) < len(queue):
            self._spawn(ctx)
        for w in list(self._workers):
            if w.task is None and queue:
                task = queue.popleft()
                try:
                    w.conn.send(task)
                except OSError:  # this idle worker is gone: the point was never started
                    queue.appendleft(task)
                    self._drop(w)
                    continue
                w.task = task
                attempts[task[0]] += 1
                w.started = time.monotonic()

    def _wait_time(self, busy: list[_Worker]) -> float:
        if self.timeout is None or not busy:
            return 1.0
        first = min(w.started for w in busy) + self.timeout
        return max(0.01, min(1.0, first - time.monotonic()))

    def _check(self, w: _Worker, now: float, queue: collections.deque[tuple[int, Any]],
               attempts: collections.Counter[int]) -> Outcome | None:
        assert w.task is not None
        point = w.task[0]
        while True:
            try:
                msg = w.conn.recv() if w.conn.poll() else None
            except (EOFError, OSError):
                msg = None
            if msg is None:
                break
            if msg[0] == "ready":
                w.ready = True
                self._start_failures = 0
                continue
            if msg[0] == "fatal":
                raise SimulationError(f"a worker process could not start the simulator: {msg[1]}")
            _, done_point, result = msg
            w.task = None
            w.done += 1
            if self.max_points_per_worker and w.done >= self.max_points_per_worker:
                self._retire(w)
            return Outcome(done_point, result, attempts[done_point])
        if not w.proc.is_alive():
            code = w.proc.exitcode
            self._drop(w)
            if not w.ready:  # died while starting, before it could take the point: try the point elsewhere
                self._start_failures += 1
                attempts[point] -= 1
                queue.appendleft(w.task)
                w.task = None
                if self._start_failures >= MAX_START_FAILURES:
                    raise SimulationError(f"worker processes die while starting ({_exit_text(code)}), "
                                          f"{self._start_failures} in a row; nothing was simulated",
                                          hint="run simkit as a command or from a script file (a program read "
                                          "from standard input cannot start worker processes), and check that "
                                          "`simkit run` works on this machine")
                return None
            if attempts[point] <= self.retries:
                queue.appendleft(w.task)  # once more, on a fresh worker
                w.task = None
                return None
            w.task = None
            return Outcome(point, _failed(f"the worker process died while simulating this point "
                                          f"({_exit_text(code)}), {attempts[point]} times; the other points "
                                          "went on"), attempts[point])
        if self.timeout is not None and now - w.started > self.timeout:
            self._drop(w, kill=True)
            w.task = None
            return Outcome(point, _failed(f"stopped after {self.timeout:g} s (--timeout): the simulation took too "
                                          "long"), attempts[point])
        return None

    def _spawn(self, ctx: Any) -> None:
        parent_conn, child_conn = ctx.Pipe(duplex=True)
        proc = ctx.Process(target=worker_main, args=(child_conn, self.evaluate, self.prepare, os.getpid()),
                           name="simkit-worker", daemon=True)
        proc.start()
        child_conn.close()
        self.workers_started += 1
        self._workers.append(_Worker(proc, parent_conn))

    def _retire(self, w: _Worker) -> None:
        try:
            w.conn.send(None)
        except OSError:
            pass
        self._drop(w, kill=False, wait=2.0)

    def _drop(self, w: _Worker, kill: bool = False, wait: float = 0.0) -> None:
        if w in self._workers:
            self._workers.remove(w)
        if kill and w.proc.is_alive():
            w.proc.kill()
        if wait:
            w.proc.join(wait)
            if w.proc.is_alive():
                w.proc.kill()
        w.proc.join(1.0)
        w.conn.close()

    def close(self) -> None:
        """Stop every worker: ask politely, then end the ones still busy (by their own process)."""
        for w in self._workers:
            if w.task is None:
                try:
                    w.conn.send(None)
                except OSError:
                    pass
            elif w.proc.is_alive():
                w.proc.kill()
        deadline = time.monotonic() + 3.0
        for w in self._workers:
            w.proc.join(max(0.0, deadline - time.monotonic()))
            if w.proc.is_alive():
                w.proc.kill()
                w.proc.join(1.0)
            w.conn.close()
        self._workers.clear()


def _failed(message: str) -> dict[str, Any]:
    return {"metrics": {}, "warnings": [], "error": message, "seconds": None, "worker": None, "rss_mb": None}


def _exit_text(code: int | None) -> str:
    if code is None:
        return "no exit code"
    if code < 0:
        try:
            return f"killed by signal {signal.Signals(-code).name}"
        except ValueError:
            return f"killed by signal {-code}"
    return f"exit code {code}"
