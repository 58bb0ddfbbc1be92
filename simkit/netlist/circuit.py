"""A circuit as elements plus what each element is for, and its deterministic rendering as a deck.

Element names and node names are generated here and in :mod:`simkit.netlist.build`; every
number is written by :func:`simkit.units.spice`.  No text from a design file reaches the
deck except the title, which passes through :func:`safe_comment`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from simkit.netlist.drives import Drive
from simkit.units import spice


@dataclass(frozen=True)
class Element:
    """One deck line: ``NAME node node ... value`` (the value part already formatted)."""

    name: str
    nodes: tuple[str, ...]
    value: str
    comment: str = ""
    ic: float | None = None  # initial condition: V for a capacitor, A for an inductor
    drive: Drive | None = None  # a PWL source: its value is rendered per run window

    def render(self, ic: float | None = None, offset: float = 0.0, span: float = 0.0) -> str:
        value = self.drive.pwl(offset, span) if self.drive is not None else self.value
        use = self.ic if ic is None else ic
        if use is not None:
            value += f" IC={spice(use, 15)}"  # full precision: Newton steps are far below 7 digits
        line = " ".join((self.name, *self.nodes, value))
        return f"{line}    $ {self.comment}" if self.comment else line


@dataclass(frozen=True)
class DiodeRef:
    name: str  # D1
    sense: str  # VD1: 0 V source in series, current anode -> cathode
    anode: str
    cathode: str


#: Capacitors simkit adds: RC snubbers, a model's internal state ("aux"), sensing delays ("sense").
HELPER_ROLES = ("snubber", "aux", "sense")


@dataclass(frozen=True)
class CapRef:
    name: str  # C1
    plus: str  # terminal nodes
    minus: str
    inner_plus: str  # the nodes of the C element itself (inside sense source and ESR)
    inner_minus: str
    sense: str  # VC1: current into the plus terminal
    value: float  # F
    role: str  # "reservoir", "stage", "filter", "reference", or a helper role (HELPER_ROLES)

    @property
    def is_part(self) -> bool:
        """A capacitor of the design (not one simkit adds for numerics or as a model's state)."""
        return self.role not in HELPER_ROLES


@dataclass(frozen=True)
class IndRef:
    name: str  # L1
    a: str
    b: str
    value: float  # H
    dcr: float  # ohm
    role: str  # "choke" or "leakage"


@dataclass(frozen=True)
class ResRef:
    name: str
    a: str
    b: str
    value: float  # ohm
    role: str  # "filter", "load", "bleeder", "winding", "esr", "dcr", "snubber"


@dataclass(frozen=True)
class LoadRef:
    name: str  # RLOAD, BLOAD, RLOAD2 ...
    sense: str  # VLOAD...: current into the load
    node: str  # where it hangs
    index: int  # position in the design's loads


@dataclass(frozen=True)
class WindingRef:
    name: str  # the EMF source, V1
    vrms: float  # open-circuit RMS, V
    plus: str  # terminal nodes after the series impedance
    minus: str
    emf: str = ""  # the EMF's own + node (before the series impedance); its power is v(emf, minus) * -i(name)


@dataclass
class Circuit:
    """Elements in deck order plus the roles the metrics need."""

    title: str
    elements: list[Element] = field(default_factory=list)
    models: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    diodes: list[DiodeRef] = field(default_factory=list)
    capacitors: list[CapRef] = field(default_factory=list)
    inductors: list[IndRef] = field(default_factory=list)
    resistors: list[ResRef] = field(default_factory=list)
    windings: list[WindingRef] = field(default_factory=list)
    output: str = "out"
    rectified: str = "rect"  # rectifier output node (reservoir or choke input)
    loads: list[LoadRef] = field(default_factory=list)
    period: float = 0.02  # s
    mode: str = "steady"  # which time functions are live: see netlist.build
    battery_nodes: dict[str, str] = field(default_factory=dict)  # "vt", "ib", "pin", "pout" when modelled
    section_nodes: list[str] = field(default_factory=list)  # node after each filter section
    regulator: dict[str, str] = field(default_factory=dict)  # its nodes and sense sources, when there is one
    hidden_state: bool = False  # a part remembers more than its C and L (a switch with hysteresis)

    @property
    def load_sense(self) -> str | None:
        """Sense source of the first load (designs with one load); see ``loads`` for all."""
        return self.loads[0].sense if self.loads else None

    @property
    def load_kind(self) -> str | None:
        """"resistor" when the first load is a plain resistor element, else "current" (a B source)."""
        if not self.loads:
            return None
        return "resistor" if self.loads[0].name.startswith("RLOAD") else "current"

    def add(self, element: Element) -> None:
        if any(e.name == element.name for e in self.elements):
            raise ValueError(f"duplicate element {element.name}")
        self.elements.append(element)

    def element(self, name: str) -> Element:
        for e in self.elements:
            if e.name == name:
                return e
        raise KeyError(name)

    def state_elements(self) -> list[Element]:
        """Capacitors and inductors: the elements whose initial condition fixes the state."""
        return [e for e in self.elements if e.name[0] in "CL"]


@dataclass(frozen=True)
class Transient:
    """A ``.tran`` analysis: span, maximum step and options."""

    tstop: float  # s
    tmax: float  # s, maximum internal step
    reltol: float = 1e-4
    abstol: float = 1e-9
    vntol: float = 1e-6
    method: str = "trap"
    extra_options: tuple[str, ...] = ()
    tstep: float | None = None  # s, the .tran step (ngspice's first step is about tstep/100); None: tmax


_SAFE = re.compile(r"[^A-Za-z0-9 _\-.,:;()/+=%'\[\]]")


def safe_comment(text: str) -> str:
    """Reduce user text to one harmless comment line (no control characters, no ``#`` that
    ngspice could read as a command, nothing that starts a dot-card)."""
    cleaned = _SAFE.sub("?", text.replace("\r", " ").replace("\n", " "))
    return cleaned.strip()[:200]


def render(
    circuit: Circuit,
    tran: Transient,
    ics: dict[str, float] | None = None,
    meas: list[str] | None = None,
    header: list[str] | None = None,
    offset: float = 0.0,
) -> str:
    """Render the whole deck deterministically.

    Parameters
    ----------
    ics : dict, optional
        Initial conditions by element name (V for capacitors, A for inductors); missing
        state elements start at their own ``ic`` (zero by default).  Keys ``v(node)`` give
        node voltages at the start (``.ic`` lines): where the previous span ended.
    meas : list of str, optional
        ``.meas`` lines to append.
    offset : float
        Absolute time since switch-on at which this run starts, s: time functions (keying,
        warm-up, steps) continue from there.  Runs start on whole source periods.
    """
    ics = ics or {}
    lines = [f"* simkit deck: {safe_comment(circuit.title)}"]
    for h in header or []:
        lines.append(f"* {safe_comment(h)}")
    for n in circuit.notes:
        lines.append(f"* {safe_comment(n)}")
    for e in circuit.elements:
        ic = ics.get(e.name)
        if e.name[0] in "CL":
            ic = ic if ic is not None else (e.ic if e.ic is not None else 0.0)
            lines.append(e.render(ic))
        else:
            lines.append(e.render(offset=offset, span=tran.tstop))
    lines.extend(circuit.models)
    # Node voltages where the last span ended: with ``uic`` ngspice starts every other node at 0 V,
    # and a restart mid-run (a load at its knee, a zener) may then fail to converge at t = 0.
    nodes = sorted((k[2:-1], v) for k, v in ics.items() if k.startswith("v(") and k.endswith(")"))
    for i in range(0, len(nodes), 6):
        lines.append(".ic " + " ".join(f"v({n})={spice(v, 15)}" for n, v in nodes[i:i + 6]))
    opts = [f"reltol={spice(tran.reltol)}", f"abstol={spice(tran.abstol)}", f"vntol={spice(tran.vntol)}",
            f"method={tran.method}", *tran.extra_options]
    lines.append(".options " + " ".join(opts))
    tstep = tran.tstep if tran.tstep is not None else tran.tmax
    lines.append(f".tran {spice(tstep)} {spice(tran.tstop)} 0 {spice(tran.tmax)} uic")
    lines.extend(meas or [])
    lines.append(".end")
    return "\n".join(lines) + "\n"
