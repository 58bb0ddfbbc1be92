"""Turn a design into a :class:`Circuit`: one generator per stage (source, rectifier, filter, load).

Robust defaults (docs/engine-notes.md): every floating winding terminal is tied to ground through
10 Meg (#ties); an RC snubber (10 nF, R = sqrt(L/C): damping ratio 1/2 with the inductance it
damps) sits wherever inductance feeds the diodes (leakage inductance, or a choke-input filter;
#snubbers); diodes carry TT = 0 and CJO = 0 unless the design says otherwise (#tt-cjo).

A design's own snubbers (``[rectifier] snubber``, ``[source] snubber``) are ``CSD1``/``RSD1`` ...
across each diode and ``CSS1``/``RSS1`` ... across each winding; a design that fits its own
snubbers takes charge of the damping, so simkit's snubber across the winding is left out.  With
``dynamics=True`` (the high-frequency analysis) the silicon diodes get their real transit time and
junction capacitance (:func:`simkit.parts.diodes.dynamics`).

Node names: ``w1p`` EMF terminal, ``ac1``/``ac2`` winding terminals at the diodes,
``rect`` rectifier output, ``f1``, ``f2``... filter nodes, ``out`` the output.

Modes (which time functions are live; see :mod:`simkit.netlist.drives`):

- ``steady``: everything in its final state: heaters warm, loads at their last step,
  keyed loads held key-down (the heaviest steady load);
- ``start``: the timeline from switch-on: rectifier heater warm-up, load warm-ups and load
  steps follow their time functions, keyed loads key-down (a station switched on to send);
- ``keyed``: keyed loads follow their keying; everything else final;
- ``mean``: keyed loads draw their duty-weighted average; everything else final (the
  starting point of the keyed run).
"""

from __future__ import annotations

import itertools
import math
import re
from dataclasses import replace

from simkit.design.model import (
    CurrentLoad,
    Design,
    DiodeModel,
    KeyedLoad,
    KeyState,
    Load,
    ResistorLoad,
    ShuntRegulator,
    StepsLoad,
    TubeLoad,
)
from simkit.design.snubber import Snubber
from simkit.netlist import drives
from simkit.netlist.circuit import (
    CapRef,
    Circuit,
    DiodeRef,
    Element,
    IndRef,
    LoadRef,
    ResRef,
    WindingRef,
)
from simkit.parts.diodes import dynamics as diode_dynamics
from simkit.units import spice

#: Resistance tying floating winding terminals to ground, ohm (docs/engine-notes.md#ties).
FLOAT_TIE = 10e6
#: Snubber capacitance where inductance feeds the diodes, F; R = sqrt(L/C) (damping ratio 1/2).
SNUB_C = 10e-9
#: Knee of the current-load model: below a few volts the sink fades out (tanh), V.
CURRENT_KNEE = 5.0
DIODE_MODEL = "DRECT"


MODES = ("steady", "start", "keyed", "mean")
#: A load's warm-up: it draws nothing until ``warmup``, then rises to full over this share of it.
WARMUP_RISE = 0.2


def keying_drive(load: KeyedLoad) -> drives.Drive:
    """The key of a keyed load: 0 up .. 1 down, repeating every keying cycle."""
    elements, cycle = load.elements()
    return drives.keying_drive(elements, cycle, load.rise, load.fall)


def zener_model(name: str, bv: float, rdyn: float) -> str:
    """A zener as a SPICE diode: breakdown at ``bv``, the dynamic resistance as RS."""
    return f".model {name} D(is=1e-12 n=1 rs={spice(rdyn)} bv={spice(bv)} ibv=1m tt=0 cjo=0)"


#: Name prefixes of a design's own snubbers: across each diode, across each winding.
DIODE_SNUBBER = "SD"
SOURCE_SNUBBER = "SS"


def diode_model_line(d: DiodeModel) -> str:
    """The ``.model`` line of the rectifier diode (with whatever TT and CJO the model carries)."""
    params = [f"is={spice(d.is_)}", f"n={spice(d.n)}", f"rs={spice(d.rs)}", f"tt={spice(d.tt)}",
              f"cjo={spice(d.cjo)}"]
    if d.bv is not None:
        params.append(f"bv={spice(d.bv)}")
    return f".model {DIODE_MODEL} D({' '.join(params)})"


def string_model(d: DiodeModel, n: int) -> DiodeModel:
    """One SPICE diode for ``n`` identical diodes in series (exact when they share equally, derived here).

    The same current flows through each: the string drops n times one diode's voltage, so N and
    RS scale by n and IS stays; each diode stores the same charge (TT stays); the junction
    capacitances are in series (CJO / n; their voltage dependence is taken as one diode's, an
    approximation); the string breaks down at n x BV.
    """
    if n == 1:
        return d
    cjo = {"cjo": d.cjo / n} if d.cjo else {}
    return replace(d, n=d.n * n, rs=d.rs * n, bv=None if d.bv is None else d.bv * n, **cjo)


class _Builder:
    def __init__(self, design: Design, phase_deg: float, vscale: float = 1.0, mode: str = "steady") -> None:
        if mode not in MODES:
            raise ValueError(mode)
        self.d = design
        self.phase = phase_deg
        self.vscale = vscale
        self.mode = mode
        self.c = Circuit(title=design.title, period=design.source.period, mode=mode)
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
        if s.inverter is not None:
            self.inverter_emf(index, emf, minus, phase)
        else:
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
        if node != plus:  # neither R nor L: a 0 ohm link keeps the node names stable
            self.c.add(Element(f"RW{index}", (node, plus), spice(1e-6), comment="winding link (no resistance given)"))
        self.c.windings.append(WindingRef(name, s.vrms * self.vscale, plus, minus, emf))
        if s.snubber is not None:
            self.own_snubber(plus, minus, s.snubber, f"{SOURCE_SNUBBER}{index}", f"winding {index}")
        elif s.inductance > 0 and self.d.rectifier.snubber is None:
            self.snubber(plus, minus, s.inductance, f"SW{index}")

    def inverter_emf(self, index: int, emf: str, minus: str, phase: float) -> None:
        """An inverter's output: a unit waveform times its peak, scaled by battery sag if unregulated.

        ``V{index}`` is a 0 V sense source between the EMF and the winding terminal, so the
        winding's current is named as for a sine source.
        """
        s = self.d.source
        inv = s.inverter
        assert inv is not None
        if "wave" not in {n for e in self.c.elements for n in e.nodes}:
            self.unit_wave(phase)
        sign = "" if index == 1 else "-"
        scale = "*v(scale)" if "vt" in self.c.battery_nodes and not inv.regulated else ""
        amp = spice(inv.peak * self.vscale)
        self.c.add(Element(f"BEMF{index}", (f"w{index}q", minus), f"V={sign}{amp}*v(wave){scale}",
                           comment=f"inverter output {index}: {inv.waveform}, {spice(s.vrms * self.vscale)} Vrms"))
        self.c.add(Element(f"V{index}", (emf, f"w{index}q"), "0", comment=f"senses winding {index} current"))

    def unit_wave(self, phase: float) -> None:
        """Node ``wave``: the inverter's waveform with unit peak."""
        s = self.d.source
        inv = s.inverter
        assert inv is not None
        T = s.period
        f = s.frequency
        if inv.waveform == "sine":
            self.c.add(Element("VWAVE", ("wave", "0"), f"SIN(0 1 {spice(f)} 0 0 {spice(phase)})",
                               comment="unit sine"))
            return
        e = inv.edge_time
        on = inv.duty * T / 2  # time at +-peak in each half period, edges included half
        delay = (T / 4 - on / 2) - phase / 360.0 * T  # centred on the sine's crest
        delay = delay % T
        pos = f"PULSE(0 1 {spice(delay, 9)} {spice(e, 9)} {spice(e, 9)} {spice(max(on - e, e), 9)} {spice(T, 9)})"
        neg = f"PULSE(0 -1 {spice((delay + T / 2) % T, 9)} {spice(e, 9)} {spice(e, 9)} {spice(max(on - e, e), 9)} " \
              f"{spice(T, 9)})"
        kind = "square" if inv.waveform == "square" else "three-level (modified sine)"
        # A switch-on inside a step: PULSE is at its first value until its delay, so the step that is already
        # under way at t = 0 is a pulse of its own (drives.step_under_way), in series with the others.
        under = [(sign, rest) for sign, d in ((1, delay), (-1, (delay + T / 2) % T))
                 if (rest := drives.step_under_way(d, on, e, T)) is not None]
        self.c.add(Element("VWAVEP", ("wavep", "0"), pos, comment=f"{kind}: positive step"))
        top = "wavep"
        for sign, rest in under:
            name = "VWAVE0P" if sign > 0 else "VWAVE0N"
            node = name[1:].lower()
            self.c.add(Element(name, (node, top), f"PULSE(0 {sign} 0 {spice(e, 9)} {spice(e, 9)} "
                               f"{spice(max(rest - e, 0.0), 9)} {spice(1e6, 9)})",
                               comment=f"{kind}: the {'positive' if sign > 0 else 'negative'} step under way at "
                               "switch-on"))
            top = node
        self.c.add(Element("VWAVEN", ("wave", top), neg, comment=f"{kind}: negative step"))

    def battery(self) -> None:
        """Battery and inverter losses: battery current and terminal voltage follow the load.

        The inverter's output power, smoothed with its response time (node ``pout``, a 1 ohm
        1 F-per-second RC), sets its input power by the loss model (node ``pin``); the battery
        terminal voltage solves V = Vb - Rb * P/V (node ``vt``) and the battery current is
        P/V (node ``ib``).  An unregulated inverter scales its output by V/Vb (node ``scale``).
        """
        b = self.d.battery
        inv = self.d.source.inverter
        if b is None or inv is None:
            return
        # Output power at the inverter's terminals (after its output resistance).
        p_terms = "+".join(f"v({w.plus},{w.minus})*(-i({w.name.lower()}))" for w in self.c.windings)
        self.c.add(Element("BPOUT", ("0", "pout"), f"I=max({p_terms},0)", comment="inverter output power"))
        self.c.add(Element("RPOUT", ("pout", "0"), "1", comment="smooths it over the response time"))
        self.c.add(Element("CPOUT", ("pout", "0"), spice(inv.response_time), comment="response time", ic=0.0))
        self.c.capacitors.append(CapRef("CPOUT", "pout", "0", "pout", "0", "", inv.response_time, "aux"))
        if inv.efficiency_table:
            pts = inv.efficiency_table
            pr = inv.rated_power
            x = "v(pout)"
            expr = spice(pts[-1][1], 9)
            for (x0, y0), (x1, y1) in reversed(list(itertools.pairwise(pts))):
                seg = f"({spice(y0, 9)}+({spice(y1 - y0, 9)})*({x}/{spice(pr, 9)}-{spice(x0, 9)})/{spice(x1 - x0, 9)})"
                expr = f"({x}<{spice(x1 * pr, 9)}) ? {seg} : {expr}"
            expr = f"({x}<{spice(pts[0][0] * pr, 9)}) ? {spice(pts[0][1], 9)} : {expr}"
            pin = f"max({spice(inv.idle_power)},{x}/({expr}))"
        else:
            pin = f"{spice(inv.idle_power)}+v(pout)+{spice(inv.loss_k, 9)}*v(pout)*v(pout)"
        self.c.add(Element("BPIN", ("pin", "0"), f"V={pin}", comment="inverter input power (loss model)"))
        vb, rb = spice(b.voltage), spice(b.internal_resistance)
        if b.internal_resistance > 0:
            vt = f"V=({vb}+sqrt(max({vb}*{vb}-4*{rb}*v(pin),0)))/2"
        else:
            vt = f"V={vb}"
        self.c.add(Element("BVT", ("vt", "0"), vt, comment="battery terminal voltage"))
        self.c.add(Element("BIB", ("ib", "0"), f"V=v(pin)/max(v(vt),{spice(0.05 * b.voltage)})",
                           comment="battery current (as volts)"))
        for n in ("pin", "vt", "ib"):
            self.c.add(Element(f"RB{n.upper()}", (n, "0"), "1Meg", comment="keeps the node defined"))
        self.c.battery_nodes.update({"pout": "pout", "pin": "pin", "vt": "vt", "ib": "ib"})
        if not inv.regulated:
            self.c.add(Element("BSCALE", ("scale", "0"), f"V=v(vt)/{vb}", comment="output follows battery sag"))
            self.c.add(Element("RBSCALE", ("scale", "0"), "1Meg", comment="keeps the node defined"))
            self.c.battery_nodes["scale"] = "scale"

    def drive(self, name: str, node: str, drive: drives.Drive, comment: str) -> str:
        self.c.add(Element(name, (node, "0"), "", comment=comment, drive=drive))
        return f"v({node})"

    def snubber(self, a: str, b: str, inductance: float, tag: str) -> None:
        """The snubber simkit adds where inductance feeds the diodes: SNUB_C, and R near the ringing's impedance."""
        r = min(max(math.sqrt(inductance / SNUB_C), 100.0), 100e3)
        self._rc(a, b, SNUB_C, r, tag, "snubber (damps inductance at the diodes)", "snubber")

    def own_snubber(self, a: str, b: str, snub: Snubber, tag: str, across: str) -> None:
        """A snubber the design fits (``C{tag}`` then ``R{tag}``, from ``a`` to ``b``)."""
        words = f"snubber across {across} (design)"
        self._rc(a, b, snub.c, snub.r, tag, words, words)

    def _rc(self, a: str, b: str, c: float, r: float, tag: str, c_words: str, r_words: str) -> None:
        """A series RC from ``a`` to ``b``: ``C{tag}`` (starting empty), then ``R{tag}``."""
        mid = f"{tag.lower()}m"
        self.c.add(Element(f"C{tag}", (a, mid), spice(c), comment=c_words, ic=0.0))
        self.c.add(Element(f"R{tag}", (mid, b), spice(r), comment=r_words))
        self.c.capacitors.append(CapRef(f"C{tag}", a, b, a, mid, "", c, "snubber"))
        self.c.resistors.append(ResRef(f"R{tag}", mid, b, r, "snubber"))

    def tie(self, node: str) -> None:
        name = f"RT{node.upper()}"
        self.c.add(Element(name, (node, "0"), spice(FLOAT_TIE), comment="ties a floating winding to ground"))

    def diode(self, anode: str, cathode: str) -> None:
        self.n_diode += 1
        k = self.n_diode
        inner = f"d{k}a"
        self.c.add(Element(f"VD{k}", (anode, inner), "0", comment=f"senses D{k} current"))
        vac = self.d.rectifier.diode.vacuum
        if vac is None:
            n = self.d.rectifier.series
            self.c.add(Element(f"D{k}", (inner, cathode), DIODE_MODEL, comment="anode cathode ->|-"
                               + (f", a string of {n} in series" if n > 1 else "")))
            self.sharing(k, anode, cathode)
        else:
            # A vacuum plate: Child-Langmuir current, none in reverse (docs/engine-notes.md#tube-law: max(v,0),
            # never a smoothed exponential).  Emission follows the heater in the start-up run.
            heat = ""
            if self.mode == "start" and vac.warmup_full > 0:
                if "heat" not in {n for e in self.c.elements for n in e.nodes}:
                    self.drive("VHEAT", "heat", drives.ramp(vac.warmup_start, vac.warmup_full),
                               comment="rectifier cathode emission, 0 cold .. 1 warm")
                heat = "*v(heat)"
            expr = f"I={spice(vac.perveance, 9)}*pow(max(v({inner},{cathode}),0),1.5){heat}"
            self.c.add(Element(f"BD{k}", (inner, cathode), expr, comment="plate cathode, i = P v^1.5"))
        self.c.diodes.append(DiodeRef(f"D{k}", f"VD{k}", anode, cathode))
        if self.d.rectifier.snubber is not None:
            self.own_snubber(anode, cathode, self.d.rectifier.snubber, f"{DIODE_SNUBBER}{k}", f"D{k}")

    def sharing(self, k: int, anode: str, cathode: str) -> None:
        """The sharing resistors of string ``k``: one per diode, drawn as one element of their sum (identical
        diodes with equal resistors share equally, so each diode's resistor sees the string's voltage / n)."""
        r = self.d.rectifier
        if r.sharing is None or r.series < 2:
            return
        total = r.sharing * r.series
        self.c.add(Element(f"RSH{k}", (anode, cathode), spice(total),
                           comment=f"sharing resistors of D{k}: {r.series} x {spice(r.sharing)}"))
        self.c.resistors.append(ResRef(f"RSH{k}", anode, cathode, total, "sharing"))

    def heaters(self) -> None:
        """Heater and filament windings of a transformer: each its EMF, its resistance and the heaters.

        They share the core, so their EMFs are in phase with winding 1; their currents reach the
        primary (``primary_rms_a``), not the rectifier.  Each delivers its ``vrms`` at its current
        at nominal mains (the transformer's regulation shared by every winding).
        """
        s = self.d.source
        tr = s.transformer
        if tr is None or not tr.heaters:
            return
        for k, h in enumerate(tr.heaters, start=1):
            emf = tr.heater_emf(h) * self.vscale
            self.c.add(Element(f"VH{k}", (f"h{k}e", "0"), f"SIN(0 {spice(math.sqrt(2.0) * emf)} {spice(s.frequency)} 0 "
                               f"0 {spice(self.phase)})", comment=f"heater winding {k} EMF, {spice(emf)} Vrms"))
            self.c.add(Element(f"RWH{k}", (f"h{k}e", f"h{k}"), spice(tr.heater_resistance(h)),
                               comment=f"heater winding {k} resistance"))
            self.c.add(Element(f"RH{k}", (f"h{k}", "0"), spice(h.vrms / h.i),
                               comment=f"heaters on winding {k}: {spice(h.vrms)} V {spice(h.i)} A"))

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

    def stage_cap(self, plus: str, minus: str) -> None:
        """A doubler or cascade capacitor, with its balancing resistor when the design has one."""
        r = self.d.rectifier
        assert r.capacitance is not None
        name = self.capacitor(plus, minus, r.capacitance, r.capacitor_esr, "stage")
        if r.balancing is not None:
            rname = f"RBAL{name[1:]}"
            self.c.add(Element(rname, (plus, minus), spice(r.balancing), comment=f"balances {name}"))
            self.c.resistors.append(ResRef(rname, plus, minus, r.balancing, "balancing"))

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
            self.stage_cap(top, "mid")
            self.stage_cap("mid", "0")
        elif r.topology == "cascade":
            assert r.capacitance is not None
            n = r.stages
            self.winding(1, "p0", "0", ph)
            s_prev = "0"
            for k in range(1, n + 1):
                p_prev = f"p{k - 1}"
                p_k = f"p{k}"
                s_k = top if k == n else f"s{k}"
                self.stage_cap(p_k, p_prev)  # plus on the higher node
                self.diode(s_prev, p_k)
                self.diode(p_k, s_k)
                self.stage_cap(s_k, s_prev)
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
            self.c.section_nodes.append(node)
            first = False
        return node

    def regulator(self) -> None:
        """The regulator between the filter's last node ``raw`` and the output ``out``."""
        reg = self.d.regulator
        assert reg is not None
        self.c.regulator = {"input": "raw", "output": "out"}
        if isinstance(reg, ShuntRegulator):
            self.c.add(Element("RREG", ("raw", "out"), spice(reg.resistance), comment="shunt dropping resistor"))
            self.c.resistors.append(ResRef("RREG", "raw", "out", reg.resistance, "regulator"))
            self.c.add(Element("VSHUNT", ("out", "sh"), "0", comment="senses the shunt current"))
            self.c.regulator["shunt_sense"] = "VSHUNT"
            if reg.zener is not None:
                z = reg.zener
                self.c.add(Element("DZ", ("0", "sh"), "DZENER", comment=f"{z.count} x {spice(z.voltage)} V zener"))
                self.c.models.append(zener_model("DZENER", z.voltage * z.count, z.resistance * z.count))
            else:
                g = reg.glow
                assert g is not None
                n = g.count
                vt = (g.striking + g.extinction) / 2 * n
                vh = (g.striking - g.extinction) / 2 * n
                # The switch watches the tube voltage through 10 us of RC: striking then has a cause
                # and an effect in time, not an algebraic loop the integrator cannot step over.
                self.c.add(Element("RGLC", ("sh", "glc"), "10k", comment="strike sensing"))
                self.c.add(Element("CGLC", ("glc", "0"), "1n", comment="strike sensing", ic=0.0))
                self.c.capacitors.append(CapRef("CGLC", "glc", "0", "glc", "0", "", 1e-9, "sense"))
                self.c.add(Element("SGLOW", ("sh", "g1", "glc", "0"), "SWGLOW",
                                   comment=f"{n} x {g.name}: strikes above {spice(g.striking * n)} V"))
                expr = f"I=max(v(g1)-{spice(g.maintaining * n)},0)/{spice(g.resistance * n)}"
                self.c.add(Element("BGLOW", ("g1", "0"), expr, comment="maintaining voltage and dynamic resistance"))
                self.c.add(Element("RGLOW", ("g1", "0"), "1G", comment="keeps the node defined while unstruck"))
                self.c.models.append(f".model SWGLOW SW(vt={spice(vt)} vh={spice(vh)} ron=1 roff=1e12)")
                self.c.hidden_state = True  # struck or not is not a capacitor voltage: no restart sets it
            return
        z = reg.zener
        dev = reg.device
        crest = self.d.source.vpeak * {"doubler": 2, "cascade": 2 * self.d.rectifier.stages}.get(
            self.d.rectifier.topology, 1)
        r_ref = max((0.9 * crest - reg.reference) / reg.reference_current, 1e3)
        self.c.regulator["reference_resistor"] = f"{r_ref:.6g}"
        self.c.add(Element("RREF", ("raw", "ref1"), spice(r_ref), comment="feeds the reference"))
        self.c.resistors.append(ResRef("RREF", "raw", "ref1", r_ref, "regulator"))
        self.c.add(Element("DREF", ("0", "ref1"), "DZREF", comment=f"reference, {spice(reg.reference)} V"))
        self.c.models.append(zener_model("DZREF", reg.reference, z.resistance * z.count))
        self.c.add(Element("RFREF", ("ref1", "ref2"), spice(reg.filter_r), comment="reference filter"))
        self.c.resistors.append(ResRef("RFREF", "ref1", "ref2", reg.filter_r, "regulator"))
        name = self.capacitor("ref2", "0", reg.filter_c, 0.0, "reference")
        self.c.regulator["filter_capacitor"] = name
        self.c.add(Element("RGATE", ("ref2", "gate"), spice(reg.gate_resistor), comment="gate stopper"))
        self.c.add(Element("VPASS", ("raw", "drn"), "0", comment="senses the pass device current"))
        self.c.add(Element("MPASS", ("drn", "gate", "out", "out"), "MPASSM", comment=f"pass device {dev.name}"))
        self.c.models.append(f".model MPASSM NMOS(level=1 vto={spice(dev.vto)} kp={spice(dev.kp)})")
        self.c.add(Element("DGS", ("out", "gate"), "DZGS",
                           comment=f"gate-source protection, {spice(reg.gate_zener)} V"))
        self.c.models.append(zener_model("DZGS", reg.gate_zener, 5.0))
        self.c.regulator["pass_sense"] = "VPASS"

    def loads(self) -> None:
        for idx, ld in enumerate(self.d.loads):
            node = "out" if ld.at is None else self.c.section_nodes[ld.at]
            self.load(idx, ld, node)
        top = "raw" if self.d.regulator is not None else "out"  # a bleeder belongs on the capacitors
        if self.d.bleeder is not None:
            self.c.add(Element("RBLEED", (top, "0"), spice(self.d.bleeder.r), comment="bleeder"))
            self.c.resistors.append(ResRef("RBLEED", top, "0", self.d.bleeder.r, "bleeder"))
        elif not self.d.loads:
            # Nothing across the output (an idle supply, or the load gone): 1 G keeps the node defined.
            self.c.add(Element("RTOUT", ("out", "0"), spice(1e9), comment="keeps an unloaded output defined"))

    def load(self, idx: int, ld: Load, node: str) -> None:
        sfx = ld.name[4:]  # "" or the load's number
        sense = f"VLOAD{sfx}"
        lo = f"lo{sfx}"
        self.c.add(Element(sense, (node, lo), "0", comment="senses the load current"))
        warm = ""
        if self.mode == "start" and ld.warmup:
            warm = "*" + self.drive(f"VWARM{sfx}", f"warm{sfx}", drives.ramp(ld.warmup, ld.warmup * (1 + WARMUP_RISE)),
                                    comment="load heaters: draws nothing until warm")
        v = f"v({lo})"
        knee = spice(CURRENT_KNEE)

        def state(st: KeyState) -> str:
            if st.r is not None:
                return f"{v}/{spice(st.r)}"
            return f"{spice(st.i or 0.0)}*tanh(max({v},0)/{knee})"

        if isinstance(ld, ResistorLoad) and not warm:
            self.c.add(Element(f"RLOAD{sfx}", (lo, "0"), spice(ld.r), comment="load"))
            self.c.resistors.append(ResRef(f"RLOAD{sfx}", lo, "0", ld.r, "load"))
            self.c.loads.append(LoadRef(f"RLOAD{sfx}", sense, node, idx))
            return
        if isinstance(ld, ResistorLoad):
            expr = f"{v}/{spice(ld.r)}"
            what = "resistive load"
        elif isinstance(ld, CurrentLoad):
            expr = state(KeyState(i=ld.i))
            what = "constant-current load"
        elif isinstance(ld, TubeLoad):
            expr = f"{spice(ld.perveance, 9)}*pow(max({v},0),1.5)"
            what = f"tube load, i = P v^1.5 through {spice(ld.tube_v)} V {spice(ld.tube_i)} A"
        elif isinstance(ld, StepsLoad):
            if self.mode == "start":
                step = self.drive(f"VSTEP{sfx}", f"step{sfx}", drives.steps_drive(ld.steps, STEP_EDGE),
                                  comment="load current steps (A as V)")
                expr = f"{step}*tanh(max({v},0)/{knee})"
            else:
                expr = state(KeyState(i=ld.steps[-1][1]))
            what = "stepped load"
        elif self.mode == "keyed":
            key = self.drive(f"VKEY{sfx}", f"key{sfx}", keying_drive(ld), comment="key: 0 up .. 1 down")
            expr = f"({state(ld.down)})*{key}+({state(ld.up)})*(1-{key})"
            what = "keyed load"
        elif self.mode == "mean":
            dty = spice(ld.duty_share(), 9)
            expr = f"({state(ld.down)})*{dty}+({state(ld.up)})*(1-{dty})"
            what = "keyed load, duty-weighted mean"
        else:
            expr = state(ld.down)
            what = "keyed load held key-down"
        self.c.add(Element(f"BLOAD{sfx}", (lo, "0"), f"I=({expr}){warm}", comment=what))
        self.c.loads.append(LoadRef(f"BLOAD{sfx}", sense, node, idx))


#: Edge time of a load step, s.
STEP_EDGE = 1e-3


def build_circuit(design: Design, phase_deg: float = 0.0, vscale: float = 1.0, mode: str = "steady",
                  dynamics: bool = False) -> Circuit:
    """Build the circuit of a design.

    Parameters
    ----------
    design : Design
    phase_deg : float
        Source phase at t = 0, degrees.
    vscale : float
        Multiplies the source EMF (mains corners), e.g. 1.1 for +10 %.
    mode : str
        Which time functions are live (module docstring).
    dynamics : bool
        Silicon diodes with their real transit time and junction capacitance (the high-frequency
        analysis), instead of TT = 0 and CJO = 0.
    """
    b = _Builder(design, phase_deg, vscale, mode)
    if design.battery is not None and design.source.inverter is not None and not design.source.inverter.regulated:
        b.c.battery_nodes["vt"] = "vt"  # tells the inverter EMF to follow the battery (built below)
    b.rectifier()
    b.heaters()
    last = b.filters()
    circuit = b.c
    supply = "raw" if design.regulator is not None else "out"
    _rename(circuit, last, supply)
    if design.regulator is not None:
        b.regulator()
    b.loads()
    b.battery()
    if not design.rectifier.diode.is_vacuum:
        dm = design.rectifier.diode
        if dynamics:  # the part's real recovery and capacitance, for one diode; the string divides them
            tt, cjo = diode_dynamics(dm)
            dm = replace(dm, tt=tt, cjo=cjo)
        circuit.models.append(diode_model_line(string_model(dm, design.rectifier.series)))
    circuit.output = "out"
    circuit.rectified = supply if last == "rect" else "rect"
    return circuit


def _rename(c: Circuit, old: str, new: str) -> None:
    """Call the last filter node ``out`` in every element and reference."""
    if old == new:
        return

    def m(x: str) -> str:
        return new if x == old else x

    def in_expr(text: str) -> str:  # node names inside v(a) and v(a,b) of behavioural sources
        return re.sub(r"v\(([^()]*)\)", lambda g: "v(" + ",".join(m(x.strip()) for x in g.group(1).split(",")) + ")",
                      text)

    c.elements = [replace(e, nodes=tuple(m(n) for n in e.nodes), value=in_expr(e.value)) for e in c.elements]
    c.diodes = [DiodeRef(d.name, d.sense, m(d.anode), m(d.cathode)) for d in c.diodes]
    c.capacitors = [
        CapRef(x.name, m(x.plus), m(x.minus), m(x.inner_plus), m(x.inner_minus), x.sense, x.value, x.role)
        for x in c.capacitors
    ]
    c.inductors = [IndRef(x.name, m(x.a), m(x.b), x.value, x.dcr, x.role) for x in c.inductors]
    c.resistors = [ResRef(x.name, m(x.a), m(x.b), x.value, x.role) for x in c.resistors]
    c.windings = [WindingRef(w.name, w.vrms, m(w.plus), m(w.minus), m(w.emf)) for w in c.windings]
    c.section_nodes = [m(n) for n in c.section_nodes]
