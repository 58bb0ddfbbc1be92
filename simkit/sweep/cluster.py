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

import contextlib
import re
import socket
import threading
import uuid
from collections.abc import Callable, Iterator, Sequence
from typing import Any

from simkit.errors import UsageError, shown
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


#: A scheduler address: [PROTOCOL://]HOST:PORT, HOST a name, an IPv4 address or [an IPv6 address].
_ADDRESS = re.compile(r"^(?:(?P<proto>tcp|tls|ws|wss)://)?(?P<host>\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9._-]+):(?P<port>[0-9]{1,5})$")
#: Seconds to wait for the scheduler's port to answer before giving up.
PROBE_TIMEOUT = 10.0


def check_address(address: str) -> tuple[str, int]:
    """``--scheduler``'s host and port; exit 2 unless it looks like tcp://HOST:PORT (checked before
    anything runs, so a typing mistake is not found only after the journal was started)."""
    m = _ADDRESS.match(address.strip())
    port = int(m["port"]) if m else 0
    if m is None or not 0 < port < 65536:
        raise UsageError(f"--scheduler {shown(address, 100)!r}: expected the scheduler's address as tcp://HOST:PORT, "
                         "e.g. tcp://10.0.0.5:8786")
    return m["host"].strip("[]"), port


def connect(address: str) -> Any:
    """A client of the scheduler at ``address`` (exit 2 when dask is missing or nobody answers)."""
    host, port = check_address(address)
    try:
        from distributed import Client
    except ImportError:
        raise UsageError("--scheduler needs dask.distributed: pip install 'simkit[cluster]' "
                         "(on this machine and on every worker)") from None
    # Knock first: a port nobody listens on is a clean one-line error, not a half-built client.
    try:
        socket.create_connection((host, port), timeout=PROBE_TIMEOUT).close()
    except OSError as exc:
        raise UsageError(f"--scheduler {address}: no Dask scheduler answered ({exc.strerror or exc}); start one with "
                         "`dask scheduler` and give its tcp://HOST:PORT address") from None
    client = Client.__new__(Client)
    try:
        client.__init__(address, timeout="15s", set_as_default=False)
    except Exception as exc:
        # A client that failed half-way would try to close itself when collected, wait 30 s and print a
        # traceback: close it now, quietly.
        with contextlib.suppress(Exception):
            client.close(timeout=2)
        with contextlib.suppress(Exception):
            client.status = "closed"
        raise UsageError(f"--scheduler {address}: no Dask scheduler answered ({type(exc).__name__}: {exc}); start "
                         "one with `dask scheduler` and give its tcp://HOST:PORT address") from None
    return client


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
