"""Text listings of the part library for ``simkit parts``."""

from __future__ import annotations

import difflib

from simkit.errors import UsageError
from simkit.parts import diodes, regulators, tubes
from simkit.units import eng

#: Where the numbers of the library come from, for people: the page and its entries.
SOURCES_PAGE = "docs/sources.md"
TUBES_ID = "tube-4"
GLOW_ID = "reg-1"
MOSFETS_ID = "reg-5"


def listing() -> str:
    lines = ["Silicon rectifier diodes (use as rectifier.diode = \"NAME\"):",
             f"  {'name':<8} {'VRRM':>7} {'IF(AV)':>7} {'IFSM':>6}  description"]
    for name in diodes.names():
        p = diodes.DIODES[name.upper()]
        r = p.ratings
        lines.append(f"  {p.name:<8} {eng(r.vrrm or 0, 'V'):>7} {eng(r.ifav or 0, 'A'):>7} "
                     f"{eng(r.ifsm or 0, 'A'):>6}  {p.description}")
    lines.append("")
    lines.append("Vacuum rectifiers (per plate: i = P v^1.5; heater warm-up after switch-on):")
    lines.append(f"  {'name':<8} {'PIV':>7} {'Ipk':>7} {'DC':>7} {'max C':>7}  description")
    for name in tubes.names():
        t = tubes.TUBES[name.upper()]
        r = t.ratings

        def show(x: float | None, unit: str) -> str:
            return eng(x, unit) if x else "-"

        lines.append(f"  {t.name:<8} {show(r.piv, 'V'):>7} {show(r.peak_current, 'A'):>7} "
                     f"{show(r.dc_current, 'A'):>7} {show(r.max_input_capacitance, 'F'):>7}  {t.description}")
    lines.append("")
    lines.append('Glow-discharge regulator tubes ([regulator] kind = "shunt", tube = "NAME"):')
    for g in regulators.GLOW.values():
        lines.append(f"  {g.name:<8} {g.maintaining:g} V, strikes at {g.striking:g} V, "
                     f"{g.i_min * 1e3:g}-{g.i_max * 1e3:g} mA, {g.resistance:.3g} ohm")
    lines.append("")
    lines.append('Pass MOSFETs ([regulator] kind = "series", device = "NAME"):')
    for m in regulators.MOSFETS.values():
        lines.append(f"  {m.name:<8} {m.vdss:g} V, {m.id_max:g} A, {m.pd:g} W, threshold {m.vto:g} V")
    lines.append(f"Details and sources: simkit parts NAME (every source: {SOURCES_PAGE} in simkit's repository)")
    return "\n".join(lines) + "\n"


def describe(name: str) -> str:
    p = diodes.lookup(name)
    if p is None:
        t = tubes.lookup(name)
        if t is not None:
            return _describe_tube(t)
        g = regulators.glow(name)
        if g is not None:
            return (f"{g.name}: glow-discharge regulator tube\n  maintaining {g.maintaining:g} V, striking "
                    f"{g.striking:g} V, {g.i_min * 1e3:g}-{g.i_max * 1e3:g} mA, dynamic {g.resistance:.3g} ohm\n"
                    f"  source: {g.source}\n  see: {SOURCES_PAGE}#{GLOW_ID}\n")
        m = regulators.mosfet(name)
        if m is not None:
            return (f"{m.name}: N-channel MOSFET for series pass\n  VDSS {m.vdss:g} V, ID {m.id_max:g} A, "
                    f"PD {m.pd:g} W (25 C case), model vto {m.vto:g} V, kp {m.kp:g} A/V^2\n  source: {m.source}\n"
                    f"  see: {SOURCES_PAGE}#{MOSFETS_ID}\n")
        known = {**{k: v.name for k, v in diodes.DIODES.items()}, **{k: v.name for k, v in tubes.TUBES.items()}}
        near = difflib.get_close_matches(name.upper(), list(known), n=1, cutoff=0.5)
        hint = f"; did you mean {known[near[0]]}?" if near else ""
        raise UsageError(f"no part {name!r} in the library{hint} (simkit parts lists them)")
    r = p.ratings
    rows = [
        ("VRRM", eng(r.vrrm, "V") if r.vrrm else "-"),
        ("IF(AV)", eng(r.ifav, "A") if r.ifav else "-"),
        ("IFSM (8.3 ms half-sine)", eng(r.ifsm, "A") if r.ifsm else "-"),
        ("I2t", f"{r.i2t:g} A²s" if r.i2t else "-"),
        ("trr", eng(r.trr, "s") if r.trr else "not specified"),
        ("VF max", f"{eng(r.vf, 'V')} at {eng(r.vf_current, 'A')}" if r.vf and r.vf_current else "-"),
        ("model forward drop at IF(AV)",
         eng(diodes.forward_drop(p, r.ifav), "V") if r.ifav else "-"),
        ("SPICE model", f"IS={p.is_:g} N={p.n:g} RS={p.rs:g} TT=0 CJO=0 (our own fit)"),
        *_dynamics_rows(p),
        ("source", p.source),
        ("see", f"{SOURCES_PAGE}#{p.sources_id}"),
    ]
    width = max(len(k) for k, _ in rows)
    out = [f"{p.name}: {p.description}"] + [f"  {k:<{width}}  {v}" for k, v in rows]
    return "\n".join(out) + "\n"


def _dynamics_rows(p: diodes.DiodePart) -> list[tuple[str, str]]:
    """The part's reverse recovery and junction capacitance, as the high-frequency analysis uses them."""
    dyn = p.dynamics
    if dyn is None:
        return []
    return [("high-frequency model", f"t_rr {eng(dyn.trr, 's')} -> TT={dyn.tt:.3g}; C_J {eng(dyn.cj, 'F')} at "
             f"{diodes.CJ_VOLTS:g} V -> CJO={dyn.cjo:.3g} (simkit hash, run --hash)"),
            ("  its source", dyn.source)]


def _describe_tube(t: tubes.TubePart) -> str:
    r = t.ratings
    m = t.model()
    assert m.vacuum is not None
    rows = [
        ("PIV", eng(r.piv, "V") if r.piv else "not found"),
        ("peak plate current", eng(r.peak_current, "A") if r.peak_current else "not found"),
        ("DC output (capacitor input)", eng(r.dc_current, "A") if r.dc_current else "-"),
        ("max input capacitance", eng(r.max_input_capacitance, "F") if r.max_input_capacitance else "-"),
        ("min supply resistance per plate", eng(r.min_plate_resistance, "ohm") if r.min_plate_resistance else "-"),
        ("plate law", f"i = {t.perveance:.4g} v^1.5 (fitted to {eng(t.drop_v, 'V')} at {eng(t.drop_i, 'A')})"),
        ("heater", f"{'directly' if t.directly_heated else 'indirectly'} heated: emission from "
                   f"{m.vacuum.warmup_start:g} s, full at {m.vacuum.warmup_full:g} s (common practice)"),
        ("source", t.source),
        ("see", f"{SOURCES_PAGE}#{TUBES_ID}"),
    ]
    width = max(len(k) for k, _ in rows)
    out = [f"{t.name}: {t.description}"] + [f"  {k:<{width}}  {v}" for k, v in rows]
    return "\n".join(out) + "\n"
