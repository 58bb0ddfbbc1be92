"""Run the points of a sweep or spread on a Dask distributed cluster (``--scheduler ADDRESS``).

The client (this process) keeps the journal, so resume and error rows work exactly as with
local workers: every finished point is written as it comes back, a point that fails is a row with
its error, and a worker that dies is replaced by the cluster's own nanny.  Workers need simkit and
ngspice installed.  Each worker process loads ngspice once and lets one thread at a time use it
(threads sharing one libngspice crash), so start workers with ``--nthreads 1`` and as many
processes as cores (``--nworkers``).

A point whose worker died is rescheduled by the cluster itself, up to its
``distributed.scheduler.allowed-failures`` setting (3 unless configured), then recorded as an
error.  ``--timeout`` is not enforced on a cluster (a running task cannot be stopped from the
client); use the workers' own resource limits.
"""

from __future__ import annotations

import threading
import uuid
from collections.abc import Callable, Iterator, Sequence
from typing import Any

from simkit.errors import UsageError
from simkit.sweep.pool import Outcome
from simkit.sweep.worker import Evaluate, evaluate_safely

_ENGINE_LOCK = threading.Lock()
_PREPARED: set[Callable[[], None]] = set()
_PREPARE_ERRORS: dict[Callable[[], None], str] = {}


def remote_point(evaluate: Evaluate, prepare: Callable[[], None], payload: Any) -> dict[str, Any]:
    """Runs on a cluster worker: one point, with this worker process's single engine."""
    with _ENGINE_LOCK:
        if prepare not in _PREPARED:
            try:
                prepare()
            except Exception as exc:
                _PREPARE_ERRORS[prepare] = f"this cluster worker cannot run the simulator: {exc}"
            _PREPARED.add(prepare)
        if prepare in _PREPARE_ERRORS:
            return {"metrics": {}, "warnings": [], "error": _PREPARE_ERRORS[prepare], "seconds": None,
                    "worker": None, "rss_mb": None}
        return evaluate_safely(evaluate, payload)


def connect(address: str) -> Any:
    """A client of the scheduler at ``address`` (exit 2 when dask is missing or nobody answers)."""
    try:
        from distributed import Client
    except ImportError:
        raise UsageError("--scheduler needs dask.distributed: pip install 'simkit[cluster]' "
                         "(on this machine and on every worker)") from None
    try:
        return Client(address, timeout="15s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise UsageError(f"--scheduler {address}: no Dask scheduler answered ({exc}); start one with "
                         "`dask scheduler` and give its tcp://HOST:PORT address") from None


def cluster_outcomes(address: str, tasks: Sequence[tuple[int, Any]], evaluate: Evaluate,
                     prepare: Callable[[], None]) -> Iterator[Outcome]:
    """Submit every point to the cluster and yield each outcome as it comes back."""
    from distributed import as_completed

    client = connect(address)
    run_id = uuid.uuid4().hex[:10]
    futures: dict[str, int] = {}
    submitted: list[Any] = []
    try:
        for point, payload in tasks:
            fut = client.submit(remote_point, evaluate, prepare, payload, key=f"simkit-{run_id}-{point}",
                                pure=False)
            futures[fut.key] = point
            submitted.append(fut)
        for fut in as_completed(submitted, loop=client.loop):
            point = futures[fut.key]
            try:
                result = fut.result()
            except Exception as exc:  # KilledWorker, a lost connection, a cancelled task
                result = {"metrics": {}, "warnings": [], "seconds": None, "worker": None, "rss_mb": None,
                          "error": f"the cluster could not run this point: {type(exc).__name__}: {exc}"}
            fut.release()
            yield Outcome(point, result, 1)
    finally:
        for fut in submitted:
            if not fut.done():
                fut.cancel()
        client.close()
