"""Estimate the steady state of a design from closed forms, as a starting point for ngspice.

The estimate only decides how soon the simulation settles, never a reported figure.  It
uses the infinite-capacitance solution with series resistance (docs/sources.md rect-4:
tan(phi) - phi = pi*Rs/(n*R_L), V = Vpk*cos(phi)), the finite-C ripple correction
I/(k*f*C) (rect-2), the choke-input value 2*Vpk/pi (filt-1) and, for the cascade, the
quasi-static crest drop (mult-4).
"""

from __future__ import annotations

import math

from simkit.design.model import CurrentLoad, Design, KeyState, Load, ResistorLoad, StepsLoad, TubeLoad
from simkit.netlist.circuit import Circuit
from simkit.parts.diodes import forward_drop
from simkit.parts.tubes import drop_at


def conduction_half_angle(rs_over_nrl: float) -> float:
    """Solve tan(phi) - phi = pi * Rs / (n * R_L) for phi in (0, pi/2), rad (docs/sources.md rect-4)."""
    k = math.pi * max(rs_over_nrl, 0.0)
    if k <= 1e-12:
        return 0.0
    # tan(p) - p rises monotonically from 0 to infinity on (0, pi/2): bisection is enough
    # (and keeps scipy's import time out of every run).
    lo, hi = 0.0, math.pi / 2
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if math.tan(mid) - mid < k:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _series_resistance(design: Design) -> float:
    """Series resistance of the filter chain (resistors and choke DCR), ohm."""
    return sum(sec.value if sec.kind == "r" else sec.dcr for sec in design.filters if sec.kind != "c")


def load_current(load: Load, v: float, mode: str = "steady") -> float:
    """DC current a load draws at voltage v in its final steady state, A."""
    if isinstance(load, ResistorLoad):
        return v / load.r
    if isinstance(load, CurrentLoad):
        return load.i
    if isinstance(load, TubeLoad):
        return load.perveance * max(v, 0.0) ** 1.5
    if isinstance(load, StepsLoad):
        return load.steps[-1][1]

    def st(k: KeyState) -> float:
        return v / k.r if k.r is not None else (k.i or 0.0)

    if mode == "mean":
        d = load.duty_share()
        return d * st(load.down) + (1 - d) * st(load.up)
    return st(load.down)


def _current(vr: float, design: Design, rser: float, mode: str) -> float:
    """DC current drawn from the rectifier output at voltage vr, A (every load taken at the output)."""

    def total(v: float) -> float:
        i = sum(load_current(ld, v, mode) for ld in design.loads)
        if design.bleeder is not None:
            i += v / design.bleeder.r
        return i

    # The output voltage v solves v = vr - rser * total(v); v - vr + rser*total(v) rises with v.
    lo, hi = 0.0, max(vr, 0.0)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if mid - vr + rser * total(mid) < 0:
            lo = mid
        else:
            hi = mid
    return total(0.5 * (lo + hi))


def estimate_state(design: Design, circuit: Circuit, vscale: float = 1.0) -> dict[str, float]:
    """Initial conditions (V on capacitors, A in inductors) near the periodic steady state."""
    s = design.source
    r = design.rectifier
    vpk = (s.inverter.peak if s.inverter is not None else s.vpeak) * vscale
    f = s.frequency
    rser = _series_resistance(design)
    mode = circuit.mode
    topo = r.topology
    first = design.filters[0].kind if design.filters else None
    choke_input = first == "l" and topo in ("half-wave", "centre-tap", "bridge")
    n_path = 2 if topo == "bridge" else 1
    # Leakage inductance limits the charging current like a resistance of about its reactance (an
    # estimate only: it sets where Newton starts, never a figure).
    rs = math.hypot(s.resistance, 2 * math.pi * f * s.inductance)
    reservoir = None
    if topo in ("half-wave", "centre-tap", "bridge") and first == "c":
        reservoir = design.filters[0].value

    def vr_of(i: float) -> float:
        if i <= 0:
            drop = 0.0
        elif r.diode.vacuum is not None:
            drop = n_path * drop_at(r.diode.vacuum.perveance, 4.0 * i)
        else:
            drop = n_path * forward_drop(r.diode, max(i, 1e-4) * 4.0)
        if topo in ("half-wave", "centre-tap", "bridge"):
            n = 1.0 if topo == "half-wave" else 2.0
            if choke_input:
                return max(2 * vpk / math.pi * (1 if n == 2 else 0.5) - i * rs - drop, 0.0)
            if reservoir is None:
                return vpk * 2 / math.pi / (1 if n == 2 else 2) - drop
            rl = vpk / max(i, 1e-12)
            phi = conduction_half_angle(rs / (n * rl))
            return max(vpk * math.cos(phi) - drop - i / (2 * n * f * reservoir), 0.0)
        c = r.capacitance or 1e-6
        if topo == "doubler":
            rl = 2 * vpk / max(i, 1e-12)
            phi = conduction_half_angle(rs / (0.5 * rl))
            return max(2 * vpk * math.cos(phi) - 2 * drop - i / (f * c), 0.0)
        m = r.stages
        crest = i / (f * c) * (2 * m**3 / 3 + m**2 / 4 + m / 12)
        return max(2 * m * vpk - crest - 2 * m * (drop + 2 * i * rs), 0.1 * vpk)

    # Fixed-point iteration on the DC current, damped.
    i = 0.0
    vr = vr_of(0.0)
    for _ in range(60):
        i_new = _current(vr, design, rser, mode)
        i = 0.5 * i + 0.5 * i_new
        vr = vr_of(i)
    i = _current(vr, design, rser, mode)

    ics: dict[str, float] = {}
    # DC node voltages along the filter ladder: each series element drops I*R.
    node_v: dict[str, float] = {circuit.rectified: vr}
    v = vr
    for r_series, node in _series_nodes(circuit):
        v -= i * r_series
        node_v[node] = v
    for ind in circuit.inductors:
        ics[ind.name] = i if ind.role == "choke" else 0.0
    for cap in circuit.capacitors:
        if cap.role in ("snubber", "sense"):
            ics[cap.name] = 0.0
        elif cap.role == "aux":  # the inverter's smoothed output power
            ics[cap.name] = vr * i
        elif cap.role == "reference" and design.regulator is not None:
            ics[cap.name] = design.regulator.reference or 0.0
        elif cap.role != "stage":
            ics[cap.name] = node_v.get(cap.plus, vr)
    stage_caps = [c for c in circuit.capacitors if c.role == "stage"]
    if topo == "doubler":
        for cap in stage_caps:
            ics[cap.name] = vr / 2
    elif topo == "cascade":
        k = vr / (2 * r.stages * vpk)
        for idx, cap in enumerate(stage_caps):
            ics[cap.name] = vpk * k if idx == 0 else 2 * vpk * k
    return ics


def _series_nodes(circuit: Circuit) -> list[tuple[float, str]]:
    """(series resistance, node after it) for each filter series element, in order."""
    out: list[tuple[float, str]] = []
    for ind in circuit.inductors:
        if ind.role == "choke":
            out.append((ind.dcr, ind.b))
    for res in circuit.resistors:
        if res.role == "filter":
            out.append((res.value, res.b))
    order = {e.name: k for k, e in enumerate(circuit.elements)}
    names = {**{ind.b: ind.name for ind in circuit.inductors if ind.role == "choke"},
             **{res.b: res.name for res in circuit.resistors if res.role == "filter"}}
    out.sort(key=lambda t: order[names[t[1]]])
    return out
