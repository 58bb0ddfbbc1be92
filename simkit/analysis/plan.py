"""What each analysis of a design will cost, known before anything runs.

Cost is counted in time points: simulated span x steps per period / period.  On a typical PC
ngspice does a few hundred thousand points a second for these circuits, so the default limit
(``simulation.max_points``, 2e7) is about a minute of simulation.  A design whose estimate is
beyond the limit is refused with the estimate (exit 2) instead of running for hours.

The estimates are upper bounds of what simkit will run, from the design's own time constants:

- steady state: Newton's Jacobian (one coarse period per state variable) and a dozen periods
  at the measuring step, or at most ``max_settle_time`` when it falls back to time stepping;
- switch-on: the first periods at the measuring step, then the coarse run until the output
  has risen (the charging time of the filter capacitors through the source impedance, an
  estimate derived here: about C |Z| pi/2 ln 10 for a full-wave rectifier), the LC overshoot
  and the timeline (warm-ups, load steps), capped by the start-up limit;
- steady keying: a lead-in and a keying cycle, twice (a slow circuit runs on);
- regulation: three more steady states;
- switch-off (``check`` only): a fixed 4000 points.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from simkit.analysis import startup, steady
from simkit.design.model import Design
from simkit.netlist.circuit import Circuit

#: Steps per period assumed for the measuring step when the design does not fix it.
TYPICAL_STEPS = 500
#: Lead-in-and-cycle spans assumed per keyed run.
KEYED_CHUNKS = 2
#: Time points a period of the keyed run takes, typically (analysis/keyed.py: at most 50 steps a period, but
#: ngspice's error control adds points at every diode edge; 80 to 370 measured, docs/engine-notes.md#keyed-step).
KEYED_POINTS = 300


@dataclass(frozen=True)
class Cost:
    """One analysis: how much simulated time, at how many steps per period, in how many points."""

    analysis: str
    span: float  # s
    points: float


def rise_estimate(design: Design, circuit: Circuit) -> float:
    """Time for the output to rise to 90 % after switch-on, s (an order of magnitude, derived here).

    Each filter capacitor charges through the source impedance |Z| = |Rs + j w L| (and the
    series resistors before it); a rectifier conducting on one (two) half cycles delivers
    on average about 1/pi (2/pi) of (Vpk - v)/|Z|, so reaching 90 % takes about
    C |Z| pi/k ln 10 with k = 1 (half-wave) or 2.  Multipliers need about stages^2 times more.
    """
    s = design.source
    w = 2 * math.pi * s.frequency
    z = math.hypot(s.resistance, w * s.inductance) + 1e-3
    topo = design.rectifier.topology
    k = 1.0 if topo in ("half-wave", "cascade", "doubler") else 2.0
    t = 0.0
    series = 0.0
    for sec in design.filters:
        if sec.kind == "c":
            t += sec.value * (z + series) * math.pi / k * math.log(10)
        elif sec.kind == "r":
            series += sec.value
        else:
            series += sec.dcr
    if topo in ("doubler", "cascade") and design.rectifier.capacitance:
        n = design.rectifier.stages if topo == "cascade" else 1
        t += design.rectifier.capacitance * z * math.pi * math.log(10) * 2 * n * n
    return t


def estimate(design: Design, circuit: Circuit, keyed_cycle: float = 0.0) -> list[Cost]:
    """The cost of every analysis ``simkit run`` does for this design."""
    T = circuit.period
    sim = design.simulation
    steps = sim.steps_per_period or TYPICAL_STEPS
    n = len(circuit.state_elements())
    max_settle = sim.max_settle_time if sim.max_settle_time is not None else steady.MAX_PERIODS * T
    newton = (2 * (n + 1) * steady.JACOBIAN_STEPS + 16 * steps) * 1.0
    fallback = max_settle / T * steps
    costs = [Cost("steady state", max_settle, newton + fallback)]
    on_span = max(startup.overshoot_span(design, circuit), rise_estimate(design, circuit),
                  startup.timeline_end(design))
    on_span = min(on_span, startup.start_limit(design, circuit))
    fine = startup.FINE_START_PERIODS * T
    coarse = max(on_span - fine, 0.0) / T * startup.coarse_steps(design)
    costs.append(Cost("switch-on", on_span, fine / T * steps + coarse))
    if keyed_cycle > 0:
        # At most a whole cycle of lead-in and a cycle, twice over (a slow circuit runs on); ngspice's own
        # error control takes about KEYED_POINTS points a period at the keyed run's tolerance.
        span = max(math.ceil(2 * keyed_cycle / T), 4) * T * KEYED_CHUNKS
        costs.append(Cost("steady keying", span, span / T * KEYED_POINTS + costs[0].points))
    if design.regulator is not None:
        costs.append(Cost("regulation", 3 * 60 * T, 3 * costs[0].points))
    return costs
