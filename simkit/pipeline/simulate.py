"""Simulate one design: the cost check, the steady state (warm-started in sweeps), switch-on, steady keying
and the regulation runs; then every figure (:mod:`simkit.pipeline.measure`)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from simkit import progress as progress_hook
from simkit.analysis import metrics as mx
from simkit.analysis import plan
from simkit.analysis.keyed import keyed_steady
from simkit.analysis.runs import restart_state
from simkit.analysis.startup import start_limit, switch_on
from simkit.analysis.steady import MEASURE_PERIODS, Progress, Solution, steady_state
from simkit.design.loads import lighten
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, get_engine
from simkit.errors import DesignError
from simkit.netlist.build import build_circuit, keying_drive
from simkit.netlist.circuit import Circuit
from simkit.pipeline.measure import figures
from simkit.pipeline.noise import attach_hash, wants_hash
from simkit.pipeline.results import RunResult

#: Periodic states of recent designs (fingerprint, solution): the warm start of a sweep's next point.
_WARM: list[tuple[tuple[object, ...], np.ndarray, Solution]] = []
#: How many recent solutions a process keeps for warm starts.
WARM_KEEP = 16
#: How many of the nearest kept solutions the warm-start predictor fits through.
PREDICT_FROM = 6


def _fingerprint(circuit: Circuit, vscale: float) -> tuple[tuple[object, ...], np.ndarray]:
    """The circuit's structure (which warm states fit it) and its values (how near another design is)."""
    key = (circuit.mode, tuple(e.name for e in circuit.state_elements()))
    values = [c.value for c in circuit.capacitors] + [i.value for i in circuit.inductors] + \
        [r.value for r in circuit.resistors] + [w.vrms for w in circuit.windings] + [vscale]
    return key, np.log(np.maximum(np.abs(np.array(values, dtype=float)), 1e-300))


def _nearest(circuit: Circuit, vscale: float) -> Solution | None:
    """A warm start from the kept solutions of designs with the same structure, if any.

    The nearest design's state and Jacobian, moved by a local linear fit (in the logarithms of the
    values) through the nearest few: in a sweep they change smoothly with the varied values, so
    the differences between solved neighbours (along one row of a grid, and between rows) predict
    the next point far better than its nearest neighbour alone (the predictor only shortens
    Newton's way, never its answer).
    """
    key, values = _fingerprint(circuit, vscale)
    near = sorted(((float(np.sum(np.abs(v - values))), v, sol) for k, v, sol in _WARM
                   if k == key and v.shape == values.shape), key=lambda e: e[0])
    if not near:
        return None
    d1, v1, s1 = near[0]
    others = [(v, sol) for d, v, sol in near[1:PREDICT_FROM] if d <= 4 * d1 and sol.x.shape == s1.x.shape]
    if d1 == 0 or not others:
        return s1
    # values - v1 as a combination of the neighbours' offsets from v1; the states move the same way.
    offsets = np.array([v - v1 for v, _ in others])
    # A state variable of one sign in every neighbour, within a factor of ten, moves as a power of the
    # values (a choke current as 1/R): its logarithm is fitted; one that changes sign or scale (a leakage
    # current at the period's start) is fitted as it is.
    states = np.array([s1.x, *(sol.x for _, sol in others)])
    size = np.abs(states)
    positive = (np.all(states > 0, axis=0) | np.all(states < 0, axis=0)) & \
        (np.max(size, axis=0) <= 10 * np.min(size, axis=0))
    ys = np.where(positive, np.log(np.abs(np.where(positive, states, 1.0))), states)
    moves = ys[1:] - ys[0]
    coef, *_ = np.linalg.lstsq(offsets.T, values - v1, rcond=1e-9)
    if not np.all(np.isfinite(coef)) or float(np.sum(np.abs(coef))) > 3.0:
        return s1  # far outside what the neighbours span: no extrapolation
    y = ys[0] + coef @ moves
    x = np.where(positive, np.sign(s1.x) * np.exp(np.where(positive, y, 0.0)), y)
    # The period map's Jacobian moves with the values too (a slow mode's rate goes as 1/RC): fitted the
    # same way, it lets Newton gain about 25 times per step instead of 5 (measured on bench/'s C-L-C sweep).
    jac = s1.jacobian
    if jac is not None and all(sol.jacobian is not None and sol.jacobian.shape == jac.shape for _, sol in others):
        jac = jac + np.tensordot(coef, np.array([sol.jacobian - jac for _, sol in others]), axes=1)
    return replace(s1, x=x, jacobian=jac)


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
             warm: bool = False, progress: Progress | None = None, hash: bool | None = None) -> RunResult:
    """Run the analyses of a design and compute every figure.

    The steady state first (its output voltage is the target the start-up run watches), then
    the start-up run from empty capacitors, then, for keyed loads, steady keying, and with a
    regulator (unless ``regulation`` is false) the extra runs for load and line regulation.
    With ``warm``, the steady state starts from the periodic state of the last design with the
    same circuit (a sweep's neighbouring point).  ``hash`` (True/False, or None: as the design says,
    :func:`simkit.pipeline.noise.wants_hash`) adds the high-frequency analysis.
    """
    eng = engine or get_engine()
    if progress is None:  # whoever listens (simkit.progress) hears every analysis
        progress = progress_hook.callback()
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
        # The key-down periodic state is close to the mean load's: Newton starts there, on its measuring step.
        mean = steady_state(eng, design, mean_circuit, vscale, warm=steady.solution, progress=progress)
        keyed_circuit = build_circuit(design, phase_deg=0.0, vscale=vscale, mode="keyed")
        cycle = max(keying_drive(ld).period or 0.0 for ld in design.keyed)
        jac = mean.solution.jacobian if mean.solution is not None else None
        start_state = restart_state(mean_circuit, mean.final.waves)
        keyed = keyed_steady(eng, design, keyed_circuit, start_state, cycle, steady.steps, jacobian=jac,
                             progress=progress)
    result = figures(design, circuit, steady, start, start_circuit, keyed)
    result.warnings[:0] = early
    if design.regulator is not None and regulation:
        _regulation(eng, design, vscale, result)
    if wants_hash(design, hash):
        attach_hash(eng, result, vscale, asked=bool(hash) or bool(design.simulation.hash))
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


