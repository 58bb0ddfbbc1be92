"""Switch-on: every capacitor empty, the source starting at ``switch_on_phase``, as long as its figures need.

The surge comes in the first periods: they run at the measuring step.  A longer overshoot (a
choke ringing with the filter capacitors), the rise to 90 % of the steady output and any
timeline (heater warm-up, load steps) are smooth and run on at ``COARSE_STEPS``; the coarse
period with the highest diode current is simulated again at the measuring step so the surge
figure keeps its accuracy.  Coarse chunks that lie after the rise are thinned
(:func:`thin`) so a long timeline does not fill the memory.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from simkit.analysis import metrics
from simkit.analysis.runs import Run, end_nodes, merge, restart_state, run_span, state_at
from simkit.design.model import Design
from simkit.engine.ngspice import Engine, Waveforms
from simkit.netlist.circuit import Circuit
from simkit.progress import Callback as Progress  # (what, simulated time done, time to do or None)

#: Steps per period of the smooth part of a start-up run.
COARSE_STEPS = 50
#: ... and when load steps are simulated: the step figures (sag, recovery) are read off this run.
STEPPED_STEPS = 200
#: Periods of a start-up run at the measuring step (the surge is in the first of them).
FINE_START_PERIODS = 1
#: The surge run's first time step, as a share of its maximum step (ngspice starts at about a hundredth of
#: the .tran step): a crest switch-on peaks at the very first instant.
SURGE_FIRST_STEP = 0.01
#: Relative tolerance of the coarse part (a looser design reltol is kept): its figures are a peak and a
#: crossing, not a ripple.  Measured on the shipped examples and the bench designs against reltol 1e-5:
#: rise time and capacitor peak within 0.03 %, a fifth less time on a slow choke input (1e-3: 0.26 %).
COARSE_RELTOL = 1e-4
#: Periods per chunk of the coarse part (the first chunk is longer when a choke's overshoot will take longer:
#: :func:`first_chunk`).
COARSE_CHUNK = 5
#: The most periods of the first coarse chunk.
FIRST_CHUNK_MAX = 100
#: The start-up run stops at the latest after this many periods, or 60 s (or three times the
#: timeline), whichever is shorter.
MAX_START_PERIODS = 6000
#: Samples per period kept of coarse chunks after the rise (plus every monitored extreme).
THIN_PER_PERIOD = 20



def overshoot_span(design: Design, circuit: Circuit) -> float:
    """How long a choke can keep the capacitors overshooting after switch-on (3/4 of the LC period), s:
    the start-up run's length when ``switch_on_time`` is given, else an estimate for its cost."""
    if design.simulation.switch_on_time is not None:
        return design.simulation.switch_on_time
    T = circuit.period
    span = FINE_START_PERIODS * T
    filt = [c for c in circuit.capacitors if c.role in ("filter", "reservoir")]
    c_total = sum(c.value for c in filt)
    for ind in circuit.inductors:
        if ind.role == "choke" and c_total > 0:
            span = max(span, 0.75 * 2 * math.pi * math.sqrt(ind.value * c_total))
    return min(span, max(FINE_START_PERIODS * T, 3.0))


def first_chunk(design: Design, circuit: Circuit) -> int:
    """Periods of the first coarse chunk: long enough for a choke's first overshoot and the two periods
    that show it is past (:func:`overshoot_span`), so a slow filter needs one run where it needed many."""
    T = circuit.period
    first = math.ceil(overshoot_span(design, circuit) / T - 1e-9) + 2
    return int(min(max(COARSE_CHUNK, first), FIRST_CHUNK_MAX))


def coarse_steps(design: Design) -> int:
    """Steps per period of the start-up run after its first period."""
    return STEPPED_STEPS if any(ld.kind == "steps" for ld in design.loads) else COARSE_STEPS


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


def start_limit(design: Design, circuit: Circuit) -> float:
    """The longest start-up run simkit simulates for this design, s."""
    if design.simulation.switch_on_time is not None:
        return design.simulation.switch_on_time
    T = circuit.period
    return min(MAX_START_PERIODS * T, max(timeline_end(design) * 3, 60.0))


def switch_on(engine: Engine, design: Design, circuit: Circuit, steps: int, target: float | None = None,
              progress: Progress | None = None) -> Run:
    """The start-up run (see the module docstring); ``steps`` is the measuring step per period.

    After the first period at the fine step, coarse chunks go on while the output has not yet
    reached 90 % of ``target``, while a choke may still make the capacitors overshoot (until the
    output's period mean has passed its first maximum or stopped moving), and while the
    timeline runs; ``simulation.switch_on_time`` fixes the span instead.
    """
    T = circuit.period
    zero = {e.name: 0.0 for e in circuit.state_elements()}
    fixed = design.simulation.switch_on_time
    fine = fixed if fixed is not None else FINE_START_PERIODS * T
    # The surge period runs at the measuring step, starting with a step a hundredth of it (SURGE_FIRST_STEP):
    # measured against a four times finer run (tests/test_steady_engine.py), the surge peak holds.
    surge_steps = steps
    first = run_span(engine, design, circuit, fine, zero, surge_steps, first=SURGE_FIRST_STEP)
    pieces = [first]
    if progress is not None:
        progress("switch-on", fine, None)
    out = circuit.output
    events = timeline_end(design)
    reached = target is None or float(np.max(first.waves.v(out))) >= 0.9 * target
    chokes = any(i.role == "choke" for i in circuit.inductors)
    if fixed is None and (events > 0 or not reached or chokes):
        limit = start_limit(design, circuit)
        t = fine
        state = restart_state(circuit, first.waves)
        chunk = first_chunk(design, circuit) * T
        means: list[float] = []
        sim = design.simulation
        loose = replace(design, simulation=replace(sim, reltol=max(sim.reltol, COARSE_RELTOL)))
        while t < limit - 1e-12:
            run = run_span(engine, loose, circuit, chunk, state, coarse_steps(design), offset=t)
            t += chunk
            chunk = COARSE_CHUNK * T
            state = restart_state(circuit, run.waves)
            v = run.waves.v(out)
            means += [p.mean for p in metrics.period_stats(run.waves.time, v, T, 0.0)]
            was_reached = reached
            reached = reached or target is None or float(np.max(v)) >= 0.9 * target
            if was_reached:  # the rise is behind: peaks and a coarse trace are all the figures need
                run.waves = thin(circuit, run.waves, T)
            pieces.append(run)
            if progress is not None:
                progress("switch-on", t, limit)
            scale = max(abs(means[-1]), 1e-9)
            calm = len(means) >= 2 and abs(means[-1] - means[-2]) <= 2e-3 * scale
            top = int(np.argmax(means))
            past_peak = top < len(means) - 2 and means[-1] < means[top] - 1e-3 * scale
            if t >= events + 5 * T and reached and (calm or past_peak):
                break
    if len(pieces) == 1:
        first.deck_span = fine
        first.steps = surge_steps
        return first
    merged = merge(pieces)
    refined = _refine_surge(engine, design, circuit, first, pieces[1:], surge_steps)
    return Run(first.deck, float(merged.time[-1]), merged, zero, retried=any(p.retried for p in pieces),
               deck_span=fine, refined=refined, steps=surge_steps)


def _refine_surge(engine: Engine, design: Design, circuit: Circuit, first: Run, coarse: list[Run],
                  steps: int) -> Run | None:
    """The coarse period with the highest diode current, simulated again at the measuring step.

    Skipped when the coarse part stayed well below the fine first periods (the surge is there).
    """
    T = circuit.period
    best_fine = max(float(np.max(first.waves.i(d.sense))) for d in circuit.diodes)
    best, where = 0.0, None
    for run in coarse:
        for d in circuit.diodes:
            i = run.waves.i(d.sense)
            k = int(np.argmax(i))
            if i[k] > best:
                best, where = float(i[k]), (run, float(run.waves.time[k]))
    if where is None or best <= 0.8 * best_fine:
        return None
    run, tk = where
    k0 = max(math.floor(tk / T - 1e-9) - 1, 0)
    t0 = k0 * T  # in the run's own time (its waves start at 0)
    ics = {**state_at(circuit, run.waves, t0), **end_nodes(circuit, run.waves, t0)}
    return run_span(engine, design, circuit, 2 * T, ics, steps, offset=run.offset + k0 * T)


def thin(circuit: Circuit, waves: Waveforms, period: float) -> Waveforms:
    """Keep THIN_PER_PERIOD evenly spread samples per period, plus, in every period, the samples where
    the output, each capacitor's voltage, each diode's current and each inductor's current reach
    their highest and lowest: every peak figure of the start-up run survives, at a fraction of the memory.
    """
    if len(waves.time) < 4:
        return waves
    watched = [waves.v(circuit.output)]
    watched += [waves.v(c.plus) - waves.v(c.minus) for c in circuit.capacitors if c.is_part]
    watched += [waves.i(d.sense) for d in circuit.diodes]
    watched += [waves.i(i.name) for i in circuit.inductors]
    watched += [waves.i(w.name) for w in circuit.windings]
    idx = metrics.thin_indices(waves.time, period, THIN_PER_PERIOD, watched)
    return Waveforms(time=waves.time[idx], vectors={k: v[idx] for k, v in waves.vectors.items()}, log=waves.log)
