"""Helpers the benchmark scripts share (they run as files, so their folder is on the path)."""

from __future__ import annotations

import math
import os
import re
import shutil
import sys
from pathlib import Path

#: A ``name = value`` line of ngspice's ``.meas`` printout.
MEAS_LINE = re.compile(r"^\s*([A-Za-z_]\w*)\s*=\s*([-+]?[0-9.]+(?:[eE][-+]?\d+)?)")


def loadavg() -> str:
    """The machine's load averages (1, 5, 15 min), for the printout: times are only comparable when it is low."""
    try:
        return " ".join(f"{x:.2f}" for x in os.getloadavg())
    except OSError:  # pragma: no cover
        return "?"


def exe(name: str) -> str:
    """A command: the one beside this Python (the project's virtual environment) first, else on PATH."""
    near = Path(sys.executable).with_name(name)
    found = str(near) if near.exists() else shutil.which(name)
    if not found:
        sys.exit(f"bench: {name} not found")
    return found


def parse_meas(stdout: str) -> dict[str, float]:
    """``name = value`` lines of ngspice's measurement printout (names lower-case)."""
    found: dict[str, float] = {}
    for line in stdout.splitlines():
        m = MEAS_LINE.match(line)
        if m:
            found[m.group(1).lower()] = float(m.group(2))
    return found


def rel(a: float, b: float) -> float:
    """|a - b| relative to |b| (infinite when b is 0)."""
    return abs(a - b) / abs(b) if b else math.inf
