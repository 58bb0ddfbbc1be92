"""design -> netlist -> engine -> metrics: one design's figures, the core of every command."""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from simkit import __version__
from simkit.analysis import metrics as mx
from simkit.analysis import plan
from simkit.analysis.keyed import KeyedRun, keyed_steady
from simkit.analysis.runs import Run, end_nodes, end_state, transient
from simkit.analysis.startup import SURGE_FIRST_STEP, start_limit, switch_on
from simkit.analysis.steady import MEASURE_PERIODS, Progress, Solution, SteadyState, steady_state
from simkit.design.loader import design_to_inputs
from simkit.design.loads import lighten
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms, get_engine
from simkit.errors import DesignError
from simkit.netlist.build import build_circuit, keying_drive
from simkit.netlist.circuit import Circuit
from simkit.units import spice

#: The figures of docs/reference.md (Figures), in the order tables print them, with unit and meaning.
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
    "settle_time_s": ("s", "simulated time until steady state was declared (every span of the search)"),
    # Start-up run (every design; the warm-up figures only when a load has a warmup).
    "rise_time_s": ("s", "from switch-on until the output first reaches 90 % of vout_dc_v"),
    "cap_peak_warmup_v": ("V", "highest capacitor voltage before the loads draw current (heaters warming)"),
    "vout_warmup_v": ("V", "highest output voltage before the loads draw current"),
    # Battery and inverter (with a [battery]).
    "battery_current_a": ("A", "mean battery current in steady state"),
    "battery_peak_current_a": ("A", "highest battery current in steady state"),
    "battery_voltage_v": ("V", "mean battery terminal voltage under load"),
    "input_power_w": ("W", "mean power drawn from the battery"),
    "output_power_w": ("W", "mean power the inverter delivers"),
    "efficiency": ("", "output_power_w / input_power_w"),
    "runtime_h": ("h", "usable capacity / battery_current_a (no Peukert correction)"),
    # Steady keying (a keyed load; the first one when there are several).
    "vout_keydown_v": ("V", "mean output over the key-down intervals of a keying cycle"),
    "vout_keyup_v": ("V", "mean output over the key-up intervals of a keying cycle"),
    "sag_v": ("V", "vout_keyup_v - vout_keydown_v"),
    "sag_pct": ("%", "sag_v as a percentage of vout_keyup_v"),
    "recovery_time_s": ("s", "after the longest key-down edge, until the output stays within 1 % of vout_keydown_v"),
    "overshoot_v": ("V", "highest output after key-up above vout_keyup_v"),
    "ripple_keydown_pp_v": ("V", "output ripple over the last period of the longest key-down interval"),
    "droop_v": ("V", "fall of the output's one-period mean from the start to the end of the longest key-down"),
    "keying_cycle_s": ("s", "length of one keying cycle (one repetition of the Morse text)"),
    "chirp_hz": ("Hz", "pushing_hz_per_v x the output's peak-to-peak change during a dot"),
    "battery_keydown_current_a": ("A", "mean battery current while key-down, in steady keying"),
    "battery_keyup_current_a": ("A", "mean battery current while key-up, in steady keying"),
    "runtime_keyed_h": ("h", "usable capacity / mean battery current at the keying duty"),
    # Regulator (with a [regulator]).
    "reg_vin_v": ("V", "mean regulator input (the filter's output)"),
    "reg_vout_v": ("V", "mean regulated output"),
    "reg_headroom_min_v": ("V", "lowest input minus output over the analysed span (steady state and keying)"),
    "reg_dissipation_w": ("W", "mean dissipation of the pass device or shunt element"),
    "reg_dissipation_peak_w": ("W", "highest dissipation of the pass device or shunt element"),
    "shunt_current_min_a": ("A", "lowest shunt current over the analysed span"),
    "shunt_current_max_a": ("A", "highest shunt current over the analysed span"),
    "load_regulation_pct": ("%", "output change from the light load to the design load, % of the output"),
    "line_regulation_pct": ("%", "output change over the mains range (+- tolerance, or +-10 %), % of the output"),
    "line_input_change_pct": ("%", "the regulator input's change over the same range, for comparison"),
    "ripple_rejection_db": ("dB", "20 log10 of input ripple over output ripple (peak-to-peak)"),
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
    keyed: KeyedRun | None = None
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


#: Periodic states of recent designs (fingerprint, solution): the warm start of a sweep's next point.
_WARM: list[tuple[tuple[object, ...], np.ndarray, Solution]] = []
#: How many recent solutions a process keeps for warm starts.
WARM_KEEP = 16


def _fingerprint(circuit: Circuit, vscale: float) -> tuple[tuple[object, ...], np.ndarray]:
    """The circuit's structure (which warm states fit it) and its values (how near another design is)."""
    key = (circuit.mode, tuple(e.name for e in circuit.state_elements()))
    values = [c.value for c in circuit.capacitors] + [i.value for i in circuit.inductors] + \
        [r.value for r in circuit.resistors] + [w.vrms for w in circuit.windings] + [vscale]
    return key, np.log(np.maximum(np.abs(np.array(values, dtype=float)), 1e-300))


def _nearest(circuit: Circuit, vscale: float) -> Solution | None:
    """A warm start from the kept solutions of designs with the same structure, if any.

    The nearest design's state, moved along the line through the two nearest: in a sweep the
    state changes smoothly with the varied value, so a secant predicts the next point's state
    better than its neighbour's (the predictor only shortens Newton's way, never its answer).
    """
    key, values = _fingerprint(circuit, vscale)
    near = sorted(((float(np.sum(np.abs(v - values))), v, sol) for k, v, sol in _WARM
                   if k == key and v.shape == values.shape), key=lambda e: e[0])
    if not near:
        return None
    d1, v1, s1 = near[0]
    if len(near) < 2 or d1 == 0:
        return s1
    _, v2, s2 = near[1]
    line = v1 - v2
    span = float(line @ line)
    if span == 0:
        return s1
    alpha = float((values - v1) @ line) / span
    off_line = float(np.sum(np.abs(values - v1 - alpha * line)))
    if not -0.5 <= alpha <= 2.0 or off_line > 0.1 * d1:
        return s1
    return replace(s1, x=s1.x + alpha * (s1.x - s2.x))


def _remember(circuit: Circuit, vscale: float, solution: Solution) -> None:
    key, values = _fingerprint(circuit, vscale)
    _WARM.append((key, values, solution))
    del _WARM[:-WARM_KEEP]


def check_cost(design: Design, circuit: Circuit) -> list[plan.Cost]:
    """Refuse a design whose analyses would take more than ``simulation.max_points`` (exit 2)."""
    cycle = max((keying_drive(ld).period or 0.0 for ld in design.keyed), default=0.0)
    costs = plan.estimate(design, circuit, cycle)
    total = sum(c.points for c in costs)
    limit = design.simulation.max_points
    if total > limit:
        worst = max(costs, key=lambda c: c.points)
        raise DesignError(
            f"this design would need about {total:.3g} time points of simulation, over the limit of {limit:.3g} "
            f"(the {worst.analysis} alone: {worst.span:.3g} s of simulated time, {worst.points:.3g} points, at "
            f"{design.source.frequency:g} Hz); raise simulation.max_points to run it anyway, or shorten the "
            "span (simulation.switch_on_time, simulation.max_settle_time)",
            file=design.origin, key="simulation.max_points")
    return costs


def simulate(design: Design, engine: Engine | None = None, vscale: float = 1.0, regulation: bool = True,
             warm: bool = False, progress: Progress | None = None) -> RunResult:
    """Run the analyses of a design and compute every figure.

    The steady state first (its output voltage is the target the start-up run watches), then
    the start-up run from empty capacitors, then, for keyed loads, steady keying, and with a
    regulator (unless ``regulation`` is false) the extra runs for load and line regulation.
    With ``warm``, the steady state starts from the periodic state of the last design with the
    same circuit (a sweep's neighbouring point).
    """
    eng = engine or get_engine()
    circuit = build_circuit(design, phase_deg=0.0, vscale=vscale)
    check_cost(design, circuit)
    early: list[str] = []
    rise = plan.rise_estimate(design, circuit)
    limit = start_limit(design, circuit)
    if rise > 3 * limit and design.simulation.switch_on_time is None:
        early.append(f"the output needs about {rise:.3g} s to rise after switch-on (the filter capacitors charging "
                     f"through the source impedance), far beyond the {limit:.3g} s start-up run: rise_time_s and "
                     "the start-up figures cover only that run")
    steady = steady_state(eng, design, circuit, vscale, warm=_nearest(circuit, vscale) if warm else None,
                          progress=progress)
    if warm and steady.solution is not None and steady.settled:
        _remember(circuit, vscale, steady.solution)
    w = steady.final.waves
    target = mx.mean(w.time, w.v(circuit.output), steady.final.tstop - MEASURE_PERIODS * circuit.period,
                     steady.final.tstop)
    start_circuit = build_circuit(design, phase_deg=design.simulation.switch_on_phase, vscale=vscale, mode="start")
    start = switch_on(eng, design, start_circuit, steady.steps, target=target if target > 0 else None,
                      progress=progress)
    keyed = None
    if design.keyed:
        mean_circuit = build_circuit(design, phase_deg=0.0, vscale=vscale, mode="mean")
        mean = steady_state(eng, design, mean_circuit, vscale, progress=progress)
        keyed_circuit = build_circuit(design, phase_deg=0.0, vscale=vscale, mode="keyed")
        cycle = max(keying_drive(ld).period or 0.0 for ld in design.keyed)
        keyed = keyed_steady(eng, design, keyed_circuit, end_state(mean_circuit, mean.final.waves), cycle,
                             steady.steps)
    result = figures(design, circuit, steady, start, start_circuit, keyed)
    result.warnings[:0] = early
    if design.regulator is not None and regulation:
        _regulation(eng, design, vscale, result)
    return result


def _steady_output(eng: Engine, design: Design, vscale: float) -> tuple[float, float]:
    """Mean regulator input and output voltages of a steady-state run, V (at most 60 periods: a regulator that
    never settles there, such as a glow tube that keeps striking and going out, gets approximate figures)."""
    c = build_circuit(design, phase_deg=0.0, vscale=vscale)
    limit = min(design.simulation.max_settle_time or math.inf, 60 * c.period)
    design = replace(design, simulation=replace(design.simulation, max_settle_time=limit))
    st = steady_state(eng, design, c, vscale)
    w = st.final.waves
    t0, t1 = st.final.tstop - MEASURE_PERIODS * c.period, st.final.tstop
    return mx.mean(w.time, w.v("raw"), t0, t1), mx.mean(w.time, w.v("out"), t0, t1)


def _regulation(eng: Engine, design: Design, vscale: float, result: RunResult) -> None:
    """Load and line regulation from extra steady-state runs (light load; mains +- tolerance or 10 %)."""
    m = result.metrics
    light_loads = tuple(lighten(ld) for ld in design.loads)
    if light_loads == design.loads:  # fixed loads: from no load to the design's load
        light_loads = ()
    _, v_light = _steady_output(eng, replace(design, loads=light_loads), vscale)
    v_full = m["reg_vout_v"]
    m["load_regulation_pct"] = 100 * (v_light - v_full) / v_full if v_full else math.nan
    tol = design.source.mains_tolerance or 0.1
    in_hi, out_hi = _steady_output(eng, design, vscale * (1 + tol))
    in_lo, out_lo = _steady_output(eng, design, vscale * (1 - tol))
    m["line_regulation_pct"] = 100 * (out_hi - out_lo) / v_full if v_full else math.nan
    m["line_input_change_pct"] = 100 * (in_hi - in_lo) / m["reg_vin_v"] if m["reg_vin_v"] else math.nan
    if out_lo < 0.98 * v_full:
        result.warnings.append(f"with the supply {100 * tol:g} % low the regulated output falls to {out_lo:.4g} V "
                               "(out of regulation)")


def figures(design: Design, circuit: Circuit, steady: SteadyState, start: Run, start_circuit: Circuit | None = None,
            keyed: KeyedRun | None = None) -> RunResult:
    w = steady.final.waves
    T = circuit.period
    t1 = steady.final.tstop
    t0 = t1 - MEASURE_PERIODS * T
    t = w.time
    vout = w.v(circuit.output)
    warnings: list[str] = list(steady.notes)
    parts: dict[str, dict[str, Any]] = {}
    sc = start_circuit or circuit

    m: dict[str, float] = {}
    m["vout_dc_v"] = mx.mean(t, vout, t0, t1)
    m["ripple_pp_v"] = mx.peak_to_peak(t, vout, t0, t1)
    m["ripple_rms_v"] = mx.ac_rms(t, vout, t0, t1)
    m["iout_dc_a"] = sum(mx.mean(t, w.i(ld.sense), t0, t1) for ld in circuit.loads)

    sw = start.waves
    ts = sw.time
    s0, s1 = float(ts[0]), float(ts[-1])
    refined = start.refined
    vac = design.rectifier.diode.vacuum
    for d in circuit.diodes:
        i = w.i(d.sense)
        vrev = w.v(d.cathode) - w.v(d.anode)
        i_on = sw.i(d.sense)
        vrev_on = sw.v(d.cathode) - sw.v(d.anode)
        # The fine first periods, and the coarse period with the highest current simulated again finely
        # (switch_on only skips that when the coarse part stayed well below the first periods).
        fine_end = np.searchsorted(ts, start.deck_span or s1, side="right")
        surge = float(np.max(i_on[:fine_end]))
        # I2t from fine samples: the first periods, or the refined period when its peak is the highest.
        i2t = _surge_i2t(ts[:fine_end], np.maximum(i_on[:fine_end], 0.0), T, s0, float(ts[fine_end - 1]))
        if refined is not None:
            rw = refined.waves
            i_ref = np.maximum(rw.i(d.sense), 0.0)
            if float(np.max(i_ref)) > surge:
                surge = float(np.max(i_ref))
                i2t = _surge_i2t(rw.time, i_ref, T, float(rw.time[0]), float(rw.time[-1]))
        parts[d.name] = {
            "role": "rectifier plate (vacuum)" if vac is not None else "rectifier diode",
            "peak_a": mx.peak(t, i, t0, t1),
            "avg_a": mx.mean(t, i, t0, t1),
            "rms_a": mx.rms(t, i, t0, t1),
            "piv_v": mx.peak(t, vrev, t0, t1),
            "surge_peak_a": surge,
            "surge_i2t_a2s": i2t,
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
        if not c.is_part:
            continue
        v = w.v(c.plus) - w.v(c.minus)
        v_on = sw.v(c.plus) - sw.v(c.minus)
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
            "switch_on_peak_a": float(np.max(np.abs(sw.i(ind.name)))),
        }
        if ind.dcr:
            parts[ind.name]["dcr_dissipation_w"] = mx.rms(t, i, t0, t1) ** 2 * ind.dcr

    for r in circuit.resistors:
        if r.role in ("esr", "dcr", "snubber", "load"):
            continue
        v = w.v(r.a) - w.v(r.b)
        parts[r.name] = {
            "role": {"filter": "filter resistor", "bleeder": "bleeder", "winding": "winding resistance",
                     "balancing": "balancing resistor", "regulator": "regulator resistor"}[r.role],
            "value_ohm": r.value,
            "dissipation_w": mx.mean(t, v * v, t0, t1) / r.value,
            "dc_a": mx.mean(t, v, t0, t1) / r.value,
            "rms_a": mx.rms(t, v, t0, t1) / r.value,
            "peak_v": mx.peak(t, np.abs(v), t0, t1),
        }
    for lref in circuit.loads:
        ld = design.loads[lref.index]
        i = w.i(lref.sense)
        vl = w.v(lref.node)
        entry = {"role": f"{ld.kind} load" + (f" after filter section {ld.at}" if ld.at is not None else ""),
                 "node": lref.node, "dc_v": mx.mean(t, vl, t0, t1), "dc_a": mx.mean(t, i, t0, t1),
                 "dissipation_w": mx.mean(t, i * vl, t0, t1)}
        if ld.kind == "resistor":
            entry["value_ohm"] = ld.r
        parts[lref.name] = entry

    src_rms: list[float] = []
    va = 0.0
    for wd in circuit.windings:
        i = -w.i(wd.name)
        irms = mx.rms(t, i, t0, t1)
        src_rms.append(irms)
        va += wd.vrms * irms
        parts[wd.name] = {
            "role": {"sine": "winding", "transformer": "transformer winding", "inverter": "inverter output"}[
                design.source.kind],
            "vrms_v": wd.vrms,
            "rms_a": irms,
            "peak_a": mx.peak(t, np.abs(i), t0, t1),
            "apparent_power_va": wd.vrms * irms,
            "surge_peak_a": float(np.max(np.abs(sw.i(wd.name)))),
        }
    m["source_rms_a"] = max(src_rms)
    m["source_va"] = va
    m["settle_time_s"] = steady.settle_time

    _start_figures(design, circuit, sc, start, m, warnings)
    if circuit.battery_nodes:
        _battery_figures(design, circuit, w, (t0, t1), m)
    if keyed is not None:
        _keyed_figures(design, keyed, m, warnings)
    elif any(ld.kind == "steps" for ld in design.loads):
        _step_figures(design, sc, start, m, warnings)
    if design.regulator is not None:
        _regulator_figures(design, circuit, w, (t0, t1), keyed, sc, start, m, parts, warnings)

    if steady.final.retried:
        warnings.append("ngspice needed safer options (method=gear) to converge; figures may be less precise")
    if design.source.resistance == 0 and design.source.inductance == 0:
        warnings.append("the source has no series resistance: the switch-on surge is limited only by the "
                        "diode's own resistance; give the winding resistance for a real surge figure")
    if m["vout_dc_v"] < 0:
        warnings.append("the output is negative: check the topology and the load")
    return RunResult(design, circuit, m, parts, warnings, steady, start, (t0, t1), keyed=keyed)


def _surge_i2t(t: np.ndarray, i: np.ndarray, period: float, s0: float, s1: float) -> float:
    """I^2 t over the half period centred on the diode's highest switch-on current, A^2 s (the window of the
    datasheet's 8.3 ms half-sine rating)."""
    tk = float(t[int(np.argmax(i))])
    a = max(s0, tk - period / 4)
    b = min(s1, a + period / 2)
    return mx.integral_square(t, i, a, b) if b > a else 0.0


def _start_figures(design: Design, circuit: Circuit, sc: Circuit, start: Run, m: dict[str, float],
                   warnings: list[str]) -> None:
    """Rise time and, when loads warm up, the capacitor peak before they draw current."""
    sw = start.waves
    v = sw.v(sc.output)
    target = 0.9 * m["vout_dc_v"]
    above = np.nonzero(v >= target)[0]
    if target > 0 and len(above):
        k = int(above[0])
        if k > 0:  # interpolate the crossing
            t0, t1, v0, v1 = sw.time[k - 1], sw.time[k], v[k - 1], v[k]
            m["rise_time_s"] = float(t0 + (target - v0) * (t1 - t0) / (v1 - v0)) if v1 != v0 else float(t1)
        else:
            m["rise_time_s"] = float(sw.time[0])
    else:
        m["rise_time_s"] = math.nan
        warnings.append("the output did not reach 90 % of its steady value in the start-up run")
    warm = [ld.warmup for ld in design.loads if ld.warmup]
    if warm:
        t_on = min(warm)
        sel = sw.time <= t_on
        peaks = [float(np.max(np.abs(sw.v(c.plus)[sel] - sw.v(c.minus)[sel])))
                 for c in sc.capacitors if c.is_part]
        m["cap_peak_warmup_v"] = max(peaks) if peaks else 0.0
        m["vout_warmup_v"] = float(np.max(v[sel]))


def _battery_figures(design: Design, circuit: Circuit, w: Waveforms, window: tuple[float, float],
                     m: dict[str, float]) -> None:
    b = design.battery
    assert b is not None
    t0, t1 = window
    t = w.time
    ib = w.v("ib")
    m["battery_current_a"] = mx.mean(t, ib, t0, t1)
    m["battery_peak_current_a"] = mx.peak(t, ib, t0, t1)
    m["battery_voltage_v"] = mx.mean(t, w.v("vt"), t0, t1)
    p_in = mx.mean(t, w.v("vt") * ib, t0, t1)
    p_out = sum(mx.mean(t, (w.v(wd.plus) - w.v(wd.minus)) * -w.i(wd.name), t0, t1) for wd in circuit.windings)
    m["input_power_w"] = p_in
    m["output_power_w"] = p_out
    m["efficiency"] = p_out / p_in if p_in > 0 else math.nan
    m["runtime_h"] = b.capacity * b.usable_fraction / m["battery_current_a"] if m["battery_current_a"] > 0 \
        else math.inf


def _keyed_figures(design: Design, keyed: KeyedRun, m: dict[str, float], warnings: list[str]) -> None:
    """Sag, recovery and overshoot of the output under steady keying (the first keyed load)."""
    ld = design.keyed[0]
    circuit = keyed.circuit
    assert circuit is not None
    run = keyed.run
    w = run.waves
    t = w.time + run.offset
    out = circuit.output
    v = w.v(out)
    T = circuit.period
    c0, c1 = keyed.window
    drive = keying_drive(ld)
    downs = drive.intervals(c0, c1, level=0.999)  # fully key-down, edges excluded
    ups = _key_up(c0, c1, drive)
    if not downs or not ups:
        warnings.append("the keyed run found no whole key-down or key-up interval; keyed figures omitted")
        return

    def mean_over(iv: list[tuple[float, float]], y: np.ndarray) -> float:
        total = sum(b - a for a, b in iv)
        return sum(mx.mean(t, y, a, b) * (b - a) for a, b in iv) / total

    vd = mean_over(downs, v)
    vu = mean_over(ups, v)
    m["vout_keydown_v"] = vd
    m["vout_keyup_v"] = vu
    m["sag_v"] = vu - vd
    m["sag_pct"] = 100 * (vu - vd) / vu if vu else math.nan
    # Recovery: after the longest key-down element's edge, until the output stays within 1 % of vd.
    a, b = max(downs, key=lambda iv: iv[1] - iv[0])
    edge = a - (ld.keying.rise if ld.keying else 0.0)
    sel = (t >= edge) & (t <= b)
    outside = np.nonzero(np.abs(v[sel] - vd) > 0.01 * abs(vd))[0]
    if len(outside) == 0:
        m["recovery_time_s"] = 0.0
    elif outside[-1] == int(np.count_nonzero(sel)) - 1:
        m["recovery_time_s"] = math.nan
        warnings.append("after key-down the output did not settle within 1 % of its key-down mean before key-up")
    else:
        m["recovery_time_s"] = float(t[sel][outside[-1] + 1] - edge)
    # Overshoot at key-up: the highest output in the key-up interval after that element.
    after = [iv for iv in ups if iv[0] >= b - 1e-12]
    ua, ub = after[0] if after else ups[0]
    m["overshoot_v"] = max(mx.peak(t, v, ua, ub) - vu, 0.0)
    span = min(T, b - a)
    m["ripple_keydown_pp_v"] = mx.peak_to_peak(t, v, b - span, b)
    if b - a >= 2 * T:
        m["droop_v"] = mx.mean(t, v, a, a + T) - mx.mean(t, v, b - T, b)
    m["keying_cycle_s"] = keyed.cycle
    if ld.pushing is not None:
        # The shortest key-down element is the dot; the oscillator follows its node.
        da, db = min(downs, key=lambda iv: iv[1] - iv[0])
        node = w.v(out if ld.at is None else circuit.section_nodes[ld.at])
        m["chirp_hz"] = abs(ld.pushing) * mx.peak_to_peak(t, node, da, db)
    if not keyed.settled:
        warnings.append("steady keying was not reached within the run; keyed figures are approximate")
    if circuit.battery_nodes:
        ib = w.v("ib")
        idn = mean_over(downs, ib)
        iup = mean_over(ups, ib)
        mean_i = mx.mean(t, ib, c0, c1)
        m["battery_keydown_current_a"] = idn
        m["battery_keyup_current_a"] = iup
        b_ = design.battery
        assert b_ is not None
        m["runtime_keyed_h"] = b_.capacity * b_.usable_fraction / mean_i if mean_i > 0 else math.inf


def _regulator_figures(design: Design, circuit: Circuit, w: Waveforms, window: tuple[float, float],
                       keyed: KeyedRun | None, sc: Circuit, start: Run, m: dict[str, float],
                       parts: dict[str, dict[str, Any]], warnings: list[str]) -> None:
    """Output, headroom, dissipation, shunt current and ripple rejection of the regulator.

    Extremes run over the analysed span: the steady state and, with a keyed load, the
    steady keying cycle.
    """
    reg = design.regulator
    assert reg is not None
    t0, t1 = window
    t = w.time
    vin, vout = w.v("raw"), w.v("out")
    spans = [(t, vin, vout, w, t0, t1)]
    if keyed is not None:
        kw = keyed.run.waves
        kt = kw.time + keyed.run.offset
        spans.append((kt, kw.v("raw"), kw.v("out"), kw, *keyed.window))
    m["reg_vin_v"] = mx.mean(t, vin, t0, t1)
    m["reg_vout_v"] = mx.mean(t, vout, t0, t1)
    m["reg_headroom_min_v"] = min(mx.trough(tt, a - b, c0, c1) for tt, a, b, _, c0, c1 in spans)
    rin = mx.peak_to_peak(t, vin, t0, t1)
    rout = mx.peak_to_peak(t, vout, t0, t1)
    m["ripple_rejection_db"] = 20 * math.log10(rin / rout) if rout > 0 and rin > 0 else math.nan

    def power(ww: Waveforms) -> np.ndarray:
        if reg.kind == "series":
            return (ww.v("drn") - ww.v("out")) * ww.i("vpass")
        return ww.v("sh") * ww.i("vshunt")

    means = [mx.mean(tt, power(ww), c0, c1) for tt, _, _, ww, c0, c1 in spans]
    peaks = [mx.peak(tt, power(ww), c0, c1) for tt, _, _, ww, c0, c1 in spans]
    m["reg_dissipation_w"] = means[0]
    m["reg_dissipation_peak_w"] = max(peaks)
    name = "MPASS" if reg.kind == "series" else ("DZ" if reg.zener is not None else "GLOW")
    entry: dict[str, Any] = {"role": "pass device" if reg.kind == "series" else "shunt element",
                             "dissipation_w": means[0], "dissipation_peak_w": max(peaks)}
    if reg.kind == "series":
        entry["vds_max_v"] = max(mx.peak(tt, ww.v("drn") - ww.v("out"), c0, c1) for tt, _, _, ww, c0, c1 in spans)
        entry["id_max_a"] = max(mx.peak(tt, ww.i("vpass"), c0, c1) for tt, _, _, ww, c0, c1 in spans)
        # Pass device at switch-on: the drain sees the rising raw supply while the reference charges slowly.
        sw = start.waves
        entry["switch_on_dissipation_peak_w"] = float(np.max((sw.v("drn") - sw.v("out")) * sw.i("vpass")))
        if m["reg_headroom_min_v"] < reg.headroom:
            warnings.append(f"dropout: the regulator's input-output difference falls to "
                            f"{m['reg_headroom_min_v']:.3g} V, under the {reg.headroom:g} V it needs")
    else:
        ish = [(tt, ww.i("vshunt"), c0, c1) for tt, _, _, ww, c0, c1 in spans]
        m["shunt_current_min_a"] = min(mx.trough(tt, i, c0, c1) for tt, i, c0, c1 in ish)
        m["shunt_current_max_a"] = max(mx.peak(tt, i, c0, c1) for tt, i, c0, c1 in ish)
        entry["current_min_a"] = m["shunt_current_min_a"]
        entry["current_max_a"] = m["shunt_current_max_a"]
        low = reg.glow.i_min if reg.glow is not None else 1e-3
        if m["shunt_current_min_a"] < low:
            warnings.append(f"dropout: the shunt current falls to {m['shunt_current_min_a'] * 1e3:.3g} mA, under the "
                            f"{low * 1e3:g} mA it needs to regulate")
        sw = start.waves
        entry["switch_on_voltage_max_v"] = float(np.max(sw.v("sh")))
        entry["struck"] = bool(np.max(sw.i("vshunt")) > 1e-4)
    parts[name] = entry


def _step_figures(design: Design, sc: Circuit, start: Run, m: dict[str, float], warnings: list[str]) -> None:
    """Sag, recovery and overshoot around the steps of a stepped load, from the start-up run.

    Each step level is taken as settled over the last whole period before the next step (or
    the end of the run); "down" is the heaviest level, "up" the lightest.
    """
    ld = next(x for x in design.loads if x.kind == "steps")
    T = sc.period
    w = start.waves
    t = w.time
    v = w.v(sc.output)
    end = float(t[-1])
    segments = [(0.0, 0.0)] if ld.steps[0][0] > 0 else []  # (start, current): nothing before the first step
    segments += [(max(tk, 0.0), ik) for tk, ik in ld.steps]
    levels: list[tuple[float, float, float, float]] = []  # (current, settled mean, start, stop)
    for k, (a, ik) in enumerate(segments):
        b = segments[k + 1][0] if k + 1 < len(segments) else end
        if b - a >= 2 * T:
            levels.append((ik, mx.mean(t, v, b - T, b), a, b))
    if len(levels) < 2:
        warnings.append("the load steps are too close together (under two periods) for step figures")
        return
    down = max(levels, key=lambda x: x[0])
    up = min(levels, key=lambda x: x[0])
    m["vout_keydown_v"] = down[1]
    m["vout_keyup_v"] = up[1]
    m["sag_v"] = up[1] - down[1]
    m["sag_pct"] = 100 * (up[1] - down[1]) / up[1] if up[1] else math.nan
    rises = [(levels[k][0] - levels[k - 1][0], k) for k in range(1, len(levels))]
    inc, k = max(rises)
    if inc > 0:
        target, a, b = levels[k][1], levels[k][2], levels[k][3]
        sel = (t >= a) & (t <= b)
        ts = t[sel]
        outside = np.nonzero(np.abs(v[sel] - target) > 0.01 * abs(target))[0]
        m["recovery_time_s"] = 0.0 if len(outside) == 0 else float(ts[min(outside[-1] + 1, len(ts) - 1)] - a)
    dec, k = min(rises)
    if dec < 0:
        a, b = levels[k][2], levels[k][3]
        m["overshoot_v"] = max(mx.peak(t, v, a, b) - levels[k][1], 0.0)
    m["ripple_keydown_pp_v"] = mx.peak_to_peak(t, v, down[3] - T, down[3])


def _key_up(c0: float, c1: float, drive: Any) -> list[tuple[float, float]]:
    """Fully key-up spans of [c0, c1], edges excluded."""
    not_up = drive.intervals(c0, c1, level=1e-3)
    out: list[tuple[float, float]] = []
    cur = c0
    for a, b in not_up:
        if a - cur > 1e-9:
            out.append((cur, a))
        cur = b
    if c1 - cur > 1e-9:
        out.append((cur, c1))
    return out


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
    from simkit.netlist.circuit import render

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
    from simkit.netlist.circuit import render

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
