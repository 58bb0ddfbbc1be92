"""The operating corners `simkit check` simulates, each a design derived from the user's.

- ``high mains, light load``: the highest steady voltages (PIV, capacitor voltage);
- ``high mains, heavy load``: the highest currents and dissipations;
- ``low mains, heavy load``: the lowest voltages, the longest conduction;
- ``cold load, high mains``: the loads draw nothing (heaters cold, tubes pulled): the
  highest voltage any part can see in steady operation, the start of the discharge;
- ``switch-on``: empty capacitors, the source starting at the worst instant for its waveform
  (a sine's crest; the start of a square or modified sine's flat top), at high mains (the
  start-up run of the heavy corner);
- ``switch-off``: the source off and the load gone, from the cold corner's charge.

"Light" and "heavy" use what the design says a load can do: a keyed load's key-up and
key-down states, a stepped load's lightest and heaviest steps; a fixed load is what it is.
Without ``mains_tolerance`` the mains corners run at nominal mains and say so.  An inverter on a
``[battery]`` has the battery's corners instead: "high" at ``battery.high`` (on charge), "low" at
``battery.low`` (nearly discharged).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from simkit import progress
from simkit.analysis.discharge import Discharge, discharge
from simkit.analysis.steady import end_state
from simkit.design.loads import heavy, lighten
from simkit.design.model import Design
from simkit.design.sources import switch_on_words, worst_switch_on_phase
from simkit.engine.ngspice import Engine, get_engine
from simkit.pipeline import RunResult, simulate


@dataclass
class Corners:
    results: dict[str, RunResult]  # by corner name
    off: Discharge
    mains_tolerance: float | None
    battery: tuple[float, float] | None = None  # the battery's low and high voltage, when its corners ran
    switch_on: str = ""  # the switch-on instant in words, when not the crest of a sine

    @property
    def names(self) -> dict[str, str]:
        """The corners' names by role (light, heavy, low, cold, on, off)."""
        return corner_names(self.mains_tolerance, self.battery, self.switch_on)


def corner_names(tol: float | None, battery: tuple[float, float] | None = None, switch_on: str = "") -> dict[str, str]:
    """Each corner's name by role.  With ``battery`` (low, high volts) the supply's corners are the
    battery's; ``switch_on`` names the switch-on instant (default: the crest)."""
    hi = "high mains" if tol else "nominal mains (no mains_tolerance)"
    lo = "low mains" if tol else "nominal mains, low-mains corner skipped"
    if battery is not None:
        hi, lo = f"battery high ({battery[1]:.3g} V)", f"battery low ({battery[0]:.3g} V)"
    on = f"switch-on at {switch_on}" if switch_on else "switch-on at the crest"
    return {"light": f"{hi}, light load", "heavy": f"{hi}, heavy load", "low": f"{lo}, heavy load",
            "cold": f"cold load, {hi}", "on": f"{on}, {hi}", "off": "switch-off, load gone"}


def run_corners(design: Design, engine: Engine | None = None) -> Corners:
    eng = engine or get_engine()
    tol = design.source.mains_tolerance if design.source.kind != "inverter" else None
    hi, lo = (1 + tol, 1 - tol) if tol else (1.0, 1.0)
    bat = design.battery
    battery = (bat.low, bat.high) if bat is not None and design.source.inverter is not None else None
    worst = worst_switch_on_phase(design.source)
    words = switch_on_words(design.source, worst) if design.source.inverter is not None and \
        design.source.inverter.waveform != "sine" else ""
    names = corner_names(tol, battery, words)
    # Corners need no load or line regulation runs, and a corner that never settles (a glow tube that keeps
    # striking and going out) is cut at 100 periods with a warning.
    limit = min(design.simulation.max_settle_time or math.inf, 100 / design.source.frequency)
    design = replace(design, simulation=replace(design.simulation, max_settle_time=limit))
    crest = replace(design.simulation, switch_on_phase=worst)
    high_d = design if battery is None else replace(design, battery=bat.at("high"))  # type: ignore[union-attr]
    low_d = design if battery is None else replace(design, battery=bat.at("low"))  # type: ignore[union-attr]
    light = replace(high_d, loads=tuple(lighten(ld) for ld in design.loads))
    heavy_d = replace(high_d, loads=tuple(heavy(ld) for ld in design.loads), simulation=crest)
    heavy_lo = replace(low_d, loads=tuple(heavy(ld) for ld in design.loads), simulation=crest)
    cold = replace(high_d, loads=())
    runs = [("light", light, hi), ("heavy", heavy_d, hi)]
    if tol or battery is not None:
        runs.append(("low", heavy_lo, lo))
    runs.append(("cold", cold, hi))
    res: dict[str, RunResult] = {}
    for k, (role, d, scale) in enumerate(runs, start=1):
        with progress.stage(f"corner {k} of {len(runs) + 1}: {names[role]}"):
            res[names[role]] = simulate(d, eng, vscale=scale, regulation=False)
    charged = res[names["cold"]]
    with progress.stage(f"corner {len(runs) + 1} of {len(runs) + 1}: {names['off']}"):
        off = discharge(eng, design, end_state(charged.circuit, charged.steady.final.waves))
    return Corners(res, off, tol, battery, words)
