"""Text listings of the part library for ``simkit parts``."""

from __future__ import annotations

import difflib

from simkit.errors import UsageError
from simkit.parts import diodes
from simkit.units import eng


def listing() -> str:
    lines = ["Silicon rectifier diodes (use as rectifier.diode = \"NAME\"):",
             f"  {'name':<8} {'VRRM':>7} {'IF(AV)':>7} {'IFSM':>6}  description"]
    for name in diodes.names():
        p = diodes.DIODES[name.upper()]
        r = p.ratings
        lines.append(f"  {p.name:<8} {eng(r.vrrm or 0, 'V'):>7} {eng(r.ifav or 0, 'A'):>7} "
                     f"{eng(r.ifsm or 0, 'A'):>6}  {p.description}")
    lines.append("Details and sources: simkit parts NAME")
    return "\n".join(lines) + "\n"


def describe(name: str) -> str:
    p = diodes.lookup(name)
    if p is None:
        near = difflib.get_close_matches(name.upper(), list(diodes.DIODES), n=1, cutoff=0.5)
        hint = f"; did you mean {diodes.DIODES[near[0]].name}?" if near else ""
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
        ("ratings from", p.source),
    ]
    width = max(len(k) for k, _ in rows)
    out = [f"{p.name}: {p.description}"] + [f"  {k:<{width}}  {v}" for k, v in rows]
    return "\n".join(out) + "\n"
