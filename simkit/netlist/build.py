"""Turn a design into a :class:`Circuit`: one generator per stage (source, rectifier, filter, load).

Robust defaults (ENGINE-NOTES): every floating winding terminal is tied to ground through
10 Meg; a critically damped RC snubber sits wherever inductance feeds the diodes (leakage
inductance, or a choke-input filter); diodes carry TT = 0 and CJO = 0 unless the design
says otherwise.

Node names: ``w1p`` EMF terminal, ``ac1``/``ac2`` winding terminals at the diodes,
``rect`` rectifier output, ``f1``, ``f2``... filter nodes, ``out`` the output.
"""

from __future__ import annotations

import math

from simkit.design.model import Design, DiodeModel
from simkit.netlist.circuit import (
    CapRef,
    Circuit,
    DiodeRef,
    Element,
    IndRef,
    ResRef,
    WindingRef,
)
from simkit.units import spice

#: Resistance tying floating winding terminals to ground, ohm (ENGINE-NOTES trap 2).
FLOAT_TIE = 10e6
#: Snubber capacitance where inductance feeds the diodes, F; R is chosen for critical damping.
SNUB_C = 10e-9
#: Knee of the current-load model: below a few volts the sink fades out (tanh), V.
CURRENT_KNEE = 5.0
DIODE_MODEL = "DRECT"


def diode_model_line(d: DiodeModel) -> str:
    params = [f"is={spice(d.is_)}", f"n={spice(d.n)}", f"rs={spice(d.rs)}", f"tt={spice(d.tt)}",
              f"cjo={spice(d.cjo)}"]
    if d.bv is not None:
        params.append(f"bv={spice(d.bv)}")
    return f".model {DIODE_MODEL} D({' '.join(params)})"


class _Builder:
    def __init__(self, design: Design, phase_deg: float, vscale: float = 1.0) -> None:
        self.d = design
        self.phase = phase_deg
        self.vscale = vscale
        self.c = Circuit(title=design.title, period=design.source.period)
        self.n_diode = 0
        self.n_cap = 0
        self.n_ind = 0
        self.n_res = 0

    # -- parts ------------------------------------------------------------------------------

    def winding(self, index: int, plus: str, minus: str, phase: float) -> None:
        """EMF with its series R and L, delivering to terminals (plus, minus)."""
        s = self.d.source
        vpk = s.vpeak * self.vscale
        name = f"V{index}"
        emf = f"w{index}p"
        self.c.add(Element(name, (emf, minus), f"SIN(0 {spice(vpk)} {spice(s.frequency)} 0 0 {spice(phase)})",
                           comment=f"winding {index} EMF, {spice(s.vrms * self.vscale)} Vrms"))
        node = emf
        if s.resistance > 0:
            nxt = plus if s.inductance == 0 else f"w{index}r"
            self.c.add(Element(f"RW{index}", (node, nxt), spice(s.resistance), comment="winding resistance"))
            self.c.resistors.append(ResRef(f"RW{index}", node, nxt, s.resistance, "winding"))
            node = nxt
        if s.inductance > 0:
            self.c.add(Element(f"LW{index}", (node, plus), spice(s.inductance), comment="leakage inductance",
                               ic=0.0))
            self.c.inductors.append(IndRef(f"LW{index}", node, plus, s.inductance, 0.0, "leakage"))
            node = plus
        if node != plus:  # neither R nor L: the EMF drives the terminal directly
            self.c.elements[-1] = Element(name, (plus, minus), self.c.elements[-1].value,
                                          comment=self.c.elements[-1].comment)
        self.c.windings.append(WindingRef(name, s.vrms * self.vscale, plus, minus))
        if s.inductance > 0:
            self.snubber(plus, minus, s.inductance, f"SW{index}")

    def snubber(self, a: str, b: str, inductance: float, tag: str) -> None:
        r = min(max(math.sqrt(inductance / SNUB_C), 100.0), 100e3)
        mid = f"{tag.lower()}m"
        self.c.add(Element(f"C{tag}", (a, mid), spice(SNUB_C), comment="snubber (damps inductance at the diodes)",
                           ic=0.0))
        self.c.add(Element(f"R{tag}", (mid, b), spice(r), comment="snubber"))
        self.c.capacitors.append(CapRef(f"C{tag}", a, b, a, mid, "", SNUB_C, "snubber"))
        self.c.resistors.append(ResRef(f"R{tag}", mid, b, r, "snubber"))

    def tie(self, node: str) -> None:
        name = f"RT{node.upper()}"
        self.c.add(Element(name, (node, "0"), spice(FLOAT_TIE), comment="ties a floating winding to ground"))

    def diode(self, anode: str, cathode: str) -> None:
        self.n_diode += 1
        k = self.n_diode
        inner = f"d{k}a"
        self.c.add(Element(f"VD{k}", (anode, inner), "0", comment=f"senses D{k} current"))
        self.c.add(Element(f"D{k}", (inner, cathode), DIODE_MODEL, comment="anode cathode ->|-"))
        self.c.diodes.append(DiodeRef(f"D{k}", f"VD{k}", anode, cathode))

    def capacitor(self, plus: str, minus: str, value: float, esr: float, role: str) -> str:
        self.n_cap += 1
        k = self.n_cap
        name = f"C{k}"
        inner = f"c{k}p"
        self.c.add(Element(f"VC{k}", (plus, inner), "0", comment=f"senses {name} current"))
        low = minus
        if esr > 0:
            low = f"c{k}e"
            self.c.add(Element(name, (inner, low), spice(value), comment=role, ic=0.0))
            self.c.add(Element(f"RESR{k}", (low, minus), spice(esr), comment=f"{name} ESR"))
            self.c.resistors.append(ResRef(f"RESR{k}", low, minus, esr, "esr"))
        else:
            self.c.add(Element(name, (inner, minus), spice(value), comment=role, ic=0.0))
        self.c.capacitors.append(CapRef(name, plus, minus, inner, low, f"VC{k}", value, role))
        return name

    def choke(self, a: str, b: str, value: float, dcr: float) -> None:
        self.n_ind += 1
        k = self.n_ind
        mid = b if dcr == 0 else f"l{k}r"
        self.c.add(Element(f"L{k}", (a, mid), spice(value), comment="choke", ic=0.0))
        self.c.inductors.append(IndRef(f"L{k}", a, b, value, dcr, "choke"))
        if dcr > 0:
            self.c.add(Element(f"RDCR{k}", (mid, b), spice(dcr), comment=f"L{k} winding resistance"))
            self.c.resistors.append(ResRef(f"RDCR{k}", mid, b, dcr, "dcr"))

    def resistor(self, a: str, b: str, value: float) -> None:
        self.n_res += 1
        name = f"R{self.n_res}"
        self.c.add(Element(name, (a, b), spice(value), comment="filter resistor"))
        self.c.resistors.append(ResRef(name, a, b, value, "filter"))

    # -- stages -----------------------------------------------------------------------------

    def rectifier(self) -> None:
        r = self.d.rectifier
        ph = self.phase
        top = "rect"
        if r.topology == "half-wave":
            self.winding(1, "ac1", "0", ph)
            self.diode("ac1", top)
        elif r.topology == "centre-tap":
            self.winding(1, "ac1", "0", ph)
            self.winding(2, "ac2", "0", ph + 180.0)
            self.diode("ac1", top)
            self.diode("ac2", top)
        elif r.topology == "bridge":
            self.winding(1, "ac1", "ac2", ph)
            self.tie("ac1")
            self.tie("ac2")
            self.diode("ac1", top)
            self.diode("ac2", top)
            self.diode("0", "ac1")
            self.diode("0", "ac2")
        elif r.topology == "doubler":
            assert r.capacitance is not None
            self.winding(1, "ac1", "mid", ph)
            self.tie("ac1")
            self.tie("mid")
            self.diode("ac1", top)
            self.diode("0", "ac1")
            self.capacitor(top, "mid", r.capacitance, 0.0, "stage")
            self.capacitor("mid", "0", r.capacitance, 0.0, "stage")
        elif r.topology == "cascade":
            assert r.capacitance is not None
            n = r.stages
            self.winding(1, "p0", "0", ph)
            s_prev = "0"
            for k in range(1, n + 1):
                p_prev = f"p{k - 1}"
                p_k = f"p{k}"
                s_k = top if k == n else f"s{k}"
                self.capacitor(p_k, p_prev, r.capacitance, 0.0, "stage")  # plus on the higher node
                self.diode(s_prev, p_k)
                self.diode(p_k, s_k)
                self.capacitor(s_k, s_prev, r.capacitance, 0.0, "stage")
                s_prev = s_k
        else:  # pragma: no cover - the loader refuses other names
            raise ValueError(r.topology)

    def filters(self) -> str:
        node = "rect"
        n_node = 0
        first = True
        for sec in self.d.filters:
            if sec.kind == "c":
                role = "reservoir" if first and self.d.rectifier.topology in ("half-wave", "centre-tap", "bridge") \
                    else "filter"
                self.capacitor(node, "0", sec.value, sec.esr, role)
            else:
                if first and sec.kind == "l":
                    self.snubber(node, "0", sec.value, "SR")
                n_node += 1
                nxt = f"f{n_node}"
                if sec.kind == "l":
                    self.choke(node, nxt, sec.value, sec.dcr)
                else:
                    self.resistor(node, nxt, sec.value)
                node = nxt
            first = False
        return node

    def load(self, out: str) -> None:
        ld = self.d.load
        if ld is not None:
            self.c.add(Element("VLOAD", (out, "lo"), "0", comment="senses the load current"))
            self.c.load_sense = "VLOAD"
            self.c.load_kind = ld.kind
            if ld.kind == "resistor":
                assert ld.r is not None
                self.c.add(Element("RLOAD", ("lo", "0"), spice(ld.r), comment="load"))
                self.c.resistors.append(ResRef("RLOAD", "lo", "0", ld.r, "load"))
            else:
                assert ld.i is not None
                expr = f"I={spice(ld.i)}*tanh(max(v(lo),0)/{spice(CURRENT_KNEE)})"
                self.c.add(Element("BLOAD", ("lo", "0"), expr, comment="constant-current load"))
        if self.d.bleeder is not None:
            self.c.add(Element("RBLEED", (out, "0"), spice(self.d.bleeder.r), comment="bleeder"))
            self.c.resistors.append(ResRef("RBLEED", out, "0", self.d.bleeder.r, "bleeder"))


def build_circuit(design: Design, phase_deg: float = 0.0, vscale: float = 1.0) -> Circuit:
    """Build the circuit of a design.

    Parameters
    ----------
    design : Design
    phase_deg : float
        Source phase at t = 0, degrees.
    vscale : float
        Multiplies the source EMF (mains corners), e.g. 1.1 for +10 %.
    """
    b = _Builder(design, phase_deg, vscale)
    b.rectifier()
    last = b.filters()
    circuit = b.c
    _rename(circuit, last, "out")
    b.load("out")
    circuit.models.append(diode_model_line(design.rectifier.diode))
    circuit.output = "out"
    circuit.rectified = "out" if last == "rect" else "rect"
    return circuit


def _rename(c: Circuit, old: str, new: str) -> None:
    """Call the last filter node ``out`` in every element and reference."""
    if old == new:
        return

    def m(x: str) -> str:
        return new if x == old else x

    c.elements = [
        Element(e.name, tuple(m(n) for n in e.nodes), e.value, e.comment, e.ic) for e in c.elements
    ]
    c.diodes = [DiodeRef(d.name, d.sense, m(d.anode), m(d.cathode)) for d in c.diodes]
    c.capacitors = [
        CapRef(x.name, m(x.plus), m(x.minus), m(x.inner_plus), m(x.inner_minus), x.sense, x.value, x.role)
        for x in c.capacitors
    ]
    c.inductors = [IndRef(x.name, m(x.a), m(x.b), x.value, x.dcr, x.role) for x in c.inductors]
    c.resistors = [ResRef(x.name, m(x.a), m(x.b), x.value, x.role) for x in c.resistors]
    c.windings = [WindingRef(w.name, w.vrms, m(w.plus), m(w.minus)) for w in c.windings]
