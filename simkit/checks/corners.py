"""The operating corners `simkit check` simulates, each a design derived from the user's.

- ``high mains, light load``: the highest steady voltages (PIV, capacitor voltage);
- ``high mains, heavy load``: the highest currents and dissipations;
- ``low mains, heavy load``: the lowest voltages, the longest conduction;
- ``cold load, high mains``: the loads draw nothing (heaters cold, tubes pulled): the
  highest voltage any part can see in steady operation, the start of the discharge;
- ``switch-on``: empty capacitors, the source starting at its crest, at high mains (the
  start-up run of the heavy corner);
- ``switch-off``: the source off and the load gone, from the cold corner's charge.

"Light" and "heavy" use what the design says a load can do: a keyed load's key-up and
key-down states, a stepped load's lightest and heaviest steps; a fixed load is what it is.
Without ``mains_tolerance`` the mains corners run at nominal mains and say so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from simkit.analysis.discharge import Discharge, discharge
from simkit.analysis.steady import end_state
from simkit.design.loads import heavy, lighten
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, get_engine
from simkit.pipeline import RunResult, simulate


@dataclass
class Corners:
    results: dict[str, RunResult]  # by corner name
    off: Discharge
    mains_tolerance: float | None


def corner_names(tol: float | None) -> dict[str, str]:
    hi = "high mains" if tol else "nominal mains (no mains_tolerance)"
    lo = "low mains" if tol else "nominal mains, low-mains corner skipped"
    return {"light": f"{hi}, light load", "heavy": f"{hi}, heavy load", "low": f"{lo}, heavy load",
            "cold": f"cold load, {hi}", "on": f"switch-on at the crest, {hi}", "off": "switch-off, load gone"}


def run_corners(design: Design, engine: Engine | None = None) -> Corners:
    eng = engine or get_engine()
    tol = design.source.mains_tolerance if design.source.kind != "inverter" else None
    hi, lo = (1 + tol, 1 - tol) if tol else (1.0, 1.0)
    names = corner_names(tol)
    # Corners need no load or line regulation runs, and a corner that never settles (a glow tube that keeps
    # striking and going out) is cut at 100 periods with a warning.
    limit = min(design.simulation.max_settle_time or math.inf, 100 / design.source.frequency)
    design = replace(design, simulation=replace(design.simulation, max_settle_time=limit))
    crest = replace(design.simulation, switch_on_phase=90.0)
    light = replace(design, loads=tuple(lighten(ld) for ld in design.loads))
    heavy_d = replace(design, loads=tuple(heavy(ld) for ld in design.loads), simulation=crest)
    cold = replace(design, loads=())
    res: dict[str, RunResult] = {
        names["light"]: simulate(light, eng, vscale=hi, regulation=False),
        names["heavy"]: simulate(heavy_d, eng, vscale=hi, regulation=False),
    }
    if tol:
        res[names["low"]] = simulate(heavy_d, eng, vscale=lo, regulation=False)
    res[names["cold"]] = simulate(cold, eng, vscale=hi, regulation=False)
    charged = res[names["cold"]]
    off = discharge(eng, design, end_state(charged.circuit, charged.steady.final.waves))
    return Corners(res, off, tol)
