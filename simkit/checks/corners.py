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
key-down states, a stepped load's lightest and heaviest steps.  Corners that would be the
same circuit are one corner, run once and named once: a fixed load has one loaded corner
("high mains, fixed load"), and a supply with no load at all one steady corner
("high mains, no load").  Without ``mains_tolerance`` the mains corners run at nominal
mains and say so.  An inverter on a ``[battery]`` has the battery's corners instead: "high"
at ``battery.high`` (on charge), "low" at ``battery.low`` (nearly discharged).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from simkit import progress
from simkit.analysis.discharge import Discharge, discharge
from simkit.analysis.steady import end_state
from simkit.design.loads import heavy, lighten, varies
from simkit.design.model import Design
from simkit.design.sources import switch_on_words, worst_switch_on_phase
from simkit.engine.ngspice import Engine, get_engine
from simkit.pipeline import RunResult, simulate

#: The roles of the corners, in the order they are simulated and listed.
ROLES = ("light", "heavy", "low", "cold", "on", "off")


@dataclass
class Corners:
    results: dict[str, RunResult]  # by corner name (one entry per run)
    off: Discharge | None
    mains_tolerance: float | None
    names: dict[str, str] = field(default_factory=dict)  # role (ROLES) -> corner name; shared runs share a name
    state: dict[str, float] = field(default_factory=dict)  # the cold corner's end state (where switch-off starts)

    def __post_init__(self) -> None:
        if not self.names:
            self.names = corner_names(self.mains_tolerance)


def corner_names(tol: float | None, loads_vary: bool = True, loaded: bool = True,
                 battery: tuple[float, float] | None = None, switch_on: str = "") -> dict[str, str]:
    """The name of each corner role; roles that are the same circuit get the same name.

    Parameters
    ----------
    tol : float or None
        The source's mains tolerance (None: the mains corners are at nominal mains).
    loads_vary : bool
        Some load has lighter and heavier states (keyed, stepped); else light and heavy are one corner.
    loaded : bool
        The design has a load at all; else the loaded corners and the cold one are one corner.
    battery : (float, float) or None
        The battery's low and high voltage: the supply's corners are then the battery's.
    switch_on : str
        The switch-on instant in words (default: the crest).
    """
    hi = "high mains" if tol else "nominal mains (no mains_tolerance)"
    lo = "low mains" if tol else "nominal mains, low-mains corner skipped"
    if battery is not None:
        hi, lo = f"battery high ({battery[1]:.3g} V)", f"battery low ({battery[0]:.3g} V)"
    if not loaded:
        steady = f"{hi}, no load"
        names = {"light": steady, "heavy": steady, "low": f"{lo}, no load", "cold": steady}
    elif not loads_vary:
        fixed = f"{hi}, fixed load"
        names = {"light": fixed, "heavy": fixed, "low": f"{lo}, fixed load", "cold": f"cold load, {hi}"}
    else:
        names = {"light": f"{hi}, light load", "heavy": f"{hi}, heavy load", "low": f"{lo}, heavy load",
                 "cold": f"cold load, {hi}"}
    on = f"switch-on at {switch_on}" if switch_on else "switch-on at the crest"
    return {**names, "on": f"{on}, {hi}", "off": "switch-off, load gone"}


def _battery(design: Design) -> tuple[float, float] | None:
    bat = design.battery
    return (bat.low, bat.high) if bat is not None and design.source.inverter is not None else None


def _switch_on(design: Design) -> tuple[float, str]:
    """The worst switch-on instant for the source's waveform (degrees) and, for a non-sine, its words."""
    worst = worst_switch_on_phase(design.source)
    inv = design.source.inverter
    return worst, (switch_on_words(design.source, worst) if inv is not None and inv.waveform != "sine" else "")


def _settle_limited(design: Design) -> Design:
    """Corners need no load or line regulation runs, and a corner that never settles (a glow tube that keeps
    striking and going out) is cut at 100 periods with a warning."""
    limit = min(design.simulation.max_settle_time or math.inf, 100 / design.source.frequency)
    return replace(design, simulation=replace(design.simulation, max_settle_time=limit))


def design_corner_names(design: Design) -> dict[str, str]:
    """:func:`corner_names` for a design."""
    return corner_names(design.mains_corners, any(varies(ld) for ld in design.loads), bool(design.loads),
                        _battery(design), _switch_on(design)[1])


def run_corners(design: Design, engine: Engine | None = None) -> Corners:
    eng = engine or get_engine()
    tol = design.mains_corners
    lo = 1 - tol if tol else 1.0
    names = design_corner_names(design)
    battery = _battery(design)
    heavy_d, hi = heavy_corner(design)  # the one heavy corner, here and for fixes simulated again
    design = _settle_limited(design)
    high_d = replace(heavy_d, loads=design.loads, simulation=design.simulation)
    light = replace(high_d, loads=tuple(lighten(ld) for ld in design.loads))
    heavy_lo = heavy_d if battery is None else replace(heavy_d, battery=design.battery.at("low"))  # type: ignore[union-attr]
    cold = replace(high_d, loads=())
    runs: list[tuple[str, Design, float]] = []
    if names["light"] != names["heavy"]:
        runs.append(("light", light, hi))
    runs.append(("heavy", heavy_d, hi))
    if tol or battery is not None:
        runs.append(("low", heavy_lo, lo))
    if names["cold"] not in {names[r] for r, _, _ in runs}:
        runs.append(("cold", cold, hi))
    res: dict[str, RunResult] = {}
    for k, (role, d, scale) in enumerate(runs, start=1):
        with progress.stage(f"corner {k} of {len(runs) + 1}: {names[role]}"):
            res[names[role]] = simulate(d, eng, vscale=scale, regulation=False)
    charged = res[names["cold"]]
    state = end_state(charged.circuit, charged.steady.final.waves)
    with progress.stage(f"corner {len(runs) + 1} of {len(runs) + 1}: {names['off']}"):
        off = discharge(eng, design, state)
    return Corners(res, off, tol, names, state)


def heavy_corner(design: Design) -> tuple[Design, float]:
    """The heavy corner's design (loads at their heaviest, switch-on at the crest) and its mains scale, for
    simulating a changed design at that corner again (a fix that must be checked by simulation)."""
    tol = design.mains_corners
    design = _settle_limited(design)
    sim = replace(design.simulation, switch_on_phase=_switch_on(design)[0])
    bat = design.battery
    high_d = design if _battery(design) is None else replace(design, battery=bat.at("high"))  # type: ignore[union-attr]
    return replace(high_d, loads=tuple(heavy(ld) for ld in design.loads), simulation=sim), (1 + tol if tol else 1.0)


def nominal_corners(result: RunResult) -> Corners:
    """One run taken as every corner (``simkit run``'s count of ratings exceeded at nominal conditions)."""
    names = {role: "nominal" for role in ROLES}
    names["on"] = "switch-on, nominal"
    return Corners({"nominal": result}, None, None, names)
