"""Stand-in point evaluations for testing the sweep machinery without a simulator.

They run in spawned worker processes, so they live in an importable module.  The figure is a
plain function of the design (``vout_dc_v`` = sqrt(2) x vrms, the crest of the sine), so a test can
tell that each row holds its own point's result; chosen ``source.vrms`` values misbehave:

- 555: raises a SimulationError (a point that does not converge);
- 666: kills its worker process outright (SIGABRT), every time;
- 444: kills its worker the first time only (a marker file in $SIMKIT_TEST_MARKERS remembers);
- 777: hangs (for --timeout);
- 333: fails until a marker file "fixed" exists (for --retry-failed).
"""

from __future__ import annotations

import math
import os
import time
from pathlib import Path
from typing import Any

from simkit.errors import SimulationError

DESIGN = """\
title = "Test: stand-in sweep"
[source]
vrms = "250"
frequency = "50"
resistance = "10"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "5k"
"""


def fake_point(design: Any) -> dict[str, Any]:
    vrms = round(design.source.vrms, 6)
    if vrms == 555:
        raise SimulationError("ngspice did not complete the transient run (stand-in)")
    if vrms == 666:
        os.abort()
    if vrms == 444:
        marker = Path(os.environ["SIMKIT_TEST_MARKERS"]) / "died-once"
        if not marker.exists():
            marker.write_text("x")
            os.abort()
    if vrms == 777:
        time.sleep(120)
    if vrms == 333 and not (Path(os.environ["SIMKIT_TEST_MARKERS"]) / "fixed").exists():
        raise SimulationError("Timestep too small (stand-in)")
    return {"metrics": {"vout_dc_v": math.sqrt(2) * design.source.vrms,
                        "ripple_pp_v": 1.0 / design.filters[0].value},
            "warnings": []}


def slow_point(design: Any) -> dict[str, Any]:
    """As fake_point, taking about a fifth of a second (a tiny design's real simulation time)."""
    time.sleep(0.2)
    return fake_point(design)


def prepare_that_exits() -> None:
    """A worker that dies while starting (as one whose interpreter cannot start would)."""
    os._exit(7)


def prepare_without_simulator() -> None:
    """A worker that finds no simulator."""
    from simkit.errors import EngineMissingError

    raise EngineMissingError("the ngspice shared library could not be loaded (stand-in)")
