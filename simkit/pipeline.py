"""design -> netlist -> engine -> metrics: one design's figures, the core of every command."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from simkit import __version__
from simkit.analysis import metrics as mx
from simkit.analysis.steady import MEASURE_PERIODS, Run, SteadyState, steady_state, switch_on
from simkit.design.loader import design_to_inputs
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, get_engine
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Circuit
from simkit.units import spice

#: SPEC section 3 figures, in the order tables print them, with unit and meaning.
FIGURES: dict[str, tuple[str, str]] = {
    "vout_dc_v": ("V", "mean output voltage across the load"),
    "ripple_pp_v": ("V", "peak-to-peak output ripple"),
    "ripple_rms_v": ("V", "RMS of the output's AC part"),
    "iout_dc_a": ("A", "mean load current"),
    "diode_peak_a": ("A", "highest repetitive peak current in any rectifier diode"),
    "diode_avg_a": ("A", "highest mean current of any rectifier diode"),
    "diode_rms_a": ("A", "highest RMS current of any rectifier diode"),
    "diode_piv_v": ("V", "highest reverse voltage across any rectifier diode"),
    "surge_peak_a": ("A", "highest diode current after switch-on with empty capacitors"),
    "cap_peak_v": ("V", "highest voltage across any capacitor, switch-on included"),
    "reservoir_ripple_a": ("A", "RMS ripple current of the reservoir (highest stage) capacitor"),
    "source_rms_a": ("A", "RMS winding current (each half for centre-tap)"),
    "source_va": ("VA", "apparent power drawn from the winding(s)"),
    "settle_time_s": ("s", "simulated time until steady state was declared"),
}


@dataclass
class RunResult:
    design: Design
    circuit: Circuit
    metrics: dict[str, float]
    parts: dict[str, dict[str, Any]]
    warnings: list[str]
    steady: SteadyState
    start: Run
    window: tuple[float, float] = (0.0, 0.0)
    extra: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {
            "simkit": __version__,
            "design": self.design.title,
            "inputs": design_to_inputs(self.design),
            "metrics": {k: _clean(v) for k, v in self.metrics.items()},
            "parts": {k: {a: _clean(b) for a, b in v.items()} for k, v in self.parts.items()},
            "warnings": list(self.warnings),
        }

    @property
    def deck(self) -> str:
        """The steady-state deck with its .meas lines, as ``simkit netlist`` prints it."""
        return steady_deck(self)


def _clean(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def simulate(design: Design, engine: Engine | None = None, vscale: float = 1.0) -> RunResult:
    """Run both analyses of a design and compute every figure."""
    eng = engine or get_engine()
    start_circuit = build_circuit(design, phase_deg=design.simulation.switch_on_phase, vscale=vscale)
    start = switch_on(eng, design, start_circuit)
    circuit = build_circuit(design, phase_deg=0.0, vscale=vscale)
    steady = steady_state(eng, design, circuit, vscale)
    return figures(design, circuit, steady, start)


def figures(design: Design, circuit: Circuit, steady: SteadyState, start: Run) -> RunResult:
    w = steady.final.waves
    T = circuit.period
    t1 = steady.final.tstop
    t0 = t1 - MEASURE_PERIODS * T
    t = w.time
    vout = w.v(circuit.output)
    warnings: list[str] = list(steady.notes)
    parts: dict[str, dict[str, Any]] = {}

    m: dict[str, float] = {}
    m["vout_dc_v"] = mx.mean(t, vout, t0, t1)
    m["ripple_pp_v"] = mx.peak_to_peak(t, vout, t0, t1)
    m["ripple_rms_v"] = mx.ac_rms(t, vout, t0, t1)
    m["iout_dc_a"] = mx.mean(t, w.i(circuit.load_sense), t0, t1) if circuit.load_sense else 0.0

    ts = start.waves.time
    s0, s1 = float(ts[0]), float(ts[-1])
    half = min(s0 + T / 2, s1)
    for d in circuit.diodes:
        i = w.i(d.sense)
        vrev = w.v(d.cathode) - w.v(d.anode)
        i_on = start.waves.i(d.sense)
        vrev_on = start.waves.v(d.cathode) - start.waves.v(d.anode)
        parts[d.name] = {
            "role": "rectifier diode",
            "peak_a": mx.peak(t, i, t0, t1),
            "avg_a": mx.mean(t, i, t0, t1),
            "rms_a": mx.rms(t, i, t0, t1),
            "piv_v": mx.peak(t, vrev, t0, t1),
            "surge_peak_a": float(np.max(i_on)),
            "surge_i2t_a2s": mx.integral_square(ts, np.maximum(i_on, 0.0), s0, half),
            "switch_on_piv_v": float(np.max(vrev_on)),
        }
    diode_parts = [parts[d.name] for d in circuit.diodes]
    m["diode_peak_a"] = max(p["peak_a"] for p in diode_parts)
    m["diode_avg_a"] = max(p["avg_a"] for p in diode_parts)
    m["diode_rms_a"] = max(p["rms_a"] for p in diode_parts)
    m["diode_piv_v"] = max(p["piv_v"] for p in diode_parts)
    m["surge_peak_a"] = max(p["surge_peak_a"] for p in diode_parts)

    cap_peaks: list[float] = []
    reservoir_currents: list[float] = []
    for c in circuit.capacitors:
        if c.role == "snubber":
            continue
        v = w.v(c.plus) - w.v(c.minus)
        v_on = start.waves.v(c.plus) - start.waves.v(c.minus)
        ic = w.i(c.sense)
        peak = max(float(np.max(np.abs(v[t >= t0]))), float(np.max(np.abs(v_on))))
        entry = {
            "role": f"{c.role} capacitor",
            "value_f": c.value,
            "peak_v": peak,
            "dc_v": mx.mean(t, v, t0, t1),
            "ripple_pp_v": mx.peak_to_peak(t, v, t0, t1),
            "ripple_rms_a": mx.ac_rms(t, ic, t0, t1),
            "switch_on_peak_v": float(np.max(np.abs(v_on))),
        }
        esr = next((r.value for r in circuit.resistors if r.role == "esr" and r.a == c.inner_minus), 0.0)
        if esr:
            entry["esr_dissipation_w"] = mx.rms(t, ic, t0, t1) ** 2 * esr
        parts[c.name] = entry
        cap_peaks.append(peak)
        if c.role in ("reservoir", "stage"):
            reservoir_currents.append(entry["ripple_rms_a"])
    if not reservoir_currents:
        first = next((c for c in circuit.capacitors if c.role == "filter"), None)
        if first is not None:
            reservoir_currents.append(parts[first.name]["ripple_rms_a"])
    m["cap_peak_v"] = max(cap_peaks) if cap_peaks else 0.0
    m["reservoir_ripple_a"] = max(reservoir_currents) if reservoir_currents else 0.0

    for ind in circuit.inductors:
        i = w.i(ind.name)
        parts[ind.name] = {
            "role": "choke" if ind.role == "choke" else "winding leakage inductance",
            "value_h": ind.value,
            "dc_a": mx.mean(t, i, t0, t1),
            "rms_a": mx.rms(t, i, t0, t1),
            "peak_a": mx.peak(t, np.abs(i), t0, t1),
            "switch_on_peak_a": float(np.max(np.abs(start.waves.i(ind.name)))),
        }
        if ind.dcr:
            parts[ind.name]["dcr_dissipation_w"] = mx.rms(t, i, t0, t1) ** 2 * ind.dcr

    for r in circuit.resistors:
        if r.role in ("esr", "dcr", "snubber"):
            continue
        v = w.v(r.a) - w.v(r.b)
        parts[r.name] = {
            "role": {"filter": "filter resistor", "load": "load", "bleeder": "bleeder",
                     "winding": "winding resistance"}[r.role],
            "value_ohm": r.value,
            "dissipation_w": mx.mean(t, v * v, t0, t1) / r.value,
            "rms_a": mx.rms(t, v, t0, t1) / r.value,
            "peak_v": mx.peak(t, np.abs(v), t0, t1),
        }
    if circuit.load_kind == "current" and circuit.load_sense:
        i = w.i(circuit.load_sense)
        vl = w.v(circuit.output)
        parts["BLOAD"] = {"role": "load", "dc_a": mx.mean(t, i, t0, t1),
                          "dissipation_w": mx.mean(t, i * vl, t0, t1)}

    src_rms: list[float] = []
    va = 0.0
    for wd in circuit.windings:
        i = -w.i(wd.name)
        irms = mx.rms(t, i, t0, t1)
        src_rms.append(irms)
        va += wd.vrms * irms
        parts[wd.name] = {
            "role": "winding",
            "vrms_v": wd.vrms,
            "rms_a": irms,
            "peak_a": mx.peak(t, np.abs(i), t0, t1),
            "apparent_power_va": wd.vrms * irms,
            "surge_peak_a": float(np.max(np.abs(start.waves.i(wd.name)))),
        }
    m["source_rms_a"] = max(src_rms)
    m["source_va"] = va
    m["settle_time_s"] = steady.settle_time

    if steady.final.retried:
        warnings.append("ngspice needed safer options (method=gear) to converge; figures may be less precise")
    if design.source.resistance == 0 and design.source.inductance == 0:
        warnings.append("source.resistance is 0: the switch-on surge is limited only by the diode's own "
                        "resistance; give the winding resistance for a real surge figure")
    if m["vout_dc_v"] < 0:
        warnings.append("the output is negative: check the topology and the load")
    return RunResult(design, circuit, m, parts, warnings, steady, start, (t0, t1))


def measure_lines(circuit: Circuit, t0: float, t1: float) -> list[str]:
    """``.meas`` lines for the figures a transient measurement can give, over [t0, t1]."""
    win = f"from={spice(t0, 12)} to={spice(t1, 12)}"
    out = circuit.output
    lines = [
        f".meas tran vout_dc_v AVG v({out}) {win}",
        f".meas tran ripple_pp_v PP v({out}) {win}",
    ]
    if circuit.load_sense:
        lines.append(f".meas tran iout_dc_a AVG i({circuit.load_sense.lower()}) {win}")
    for wd in circuit.windings:
        lines.append(f".meas tran source_rms_a_{wd.name.lower()} RMS i({wd.name.lower()}) {win}")
    for d in circuit.diodes:
        lines.append(f".meas tran diode_peak_a_{d.name.lower()} MAX i({d.sense.lower()}) {win}")
        lines.append(f".meas tran diode_avg_a_{d.name.lower()} AVG i({d.sense.lower()}) {win}")
    return lines


def steady_deck(result: RunResult) -> str:
    """The final steady-state deck with .meas lines: what `simkit netlist` prints."""
    from simkit.analysis.steady import transient
    from simkit.netlist.circuit import render

    run = result.steady.final
    t0, t1 = result.window
    header = [
        f"steady-state run of {result.design.title}",
        f"initial conditions: the state after {result.steady.settle_time - run.tstop:.6g} s of "
        "settling from the closed-form estimate",
        f"figures over the last {MEASURE_PERIODS} periods, from {t0:.6g} s to {t1:.6g} s",
    ]
    tran = transient(result.design, result.circuit, run.tstop, safe=run.retried)
    return render(result.circuit, tran, run.ics, measure_lines(result.circuit, t0, t1), header)


def switch_on_deck(result: RunResult) -> str:
    """The switch-on deck (empty capacitors, source from ``switch_on_phase``) with .meas lines."""
    from simkit.analysis.steady import transient
    from simkit.netlist.build import build_circuit
    from simkit.netlist.circuit import render

    d = result.design
    run = result.start
    circuit = build_circuit(d, phase_deg=d.simulation.switch_on_phase)
    header = [f"switch-on run of {d.title}",
              f"all capacitors empty, source starting at {d.simulation.switch_on_phase:g} degrees"]
    meas = [f".meas tran surge_peak_a_{x.name.lower()} MAX i({x.sense.lower()})" for x in circuit.diodes]
    meas += [f".meas tran cap_peak_v_{c.name.lower()} MAX v({c.plus},{c.minus})" if c.minus != "0"
             else f".meas tran cap_peak_v_{c.name.lower()} MAX v({c.plus})"
             for c in circuit.capacitors if c.role != "snubber"]
    tran = transient(d, circuit, run.tstop, safe=run.retried)
    return render(circuit, tran, run.ics, meas, header)
