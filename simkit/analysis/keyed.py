"""Steady keying: a keyed load switched by its keying pattern until the pattern repeats.

The run starts from the periodic state at the duty-weighted mean load and goes on in chunks of
whole source periods covering at least two keying cycles, each from the end state of the last,
until the output's mean over the last two complete keying cycles agrees to 1e-3 (the keying and
the mains are not in step, so the cycles differ at the ripple level).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from simkit.analysis import metrics
from simkit.analysis.runs import Run, end_nodes, end_state, run_span
from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.netlist.circuit import Circuit


@dataclass
class KeyedRun:
    """Steady keying: the last chunk, and the keying cycle the figures are taken over."""

    run: Run
    cycle: float  # s
    window: tuple[float, float]  # absolute times of the last complete keying cycle
    settled: bool
    simulated: float  # s
    circuit: Circuit | None = None


def keyed_steady(engine: Engine, design: Design, circuit: Circuit, start: dict[str, float],
                 cycle: float, steps: int) -> KeyedRun:
    """Key the load from ``start`` (the duty-weighted steady state) until the keying is periodic."""
    T = circuit.period
    n = max(math.ceil(2 * cycle / T - 1e-9), 4)
    span = n * T
    offset = 0.0
    ics = start
    out = circuit.output
    last: Run | None = None
    window = (0.0, cycle)
    for _ in range(30):
        run = run_span(engine, design, circuit, span, ics, steps, offset=offset)
        last = run
        t = run.waves.time + offset
        v = run.waves.v(out)
        k_last = math.floor((offset + span) / cycle + 1e-9)
        c1 = (k_last - 1) * cycle, k_last * cycle
        c0 = (k_last - 2) * cycle, (k_last - 1) * cycle
        window = c1
        if c0[0] >= offset - 1e-12:
            m1 = metrics.mean(t, v, *c1)
            m0 = metrics.mean(t, v, *c0)
            if abs(m1 - m0) <= 1e-3 * max(abs(m1), 1e-9):
                return KeyedRun(run, cycle, window, True, offset + span, circuit)
        ics = {**end_state(circuit, run.waves), **end_nodes(circuit, run.waves)}
        offset += span
        if offset > 120.0:
            break
    assert last is not None
    return KeyedRun(last, cycle, window, False, offset + span, circuit)
