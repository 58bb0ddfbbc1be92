"""The schematic of a design, drawn from its circuit: one symbol per user part, each labelled
with its name (as in the deck and the parts table) and its value in engineering notation.

Drawn: the winding (EMF ``V1``..., its series resistance ``RW1``... and leakage ``LW1``...),
the rectifier diodes, stage and filter capacitors (ESR in the label), chokes (DCR in the
label), filter resistors, the load and the bleeder.  Not drawn, because simkit adds them
for the numerics and they are not parts to buy: the 10 MΩ ties ``RT*``, the snubbers
``CSW*``/``RSW*``/``CSR``/``RSR``, and the 0 V current senses ``VD*``/``VC*``/``VLOAD``.

Layout: the rectifier block at the left (its own arrangement per topology), then the filter
as a ladder from node ``rect`` to node ``out``, series parts along the top and shunt parts
down to the return (node 0, the negative output), then the bleeder and the load, and the
output terminals.  Node names of the deck are written small beside their nodes.

This module and :mod:`simkit.report.plots` are the only ones that load matplotlib (here
through schemdraw), and only when a schematic is drawn.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from simkit.design.model import Design
from simkit.netlist.circuit import CapRef, Circuit, DiodeRef
from simkit.units import eng

#: Element-name prefixes of the helpers simkit adds for the numerics (never drawn).
HELPER_PREFIXES: tuple[str, ...] = ("RT", "CSW", "RSW", "CSR", "RSR", "VD", "VC", "VLOAD", "RESR", "RDCR")

INK = "#1d232b"
NODE = "#6b7580"
PART_FONT = 15.0
NODE_FONT = 12.0
#: Length of a two-terminal symbol, drawing units.
U = 3.0


def helper_element(name: str) -> bool:
    """True for elements simkit adds for the numerics (ties, snubbers, 0 V senses) and for
    the ESR/DCR resistors, which the schematic shows in their capacitor's or choke's label."""
    return name.startswith(HELPER_PREFIXES)


def user_parts(circuit: Circuit) -> list[str]:
    """The parts a schematic must draw, one symbol each: winding EMFs with their series
    resistance and leakage, rectifier diodes, stage and filter capacitors, chokes, filter
    resistors, loads and the bleeder (taken from the circuit's references, not the deck)."""
    c = circuit
    names = [w.name for w in c.windings]
    names += [r.name for r in c.resistors if r.role == "winding"]
    names += [x.name for x in c.inductors if x.role == "leakage"]
    names += [d.name for d in c.diodes]
    names += [x.name for x in c.capacitors if x.role in ("stage", "reservoir", "filter")]
    names += [x.name for x in c.inductors if x.role == "choke"]
    names += [r.name for r in c.resistors if r.role == "filter"]
    names += [name for name, _node, _ld in _loads(c, None)]
    names += [r.name for r in c.resistors if r.role == "bleeder"]
    return list(dict.fromkeys(names))


def _design_loads(design: Design | None) -> tuple[Any, ...]:
    if design is None:
        return ()
    loads = getattr(design, "loads", None)
    if loads is not None:
        return tuple(loads)
    one = getattr(design, "load", None)
    return (one,) if one is not None else ()


def _loads(circuit: Circuit, design: Design | None) -> list[tuple[str, str, Any]]:
    """(element name, node it hangs on, the design's load or None) for every load."""
    refs = getattr(circuit, "loads", None)
    loads = _design_loads(design)
    if isinstance(refs, list):
        return [(r.name, r.node, loads[r.index] if r.index < len(loads) else None) for r in refs]
    sense = getattr(circuit, "load_sense", None)
    if not sense:
        return []
    name = "BLOAD" if getattr(circuit, "load_kind", None) == "current" else "RLOAD"
    return [(name, circuit.output, loads[0] if loads else None)]


def _text_width(label: str) -> float:
    """Rough width of a label in drawing units (about 0.24 a character at PART_FONT)."""
    return 0.24 * PART_FONT / 15.0 * max((len(line) for line in label.splitlines()), default=0)


def _state(st: Any) -> str:
    """A keyed load's state: its current or resistance."""
    if st is None:
        return "–"
    if getattr(st, "r", None) is not None:
        return eng(st.r, "Ω")
    return eng(getattr(st, "i", None) or 0.0, "A")


@dataclass
class Schematic:
    """A drawn schematic: the picture in both formats and the names of the parts drawn."""

    png: bytes
    svg: bytes
    drawn: list[str] = field(default_factory=list)  # element names, one per symbol, in drawing order
    not_drawn: list[str] = field(default_factory=list)  # user parts this version cannot draw
    labels: dict[str, str] = field(default_factory=dict)  # element name -> its label (name and value)


class _Sheet:
    """A schemdraw drawing plus the bookkeeping of which part each symbol is."""

    def __init__(self, design: Design, circuit: Circuit) -> None:
        import schemdraw
        import schemdraw.elements as elm

        self.elm = elm
        self.d = schemdraw.Drawing(show=False, canvas="matplotlib")
        self.d.config(unit=U, fontsize=PART_FONT, color=INK, lw=1.4, font="DejaVu Sans")
        self.design = design
        self.c = circuit
        self.drawn: list[str] = []
        self.labels: dict[str, str] = {}
        #: Left end of the return wire (node 0) that runs under the filter to the terminal.
        self.rail_start: tuple[float, float] | None = None
        self.named: set[str] = set()
        self.values = {e.name: e for e in circuit.elements}
        #: The rectifier's output node: ``rect``, or ``out`` when there is no filter.
        self.rect = circuit.rectified

    # -- bookkeeping ----------------------------------------------------------------------------

    def add(self, element: Any) -> Any:
        self.d.add(element)
        return element

    def part(self, name: str, element: Any, text: str, loc: str = "top", ofst: Any = None) -> Any:
        """Place one part's symbol with its label; record that it is drawn."""
        if name in self.drawn:
            raise RuntimeError(f"{name} drawn twice")
        self.drawn.append(name)
        self.labels[name] = text
        element.label(text, loc=loc, ofst=ofst, fontsize=PART_FONT)
        return self.add(element)

    def node(self, xy: tuple[float, float], name: str, where: str = "above") -> None:
        """A deck node name, small and grey, beside a junction (once per node)."""
        if name in self.named:
            return
        self.named.add(name)
        dx, dy, ha, va = {"above": (0.0, 0.25, "center", "bottom"), "below": (0.0, -0.3, "center", "top"),
                          "left": (-0.25, 0.0, "right", "center"), "right": (0.25, 0.0, "left", "center"),
                          "above-left": (-0.2, 0.25, "right", "bottom"),
                          "above-right": (0.2, 0.25, "left", "bottom")}[where]
        self.add(self.elm.Label().at((xy[0] + dx, xy[1] + dy)).label(
            name, fontsize=NODE_FONT, color=NODE, halign=ha, valign=va, font="DejaVu Sans"))

    def dot(self, xy: tuple[float, float]) -> None:
        self.add(self.elm.Dot(radius=0.09).at(xy))

    def wire(self, a: tuple[float, float], b: tuple[float, float]) -> None:
        if a != b:
            self.add(self.elm.Line().endpoints(a, b))

    def ground(self, xy: tuple[float, float]) -> None:
        self.add(self.elm.Ground(lead=False).at(xy))

    # -- labels ---------------------------------------------------------------------------------

    def winding_items(self, k: int) -> list[tuple[str, str]]:
        """(name, label) of winding k's EMF, series resistance and leakage, EMF first."""
        s = self.design.source
        wd = next(w for w in self.c.windings if w.name == f"V{k}")
        phase = " (antiphase)" if k == 2 else ""
        kind = getattr(s, "kind", "sine")
        inverter = getattr(s, "inverter", None)
        what = f"inverter, {inverter.waveform}\n" if kind == "inverter" and inverter is not None else ""
        items = [(wd.name, f"{wd.name}\n{what}{eng(wd.vrms, 'V')} rms\n{eng(s.frequency, 'Hz')}{phase}")]
        for r in self.c.resistors:
            if r.name == f"RW{k}":
                items.append((r.name, f"{r.name}\n{eng(r.value, 'Ω')}"))
        for ind in self.c.inductors:
            if ind.name == f"LW{k}":
                items.append((ind.name, f"{ind.name}\n{eng(ind.value, 'H')}"))
        return items

    def diode_label(self, d: DiodeRef) -> str:
        model = self.design.rectifier.diode
        return f"{d.name}\n{model.name if model.name != 'inline' else 'inline model'}"

    def cap_label(self, c: CapRef) -> str:
        esr = next((r.value for r in self.c.resistors if r.role == "esr" and r.name == f"RESR{c.name[1:]}"), 0.0)
        text = f"{c.name}\n{eng(c.value, 'F')}"
        return text + (f"\nESR {eng(esr, 'Ω')}" if esr else "")

    # -- the series chain of a winding ----------------------------------------------------------

    def series(self, start: tuple[float, float], items: list[tuple[str, str]], direction: str,
               loc: str = "top") -> tuple[float, float]:
        """Draw winding parts end to end from ``start`` in ``direction``; returns the end point."""
        elm = self.elm
        here = start
        for name, text in items:
            if name.startswith("V"):
                e = elm.SourceSin()
            elif name.startswith("L"):
                e = elm.Inductor2(loops=3)
            else:
                e = elm.Resistor()
            e = getattr(e.at(here), direction)()
            self.part(name, e, text, loc=loc)
            here = tuple(e.end)  # type: ignore[assignment]
        return here

    # -- rectifiers: each returns (rect point, return level y) ----------------------------------

    def diode_by_nodes(self, anode: str, cathode: str) -> DiodeRef:
        return next(d for d in self.c.diodes if d.anode == anode and d.cathode == cathode)

    def half_wave(self) -> tuple[tuple[float, float], float]:
        elm = self.elm
        items = self.winding_items(1)
        v = self.part(items[0][0], elm.SourceSin().at((0, 0)).up(), items[0][1], loc="bottom")
        self.ground((0, 0))
        self.rail_start = (0.0, 0.0)
        here = self.series(tuple(v.end), items[1:], "right")
        self.node(here, "ac1", "above")
        d1 = self.diode_by_nodes("ac1", self.rect)
        e = self.part(d1.name, elm.Diode().at(here).right(), self.diode_label(d1))
        return tuple(e.end), 0.0  # type: ignore[return-value]

    def centre_tap(self) -> tuple[tuple[float, float], float]:
        elm = self.elm
        ends = []
        for k, (sign, loc) in ((1, (1, "top")), (2, (-1, "bottom"))):
            items = self.winding_items(k)
            v = elm.SourceSin().at((0, 0))
            v = v.up() if sign > 0 else v.down()
            self.part(items[0][0], v, items[0][1], loc="bottom" if sign > 0 else "top")
            here = self.series(tuple(v.end), items[1:], "right", loc=loc)
            ends.append((k, here))
        self.dot((0, 0))
        self.wire((0, 0), (-1.2, 0))
        self.ground((-1.2, 0))
        self.node((0, 0), "centre tap (node 0)", "right")
        x = max(p[0] for _k, p in ends)
        tops = []
        for k, here in ends:
            self.wire(here, (x, here[1]))
            node = f"ac{k}"
            self.node((x, here[1]), node, "above" if k == 1 else "below")
            d = self.diode_by_nodes(node, self.rect)
            e = self.part(d.name, elm.Diode().at((x, here[1])).right(), self.diode_label(d),
                          loc="top" if k == 1 else "bottom")
            tops.append(tuple(e.end))
        (x1, y1), (_x2, y2) = tops
        self.wire((x1, y2), (x1, y1))
        self.dot((x1, y1))
        return (x1, y1), 0.0

    def legs(self, second: str) -> tuple[tuple[float, float], float]:
        """Bridge (``second="bridge"``) and full-wave doubler (``second="doubler"``).

        Left leg: diodes from the return up to ``ac1`` and from ``ac1`` up to ``rect``.  The
        winding runs from ``ac1`` to the right leg's middle (``ac2`` or ``mid``); the right
        leg holds the other two diodes (bridge) or the two stage capacitors (doubler).
        """
        elm = self.elm
        xa = 0.0
        d_low = self.diode_by_nodes("0", "ac1")
        d_high = self.diode_by_nodes("ac1", self.rect)
        self.part(d_low.name, elm.Diode().at((xa, 0)).up(), self.diode_label(d_low), loc="bottom")
        self.part(d_high.name, elm.Diode().at((xa, U)).up(), self.diode_label(d_high), loc="bottom")
        self.dot((xa, U))
        self.node((xa, U), "ac1", "above-right")
        items = self.winding_items(1)
        chain = [*list(reversed(items[1:])), items[0]]
        gap = 1.4
        self.wire((xa, U), (xa + gap, U))
        here = self.series((xa + gap, U), chain, "right")
        # Room between the EMF's label (centred on it) and the labels at the left of the right leg.
        right_labels = ([self.diode_label(d) for d in self.c.diodes if d.anode == "ac2" or d.cathode == "ac2"]
                        if second == "bridge" else
                        [self.cap_label(c) for c in self.c.capacitors if c.role == "stage"])
        need = _text_width(chain[-1][1]) / 2 - U / 2 + max((_text_width(t) for t in right_labels), default=0) + 0.4
        xb = here[0] + max(gap, need)
        self.wire(here, (xb, U))
        self.dot((xb, U))
        if second == "bridge":
            self.node((xb, U), "ac2", "above-left")
            r_low = self.diode_by_nodes("0", "ac2")
            r_high = self.diode_by_nodes("ac2", self.rect)
            self.part(r_low.name, elm.Diode().at((xb, 0)).up(), self.diode_label(r_low), loc="top")
            self.part(r_high.name, elm.Diode().at((xb, U)).up(), self.diode_label(r_high), loc="top")
            self.dot((xb, 0))
        else:
            self.node((xb, U), "mid", "above-left")
            upper = next(c for c in self.c.capacitors if c.role == "stage" and c.minus == "mid")
            lower = next(c for c in self.c.capacitors if c.role == "stage" and c.plus == "mid")
            self.part(upper.name, elm.Capacitor(polar=True).at((xb, 2 * U)).down(), self.cap_label(upper), loc="top")
            self.part(lower.name, elm.Capacitor(polar=True).at((xb, U)).down(), self.cap_label(lower), loc="top")
            self.dot((xb, 0))
        self.wire((xa, 2 * U), (xb, 2 * U))
        self.dot((xa, 0))
        self.ground((xa, 0))
        self.rail_start = (xa, 0.0)
        self.dot((xb, 2 * U))
        return (xb, 2 * U), 0.0

    def cascade(self) -> tuple[tuple[float, float], float]:
        """Pump column along the top (``p0`` ... ``pn``), output column along the bottom (``0``,
        ``s1`` ... ``rect``); diodes zig-zag between them."""
        elm = self.elm
        n = self.design.rectifier.stages
        height = 4.5
        step = 5.0
        items = self.winding_items(1)
        self.part(items[0][0], elm.SourceSin().at((0, 0)).up().length(height), items[0][1], loc="bottom")
        here = self.series((0.0, height), items[1:], "right")
        x0 = here[0] + 1.0
        self.wire(here, (x0, height))
        self.wire((0, 0), (x0, 0))
        self.ground((0, 0))
        self.node((x0, height), "p0", "above")
        pos: dict[str, tuple[float, float]] = {"p0": (x0, height), "0": (x0, 0.0)}
        for k in range(1, n + 1):
            pos[f"p{k}"] = (x0 + k * step, height)
            pos[self.rect if k == n else f"s{k}"] = (x0 + k * step, 0.0)
        stage = [c for c in self.c.capacitors if c.role == "stage"]
        for c in stage:
            a, b = pos[c.plus], pos[c.minus]
            top = a[1] > 0
            self.part(c.name, elm.Capacitor(polar=True).endpoints(a, b), self.cap_label(c),
                      loc="top" if top else "bottom")
        for d in self.c.diodes:
            a, b = pos[d.anode], pos[d.cathode]
            vertical = a[0] == b[0]
            e = elm.Diode().endpoints(a, b)
            self.part(d.name, e, self.diode_label(d), loc="bottom", ofst=None if vertical else (0.0, -0.5))
        for name, xy in pos.items():
            if name in ("p0", "0"):
                continue
            self.dot(xy)
            self.node(xy, name, "above" if xy[1] > 0 else "below")
        self.dot((x0, 0.0))
        return pos[self.rect], -U

    # -- filter, load, bleeder ------------------------------------------------------------------

    def ladder(self, start: tuple[float, float], ground_y: float) -> tuple[float, float]:
        """Walk the circuit from node ``rect`` to ``out``; returns the output point."""
        elm = self.elm
        c = self.c
        node = self.rect
        here = start
        self.node(here, node, "above")
        spacing = 3.2
        visited = set()
        while node not in visited:
            visited.add(node)
            shunts: list[tuple[str, Any, str]] = []
            for cap in c.capacitors:
                if cap.role in ("reservoir", "filter") and cap.plus == node and cap.minus == "0":
                    shunts.append((cap.name, elm.Capacitor(polar=True), self.cap_label(cap)))
            if node == c.output:
                for r in c.resistors:
                    if r.role == "bleeder":
                        shunts.append((r.name, elm.Resistor(), f"{r.name}\nbleeder\n{eng(r.value, 'Ω')}"))
            for name, at, ld in _loads(c, self.design):
                if at == node:
                    shunts.append(self.load_symbol(name, ld))
            for name, e, text in shunts:
                # Room for the label at the symbol's right: about 0.24 drawing units a character.
                width = max(spacing, 1.1 + _text_width(text))
                nxt = (here[0] + spacing * 0.5, here[1])
                self.wire(here, nxt)
                self.dot(nxt)
                e = e.at(nxt).down().length(nxt[1] - ground_y)
                self.part(name, e, text, loc="bottom", ofst=(0.0, 0.35) if name.startswith("C") else None)
                self.dot((nxt[0], ground_y))
                if self.rail_start is None:
                    self.rail_start = (nxt[0], ground_y)
                    self.ground(self.rail_start)
                here = (nxt[0] + width - spacing * 0.5, nxt[1])
                self.wire(nxt, here)
            series = [x for x in c.inductors if x.role == "choke" and x.a == node]
            series_r = [x for x in c.resistors if x.role == "filter" and x.a == node]
            if series:
                ind = series[0]
                text = f"{ind.name}\n{eng(ind.value, 'H')}" + (f"\nDCR {eng(ind.dcr, 'Ω')}" if ind.dcr else "")
                e = self.part(ind.name, elm.Inductor2(loops=4).at(here).right(), text)
                node = ind.b
            elif series_r:
                r = series_r[0]
                e = self.part(r.name, elm.Resistor().at(here).right(), f"{r.name}\n{eng(r.value, 'Ω')}")
                node = r.b
            else:
                break
            here = tuple(e.end)  # type: ignore[assignment]
            self.dot(here)
            self.node(here, node, "above")
        return here

    def load_symbol(self, name: str, ld: Any) -> tuple[str, Any, str]:
        """Symbol and label of a load: a resistor, or a current sink with what it draws."""
        elm = self.elm
        kind = getattr(ld, "kind", "resistor" if name.startswith("R") else "current")
        if kind == "resistor" and getattr(ld, "r", None) is not None:
            return name, elm.Resistor(), f"{name}\nload\n{eng(ld.r, 'Ω')}"
        if kind == "current" and getattr(ld, "i", None) is not None:
            return name, elm.SourceI(), f"{name}\nload\n{eng(ld.i, 'A')}"
        if kind == "tube" and getattr(ld, "tube_i", None):
            return name, elm.SourceI(), f"{name}\ntube load\n{eng(ld.tube_i, 'A')} at {eng(ld.tube_v, 'V')}"
        if kind == "keyed":
            down, up = getattr(ld, "down", None), getattr(ld, "up", None)
            return name, elm.SourceI(), f"{name}\nkeyed load\ndown {_state(down)}\nup {_state(up)}"
        if kind == "steps" and getattr(ld, "steps", None):
            top = max(i for _t, i in ld.steps)
            return name, elm.SourceI(), f"{name}\nstepped load\nup to {eng(top, 'A')}"
        value = self.values.get(name)
        return name, elm.Resistor() if name.startswith("R") else elm.SourceI(), \
            f"{name}\nload" + (f"\n{value.value}" if value is not None and name.startswith("R") else "")

    def terminals(self, here: tuple[float, float], ground_y: float) -> None:
        elm = self.elm
        end = (here[0] + 1.5, here[1])
        self.wire(here, end)
        self.add(elm.Dot(open=True, radius=0.14).at(end).label("+ out", loc="right", fontsize=PART_FONT))
        low = (end[0], ground_y)
        self.add(elm.Dot(open=True, radius=0.14).at(low).label("− return (0)", loc="right", fontsize=PART_FONT))
        if self.rail_start is None:
            self.rail_start = (low[0] - 1.0, ground_y)
            self.ground(self.rail_start)
        self.wire(self.rail_start, low)


def draw_schematic(design: Design, circuit: Circuit) -> Schematic:
    """Draw a design's schematic.

    Parameters
    ----------
    design : Design
        The design (topology, filter, load, source values).
    circuit : Circuit
        Its circuit from :func:`simkit.netlist.build.build_circuit`: names and values.

    Returns
    -------
    Schematic
        PNG and SVG bytes (repeatable), the names drawn, and any user part not drawn.
    """
    from simkit.report.plots import figure_bytes, house_style

    with house_style():
        sheet = _Sheet(design, circuit)
        topo = design.rectifier.topology
        if topo == "half-wave":
            rect, ground_y = sheet.half_wave()
        elif topo == "centre-tap":
            rect, ground_y = sheet.centre_tap()
        elif topo in ("bridge", "doubler"):
            rect, ground_y = sheet.legs(topo)
        elif topo == "cascade":
            rect, ground_y = sheet.cascade()
        else:  # pragma: no cover - the loader refuses other names
            raise ValueError(topo)
        out = sheet.ladder(rect, ground_y)
        sheet.terminals(out, ground_y)
        fig = sheet.d.draw(show=False).getfig()
        fig.set_dpi(100)
        png, svg = figure_bytes(fig, tight=True)
    wanted = user_parts(circuit)
    return Schematic(png, svg, list(sheet.drawn), [n for n in wanted if n not in sheet.drawn], dict(sheet.labels))
