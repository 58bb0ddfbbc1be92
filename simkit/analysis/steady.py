"""The periodic steady state of a design: Newton shooting on the one-period map, then verified.

The state is every capacitor voltage and inductor current.  ``Phi(x)`` is the state one source
period after starting from ``x`` (one ngspice span); the steady state is the fixed point
``Phi(x) = x``.  From a closed-form estimate (:mod:`simkit.analysis.estimate`), or from the
periodic state of a neighbouring design in a sweep, Newton's method on ``Phi(x) - x`` finds it
in a few periods whatever the circuit's time constants: a reservoir of farads or a choke filter
ringing at 1 Hz costs no more than a small capacitor.  The Jacobian of ``Phi`` comes from finite
differences at a coarse step (it only steers); every residual is taken at the measuring step.

Distance to the fixed point is measured the way the slow modes see it: the Newton correction
``(I - J)^-1 (Phi(x) - x)``, relative to each variable's scale.  A change per period, however
small, says nothing when the circuit's time constant is thousands of periods; the correction
does.

The measuring step is chosen for accuracy: the fewest steps per period that put
``POINTS_PER_PULSE`` time points into the shortest diode conduction pulse (measured on the
settled waveform), between ``MIN_STEPS`` and ``MAX_STEPS``, then the halving test: one more
period at half the step must change no figure it affects by more than ``STEP_TOL``, else the
step becomes the one that change says will pass (errors go as the step squared) and is tested
in turn.
tests/test_steady_engine.py holds the choice against runs at one period / 4000 (at least four
times finer) on every topology.

Before it is reported, the final span (``MEASURE_PERIODS`` periods from the fixed point) is
verified three ways (:class:`Check`): every state variable repeats from period to period; the
slow modes' extrapolation (the Newton correction of the last period) is within the tolerance;
and the power balance holds, i.e. the power the source delivers is what the loads and losses
take, with no share coming out of stored energy.  A failed check means more simulation (fresh
Jacobian, then plain time stepping up to ``max_settle_time``); what still fails becomes a
warning naming the check and the figures it affects, or, for a power balance off by more than
``POWER_FAIL``, a :class:`~simkit.errors.SimulationError` (exit 3).

When Newton cannot make progress (circuits that switch, such as glow tubes striking), the
fallback runs chunks of ``CHUNK_PERIODS`` periods, each a fresh ``.tran ... uic`` from the exact
end state of the last, and extrapolates geometrically along a slow mode when it sees one.
"""

from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass, field

import numpy as np

from simkit.analysis import metrics
from simkit.analysis.estimate import estimate_state
from simkit.analysis.runs import Run, end_nodes, end_state, run_span, state_at, state_names
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms
from simkit.errors import SimulationError
from simkit.netlist.circuit import Circuit
from simkit.progress import Callback as Progress  # (what, simulated time done, time to do or None)

#: Whole periods of the final span; the figures are taken over them.
MEASURE_PERIODS = 1
#: Periods per chunk of the time-stepping fallback.
CHUNK_PERIODS = 4
#: Default cap on the simulated time spent finding the steady state, in periods.
MAX_PERIODS = 400

#: Steps per period of the first span (before the conduction pulses are known).
PROBE_STEPS = 200
#: Time points the measuring step puts into the shortest diode conduction pulse.
POINTS_PER_PULSE = 20
#: Bounds of the automatic measuring step, steps per period.
MIN_STEPS = 200
MAX_STEPS = 2000
#: The measuring step is accepted when halving it changes no figure more than this (relative).
STEP_TOL = 2e-3
#: Steps per period of the spans that build the Jacobian.
JACOBIAN_STEPS = 200
#: Finite-difference step of the Jacobian, relative to each variable's scale: well above the
#: span-to-span integration noise (about 1e-5 of the scale at reltol 1e-4).
FD_STEP = 1e-3
#: A Newton step that leaves more than this share of the distance asks for a fresh Jacobian.
KEEP_JACOBIAN = 0.7
#: Newton iterations before the fallback takes over.
NEWTON_ITERATIONS = 12

#: Power balance: share of the source power that may come from (or go into) stored energy over
#: the measured periods.  At a fixed point it is zero; 0.2 % corresponds to an output within
#: about 0.1 % of the periodic state for a resistive load (P ~ V^2).
POWER_TOL = 2e-3
#: Beyond this share the figures would break energy conservation: the run is refused.
POWER_FAIL = 0.02



@dataclass(frozen=True)
class Check:
    """One verification of the reported steady state."""

    name: str  # "periodicity", "slow modes", "power balance"
    value: float  # measured (relative)
    limit: float
    ok: bool
    detail: str


@dataclass
class Solution:
    """A periodic state and the Jacobian that found it: the warm start of a neighbouring design."""

    names: tuple[str, ...]
    x: np.ndarray
    jacobian: np.ndarray | None
    steps: int
    verified: int = 0  # the measuring step that passed the halving test (0: none)


@dataclass
class SteadyState:
    final: Run
    settle_time: float  # s, all steady-state time simulated (Jacobian spans included)
    settled: bool
    periods: int
    shooting_steps: int = 0  # Newton iterations
    history: list[metrics.PeriodStats] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    checks: list[Check] = field(default_factory=list)
    steps: int = 0  # steps per period of the final span
    method: str = "newton"  # "newton" or "time stepping"
    solution: Solution | None = None


class _Space:
    """The state vector: names, scales, and conversions between dict and array."""

    def __init__(self, design: Design, circuit: Circuit, x0: dict[str, float], vscale: float) -> None:
        self.circuit = circuit
        self.names = state_names(circuit)
        src = design.source
        vpk = (src.inverter.peak if src.inverter is not None else src.vpeak) * max(vscale, 1e-9)
        self.vpk = max(vpk, 1e-9)
        roles = {c.name: c.role for c in circuit.capacitors}
        # Snubbers and sensing delays ring at every commutation: their value at a period boundary
        # says nothing about the steady state, so the checks do not watch them.
        self.watched = np.array([roles.get(n) not in ("snubber", "sense") for n in self.names])
        chokes = [abs(x0.get(i.name, 0.0)) for i in circuit.inductors]
        i_scale = max([*chokes, self.vpk * 1e-6])
        scales = []
        for n in self.names:
            if n in roles:
                scales.append(max(abs(x0.get(n, 0.0)), 1.0) if roles[n] == "aux" else self.vpk)
            else:
                scales.append(i_scale)
        self.scale = np.array(scales)

    def worst(self, values: np.ndarray) -> tuple[float, str]:
        """The largest of the watched variables' values, and its name."""
        if not len(values):
            return 0.0, ""
        masked = np.where(self.watched, values, -np.inf)
        k = int(np.argmax(masked))
        return (float(masked[k]), self.names[k]) if np.isfinite(masked[k]) else (0.0, "")

    def ripple(self, run: Run) -> np.ndarray:
        """Peak-to-peak of every state variable over a run, in its unit."""
        w = run.waves
        out = []
        by_name = {c.name: c for c in self.circuit.capacitors}
        for n in self.names:
            y = w.v(by_name[n].inner_plus) - w.v(by_name[n].inner_minus) if n in by_name else w.i(n)
            out.append(float(np.max(y) - np.min(y)))
        return np.array(out)

    def calibrate(self, run: Run) -> None:
        """Each inductor's scale from the current it carries over a period (not known beforehand)."""
        w = run.waves
        for k, n in enumerate(self.names):
            if n.startswith(("L", "l")) and n not in {c.name for c in self.circuit.capacitors}:
                self.scale[k] = max(self.scale[k], float(np.max(np.abs(w.i(n)))))

    def vec(self, d: dict[str, float]) -> np.ndarray:
        return np.array([d.get(n, 0.0) for n in self.names])

    def dict(self, x: np.ndarray) -> dict[str, float]:
        return dict(zip(self.names, (float(v) for v in x), strict=True))


class _Shooter:
    """Spans of one period and what Newton needs from them."""

    def __init__(self, engine: Engine, design: Design, circuit: Circuit, space: _Space,
                 progress: Progress | None) -> None:
        self.engine = engine
        self.design = design
        self.circuit = circuit
        self.space = space
        self.simulated = 0.0
        self.progress = progress
        self.hint: dict[str, float] = {}

    def period(self, x: np.ndarray, steps: int, periods: int = 1) -> tuple[np.ndarray, Run]:
        T = self.circuit.period
        run = run_span(self.engine, self.design, self.circuit, periods * T, {**self.space.dict(x), **self.hint},
                       steps)
        if not self.hint:
            # Node voltages where the first span ended start every later span: fixed, so they never
            # make two spans from nearby states differ by more than the states do.
            self.hint = end_nodes(self.circuit, run.waves)
            self.space.calibrate(run)
        self.simulated += periods * T
        if self.progress is not None:
            self.progress("steady state", self.simulated, None)
        return self.space.vec(end_state(self.circuit, run.waves)), run

    def jacobian(self, x: np.ndarray, steps: int) -> np.ndarray:
        """d Phi / d x by forward differences, at ``steps`` per period."""
        h = FD_STEP * self.space.scale
        base, _ = self.period(x, steps)
        n = len(x)
        jac = np.empty((n, n))
        for j in range(n):
            xp = x.copy()
            xp[j] += h[j]
            jac[:, j] = (self.period(xp, steps)[0] - base) / h[j]
        return jac


def _correction(jac: np.ndarray | None, residual: np.ndarray) -> np.ndarray:
    """The Newton correction (I - J)^-1 r; without a usable Jacobian the residual itself."""
    if jac is None:
        return residual
    try:
        dx = np.linalg.solve(np.eye(len(residual)) - jac, residual)
    except np.linalg.LinAlgError:
        return residual
    return dx if np.all(np.isfinite(dx)) else residual


def pulse_steps(circuit: Circuit, waves: Waveforms, t0: float, t1: float) -> int:
    """Steps per period that put POINTS_PER_PULSE points into the shortest conduction pulse.

    A pulse is a stretch of a settled period where a diode's current stays above 5 % of its own
    peak; pulses carrying less than a tenth of that diode's charge are ignored (a tail hovering
    near the threshold is not a pulse).  The count is rounded up to a multiple of 50 and kept
    within ``MIN_STEPS`` .. ``MAX_STEPS``.
    """
    T = circuit.period
    shortest = math.inf
    for d in circuit.diodes:
        tt, ii = metrics.clip(waves.time, waves.i(d.sense), t0, t1)
        top = float(np.max(ii))
        if top <= 0:
            continue
        on = ii > 0.05 * top
        # A pulse runs from the sample before its first "on" sample to the sample after its last.
        edges = np.flatnonzero(np.diff(on.astype(np.int8)))
        starts = [int(k) + 1 for k in edges if not on[k]]
        ends = [int(k) for k in edges if on[k]]
        if on[0]:
            starts.insert(0, 0)
        if on[-1]:
            ends.append(len(on) - 1)
        pulses = []  # (length s, charge C)
        for a, b in zip(starts, ends, strict=False):
            lo, hi = max(a - 1, 0), min(b + 1, len(tt) - 1)
            pulses.append((float(tt[hi] - tt[lo]), float(np.trapezoid(ii[lo:hi + 1], tt[lo:hi + 1]))))
        if len(pulses) > 1 and on[0] and on[-1]:  # the window is one period: a pulse across its ends is one
            last = pulses.pop()
            pulses[0] = (pulses[0][0] + last[0], pulses[0][1] + last[1])
        total = sum(q for _, q in pulses)
        for length, q in pulses:
            if q >= 0.1 * total:
                shortest = min(shortest, length)
    if not math.isfinite(shortest) or shortest <= 0:
        return MIN_STEPS
    steps = POINTS_PER_PULSE * T / shortest
    return int(min(max(math.ceil(steps / 50.0) * 50, MIN_STEPS), MAX_STEPS))


def _detrended_pp(t: np.ndarray, y: np.ndarray, period: float) -> float:
    tt, yy = metrics.clip(t, y, 0.0, period)
    yy = yy - (yy[-1] - yy[0]) * tt / period
    return float(np.max(yy) - np.min(yy))


def figure_change(circuit: Circuit, a: Run, b: Run) -> tuple[float, str]:
    """Largest relative change, and its figure, between two one-period runs from the same state, of
    the figures the step affects most: output mean and ripple, each diode's peak and RMS current."""
    T = circuit.period
    wa, wb = a.waves, b.waves
    va, vb = wa.v(circuit.output), wb.v(circuit.output)
    mean_a, mean_b = metrics.mean(wa.time, va, 0, T), metrics.mean(wb.time, vb, 0, T)
    changes = {"output mean": abs(mean_a - mean_b) / max(abs(mean_a), 1e-12)}
    # The fixed point moves a little with the step, so the finer run starts a slow mode: its drift
    # over the period is taken out before the ripples are compared.
    pp_a, pp_b = _detrended_pp(wa.time, va, T), _detrended_pp(wb.time, vb, T)
    # A ripple below 1e-5 of the output is compared at that floor: its last 0.1 % is integration noise
    # (and micro-volts no builder measures).
    changes["output ripple"] = abs(pp_a - pp_b) / max(pp_a, 1e-5 * abs(mean_a), 1e-12)
    peaks_a = [metrics.peak(wa.time, wa.i(d.sense), 0, T) for d in circuit.diodes]
    top = max([*peaks_a, 1e-15])
    for d, pa in zip(circuit.diodes, peaks_a, strict=True):
        pb = metrics.peak(wb.time, wb.i(d.sense), 0, T)
        ra, rb = metrics.rms(wa.time, wa.i(d.sense), 0, T), metrics.rms(wb.time, wb.i(d.sense), 0, T)
        changes[f"{d.name} peak"] = abs(pa - pb) / top
        changes[f"{d.name} RMS"] = abs(ra - rb) / top
    name = max(changes, key=lambda k: changes[k])
    return changes[name], name


def steady_state(engine: Engine, design: Design, circuit: Circuit, vscale: float = 1.0,
                 warm: Solution | None = None, progress: Progress | None = None) -> SteadyState:
    """Find, verify and return the periodic steady state; see the module docstring."""
    T = circuit.period
    sim = design.simulation
    tol = sim.settle_tolerance
    max_time = sim.max_settle_time if sim.max_settle_time is not None else MAX_PERIODS * T
    names = tuple(state_names(circuit))
    if warm is not None and warm.names != names:
        warm = None
    start = dict(zip(names, (float(v) for v in warm.x), strict=True)) if warm is not None \
        else estimate_state(design, circuit, vscale)
    space = _Space(design, circuit, start, vscale)
    shooter = _Shooter(engine, design, circuit, space, progress)
    notes: list[str] = []
    newton = _Newton(shooter, sim.steps_per_period, tol, max_time, warm)
    history: list[metrics.PeriodStats] = []
    method = "newton"
    if not names:  # nothing stores energy: every period is the steady state
        final = shooter.period(np.zeros(0), sim.steps_per_period or PROBE_STEPS)[1]
        final.steps = sim.steps_per_period or PROBE_STEPS
        return SteadyState(final, shooter.simulated, True, 1, 0, [], [], [], final.steps, "no state", None)
    converged = False if circuit.hidden_state else newton.solve(space.vec(start))
    if converged and newton.run is not None:
        final = newton.run
    else:
        method = "time stepping"
        x0 = newton.x if newton.x is not None else space.vec(start)
        x, steps, _, history = _time_stepping(shooter, x0, newton.steps, sim.steps_per_period, max_time, tol, notes)
        newton.steps, newton.jac = steps, None
        # A part with hidden state (a glow tube struck or not) starts each span unstruck: the final span
        # runs on for a few periods and the figures come from its last one.
        final = shooter.period(x, steps, CHUNK_PERIODS if circuit.hidden_state else MEASURE_PERIODS)[1]
    checks = verify(design, circuit, final, space, newton.jac, tol)
    if any(not c.ok for c in checks) and shooter.simulated < max_time and not circuit.hidden_state:
        # More simulation: Newton again from the end of the final span with a fresh Jacobian, then
        # time stepping; the better of the two answers is kept.
        x2 = space.vec(end_state(circuit, final.waves))
        again = _Newton(shooter, sim.steps_per_period, tol, max_time, None, steps=final.steps)
        again.verified = newton.verified  # the step the first search verified holds for this one too
        if again.solve(x2) and again.run is not None:
            final2, jac2 = again.run, again.jac
        else:
            x3, steps3, _, hist3 = _time_stepping(shooter, again.x if again.x is not None else x2, again.steps,
                                                  sim.steps_per_period, max_time, tol, notes)
            history += hist3
            final2, jac2 = shooter.period(x3, steps3, MEASURE_PERIODS)[1], None
        checks2 = verify(design, circuit, final2, space, jac2, tol)
        if sum(not c.ok for c in checks2) <= sum(not c.ok for c in checks):
            final, checks, newton.jac, newton.verified = final2, checks2, jac2, again.verified
            method = "newton, checked twice" if jac2 is not None else "newton and time stepping"
    failed = [c for c in checks if not c.ok]
    for c in failed:
        if c.name == "power balance" and c.value > POWER_FAIL:
            raise SimulationError(
                f"no steady state found for {design.origin}: {c.detail}",
                hint="the design's time constants may be far longer than the source period (a huge "
                "reservoir, a choke resonating far below the source frequency); check the part values "
                "for typing errors (mF for uF), or raise simulation.max_settle_time",
            )
        notes.append(f"steady state not verified ({c.name}): {c.detail}; {_affects(c.name)}")
    solution = Solution(names, space.vec(final.ics), newton.jac, final.steps, newton.verified)
    return SteadyState(final, shooter.simulated, not failed, round(shooter.simulated / T), newton.iterations,
                       history, notes, checks, final.steps, method, solution)


class _Newton:
    """Newton on Phi(x) - x with a line search and Broyden updates.

    It iterates at the probe step until the state is close, then at the measuring step
    (:func:`pulse_steps`), which it checks by halving (:func:`figure_change`) unless a
    neighbouring design already verified it.  Converged means: the Newton correction is
    within ``tol`` of every variable's scale, and within 0.2 % of every variable's own ripple
    (so no slow mode shows in the ripple figures).  ``run`` is then the one-period span from
    the fixed point: the final span, whose figures are reported.
    """

    def __init__(self, shooter: _Shooter, fixed_steps: int | None, tol: float, max_time: float,
                 warm: Solution | None, steps: int | None = None) -> None:
        self.shooter = shooter
        self.fixed = fixed_steps
        self.tol = tol
        self.max_time = max_time
        self.jac = warm.jacobian if warm is not None else None
        self.trusted = warm.verified if warm is not None else 0  # the step a neighbour verified
        # A neighbour's verified step is where this design will measure too: start there.
        self.steps = fixed_steps or steps or (self.trusted if self.trusted and self.jac is not None else PROBE_STEPS)
        self.verified = fixed_steps or 0
        self.iterations = 0
        self.x: np.ndarray | None = None
        self.run: Run | None = None

    def solve(self, x: np.ndarray) -> bool:
        debug = bool(os.environ.get("SIMKIT_DEBUG_STEADY"))
        sh, space = self.shooter, self.shooter.space
        fx, run = sh.period(x, self.steps)
        self.x, self.run = x, run
        fresh = False  # the Jacobian was computed at the current point
        while sh.simulated < self.max_time:
            if self.jac is None:
                self.jac = sh.jacobian(x, min(JACOBIAN_STEPS, self.steps))
                fresh = True
            jac = self.jac
            dx = _correction(jac, fx - x)
            dist = float(np.max(np.abs(dx) / space.scale))
            # The correction must also be small against each variable's own ripple, or a slow mode
            # (a choke and capacitor ringing) would show in the ripple figures: 0.2 % of it, down to the
            # integration noise of one period (about 1e-9 of the scale with full-precision states).
            share = space.worst(np.abs(dx) / np.maximum(0.002 * space.ripple(run), 1e-9 * space.scale))[0]
            if debug:
                print(f"steady: newton {self.iterations}: distance {dist:.3g}, against the ripple {share:.3g} "
                      f"at {self.steps} steps", file=sys.stderr)
            if dist <= self.tol and share <= 1.0:
                if self._step_settled(x, run):
                    self.x, self.run = x, run
                    run.steps = self.steps
                    return True
                fx, run = sh.period(x, self.steps)
                continue
            if self.iterations >= NEWTON_ITERATIONS:
                break
            alpha = 1.0
            accepted = False
            for _ in range(5):
                xn = x + alpha * dx
                try:
                    fxn, runn = sh.period(xn, self.steps)
                except SimulationError:  # a trial state far off (stiff diodes) may not converge: step shorter
                    alpha *= 0.5
                    continue
                dn = float(np.max(np.abs(_correction(jac, fxn - xn)) / space.scale))
                if dn < dist:
                    accepted = True
                    break
                alpha *= 0.5
            self.iterations += 1
            if not accepted:
                if fresh:
                    break  # no progress even with a fresh Jacobian
                self.jac = None
                continue
            # Broyden's update keeps the Jacobian in step with what the spans showed (scaled variables).
            s = xn - x
            w = s / space.scale**2
            denom = float(s @ w)
            if denom > 0:
                self.jac = jac + np.outer((fxn - fx) - jac @ s, w) / denom
            # Newton should gain far more than this: the Jacobian no longer fits.  (A step that keeps
            # less of the distance is worth more than the n + 1 spans of a fresh Jacobian: a neighbour's
            # Jacobian, Broyden-updated, typically keeps 0.1-0.5 of it; within the tolerance the steps
            # refine against the ripple and the distance also carries the spans' integration noise.)
            if dn > KEEP_JACOBIAN * dist and dist > self.tol and not fresh:
                self.jac = None
            fresh = False
            x, fx, run = xn, fxn, runn
            self.x, self.run = x, run
        self.x = x
        return False

    def _step_settled(self, x: np.ndarray, run: Run) -> bool:
        """Is the current step the measuring step?  If not, move to it (the caller iterates on)."""
        if self.fixed:
            return True
        circuit = self.shooter.circuit
        need = pulse_steps(circuit, run.waves, 0.0, circuit.period)
        if self.trusted >= need:  # a neighbour verified a step at least this fine
            need = self.trusted
        if self.steps < need:
            self.steps = need
            return False
        if self.verified >= self.steps or self.trusted >= self.steps or self.steps >= MAX_STEPS:
            self.verified = self.steps
            return True
        # The step is right when halving it changes no figure by more than STEP_TOL.
        finer = min(2 * self.steps, MAX_STEPS)
        run2 = self.shooter.period(x, finer)[1]
        diff, what = figure_change(circuit, run, run2)
        if os.environ.get("SIMKIT_DEBUG_STEADY"):
            print(f"steady: {self.steps} -> {finer} steps changes {what} by {diff:.3g}", file=sys.stderr)
        if diff > STEP_TOL:
            # Trapezoidal integration: a figure's error goes as the step squared, so the step that passes is
            # about sqrt(diff / STEP_TOL) finer than this one (a tenth more to spare), and it is checked in turn:
            # the coarsest step that holds the figures, not the next power of two.
            need = self.steps * math.sqrt(diff / STEP_TOL) * 1.1
            self.steps = int(min(finer, max(self.steps + 50, math.ceil(need / 50.0) * 50)))
            return False
        self.verified = self.steps
        return True


def _affects(check: str) -> str:
    return {"periodicity": "the ripple and peak figures may include drift",
            "slow modes": "vout_dc_v and every mean figure may still move by that much",
            "power balance": "vout_dc_v, iout_dc_a and the currents are not yet those of the steady state"}[check]


def _time_stepping(shooter: _Shooter, x: np.ndarray, steps: int, fixed_steps: int | None, max_time: float,
                   tol: float, notes: list[str]) -> tuple[np.ndarray, int, bool, list[metrics.PeriodStats]]:
    """Chunks of whole periods from the end state of the last, with geometric extrapolation.

    Settled when the output's mean, minimum and maximum change per period less than ``tol`` of
    the output and 0.2 % of the ripple, the geometric extrapolation of the remaining drift is
    below ten times ``tol``, and every state variable repeats.
    """
    circuit = shooter.circuit
    space = shooter.space
    T = circuit.period
    hist: list[metrics.PeriodStats] = []
    while True:
        end, run = shooter.period(x, steps, CHUNK_PERIODS)
        v = run.waves.v(circuit.output)
        hist.extend(metrics.period_stats(run.waves.time, v, T, 0.0))
        scale = max(abs(hist[-1].mean), space.vpk * 1e-3, 1e-9)
        ok, remaining = _settled(hist, scale, tol)
        drift = float(np.max(np.abs(end - x) / space.scale)) / CHUNK_PERIODS
        if ok and drift < tol and fixed_steps is None:
            need = pulse_steps(circuit, run.waves, run.tstop - T, run.tstop)
            if need > steps:
                steps = need
                ok = False
        if ok and drift < tol:
            return end, steps, True, hist
        if shooter.simulated + CHUNK_PERIODS * T > max_time * (1 + 1e-9):
            notes.append(f"not settled: the output still changed {_change(hist, scale):.2g} per period after "
                         f"{shooter.simulated:.3g} s (raise simulation.max_settle_time)")
            return end, steps, False, hist
        x = end
        if remaining > 2 * CHUNK_PERIODS:
            xs = [space.vec(state_at(circuit, run.waves, k * T))
                  for k in (CHUNK_PERIODS - 2, CHUNK_PERIODS - 1, CHUNK_PERIODS)]
            jump = extrapolate(*xs, space.scale)
            if jump is not None:
                x = jump
                hist.clear()


def verify(design: Design, circuit: Circuit, final: Run, space: _Space, jac: np.ndarray | None,
           tol: float) -> list[Check]:
    """The three checks of the final span (see the module docstring)."""
    T = circuit.period
    w = final.waves
    t1 = final.tstop
    t0 = t1 - MEASURE_PERIODS * T
    xs = [space.vec(state_at(circuit, w, t0 + k * T)) for k in range(MEASURE_PERIODS + 1)]
    per, name = space.worst(np.abs(xs[-1] - xs[-2]) / space.scale)
    checks = [Check("periodicity", per, 10 * tol, per <= 10 * tol,
                    f"{name} changed {per:.2g} of its scale over the last period")]
    dist, name = space.worst(np.abs(_correction(jac, xs[-1] - xs[-2])) / space.scale)
    checks.append(Check("slow modes", dist, 10 * tol, dist <= 10 * tol,
                        f"extrapolating the slow modes moves {name} by {dist:.2g} of its scale"))
    p_src, p_store, p_load = power_balance(design, circuit, w, t0, t1)
    # With no load worth the name (less than 100 Mohm across the peak voltage would take), no energy
    # flows to balance: an idle supply's figures are voltages, which the two checks above hold.
    floor = space.vpk**2 / 1e8
    if abs(p_load) < floor:
        checks.append(Check("power balance", 0.0, POWER_TOL, True, "not applicable: no load draws power"))
        return checks
    ref = max(abs(p_src), abs(p_load))
    share = abs(p_store) / ref
    checks.append(Check("power balance", share, POWER_TOL, share <= POWER_TOL,
                        f"the source delivers {p_src:.4g} W and the loads and bleeder take {p_load:.4g} W, "
                        f"while {-p_store:.4g} W comes out of stored energy ({100 * share:.2g} % of the power)"))
    return checks


def power_balance(design: Design, circuit: Circuit, w: Waveforms, t0: float, t1: float) -> tuple[float, float, float]:
    """Mean power from the source EMFs, into stored energy, and into the loads and bleeder, W.

    Stored energy is 1/2 C v^2 of every capacitor that is a circuit's (not a model's state: an
    inverter's smoothed power is a "voltage" in watts) and 1/2 L i^2 of every inductor, from the
    state at both ends of [t0, t1]; at a periodic state it comes back to where it started.
    """
    span = t1 - t0
    p_src = 0.0
    for wd in circuit.windings:
        v = w.v(wd.emf) - w.v(wd.minus)
        p_src += metrics.mean(w.time, v * -w.i(wd.name), t0, t1)
    a = state_at(circuit, w, t0)
    b = state_at(circuit, w, t1)
    e = 0.0
    for cap in circuit.capacitors:
        if cap.role in ("aux", "sense"):
            continue  # a model's state (an inverter's smoothed power, a sensing delay), not stored energy
        e += 0.5 * cap.value * (b[cap.name] ** 2 - a[cap.name] ** 2)
    for ind in circuit.inductors:
        e += 0.5 * ind.value * (b[ind.name] ** 2 - a[ind.name] ** 2)
    p_load = 0.0
    for ld in circuit.loads:
        p_load += metrics.mean(w.time, w.v(ld.node) * w.i(ld.sense), t0, t1)
    for r in circuit.resistors:
        if r.role == "bleeder":
            v = w.v(r.a) - w.v(r.b)
            p_load += metrics.mean(w.time, v * v, t0, t1) / r.value
    return p_src, e / span, p_load


def _settled(hist: list[metrics.PeriodStats], scale: float, tol: float) -> tuple[bool, float]:
    """Has the output stopped changing?  Returns (settled, estimated periods still needed).

    Settled means: the change per period of the mean, minimum and maximum is below ``tol``
    of the output voltage, and also below 0.2 % of the ripple (so the ripple is not inflated
    by drift), and the geometric extrapolation of the remaining drift of the mean is below
    ten times ``tol``.
    """
    if len(hist) < 3:
        return False, math.inf
    a, b, c = hist[-3], hist[-2], hist[-1]
    change = max(abs(c.mean - b.mean), abs(c.low - b.low), abs(c.high - b.high))
    ripple = max(c.high - c.low, 0.0)
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


def extrapolate(x0: np.ndarray, x1: np.ndarray, x2: np.ndarray, scale: np.ndarray) -> np.ndarray | None:
    """Jump to the limit of a geometric drift: x2 + d2 * rho / (1 - rho).

    rho is the ratio of the last two period-to-period changes, projected on each other; the
    jump is taken only when the two changes point the same way (cosine above 0.95) and
    shrink (0 < rho < 0.995), which is what one slow mode looks like.
    """
    d1 = (x1 - x0) / scale
    d2 = (x2 - x1) / scale
    n1, n2 = float(np.linalg.norm(d1)), float(np.linalg.norm(d2))
    if n1 == 0 or n2 == 0:
        return None
    cos = float(d1 @ d2) / (n1 * n2)
    rho = float(d1 @ d2) / (n1 * n1)
    if cos < 0.95 or not 0 < rho < 0.995:
        return None
    return x2 + (x2 - x1) * (rho / (1 - rho))


def _change(hist: list[metrics.PeriodStats], scale: float) -> float:
    if len(hist) < 2:
        return math.inf
    b, c = hist[-2], hist[-1]
    return max(abs(c.mean - b.mean), abs(c.low - b.low), abs(c.high - b.high)) / scale
