"""The design-file vocabulary: every section and key, its unit, default and meaning.

One table serves three jobs: the loader refuses keys that are not here (and suggests the
nearest that is), ``simkit new`` writes templates from it, and docs/reference.md is
checked against it by a test so the user reference cannot fall behind.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Key:
    """One design-file key."""

    unit: str  # "V", "A", "ohm", "F", "H", "Hz", "s", "%", "deg", "int", "str", "diode", ...
    doc: str
    required: bool = False
    default: str | None = None  # as the user would write it; None: no default


TOP: dict[str, Key] = {
    "title": Key("str", "one line naming the design; shown in tables and reports", default="file name"),
    "note": Key("str", "free text for reports (never written into a deck)", default='""'),
    "source": Key("table", "the winding or inverter output that feeds the rectifier", required=True),
    "rectifier": Key("table", "the rectifier arrangement and its diodes", required=True),
    "filter": Key("array", "filter sections from the rectifier towards the load, in order"),
    "load": Key("table", "the load across the output (omit for an idle supply)"),
    "bleeder": Key("table", "a bleeder resistor across the output"),
    "simulation": Key("table", "how the analyses run"),
    "spread": Key("table", "how `simkit spread` draws values within their tolerances"),
}

SOURCE: dict[str, Key] = {
    "kind": Key("str", '"sine": an ideal sine EMF behind series R and L', default='"sine"'),
    "vrms": Key("V", "open-circuit RMS voltage (each half for centre-tap)", required=True),
    "frequency": Key("Hz", "mains or inverter frequency", required=True),
    "resistance": Key(
        "ohm",
        "series resistance of the winding plus the primary referred to the secondary "
        "(each half for centre-tap)",
        required=True,
    ),
    "inductance": Key("H", "series leakage inductance (each half for centre-tap)", default="0"),
    "mains_tolerance": Key("%", "supply range, +- this fraction, for corner checks", default="none"),
}

RECTIFIER: dict[str, Key] = {
    "topology": Key(
        "str", '"half-wave", "centre-tap", "bridge", "doubler" or "cascade"', required=True
    ),
    "diode": Key(
        "diode",
        "a library part (see `simkit parts`) or an inline model "
        '{ is = "5n", n = 1.8, rs = "40m" }',
        default='"1N4007"',
    ),
    "stages": Key("int", "cascade only: number of stages (n stages give about 2n x Vpeak)", default="1"),
    "capacitance": Key("F", "doubler and cascade: each stage capacitor", default="required there"),
    "capacitance_tolerance": Key("%", "tolerance of capacitance, for `simkit spread`", default="none"),
}

DIODE_INLINE: dict[str, Key] = {
    "is": Key("A", "saturation current", required=True),
    "n": Key("", "emission coefficient (down to 0.01 for a near-ideal diode)", default="1"),
    "rs": Key("ohm", "series resistance", default="0"),
    "bv": Key("V", "reverse breakdown voltage", default="none (no breakdown modelled)"),
    "tt": Key("s", "transit time (stored charge)", default="0"),
    "cjo": Key("F", "zero-bias junction capacitance", default="0"),
    "vrrm": Key("V", "rated repetitive peak reverse voltage, for checks", default="none"),
    "ifav": Key("A", "rated mean forward current, for checks", default="none"),
    "ifsm": Key("A", "rated surge current, for checks", default="none"),
}

FILTER: dict[str, Key] = {
    "c": Key("F", "shunt capacitor to the return; a first c is the reservoir"),
    "esr": Key("ohm", "equivalent series resistance of c", default="0"),
    "l": Key("H", "series choke; a first l makes a choke-input filter"),
    "dcr": Key("ohm", "winding resistance of l", default="0"),
    "r": Key("ohm", "series resistor"),
    "tolerance": Key("%", "tolerance of the section's c, l or r value, for `simkit spread`", default="none"),
}

LOAD: dict[str, Key] = {
    "kind": Key("str", '"resistor" (needs r) or "current" (needs i)', required=True),
    "r": Key("ohm", "load resistance (kind resistor)"),
    "i": Key(
        "A",
        "load current (kind current); it fades out below 5 V so an empty supply is not "
        "driven negative",
    ),
    "tolerance": Key("%", "tolerance of r or i, for `simkit spread`", default="none"),
}

BLEEDER: dict[str, Key] = {
    "r": Key("ohm", "bleeder resistance across the output", required=True),
    "tolerance": Key("%", "tolerance of r, for `simkit spread`", default="none"),
}

SPREAD: dict[str, Key] = {
    "distribution": Key(
        "str",
        '"uniform" (anywhere within +- tolerance) or "normal" (the tolerance is 3 standard '
        "deviations), for `simkit spread`",
        default='"uniform"',
    ),
}

SIMULATION: dict[str, Key] = {
    "switch_on_phase": Key("deg", "source phase at switch-on for the surge run (90 = crest)", default="90"),
    "steps_per_period": Key("int", "the maximum time step is one period divided by this", default="1000"),
    "settle_tolerance": Key("", "relative change per period below which the output counts as settled", default="1e-4"),
    "max_settle_time": Key(
        "s", "give up waiting for steady state after this much simulated time", default="400 periods"
    ),
    "switch_on_time": Key("s", "length of the switch-on run", default="from the circuit's time constants"),
    "reltol": Key("", "ngspice relative tolerance", default="1e-4"),
}

SECTIONS: dict[str, dict[str, Key]] = {
    "": TOP,
    "source": SOURCE,
    "rectifier": RECTIFIER,
    "rectifier.diode": DIODE_INLINE,
    "filter": FILTER,
    "load": LOAD,
    "bleeder": BLEEDER,
    "simulation": SIMULATION,
    "spread": SPREAD,
}
