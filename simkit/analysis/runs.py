"""One transient span in ngspice, and the state (capacitor voltages, inductor currents) between spans.

Every analysis is built from spans: a fresh ``.tran ... uic`` that starts from a given state
and runs a whole number of source periods.  A span that fails is tried once more with safer
options, then the simulation gives up with ngspice's own messages.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms
from simkit.errors import SimulationError
from simkit.netlist.circuit import Circuit, Transient, render

#: Options of the one retry after a failed span.
SAFE_OPTIONS = ("gmin=1e-10", "itl4=100", "rshunt=1e10")


@dataclass
class Run:
    """One completed transient: its deck, span and waveforms."""

    deck: str
    tstop: float
    waves: Waveforms
    ics: dict[str, float]
    retried: bool = False
    offset: float = 0.0  # s since switch-on at which the run starts (time functions continue)
    deck_span: float | None = None  # span of the exported deck when the run was pieced together
    refined: Run | None = None  # the highest-surge period simulated again at the fine step
    steps: int = 0  # steps per period (the maximum time step is period / steps)


def transient(design: Design, circuit: Circuit, tstop: float, steps: int, safe: bool = False,
              first: float | None = None) -> Transient:
    """The ``.tran`` of a span: maximum step one period / ``steps``; ``first`` makes ngspice's first step
    about a hundredth of it (the switch-on surge peaks at the very start)."""
    sim = design.simulation
    tmax = circuit.period / steps
    tstep = tmax * first if first is not None else tmax
    if safe:
        return Transient(tstop=tstop, tmax=tmax, reltol=max(sim.reltol, 1e-3), abstol=1e-8,
                         method="gear", extra_options=SAFE_OPTIONS, tstep=tstep)
    return Transient(tstop=tstop, tmax=tmax, reltol=sim.reltol, tstep=tstep)


def run_span(engine: Engine, design: Design, circuit: Circuit, tstop: float, ics: dict[str, float],
             steps: int, meas: list[str] | None = None, offset: float = 0.0, first: float | None = None) -> Run:
    """Run one span from ``ics``; on convergence trouble retry once with safer options, then give up.

    ``offset`` is the absolute time since switch-on at which the span starts (time functions
    such as keying continue from there).
    """
    deck = render(circuit, transient(design, circuit, tstop, steps, first=first), ics, meas, offset=offset)
    try:
        return Run(deck, tstop, engine.run(deck, tstop), ics, offset=offset, steps=steps)
    except SimulationError as failed:
        safe_deck = render(circuit, transient(design, circuit, tstop, steps, safe=True, first=first), ics, meas,
                           offset=offset)
        try:
            return Run(safe_deck, tstop, engine.run(safe_deck, tstop), ics, retried=True, offset=offset,
                       steps=steps)
        except SimulationError as second:
            raise SimulationError(
                f"ngspice could not complete the simulation of {design.origin} "
                f"(also not with safer options: {', '.join(SAFE_OPTIONS)}, method=gear)",
                deck=second.deck,
                log=second.log or failed.log,
                hint="give the winding a series resistance (source.resistance), give chokes "
                "their dcr and capacitors their esr, or check the part values for typing errors "
                "(for example mF instead of uF)",
            ) from None


def state_names(circuit: Circuit) -> list[str]:
    """The circuit's state variables: every capacitor (V) and inductor (A), in deck order."""
    return [e.name for e in circuit.state_elements()]


def end_nodes(circuit: Circuit, waves: Waveforms, t: float | None = None) -> dict[str, float]:
    """Every node's voltage at time t of a run (default: its end), keyed ``v(node)``: the start of the
    next span's node voltages (see :func:`simkit.netlist.circuit.render`)."""
    names = {n for e in circuit.elements for n in e.nodes if n != "0"}
    out: dict[str, float] = {}
    for n in sorted(names):
        y = waves.vectors.get(n)
        if y is not None:
            out[f"v({n})"] = float(y[-1] if t is None else np.interp(t, waves.time, y))
    return out


def end_state(circuit: Circuit, waves: Waveforms) -> dict[str, float]:
    """Capacitor voltages and inductor currents at the last time point."""
    state: dict[str, float] = {}
    for cap in circuit.capacitors:
        state[cap.name] = float(waves.v(cap.inner_plus)[-1] - waves.v(cap.inner_minus)[-1])
    for ind in circuit.inductors:
        state[ind.name] = float(waves.i(ind.name)[-1])
    return state


def restart_state(circuit: Circuit, waves: Waveforms) -> dict[str, float]:
    """Where a run ended, as the next span starts from it: the state and every node's voltage."""
    return {**end_state(circuit, waves), **end_nodes(circuit, waves)}


def state_at(circuit: Circuit, waves: Waveforms, t: float) -> dict[str, float]:
    """Capacitor voltages and inductor currents at time t of a run (interpolated)."""
    tt = waves.time
    state: dict[str, float] = {}
    for cap in circuit.capacitors:
        state[cap.name] = float(np.interp(t, tt, waves.v(cap.inner_plus) - waves.v(cap.inner_minus)))
    for ind in circuit.inductors:
        state[ind.name] = float(np.interp(t, tt, waves.i(ind.name)))
    return state


def merge(pieces: list[Run]) -> Waveforms:
    """One waveform set in absolute time from consecutive runs."""
    times = [p.waves.time + p.offset for p in pieces]
    vectors = {n: np.concatenate([p.waves.vectors[n] for p in pieces]) for n in pieces[0].waves.vectors}
    return Waveforms(time=np.concatenate(times), vectors=vectors)

