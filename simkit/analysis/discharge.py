"""Switch-off: how fast the supply's capacitors discharge once the source is off and the load is gone.

The circuit is the design's own with every load removed and the source EMF at zero; it
starts from a steady state (the charged supply) and runs until every capacitor is below
the safe voltage or the time limit passes.  The bleeder, filter resistors and balancing
resistors do the discharging; a capacitor nothing discharges keeps its charge, and the
figure says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Circuit, Transient, render

#: Points per discharge run (the maximum step is the span over this).
STEPS = 4000


@dataclass
class Discharge:
    """Per capacitor: its voltage at switch-off and when it falls below the safe voltage for good."""

    start_v: dict[str, float]  # V
    time_to_safe: dict[str, float]  # s; inf when still above at the end of the run
    span: float  # s simulated
    safe_voltage: float  # V
    circuit: Circuit
    time: np.ndarray
    voltages: dict[str, np.ndarray]

    @property
    def worst(self) -> tuple[str, float]:
        name = max(self.time_to_safe, key=lambda k: self.time_to_safe[k])
        return name, self.time_to_safe[name]


def discharge(engine: Engine, design: Design, state: dict[str, float], span: float | None = None) -> Discharge:
    """Simulate switch-off from ``state`` (capacitor voltages and inductor currents by element name)."""
    pol = design.checks
    off = replace(design, loads=())
    inv = design.source.inverter
    if inv is not None and inv.waveform != "sine":
        # The source is off: a square wave's edges at zero amplitude would only cost the run its time steps.
        off = replace(off, source=replace(inv, waveform="sine", peak_given=None))
    circuit = build_circuit(off, phase_deg=0.0, vscale=0.0)
    span = span or max(20 * pol.safe_time, 60.0)
    caps = [c for c in circuit.capacitors if c.is_part]
    ics = {k: v for k, v in state.items() if k in {e.name for e in circuit.state_elements()}}
    tran = Transient(tstop=span, tmax=span / STEPS, reltol=1e-4)
    deck = render(circuit, tran, ics, header=["switch-off: source at zero, load gone"])
    waves = engine.run(deck, span)
    t = waves.time
    start_v: dict[str, float] = {}
    when: dict[str, float] = {}
    volts: dict[str, np.ndarray] = {}
    named = [(c.name, np.abs(waves.v(c.plus) - waves.v(c.minus))) for c in caps]
    named.append(("output", np.abs(waves.v(circuit.output))))
    for name, v in named:
        volts[name] = v
        start_v[name] = float(v[0])
        when[name] = time_below(t, v, pol.safe_voltage)
    return Discharge(start_v, when, span, pol.safe_voltage, circuit, t, volts)


def time_below(t: np.ndarray, v: np.ndarray, limit: float) -> float:
    """When v falls below limit for good (interpolated), s; inf if it is still above at the end."""
    above = np.nonzero(v >= limit)[0]
    if len(above) == 0:
        return 0.0
    k = int(above[-1])
    if k == len(v) - 1:
        return math.inf
    t0, t1, v0, v1 = t[k], t[k + 1], v[k], v[k + 1]
    return float(t0 + (v0 - limit) * (t1 - t0) / (v0 - v1)) if v0 != v1 else float(t1)
