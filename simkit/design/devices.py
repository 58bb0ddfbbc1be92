"""What a design says about its parts: diodes (silicon or vacuum), ratings, zeners, glow tubes, pass MOSFETs.

These are the types the part library (:mod:`simkit.parts`) fills in and the inline tables of a
design file describe (``diode = { is = "5n", ... }``, ``rating = { v = "450" }``,
``zener = { voltage = "75" }``, ``device = { vto = "3.5", kp = "2.5" }``), each inline key
declared once on its field.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

from simkit.design.vocab import Reader, key, keys, read_kind, read_section, show

#: Vacuum-diode perveance below this is refused (A/V^1.5): thousands of times below the library's
#: rectifier tubes, its figures would be numerical noise.
MIN_PERVEANCE = 1e-7


@dataclass(frozen=True)
class DiodeRatings:
    """Datasheet limits of a silicon rectifier diode (all optional)."""

    vrrm: float | None = None  # V, repetitive peak reverse voltage
    ifav: float | None = None  # A, mean forward current
    ifsm: float | None = None  # A, surge (8.3 ms half-sine, JEDEC)
    i2t: float | None = None  # A^2 s
    trr: float | None = None  # s, reverse recovery time
    vf: float | None = None  # V, maximum forward drop at the test current
    vf_current: float | None = None  # A, the test current of vf


@dataclass(frozen=True)
class TubeRatings:
    """Datasheet limits of a vacuum rectifier, per plate unless said otherwise."""

    piv: float | None = None  # V, peak inverse plate voltage
    peak_current: float | None = None  # A, peak plate current per plate
    dc_current: float | None = None  # A, maximum DC output current (capacitor input)
    max_input_capacitance: float | None = None  # F
    min_plate_resistance: float | None = None  # ohm, minimum supply impedance per plate


@dataclass(frozen=True)
class VacuumDiode:
    """One plate of a vacuum rectifier: Child-Langmuir law i = P v^1.5 (v >= 0), no reverse current."""

    perveance: float  # A/V^1.5 per plate
    warmup_start: float = 0.0  # s after switch-on when the cathode starts to emit
    warmup_full: float = 0.0  # s after switch-on when emission is complete
    directly_heated: bool = False
    ratings: TubeRatings = field(default_factory=TubeRatings)


@dataclass(frozen=True)
class DiodeModel:
    """A rectifier diode: SPICE junction parameters plus ratings and where they come from."""

    name: str  # library part name, or "inline"
    is_: float  # A, saturation current (silicon)
    n: float  # emission coefficient (silicon)
    rs: float  # ohm, series resistance (silicon)
    bv: float | None = None  # V, reverse breakdown (None: no breakdown modelled)
    tt: float = 0.0  # s, transit time (0: no stored charge: docs/engine-notes.md#tt-cjo)
    cjo: float = 0.0  # F, zero-bias junction capacitance (0: no ringing)
    ratings: DiodeRatings = field(default_factory=DiodeRatings)
    source: str = ""  # where the ratings come from
    vacuum: VacuumDiode | None = None  # set for a tube rectifier: then is_/n/rs are unused

    @property
    def is_vacuum(self) -> bool:
        return self.vacuum is not None


# --- inline diodes ----------------------------------------------------------------------------


@dataclass(frozen=True)
class InlineSilicon:
    """``diode = { is = ..., n = ..., rs = ... }``: a junction diode given in the design file."""

    kind: ClassVar[str] = "silicon"
    is_: float = key("is", "A", "saturation current", required=True, need='the saturation current, e.g. "5n"',
                     above=0, maximum=1.0)
    n: float = key("n", "", "emission coefficient (down to 0.01 for a near-ideal diode)", 1.0, shown="1",
                   minimum=0.01, maximum=10.0)
    rs: float = key("rs", "ohm", "series resistance", 0.0, shown="0", minimum=0, maximum=1e6)
    bv: float | None = key("bv", "V", "reverse breakdown voltage", None, shown="none (no breakdown modelled)",
                           above=0)
    tt: float = key("tt", "s", "transit time (stored charge)", 0.0, shown="0", minimum=0, maximum=1e-3)
    cjo: float = key("cjo", "F", "zero-bias junction capacitance", 0.0, shown="0", minimum=0, maximum=1e-6)
    vrrm: float | None = key("vrrm", "V", "rated repetitive peak reverse voltage, for checks", None, shown="none",
                             above=0)
    ifav: float | None = key("ifav", "A", "rated mean forward current, for checks", None, shown="none", above=0)
    ifsm: float | None = key("ifsm", "A", "rated surge current (8.3 ms half-sine), for checks", None,
                             shown="none", above=0)
    i2t: float | None = key("i2t", "", "rated I2t, A^2 s, for checks", None, shown="none", above=0)

    def model(self) -> DiodeModel:
        return DiodeModel(name="inline", is_=self.is_, n=self.n, rs=self.rs, bv=self.bv, tt=self.tt, cjo=self.cjo,
                          ratings=DiodeRatings(vrrm=self.vrrm, ifav=self.ifav, ifsm=self.ifsm, i2t=self.i2t),
                          source="given in the design file")


@dataclass(frozen=True)
class InlineVacuum:
    """``diode = { kind = "vacuum", perveance = ... }``: a Child-Langmuir plate given in the design file."""

    kind: ClassVar[str] = "vacuum"
    perveance: float = key("perveance", "", "perveance per plate, A/V^1.5 (i = P v^1.5)", required=True,
                           need='the plate perveance in A/V^1.5, e.g. "1m" (i = P v^1.5)', above=0,
                           minimum=MIN_PERVEANCE, maximum=1.0)
    warmup: float = key("warmup", "s", "time to full emission after switch-on (emission starts at half "
                        "of it)", 0.0, shown="0", minimum=0, maximum=600)
    piv: float | None = key("piv", "V", "rated peak inverse voltage, for checks", None, shown="none",
                            above=0)
    peak_current: float | None = key("peak_current", "A", "rated peak plate current, for checks", None,
                                     shown="none", above=0)
    dc_current: float | None = key("dc_current", "A", "rated DC output current, for checks", None,
                                   shown="none", above=0)
    max_capacitance: float | None = key("max_capacitance", "F", "largest input (reservoir) capacitance "
                                        "allowed", None, shown="none", above=0, label="largest input capacitance")
    min_resistance: float | None = key("min_resistance", "ohm", "smallest supply resistance per plate "
                                       "allowed", None, shown="none", minimum=0)

    def model(self) -> DiodeModel:
        ratings = TubeRatings(piv=self.piv, peak_current=self.peak_current, dc_current=self.dc_current,
                              max_input_capacitance=self.max_capacitance, min_plate_resistance=self.min_resistance)
        vac = VacuumDiode(perveance=self.perveance, warmup_start=self.warmup / 2, warmup_full=self.warmup,
                          ratings=ratings)
        return DiodeModel(name="inline vacuum", is_=0.0, n=1.0, rs=0.0, source="given in the design file", vacuum=vac)


INLINE_DIODES: tuple[type, ...] = (InlineSilicon, InlineVacuum)


def _diode_foreign(name: str, chosen: type, owner: type | None) -> str:
    if chosen is InlineVacuum:
        return "belongs to a silicon diode; a vacuum plate takes perveance (and warmup, piv, peak_current)"
    return 'belongs to a vacuum plate; set kind = "vacuum"'


def read_inline_diode(rd: Reader, spec: Mapping[str, Any], path: str) -> DiodeModel:
    """An inline diode table (either kind) as a :class:`DiodeModel`."""
    obj = read_kind(rd, INLINE_DIODES, spec, path, _diode_foreign, default="silicon")
    return obj.model()


# --- ratings a design gives for its own parts ---------------------------------------------------


@dataclass(frozen=True)
class PartRating:
    """Ratings a design gives for one of its own parts (all optional)."""

    v: float | None = key("v", "V", "rated voltage", None, above=0, maximum=1e6)
    ripple: float | None = key("ripple", "A", "ripple-current rating (RMS)", None, above=0, maximum=1e6)
    ripple_frequency: float | None = key("ripple_frequency", "Hz", "frequency of the ripple rating", None,
                                         above=0, maximum=1e6)
    i: float | None = key("i", "A", "rated DC current", None, above=0, maximum=1e6)
    w: float | None = key("w", "W", "power rating", None, above=0, maximum=1e6)
    source: str = "design file"

    #: Which keys a rating table takes for each kind of part.
    FOR: ClassVar[dict[str, tuple[str, ...]]] = {"c": ("v", "ripple", "ripple_frequency"), "l": ("i",), "r": ("w",)}
    EXAMPLE: ClassVar[dict[str, str]] = {"c": '{ v = "450", ripple = "1.2" }', "l": '{ i = "150m" }',
                                         "r": '{ w = "2" }'}


def rating_reader(part: str) -> Any:
    """The reader of a ``rating = { ... }`` table for a capacitor ("c"), choke ("l") or resistor ("r")."""

    def read(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> PartRating:
        if not isinstance(raw, dict):
            raise rd.fail(path, f"expected a table such as {PartRating.EXAMPLE[part]}, got {show(raw)}")
        allowed = {k: v for k, v in keys(PartRating).items() if k in PartRating.FOR[part]}
        rd.check_keys(raw, allowed, path, required=False)
        vals = {attr: rd.read(raw, k, path) for name, (attr, k) in allowed.items() if name in raw}
        return PartRating(**vals)

    return read


# --- regulator parts ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Zener:
    """A zener diode (or a string of ``count`` equal ones): ``zener = { voltage = "75", count = 2 }``."""

    voltage: float = key("voltage", "V", "each zener", required=True, need="the voltage of each zener",
                         above=0, maximum=1000, label="zener voltage")
    count: int = key("count", "int", "in series", 1, shown="1", minimum=1, maximum=50, label="zeners in series")
    resistance: float = key("resistance", "ohm", "dynamic resistance each", 0.0,
                            shown="voltage / 20 (at least 1)", above=0, maximum=1e5, label="zener dynamic resistance")
    power: float | None = key("power", "W", "rating each", None, shown="none", above=0, maximum=1e3,
                              label="zener power rating")


def zener_resistance(voltage: float) -> float:
    """A datasheet-like dynamic resistance for a zener of this voltage when none is given: 1/20 of the
    voltage, at least 1 ohm (common practice)."""
    return max(voltage / 20.0, 1.0)


def read_zener(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> Zener:
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected {{ voltage = "75", count = 2 }}, got {show(raw)}')
    z = read_section(rd, Zener, raw, path)
    return z if "resistance" in raw else replace(z, resistance=zener_resistance(z.voltage))


@dataclass(frozen=True)
class GlowSpec:
    """Glow-discharge regulator tubes in series (ratings per tube)."""

    name: str
    count: int
    maintaining: float  # V
    striking: float  # V
    extinction: float  # V
    i_min: float  # A
    i_max: float  # A
    resistance: float  # ohm dynamic
    source: str


@dataclass(frozen=True)
class PassDevice:
    """A series-pass MOSFET: ``device = { vto = "3.5", kp = "2.5", vdss = "500" }`` or a library name."""

    vto: float = key("vto", "V", "threshold", required=True, need="the threshold voltage", above=0, maximum=20)
    kp: float = key("kp", "", "transconductance parameter, A/V^2", required=True, need="kp in A/V^2", above=0,
                    maximum=1e3)
    vdss: float | None = key("vdss", "V", "drain-source rating", None, above=0)
    id_max: float | None = key("id", "A", "drain current rating", None, above=0)
    pd: float | None = key("pd", "W", "dissipation rating", None, above=0)
    name: str = "inline"
    source: str = "given in the design file"
