"""Figures of loads that change and of regulators: steady keying, load steps, regulator output and stress.

Keyed figures come from the steady keying run (:mod:`simkit.analysis.keyed`), step figures from
the start-up run's timeline, regulator figures from the steady state (and keying, when there is
one).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from simkit.analysis import keyed as kd
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
    """Sag, recovery, droop, overshoot and chirp of the output under steady keying (the first keyed load).

    Every figure but the ripple is read off the output's one-period mean (a mean over one source
    period centred on each instant: the ripple averages out, the slow change stays):

    - ``recovery_time_s``: from the start of the longest key-down's edge until the one-period mean
      stays within ``settle_band`` of the step (its change from before the edge to the end of
      the key-down) around where it ends; n/a when it still moves more than that over the last
      period of the key-down;
    - ``droop_v``: its fall from the first to the last period of the longest key-down;
    - ``overshoot_v``: its rise after the key-up edge above where it ends that key-up interval;
    - ``chirp_hz``: ``pushing_hz_per_v`` x its change over the shortest key-down (a dot) at the
      oscillator's node, the means taken wholly inside the dot (edges out; a dot shorter than a
      period: the raw change over it).
    """
    ld = design.keyed[0]
    circuit = keyed.circuit
    assert circuit is not None
    out = circuit.output
    T = circuit.period
    c0, c1 = keyed.window
    drive = keying_drive(ld)
    downs = drive.intervals(c0, c1, level=0.999)  # fully key-down, edges excluded
    ups = _key_up(c0, c1, drive)
    if not downs or not ups:
        warnings.append("the keyed run found no whole key-down or key-up interval; keyed figures omitted")
        return

    def mean_over(iv: list[tuple[float, float]], name: str) -> float:
        total = sum(b - a for a, b in iv)
        return sum(keyed.mean(name, a, b) * (b - a) for a, b in iv) / total

    def pm(name: str, at: float) -> float:
        return float(keyed.period_mean(name, at)[0])

    vd = mean_over(downs, out)
    vu = mean_over(ups, out)
    m["vout_keydown_v"] = vd
    m["vout_keyup_v"] = vu
    m["sag_v"] = vu - vd
    m["sag_pct"] = 100 * (vu - vd) / vu if vu else math.nan
    a, b = max(downs, key=lambda iv: iv[1] - iv[0])
    # The band is at least the keyed run's resolution: its one-period mean scatters by about a quarter of
    # its reltol of the output (docs/engine-notes.md#keyed-step).
    floor = kd.NOISE_SHARE * max(design.simulation.reltol, kd.KEYED_RELTOL)
    rec = recovery(lambda at: keyed.period_mean(out, at), T, a - max(ld.rise, 1e-6), b, ld.settle_band, floor=floor)
    m["recovery_time_s"] = rec.time
    if rec.problem:
        warnings.append(rec.problem)
    # Overshoot: the one-period mean after the key-up edge that follows, above where that key-up ends.
    after = [iv for iv in ups if iv[0] >= b - 1e-12]
    ua, ub = after[0] if after else ups[0]
    if ub - ua >= T:
        grid = np.linspace(ua, ub - T / 2, max(round(20 * (ub - ua) / T), 8))
        level = pm(out, ub - T / 2)
        m["overshoot_v"] = max(float(np.nanmax(keyed.period_mean(out, grid))) - level, 0.0)
    span = min(T, b - a)
    ref = keyed.refined
    if ref is not None:
        rt = ref.waves.time + ref.offset
        m["ripple_keydown_pp_v"] = mx.peak_to_peak(rt, ref.waves.v(out), b - span, b)
    else:
        m["ripple_keydown_pp_v"] = mx.peak_to_peak(keyed.time, keyed.run.waves.v(out), b - span, b)
    if b - a >= 2 * T:
        m["droop_v"] = pm(out, a + T / 2) - pm(out, b - T / 2)
    m["keying_cycle_s"] = keyed.cycle
    if ld.pushing is not None:
        # The shortest key-down element is the dot; the oscillator follows its node, ripple averaged out.
        da, db = min(downs, key=lambda iv: iv[1] - iv[0])
        node = (out if ld.at is None else circuit.section_nodes[ld.at]).lower()
        if db - da > T:  # one-period means wholly inside the dot
            swing = keyed.period_mean(node, np.linspace(da + T / 2, db - T / 2, 64))
            m["chirp_hz"] = abs(ld.pushing) * float(np.nanmax(swing) - np.nanmin(swing))
        else:  # a dot shorter than a period leaves no room for a mean: the raw change over it
            m["chirp_hz"] = abs(ld.pushing) * mx.peak_to_peak(keyed.time, keyed.run.waves.v(node), da, db)
    if not keyed.settled:
        warnings.append(f"steady keying was not reached in {keyed.cycles} keying cycles (the output's one-period "
                        f"mean still moved {abs(keyed.drift):.3g} V over the last); keyed figures are approximate")
    if circuit.battery_nodes:
        _keyed_battery(design, keyed, ups, m, warnings)


@dataclass(frozen=True)
class Recovery:
    """How long the output took to settle after a key-down edge (NaN when it did not), and why not."""

    time: float
    level: float  # V, where the one-period mean settled
    band: float  # V, half-width of the band it settled within
    problem: str = ""


def recovery(period_mean: Callable[[np.ndarray], np.ndarray], T: float, edge: float, end: float,
             share: float, what: str = "the longest key-down", floor: float = 0.0) -> Recovery:
    """Settling of a one-period mean (``period_mean(times)``, period ``T``) after a load step at ``edge``
    until ``end`` (the next change).

    The level is the one-period mean over the last period before ``end``; the band is ``share``
    of the step from the one-period mean over the period before the edge to that level, and at
    least ``floor`` of the level (the run's own resolution: a step smaller than that is no
    recovery to time).  The
    recovery time runs from the edge until the mean enters the band for good.  When the mean
    still moves more than the band over the last period, the output has not recovered: NaN.
    """
    def pm1(at: float) -> float:
        return float(period_mean(np.array([at]))[0])

    if end - edge < 2 * T:
        return Recovery(math.nan, math.nan, math.nan,
                        f"{what} is shorter than two source periods: recovery_time_s is not measured")
    before = pm1(edge - T / 2)
    level = pm1(end - T / 2)
    band = max(share * abs(before - level), floor * abs(level))
    if not math.isfinite(before) or band <= 0:
        return Recovery(0.0, level, band)
    grid = np.linspace(edge, end - T / 2, max(round(40 * (end - edge) / T), 16))
    pm = period_mean(grid)
    last = pm1(end - 3 * T / 2)
    if abs(last - level) > band:
        return Recovery(math.nan, level, band,
                        f"the output's one-period mean still moves {abs(last - level):.3g} V over the last period of "
                        f"{what}, more than the settle band ({band:.3g} V, {100 * share:g} % of the "
                        f"{abs(before - level):.3g} V step): it has not recovered before the load changes again, "
                        "recovery_time_s n/a")
    outside = np.flatnonzero(~(np.abs(pm - level) <= band))
    if not len(outside):
        return Recovery(0.0, level, band)
    k = int(outside[-1])
    if k + 1 >= len(grid):
        return Recovery(math.nan, level, band, f"the output did not settle within {what}")
    # Interpolate the crossing of the band's edge between the last sample outside and the first inside.
    d0, d1 = abs(pm[k] - level) - band, abs(pm[k + 1] - level) - band
    frac = d0 / (d0 - d1) if d0 != d1 else 1.0
    return Recovery(float(grid[k] + frac * (grid[k + 1] - grid[k]) - edge), level, band)


def _keyed_battery(design: Design, keyed: KeyedRun, ups: list[tuple[float, float]], m: dict[str, float],
                   warnings: list[str]) -> None:
    """Battery figures of steady keying: the settled key-down and key-up currents, the highest, the mean, runtime."""
    b_ = design.battery
    assert b_ is not None and keyed.circuit is not None
    T = keyed.circuit.period
    c0, c1 = keyed.window
    if "battery_current_a" in m:  # the steady state is the key held down until everything settled
        m["battery_keydown_current_a"] = m["battery_current_a"]
    ua, ub = max(ups, key=lambda iv: iv[1] - iv[0])
    if ub - ua >= T:
        m["battery_keyup_current_a"] = float(keyed.period_mean("ib", ub - T / 2)[0])
    mean_i = keyed.mean("ib", c0, c1)
    m["battery_keyed_current_a"] = mean_i
    t = keyed.time
    w = keyed.run.waves
    sel = (t >= c0) & (t <= c1)
    peaks = [float(np.max(w.v("ib")[sel]))]
    tt, ib = mx.clip(t, w.v("ib"), c0, c1)
    if keyed.refined is not None:
        peaks.append(float(np.max(keyed.refined.waves.v("ib"))))
    m["battery_peak_current_a"] = max([*peaks, m.get("battery_peak_current_a", 0.0)])
    m["runtime_keyed_h"] = b_.runtime_h(ib, tt) if mean_i > 0 else math.inf
    inv = design.source.inverter
    if inv is not None and inv.idle_power > 0:
        p_in = keyed.mean("pin", c0, c1)
        idle_warning(inv.idle_power, p_in, "over a keying cycle", warnings)


#: Above this share of the battery power, the inverter's own idle power sets the runtime (a warning).
IDLE_DOMINATES = 0.5


def idle_warning(idle: float, p_in: float, when: str, warnings: list[str]) -> None:
    """Warn when an inverter's idle power is most of what the battery delivers."""
    if p_in > 0 and idle / p_in > IDLE_DOMINATES:
        warnings.append(f"the inverter's idle power ({idle:g} W) is {100 * idle / p_in:.0f} % of the battery power "
                        f"{when} ({p_in:.3g} W): it, not the load, sets the runtime; a smaller inverter would run "
                        "longer")


def inverter_figures(design: Design, circuit: Circuit, w: Waveforms, window: tuple[float, float], start: Run,
                     sc: Circuit, m: dict[str, float], warnings: list[str]) -> None:
    """An inverter's output power in steady state and its highest one-period mean after switch-on; with a
    battery, the runtime by Peukert's law and the idle-power warning."""
    inv = design.source.inverter
    assert inv is not None
    t0, t1 = window
    t = w.time
    if "output_power_w" not in m:
        m["output_power_w"] = sum(mx.mean(t, (w.v(wd.plus) - w.v(wd.minus)) * -w.i(wd.name), t0, t1)
                                  for wd in circuit.windings)
    sw = start.waves
    p = sum((sw.v(wd.plus) - sw.v(wd.minus)) * -sw.i(wd.name) for wd in sc.windings)
    T = circuit.period
    ts = sw.time
    if float(ts[-1] - ts[0]) >= T:
        at = np.linspace(ts[0], ts[-1] - T, max(round(20 * (ts[-1] - ts[0]) / T), 2))
        means = mx.one_period_mean(ts, p, T, at, centred=False)
        m["inverter_switch_on_power_w"] = float(np.max(means))
    b = design.battery
    if b is not None and "battery_current_a" in m:
        tt, ib = mx.clip(t, w.v("ib"), t0, t1)
        m["runtime_h"] = b.runtime_h(ib, tt)
        if not design.keyed and inv.idle_power > 0:
            idle_warning(inv.idle_power, m.get("input_power_w", 0.0), "in steady state", warnings)


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
        ref = keyed.refined
        if ref is not None:  # the end of the longest key-down at the measuring step: the deepest trough
            rw = ref.waves
            rt = rw.time + ref.offset
            spans.append((rt, rw.v("raw"), rw.v("out"), rw, float(rt[0]) + ref.tstop / 2, float(rt[-1])))
    m["reg_vin_v"] = mx.mean(t, vin, t0, t1)
    m["reg_vin_min_v"] = min(mx.trough(tt, a, c0, c1) for tt, a, _, _, c0, c1 in spans)
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


#: The settle band of a stepped load's recovery: 2 % of the step (keyed-1).
STEP_SETTLE_BAND = 0.02


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
    area = mx.running_integral(t, v)

    def period_mean(at: np.ndarray) -> np.ndarray:
        return mx.integral_period_mean(t, area, T, at)

    # Recovery and overshoot on the one-period mean, as for a keyed load (the settle band: 2 %, keyed-1).
    inc, k = max(rises)
    if inc > 0:
        rec = recovery(period_mean, T, levels[k][2], levels[k][3], STEP_SETTLE_BAND, "the heaviest step")
        m["recovery_time_s"] = rec.time
        if rec.problem:
            warnings.append(rec.problem)
    dec, k = min(rises)
    if dec < 0:
        a, b = levels[k][2], levels[k][3]
        grid = np.linspace(a, b - T / 2, max(round(20 * (b - a) / T), 8))
        m["overshoot_v"] = max(float(np.nanmax(period_mean(grid))) - float(period_mean(np.array([b - T / 2]))[0]),
                               0.0)
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


