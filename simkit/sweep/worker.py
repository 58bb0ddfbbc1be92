"""What a worker does with one point: simulate a design and hand back plain, picklable data.

Used by the local process pool (:mod:`simkit.sweep.pool`) and by cluster workers
(:mod:`simkit.sweep.cluster`) alike, so a point gives the same row wherever it ran.  Each worker
process loads ngspice once (:func:`prepare`) and reuses its engine for every point it is given;
the engine removes each run's circuit and vectors, so a worker does not grow with the points it
has done (``bench/bench_sweep.py`` prints the workers' memory).
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Callable
from typing import Any

from simkit.errors import SimkitError

#: A point's evaluation: a payload (usually a Design) in, ``{"metrics", "warnings"}`` out.
Evaluate = Callable[[Any], dict[str, Any]]


def prepare() -> None:
    """Load ngspice and the pipeline once per worker process, before the first point."""
    import simkit.pipeline  # noqa: F401  (import cost paid once, not inside the first point's time)
    from simkit.engine.ngspice import get_engine

    get_engine()


def no_prepare() -> None:
    """For evaluations that need no simulator (tests of the machinery)."""


def simulate_point(design: Any, warm: bool = True) -> dict[str, Any]:
    """Simulate one design with this process's engine: its figures (SI floats) and warnings.

    A sweep's points start from the periodic state of the nearest design this worker solved
    (fewer spans; the figures agree with a stand-alone run within the settle tolerance, not to
    the last digit, so with several workers the last digits depend on which worker ran what).
    """
    from simkit.pipeline import simulate

    result = simulate(design, warm=warm)
    return {"metrics": {k: finite(v) for k, v in result.metrics.items()}, "warnings": list(result.warnings)}


#: Order of verdicts from best to worst.
_SEVERITY = {"pass": 0, "marginal": 1, "fail": 2}


def simulate_draw(design: Any) -> dict[str, Any]:
    """As :func:`simulate_point` from the closed-form estimate: a spread's runs are repeatable to the
    last digit whatever worker runs them (a seed gives the same figures)."""
    return simulate_point(design, warm=False)


def simulate_draw_and_check(design: Any) -> dict[str, Any]:
    """As :func:`simulate_and_check`, repeatable to the last digit."""
    return simulate_and_check(design, warm=False)


def simulate_and_check(design: Any, warm: bool = True) -> dict[str, Any]:
    """As :func:`simulate_point`, plus the verdicts of ``simkit check`` (its corners cost more simulations).

    ``verdicts`` maps ``"PART RULE"`` (``"D1 reverse voltage"``) to pass, marginal or fail; ``check``
    is the point's overall result, the worst verdict.
    """
    from simkit.checks import check_design

    out = simulate_point(design, warm)
    report = check_design(design, fixes=False)  # a point's verdicts only: fixes may cost simulations
    verdicts: dict[str, str] = {}
    for v in report.verdicts:
        key = f"{v.part} {v.rule}"
        if key not in verdicts or _SEVERITY.get(v.verdict, 2) > _SEVERITY.get(verdicts[key], 2):
            verdicts[key] = v.verdict
    out["verdicts"] = verdicts
    out["check"] = max(verdicts.values(), key=lambda x: _SEVERITY.get(x, 2)) if verdicts else "pass"
    return out


def finite(v: Any) -> float | None:
    """A figure as result files hold it: a float, or None for a non-finite number (JSON has no NaN)."""
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def evaluate_safely(evaluate: Evaluate, payload: Any) -> dict[str, Any]:
    """Run one point and turn every failure into an error text: a point never stops the run."""
    t0 = time.perf_counter()
    try:
        out = dict(evaluate(payload))
        out.setdefault("metrics", {})
        out.setdefault("warnings", [])
        out["error"] = None
    except SimkitError as exc:
        out = {"metrics": {}, "warnings": [], "error": str(exc)}
    except MemoryError:
        out = {"metrics": {}, "warnings": [], "error": "out of memory while simulating this point"}
    except Exception as exc:  # a bug, or a surprise from the simulator: record it, go on
        out = {"metrics": {}, "warnings": [], "error": f"internal error: {type(exc).__name__}: {exc}"}
    out["seconds"] = time.perf_counter() - t0
    out["worker"] = os.getpid()
    out["rss_mb"] = rss_mb()
    return out


def rss_mb() -> float | None:
    """This process's resident memory, MB (None where it cannot be read)."""
    try:
        with open("/proc/self/statm", "rb") as fh:
            pages = int(fh.read().split()[1])
        return pages * os.sysconf("SC_PAGE_SIZE") / 1e6
    except (OSError, ValueError, IndexError, AttributeError):
        return None
