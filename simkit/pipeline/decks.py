"""The decks a user can run by hand: the steady-state period and the switch-on run, with ``.meas`` lines.

``ngspice -b`` on them prints the figures ``simkit run`` reports (the measurement window of the
steady deck, the surge and capacitor peaks of the switch-on deck).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from simkit.analysis.runs import end_nodes, transient
from simkit.analysis.startup import SURGE_FIRST_STEP
from simkit.analysis.steady import MEASURE_PERIODS
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Circuit, render
from simkit.units import spice

if TYPE_CHECKING:  # results import this module for RunResult.deck; this one needs only the type
    from simkit.pipeline.results import RunResult


def measure_lines(circuit: Circuit, t0: float, t1: float) -> list[str]:
    """``.meas`` lines for the figures a transient measurement can give, over [t0, t1]."""
    win = f"from={spice(t0, 12)} to={spice(t1, 12)}"
    out = circuit.output
    lines = [
        f".meas tran vout_dc_v AVG v({out}) {win}",
        f".meas tran ripple_pp_v PP v({out}) {win}",
    ]
    if len(circuit.loads) == 1:
        lines.append(f".meas tran iout_dc_a AVG i({circuit.loads[0].sense.lower()}) {win}")
    else:
        for ld in circuit.loads:
            lines.append(f".meas tran iout_dc_a_{ld.name.lower()} AVG i({ld.sense.lower()}) {win}")
    for wd in circuit.windings:
        lines.append(f".meas tran source_rms_a_{wd.name.lower()} RMS i({wd.name.lower()}) {win}")
    for d in circuit.diodes:
        lines.append(f".meas tran diode_peak_a_{d.name.lower()} MAX i({d.sense.lower()}) {win}")
        lines.append(f".meas tran diode_avg_a_{d.name.lower()} AVG i({d.sense.lower()}) {win}")
    return lines


def steady_deck(result: RunResult) -> str:
    """The final steady-state deck with .meas lines: what `simkit netlist` prints."""
    run = result.steady.final
    t0, t1 = result.window
    header = [
        f"steady-state run of {result.design.title}",
        f"initial conditions: the periodic state ({result.steady.method}, {result.steady.settle_time:.6g} s "
        "simulated from the closed-form estimate)",
        f"figures over the last {MEASURE_PERIODS} period(s), from {t0:.6g} s to {t1:.6g} s",
    ]
    tran = transient(result.design, result.circuit, run.tstop, run.steps, safe=run.retried)
    # The node voltages where the period ended are those of its start (it is periodic): ngspice then
    # begins from a solved point, and its .meas see the same waveform simkit measured.
    ics = {**{k: v for k, v in run.ics.items() if not k.startswith("v(")}, **end_nodes(result.circuit, run.waves)}
    return render(result.circuit, tran, ics, measure_lines(result.circuit, t0, t1), header)


def switch_on_deck(result: RunResult) -> str:
    """The switch-on deck (empty capacitors, source from ``switch_on_phase``) with .meas lines."""
    d = result.design
    run = result.start
    circuit = build_circuit(d, phase_deg=d.simulation.switch_on_phase, mode="start")
    header = [f"switch-on run of {d.title}",
              f"all capacitors empty, source starting at {d.simulation.switch_on_phase:g} degrees"]
    meas = [f".meas tran surge_peak_a_{x.name.lower()} MAX i({x.sense.lower()})" for x in circuit.diodes]
    meas += [f".meas tran cap_peak_v_{c.name.lower()} MAX v({c.plus},{c.minus})" if c.minus != "0"
             else f".meas tran cap_peak_v_{c.name.lower()} MAX v({c.plus})"
             for c in circuit.capacitors if c.is_part]
    tran = transient(d, circuit, run.deck_span or run.tstop, run.steps, safe=run.retried, first=SURGE_FIRST_STEP)
    return render(circuit, tran, run.ics, meas, header)
