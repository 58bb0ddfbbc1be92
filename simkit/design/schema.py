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
    "library": Key("str", "a parts file of your own (TOML, path relative to the design file): diodes by name, "
                   "and ratings for capacitors, chokes and resistors used with part = \"NAME\""),
    "source": Key("table", "the winding or inverter output that feeds the rectifier", required=True),
    "rectifier": Key("table", "the rectifier arrangement and its diodes", required=True),
    "filter": Key("array", "filter sections from the rectifier towards the load, in order"),
    "load": Key("table", "the load across the output (omit for an idle supply); [[load]] for several"),
    "bleeder": Key("table", "a bleeder resistor across the output"),
    "battery": Key("table", "the battery behind an inverter source"),
    "simulation": Key("table", "how the analyses run"),
    "spread": Key("table", "how `simkit spread` draws values within their tolerances"),
    "checks": Key("table", "derating policy and safety limits of `simkit check`"),
    "regulator": Key("table", "a shunt or series regulator between the filter and the loads"),
}

SOURCE: dict[str, Key] = {
    "kind": Key("str", '"sine" (an EMF behind series R and L), "transformer" (from its nameplate) or '
                '"inverter" (battery-fed)', default='"sine"'),
    "vrms": Key("V", "sine and inverter: open-circuit RMS voltage (each half for centre-tap)"),
    "frequency": Key("Hz", "mains or inverter frequency", required=True),
    "resistance": Key(
        "ohm",
        "sine: series resistance of the winding plus the primary referred to the secondary "
        "(each half for centre-tap)",
    ),
    "inductance": Key("H", "sine and inverter: series leakage inductance (each half for centre-tap)", default="0"),
    "mains_tolerance": Key("%", "supply range, +- this fraction, for corner checks and `run --mains`",
                           default="none"),
    "primary_vrms": Key("V", "transformer: rated primary (mains) voltage"),
    "secondary_vrms": Key("V", "transformer: rated secondary voltage at rated current, whole winding "
                          "(a 300-0-300 V winding is 600 with centre_tap = true)"),
    "rated_current": Key("A", "transformer: rated secondary RMS current; sine: the winding's RMS current "
                         "rating (each half for centre-tap), for `simkit check`"),
    "regulation": Key("%", "transformer: rise of the secondary voltage from full load to no load"),
    "primary_resistance": Key("ohm", "transformer: measured primary winding resistance (with "
                              "secondary_resistance, instead of regulation)"),
    "secondary_resistance": Key("ohm", "transformer: measured resistance of the whole secondary"),
    "leakage_inductance": Key("H", "transformer: leakage inductance referred to the whole secondary", default="0"),
    "centre_tap": Key("bool", "transformer: the secondary has a centre tap (needed for topology centre-tap)",
                      default="false"),
    "waveform": Key("str", 'inverter: "sine", "modified-sine" or "square"', default='"sine"'),
    "peak": Key("V", "inverter, modified-sine: the step height; the zero interval is set so that the RMS "
                "equals vrms", default="sqrt(2) x vrms"),
    "output_resistance": Key("ohm", "inverter: output resistance", default="0"),
    "rated_power": Key("W", "inverter: rated output power"),
    "efficiency": Key("%", "inverter: efficiency at rated power (with idle_power)"),
    "idle_power": Key("W", "inverter: battery power drawn with no load", default="0"),
    "efficiency_table": Key("list", "inverter: [[fraction of rated power, efficiency], ...] instead of "
                            "efficiency"),
    "regulated": Key("bool", "inverter: holds its output against battery sag", default="false"),
    "response_time": Key("s", "inverter: time constant of its input smoothing (how fast battery current "
                         "follows the load)", default="2 periods"),
    "edge_time": Key("s", "inverter: rise and fall time of square and modified-sine edges",
                     default="period / 500"),
}

BATTERY: dict[str, Key] = {
    "voltage": Key("V", "open-circuit battery voltage", required=True),
    "internal_resistance": Key("ohm", "internal resistance plus wiring", default="0"),
    "capacity": Key("Ah", "rated capacity", required=True),
    "usable_fraction": Key("%", "share of the capacity you will use (e.g. 50% for lead-acid life)",
                           default="100%"),
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
    "capacitor_esr": Key("ohm", "doubler and cascade: ESR of each stage capacitor", default="0"),
    "capacitor_rating": Key("table", 'doubler and cascade: ratings of each stage capacitor, '
                            '{ v = "450", ripple = "1.2", ripple_frequency = "100" }'),
    "balancing": Key("ohm", "doubler and cascade: a balancing resistor across each stage capacitor",
                     default="none"),
    "balancing_rating": Key("table", 'power rating of each balancing resistor, { w = "1" }'),
}

DIODE_INLINE: dict[str, Key] = {
    "kind": Key("str", '"silicon" (junction parameters below) or "vacuum" (a Child-Langmuir plate)',
                default='"silicon"'),
    "perveance": Key("", "vacuum: perveance per plate, A/V^1.5 (i = P v^1.5)"),
    "warmup": Key("s", "vacuum: time to full emission after switch-on (emission starts at half of it)",
                  default="0"),
    "piv": Key("V", "vacuum: rated peak inverse voltage, for checks", default="none"),
    "peak_current": Key("A", "vacuum: rated peak plate current, for checks", default="none"),
    "is": Key("A", "silicon: saturation current"),
    "n": Key("", "emission coefficient (down to 0.01 for a near-ideal diode)", default="1"),
    "rs": Key("ohm", "series resistance", default="0"),
    "bv": Key("V", "reverse breakdown voltage", default="none (no breakdown modelled)"),
    "tt": Key("s", "transit time (stored charge)", default="0"),
    "cjo": Key("F", "zero-bias junction capacitance", default="0"),
    "vrrm": Key("V", "rated repetitive peak reverse voltage, for checks", default="none"),
    "ifav": Key("A", "rated mean forward current, for checks", default="none"),
    "ifsm": Key("A", "rated surge current (8.3 ms half-sine), for checks", default="none"),
    "i2t": Key("", "rated I2t, A^2 s, for checks", default="none"),
    "dc_current": Key("A", "vacuum: rated DC output current, for checks", default="none"),
    "max_capacitance": Key("F", "vacuum: largest input (reservoir) capacitance allowed", default="none"),
    "min_resistance": Key("ohm", "vacuum: smallest supply resistance per plate allowed", default="none"),
}

FILTER: dict[str, Key] = {
    "c": Key("F", "shunt capacitor to the return; a first c is the reservoir"),
    "esr": Key("ohm", "equivalent series resistance of c", default="0"),
    "l": Key("H", "series choke; a first l makes a choke-input filter"),
    "dcr": Key("ohm", "winding resistance of l", default="0"),
    "r": Key("ohm", "series resistor"),
    "tolerance": Key("%", "tolerance of the section's c, l or r value, for `simkit spread`", default="none"),
    "part": Key("str", "a part of the library file: its ratings (and esr or dcr, unless given here)"),
    "rating": Key("table", 'ratings, for `simkit check`: c { v = "450", ripple = "1.2", ripple_frequency = "100" }, '
                  'l { i = "150m" }, r { w = "2" }'),
}

LOAD: dict[str, Key] = {
    "kind": Key("str", '"resistor" (r), "current" (i), "tube" (point), "keyed" (down, up and rate/duty '
                'or morse/wpm) or "steps" (steps)', required=True),
    "r": Key("ohm", "load resistance (kind resistor)"),
    "i": Key(
        "A",
        "load current (kind current); it fades out below 5 V so an empty supply is not "
        "driven negative",
    ),
    "point": Key("table", 'kind tube: one operating point { v = "250", i = "60m" }; the load follows '
                 "i = P v^1.5 through it"),
    "down": Key("table", 'kind keyed: key-down load, { i = "80m" } or { r = "3k" }'),
    "up": Key("table", 'kind keyed: key-up load, { i = "5m" } or { r = "50k" }'),
    "rate": Key("Hz", "kind keyed: keying rate (with duty)"),
    "duty": Key("%", "kind keyed: key-down share of each keying cycle", default="50%"),
    "morse": Key("str", "kind keyed: text sent in Morse code, repeated (instead of rate)"),
    "wpm": Key("", "kind keyed: Morse speed, words per minute (PARIS: a dot lasts 1.2/wpm s)"),
    "rise": Key("s", "kind keyed: time the load takes to rise at key-down", default="5m"),
    "fall": Key("s", "kind keyed: time the load takes to fall at key-up", default="5m"),
    "steps": Key("list", 'kind steps: [[time, current], ...] from switch-on, e.g. [[0, "10m"], ["30", "90m"]]'),
    "warmup": Key("s", "the load draws nothing until this time after switch-on (heaters warming), then "
                  "rises to full over a fifth of it", default="0"),
    "at": Key("int", "hang the load after filter section N (counted from 0) instead of at the output",
              default="the output"),
    "pushing_hz_per_v": Key("", "kind keyed: frequency pushing of an oscillator fed from this node, Hz/V "
                            "(gives chirp_hz)"),
    "tolerance": Key("%", "tolerance of r or i, for `simkit spread`", default="none"),
}

BLEEDER: dict[str, Key] = {
    "r": Key("ohm", "bleeder resistance across the output", required=True),
    "tolerance": Key("%", "tolerance of r, for `simkit spread`", default="none"),
    "part": Key("str", "a resistor of the library file (its power rating)"),
    "rating": Key("table", 'power rating, { w = "2" }, for `simkit check`'),
}

REGULATOR: dict[str, Key] = {
    "kind": Key("str", '"shunt" (a dropping resistor and a zener string or glow tubes) or "series" (a MOSFET '
                "follower from a zener reference)", required=True),
    "resistance": Key("ohm", "shunt: the series dropping resistor"),
    "resistor_rating": Key("table", 'shunt: power rating of the dropping resistor, { w = "5" }'),
    "zener": Key("table", 'shunt element, or the series reference: { voltage = "75", count = 2, '
                 'resistance = "20", power = "5" } (each)'),
    "tube": Key("str", 'shunt: glow-discharge regulator tube from the library ("OA2", "OB2", "OC3", "OD3")'),
    "count": Key("int", "shunt: glow tubes in series", default="1"),
    "reference": Key("V", "series: reference voltage (the output is about this less the gate-source voltage)"),
    "reference_current": Key("A", "series: current the reference resistor sets up in the reference", default="2m"),
    "filter_r": Key("ohm", "series: resistor of the RC filter on the reference (slow start, less noise)",
                    default="100k"),
    "filter_c": Key("F", "series: capacitor of the reference filter", default="1u"),
    "gate_resistor": Key("ohm", "series: gate stopper", default="1k"),
    "gate_zener": Key("V", "series: gate-source protection zener", default="15"),
    "device": Key("str", 'series: pass MOSFET from the library ("IRF840", "IRF830", "IRFBG20") or inline '
                  '{ vto = "3.5", kp = "2.5", vdss = "500", id = "8", pd = "125" }', default='"IRF840"'),
    "headroom": Key("V", "series: input-output difference below which it no longer regulates (dropout)",
                    default="5"),
}

CHECKS: dict[str, Key] = {
    "diode_voltage": Key("%", "a diode may see this share of its VRRM (a tube, of its PIV)", default="80%"),
    "capacitor_voltage": Key("%", "a capacitor may see this share of its rated voltage", default="90%"),
    "resistor_power": Key("%", "a resistor may dissipate this share of its rating", default="50%"),
    "marginal": Key("%", "a value within this share of its limit is marginal", default="10%"),
    "safe_voltage": Key("V", "after switch-off every capacitor must fall below this ...", default="60"),
    "safe_time": Key("s", "... within this time (load gone, bleeder only)", default="5"),
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
    "steps_per_period": Key("int", "the maximum time step is one period divided by this; by default simkit "
                            "chooses it for accuracy (25 points in the shortest diode conduction pulse, "
                            "200 to 2000 per period)", default="automatic"),
    "settle_tolerance": Key("", "how close to the periodic state counts as settled: the distance the slow modes "
                            "would still move each state variable, relative to its scale", default="1e-4"),
    "max_settle_time": Key(
        "s", "give up looking for the steady state after this much simulated time", default="400 periods"
    ),
    "switch_on_time": Key("s", "length of the switch-on run", default="from the circuit's time constants"),
    "reltol": Key("", "ngspice relative tolerance", default="1e-5"),
    "max_points": Key("", "refuse to simulate when the estimated time points of all analyses exceed this "
                      "(about a minute of simulation per 2e7 on a typical PC)", default="2e7"),
}

SECTIONS: dict[str, dict[str, Key]] = {
    "": TOP,
    "source": SOURCE,
    "rectifier": RECTIFIER,
    "rectifier.diode": DIODE_INLINE,
    "filter": FILTER,
    "load": LOAD,
    "battery": BATTERY,
    "bleeder": BLEEDER,
    "simulation": SIMULATION,
    "spread": SPREAD,
    "checks": CHECKS,
    "regulator": REGULATOR,
}


#: Sections of a user part library file (``library = "parts.toml"``).
LIBRARY: dict[str, dict[str, Key]] = {
    "capacitors": {"v": Key("V", "rated voltage"), "ripple": Key("A", "ripple-current rating"),
                   "ripple_frequency": Key("Hz", "frequency of the ripple rating"), "esr": Key("ohm", "ESR")},
    "chokes": {"i": Key("A", "rated DC current"), "dcr": Key("ohm", "winding resistance")},
    "resistors": {"w": Key("W", "power rating")},
}
