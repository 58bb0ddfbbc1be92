"""The figures of a run: steady-state, switch-on and battery figures, and every part's result.

Pure numpy on the waveforms of the runs (:mod:`simkit.analysis.metrics`); the keyed, stepped and
regulator figures are in :mod:`simkit.pipeline.dynamic`.
"""

from __future__ import annotations

import math

import numpy as np

from simkit.analysis import metrics as mx
from simkit.analysis.keyed import KeyedRun
from simkit.analysis.runs import Run
from simkit.analysis.steady import MEASURE_PERIODS, SteadyState
from simkit.design.model import Design, ResistorLoad, StepsLoad
from simkit.engine.ngspice import Waveforms
from simkit.netlist.circuit import Circuit
from simkit.pipeline.dynamic import inverter_figures, keyed_figures, regulator_figures, step_figures
from simkit.pipeline.noise import attach_hum, attach_snubbers
from simkit.pipeline.results import (
    CapacitorResult,
    DiodeResult,
    InductorResult,
    LoadResult,
    PartResult,
    ResistorResult,
    RunResult,
    WindingResult,
)


def figures(design: Design, circuit: Circuit, steady: SteadyState, start: Run, start_circuit: Circuit | None = None,
            keyed: KeyedRun | None = None) -> RunResult:
    w = steady.final.waves
    T = circuit.period
    t1 = steady.final.tstop
    t0 = t1 - MEASURE_PERIODS * T
    t = w.time
    vout = w.v(circuit.output)
    warnings: list[str] = list(steady.notes)
    parts: dict[str, PartResult] = {}
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
    diode_parts: list[DiodeResult] = []
    per = 1.0 / design.rectifier.series  # a string of identical diodes shares its reverse voltage equally
    for d in circuit.diodes:
        i = w.i(d.sense)
        vrev = (w.v(d.cathode) - w.v(d.anode)) * per
        i_on = sw.i(d.sense)
        vrev_on = (sw.v(d.cathode) - sw.v(d.anode)) * per
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
        dr = DiodeResult(role="rectifier plate (vacuum)" if vac is not None else "rectifier diode",
                         peak_a=mx.peak(t, i, t0, t1), avg_a=mx.mean(t, i, t0, t1), rms_a=mx.rms(t, i, t0, t1),
                         piv_v=mx.peak(t, vrev, t0, t1), surge_peak_a=surge, surge_i2t_a2s=i2t,
                         switch_on_piv_v=float(np.max(vrev_on)))
        parts[d.name] = dr
        diode_parts.append(dr)
    m["diode_peak_a"] = max(p.peak_a for p in diode_parts)
    m["diode_avg_a"] = max(p.avg_a for p in diode_parts)
    m["diode_rms_a"] = max(p.rms_a for p in diode_parts)
    m["diode_piv_v"] = max(p.piv_v for p in diode_parts)
    m["surge_peak_a"] = max(p.surge_peak_a for p in diode_parts)

    cap_peaks: list[float] = []
    caps: dict[str, CapacitorResult] = {}
    reservoir_currents: list[float] = []
    for c in circuit.capacitors:
        if not c.is_part:
            continue
        v = w.v(c.plus) - w.v(c.minus)
        v_on = sw.v(c.plus) - sw.v(c.minus)
        ic = w.i(c.sense)
        peak = max(float(np.max(np.abs(v[t >= t0]))), float(np.max(np.abs(v_on))))
        esr = next((r.value for r in circuit.resistors if r.role == "esr" and r.a == c.inner_minus), 0.0)
        entry = CapacitorResult(role=f"{c.role} capacitor", value_f=c.value, peak_v=peak, dc_v=mx.mean(t, v, t0, t1),
                                ripple_pp_v=mx.peak_to_peak(t, v, t0, t1), ripple_rms_a=mx.ac_rms(t, ic, t0, t1),
                                switch_on_peak_v=float(np.max(np.abs(v_on))),
                                esr_dissipation_w=mx.rms(t, ic, t0, t1) ** 2 * esr if esr else None)
        parts[c.name] = entry
        caps[c.name] = entry
        cap_peaks.append(peak)
        if c.role in ("reservoir", "stage"):
            reservoir_currents.append(entry.ripple_rms_a)
    if not reservoir_currents:
        first = next((c for c in circuit.capacitors if c.role == "filter"), None)
        if first is not None:
            reservoir_currents.append(caps[first.name].ripple_rms_a)
    m["cap_peak_v"] = max(cap_peaks) if cap_peaks else 0.0
    m["reservoir_ripple_a"] = max(reservoir_currents) if reservoir_currents else 0.0

    for ind in circuit.inductors:
        i = w.i(ind.name)
        parts[ind.name] = InductorResult(
            role="choke" if ind.role == "choke" else "winding leakage inductance", value_h=ind.value,
            dc_a=mx.mean(t, i, t0, t1), rms_a=mx.rms(t, i, t0, t1), peak_a=mx.peak(t, np.abs(i), t0, t1),
            switch_on_peak_a=float(np.max(np.abs(sw.i(ind.name)))),
            dcr_dissipation_w=mx.rms(t, i, t0, t1) ** 2 * ind.dcr if ind.dcr else None)

    for r in circuit.resistors:
        if r.role in ("esr", "dcr", "snubber", "load"):
            continue
        v = w.v(r.a) - w.v(r.b)
        parts[r.name] = ResistorResult(
            role={"filter": "filter resistor", "bleeder": "bleeder", "winding": "winding resistance",
                  "balancing": "balancing resistor", "regulator": "regulator resistor",
                  "sharing": "sharing resistors of a diode string"}[r.role],
            value_ohm=r.value, dissipation_w=mx.mean(t, v * v, t0, t1) / r.value, dc_a=mx.mean(t, v, t0, t1) / r.value,
            rms_a=mx.rms(t, v, t0, t1) / r.value, peak_v=mx.peak(t, np.abs(v), t0, t1))
    for lref in circuit.loads:
        ld = design.loads[lref.index]
        i = w.i(lref.sense)
        vl = w.v(lref.node)
        parts[lref.name] = LoadResult(
            role=f"{ld.kind} load" + (f" after filter section {ld.at}" if ld.at is not None else ""),
            node=lref.node, dc_v=mx.mean(t, vl, t0, t1), dc_a=mx.mean(t, i, t0, t1),
            dissipation_w=mx.mean(t, i * vl, t0, t1), value_ohm=ld.r if isinstance(ld, ResistorLoad) else None)

    src_rms: list[float] = []
    va = 0.0
    for wd in circuit.windings:
        i = -w.i(wd.name)
        irms = mx.rms(t, i, t0, t1)
        src_rms.append(irms)
        va += wd.vrms * irms
        parts[wd.name] = WindingResult(
            role={"sine": "winding", "transformer": "transformer winding", "inverter": "inverter output"}[
                design.source.kind],
            vrms_v=wd.vrms, rms_a=irms, peak_a=mx.peak(t, np.abs(i), t0, t1), apparent_power_va=wd.vrms * irms,
            surge_peak_a=float(np.max(np.abs(sw.i(wd.name)))))
    m["source_rms_a"] = max(src_rms)
    m["source_va"] = va
    if design.source.transformer is not None:
        _transformer_figures(design, circuit, w, sw, (t0, t1), m, parts)
    m["settle_time_s"] = steady.settle_time

    _start_figures(design, circuit, sc, start, m, warnings)
    if circuit.battery_nodes:
        _battery_figures(design, circuit, w, (t0, t1), m)
    if design.source.inverter is not None:
        inverter_figures(design, circuit, w, (t0, t1), start, sc, m, warnings)
    if keyed is not None:
        keyed_figures(design, keyed, m, warnings)
    elif any(isinstance(ld, StepsLoad) for ld in design.loads):
        step_figures(design, sc, start, m, warnings)
    if design.regulator is not None:
        regulator_figures(design, circuit, w, (t0, t1), keyed, sc, start, m, parts, warnings)

    if steady.final.retried:
        warnings.append("ngspice needed safer options (method=gear) to converge; figures may be less precise")
    if design.source.resistance == 0 and design.source.inductance == 0:
        warnings.append("the source has no series resistance: the switch-on surge is limited only by the "
                        "diode's own resistance; give the winding resistance for a real surge figure")
    if m["vout_dc_v"] < 0:
        warnings.append("the output is negative: check the topology and the load")
    result = RunResult(design, circuit, m, parts, warnings, steady, start, (t0, t1), keyed=keyed)
    attach_snubbers(result)
    attach_hum(result)
    return result


def _transformer_figures(design: Design, circuit: Circuit, w: Waveforms, sw: Waveforms,
                         window: tuple[float, float], m: dict[str, float], parts: dict[str, PartResult]) -> None:
    """Heater windings, the primary current and the transformer's VA (docs/reference.md, "The whole transformer").

    An ideal transformer's primary carries every winding's current times that winding's turns
    ratio (its EMF over the primary voltage), so the primary current is that sum taken instant by
    instant: the rectifier's peaky current and the heaters' sine add as waveforms, not as RMS
    values.  The magnetising current is left out (no nameplate gives it).
    """
    tr = design.source.transformer
    assert tr is not None
    t0, t1 = window
    t = w.time
    first = circuit.windings[0]
    emf1 = w.v(first.emf) - w.v(first.minus)
    vscale = first.vrms / design.source.vrms  # the corner's mains scale
    vp = tr.primary_vrms * vscale
    ip = np.zeros_like(t)
    rated = tr.secondary_vrms / len(circuit.windings)  # each half of a centre tap: half the winding
    va = 0.0
    for wd in circuit.windings:
        i = -w.i(wd.name)
        emf = w.v(wd.emf) - w.v(wd.minus)
        sign = 1.0 if float(np.mean(emf * emf1)) >= 0 else -1.0  # the second half of a centre tap is antiphase
        ip = ip + sign * wd.vrms / vp * i
        va += rated * mx.rms(t, i, t0, t1)
    for k, h in enumerate(tr.heaters, start=1):
        name = f"VH{k}"
        i = -w.i(name)
        emf = tr.heater_emf(h) * vscale
        ip = ip + emf / vp * i
        irms = mx.rms(t, i, t0, t1)
        va += h.vrms * irms
        parts[name] = WindingResult(role="heater winding", vrms_v=emf, rms_a=irms, peak_a=mx.peak(t, np.abs(i), t0, t1),
                                    apparent_power_va=h.vrms * irms, surge_peak_a=float(np.max(np.abs(sw.i(name)))))
    m["primary_rms_a"] = mx.rms(t, ip, t0, t1)
    m["transformer_va"] = va


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
    m["battery_rms_a"] = mx.rms(t, ib, t0, t1)
    m["battery_peak_current_a"] = mx.peak(t, ib, t0, t1)
    m["battery_voltage_v"] = mx.mean(t, w.v("vt"), t0, t1)
    p_in = mx.mean(t, w.v("vt") * ib, t0, t1)
    p_out = sum(mx.mean(t, (w.v(wd.plus) - w.v(wd.minus)) * -w.i(wd.name), t0, t1) for wd in circuit.windings)
    m["input_power_w"] = p_in
    m["output_power_w"] = p_out
    m["efficiency"] = p_out / p_in if p_in > 0 else math.nan
    # runtime_h comes with the inverter's figures (a battery feeds an inverter): Peukert's law over the trace.


