"""The two analyses of a design: switch-on from empty capacitors, and the periodic steady state.

Steady state: start from the closed-form estimate (:mod:`simkit.analysis.estimate`), run
whole periods in chunks, each chunk a fresh ``.tran ... uic`` that starts from the exact
state (every capacitor voltage and inductor current) where the last one ended.  After each
chunk a detector compares the output's mean, minimum and maximum over the last periods;
the run has settled when the change per period is below ``settle_tolerance`` and the
geometric extrapolation of the remaining drift is below ten times that.  When the drift
shrinks slowly (large time constants: choke filters, multipliers), a Newton shooting step
on the one-period map jumps to the periodic state, and the chunks then confirm it.

The final chunk is a complete deck by itself (its initial conditions and span are the
ones simulated last): :func:`steady_state` returns it, and ``simkit netlist`` prints it.
"""

from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass, field

import numpy as np

from simkit.analysis import metrics
from simkit.analysis.estimate import estimate_state
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms
from simkit.errors import SimulationError
from simkit.netlist.circuit import Circuit, Transient, render

#: Periods per chunk of the steady-state run.
CHUNK_PERIODS = 4
#: Whole periods at the end of the final chunk over which figures are taken.
MEASURE_PERIODS = 2
#: Default cap on the simulated time waiting for steady state, in periods.
MAX_PERIODS = 400

#: Finite-difference step of the shooting Jacobian, relative to the state's scale.  Well above
#: the period-to-period integration noise (about 1e-5 at reltol 1e-4).
FD_STEP = 1e-3
#: Steps per period of the runs that build the shooting Jacobian.
JACOBIAN_STEPS = 250
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


@dataclass
class SteadyState:
    final: Run
    settle_time: float  # s, all steady-state time simulated
    settled: bool
    periods: int
    shooting_steps: int = 0
    history: list[metrics.PeriodStats] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def transient(design: Design, circuit: Circuit, tstop: float, safe: bool = False,
              steps: int | None = None) -> Transient:
    sim = design.simulation
    tmax = circuit.period / (steps or sim.steps_per_period)
    if safe:
        return Transient(tstop=tstop, tmax=tmax, reltol=max(sim.reltol, 1e-3), abstol=1e-8,
                         method="gear", extra_options=SAFE_OPTIONS)
    return Transient(tstop=tstop, tmax=tmax, reltol=sim.reltol)


def run_span(engine: Engine, design: Design, circuit: Circuit, tstop: float, ics: dict[str, float],
             meas: list[str] | None = None, steps: int | None = None, offset: float = 0.0) -> Run:
    """Run one span; on convergence trouble retry once with safer options, then give up.

    ``steps`` overrides the design's steps per period (coarser runs for Jacobians and long
    start-up runs); ``offset`` is the absolute time at which the span starts.
    """
    deck = render(circuit, transient(design, circuit, tstop, steps=steps), ics, meas, offset=offset)
    try:
        return Run(deck, tstop, engine.run(deck, tstop), ics, offset=offset)
    except SimulationError as first:
        safe_deck = render(circuit, transient(design, circuit, tstop, safe=True, steps=steps), ics, meas,
                           offset=offset)
        try:
            return Run(safe_deck, tstop, engine.run(safe_deck, tstop), ics, retried=True, offset=offset)
        except SimulationError as second:
            raise SimulationError(
                f"ngspice could not complete the simulation of {design.origin} "
                f"(also not with safer options: {', '.join(SAFE_OPTIONS)}, method=gear)",
                deck=second.deck,
                log=second.log or first.log,
                hint="give the winding a series resistance (source.resistance), give chokes "
                "their dcr and capacitors their esr, lower simulation.steps_per_period, or "
                "check the part values for typing errors (for example mF instead of uF)",
            ) from None


def end_state(circuit: Circuit, waves: Waveforms) -> dict[str, float]:
    """Capacitor voltages and inductor currents at the last time point."""
    state: dict[str, float] = {}
    for cap in circuit.capacitors:
        state[cap.name] = float(waves.v(cap.inner_plus)[-1] - waves.v(cap.inner_minus)[-1])
    for ind in circuit.inductors:
        state[ind.name] = float(waves.i(ind.name)[-1])
    return state


def state_at(circuit: Circuit, waves: Waveforms, t: float) -> dict[str, float]:
    """Capacitor voltages and inductor currents at time t (interpolated)."""
    tt = waves.time
    state: dict[str, float] = {}
    for cap in circuit.capacitors:
        state[cap.name] = float(np.interp(t, tt, waves.v(cap.inner_plus) - waves.v(cap.inner_minus)))
    for ind in circuit.inductors:
        state[ind.name] = float(np.interp(t, tt, waves.i(ind.name)))
    return state


def switch_on_span(design: Design, circuit: Circuit) -> float:
    """Length of the switch-on run: long enough for the surge and any LC overshoot, s."""
    if design.simulation.switch_on_time is not None:
        return design.simulation.switch_on_time
    T = circuit.period
    span = 5 * T
    caps_after: list[float] = []
    filt = [c for c in circuit.capacitors if c.role in ("filter", "reservoir")]
    for ind in circuit.inductors:
        if ind.role != "choke":
            continue
        # Capacitance the choke charges: every filter capacitor; the resonance sets the overshoot.
        c_total = sum(c.value for c in filt) or 0.0
        caps_after.append(c_total)
        if c_total > 0:
            t_lc = 2 * math.pi * math.sqrt(ind.value * c_total)
            span = max(span, 0.75 * t_lc)
    return min(span, max(5 * T, 3.0))


def timeline_end(design: Design) -> float:
    """When the last scheduled change after switch-on is over (warm-ups, load steps), s."""
    end = 0.0
    vac = design.rectifier.diode.vacuum
    if vac is not None:
        end = max(end, vac.warmup_full)
    for ld in design.loads:
        if ld.warmup:
            end = max(end, ld.warmup * 1.2)
        if ld.kind == "steps":
            end = max(end, ld.steps[-1][0])
    return end


#: Steps per period of the long, coarse part of a start-up run.
COARSE_STEPS = 200
#: Periods of a start-up run at the design's fine step (the surge is in the first of them).
FINE_START_PERIODS = 3
#: Periods per chunk of the coarse part.
COARSE_CHUNK = 10
#: The start-up run stops at the latest after this many periods.
MAX_START_PERIODS = 6000


def switch_on(engine: Engine, design: Design, circuit: Circuit, target: float | None = None) -> Run:
    """All capacitors empty, source starting at ``switch_on_phase``.

    The first periods (the surge, any choke overshoot) run at the design's fine step.  When
    the design has a timeline (warm-ups, load steps), or the output has not yet reached 90 %
    of ``target`` (the steady output voltage), the run goes on in coarse chunks until the
    timeline is over and the output has settled; the period with the highest diode current
    is then simulated again at the fine step, so the surge figure keeps its accuracy.
    """
    T = circuit.period
    span = switch_on_span(design, circuit)
    zero = {e.name: 0.0 for e in circuit.state_elements()}
    # The surge comes in the first periods: those run at the fine step; a longer overshoot (a choke
    # ringing with the filter capacitors) is smooth and runs on at the coarse step.
    fine = min(span, FINE_START_PERIODS * T) if design.simulation.switch_on_time is None else span
    first = run_span(engine, design, circuit, fine, zero)
    pieces = [first]
    if span > fine + 1e-12:
        rest = math.ceil((span - fine) / T - 1e-9) * T
        pieces.append(run_span(engine, design, circuit, rest, end_state(circuit, first.waves),
                               steps=COARSE_STEPS, offset=fine))
        span = fine + rest
    out = circuit.output
    events = timeline_end(design)
    reached = target is None or max(float(np.max(p.waves.v(out))) for p in pieces) >= 0.9 * target
    if events <= 0 and reached:
        if len(pieces) == 1:
            return first
        return Run(first.deck, span, _merge(pieces), zero, retried=any(p.retried for p in pieces), deck_span=fine)
    t = span
    state = end_state(circuit, pieces[-1].waves)
    limit = min(MAX_START_PERIODS * T, max(events * 3, 60.0))
    chunk = COARSE_CHUNK * T
    while t < limit:
        run = run_span(engine, design, circuit, chunk, state, steps=COARSE_STEPS, offset=t)
        pieces.append(run)
        t += chunk
        state = end_state(circuit, run.waves)
        v = run.waves.v(out)
        reached = reached or target is None or float(np.max(v)) >= 0.9 * target
        stats = metrics.period_stats(run.waves.time, v, T, 0.0)
        calm = len(stats) >= 2 and abs(stats[-1].mean - stats[-2].mean) <= 2e-3 * max(abs(stats[-1].mean), 1e-9)
        if t >= events + 5 * T and reached and calm:
            break
    merged = _merge(pieces)
    # The surge: refine the coarse period that holds the highest diode current.
    best_fine = max(float(np.max(first.waves.i(d.sense))) for d in circuit.diodes)
    best_coarse, where = 0.0, None
    for run in pieces[1:]:
        for d in circuit.diodes:
            i = run.waves.i(d.sense)
            k = int(np.argmax(i))
            if i[k] > best_coarse:
                best_coarse, where = float(i[k]), (run, float(run.waves.time[k]))
    refined: Run | None = None
    if where is not None and best_coarse > 0.8 * best_fine:
        run, tk = where
        k0 = max(math.floor(tk / T - 1e-9) - 1, 0)
        ics = state_at(circuit, run.waves, k0 * T)
        refined = run_span(engine, design, circuit, 2 * T, ics, offset=run.offset + k0 * T)
    return Run(first.deck, float(merged.time[-1]), merged, zero, retried=any(p.retried for p in pieces),
               deck_span=fine, refined=refined)


def _merge(pieces: list[Run]) -> Waveforms:
    """One waveform set in absolute time from consecutive runs (the joints not repeated)."""
    times = [pieces[0].waves.time]
    for p in pieces[1:]:
        times.append(p.waves.time[1:] + p.offset)
    names = set(pieces[0].waves.vectors)
    vectors = {}
    for n in names:
        parts = [pieces[0].waves.vectors[n]] + [p.waves.vectors[n][1:] for p in pieces[1:]]
        vectors[n] = np.concatenate(parts)
    return Waveforms(time=np.concatenate(times), vectors=vectors)


@dataclass
class KeyedRun:
    """Steady keying: the last chunk, and the keying cycle the figures are taken over."""

    run: Run
    cycle: float  # s
    window: tuple[float, float]  # absolute times of the last complete keying cycle
    settled: bool
    simulated: float  # s


def keyed_steady(engine: Engine, design: Design, circuit: Circuit, start: dict[str, float],
                 cycle: float) -> KeyedRun:
    """Key the load from ``start`` (the duty-weighted steady state) until the keying is periodic.

    Chunks are whole source periods covering at least two keying cycles; the run stops when
    the output's mean over the last two complete keying cycles agrees to 1e-3 (the keying
    and the mains are not in step, so the cycles differ at the ripple level).
    """
    T = circuit.period
    n = max(math.ceil(2 * cycle / T - 1e-9), 4)
    span = n * T
    offset = 0.0
    ics = start
    out = circuit.output
    last: Run | None = None
    window = (0.0, cycle)
    for _ in range(30):
        run = run_span(engine, design, circuit, span, ics, offset=offset)
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
                return KeyedRun(run, cycle, window, True, offset + span)
        ics = end_state(circuit, run.waves)
        offset += span
        if offset > 120.0:
            break
    assert last is not None
    return KeyedRun(last, cycle, window, False, offset + span)


def _settled(hist: list[metrics.PeriodStats], scale: float, tol: float) -> tuple[bool, float]:
    """Is the output periodic?  Returns (settled, estimated periods still needed).

    Settled means: the change per period of the mean, minimum and maximum is below
    ``tol`` of the output voltage, and also below 1 % of the ripple (so the ripple is not
    inflated by drift), and the geometric extrapolation of the remaining drift of the mean
    is below ten times ``tol``.
    """
    if len(hist) < 3:
        return False, math.inf
    a, b, c = hist[-3], hist[-2], hist[-1]
    change = max(abs(c.mean - b.mean), abs(c.low - b.low), abs(c.high - b.high))
    ripple = max(c.high - c.low, 0.0)
    # 0.2 % of the ripple keeps drift out of the ripple figure; 1e-6 of the output is the
    # floor where period-to-period integration noise starts (reltol 1e-4).
    limit = min(tol * scale, max(0.002 * ripple, 1e-6 * scale))
    d1 = b.mean - a.mean
    d2 = c.mean - b.mean
    remaining = 0.0
    rho = 0.0
    if d1 != 0 and d2 != 0 and (d1 > 0) == (d2 > 0) and abs(d2) < abs(d1):
        rho = d2 / d1
        remaining = abs(d2) * rho / (1 - rho)
    if change < limit and remaining < 10 * tol * scale:
        return True, 0.0
    if 0 < rho < 1 and change > 0:
        return False, max(math.log(limit / change) / math.log(rho), 1.0)
    return False, math.inf


def steady_state(engine: Engine, design: Design, circuit: Circuit, vscale: float = 1.0) -> SteadyState:
    """Run until the output is periodic; see the module docstring."""
    debug = bool(os.environ.get("SIMKIT_DEBUG_STEADY"))
    T = circuit.period
    sim = design.simulation
    max_time = sim.max_settle_time if sim.max_settle_time is not None else MAX_PERIODS * T
    tol = sim.settle_tolerance
    ics = estimate_state(design, circuit, vscale)
    span = CHUNK_PERIODS * T
    hist: list[metrics.PeriodStats] = []
    total = 0.0
    shooting = 0
    notes: list[str] = []
    scale = max(design.source.vpeak * vscale * 1e-3, 1e-9)
    newton_failed = False
    while True:
        run = run_span(engine, design, circuit, span, ics)
        total += span
        v = run.waves.v(circuit.output)
        stats = metrics.period_stats(run.waves.time, v, T, 0.0)
        hist.extend(stats)
        scale = max(abs(stats[-1].mean), design.source.vpeak * vscale * 1e-3, 1e-9)
        ok, remaining = _settled(hist, scale, tol)
        end = end_state(circuit, run.waves)
        drift = _state_drift(circuit, ics, end, design.source.vpeak * vscale) / CHUNK_PERIODS
        if debug:
            print(f"chunk to {total:.4g} s: change {_change(hist, 1.0):.3g} V, state drift "
                  f"{drift:.3g}/period, {remaining:.3g} periods to go", file=sys.stderr)
        if ok and drift < tol:
            return SteadyState(run, total, True, round(total / T), shooting, hist, notes)
        if total + span > max_time * (1 + 1e-9):
            notes.append(
                f"not settled: the output still changed {_change(hist, scale):.2g} per period "
                f"after {total:.3g} s (raise simulation.max_settle_time)"
            )
            return SteadyState(run, total, False, round(total / T), shooting, hist, notes)
        ics = end
        slow = remaining > 2 * CHUNK_PERIODS or (ok and drift >= tol)
        if not slow:
            continue
        # A slow mode drifting geometrically: extrapolate along it, from the states at the
        # chunk's last three period boundaries (no restart in between).  Anything else (far
        # from periodic, or an oscillating choke-capacitor mode): Newton on the period map.
        xa, xb, xc = (state_at(circuit, run.waves, k * T) for k in
                      (CHUNK_PERIODS - 2, CHUNK_PERIODS - 1, CHUNK_PERIODS))
        jump = extrapolate(xa, xb, xc, circuit) if drift < 100 * tol else None
        if jump is not None:
            ics = jump
            hist.clear()
        elif shooting < 2 and not newton_failed:
            new_ics, used = shoot(engine, design, circuit, ics, target=0.1 * tol)
            total += used * T
            shooting += 1
            if new_ics is None:
                newton_failed = True
            else:
                ics = new_ics
                hist.clear()


def extrapolate(x0: dict[str, float], x1: dict[str, float], x2: dict[str, float],
                circuit: Circuit) -> dict[str, float] | None:
    """Jump to the limit of a geometric drift: x2 + d2 * rho / (1 - rho).

    rho is the ratio of the last two chunk-to-chunk changes, projected on each other; the
    jump is taken only when the two changes point the same way (cosine above 0.95) and
    shrink (0 < rho < 0.995), which is what one slow mode looks like.
    """
    keys = [c.name for c in circuit.capacitors if c.role not in ("snubber", "sense")] + \
        [i.name for i in circuit.inductors if i.role == "choke"]
    if not keys:
        return None
    scale = np.array([max(abs(x2[k]), 1e-9) for k in keys])
    d1 = np.array([x1[k] - x0[k] for k in keys]) / scale
    d2 = np.array([x2[k] - x1[k] for k in keys]) / scale
    n1, n2 = float(np.linalg.norm(d1)), float(np.linalg.norm(d2))
    if n1 == 0 or n2 == 0:
        return None
    cos = float(d1 @ d2) / (n1 * n2)
    rho = float(d1 @ d2) / (n1 * n1)
    if cos < 0.95 or not 0 < rho < 0.995:
        return None
    gain = rho / (1 - rho)
    out = dict(x2)
    for k in keys:
        out[k] = x2[k] + (x2[k] - x1[k]) * gain
    return out


def _state_drift(circuit: Circuit, before: dict[str, float], after: dict[str, float], vpk: float) -> float:
    """Largest relative change of any state variable (snubbers aside) between two instants."""
    worst = 0.0
    i_scale = max([abs(after[x.name]) for x in circuit.inductors] + [1e-3])
    for cap in circuit.capacitors:
        if cap.role in ("snubber", "sense"):
            continue
        floor = 1e-3 * vpk if cap.role != "aux" else 1e-3
        sc = max(abs(after[cap.name]), floor)
        worst = max(worst, abs(after[cap.name] - before.get(cap.name, 0.0)) / sc)
    for ind in circuit.inductors:
        if ind.role != "choke":
            continue
        worst = max(worst, abs(after[ind.name] - before.get(ind.name, 0.0)) / i_scale)
    return worst


def _change(hist: list[metrics.PeriodStats], scale: float) -> float:
    if len(hist) < 2:
        return math.inf
    b, c = hist[-2], hist[-1]
    return max(abs(c.mean - b.mean), abs(c.low - b.low), abs(c.high - b.high)) / scale


def shoot(engine: Engine, design: Design, circuit: Circuit, x0: dict[str, float],
          iterations: int = 4, target: float = 1e-6) -> tuple[dict[str, float] | None, int]:
    """Newton's method on x = Phi_T(x), the one-period map of the state.

    The Jacobian comes from finite differences (one one-period run per state variable).
    Returns the improved state (None if Newton did not reduce the residual) and the number
    of periods simulated.
    """
    T = circuit.period
    names = list(x0)
    vpk = design.source.vpeak
    i_scale = max(abs(v) for k, v in x0.items() if k.startswith("L")) if any(
        k.startswith("L") for k in x0) else 1.0
    scales = np.array([vpk if n.startswith("C") else max(i_scale, 1e-3) for n in names])
    used = 0

    def phi(x: np.ndarray, steps: int | None = None) -> np.ndarray:
        nonlocal used
        run = run_span(engine, design, circuit, T, dict(zip(names, x.tolist(), strict=True)), steps=steps)
        used += 1
        st = end_state(circuit, run.waves)
        return np.array([st[n] for n in names])

    x = np.array([x0[n] for n in names])
    fx = phi(x) - x
    best = float(np.max(np.abs(fx) / scales))
    start = best
    for _ in range(iterations):
        if best < target:
            break
        # The Jacobian only steers Newton, so its columns use a coarser step (the base point
        # too, so the differences stay consistent); residuals use the design's own step.
        h = FD_STEP * scales
        coarse = JACOBIAN_STEPS if design.simulation.steps_per_period > JACOBIAN_STEPS else None
        px = phi(x, coarse) if coarse else fx + x
        jac = np.empty((len(x), len(x)))
        for j in range(len(x)):
            xp = x.copy()
            xp[j] += h[j]
            jac[:, j] = (phi(xp, coarse) - px) / h[j]
        try:
            dx = np.linalg.solve(jac - np.eye(len(x)), -fx)
        except np.linalg.LinAlgError:
            break
        step = 1.0
        improved = False
        for _ in range(4):
            xn = x + step * dx
            fn = phi(xn) - xn
            res = float(np.max(np.abs(fn) / scales))
            if os.environ.get("SIMKIT_DEBUG_STEADY"):
                print(f"  newton: residual {res:.3g} (was {best:.3g}), step {step}", file=sys.stderr)
            if res < best:
                x, fx, best, improved = xn, fn, res, True
                break
            step *= 0.5
        if not improved:
            break
    if best >= start:
        return None, used
    return dict(zip(names, x.tolist(), strict=True)), used
