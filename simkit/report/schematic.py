"""The schematic of a design, drawn from its circuit: one symbol for every part a builder buys,
each labelled with its name (as in the deck and the parts table) and its value.

Drawn: the winding (EMF ``V1``..., series resistance ``RW1``..., leakage ``LW1``...; an
inverter with the battery behind it), the rectifier diodes, or a vacuum rectifier as a tube
(envelope, plates, cathode or filament, heater leads; a full-wave tube's two plates in one
envelope), the RC snubbers simkit adds where inductance feeds the diodes (``CSW``/``RSW``
across a winding, ``CSR``/``RSR`` at a choke input: they are real parts to fit, labelled
"added by simkit"), the design's own snubbers (``CSS``/``RSS`` across a winding in the same
place, ``CSD``/``RSD`` beside each diode on a parallel line, labelled "design"), stage,
reservoir and filter capacitors (ESR in the label), balancing resistors, chokes (DCR in
the label), filter resistors, the regulator (shunt: the dropping resistor and the zener
string or glow tubes; series: the pass MOSFET, the reference zener with its resistor, the
reference RC filter, the gate stopper and the gate-source zener), every load at its node,
and the bleeder.  Not drawn, because they exist only for the numerics: the 10 MΩ ties
``RT*``, the 0 V current senses, and the behavioural sources that model a part drawn as one
symbol (the inverter's waveform and battery, the glow tube's strike switch).  Any other deck
element is listed in :attr:`Schematic.not_drawn`, never left out in silence.

Layout: the rectifier block at the left, then the filter as a ladder from the rectifier's
output to the output terminals: series parts along the top line with their labels above,
shunt parts down to the return (node 0) with their labels at their right.  Every label is
measured (matplotlib's text extents) and placed where it touches no other label, symbol or
wire; columns are laid out left to right so each starts after everything before it.

This module and :mod:`simkit.report.plots` are the only ones that load matplotlib (here
through schemdraw), and only when a schematic is drawn.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import cache
from typing import Any

from simkit.design.model import Design
from simkit.netlist.build import DIODE_SNUBBER, SOURCE_SNUBBER
from simkit.netlist.circuit import CapRef, Circuit, DiodeRef
from simkit.units import eng

INK = "#1d232b"
NODE = "#6b7580"
PART_FONT = 15.0
NODE_FONT = 12.0
#: Length of a two-terminal symbol, drawing units.
U = 3.0
#: Drawing scale: inches per drawing unit (schemdraw's default), and so points per unit.
INCHES_PER_UNIT = 0.5
PT_PER_UNIT = 72.0 * INCHES_PER_UNIT
#: Clear space between a symbol and its label, drawing units.
PAD = 0.25
#: Least clear space between two labels, and between a label and a symbol or wire.
GAP_TEXT = 0.15
GAP_LINE = 0.08
#: Space between columns of the ladder.
COLUMN_GAP = 0.6
#: A ladder wider than this (drawing units) goes on in a new row below, so the printed text stays legible.
ROW_LIMIT = 36.0
#: About how wide a series regulator is drawn: it starts a new row rather than cross the limit.
REGULATOR_WIDTH = 20.0

#: Deck elements that exist only for the numerics (by name prefix): never parts, never drawn.
HELPER_PREFIXES: tuple[str, ...] = ("RT", "VD", "VC", "VLOAD", "RESR", "RDCR", "VPASS", "VSHUNT", "VWAVE",
                                    "VHEAT", "VWARM", "VSTEP", "VKEY")
#: Deck elements that model part of one drawn symbol: the inverter's battery and loss model
#: (drawn as the inverter ``V1``) and the glow tube's strike switch and law (drawn as ``GLOW``).
MODEL_OF: dict[str, str] = {
    "BPOUT": "V1", "RPOUT": "V1", "CPOUT": "V1", "BPIN": "V1", "BVT": "V1", "BIB": "V1", "RBPIN": "V1",
    "RBVT": "V1", "RBIB": "V1", "BSCALE": "V1", "RBSCALE": "V1",
    "SGLOW": "GLOW", "BGLOW": "GLOW", "RGLOW": "GLOW", "RGLC": "GLOW", "CGLC": "GLOW",
}


def helper_element(name: str) -> bool:
    """True for deck elements that exist only for the numerics (ties, 0 V senses, ESR and DCR
    resistors, which the schematic shows in their capacitor's or choke's label, drive sources)."""
    return name.startswith(HELPER_PREFIXES)


def part_of(circuit: Circuit, name: str) -> str | None:
    """The symbol a deck element belongs to (its name, or the part it models), or None for a helper."""
    if name in MODEL_OF:
        return MODEL_OF[name]
    if re.fullmatch(r"BEMF\d+", name):
        return "V" + name[4:]
    if re.fullmatch(r"BD\d+", name):
        return name[1:]
    if re.fullmatch(r"V\d+", name):
        return name  # a winding's EMF, or the current sense of an inverter output drawn as that winding
    if re.fullmatch(r"RSH\d+", name):
        return "D" + name[3:]  # the sharing resistors of a diode string: drawn with the string's label
    if re.fullmatch(r"(VH|RWH|RH)\d+", name):
        return "V1"  # heater windings and their heaters: part of the transformer, drawn as its winding
    if re.fullmatch(r"RW\d+", name) and not any(r.name == name for r in circuit.resistors):
        return None  # the 0 ohm link of a winding given no resistance
    if helper_element(name):
        return None
    return name


def user_parts(circuit: Circuit) -> list[str]:
    """The parts a schematic must draw, one symbol each (a tube's plates one name each), in deck
    order: every deck element except the helpers, models folded into the part they model."""
    names: list[str] = []
    for e in circuit.elements:
        p = part_of(circuit, e.name)
        if p is not None and p not in names:
            names.append(p)
    return names




def _loads(circuit: Circuit, design: Design | None) -> list[tuple[str, str, Any]]:
    """(element name, node it hangs on, the design's load or None) for every load."""
    loads = design.loads if design is not None else ()
    return [(r.name, r.node, loads[r.index] if r.index < len(loads) else None) for r in circuit.loads]


def _state(st: Any) -> str:
    """A keyed load's state: its current or resistance."""
    if st is None:
        return "–"
    if getattr(st, "r", None) is not None:
        return eng(st.r, "Ω")
    return eng(getattr(st, "i", None) or 0.0, "A")


@dataclass
class Schematic:
    """A drawn schematic: the picture in both formats and what it shows."""

    png: bytes
    svg: bytes
    drawn: list[str] = field(default_factory=list)  # part names, one per part, in drawing order
    not_drawn: list[str] = field(default_factory=list)  # parts of the deck this version cannot draw
    labels: dict[str, str] = field(default_factory=dict)  # part name -> its label (name and value)
    #: One entry per symbol: its kind ("resistor", "capacitor", "diode", "tube", ...) and the parts it is.
    symbols: list[tuple[str, tuple[str, ...]]] = field(default_factory=list)
    #: Every text of the picture with its extent (x0, y0, x1, y1) in the drawn figure's pixels, as matplotlib
    #: lays it out.
    text_boxes: list[tuple[str, tuple[float, float, float, float]]] = field(default_factory=list)


@dataclass(frozen=True)
class Box:
    """An axis-aligned box in drawing units."""

    x0: float
    y0: float
    x1: float
    y1: float

    def hits(self, other: Box, gap: float = 0.0) -> bool:
        return (self.x0 < other.x1 + gap and other.x0 < self.x1 + gap
                and self.y0 < other.y1 + gap and other.y0 < self.y1 + gap)

    @property
    def cx(self) -> float:
        return (self.x0 + self.x1) / 2

    @property
    def cy(self) -> float:
        return (self.y0 + self.y1) / 2


Pt = tuple[float, float]


# -- text extents -------------------------------------------------------------------------------


@cache
def _measure(text: str, size: float) -> tuple[float, float]:
    """Width and height of a text as schemdraw draws it (line spacing 1), in drawing units."""
    w, h = _text_extent_pt(text, size)
    return w / PT_PER_UNIT, h / PT_PER_UNIT


@cache
def _measuring_figure() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(dpi=72)
    FigureCanvasAgg(fig)
    return fig


def _text_extent_pt(text: str, size: float) -> tuple[float, float]:
    fig = _measuring_figure()
    t = fig.text(0, 0, text, fontsize=size, family="DejaVu Sans", linespacing=1)
    try:
        bb = t.get_window_extent(fig.canvas.get_renderer())
    finally:
        t.remove()
    return float(bb.width), float(bb.height)


# -- symbols schemdraw does not have ------------------------------------------------------------


@cache
def _custom() -> dict[str, Any]:
    """Our own symbols (a vacuum rectifier, a glow-discharge tube, a plain text), made once."""
    from schemdraw.elements import Element
    from schemdraw.segments import Segment, SegmentCircle, SegmentText

    class RectifierTube(Element):
        """A vacuum rectifier drawn upright: plate(s) at the top, cathode lead at the bottom.

        Anchors ``anode1`` (and ``anode2``), ``cathode``, ``heat1`` and ``heat2`` (the
        heater or filament terminals).  A directly heated tube's filament is its cathode:
        the cathode lead leaves from the filament.
        """

        R = 1.1
        LEAD = 0.4

        def __init__(self, plates: int = 1, direct: bool = False, **kwargs: Any) -> None:
            super().__init__(**kwargs)
            R, lead = self.R, self.LEAD
            k = R / 0.85  # the geometry below is drawn for a radius of 0.85
            top = R + lead
            self.segments.append(SegmentCircle((0, 0), R))
            xs = (0.0,) if plates == 1 else (-0.3 * k, 0.3 * k)
            half = (0.3 if plates == 1 else 0.22) * k
            for n, x in enumerate(xs, start=1):
                self.segments.append(Segment([(x - half, 0.35 * k), (x + half, 0.35 * k)], lw=2.4))
                self.segments.append(Segment([(x, 0.35 * k), (x, top)]))
                self.anchors[f"anode{n}"] = (x, top)
            low = -(R + 0.25)
            if direct:
                # Filament (the cathode): an inverted V whose left leg carries the cathode lead.
                self.segments.append(Segment([(0.0, low), (0.0, -0.45 * k), (0.3 * k, -0.05 * k),
                                              (0.6 * k, -0.45 * k), (0.6 * k, low)], lw=1.8))
                self.segments.append(Segment([(0.0, low), (0.0, -top)]))
                self.segments.append(Segment([(0.0, low), (-0.45 * k, low)]))
                self.segments.append(SegmentCircle((0.0, low), 0.07, fill=True))
                heat = ((-0.45 * k, low), (0.6 * k, low))
            else:
                self.segments.append(Segment([(-0.35 * k, -0.05 * k), (0.35 * k, -0.05 * k)], lw=2.4))
                self.segments.append(Segment([(0.0, -0.05 * k), (0.0, -top)]))
                self.segments.append(Segment([(0.25 * k, low), (0.25 * k, -0.5 * k), (0.425 * k, -0.25 * k),
                                              (0.6 * k, -0.5 * k), (0.6 * k, low)], lw=1.8))
                heat = ((0.25 * k, low), (0.6 * k, low))
            for n, xy in enumerate(heat, start=1):
                self.segments.append(SegmentCircle(xy, 0.08, fill="white"))
                self.anchors[f"heat{n}"] = xy
            self.anchors["cathode"] = (0.0, -top)
            self.anchors["centre"] = (0.0, 0.0)

    class GlowTube(Element):
        """A glow-discharge regulator tube, upright: anode at the top, cold cathode at the bottom,
        the dot of a gas-filled envelope.  Anchors ``anode``, ``cathode``."""

        R = 0.6

        def __init__(self, **kwargs: Any) -> None:
            super().__init__(**kwargs)
            R = self.R
            self.segments.append(SegmentCircle((0, 0), R))
            self.segments.append(Segment([(-0.25, 0.22), (0.25, 0.22)], lw=2.2))
            self.segments.append(Segment([(0, 0.22), (0, R + 0.3)]))
            self.segments.append(Segment([(-0.25, -0.22), (0.25, -0.22)], lw=2.2))
            self.segments.append(Segment([(0, -0.22), (0, -(R + 0.3))]))
            self.segments.append(SegmentCircle((0.32, 0.0), 0.07, fill=True))
            self.anchors["anode"] = (0, R + 0.3)
            self.anchors["cathode"] = (0, -(R + 0.3))
            self.anchors["centre"] = (0.0, 0.0)

    class Text(Element):
        """A text whose anchor point and alignment are exactly as given."""

        def __init__(self, text: str, halign: str, valign: str, size: float, color: str, **kwargs: Any) -> None:
            super().__init__(**kwargs)
            self.segments.append(SegmentText((0, 0), text, align=(halign, valign), fontsize=size, color=color,
                                             font="DejaVu Sans"))

    return {"RectifierTube": RectifierTube, "GlowTube": GlowTube, "Text": Text}


# -- the drawing ---------------------------------------------------------------------------------


class _Sheet:
    """A schemdraw drawing, the boxes of everything on it, and which part each symbol is."""

    def __init__(self, design: Design, circuit: Circuit) -> None:
        import schemdraw
        import schemdraw.elements as elm

        self.elm = elm
        self.cls = _custom()
        self.d = schemdraw.Drawing(show=False, canvas="matplotlib")
        self.d.config(unit=U, inches_per_unit=INCHES_PER_UNIT, fontsize=PART_FONT, color=INK, lw=1.4,
                      font="DejaVu Sans")
        self.design = design
        self.c = circuit
        self.drawn: list[str] = []
        self.labels: dict[str, str] = {}
        self.symbols: list[tuple[str, tuple[str, ...]]] = []
        self.texts: list[Box] = []
        self.bodies: list[Box] = []
        self.wires: list[Box] = []
        self.named: set[str] = set()
        #: The rectifier's output node: ``rect``, or the filter's end when there is no filter.
        self.rect = circuit.rectified
        self.vacuum = design.rectifier.diode.is_vacuum
        #: Where the return wire (node 0) starts, and its height.
        self.rail_start: Pt | None = None
        self.rail_end = -math.inf  # the last shunt's x on the current row
        self.ladder_height = U  # what the filter and regulator need between the top line and the return
        self.rail_y = 0.0
        #: Labels waiting for every symbol of a block to be drawn (None: labels go on at once).
        self.deferred: list[Any] | None = None

    # -- bookkeeping ----------------------------------------------------------------------------

    def add(self, element: Any) -> Any:
        self.d.add(element)
        return element

    def record(self, names: Sequence[str], kind: str, text: str) -> None:
        for n in names:
            if n in self.drawn:
                raise RuntimeError(f"{n} drawn twice")
            self.drawn.append(n)
            self.labels[n] = text
        self.symbols.append((kind, tuple(names)))

    def free(self, box: Box) -> bool:
        return (not any(box.hits(b, GAP_TEXT) for b in self.texts)
                and not any(box.hits(b, GAP_LINE) for b in self.bodies)
                and not any(box.hits(b, GAP_LINE) for b in self.wires))

    def frontier(self, y0: float = -math.inf, y1: float = math.inf) -> float:
        """The right edge of everything drawn so far in the band between ``y0`` and ``y1``
        (open: a wire along either edge does not count)."""
        band = Box(-math.inf, y0 + 1e-6, math.inf, y1 - 1e-6)
        xs = [b.x1 for b in (*self.texts, *self.bodies, *self.wires) if b.hits(band)]
        return max(xs, default=-math.inf)

    def text(self, text: str, xy: Pt, halign: str, valign: str, size: float = PART_FONT,
             color: str = INK) -> Box:
        """Put a text with its anchor exactly at ``xy``; returns (and remembers) its box."""
        w, h = _measure(text, size)
        x0 = {"left": xy[0], "center": xy[0] - w / 2, "right": xy[0] - w}[halign]
        y0 = {"bottom": xy[1], "center": xy[1] - h / 2, "top": xy[1] - h}[valign]
        box = Box(x0, y0, x0 + w, y0 + h)
        self.add(self.cls["Text"](text, halign, valign, size, color).at(xy))
        self.texts.append(box)
        return box

    def label(self, text: str, body: Box, sides: Iterable[str] = ("right",), size: float = PART_FONT,
              color: str = INK, pad: float = PAD) -> Box | None:
        """Put a label beside a symbol's body: on the first side where it touches nothing, moving
        outward step by step when every side is taken.  While ``deferred`` holds a list, the label
        waits there (placed by :meth:`flush`, after every symbol of a block is drawn)."""
        if self.deferred is not None:
            sides = tuple(sides)
            self.deferred.append(lambda: self.label(text, body, sides, size, color, pad))
            return None
        w, h = _measure(text, size)
        sides = tuple(sides)

        def spot(side: str, off: float) -> tuple[Pt, str, str]:
            if side == "right":
                return (body.x1 + off, body.cy), "left", "center"
            if side == "left":
                return (body.x0 - off, body.cy), "right", "center"
            if side == "above":
                return (body.cx, body.y1 + off), "center", "bottom"
            if side == "below":
                return (body.cx, body.y0 - off), "center", "top"
            if side == "above-right":
                return (body.x1 + off, body.y1 + off), "left", "bottom"
            if side == "below-right":
                return (body.x1 + off, body.y0 - off), "left", "top"
            if side == "above-left":
                return (body.x0 - off, body.y1 + off), "right", "bottom"
            if side == "below-left":
                return (body.x0 - off, body.y0 - off), "right", "top"
            raise ValueError(side)

        def box_at(xy: Pt, ha: str, va: str) -> Box:
            x0 = {"left": xy[0], "center": xy[0] - w / 2, "right": xy[0] - w}[ha]
            y0 = {"bottom": xy[1], "center": xy[1] - h / 2, "top": xy[1] - h}[va]
            return Box(x0, y0, x0 + w, y0 + h)

        first = spot(sides[0], pad)
        for step in range(60):
            for slide in (0.0, 0.3, -0.3, 0.6, -0.6, 0.9, -0.9):
                for side in sides:
                    (x, y), ha, va = spot(side, pad + 0.2 * step)
                    if side in ("right", "left"):
                        y += slide
                    else:
                        x += slide
                    if self.free(box_at((x, y), ha, va)):
                        return self.text(text, (x, y), ha, va, size, color)
        return self.text(text, first[0], first[1], first[2], size, color)  # pragma: no cover - a full sheet

    def defer(self) -> None:
        """Hold every label from now on until :meth:`flush`."""
        self.deferred = []

    def flush(self) -> None:
        pending, self.deferred = self.deferred or [], None
        for place in pending:
            place()

    def body_box(self, element: Any, a: Pt, b: Pt) -> Box:
        """The box of a two-terminal symbol's body (without its leads) placed from ``a`` to ``b``."""
        bb = element.get_bbox(transform=False, includetext=True)
        length = bb.xmax - bb.xmin
        half_w = max(abs(bb.ymin), abs(bb.ymax))
        cx, cy = (a[0] + b[0]) / 2, (a[1] + b[1]) / 2
        ang = math.atan2(b[1] - a[1], b[0] - a[0])
        dx = abs(math.cos(ang)) * length / 2 + abs(math.sin(ang)) * half_w
        dy = abs(math.sin(ang)) * length / 2 + abs(math.cos(ang)) * half_w
        return Box(cx - dx, cy - dy, cx + dx, cy + dy)

    def two(self, names: Sequence[str], kind: str, element: Any, a: Pt, b: Pt, text: str,
            sides: Iterable[str] = ("right",)) -> Box:
        """A two-terminal symbol from ``a`` to ``b`` with its label; returns the body's box."""
        body = self.body_box(element, a, b)
        self.add(element.endpoints(a, b))
        self.bodies.append(body)
        self._lead_boxes(a, b, body)
        self.label(text, body, sides)
        self.record(names, kind, text)
        return body

    def _lead_boxes(self, a: Pt, b: Pt, body: Box) -> None:
        """Leads of a two-terminal symbol, as wires outside its body."""
        if a[0] == b[0] or a[1] == b[1]:
            lo = (min(a[0], b[0]), min(a[1], b[1]))
            hi = (max(a[0], b[0]), max(a[1], b[1]))
            if a[0] == b[0]:
                self.wires += [Box(lo[0], lo[1], lo[0], body.y0), Box(lo[0], body.y1, lo[0], hi[1])]
            else:
                self.wires += [Box(lo[0], lo[1], body.x0, lo[1]), Box(body.x1, lo[1], hi[0], lo[1])]
            return
        self._diagonal(a, b, skip=body)

    def _diagonal(self, a: Pt, b: Pt, skip: Box | None = None) -> None:
        n = max(2, int(math.hypot(b[0] - a[0], b[1] - a[1]) / 0.25))
        for k in range(n):
            p = (a[0] + (b[0] - a[0]) * (k + 0.5) / n, a[1] + (b[1] - a[1]) * (k + 0.5) / n)
            box = Box(p[0] - 0.2, p[1] - 0.2, p[0] + 0.2, p[1] + 0.2)
            if skip is None or not box.hits(skip):
                self.wires.append(box)

    def wire(self, *points: Pt, draw: bool = True) -> None:
        """A wire through the points, each leg horizontal, vertical or straight (``draw=False``:
        only keep its place free of labels, for a line a symbol draws itself)."""
        for a, b in itertools.pairwise(points):
            if a == b:
                continue
            if draw:
                self.add(self.elm.Line().endpoints(a, b))
            if a[0] == b[0] or a[1] == b[1]:
                self.wires.append(Box(min(a[0], b[0]), min(a[1], b[1]), max(a[0], b[0]), max(a[1], b[1])))
            else:
                self._diagonal(a, b)

    def dot(self, xy: Pt) -> None:
        self.add(self.elm.Dot(radius=0.09).at(xy))
        self.bodies.append(Box(xy[0] - 0.09, xy[1] - 0.09, xy[0] + 0.09, xy[1] + 0.09))

    def ground(self, xy: Pt) -> None:
        self.add(self.elm.Ground(lead=False).at(xy))
        self.bodies.append(Box(xy[0] - 0.3, xy[1] - 0.3, xy[0] + 0.3, xy[1]))

    def node(self, xy: Pt, name: str, where: str = "above") -> None:
        """A deck node name, small and grey, beside a junction (once per node)."""
        if name in self.named:
            return
        self.named.add(name)
        spot = Box(xy[0] - 0.1, xy[1] - 0.1, xy[0] + 0.1, xy[1] + 0.1)
        order = (where, *[w for w in ("above", "above-right", "above-left", "below-right", "below-left", "right",
                                      "left", "below")
                          if w != where])
        self.label(name, spot, order, size=NODE_FONT, color=NODE, pad=0.12)

    # -- labels ---------------------------------------------------------------------------------

    def winding_items(self, k: int) -> list[tuple[str, str, str]]:
        """(name, kind, label) of winding k's EMF, series resistance and leakage, EMF first."""
        s = self.design.source
        wd = next(w for w in self.c.windings if w.name == f"V{k}")
        phase = "\n(antiphase)" if k == 2 else ""
        inverter = getattr(s, "inverter", None)
        what = f"inverter, {inverter.waveform}\n" if inverter is not None else ""
        battery = getattr(self.design, "battery", None)
        fed = f"\nfrom {eng(battery.voltage, 'V')} battery" if battery is not None and inverter is not None else ""
        tr = getattr(s, "transformer", None)
        if k == 1 and tr is not None and tr.heaters:  # the heater windings on the same core (VH1, ...)
            fed += "".join(f"\nheaters {eng(h.vrms, 'V')} {eng(h.i, 'A')}" for h in tr.heaters)
        items = [(wd.name, "source", f"{wd.name}\n{what}{eng(wd.vrms, 'V')} rms\n{eng(s.frequency, 'Hz')}{phase}{fed}")]
        for r in self.c.resistors:
            if r.name == f"RW{k}":
                items.append((r.name, "resistor", f"{r.name}\n{eng(r.value, 'Ω')}"))
        for ind in self.c.inductors:
            if ind.name == f"LW{k}":
                items.append((ind.name, "inductor", f"{ind.name}\n{eng(ind.value, 'H')}"))
        return items

    def diode_label(self, names: Sequence[str]) -> str:
        model = self.design.rectifier.diode
        if not self.vacuum:
            rect = self.design.rectifier
            name = model.name if model.name != 'inline' else 'inline model'
            if rect.series > 1:  # a string: how many, and its sharing resistors
                name = f"{rect.series} x {name}" + (f"\n{eng(rect.sharing, 'Ω')} across each" if rect.sharing else "")
            return f"{', '.join(names)}\n{name}"
        from simkit.parts.tubes import lookup

        part = lookup(model.name)
        vac = model.vacuum
        direct = bool(vac and vac.directly_heated)
        heater = "filament" if direct else "heater"
        found = re.search(r"heated ([\d.]+ V [\d.]+ A)", part.description) if part is not None else None
        rating = f"{heater} {found.group(1)}" if found else f"{'directly' if direct else 'indirectly'} heated"
        name = model.name if part is not None else "vacuum plate\n(inline model)"
        return f"{', '.join(names)}\n{name}\n{rating}"

    def cap_label(self, c: CapRef, extra: str = "") -> str:
        esr = next((r.value for r in self.c.resistors if r.role == "esr" and r.name == f"RESR{c.name[1:]}"), 0.0)
        text = f"{c.name}\n{eng(c.value, 'F')}" + (f"\nESR {eng(esr, 'Ω')}" if esr else "")
        return text + (f"\n{extra}" if extra else "")

    # -- elements by kind -----------------------------------------------------------------------

    def element(self, kind: str) -> Any:
        elm = self.elm
        return {"source": lambda: elm.SourceSin(), "resistor": lambda: elm.Resistor(),
                "inductor": lambda: elm.Inductor2(loops=3), "choke": lambda: elm.Inductor2(loops=4),
                "capacitor": lambda: elm.Capacitor(polar=True), "snubber-c": lambda: elm.Capacitor(),
                "diode": lambda: elm.Diode(), "zener": lambda: elm.Zener(),
                "current sink": lambda: elm.SourceI()}[kind]()

    @staticmethod
    def symbol_kind(kind: str) -> str:
        return {"choke": "inductor", "snubber-c": "capacitor"}.get(kind, kind)

    def series(self, start: Pt, items: Sequence[tuple[str, str, str]], direction: str = "right",
               sides: Iterable[str] = ("above",), min_length: float = U) -> Pt:
        """Series parts end to end from ``start``, each long enough for its label; returns the end."""
        here = start
        sides = tuple(sides)
        for name, kind, text in items:
            w, h = _measure(text, PART_FONT)
            horizontal = direction in ("right", "left")
            length = max(min_length, (w if horizontal and sides[0] in ("above", "below") else h) + 2 * PAD)
            sign = 1 if direction in ("right", "up") else -1
            end = (here[0] + sign * length, here[1]) if horizontal else (here[0], here[1] + sign * length)
            self.two([name], self.symbol_kind(kind), self.element(kind), here, end, text, sides)
            here = end
        return here

    def rectifier_plate(self, d: DiodeRef, a: Pt, b: Pt, sides: Iterable[str]) -> None:
        """One rectifier diode from ``a`` (anode) to ``b`` (cathode): a diode, or a one-plate tube."""
        if not self.vacuum:
            sides = tuple(sides)
            snub = self.diode_snubber_items(d.name)
            place = self.diode_snubber(a, b, snub, sides) if snub else None
            self.two([d.name], "diode", self.element("diode"), a, b, self.diode_label([d.name]), sides)
            if place is not None:
                place()
            return
        ang = math.degrees(math.atan2(b[1] - a[1], b[0] - a[0]))
        mid = ((a[0] + b[0]) / 2, (a[1] + b[1]) / 2)
        tube = self.cls["RectifierTube"](plates=1, direct=self._direct()).theta(ang + 90).anchor("centre").at(mid)
        self.add(tube)
        centre = tube.absanchors["centre"]
        self.wire(a, tuple(tube.absanchors["anode1"]))  # type: ignore[arg-type]
        self.wire(tuple(tube.absanchors["cathode"]), b)  # type: ignore[arg-type]
        self._tube_boxes(tube)
        self.label(self.diode_label([d.name]), self._envelope(centre), sides)
        self.record([d.name], "tube", self.diode_label([d.name]))

    def _direct(self) -> bool:
        vac = self.design.rectifier.diode.vacuum
        return bool(vac and vac.directly_heated)

    def _envelope(self, centre: Any) -> Box:
        r = self.cls["RectifierTube"].R
        return Box(centre[0] - r, centre[1] - r, centre[0] + r, centre[1] + r)

    def _tube_boxes(self, tube: Any) -> None:
        """The envelope and the heater terminals as bodies; the leads as wires; 'heater' beside them."""
        env = self._envelope(tube.absanchors["centre"])
        self.bodies.append(env)
        h1, h2 = tube.absanchors["heat1"], tube.absanchors["heat2"]
        for xy in (h1, h2):
            self.bodies.append(Box(xy[0] - 0.12, xy[1] - 0.12, xy[0] + 0.12, xy[1] + 0.12))
        for key in [k for k in tube.absanchors if k.startswith("anode")] + ["cathode"]:
            self.wire(tuple(tube.absanchors["centre"]), tuple(tube.absanchors[key]), draw=False)  # type: ignore[arg-type]
        both = Box(min(h1[0], h2[0]) - 0.12, min(h1[1], h2[1]) - 0.12, max(h1[0], h2[0]) + 0.12,
                   max(h1[1], h2[1]) + 0.12)
        word = "filament" if self._direct() else "heater"
        self.label(word, both, ("below", "right", "left", "above"), size=NODE_FONT, color=NODE, pad=0.1)

    # -- rectifiers: each returns (rectifier output point, rail y) and sets rail_start -------------

    def diode_by_nodes(self, anode: str, cathode: str) -> DiodeRef:
        return next(d for d in self.c.diodes if d.anode == anode and d.cathode == cathode)

    def stacked(self, x: float, top: float, bottom: float, items: Sequence[tuple[str, str, str]]) -> None:
        """Parts in series from ``top`` down to ``bottom`` at ``x`` (a snubber's C over its R)."""
        n = len(items)
        step = (top - bottom) / n
        here = (x, top)
        for name, kind, text in items:
            end = (x, here[1] - step)
            self.two([name], self.symbol_kind(kind), self.element(kind), here, end, text, ("right",))
            here = end

    def snubber_items(self, tag: str) -> list[tuple[str, str, str]]:
        """(name, kind, label) of the snubber ``tag`` (``SW1``, ``SR``): its capacitor, then its resistor.

        Across a winding (``SWk``) that is the design's own snubber (``CSSk``/``RSSk``) when it fits one,
        else the one simkit adds; the labels say which.
        """
        own = re.fullmatch(r"SW(\d+)", tag)
        if own and any(c.name == f"C{SOURCE_SNUBBER}{own.group(1)}" for c in self.c.capacitors):
            tag, word = f"{SOURCE_SNUBBER}{own.group(1)}", "snubber\n(design)"
        else:
            word = "snubber\n(added by simkit)"
        items = []
        for c in self.c.capacitors:
            if c.name == f"C{tag}":
                items.append((c.name, "snubber-c", f"{c.name}\n{eng(c.value, 'F')}\n{word}"))
        for r in self.c.resistors:
            if r.name == f"R{tag}":
                items.append((r.name, "resistor", f"{r.name}\n{eng(r.value, 'Ω')}\n{word}"))
        return items

    def diode_snubber_items(self, diode: str) -> list[tuple[str, float]]:
        """The design's snubber across one diode: its capacitor's and its resistor's (name, value)."""
        tag = f"{DIODE_SNUBBER}{diode[1:]}"
        caps = [(c.name, c.value) for c in self.c.capacitors if c.name == f"C{tag}"]
        res = [(r.name, r.value) for r in self.c.resistors if r.name == f"R{tag}"]
        return caps + res if caps and res else []

    def diode_snubber(self, a: Pt, b: Pt, items: Sequence[tuple[str, float]], sides: Sequence[str]) -> Any:
        """A snubber beside the diode from ``a`` to ``b``: its capacitor and resistor in series on a parallel
        line, joined to both ends.  Beside a horizontal diode it goes on the side away from the diode's
        label, beside a vertical one on the label's side (the label then moves out past it).  Draws the
        symbols now; returns what places their one label, after the diode's."""
        (cname, cval), (rname, rval) = items
        vec = {"left": (-1.0, 0.0), "right": (1.0, 0.0), "above": (0.0, 1.0), "below": (0.0, -1.0)}
        want = vec.get(sides[0], (0.0, 1.0))
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        n = (-dy / length, dx / length)
        horizontal = abs(dy) < 1e-9
        if horizontal:
            want = (-want[0], -want[1])
        if n[0] * want[0] + n[1] * want[1] < 0:
            n = (-n[0], -n[1])
        off = 1.3
        if not horizontal and abs(dx) > 1e-9:  # a diagonal (a cascade's): tap its leads, keep clear of the columns
            off = 1.0
            a = (a[0] + 0.15 * dx, a[1] + 0.15 * dy)
            b = (a[0] + 0.7 * dx, a[1] + 0.7 * dy)
        a2 = (a[0] + n[0] * off, a[1] + n[1] * off)
        b2 = (b[0] + n[0] * off, b[1] + n[1] * off)
        mid = ((a2[0] + b2[0]) / 2, (a2[1] + b2[1]) / 2)
        self.wire(a, a2)
        self.wire(b2, b)
        boxes = []
        for kind, p, q in (("snubber-c", a2, mid), ("resistor", mid, b2)):
            element = self.element(kind)
            body = self.body_box(element, p, q)
            self.add(element.endpoints(p, q))
            self.bodies.append(body)
            self._lead_boxes(p, q, body)
            boxes.append(body)
        for xy in (a, b):
            self.dot(xy)
        both = Box(min(x.x0 for x in boxes), min(x.y0 for x in boxes), max(x.x1 for x in boxes),
                   max(x.y1 for x in boxes))
        text = f"{cname}, {rname}\n{eng(cval, 'F')}, {eng(rval, 'Ω')}\nsnubber (design)"
        side = next(k for k, v in vec.items() if v == (round(n[0]), round(n[1]))) \
            if (round(n[0]), round(n[1])) in vec.values() else sides[0]

        def place() -> None:
            self.label(text, both, (side, *[x for x in ("right", "left", "above", "below") if x != side]))
            self.record([cname], "capacitor", text)
            self.record([rname], "resistor", text)

        return place

    def column_x(self, bottom: float, top: float, half_width: float = 0.35) -> float:
        """The x of a new vertical column between ``bottom`` and ``top``: right of everything there."""
        return self.frontier(bottom, top) + COLUMN_GAP + half_width

    def half_wave(self, height: float) -> Pt:
        items = self.winding_items(1)
        name, kind, text = items[0]
        self.two([name], kind, self.element(kind), (0.0, 0.0), (0.0, height), text, ("left",))
        self.rail_start = (0.0, 0.0)
        self.ground((0.0, 0.0))
        here = self.series((0.0, height), items[1:])
        self.dot(here)
        self.node(here, "ac1", "above")
        snub = self.snubber_items("SW1")
        if snub:
            x = self.column_x(0.0, height)
            self.wire(here, (x, height))
            self.dot((x, height))
            self.stacked(x, height, 0.0, snub)
            self.dot((x, 0.0))
            here = (x, height)
        d1 = self.diode_by_nodes("ac1", self.rect)
        x = max(here[0], self.frontier(height + 1e-3, math.inf)) + 0.4
        if self.diode_snubber_items(d1.name):  # its snubber runs below the top line: clear of what is there
            x = max(x, self.frontier(0.0, height - 1e-3) + 0.6)
        self.wire(here, (x, height))
        length = max(U, _measure(self.diode_label([d1.name]), PART_FONT)[0] + 2 * PAD)
        if self.vacuum:
            length = max(length, 2 * (self.cls["RectifierTube"].R + 0.6) + 1.2)
        end = (x + length, height)
        self.rectifier_plate(d1, (x, height), end, ("above", "below"))
        return end

    def centre_tap(self, height: float) -> Pt:
        """The centre tap at node 0 (a ground symbol), ``V1`` up to ``ac1`` and ``V2`` down to ``ac2``."""
        ends: list[Pt] = []
        w = U  # each half of the winding; the cathodes' bus rises to the ladder's height
        for k, sign in ((1, 1.0), (2, -1.0)):
            items = self.winding_items(k)
            name, kind, text = items[0]
            self.two([name], kind, self.element(kind), (0.0, 0.0), (0.0, sign * w), text, ("left",))
            here = self.series((0.0, sign * w), items[1:], sides=("above",) if k == 1 else ("below",))
            node = f"ac{k}"
            self.dot(here)
            self.node(here, node, "above" if k == 1 else "below")
            snub = self.snubber_items(f"SW{k}")
            if snub:
                x = self.column_x(-w, w)
                self.wire(here, (x, here[1]))
                self.dot((x, here[1]))
                drop = U
                self.stacked(x, here[1], here[1] - drop, snub)
                self.ground((x, here[1] - drop))
                here = (x, here[1])
            ends.append(here)
        self.dot((0.0, 0.0))
        self.wire((0.0, 0.0), (-0.9, 0.0))
        self.ground((-0.9, 0.0))
        self.node((-0.9, 0.0), "centre tap (node 0)", "left")
        if self.vacuum:
            return self.centre_tap_tube(ends, height)
        x = max(p[0] for p in ends) + 0.4
        if self.diode_snubber_items("D1"):  # the diodes' snubbers reach back: start clear of the winding's labels
            x = max(x, self.frontier(-w - U, w + U) + 0.6)
        tops = []
        for k, here in zip((1, 2), ends, strict=True):
            self.wire(here, (x, here[1]))
            d = self.diode_by_nodes(f"ac{k}", self.rect)
            length = max(U, _measure(self.diode_label([d.name]), PART_FONT)[0] + 2 * PAD)
            end = (x + length, here[1])
            self.rectifier_plate(d, (x, here[1]), end, ("above",) if k == 1 else ("below",))
            tops.append(end)
        x1 = max(p[0] for p in tops)
        for p in tops:
            self.wire(p, (x1, p[1]))
        self.wire((x1, -w), (x1, height))
        self.dot((x1, height))
        return (x1, height)

    def centre_tap_tube(self, ends: list[Pt], height: float) -> Pt:
        """Both plates in one envelope, on its left; the cathode leaves to the right."""
        d1 = self.diode_by_nodes("ac1", self.rect)
        d2 = self.diode_by_nodes("ac2", self.rect)
        x_in = max(p[0] for p in ends) + 0.8
        cls = self.cls["RectifierTube"]
        tube = cls(plates=2, direct=self._direct()).theta(90)
        tube = tube.anchor("centre").at((x_in + 0.6 + cls.R + cls.LEAD, U / 2))
        self.add(tube)
        a1, a2 = tube.absanchors["anode1"], tube.absanchors["anode2"]
        upper, lower = (a1, a2) if a1[1] > a2[1] else (a2, a1)
        self.wire(ends[0], (x_in, ends[0][1]), (x_in, upper[1]), tuple(upper))  # type: ignore[arg-type]
        self.wire(ends[1], (x_in, ends[1][1]), (x_in, lower[1]), tuple(lower))  # type: ignore[arg-type]
        self._tube_boxes(tube)
        text = self.diode_label([d1.name, d2.name])
        self.label(text, self._envelope(tube.absanchors["centre"]), ("above-right", "above", "below"))
        self.record([d1.name, d2.name], "tube", text)
        cath = tube.absanchors["cathode"]
        x_bus = max(self.frontier(-U + 1e-3, U - 1e-3), cath[0]) + 0.6
        self.wire(tuple(cath), (x_bus, cath[1]), (x_bus, height))  # type: ignore[arg-type]
        self.dot((x_bus, height))
        return (x_bus, height)

    def legs(self, second: str) -> Pt:
        """Bridge (``second="bridge"``) and full-wave doubler (``second="doubler"``).

        Left leg: diodes from the return up to ``ac1`` and from ``ac1`` up to the output.  The
        winding runs from ``ac1`` to the right leg's middle (``ac2`` or ``mid``); the right
        leg holds the other two diodes (bridge) or the two stage capacitors (doubler).
        """
        xa = 0.0
        tag = "SW1"
        snub = self.snubber_items(tag)
        beside = bool(self.diode_snubber_items("D1"))
        if beside:  # snubbers beside the legs' diodes: every label once the whole block is drawn
            self.defer()
        low = U + (2.2 if snub else 0.0) + (1.0 if self.vacuum else 0.0)  # room for a snubber under the winding
        d_low = self.diode_by_nodes("0", "ac1")
        tube_top = self.vacuum and second == "bridge"
        self.wires.append(Box(xa, low, xa + 0.9, low))  # the winding's line, drawn below
        self.rectifier_plate(d_low, (xa, 0.0), (xa, low), ("left",))
        self.dot((xa, low))
        self.node((xa, low), "ac1", "above-left")
        items = self.winding_items(1)
        chain = [*list(reversed(items[1:])), items[0]]
        start = (xa + 0.9, low)
        self.wire((xa, low), start)
        here = self.series(start, chain)
        if snub:
            self.under_winding(start, here, low, snub)
        xb = max(here[0], self.frontier(0.0, low - 1e-3)) + 0.9
        self.wire(here, (xb, low))
        self.dot((xb, low))
        if second == "bridge":
            self.node((xb, low), "ac2", "above-right")
            r_low = self.diode_by_nodes("0", "ac2")
            self.rectifier_plate(r_low, (xb, 0.0), (xb, low), ("right",))
            self.dot((xb, 0.0))
        else:
            self.node((xb, low), "mid", "above-right")
        if tube_top:
            top = self.bridge_tube(xa, xb, low)
        else:
            top = low + U + (1.0 if self.vacuum else 0.0)
            if second == "bridge":
                d_high = self.diode_by_nodes("ac1", self.rect)
                self.rectifier_plate(d_high, (xa, low), (xa, top), ("left",))
                r_high = self.diode_by_nodes("ac2", self.rect)
                self.rectifier_plate(r_high, (xb, low), (xb, top), ("right",))
            else:
                d_high = self.diode_by_nodes("ac1", self.rect)
                self.rectifier_plate(d_high, (xa, low), (xa, top), ("left",))
                self.doubler_caps(xb, low, top)
            self.wire((xa, top), (xb, top))
        self.dot((xa, 0.0))
        self.ground((xa, 0.0))
        self.rail_start = (xa, 0.0)
        self.dot((xb, top))
        if beside:
            self.flush()
        return (xb, top)

    def under_winding(self, start: Pt, end: Pt, y: float, snub: Sequence[tuple[str, str, str]]) -> None:
        """A snubber across the winding, drawn under it: C then R, labels below."""
        a = (start[0] + 0.3, y)
        b = (end[0] - 0.3, y)
        yy = y - 1.0
        self.dot(a)
        self.dot(b)
        self.wire(a, (a[0], yy))
        here = self.series((a[0], yy), snub, sides=("below",), min_length=1.6)
        if here[0] > b[0]:
            b = (here[0] + 0.3, y)
            self.wire(end, b)
            self.dot(b)
        self.wire(here, (b[0], yy), b)

    def doubler_caps(self, xb: float, low: float, top: float) -> None:
        upper = next(c for c in self.c.capacitors if c.role == "stage" and c.minus == "mid")
        lower = next(c for c in self.c.capacitors if c.role == "stage" and c.plus == "mid")
        self.two([upper.name], "capacitor", self.element("capacitor"), (xb, top), (xb, low), self.cap_label(upper))
        self.two([lower.name], "capacitor", self.element("capacitor"), (xb, low), (xb, 0.0), self.cap_label(lower))
        self.dot((xb, 0.0))
        bal = {r.a: r for r in self.c.resistors if r.role == "balancing"}
        if bal:
            x = self.column_x(0.0, top)
            for node, (ya, yb) in ((upper.plus, (top, low)), (lower.plus, (low, 0.0))):
                r = bal.get(node)
                if r is None:
                    continue
                self.two([r.name], "resistor", self.element("resistor"), (x, ya), (x, yb),
                         f"{r.name}\n{eng(r.value, 'Ω')}\nbalancing")
            self.wire((xb, low), (x, low))
            self.dot((x, low))
            self.dot((xb, low))
            self.wire((xb, top), (x, top))
            self.wire((xb, 0.0), (x, 0.0))
            self.dot((x, 0.0))

    def bridge_tube(self, xa: float, xb: float, low: float) -> float:
        """A bridge of tubes: the two plates that share the output cathode in one envelope above
        the winding; returns the height of the top line."""
        d1 = self.diode_by_nodes("ac1", self.rect)
        d2 = self.diode_by_nodes("ac2", self.rect)
        cls = self.cls["RectifierTube"]
        y_w = max(self.frontier_top(xa, xb), low) + 0.5  # the wires to the plates clear the winding's labels
        xm = (xa + xb) / 2
        tube = cls(plates=2, direct=self._direct()).theta(180).anchor("centre").at((xm, y_w + cls.R + cls.LEAD + 0.4))
        self.add(tube)
        a1, a2 = tube.absanchors["anode1"], tube.absanchors["anode2"]
        left, right = (a1, a2) if a1[0] < a2[0] else (a2, a1)
        self.wire((xa, low), (xa, y_w), (left[0], y_w), tuple(left))  # type: ignore[arg-type]
        self.wire((xb, low), (xb, y_w), (right[0], y_w), tuple(right))  # type: ignore[arg-type]
        self._tube_boxes(tube)
        text = self.diode_label([d1.name, d2.name])
        self.label(text, self._envelope(tube.absanchors["centre"]), ("right", "left"))
        self.record([d1.name, d2.name], "tube", text)
        cath = tube.absanchors["cathode"]
        top = cath[1] + 0.5
        self.wire(tuple(cath), (cath[0], top), (xb, top))  # type: ignore[arg-type]
        self.dot((cath[0], top))
        return top

    def frontier_top(self, x0: float, x1: float) -> float:
        """The top edge of everything drawn between ``x0`` and ``x1``."""
        band = Box(x0 + 1e-6, -math.inf, x1 - 1e-6, math.inf)
        return max((b.y1 for b in (*self.texts, *self.bodies) if b.hits(band)), default=0.0)

    def cascade(self, height: float) -> tuple[Pt, float]:
        """Pump column along the top (``p0`` ... ``pn``), output column along the middle (``0``,
        ``s1`` ... ``rect``); diodes zig-zag between them; the return runs below."""
        n = self.design.rectifier.stages
        # Each cell holds half of a vertical plate, a diagonal one, and both their labels side by side.
        plate = _measure(self.diode_label(["D1"]), PART_FONT)[0]
        half = self.cls["RectifierTube"].R if self.vacuum else 0.3
        step = max(6.0, 2 * (2 * half + 2 * PAD + plate) + 0.8)
        if self.diode_snubber_items("D1"):  # room for a snubber beside each diode, and its label
            step += 2.0 + _measure("CSD1, RSD1", PART_FONT)[0]
        pump_y = 4.5 + (1.5 if self.vacuum else 0.0)
        items = self.winding_items(1)
        name, kind, text = items[0]
        self.two([name], kind, self.element(kind), (0.0, 0.0), (0.0, pump_y), text, ("left",))
        here = self.series((0.0, pump_y), items[1:])
        snub = self.snubber_items("SW1")
        if snub:
            xs = self.column_x(0.0, pump_y)
            self.wire(here, (xs, pump_y))
            self.dot((xs, pump_y))
            self.stacked(xs, pump_y, 0.0, snub)
            self.dot((xs, 0.0))
            here = (xs, pump_y)
        x0 = max(here[0] + 1.0, self.frontier(0.0, pump_y) + 0.8)
        self.wire(here, (x0, pump_y))
        pos: dict[str, Pt] = {"p0": (x0, pump_y), "0": (x0, 0.0)}
        for k in range(1, n + 1):
            pos[f"p{k}"] = (x0 + k * step, pump_y)
            pos[self.rect if k == n else f"s{k}"] = (x0 + k * step, 0.0)
        self.node((x0, pump_y), "p0", "above-left")
        # Diodes first (their labels inside the cells, clear of both columns), then the stage
        # capacitors with their labels outside the columns, then the balancing resistors outside those.
        x_end = x0 + n * step
        self.wires += [Box(x0, pump_y, x_end, pump_y), Box(x0, 0.0, x_end, 0.0)]
        for d in self.c.diodes:  # every diode's line, so no label lands on one drawn later
            a, b = pos[d.anode], pos[d.cathode]
            if a[0] == b[0]:
                self.wires.append(Box(a[0], min(a[1], b[1]), a[0], max(a[1], b[1])))
            else:
                self._diagonal(a, b)
        self.defer()
        for d in self.c.diodes:
            a, b = pos[d.anode], pos[d.cathode]
            self.rectifier_plate(d, a, b, ("left", "right"))
        self.flush()
        for c in [c for c in self.c.capacitors if c.role == "stage"]:
            a, b = pos[c.plus], pos[c.minus]
            top = a[1] > 0
            self.two([c.name], "capacitor", self.element("capacitor"), a, b, self.cap_label(c),
                     ("above",) if top else ("below",))
        bal = [r for r in self.c.resistors if r.role == "balancing"]
        for r in bal:
            a, b = pos[r.a], pos[r.b]
            up = a[1] > 0
            x_lo, x_hi = min(a[0], b[0]), max(a[0], b[0])
            band = Box(x_lo + 0.2, -math.inf, x_hi - 0.2, math.inf)
            ys = [bx.y1 if up else bx.y0 for bx in (*self.texts, *self.bodies)
                  if bx.hits(band) and (bx.y0 > a[1] if up else bx.y1 < a[1])]
            yy = (max(ys, default=a[1]) + 0.5) if up else (min(ys, default=a[1]) - 0.5)
            self.wire(a, (a[0], yy))
            self.wire(b, (b[0], yy))
            mid = ((a[0] + b[0]) / 2, yy)
            half = 1.0
            self.wire((x_hi, yy), (mid[0] + half, yy))
            self.wire((mid[0] - half, yy), (x_lo, yy))
            self.two([r.name], "resistor", self.element("resistor"), (mid[0] + half, yy), (mid[0] - half, yy),
                     f"{r.name}\n{eng(r.value, 'Ω')}\nbalancing", ("above",) if up else ("below",))
        for node, xy in pos.items():
            self.dot(xy)
            if node not in ("p0", "0"):
                self.node(xy, node, "above-right" if xy[1] > 0 else "below-right")
        self.wire((0.0, 0.0), (x0, 0.0))
        low = min((bx.y0 for bx in (*self.texts, *self.bodies)), default=0.0)
        rail = min(-height, low - 0.6)
        self.wire((x0, 0.0), (x0, rail))
        self.rail_start = (x0, rail)
        self.ground((x0, rail))
        self.node((x0, 0.0), "0", "below-left")
        return pos[self.rect], rail

    # -- filter, regulator, loads ---------------------------------------------------------------

    def shunt_items(self, node: str) -> list[tuple[list[tuple[str, str, str]], Any]]:
        """What hangs from ``node`` to the return, in drawing order: (parts top to bottom, extra)."""
        c = self.c
        out: list[tuple[list[tuple[str, str, str]], Any]] = []
        if node == self.c.rectified and self.snubber_items("SR"):
            out.append((self.snubber_items("SR"), None))
        for cap in c.capacitors:
            if cap.role in ("reservoir", "filter") and cap.plus == node and cap.minus == "0":
                out.append(([(cap.name, "capacitor", self.cap_label(cap))], None))
        reg = self.design.regulator
        if reg is not None and reg.kind == "shunt" and node == c.output:
            out.append(([("GLOW" if reg.glow is not None else "DZ", "regulator", "")], reg))
        for r in c.resistors:
            if r.role == "bleeder" and r.a == node:
                out.append(([(r.name, "resistor", f"{r.name}\nbleeder\n{eng(r.value, 'Ω')}")], None))
        for name, at, ld in _loads(c, self.design):
            if at == node:
                out.append(([self.load_item(name, ld, at)], None))
        return out

    def shunt(self, here: Pt, bottom: float, parts: list[tuple[str, str, str]], reg: Any) -> Pt:
        """One shunt column right of everything drawn; returns its junction on the top line."""
        top = here[1]
        x = self.column_x(bottom, top, 0.7 if reg is not None else 0.4)
        self.wire(here, (x, top))
        self.dot((x, top))
        if reg is not None:
            self.shunt_regulator((x, top), (x, bottom), reg)
        else:
            self.stacked(x, top, bottom, parts)
        self.dot((x, bottom))
        self.rail_end = x
        if self.rail_start is None:
            self.rail_start = (x, bottom)
            self.ground((x, bottom))
        return (x, top)

    def shunt_regulator(self, a: Pt, b: Pt, reg: Any) -> None:
        if reg.glow is not None:
            g = reg.glow
            text = (f"GLOW\n{g.count} × {g.name}" + (" in series" if g.count > 1 else "")
                    + f"\n{eng(g.maintaining, 'V')} each")
            tube = self.cls["GlowTube"]().anchor("anode").at(((a[0]), (a[1] + b[1]) / 2 + 0.9))
            self.add(tube)
            self.wire(a, tuple(tube.absanchors["anode"]))  # type: ignore[arg-type]
            self.wire(tuple(tube.absanchors["cathode"]), b)  # type: ignore[arg-type]
            ctr = tube.absanchors["centre"]
            r = self.cls["GlowTube"].R
            body = Box(ctr[0] - r, ctr[1] - r, ctr[0] + r, ctr[1] + r)
            self.bodies.append(body)
            self.label(text, body, ("right",))
            self.record(["GLOW"], "glow tube", text)
            return
        z = reg.zener
        text = (f"DZ\n{z.count} × {eng(z.voltage, 'V')} zener" + (" in series" if z.count > 1 else "")
                + (f"\n{eng(z.power, 'W')} each" if z.power else ""))
        self.two(["DZ"], "zener", self.element("zener"), b, a, text, ("right",))

    def series_regulator(self, here: Pt, bottom: float) -> Pt:
        """Pass MOSFET along the top line; reference resistor and zener, RC filter, gate stopper and
        gate-source zener below it.  Returns the source end (node ``out``)."""
        c = self.c
        reg = self.design.regulator
        assert reg is not None
        top = here[1]
        height = top - bottom
        res = {r.name: r for r in c.resistors}
        ref_c = next(x for x in c.capacitors if x.role == "reference")
        ym = bottom + 0.42 * height  # the reference's filter line
        # Reference resistor and zener in one column.
        x1 = self.column_x(bottom, top)
        self.wire(here, (x1, top))
        self.dot((x1, top))
        rref = res["RREF"]
        self.two(["RREF"], "resistor", self.element("resistor"), (x1, top), (x1, ym),
                 f"RREF\n{eng(rref.value, 'Ω')}")
        self.dot((x1, ym))
        self.node((x1, ym), "ref1", "left")
        ref_v = reg.reference
        self.two(["DREF"], "zener", self.element("zener"), (x1, bottom), (x1, ym),
                 f"DREF\n{eng(ref_v, 'V')} zener")
        self.dot((x1, bottom))
        # The reference filter: RFREF along, its capacitor down.
        start = (self.frontier(ym - 0.6, ym + 1.6) + 0.4, ym)
        self.wire((x1, ym), start)
        rf = res["RFREF"]
        end = self.series(start, [("RFREF", "resistor", f"RFREF\n{eng(rf.value, 'Ω')}")], min_length=2.4)
        self.dot(end)
        self.node(end, "ref2", "below-right")
        x2 = self.column_x(bottom, ym, 0.35)
        self.wire(end, (x2, ym))
        self.dot((x2, ym))
        self.two([ref_c.name], "capacitor", self.element("capacitor"), (x2, ym), (x2, bottom),
                 self.cap_label(ref_c))
        self.dot((x2, bottom))
        # The gate stopper along the filter line to the gate node, under the pass device on the top line.
        gr = res.get("RGATE")
        rg_value = gr.value if gr is not None else reg.gate_resistor
        gate_text = f"RGATE\n{eng(rg_value, 'Ω')}"
        start = (max(x2 + 0.6, self.frontier(ym + 1e-3, top - 1e-3) + 0.4), ym)
        self.wire((x2, ym), start)
        xg = self.series(start, [("RGATE", "resistor", gate_text)], min_length=2.4)[0] + 0.9
        self.wire((xg - 0.9, ym), (xg, ym))
        fet = self.elm.NFet(bulk=True).theta(90).reverse()
        import schemdraw

        probe = schemdraw.Drawing(show=False, canvas="matplotlib").add(
            self.elm.NFet(bulk=True).theta(90).reverse().at((0.0, 0.0)))
        dx = probe.absanchors["gate"][0] - probe.absanchors["drain"][0]
        self.add(fet.at((xg - dx, top)))
        gate = tuple(fet.absanchors["gate"])
        drain = tuple(fet.absanchors["drain"])
        source = tuple(fet.absanchors["source"])
        self.wire((xg, ym), gate)  # type: ignore[arg-type]
        self.dot((xg, ym))
        self.node((xg, ym), "gate", "below-right")
        self.wire((x1, top), drain)  # type: ignore[arg-type]
        body = Box(min(drain[0], source[0]), gate[1], max(drain[0], source[0]), top + 0.1)
        self.bodies.append(body)
        dev = reg.device
        rating = f"\n{eng(dev.vdss, 'V')}, {eng(dev.id_max, 'A')}" if dev is not None and dev.vdss and dev.id_max \
            else ""
        text = f"MPASS\n{dev.name if dev is not None else 'pass MOSFET'}{rating}"
        self.label(text, body, ("above",))
        self.record(["MPASS"], "mosfet", text)
        # Gate-source protection: from the output (anode) down to the gate node (cathode).
        x4 = max(self.column_x(ym + 1e-3, top - 1e-3), source[0] + 0.9)
        self.wire(source, (x4, top))  # type: ignore[arg-type]
        self.dot((x4, top))
        self.two(["DGS"], "zener", self.element("zener"), (x4, top), (x4, ym),
                 f"DGS\n{eng(reg.gate_zener, 'V')} zener", ("right",))
        self.wire((x4, ym), (xg, ym))
        return (x4, top)

    def ladder(self, start: Pt, bottom: float) -> tuple[Pt, float]:
        """Walk the circuit from the rectifier's output to ``out``, on further rows below when a
        row grows too wide; returns the output point and the height of the last row's return."""
        c = self.c
        node = self.rect
        here = start
        self.node(here, node, "above")
        visited = set()
        reg = self.design.regulator
        while node not in visited:
            visited.add(node)
            regulates = reg is not None and node == c.regulator.get("input", "raw") and node != c.output
            ahead = (REGULATOR_WIDTH if reg is not None and reg.kind == "series" else 0.0) if regulates else 0.0
            if node != self.rect and (here[0] > ROW_LIMIT or (ahead and here[0] + ahead > ROW_LIMIT)):
                here, bottom = self.wrap(here, node, bottom)
            for parts, extra in self.shunt_items(node):
                here = self.shunt(here, bottom, parts, extra)
            if regulates:
                assert reg is not None
                if reg.kind == "series":
                    here = self.series_regulator(here, bottom)
                else:
                    rr = next(r for r in c.resistors if r.name == "RREG")
                    here = self.series_from(here, [("RREG", "resistor", f"RREG\n{eng(rr.value, 'Ω')}")])
                node = c.output
                self.dot(here)
                self.node(here, node, "above")
                continue
            chokes = [x for x in c.inductors if x.role == "choke" and x.a == node]
            resistors = [x for x in c.resistors if x.role == "filter" and x.a == node]
            if chokes:
                ind = chokes[0]
                text = f"{ind.name}\n{eng(ind.value, 'H')}" + (f"\nDCR {eng(ind.dcr, 'Ω')}" if ind.dcr else "")
                here = self.series_from(here, [(ind.name, "choke", text)])
                node = ind.b
            elif resistors:
                r = resistors[0]
                here = self.series_from(here, [(r.name, "resistor", f"{r.name}\n{eng(r.value, 'Ω')}")])
                node = r.b
            else:
                break
            self.dot(here)
            self.node(here, node, "above")
        return here, bottom

    def wrap(self, here: Pt, node: str, bottom: float) -> tuple[Pt, float]:
        """End this row at node ``node`` and go on in a new row below; returns the new row's start
        and return height.  Both rows' returns are node 0 (each starts at a ground symbol)."""
        top = here[1]
        end = (here[0] + 0.8, top)
        self.wire(here, end)
        self.add(self.elm.Dot(open=True, radius=0.14).at(end))
        self.bodies.append(Box(end[0] - 0.14, end[1] - 0.14, end[0] + 0.14, end[1] + 0.14))
        self.text(f"{node}: continued below", (end[0] + 0.3, end[1]), "left", "center", NODE_FONT, NODE)
        if self.rail_start is not None and self.rail_end > self.rail_start[0]:
            self.wire(self.rail_start, (self.rail_end, bottom))
        lowest = min(b.y0 for b in (*self.texts, *self.bodies, *self.wires))
        new_top = lowest - 3.2
        new_bottom = new_top - min(top - bottom, self.ladder_height)
        tag = f"{node}: from above"
        w, _h = _measure(tag, NODE_FONT)
        x = w + 0.6
        self.text(tag, (x - 0.3, new_top), "right", "center", NODE_FONT, NODE)
        self.add(self.elm.Dot(open=True, radius=0.14).at((x, new_top)))
        self.bodies.append(Box(x - 0.14, new_top - 0.14, x + 0.14, new_top + 0.14))
        start = (x + 0.6, new_top)
        self.wire((x, new_top), start)
        self.rail_start = None
        return start, new_bottom

    def series_from(self, here: Pt, items: Sequence[tuple[str, str, str]]) -> Pt:
        """Series parts on the top line, starting where their labels clear everything above it."""
        text = items[0][2]
        w, _h = _measure(text, PART_FONT)
        length = max(U, w + 2 * PAD)
        above = self.frontier(here[1] + 1e-3, here[1] + 3.0)
        x = max(here[0] + 0.5, above + GAP_TEXT + 0.6 + w / 2 - length / 2)
        self.wire(here, (x, here[1]))
        return self.series((x, here[1]), items)

    def load_item(self, name: str, ld: Any, node: str) -> tuple[str, str, str]:
        """A load's kind of symbol and its label: a resistor, or a current sink with what it draws."""
        kind = getattr(ld, "kind", "resistor" if name.startswith("R") else "current")
        where = "" if node == self.c.output else f" at {node}"
        head = f"{name}\nload{where}"
        if kind == "resistor" and getattr(ld, "r", None) is not None:
            return name, "resistor" if name.startswith("R") else "current sink", f"{head}\n{eng(ld.r, 'Ω')}"
        if kind == "current" and getattr(ld, "i", None) is not None:
            return name, "current sink", f"{head}\n{eng(ld.i, 'A')}"
        if kind == "tube" and getattr(ld, "tube_i", None):
            return name, "current sink", f"{name}\ntube load{where}\n{eng(ld.tube_i, 'A')} at {eng(ld.tube_v, 'V')}"
        if kind == "keyed":
            down, up = getattr(ld, "down", None), getattr(ld, "up", None)
            return name, "current sink", f"{name}\nkeyed load{where}\ndown {_state(down)}\nup {_state(up)}"
        if kind == "steps" and getattr(ld, "steps", None):
            top = max(i for _t, i in ld.steps)
            return name, "current sink", f"{name}\nstepped load{where}\nup to {eng(top, 'A')}"
        return name, "resistor" if name.startswith("R") else "current sink", head

    def terminals(self, here: Pt, bottom: float) -> None:
        x = max(here[0] + 1.2, self.frontier(bottom + 1e-3, here[1] - 1e-3) + 0.8)
        end = (x, here[1])
        self.wire(here, end)
        self.add(self.elm.Dot(open=True, radius=0.14).at(end))
        self.bodies.append(Box(end[0] - 0.14, end[1] - 0.14, end[0] + 0.14, end[1] + 0.14))
        self.text("+ out", (end[0] + 0.3, end[1]), "left", "center")
        low = (end[0], bottom)
        self.add(self.elm.Dot(open=True, radius=0.14).at(low))
        self.bodies.append(Box(low[0] - 0.14, low[1] - 0.14, low[0] + 0.14, low[1] + 0.14))
        self.text("− return (0)", (low[0] + 0.3, low[1]), "left", "center")
        if self.rail_start is None:
            self.rail_start = (low[0] - 1.0, bottom)
            self.ground(self.rail_start)
        self.wire(self.rail_start, low)


def _tall(design: Design, circuit: Circuit) -> bool:
    """Whether the ladder needs two symbols' height: a snubber in it, or a series regulator's reference."""
    names = {e.name for e in circuit.elements}
    reg = design.regulator
    half_wave_snubber = design.rectifier.topology == "half-wave" and bool({"CSW1", "CSS1", "CSD1"} & names)
    return "CSR" in names or half_wave_snubber or (reg is not None and reg.kind == "series")


def draw_schematic(design: Design, circuit: Circuit) -> Schematic:
    """Draw a design's schematic.

    Parameters
    ----------
    design : Design
        The design (topology, filter, loads, regulator, source values).
    circuit : Circuit
        Its circuit from :func:`simkit.netlist.build.build_circuit`: names and values.

    Returns
    -------
    Schematic
        PNG and SVG bytes (repeatable), the parts drawn, any part not drawn, the symbols and the
        extents of every text as drawn.
    """
    from simkit.report.plots import figure_bytes, house_style

    with house_style():
        sheet = _Sheet(design, circuit)
        topo = design.rectifier.topology
        height = 2 * U if _tall(design, circuit) else U
        sheet.ladder_height = height
        bottom = 0.0
        if topo == "half-wave":
            rect = sheet.half_wave(height)
        elif topo == "centre-tap":
            rect = sheet.centre_tap(height)
        elif topo in ("bridge", "doubler"):
            rect = sheet.legs(topo)
        elif topo == "cascade":
            rect, bottom = sheet.cascade(max(height, U))
        else:  # pragma: no cover - the loader refuses other names
            raise ValueError(topo)
        sheet.rail_y = bottom
        out, bottom = sheet.ladder(rect, bottom)
        sheet.terminals(out, bottom)
        fig = sheet.d.draw(show=False).getfig()
        fig.set_dpi(100)
        boxes = _text_boxes(fig)
        png, svg = figure_bytes(fig, tight=True)
    wanted = user_parts(circuit)
    return Schematic(png, svg, list(sheet.drawn), [n for n in wanted if n not in sheet.drawn], dict(sheet.labels),
                     list(sheet.symbols), boxes)


def _text_boxes(fig: Any) -> list[tuple[str, tuple[float, float, float, float]]]:
    """Every text of a figure with its extent in display pixels, as the renderer lays it out."""
    renderer = fig.canvas.get_renderer()
    out = []
    for ax in fig.axes:
        for t in ax.texts:
            bb = t.get_window_extent(renderer)
            out.append((t.get_text(), (float(bb.x0), float(bb.y0), float(bb.x1), float(bb.y1))))
    return out
