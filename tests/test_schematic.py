"""The schematic against the deck: one symbol for every part ngspice simulates, and labels that
never overlap, for every shipped example and every topology x filter x regulator a design allows.

The reference is the deck itself (:func:`simkit.netlist.build.build_circuit`): which of its
elements are parts a builder buys, and what kind of symbol each is, is read here from the
element names and nodes as DEVELOPERS.md documents them ("Element names say what they are"),
independently of the schematic's own bookkeeping (derived here).  Label extents are the ones
matplotlib lays out for the drawn figure, so overlap is measured, not estimated.
"""

from __future__ import annotations

import itertools
import random
import re
from collections import Counter
from pathlib import Path

import pytest

from simkit.design.loader import load_design
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Circuit
from simkit.report.schematic import Schematic, draw_schematic
from simkit.units import eng

EXAMPLES = Path(__file__).resolve().parents[1] / "simkit" / "examples"

TOPOLOGIES = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")
FILTERS = {
    "capacitor input": ['c = "100u"\nesr = "0.5"'],
    "CRC": ['c = "47u"', 'r = "1k"', 'c = "47u"'],
    "CLC": ['c = "47u"', 'l = "5"\ndcr = "100"', 'c = "47u"'],
    "choke input": ['l = "10"\ndcr = "150"', 'c = "40u"'],
}
REGULATORS = {
    "none": "",
    "shunt zener": '[regulator]\nkind = "shunt"\nresistance = "2.2k"\n'
                   'zener = { voltage = "75", count = 3, power = "5" }',
    "shunt glow tube": '[regulator]\nkind = "shunt"\nresistance = "3.3k"\ntube = "OD3"\ncount = 2',
    "series MOSFET": '[regulator]\nkind = "series"\nreference = "250"\ndevice = "IRF840"',
}
STAGES = {"doubler": 'capacitance = "220u"', "cascade": 'stages = 2\ncapacitance = "10u"'}
#: Variants cycled through the combinations so each also covers a rectifier kind and, on some, a
#: winding with leakage inductance (its snubber), balancing resistors and a second load at a tap.
DIODES = ("1N4007", "5Y3GT", "UF4007", "6X4", "1N5408", "5AR4")

TEMPLATE = """\
title = "{name}"
[source]
kind = "sine"
vrms = "250"
frequency = "50"
resistance = "25"
inductance = "{lw}"
[rectifier]
topology = "{topology}"
diode = "{diode}"
{stages}
{filters}
{regulator}
[[load]]
kind = "resistor"
r = "10k"
{tap}
[bleeder]
r = "220k"
"""

TAP = '[[load]]\nkind = "current"\ni = "10m"\nat = 0'

#: Deck elements of the inverter's battery and loss model, and of the glow tube's strike switch:
#: they model one drawn part (the inverter V1, the tube GLOW), they are not parts of their own.
BATTERY_MODEL = {"BPOUT", "RPOUT", "CPOUT", "BPIN", "BVT", "BIB", "RBPIN", "RBVT", "RBIB", "BSCALE", "RBSCALE"}
GLOW_MODEL = {"SGLOW", "BGLOW", "RGLOW", "RGLC", "CGLC"}


def deck_symbols(circuit: Circuit) -> tuple[Counter[str], set[str]]:
    """The symbols a complete schematic of this deck has, by kind, and the part names they show.

    Read from the deck's elements alone (names, nodes, comments), derived here.
    """
    kinds: Counter[str] = Counter()
    names: set[str] = set()
    plates: dict[str, list[str]] = {}
    for e in circuit.elements:
        n = e.name
        if n in BATTERY_MODEL or n.startswith(("VD", "VC", "VLOAD", "VPASS", "VSHUNT", "VWAVE", "VHEAT", "VWARM",
                                               "VSTEP", "VKEY", "RT", "RESR", "RDCR", "RSH", "VH", "RWH", "RH")):
            continue  # numerics only: senses, drives, ties, and ESR/DCR shown in their part's label; likewise
            # a diode string's sharing resistors (RSH, in its diodes' label) and the heater windings (VH, RWH,
            # RH: in the transformer winding's label)
        if n in GLOW_MODEL:
            if n == "SGLOW":
                kinds["glow tube"] += 1
                names.add("GLOW")
            continue
        if re.fullmatch(r"V\d+", n) or re.fullmatch(r"BEMF\d+", n):
            name = "V" + re.sub(r"\D", "", n)
            if name not in names:
                kinds["source"] += 1
                names.add(name)
            continue
        if re.fullmatch(r"RW\d+", n) and "link" in e.comment:
            continue  # the 0 ohm link of a winding given no resistance
        if re.fullmatch(r"BD\d+", n):
            plates.setdefault(e.nodes[1], []).append(n[1:])  # plates grouped by their cathode
            continue
        if n.startswith("BLOAD"):
            kind = "current sink"
        elif n in ("DZ", "DREF", "DGS"):
            kind = "zener"
        elif n.startswith("M"):
            kind = "mosfet"
        else:
            kind = {"R": "resistor", "C": "capacitor", "L": "inductor", "D": "diode"}[n[0]]
        kinds[kind] += 1
        names.add(n)
    for group in plates.values():  # a full-wave tube holds two plates on one cathode
        kinds["tube"] += (len(group) + 1) // 2
        names.update(group)
    return kinds, names


def overlaps(sch: Schematic) -> list[tuple[str, str]]:
    """Pairs of texts whose drawn extents overlap (half a pixel of touching allowed)."""
    boxes = sch.text_boxes
    found = []
    for (ta, a), (tb, b) in itertools.combinations(boxes, 2):
        if a[0] < b[2] - 0.5 and b[0] < a[2] - 0.5 and a[1] < b[3] - 0.5 and b[1] < a[3] - 0.5:
            found.append((ta, tb))
    return found


def check(sch: Schematic, circuit: Circuit) -> None:
    kinds, names = deck_symbols(circuit)
    assert Counter(kind for kind, _names in sch.symbols) == kinds
    assert sorted(sch.drawn) == sorted(names)  # every part, each once
    assert not sch.not_drawn
    assert overlaps(sch) == []
    # Each label names its part(s) on its first line and shows the value the deck simulates.
    for part, label in sch.labels.items():
        assert part in label.splitlines()[0].split(", "), (part, label)
    values = [(r.name, r.value, "Ω") for r in circuit.resistors if r.role not in ("esr", "dcr", "sharing")]
    for r in circuit.resistors:  # a string's sharing resistors: one across each diode, in the string's label
        if r.role == "sharing":
            diode = circuit.element("D" + r.name[3:])
            n = int(re.search(r"a string of (\d+)", diode.comment).group(1))  # type: ignore[union-attr]
            values.append((diode.name, r.value / n, "Ω"))
    values += [(c.name, c.value, "F") for c in circuit.capacitors if c.name in names]
    values += [(x.name, x.value, "H") for x in circuit.inductors]
    for name, value, unit in values:
        assert eng(value, unit) in sch.labels[name], (name, sch.labels[name])


@pytest.mark.parametrize("path", sorted(EXAMPLES.glob("*.toml")), ids=lambda p: p.stem)
def test_every_shipped_example_draws_every_part_without_overlaps(path: Path) -> None:
    design = load_design(path)
    circuit = build_circuit(design)
    check(draw_schematic(design, circuit), circuit)


COMBINATIONS = list(itertools.product(TOPOLOGIES, FILTERS, REGULATORS))


@pytest.mark.parametrize(("topology", "filt", "regulator"), COMBINATIONS,
                         ids=["-".join(c).replace(" ", "_") for c in COMBINATIONS])
def test_every_combination_draws_every_part_without_overlaps(tmp_path: Path, topology: str, filt: str,
                                                             regulator: str) -> None:
    rng = random.Random(COMBINATIONS.index((topology, filt, regulator)))  # the same variants every run
    diode = rng.choice(DIODES)
    leakage, tap, balancing = rng.random() < 0.5, rng.random() < 0.3, rng.random() < 0.5
    stages = STAGES.get(topology, "") + ('\nbalancing = "1Meg"' if topology in STAGES and balancing else "")
    text = TEMPLATE.format(name=f"{topology}, {filt}, {regulator}", topology=topology, diode=diode,
                           lw="5m" if leakage else "0", stages=stages,
                           filters="\n".join(f"[[filter]]\n{f}" for f in FILTERS[filt]),
                           regulator=REGULATORS[regulator], tap=TAP if tap else "")
    path = tmp_path / "design.toml"
    path.write_text(text, "utf-8")
    design = load_design(path)
    circuit = build_circuit(design)
    check(draw_schematic(design, circuit), circuit)


def test_the_counts_see_a_missing_symbol_and_an_overlap(tmp_path: Path) -> None:
    """The checks above can fail: drop one symbol, or move one label onto another."""
    design = load_design(EXAMPLES / "portable_cw_regulated.toml")
    circuit = build_circuit(design)
    sch = draw_schematic(design, circuit)
    kinds, _names = deck_symbols(circuit)
    fewer = Counter(kind for kind, _n in sch.symbols[1:])
    assert fewer != kinds
    (t0, b0), (t1, _b1) = sch.text_boxes[0], sch.text_boxes[1]
    moved = Schematic(sch.png, sch.svg, text_boxes=[(t0, b0), (t1, b0)])
    assert overlaps(moved) == [(t0, t1)]


def test_a_tube_rectifier_is_one_envelope_per_cathode(tmp_path: Path) -> None:
    """A full-wave tube's two plates share one envelope (centre-tap); in a bridge the two plates
    on the output share one and the two on the winding terminals have one each (their cathodes
    differ).  Datasheet: RCA 5Y3GT, two plates and one filament in one bulb (from memory)."""
    counts = {}
    for topology in ("centre-tap", "bridge", "half-wave"):
        text = TEMPLATE.format(name=topology, topology=topology, diode="5Y3GT", lw="0", stages="",
                               filters='[[filter]]\nc = "20u"', regulator="", tap="")
        path = tmp_path / f"{topology}.toml"
        path.write_text(text, "utf-8")
        design = load_design(path)
        sch = draw_schematic(design, build_circuit(design))
        counts[topology] = [names for kind, names in sch.symbols if kind == "tube"]
        assert not [kind for kind, _n in sch.symbols if kind == "diode"]
        assert "5Y3GT" in sch.labels["D1"] and "filament 5 V 2 A" in sch.labels["D1"]
    assert counts["centre-tap"] == [("D1", "D2")]
    assert sorted(counts["bridge"]) == [("D1", "D2"), ("D3",), ("D4",)]
    assert counts["half-wave"] == [("D1",)]


def test_run_on_labels_are_gone() -> None:
    """The bridge example once printed its source's frequency and a diode's part number as one
    word ("50 Hz1N4007"): no two texts touch now, and the frequency stands on its own line."""
    design = load_design(EXAMPLES / "bench_amp_bridge_clc.toml")
    sch = draw_schematic(design, build_circuit(design))
    assert overlaps(sch) == []
    assert "50 Hz" in sch.labels["V1"].splitlines()
    assert [t for t, _b in sch.text_boxes if "1N4007" in t] and not [t for t, _b in sch.text_boxes if "Hz1N" in t]


def test_regulators_are_drawn_part_by_part(tmp_path: Path) -> None:
    design = load_design(EXAMPLES / "portable_cw_regulated.toml")
    sch = draw_schematic(design, build_circuit(design))
    kinds = dict(Counter(kind for kind, _n in sch.symbols))
    assert kinds["mosfet"] == 1 and kinds["zener"] == 2  # the reference and the gate-source zener
    for part in ("MPASS", "DREF", "RREF", "RFREF", "RGATE", "DGS"):
        assert part in sch.drawn
    assert "IRF840" in sch.labels["MPASS"] and "560 V" in sch.labels["DREF"]
    ref = next(c for c in build_circuit(design).capacitors if c.role == "reference")
    assert ref.name in sch.drawn  # the reference filter's capacitor


def test_a_load_at_a_tap_is_drawn_at_its_node(tmp_path: Path) -> None:
    text = TEMPLATE.format(name="tap", topology="bridge", diode="1N4007", lw="0", stages="",
                           filters="\n".join(f"[[filter]]\n{f}" for f in FILTERS["CRC"]), regulator="", tap=TAP)
    path = tmp_path / "tap.toml"
    path.write_text(text, "utf-8")
    design = load_design(path)
    circuit = build_circuit(design)
    sch = draw_schematic(design, circuit)
    tap = next(r for r in circuit.loads if r.index == 1)
    assert tap.node == "rect" and f"load at {tap.node}" in sch.labels[tap.name]
    check(sch, circuit)
