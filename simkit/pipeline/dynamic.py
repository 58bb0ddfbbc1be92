"""Figures of loads that change and of regulators: steady keying, load steps, regulator output and stress.

Keyed figures come from the steady keying run (:mod:`simkit.analysis.keyed`), step figures from
the start-up run's timeline, regulator figures from the steady state (and keying, when there is
one).
"""

from __future__ import annotations

import math

import numpy as np

from simkit.analysis import metrics as mx
from simkit.analysis.keyed import KeyedRun
from simkit.analysis.runs import Run
from simkit.design.model import Design, SeriesRegulator, ShuntRegulator, StepsLoad
from simkit.engine.ngspice import Waveforms
from simkit.netlist.build import keying_drive
from simkit.netlist.circuit import Circuit
from simkit.netlist.drives import Drive
from simkit.pipeline.results import PartResult, RegulatorResult


def keyed_figures(design: Design, keyed: KeyedRun, m: dict[str, float], warnings: list[str]) -> None:
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
    edge = a - ld.rise
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


def regulator_figures(design: Design, circuit: Circuit, w: Waveforms, window: tuple[float, float],
                      keyed: KeyedRun | None, sc: Circuit, start: Run, m: dict[str, float],
                      parts: dict[str, PartResult], warnings: list[str]) -> None:
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

    series = isinstance(reg, SeriesRegulator)

    def power(ww: Waveforms) -> np.ndarray:
        if series:
            return (ww.v("drn") - ww.v("out")) * ww.i("vpass")
        return ww.v("sh") * ww.i("vshunt")

    means = [mx.mean(tt, power(ww), c0, c1) for tt, _, _, ww, c0, c1 in spans]
    peaks = [mx.peak(tt, power(ww), c0, c1) for tt, _, _, ww, c0, c1 in spans]
    m["reg_dissipation_w"] = means[0]
    m["reg_dissipation_peak_w"] = max(peaks)
    sw = start.waves
    if isinstance(reg, SeriesRegulator):
        # Pass device at switch-on: the drain sees the rising raw supply while the reference charges slowly.
        parts["MPASS"] = RegulatorResult(
            role="pass device", dissipation_w=means[0], dissipation_peak_w=max(peaks),
            vds_max_v=max(mx.peak(tt, ww.v("drn") - ww.v("out"), c0, c1) for tt, _, _, ww, c0, c1 in spans),
            id_max_a=max(mx.peak(tt, ww.i("vpass"), c0, c1) for tt, _, _, ww, c0, c1 in spans),
            switch_on_dissipation_peak_w=float(np.max((sw.v("drn") - sw.v("out")) * sw.i("vpass"))))
        if m["reg_headroom_min_v"] < reg.headroom:
            warnings.append(f"dropout: the regulator's input-output difference falls to "
                            f"{m['reg_headroom_min_v']:.3g} V, under the {reg.headroom:g} V it needs")
        return
    ish = [(tt, ww.i("vshunt"), c0, c1) for tt, _, _, ww, c0, c1 in spans]
    m["shunt_current_min_a"] = min(mx.trough(tt, i, c0, c1) for tt, i, c0, c1 in ish)
    m["shunt_current_max_a"] = max(mx.peak(tt, i, c0, c1) for tt, i, c0, c1 in ish)
    low = reg.glow.i_min if reg.glow is not None else 1e-3
    if m["shunt_current_min_a"] < low:
        warnings.append(f"dropout: the shunt current falls to {m['shunt_current_min_a'] * 1e3:.3g} mA, under the "
                        f"{low * 1e3:g} mA it needs to regulate")
    parts["DZ" if reg.zener is not None else "GLOW"] = RegulatorResult(
        role="shunt element", dissipation_w=means[0], dissipation_peak_w=max(peaks),
        current_min_a=m["shunt_current_min_a"], current_max_a=m["shunt_current_max_a"],
        switch_on_voltage_max_v=float(np.max(sw.v("sh"))), struck=_struck(reg, sw, sc.period))


def _struck(reg: ShuntRegulator, sw: Waveforms, period: float) -> bool | None:
    """Did the glow tubes strike in the start-up run?  None for zeners (nothing to strike) and when the
    run cannot tell: it ended while the voltage across the tubes was still rising."""
    if reg.glow is None:
        return None
    if float(np.max(sw.i("vshunt"))) > 1e-4:
        return True
    t, v = sw.time, sw.v("sh")
    end = float(t[-1])
    if end < 3 * period:
        return None
    last, before = mx.mean(t, v, end - period, end), mx.mean(t, v, end - 2 * period, end - period)
    return False if abs(last - before) <= 0.002 * max(abs(last), 1e-9) else None


def step_figures(design: Design, sc: Circuit, start: Run, m: dict[str, float], warnings: list[str]) -> None:
    """Sag, recovery and overshoot around the steps of a stepped load, from the start-up run.

    Each step level is taken as settled over the last whole period before the next step (or
    the end of the run); "down" is the heaviest level, "up" the lightest.
    """
    ld = next(x for x in design.loads if isinstance(x, StepsLoad))
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


def _key_up(c0: float, c1: float, drive: Drive) -> list[tuple[float, float]]:
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


