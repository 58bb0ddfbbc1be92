"""Steady keying: a keyed load switched by its keying pattern until the pattern repeats.

The run starts from the periodic state at the duty-weighted mean load (the ``mean`` circuit),
a short lead-in before a keying cycle: long enough for the circuit's slowest mode, read off the
mean-load steady state's Jacobian, to forget where it started (``LEAD_DECAY``).  Then one whole
keying cycle is simulated and checked: the output's one-period mean over the period before the
cycle and over the period before its end must agree (``SETTLE_SHARE`` of the swing, or
``SETTLE_FLOOR`` of the output, or the integration noise: ``NOISE_SHARE`` x reltol of it).
A circuit that has not forgotten its start by then runs on, cycle after cycle, the drift
extrapolated geometrically when it shrinks steadily, until it does or ``MAX_CYCLES`` have run.

Cost and memory.  The keying pattern runs at ``COARSE_STEPS`` steps per period at most and at
ngspice's own default tolerance (``KEYED_RELTOL``): the keyed figures are means and one-period
means, which that holds to about 0.1 % (docs/engine-notes.md#keyed-step).  The runs are chunks of
about ``CHUNK_POINTS`` time points, each thinned as it comes (:func:`thin`): ``THIN_PER_PERIOD``
samples a period of the vectors the figures use, plus each one's highest and lowest sample of
every period, plus the running integral of each (so a mean between kept samples is the full
trace's, and between them off only by the integral's curvature over a 24th of a period).
Only the ripple during key-down needs the measuring step: the last period of the longest
key-down is simulated again at it (``refined``), from the exact state where a chunk ends.
"""

from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass, field, replace

import numpy as np

from simkit.analysis import metrics as mx
from simkit.analysis.runs import Run, restart_state, run_span
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms
from simkit.netlist.build import keying_drive
from simkit.netlist.circuit import Circuit
from simkit.netlist.drives import Drive
from simkit.progress import Callback as Progress  # (what, simulated time done, time to do or None)

#: Steps per period of the keying pattern, at most (ngspice's own error control usually takes more).
COARSE_STEPS = 50
#: Relative tolerance of the keying pattern's runs (ngspice's default); a looser design reltol is kept.
KEYED_RELTOL = 1e-3
#: Samples a period kept of each chunk (plus every vector's extremes of each period).
THIN_PER_PERIOD = 24
#: Time points a chunk aims at (memory: each point holds every vector of the deck).
CHUNK_POINTS = 40000
#: The lead-in lets the slowest mode decay to this share of where it started.
LEAD_DECAY = 1e-3
#: The lead-in, at least, in periods (the settle test compares the period before the cycle).
MIN_LEAD_PERIODS = 4
#: Settled: the one-period mean repeats within this share of its swing over the cycle ...
SETTLE_SHARE = 2e-3
#: ... or within this share of the output, whichever is larger.
SETTLE_FLOOR = 2e-5
#: ... or within this share of the output per unit of reltol: the integration noise of a one-period mean
#: (measured: about 0.25 x reltol of the output at reltol 1e-3, docs/engine-notes.md#keyed-step).
NOISE_SHARE = 0.5
#: Keying cycles simulated at most before the figures are given as approximate.
MAX_CYCLES = 8



@dataclass
class KeyedRun:
    """Steady keying: the thinned trace, the keying cycle the figures are taken over, and how it was found.

    ``run.waves`` holds the thinned vectors (absolute time ``run.waves.time + run.offset``),
    ``areas`` the running integral of each at the same samples (so :meth:`mean` and
    :meth:`period_mean` integrate the full trace, not the thinned one), ``refined`` the last
    period of the longest key-down at the measuring step.
    """

    run: Run
    cycle: float  # s
    window: tuple[float, float]  # absolute times of the keying cycle the figures are taken over
    settled: bool
    simulated: float  # s, all keyed time simulated (lead-in and every cycle)
    circuit: Circuit | None = None
    areas: dict[str, np.ndarray] = field(default_factory=dict)
    refined: Run | None = None
    drift: float = 0.0  # V, the one-period mean's change over the last cycle
    cycles: int = 1
    lead: float = 0.0  # s
    steps: int = COARSE_STEPS  # steps per period (maximum step) of the keying runs

    @property
    def time(self) -> np.ndarray:
        """Absolute time of the thinned samples, s."""
        return self.run.waves.time + self.run.offset

    def mean(self, name: str, a: float, b: float) -> float:
        """Mean of vector ``name`` over [a, b] (absolute times), from its running integral."""
        t, area = self.time, self.areas[name]
        return float((np.interp(b, t, area) - np.interp(a, t, area)) / (b - a))

    def period_mean(self, name: str, at: np.ndarray | float, period: float | None = None) -> np.ndarray:
        """Mean of vector ``name`` over one source period centred on each time of ``at`` (absolute);
        NaN where that period reaches past the run."""
        T = period if period is not None else (self.circuit.period if self.circuit is not None else 0.0)
        return mx.integral_period_mean(self.time, self.areas[name], T, at)


def kept_vectors(circuit: Circuit) -> list[str]:
    """The vectors the keyed figures and plots read (ngspice's lower-case names)."""
    names = {circuit.output, *circuit.section_nodes}
    names |= set(circuit.battery_nodes.values())
    names |= {f"{ld.sense.lower()}#branch" for ld in circuit.loads}
    reg = circuit.regulator
    if reg:
        names |= {reg.get("input", "raw"), reg.get("output", "out")}
        if "pass_sense" in reg:
            names |= {"drn", f"{reg['pass_sense'].lower()}#branch"}
        if "shunt_sense" in reg:
            names |= {"sh", f"{reg['shunt_sense'].lower()}#branch"}
    return sorted(n.lower() for n in names if n and n != "0")


def slowest_periods(jacobian: np.ndarray | None) -> float | None:
    """Time constant of the slowest mode of a one-period map, in periods (None: unknown)."""
    if jacobian is None or not len(jacobian) or not np.all(np.isfinite(jacobian)):
        return None
    try:
        rho = float(np.max(np.abs(np.linalg.eigvals(jacobian))))
    except np.linalg.LinAlgError:
        return None
    if rho >= 1.0:
        return None
    if rho <= 1e-12:
        return 0.0
    return -1.0 / math.log(rho)


def lead_periods(jacobian: np.ndarray | None, cycle_periods: int) -> int:
    """Periods of the lead-in: the slowest mode decays to LEAD_DECAY twice over (a key-up state can be
    slower than the mean load the Jacobian was taken at); a whole keying cycle when unknown."""
    tau = slowest_periods(jacobian)
    if tau is None:
        return max(cycle_periods, MIN_LEAD_PERIODS)
    n = math.ceil(2 * tau * math.log(1 / LEAD_DECAY)) + 1
    return max(min(n, cycle_periods), MIN_LEAD_PERIODS)


@dataclass
class _Trace:
    """The thinned chunks of one keyed run so far, in absolute time."""

    names: list[str]
    times: list[np.ndarray] = field(default_factory=list)
    vectors: dict[str, list[np.ndarray]] = field(default_factory=dict)
    areas: dict[str, list[np.ndarray]] = field(default_factory=dict)
    carry: dict[str, float] = field(default_factory=dict)  # running integral at the end of the last chunk

    def add(self, circuit: Circuit, waves: Waveforms, offset: float) -> None:
        t = waves.time + offset
        keep = thin(circuit, waves, self.names)
        if self.times:
            keep = keep[1:]  # the first sample repeats the last chunk's end
        self.times.append(t[keep])
        for n in self.names:
            y = waves.vectors.get(n)
            if y is None:
                continue
            area = mx.running_integral(waves.time, y) + self.carry.get(n, 0.0)
            self.carry[n] = float(area[-1])
            self.vectors.setdefault(n, []).append(y[keep])
            self.areas.setdefault(n, []).append(area[keep])

    def drop_before(self, t: float) -> None:
        """Forget chunks that end before ``t`` (memory: only the cycle measured is kept)."""
        while len(self.times) > 1 and self.times[0][-1] < t:
            self.times.pop(0)
            for n in self.vectors:
                self.vectors[n].pop(0)
                self.areas[n].pop(0)

    def build(self) -> tuple[np.ndarray, dict[str, np.ndarray], dict[str, np.ndarray]]:
        t = np.concatenate(self.times)
        return (t, {n: np.concatenate(v) for n, v in self.vectors.items()},
                {n: np.concatenate(v) for n, v in self.areas.items()})


def thin(circuit: Circuit, waves: Waveforms, names: list[str]) -> np.ndarray:
    """Indices of the samples kept of a chunk: THIN_PER_PERIOD evenly spread a period, the first and
    last, and in every period where each named vector (and the regulator's dissipation and headroom)
    is highest and lowest."""
    vec = waves.vectors
    watched = [vec[m] for m in names if m in vec]
    if "drn" in vec and circuit.regulator.get("pass_sense"):
        i = vec.get(f"{circuit.regulator['pass_sense'].lower()}#branch")
        if i is not None:
            watched.append((vec["drn"] - vec[circuit.output]) * i)
    if "raw" in vec and circuit.regulator:
        watched.append(vec["raw"] - vec[circuit.output])
    return mx.thin_indices(waves.time, circuit.period, THIN_PER_PERIOD, watched)


def longest_key_down(drive: Drive, c0: float, c1: float) -> tuple[float, float] | None:
    """The longest fully key-down span of [c0, c1] (edges excluded)."""
    downs = drive.intervals(c0, c1, level=0.999)
    return max(downs, key=lambda iv: iv[1] - iv[0]) if downs else None


def keyed_steady(engine: Engine, design: Design, circuit: Circuit, start: dict[str, float], cycle: float,
                 steps: int, jacobian: np.ndarray | None = None, progress: Progress | None = None) -> KeyedRun:
    """Key the load from ``start`` (the duty-weighted steady state) until the keying repeats.

    ``steps`` is the measuring step (steps per period) of the refined key-down period;
    ``jacobian`` the one-period map's Jacobian at the mean load (it sets the lead-in).
    """
    T = circuit.period
    sim = design.simulation
    coarse = sim.steps_per_period or COARSE_STEPS
    loose = replace(design, simulation=replace(sim, reltol=max(sim.reltol, KEYED_RELTOL)))
    drive = keying_drive(design.keyed[0])
    cycle_periods = max(math.ceil(cycle / T - 1e-9), 1)
    lead = lead_periods(jacobian, cycle_periods) * T
    tau = slowest_periods(jacobian)
    rho_c = math.exp(-cycle_periods / tau) if tau else (0.0 if tau == 0.0 else 0.5)
    # The cycle measured starts on a keying cycle boundary at least the lead-in (and a period) after the start.
    c0 = max(math.ceil((lead + T) / cycle - 1e-9), 1) * cycle
    t = max(math.floor((c0 - lead) / T + 1e-9), 0) * T
    offset0 = t
    trace = _Trace(kept_vectors(circuit))
    state = start
    chunk = 100 * T
    simulated = 0.0
    todo = c0 + cycle - t
    ends: list[dict[str, float]] = []  # the state where each measured cycle's run ended
    means: list[float] = []  # the one-period mean before each cycle boundary passed
    snapshots: dict[float, dict[str, float]] = {}
    jumps = 0
    settled = False
    drift = math.inf
    cycles = 0
    names = {e.name for e in circuit.state_elements()}
    while True:
        c1 = c0 + cycle
        stop = math.ceil(c1 / T - 1e-9) * T  # the run ends on a period boundary after the cycle
        cuts = [stop]
        longest = longest_key_down(drive, c0, c1)
        if longest is not None:  # the refined period starts here: a chunk ends there, its state exact
            a, b = longest
            cuts.append(math.floor((b - min(T, b - a)) / T + 1e-9) * T)
        cuts = sorted(c for c in set(cuts) if c > t + 1e-12)
        for cut in cuts:
            while t < cut - 1e-12:
                span = min(chunk, cut - t)
                if cut - (t + span) < 0.5 * T:  # no sliver of a chunk before the cut
                    span = cut - t
                run = run_span(engine, loose, circuit, span, state, coarse, offset=t)
                trace.add(circuit, run.waves, t)
                state = restart_state(circuit, run.waves)
                points_per_period = len(run.waves.time) / (span / T)
                chunk = max(round(CHUNK_POINTS / max(points_per_period, 1.0)), 4) * T
                t += span
                simulated += span
                if progress is not None:
                    progress("steady keying", simulated, max(todo, simulated))
            snapshots[round(cut / T)] = state
        cycles += 1
        ends.append(state)
        tt, vec, areas = trace.build()
        out = circuit.output
        probe = KeyedRun(Run("", t - offset0, Waveforms(tt - offset0, vec), start, offset=offset0), cycle,
                         (c0, c1), False, simulated, circuit, areas)
        before, after = probe.period_mean(out, np.array([c0 - T / 2, c1 - T / 2]))
        grid = np.linspace(c0, c1, max(8 * cycle_periods, 64))
        pm = probe.period_mean(out, grid)
        swing = float(np.nanmax(pm) - np.nanmin(pm)) if np.any(np.isfinite(pm)) else 0.0
        drift = float(after - before)
        limit = max(SETTLE_SHARE * swing, max(SETTLE_FLOOR, NOISE_SHARE * loose.simulation.reltol) * abs(after))
        # What is left of a drift that shrinks by rho_c a cycle: drift rho_c / (1 - rho_c) more.
        remaining = abs(drift) * (1 + rho_c / (1 - rho_c))
        if os.environ.get("SIMKIT_DEBUG_KEYED"):
            print(f"keyed: cycle {cycles}: one-period mean {before:.6g} -> {after:.6g} V, drift {drift:.3g} V "
                  f"(with what is left {remaining:.3g} V), limit {limit:.3g} V", file=sys.stderr)
        if not means:
            means.append(float(before))
        means.append(float(after))
        if not math.isfinite(drift) or remaining <= limit:
            settled = math.isfinite(drift)
            break
        if cycles >= MAX_CYCLES:
            break
        # Run on: the next cycle is measured.  A drift that shrinks geometrically is jumped over once
        # its ratio is seen (the state moved on by the remaining sum of the series).
        if len(means) >= 3 and len(ends) >= 2 and jumps < 2:
            d1, d2 = means[-2] - means[-3], means[-1] - means[-2]
            rho = d2 / d1 if d1 else 0.0
            if 0.05 < rho < 0.95:
                gain = rho / (1 - rho)
                state = {k: v + gain * (v - ends[-2].get(k, v)) if k in names else v for k, v in state.items()}
                jumps += 1
                means.clear()
                ends.clear()
        trace.drop_before(c1 - lead)
        snapshots = {k: v for k, v in snapshots.items() if k * T >= c1 - 1e-12}
        c0 = c1
        todo = simulated + (stop - t) + cycle
    keyed = KeyedRun(probe.run, cycle, (c0, c0 + cycle), settled, simulated, circuit, probe.areas, drift=drift,
                     cycles=cycles, lead=lead, steps=coarse)
    if longest is not None:
        a, b = longest
        p = math.floor((b - min(T, b - a)) / T + 1e-9) * T
        ics = snapshots.get(round(p / T))
        if ics is not None:
            keyed.refined = run_span(engine, design, circuit, 2 * T, ics, steps, offset=p)
    return keyed
