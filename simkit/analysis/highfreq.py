"""The high-frequency analysis: a few periods from the steady state with the diodes' real dynamics, at a fine step.

The steady state is found with diodes that store no charge and have no junction capacitance
(docs/engine-notes.md#tt-cjo): fast, and right for every figure of the steady state.  What a
receiver hears as hash (the ringing at each diode's turn-off and the edges of an inverter)
needs both.  This analysis takes the periodic state the steady-state engine found and runs
``HF_PERIODS`` periods of the same circuit with the diodes' transit time and junction
capacitance (:func:`simkit.parts.diodes.dynamics`): the first period lets the stored charge
and the snubbers' ringing settle into their own periodic pattern, the last is measured.

The step: ngspice's maximum time step is the smallest of

- one period / ``MIN_STEPS`` (as fine as the finest steady-state step);
- 1 / (``POINTS_PER_CYCLE`` x the hash band's lower edge): the output's content above
  ``simulation.hash_band`` is resolved;
- 1 / (``POINTS_PER_CYCLE`` x the ring estimate), the ring the snubber across the diodes (the
  design's, or simkit's across the winding) forms with the inductance that feeds them,
  f = 1 / (2 pi sqrt(L C)); with no snubber, the diode's own junction capacitance at the
  estimated reverse voltage.

Within it ngspice's truncation-error control takes steps as short as each turn-off needs.
Where inductance feeds the diodes the integration is the trapezoid rule: it keeps an L-C
ring's energy, where Gear's method damps it (measured here: an L = 10 mH, C = 10 pF,
R = 20 ohm ring, 316 V at the start, should fall to 116 V after 1 ms; the trapezoid rule gave
120 V, Gear 0.85 V; docs/engine-notes.md#hf-step).  With no series inductance nothing rings
through the winding, and the diodes are commutated hard (an inverter's edge through its output
resistance): there the engine's safer options (Gear's method, reltol 1e-3, gmin, rshunt), which
the trapezoid rule could not replace (measured here: "timestep too small" at a modified-sine
edge, also with Gear alone at reltol 1e-5 to 1e-3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from simkit.analysis.runs import SAFE_OPTIONS, Run, end_nodes, run_span, transient
from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.errors import SimulationError
from simkit.netlist.build import SNUB_C, build_circuit
from simkit.netlist.circuit import Circuit, render
from simkit.parts.diodes import junction_capacitance

#: Periods of the high-frequency run: the first settles the diodes' charge and the ringing, the last is measured.
HF_PERIODS = 2
#: The maximum step is at most one period over this.
MIN_STEPS = 2000
#: Points in one cycle of the hash band's edge and of the estimated ring.
POINTS_PER_CYCLE = 20


@dataclass
class HighFreqRun:
    """The high-frequency run, its circuit, and the window its figures are taken over."""

    run: Run
    circuit: Circuit
    window: tuple[float, float]  # s, the measured (last) period, in the run's time
    step: float  # s, the maximum time step
    ring_estimate_hz: float  # the ring the step was chosen for (0: none expected)
    method: str = "trap"  # ngspice's integration method


def ring_estimate(design: Design, piv: float = 0.0) -> float:
    """The frequency of the ring at a diode's turn-off, Hz: f = 1 / (2 pi sqrt(L C)), 0 when no inductance
    feeds the diodes.

    L is the winding's series inductance; C the snubber across the diodes (the design's), else
    across the winding (the design's, or simkit's automatic one), else the diode's junction
    capacitance at ``piv`` / 2 (the reverse voltage half way through its rise).
    """
    src = design.source
    L = src.inductance
    if L <= 0:
        return 0.0
    if design.rectifier.snubber is not None:
        c = design.rectifier.snubber.c
    elif src.snubber is not None:
        c = src.snubber.c
    else:
        c = SNUB_C
    c += junction_capacitance(design.rectifier.diode, piv / 2)
    return 1.0 / (2 * math.pi * math.sqrt(L * c))


def step(design: Design, piv: float = 0.0) -> tuple[float, float]:
    """The maximum time step of the high-frequency run, s, and the ring estimate it resolves, Hz."""
    T = design.source.period
    f_ring = ring_estimate(design, piv)
    limits = [T / MIN_STEPS, 1.0 / (POINTS_PER_CYCLE * design.simulation.hash_band)]
    if f_ring > 0:
        limits.append(1.0 / (POINTS_PER_CYCLE * f_ring))
    return min(limits), f_ring


def points(design: Design, piv: float = 0.0) -> float:
    """Time points the high-frequency run takes at least (its span over its maximum step)."""
    return HF_PERIODS * design.source.period / step(design, piv)[0]


def saved(circuit: Circuit) -> list[str]:
    """The vectors the figures need: every diode's terminals and current, the filter nodes and the output,
    the battery current, the snubbers' resistors; ``.save`` lines keep ngspice from storing the rest of
    a long fine run."""
    nodes = {circuit.output, circuit.rectified, *circuit.section_nodes}
    for d in circuit.diodes:
        nodes.update((d.anode, d.cathode))
    nodes.update(n for n in ("ib",) if n in circuit.battery_nodes)
    for r in circuit.resistors:  # the snubbers' resistors: their dissipation with the ringing
        if r.role == "snubber":
            nodes.update((r.a, r.b))
    nodes.discard("0")
    names = [f"v({n})" for n in sorted(nodes)] + [f"i({d.sense.lower()})" for d in circuit.diodes]
    return [".save " + " ".join(names[k:k + 8]) for k in range(0, len(names), 8)]


def high_frequency(engine: Engine, design: Design, steady: Run, steady_circuit: Circuit, vscale: float = 1.0,
                   piv: float = 0.0) -> HighFreqRun:
    """Run ``HF_PERIODS`` periods from the steady state ``steady`` (its start state) with the diodes' dynamics.

    ``steady_circuit`` is the circuit the steady state was found for (same elements, diodes without
    dynamics); ``piv`` the steady state's highest reverse voltage, for the ring estimate.
    """
    circuit = build_circuit(design, phase_deg=0.0, vscale=vscale, dynamics=True)
    T = circuit.period
    tmax, f_ring = step(design, piv)
    # The periodic state where the final steady period began, and its node voltages there (which are
    # those at its end: it is periodic) as the starting point of ngspice's first solution.
    ics = {k: v for k, v in steady.ics.items() if not k.startswith("v(")}
    ics.update(end_nodes(steady_circuit, steady.waves))
    steps = max(math.ceil(T / tmax - 1e-9), 1)
    method = "trap" if design.source.inductance > 0 else "gear"
    # With inductance the trapezoid rule at the design's reltol (and, should it fail, the one retry with the
    # engine's safer options); with nothing to ring those safer options (Gear, reltol 1e-3, gmin, rshunt)
    # at once: they take the hard commutation an inverter's edge gives.  A failed run is not run again as it was.
    if method == "trap":
        run = run_span(engine, design, circuit, HF_PERIODS * T, ics, steps, meas=saved(circuit))
    else:
        deck = render(circuit, transient(design, circuit, HF_PERIODS * T, steps, safe=True), ics, saved(circuit))
        try:
            run = Run(deck, HF_PERIODS * T, engine.run(deck, HF_PERIODS * T), ics, steps=steps)
        except SimulationError as failed:
            raise SimulationError(
                f"ngspice could not complete the high-frequency run of {design.origin} (with its safer options: "
                f"{', '.join(SAFE_OPTIONS)}, method=gear)", deck=failed.deck, log=failed.log,
                hint="give the winding a series resistance (source.resistance) and the parts their esr and dcr, "
                "or leave the high-frequency analysis out (simulation.hash = false)") from None
    return HighFreqRun(run, circuit, ((HF_PERIODS - 1) * T, HF_PERIODS * T), T / steps, f_ring, method)
