"""Waveforms at any node or part of a simulated design, by name: what ``run --probe`` and the Python API read.

A probe is named as a designer names things on a schematic:

- a node, by its deck name (``out``, ``rect``, ``ac1``): its voltage to the return (node ``0``);
- a part, by its name (``D1``, ``C1``, ``L1``, ``RLOAD``, ``V1``): the current through it, in the
  direction :func:`probe_list` states for each kind (``i(D1)`` says the same);
- ``v(PART)`` (``v(C1)``): the voltage across the part, between the terminals the same list names.

Each waveform comes from one of two runs: ``"steady"``, the measurement window of the periodic
steady state (the samples the figures are computed from, the window's ends interpolated exactly
as :func:`simkit.analysis.metrics.clip` does, time from the window's start), or ``"switch-on"``,
the start-up run from empty capacitors (time after switch-on).  :func:`node_map` says what each
node of the deck is and what connects there, for ``simkit netlist --nodes``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from simkit.analysis import metrics as mx
from simkit.engine.ngspice import Waveforms
from simkit.errors import UsageError, shown
from simkit.netlist.circuit import Circuit

if TYPE_CHECKING:
    from simkit.pipeline.results import RunResult

#: The runs a waveform can come from.
RUNS: tuple[str, ...] = ("steady", "switch-on")

#: How the time axis of each run is measured.
TIME_MEANING: dict[str, str] = {
    "steady": "time from the start of the steady-state measurement window",
    "switch-on": "time after switch-on, every capacitor empty at 0 s",
}

Trace = Callable[[Waveforms], np.ndarray]


class ProbeError(UsageError):
    """A probe name that the design does not have (exit 2); the message lists the names it has."""


@dataclass(frozen=True)
class Probe:
    """One name a waveform can be asked by: what it measures, in which unit, and how it is computed."""

    name: str  # canonical: a node ("out"), a part's current ("D1") or a part's voltage ("v(C1)")
    quantity: str  # "voltage" or "current"
    unit: str  # "V" or "A"
    meaning: str  # in words, with the direction or polarity
    trace: Trace

    @property
    def column(self) -> str:
        """How CSV headers and plot legends name it: ``v(out)``, ``i(D1)``, ``v(C1)``."""
        return _column(self.name, self.quantity)


@dataclass(frozen=True)
class Waveform:
    """A probe's samples over one run: unpacks as ``time, value = waveform``.

    ``time`` in s (see :data:`TIME_MEANING` for where it starts), ``value`` in ``unit``.
    """

    name: str
    quantity: str
    unit: str
    meaning: str
    run: str
    time: np.ndarray
    value: np.ndarray

    def __iter__(self) -> Iterator[np.ndarray]:
        return iter((self.time, self.value))

    @property
    def column(self) -> str:
        return _column(self.name, self.quantity)

    def mean(self) -> float:
        """Time average over the whole waveform (trapezoid rule on the uneven time points)."""
        return float(np.trapezoid(self.value, self.time) / (self.time[-1] - self.time[0]))


def _column(name: str, quantity: str) -> str:
    if name.startswith(("v(", "i(")):
        return name
    return f"v({name})" if quantity == "voltage" else f"i({name})"


def _node(n: str) -> Trace:
    return lambda w: w.v(n)


def _across(a: str, b: str) -> Trace:
    return lambda w: w.v(a) - w.v(b)


def _branch(source: str, sign: float = 1.0) -> Trace:
    return lambda w: sign * w.i(source)


def _ohm(a: str, b: str, r: float) -> Trace:
    return lambda w: (w.v(a) - w.v(b)) / r


def deck_nodes(circuit: Circuit) -> list[str]:
    """Every node of the deck but the return ``0``, in the order the elements first use them."""
    seen: dict[str, None] = {}
    for e in circuit.elements:
        for n in e.nodes:
            if n != "0":
                seen.setdefault(n, None)
    return list(seen)


def _part_probes(circuit: Circuit) -> list[tuple[str, str, Trace, str, Trace]]:
    """Per part: (name, what its current is, current, what its voltage is, voltage)."""
    out: list[tuple[str, str, Trace, str, Trace]] = []
    for w in circuit.windings:
        out.append((w.name, f"winding current out of its + terminal ({w.plus}) into the circuit",
                    _branch(w.name, -1.0), f"winding terminal voltage, {w.plus} to {w.minus}",
                    _across(w.plus, w.minus)))
    for d in circuit.diodes:
        out.append((d.name, f"diode current, anode ({d.anode}) to cathode ({d.cathode})", _branch(d.sense),
                    f"diode voltage, anode ({d.anode}) to cathode ({d.cathode}): negative while it blocks",
                    _across(d.anode, d.cathode)))
    for c in circuit.capacitors:
        if not c.is_part or not c.sense:
            continue
        out.append((c.name, f"capacitor current into its + terminal ({c.plus})", _branch(c.sense),
                    f"capacitor voltage, + ({c.plus}) to - ({c.minus}), its ESR included", _across(c.plus, c.minus)))
    for ind in circuit.inductors:
        what = "choke" if ind.role == "choke" else "leakage inductance"
        out.append((ind.name, f"{what} current from {ind.a} to {ind.b}", _branch(ind.name),
                    f"{what} voltage, {ind.a} to {ind.b}" + (", its winding resistance included" if ind.dcr else ""),
                    _across(ind.a, ind.b)))
    for r in circuit.resistors:
        if r.role in ("esr", "dcr", "snubber", "load"):
            continue
        out.append((r.name, f"{r.role} resistor current from {r.a} to {r.b}", _ohm(r.a, r.b, r.value),
                    f"{r.role} resistor voltage, {r.a} to {r.b}", _across(r.a, r.b)))
    for ld in circuit.loads:
        out.append((ld.name, f"load current into the load at node {ld.node}", _branch(ld.sense),
                    f"load voltage, {ld.node} to the return", _node(ld.node)))
    reg = circuit.regulator
    if reg.get("pass_sense"):
        out.append(("MPASS", "pass device drain current", _branch(reg["pass_sense"]),
                    "pass device drain-source voltage", _across("drn", reg.get("output", "out"))))
    if reg.get("shunt_sense"):
        name = "DZ" if any(e.name == "DZ" for e in circuit.elements) else "GLOW"
        out.append((name, "shunt element current, from the output into the element", _branch(reg["shunt_sense"]),
                    "shunt element voltage, to the return", _node("sh")))
    return out


def probe_list(circuit: Circuit) -> list[Probe]:
    """Every name a waveform can be asked by, for this circuit: nodes first, then each part's current and
    voltage."""
    probes = [Probe(n, "voltage", "V", f"voltage of node {n} to the return (node 0)", _node(n))
              for n in deck_nodes(circuit)]
    for name, current, i_trace, voltage, v_trace in _part_probes(circuit):
        probes.append(Probe(name, "current", "A", current, i_trace))
        probes.append(Probe(f"v({name})", "voltage", "V", voltage, v_trace))
    return probes


def names_text(circuit: Circuit) -> str:
    """The valid names in one line, for an error message."""
    probes = probe_list(circuit)
    nodes = [p.name for p in probes if p.quantity == "voltage" and not p.name.startswith("v(")]
    parts = [p.name for p in probes if p.quantity == "current"]
    return (f"nodes (voltage to the return): {', '.join(nodes)}; parts (current; v(NAME) for the voltage "
            f"across): {', '.join(parts)}")


def find_probe(circuit: Circuit, name: str) -> Probe:
    """The probe a name means: the name as listed, or spelt ``i(PART)``, ``v(NODE)``, in any letter case.

    Raises
    ------
    ProbeError
        No such node or part (exit 2), listing every valid name.
    """
    probes = probe_list(circuit)
    by_name = {p.name: p for p in probes}
    text = name.strip()
    if text in by_name:
        return by_name[text]
    low = text.lower()
    want: str | None = None
    key = text
    if low.startswith("i(") and low.endswith(")"):
        key, want = text[2:-1].strip(), "current"
    elif low.startswith("v(") and low.endswith(")"):
        inner = text[2:-1].strip()
        is_node = inner.lower() in by_name and by_name[inner.lower()].quantity == "voltage"
        key, want = (inner.lower() if is_node else f"v({inner})"), "voltage"
    folded = {k.lower(): p for k, p in by_name.items()}
    found = by_name.get(key) or folded.get(key.lower())
    if found is not None and (want is None or found.quantity == want):
        return found
    raise ProbeError(f"--probe {shown(name, 80)}: no such node or part in this design; {names_text(circuit)}")


def waveform(result: RunResult, name: str, run: str = "steady") -> Waveform:
    """The samples of one probe over one run of a simulated design.

    Parameters
    ----------
    result : RunResult
        From :func:`simkit.pipeline.simulate`.
    name : str
        A node (``"out"``), a part's current (``"D1"``, ``"i(D1)"``) or voltage (``"v(C1)"``).
    run : str
        ``"steady"`` (the measurement window of the steady state, whose mean of ``out`` is
        ``vout_dc_v``) or ``"switch-on"`` (the start-up run from empty capacitors).
    """
    if run not in RUNS:
        raise UsageError(f"run {run!r}: choose one of {', '.join(RUNS)}")
    probe = find_probe(result.circuit, name)
    if run == "steady":
        w = result.steady.final.waves
        t0, t1 = result.window
        tt, yy = mx.clip(w.time, _traced(probe, w, name, run), t0, t1)
        tt = tt - t0
    else:
        w = result.start.waves
        tt, yy = w.time.copy(), _traced(probe, w, name, run)
    return Waveform(probe.name, probe.quantity, probe.unit, probe.meaning, run, np.asarray(tt, dtype=float),
                    np.asarray(yy, dtype=float))


def _traced(probe: Probe, w: Waveforms, name: str, run: str) -> np.ndarray:
    try:
        return np.asarray(probe.trace(w), dtype=float)
    except KeyError:  # a node only one run's deck has
        raise ProbeError(f"--probe {name}: the {run} run has no such node or part") from None


# -- what each node is ---------------------------------------------------------------------------

#: Elements simkit adds for the numerics, as the node map explains them.
HELPER_WORDS: tuple[str, ...] = (
    "VDk: the 0 V current sense of diode Dk", "VCk: the 0 V current sense of capacitor Ck",
    "RESRk: the ESR of Ck", "RDCRk: the winding resistance of choke Lk",
    "VLOAD...: the 0 V current sense of a load", "RTAC...: 10 MΩ ties from a floating winding to the return",
    "VPASS, VSHUNT: the 0 V current senses of a regulator's pass device and shunt element",
)


@dataclass(frozen=True)
class NodeInfo:
    """One node of the deck: its name, what it is, and the elements (with their terminal) that touch it."""

    name: str
    meaning: str
    elements: tuple[str, ...]


#: Nodes of the models simkit builds (inverter, battery, regulators, heaters): what each one carries.
MODEL_NODES: dict[str, str] = {
    "wave": "the inverter's waveform at unit peak (1 V stands for the inverter's peak output)",
    "wavep": "the inverter waveform's positive step (unit peak)",
    "pout": "inverter output power, smoothed over its response time (1 V stands for 1 W)",
    "pin": "inverter input power from its loss model (1 V stands for 1 W)",
    "vt": "battery terminal voltage",
    "ib": "battery current (1 V stands for 1 A)",
    "scale": "battery voltage over its nominal voltage: scales an unregulated inverter's output",
    "ref1": "series regulator: the reference zener's cathode",
    "ref2": "series regulator: the reference after its RC filter",
    "gate": "series regulator: the pass device's gate",
    "drn": "series regulator: the pass device's drain, inside its current sense VPASS (same voltage as raw)",
    "sh": "shunt regulator: the shunt element's top, inside its current sense VSHUNT (same voltage as out)",
    "g1": "glow tube model: after its strike switch",
    "glc": "glow tube model: its strike sensing",
    "heat": "vacuum rectifier emission, 0 cold to 1 warm (switch-on run only)",
}

#: Terminal names by element letter, where they tell something.
_TERMINALS: dict[str, tuple[str, ...]] = {
    "D": ("anode", "cathode"), "C": ("+", "-"), "V": ("+", "-"), "B": ("+", "-"),
    "M": ("drain", "gate", "source", "bulk"), "S": ("+", "-", "control +", "control -"),
}


def _terminal(element: str, index: int) -> str:
    names = _TERMINALS.get(element[0], ())
    return names[index] if index < len(names) else ""


def _same_as(node: str) -> str:
    return "the return" if node == "0" else node


def node_map(circuit: Circuit) -> list[NodeInfo]:
    """What every node of the deck is, for ``simkit netlist --nodes`` and the probe documentation."""
    meaning: dict[str, str] = dict(MODEL_NODES)
    for e in circuit.elements:
        if e.name.startswith("BEMF"):
            meaning[e.nodes[0]] = f"inverter output {e.name[4:]} EMF, before its current sense V{e.name[4:]}"
    for k, w in enumerate(circuit.windings, 1):
        meaning.setdefault(w.emf, f"winding {k} EMF, before its series resistance and inductance")
        meaning.setdefault(w.plus, f"winding {k} terminal (+), feeding the rectifier")
        if w.minus != "0":
            meaning.setdefault(w.minus, f"winding {k} terminal (-)")
    meaning[circuit.output] = "the output: across the last filter capacitor and the load"
    if circuit.rectified != circuit.output:
        meaning.setdefault(circuit.rectified, "the rectifier's output, at the reservoir capacitor or choke input")
    if circuit.regulator:
        meaning.setdefault(circuit.regulator.get("input", "raw"), "the regulator's input, after the last filter "
                                                                  "section")
    for k, n in enumerate(circuit.section_nodes):
        meaning.setdefault(n, f"after filter section {k} (filter.{k})")
    for d in circuit.diodes:
        inner = next((e.nodes[0] for e in circuit.elements if e.name in (d.name, f"B{d.name}")), d.anode)
        if inner != d.anode:
            meaning.setdefault(inner, f"{d.name}'s anode inside its current sense {d.sense} (same voltage as "
                                      f"{_same_as(d.anode)})")
    for c in circuit.capacitors:
        if c.inner_plus != c.plus:
            meaning.setdefault(c.inner_plus, f"{c.name}'s + plate inside its current sense (same voltage as "
                                             f"{_same_as(c.plus)})")
        if c.inner_minus != c.minus:
            meaning.setdefault(c.inner_minus, f"between {c.name} and its ESR" if c.is_part else
                               f"inside the {c.role} {c.name} (between its capacitor and resistor)")
    for ind in circuit.inductors:
        if ind.role == "leakage":
            meaning.setdefault(ind.a, f"winding {ind.name[2:]}, between its series resistance and leakage inductance "
                                      f"{ind.name}")
        mid = next((e.nodes[1] for e in circuit.elements if e.name == ind.name), ind.b)
        if mid != ind.b:
            meaning.setdefault(mid, f"between {ind.name} and its winding resistance")
    for ld in circuit.loads:
        inner = next((e.nodes[1] for e in circuit.elements if e.name == ld.sense), "")
        if inner and inner != ld.node:
            meaning.setdefault(inner, f"{ld.name}'s top inside its current sense {ld.sense} (same voltage as "
                                      f"{ld.node})")
    touching: dict[str, list[str]] = {}
    for e in circuit.elements:
        for i, n in enumerate(e.nodes):
            if n == "0":
                continue
            term = _terminal(e.name, i)
            entry = f"{e.name} {term}".strip()
            if entry not in touching.setdefault(n, []):
                touching[n].append(entry)
    return [NodeInfo(n, meaning.get(n, "an internal node of a model"), tuple(touching.get(n, [])))
            for n in deck_nodes(circuit)]


def node_map_text(circuit: Circuit) -> str:
    """The node map and the probe names as plain text (``simkit netlist --nodes``)."""
    nodes = node_map(circuit)
    width = max((len(n.name) for n in nodes), default=4)
    lines = ["nodes of the deck (voltages are to node 0, the return):", ""]
    for n in nodes:
        lines.append(f"  {n.name:<{width}}  {n.meaning}")
        lines.append(f"  {'':<{width}}  connects: {', '.join(n.elements)}")
    lines += ["", "parts (--probe NAME: its current; --probe v(NAME): the voltage across it):", ""]
    parts = [p for p in probe_list(circuit) if p.quantity == "current"]
    pw = max((len(p.name) for p in parts), default=4)
    volts = {p.name[2:-1]: p for p in probe_list(circuit) if p.name.startswith("v(")}
    for p in parts:
        lines.append(f"  {p.name:<{pw}}  current: {p.meaning}")
        lines.append(f"  {'':<{pw}}  v({p.name}): {volts[p.name].meaning}")
    lines += ["", "elements simkit adds for the numerics (not parts to buy):", ""]
    lines += [f"  {h}" for h in HELPER_WORDS]
    return "\n".join(lines) + "\n"
