"""The design: frozen dataclasses of SI floats, each file key declared once on its field.

Sections of a design file and the classes that hold them: ``[source]`` (:mod:`.sources`),
``[rectifier]``, ``[[filter]]``, ``[load]`` (:mod:`.loads`), ``[bleeder]``, ``[battery]``
(:mod:`.sources`), ``[regulator]``, ``[simulation]``, ``[spread]``, ``[checks]``; the whole
:class:`Design`.  Nothing here parses text and nothing reads the part library: the reader
(:mod:`simkit.design.reader`) does, from the keys declared here.  Sweeps derive new designs
with :func:`dataclasses.replace` or by reading an overridden dictionary again.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal

from simkit.design.devices import (
    INLINE_DIODES,
    DiodeModel,
    DiodeRatings,
    GlowSpec,
    PartRating,
    PassDevice,
    TubeRatings,
    VacuumDiode,
    Zener,
    rating_reader,
    read_zener,
    zener_resistance,
)
from simkit.design.loads import (
    LOAD_KINDS,
    CurrentLoad,
    KeyedLoad,
    KeyState,
    Load,
    LoadBase,
    ResistorLoad,
    StepsLoad,
    TubeLoad,
)
from simkit.design.snubber import Snubber, snubber_key
from simkit.design.sources import SOURCE_KINDS, Battery, InverterSource, SineSource, Source, TransformerSource
from simkit.design.vocab import Reader, key
from simkit.errors import DesignError, UsageError

__all__ = [
    "TOPOLOGIES", "Battery", "Bleeder", "CheckPolicy", "CurrentLoad", "Design", "DiodeModel", "DiodeRatings",
    "FilterSection", "GlowSpec", "InverterSource", "KeyState", "KeyedLoad", "Load", "LoadBase", "PartRating",
    "PassDevice", "Rectifier", "Regulator", "ResistorLoad", "SeriesRegulator", "ShuntRegulator",
    "SimulationOptions", "SineSource", "Snubber", "Source", "SpreadOptions", "StepsLoad", "TransformerSource",
    "TubeLoad", "TubeRatings", "VacuumDiode", "Zener",
]

TOPOLOGIES: tuple[str, ...] = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")
#: Capacitors below this are refused, F: smaller than the wiring's own capacitance.
MIN_CAPACITANCE = 10e-12
_STAGED = ("doubler", "cascade")


@dataclass(frozen=True)
class Rectifier:
    """``[rectifier]``: the arrangement and its diodes (and a multiplier's stage capacitors)."""

    topology: str = key("topology", "choice", '"half-wave", "centre-tap", "bridge", "doubler" or "cascade"',
                        required=True, choices=TOPOLOGIES)
    diode: DiodeModel = key("diode", "diode", "a library part (see `simkit parts`) or an inline model "
                            '{ is = "5n", n = 1.8, rs = "40m" }', shown='"1N4007"', text_default="1N4007",
                            of=INLINE_DIODES)
    stages: int = key("stages", "int", "cascade only: number of stages (n stages give about 2n x Vpeak)", 1,
                      shown="1", minimum=1, maximum=20)
    capacitance: float | None = key("capacitance", "F", "doubler and cascade: each stage capacitor", None,
                                    shown="required there", above=0, minimum=MIN_CAPACITANCE, maximum=10.0)
    capacitance_tolerance: float | None = key("capacitance_tolerance", "%", "tolerance of capacitance, for "
                                              "`simkit spread`", None, shown="none")
    capacitor_esr: float = key("capacitor_esr", "ohm", "doubler and cascade: ESR of each stage capacitor", 0.0,
                               shown="0", minimum=0, maximum=1e6)
    capacitor_rating: PartRating | None = key("capacitor_rating", "table", "doubler and cascade: ratings of each "
                                              'stage capacitor, { v = "450", ripple = "1.2", ripple_frequency = '
                                              '"100" }', None, reader=rating_reader("c"), of=(PartRating,))
    balancing: float | None = key("balancing", "ohm", "doubler and cascade: a balancing resistor across each stage "
                                  "capacitor", None, shown="none", above=0, maximum=1e12)
    balancing_rating: PartRating | None = key("balancing_rating", "table", 'power rating of each balancing '
                                              'resistor, { w = "1" }', None, reader=rating_reader("r"),
                                              of=(PartRating,))
    snubber: Snubber | None = snubber_key("each rectifier diode")
    series: int = key("series", "int", "silicon diodes in series in each position (a string for high voltage); "
                      "reverse voltages and their checks are per diode", 1, shown="1", minimum=1, maximum=50,
                      label="diodes in series")
    sharing: float | None = key("sharing", "ohm", "a voltage-sharing resistor across each diode of a string "
                                "(series of 2 or more)", None, shown="none", above=0, maximum=1e12,
                                label="sharing resistance")
    sharing_rating: PartRating | None = key("sharing_rating", "table", 'power rating of each sharing resistor, '
                                            '{ w = "0.5" }', None, reader=rating_reader("r"), of=(PartRating,))

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        topology = rd.choice(t, "topology", path, TOPOLOGIES)
        if "stages" in t and topology != "cascade":
            raise rd.fail(f"{path}.stages", f"applies to topology \"cascade\" only, not \"{topology}\"")
        if topology in _STAGED and "capacitance" not in t:
            raise rd.fail(f"{path}.capacitance", f'missing key: a {topology} needs its stage capacitance, e.g. "100u"')
        if topology not in _STAGED:
            if "capacitance" in t:
                raise rd.fail(f"{path}.capacitance", f"applies to doubler and cascade only; for a {topology}, put "
                              'the reservoir in [[filter]] c = "..."')
            rd.refuse(t, ("capacitance_tolerance", "capacitor_esr", "capacitor_rating", "balancing",
                          "balancing_rating"), path, "belongs to the stage capacitors of a doubler or cascade")
        if "balancing_rating" in t and "balancing" not in t:
            raise rd.fail(f"{path}.balancing_rating", "needs balancing (the resistance across each stage capacitor)")
        _refuse_string(rd, t, path)

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if self.series > 1 and self.diode.is_vacuum:
            raise rd.fail(f"{path}.series", "strings of diodes are for silicon diodes; a vacuum rectifier is one "
                          "tube per position")
        if self.sharing is not None and self.series < 2:
            raise rd.fail(f"{path}.sharing", "a sharing resistor shares the voltage of a string: set series = 2 or "
                          "more")
        if self.snubber is not None and self.diode.is_vacuum:
            raise rd.fail(f"{path}.snubber", "a tube rectifier stores no charge to snap off at turn-off, so simkit "
                          "does not model a snubber across its plates; fit one across the winding ([source] snubber)")


def _refuse_string(rd: Reader, t: Mapping[str, Any], path: str) -> None:
    """Sharing resistors' rating belongs to sharing resistors."""
    if "sharing_rating" in t and "sharing" not in t:
        raise rd.fail(f"{path}.sharing_rating", "needs sharing (the resistance across each diode of the string)")


def _filter_rating(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> PartRating:
    part = next(k for k in ("c", "l", "r") if table is not None and k in table)
    return rating_reader(part)(rd, raw, path, table)


@dataclass(frozen=True)
class FilterSection:
    """One ``[[filter]]`` section, from the rectifier towards the load: a shunt c, a series l or a series r."""

    c: float | None = key("c", "F", "shunt capacitor to the return; a first c is the reservoir", None, above=0,
                          minimum=MIN_CAPACITANCE, maximum=10.0, label="capacitance")
    esr: float = key("esr", "ohm", "equivalent series resistance of c", 0.0, shown="0", minimum=0, maximum=1e6)
    l: float | None = key("l", "H", "series choke; a first l makes a choke-input filter", None, above=0,  # noqa: E741
                          maximum=1e4, label="inductance")
    dcr: float = key("dcr", "ohm", "winding resistance of l", 0.0, shown="0", minimum=0, maximum=1e9)
    r: float | None = key("r", "ohm", "series resistor", None, above=0, maximum=1e12, label="resistance")
    tolerance: float | None = key("tolerance", "%", "tolerance of the section's c, l or r value, for "
                                  "`simkit spread`", None, shown="none")
    part: str | None = key("part", "str", "a part of the library file: its ratings (and esr or dcr, unless given "
                           "here)", None)
    rating: PartRating | None = key("rating", "table", 'ratings, for `simkit check`: c { v = "450", ripple = "1.2", '
                                    'ripple_frequency = "100" }, l { i = "150m" }, r { w = "2" }', None,
                                    reader=_filter_rating, of=(PartRating,))

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        kinds = [k for k in ("c", "l", "r") if k in t]
        if len(kinds) != 1:
            got = " and ".join(kinds) if kinds else "none"
            raise rd.fail(path, f"each section needs exactly one of c, l or r; got {got}")
        if "esr" in t and kinds[0] != "c":
            raise rd.fail(f"{path}.esr", "esr belongs to a c section")
        if "dcr" in t and kinds[0] != "l":
            raise rd.fail(f"{path}.dcr", "dcr belongs to an l section")
        if "part" in t and "rating" in t:
            raise rd.fail(f"{path}.part", "give part or rating, not both")

    @property
    def kind(self) -> Literal["c", "l", "r"]:
        return "c" if self.c is not None else "l" if self.l is not None else "r"

    @property
    def value(self) -> float:
        """F for c, H for l, ohm for r."""
        v = self.c if self.c is not None else self.l if self.l is not None else self.r
        assert v is not None
        return v


@dataclass(frozen=True)
class Bleeder:
    """``[bleeder]``: a resistor across the output that empties the capacitors after switch-off."""

    r: float = key("r", "ohm", "bleeder resistance across the output", required=True,
                   need="the bleeder resistance, e.g. r = \"220k\"", above=0, maximum=1e12, label="bleeder resistance")
    tolerance: float | None = key("tolerance", "%", "tolerance of r, for `simkit spread`", None, shown="none")
    part: str | None = key("part", "str", "a resistor of the library file (its power rating)", None)
    rating: PartRating | None = key("rating", "table", 'power rating, { w = "2" }, for `simkit check`', None,
                                    reader=rating_reader("r"), of=(PartRating,))

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if "part" in t and "rating" in t:
            raise rd.fail(f"{path}.part", "give part or rating, not both")


@dataclass(frozen=True)
class ShuntRegulator:
    """``kind = "shunt"``: a dropping resistor and a shunt element (a zener string or glow tubes)."""

    kind: ClassVar[str] = "shunt"
    resistance: float = key("resistance", "ohm", "the series dropping resistor", required=True,
                            need='the dropping resistor, e.g. resistance = "4.7k"', above=0, maximum=1e9)
    resistor_rating: PartRating | None = key("resistor_rating", "table", 'power rating of the dropping resistor, '
                                             '{ w = "5" }', None, reader=rating_reader("r"), of=(PartRating,))
    zener: Zener | None = key("zener", "table", 'the shunt element: { voltage = "75", count = 2, resistance = "20", '
                              'power = "5" } (each)', None, reader=read_zener, of=(Zener,))
    tube: GlowSpec | None = key("tube", "glowtube", 'glow-discharge regulator tube from the library ("OA2", '
                                '"OB2", "OC3", "OD3")', None)
    count: int = key("count", "int", "glow tubes in series", 1, shown="1", minimum=1, maximum=10)

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        rd.need(t, "resistance", path, 'the dropping resistor, e.g. resistance = "4.7k"')
        if ("zener" in t) == ("tube" in t):
            raise rd.fail(f"{path}.zener", 'a shunt regulator needs either zener = { voltage = ... } or tube = "OD3"')
        if "zener" in t:
            rd.refuse(t, ("count",), path, "count of glow tubes; a zener string says count inside zener = { ... }")

    @property
    def glow(self) -> GlowSpec | None:
        """The glow tubes: the library's tube, ``count`` of them in series."""
        if self.tube is None:
            return None
        from dataclasses import replace

        return replace(self.tube, count=self.count)


def _zener_string(reference: float) -> Zener:
    """A reference of zeners of up to 200 V each, each with the usual dynamic resistance (zener_resistance)."""
    n = max(1, math.ceil(reference / 200.0))
    return Zener(voltage=reference / n, count=n, resistance=zener_resistance(reference / n))


@dataclass(frozen=True, kw_only=True)
class SeriesRegulator:
    """``kind = "series"``: a MOSFET source follower from a filtered zener reference."""

    kind: ClassVar[str] = "series"
    reference_given: float | None = key("reference", "V", "reference voltage (the output is about this less the "
                                        "gate-source voltage)", None, above=0, maximum=100e3)
    zener_given: Zener | None = key("zener", "table", 'the reference as zeners instead: { voltage = "100", '
                                    'count = 2 }', None, reader=read_zener, of=(Zener,))
    reference_current: float = key("reference_current", "A", "current the reference resistor sets up in the "
                                   "reference", 2e-3, shown="2m", above=0, maximum=1.0)
    filter_r: float = key("filter_r", "ohm", "resistor of the RC filter on the reference (slow start, less noise)",
                          100e3, shown="100k", above=0, maximum=1e9)
    filter_c: float = key("filter_c", "F", "capacitor of the reference filter", 1e-6, shown="1u", above=0,
                          maximum=1.0)
    gate_resistor: float = key("gate_resistor", "ohm", "gate stopper", 1e3, shown="1k", above=0, maximum=1e7)
    gate_zener: float = key("gate_zener", "V", "gate-source protection zener", 15.0, shown="15", above=0, maximum=100)
    device: PassDevice = key("device", "mosfet", 'pass MOSFET from the library ("IRF840", "IRF830", "IRFBG20") or '
                             'inline { vto = "3.5", kp = "2.5", vdss = "500", id = "8", pd = "125" }',
                             shown='"IRF840"', text_default="IRF840", of=(PassDevice,))
    headroom: float = key("headroom", "V", "input-output difference below which it no longer regulates (dropout)",
                          5.0, shown="5", above=0, maximum=1e3)

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if "reference" not in t and "zener" not in t:
            raise rd.fail(f"{path}.reference", 'missing key: the reference voltage, e.g. reference = "250"')

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if self.reference_given is not None and self.zener_given is not None:
            raise rd.fail(f"{path}.reference", "give reference or zener = { ... }, not both")

    @property
    def zener(self) -> Zener:
        """The reference zeners: as given, or a string of them for ``reference``."""
        if self.zener_given is not None:
            return self.zener_given
        assert self.reference_given is not None
        return _zener_string(self.reference_given)

    @property
    def reference(self) -> float:
        """The reference voltage, V."""
        z = self.zener
        return self.reference_given if self.reference_given is not None else z.voltage * z.count


Regulator = ShuntRegulator | SeriesRegulator
REGULATOR_KINDS: tuple[type, ...] = (ShuntRegulator, SeriesRegulator)


def regulator_foreign(name: str, chosen: type, owner: type | None) -> str:
    other = "series" if chosen is ShuntRegulator else "shunt"
    return f'belongs to kind "{other}"'


def _share(name: str, doc: str, default: float, shown: str) -> Any:
    return key(name, "%", doc, default, shown=shown, percent_max=1.0 + 1e-12)


@dataclass(frozen=True)
class CheckPolicy:
    """``[checks]``: derating and safety limits of `simkit check` (defaults: common practice)."""

    diode_voltage: float = _share("diode_voltage", "a diode may see this share of its VRRM (a tube, of its PIV)",
                                  0.8, "80%")
    capacitor_voltage: float = _share("capacitor_voltage", "a capacitor may see this share of its rated voltage",
                                      0.9, "90%")
    resistor_power: float = _share("resistor_power", "a resistor may dissipate this share of its rating", 0.5, "50%")
    marginal: float = _share("marginal", "a value within this share of its limit is marginal", 0.1, "10%")
    safe_voltage: float = key("safe_voltage", "V", "after switch-off every capacitor must fall below this ...", 60.0,
                              shown="60", above=0, maximum=1e5)
    safe_time: float = key("safe_time", "s", "... within this time (load gone, bleeder only)", 5.0, shown="5",
                           above=0, maximum=3600)

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        for name in ("diode_voltage", "capacitor_voltage", "resistor_power", "marginal"):
            if getattr(self, name) <= 0:
                raise rd.fail(f"{path}.{name}", "must be above 0%")


@dataclass(frozen=True)
class SpreadOptions:
    """``[spread]``: how `simkit spread` draws values within their tolerances."""

    distribution: str = key("distribution", "choice", '"uniform" (anywhere within +- tolerance) or "normal" (the '
                            "tolerance is 3 standard deviations), for `simkit spread`", "uniform", shown='"uniform"',
                            choices=("uniform", "normal"))


@dataclass(frozen=True)
class SimulationOptions:
    """``[simulation]``: how the analyses run."""

    switch_on_phase: float = key("switch_on_phase", "deg", "source phase at switch-on for the surge run (90 = "
                                 "crest)", 90.0, shown="90", minimum=-360, maximum=360)
    steps_per_period: int | None = key("steps_per_period", "int", "the maximum time step is one period divided by "
                                       "this; by default simkit chooses it for accuracy (20 points in the shortest "
                                       "diode conduction pulse, checked by halving the step; 200 to 2000 per "
                                       "period)", None, shown="automatic", minimum=50, maximum=100000)
    settle_tolerance: float = key("settle_tolerance", "", "how close to the periodic state counts as settled: the "
                                  "distance the slow modes would still move each state variable, relative to its "
                                  "scale", 1e-4, shown="1e-4", above=0, maximum=0.1, label="settle tolerance")
    max_settle_time: float | None = key("max_settle_time", "s", "give up looking for the steady state after this "
                                        "much simulated time", None, shown="400 periods", above=0, maximum=3600)
    switch_on_time: float | None = key("switch_on_time", "s", "length of the switch-on run", None,
                                       shown="from the circuit's time constants", above=0, maximum=3600)
    reltol: float = key("reltol", "", "ngspice relative tolerance", 1e-5, shown="1e-5", minimum=1e-8, maximum=1e-2)
    max_points: float = key("max_points", "", "refuse to simulate when the estimated time points of all analyses "
                            "exceed this (about a minute of simulation per 2e7 on a typical PC)", 2e7, shown="2e7",
                            minimum=1e4, maximum=1e10, label="time-point limit")
    hash: bool | None = key("hash", "bool", "run the high-frequency analysis (diode turn-off, ringing, hash at the "
                            "output) with every `simkit run`: true or false; by default it runs when the design has "
                            "a snubber of its own, or an ultrafast diode fed through leakage inductance", None,
                            shown="automatic")
    hash_band: float = key("hash_band", "Hz", "hash_rms_v is the output's content above this frequency", 10e3,
                           shown="10k", above=0, maximum=1e8, label="hash band edge")

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if not math.isfinite(self.switch_on_phase):
            raise rd.fail(f"{path}.switch_on_phase", "must be a finite angle in degrees")


@dataclass(frozen=True)
class Design:
    """A whole, validated design (the top level of a design file)."""

    title: str = key("title", "str", "one line naming the design; shown in tables and reports", shown="file name")
    source: Source = key("source", "table", "the winding or inverter output that feeds the rectifier",
                         required=True, of=SOURCE_KINDS)
    rectifier: Rectifier = key("rectifier", "table", "the rectifier arrangement and its diodes", required=True,
                               of=(Rectifier,))
    filters: tuple[FilterSection, ...] = key("filter", "array", "filter sections from the rectifier towards the "
                                             "load, in order", (), of=(FilterSection,))
    loads: tuple[Load, ...] = key("load", "table", "the load across the output (omit for an idle supply); "
                                  "[[load]] for several", (), of=LOAD_KINDS)
    bleeder: Bleeder | None = key("bleeder", "table", "a bleeder resistor across the output", None, of=(Bleeder,))
    battery: Battery | None = key("battery", "table", "the battery behind an inverter source", None, of=(Battery,))
    regulator: Regulator | None = key("regulator", "table", "a shunt or series regulator between the filter and the "
                                      "loads", None, of=REGULATOR_KINDS)
    simulation: SimulationOptions = key("simulation", "table", "how the analyses run", SimulationOptions(),
                                        of=(SimulationOptions,))
    spread: SpreadOptions = key("spread", "table", "how `simkit spread` draws values within their tolerances",
                                SpreadOptions(), of=(SpreadOptions,))
    checks: CheckPolicy = key("checks", "table", "derating policy and safety limits of `simkit check`",
                              CheckPolicy(), of=(CheckPolicy,))
    note: str = key("note", "str", "free text for reports (never written into a deck)", "", shown='""')
    example: bool = key("example", "bool", "the design is an invented example, not a real build: reports say so in "
                        "a banner", False, shown="false")
    library: str = key("library", "str", "a parts file of your own (TOML, path relative to the design file): diodes "
                       'by name, and ratings for capacitors, chokes and resistors used with part = "NAME"', "")
    origin: str = field(default="<design>", compare=False)  # file the design came from, for messages

    @property
    def keyed(self) -> tuple[KeyedLoad, ...]:
        return tuple(ld for ld in self.loads if isinstance(ld, KeyedLoad))

    @property
    def mains_corners(self) -> float | None:
        """The mains tolerance that high and low mains are taken at: none for an inverter (its supply is its
        battery, whose voltage corners stand in for them)."""
        return self.source.mains_tolerance if self.source.kind != "inverter" else None

    def mains_scale(self, mains: str) -> float:
        """The source EMF's factor for ``mains`` ("nominal", "high", "low"), as ``run --mains`` takes it."""
        if mains == "nominal":
            return 1.0
        if mains not in ("high", "low"):
            raise UsageError(f"mains={mains!r}: choose nominal, high or low")
        if self.source.kind == "inverter":
            raise DesignError("--mains applies to mains sources; an inverter's supply is its battery",
                              file=self.origin, key="source.kind")
        tol = self.mains_corners
        if tol is None:
            raise DesignError(f"--mains {mains} needs source.mains_tolerance (e.g. \"10%\")", file=self.origin,
                              key="source.mains_tolerance")
        return 1.0 + tol if mains == "high" else 1.0 - tol

    @property
    def has_timeline(self) -> bool:
        """Anything that changes after switch-on: warm-ups or load steps."""
        d = self.rectifier.diode
        return any(ld.warmup or isinstance(ld, StepsLoad) for ld in self.loads) or bool(
            d.vacuum and d.vacuum.warmup_full > 0)
