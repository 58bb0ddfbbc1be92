"""What feeds the rectifier: a sine EMF, a mains transformer from its nameplate, or a battery inverter.

Three kinds of ``[source]`` (a tagged union, chosen by ``kind``), each with its own keys.
Every kind answers the same questions for the circuit: the equivalent winding the rectifier
sees (``vrms``, ``resistance``, ``inductance`` per winding, each half for a centre tap), its
``frequency`` and ``mains_tolerance``.  How a nameplate or an inverter becomes that winding is
derived here, beside the keys it comes from.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from simkit.design.snubber import Snubber, snubber_key
from simkit.design.vocab import Reader, key, read_section, show
from simkit.units import UnitError, parse_percent, parse_value

#: Source EMFs below this are refused, V RMS: below a volt a rectifier diode hardly conducts.
MIN_EMF = 1.0

_FREQUENCY = dict(above=0, maximum=100e3)


def _frequency() -> Any:
    return key("frequency", "Hz", "mains or inverter frequency", required=True,
               need='the mains or inverter frequency, e.g. "50"', **_FREQUENCY)


def _tolerance() -> Any:
    return key("mains_tolerance", "%", "supply range, +- this fraction, for corner checks and `run --mains`", None,
               shown="none", label="mains tolerance")


class _Periodic:
    """What every source kind derives from its RMS voltage and frequency."""

    vrms: float
    frequency: float

    @property
    def vpeak(self) -> float:
        """Open-circuit peak voltage of a sine of the same RMS, V."""
        return math.sqrt(2.0) * self.vrms

    @property
    def period(self) -> float:
        """One period of the source, s."""
        return 1.0 / self.frequency


@dataclass(frozen=True)
class SineSource(_Periodic):
    """``kind = "sine"``: an EMF behind series resistance and leakage inductance."""

    kind: ClassVar[str] = "sine"
    vrms: float = key("vrms", "V", "open-circuit RMS voltage (each half for centre-tap)", required=True,
                      need='the open-circuit RMS voltage of the winding, e.g. "250"', above=0, minimum=MIN_EMF,
                      maximum=200e3)
    frequency: float = _frequency()
    resistance: float = key("resistance", "ohm", "series resistance of the winding plus the primary referred to "
                            "the secondary (each half for centre-tap)", required=True,
                            need='the series resistance of the winding, e.g. "25"', minimum=0, maximum=1e9,
                            label="winding series resistance")
    inductance: float = key("inductance", "H", "series leakage inductance (each half for centre-tap)", 0.0,
                            shown="0", minimum=0, maximum=1e3)
    mains_tolerance: float | None = _tolerance()
    rated_current: float | None = key("rated_current", "A", "the winding's RMS current rating (each half for "
                                      "centre-tap), for `simkit check`", None, shown="none", above=0, maximum=1e3)
    snubber: Snubber | None = snubber_key("the winding (each half for centre-tap)")

    transformer: ClassVar[None] = None
    inverter: ClassVar[None] = None



@dataclass(frozen=True)
class HeaterWinding:
    """One heater or filament winding of a mains transformer: ``{ vrms = "6.3", i = "3" }``."""

    vrms: float = key("vrms", "V", "the heaters' voltage (the winding's nameplate voltage at this load)",
                      required=True, need='the heater voltage, e.g. vrms = "6.3"', above=0, minimum=MIN_EMF,
                      maximum=1e3, label="heater voltage")
    i: float = key("i", "A", "the current the heaters draw", required=True, need='the heater current, e.g. i = "3"',
                   above=0, maximum=1e3, label="heater current")
    rated_current: float | None = key("rated_current", "A", "the winding's RMS current rating, for `simkit check`",
                                      None, shown="none", above=0, maximum=1e3)


def read_heaters(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> tuple[HeaterWinding, ...]:
    """``heaters = [{ vrms = "6.3", i = "3" }, ...]``."""
    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list):
        raise rd.fail(path, f'expected a list of windings such as [{{ vrms = "6.3", i = "3" }}], got {show(raw)}')
    if len(raw) > 20:
        raise rd.fail(path, f"at most 20 heater windings, got {len(raw)}")
    out = []
    for k, t in enumerate(raw):
        if not isinstance(t, dict):
            raise rd.fail(f"{path}.{k}", f'expected a table {{ vrms = "6.3", i = "3" }}, got {show(t)}')
        out.append(read_section(rd, HeaterWinding, t, f"{path}.{k}"))
    return tuple(out)


def read_va(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> float:
    """A VA rating: a number, or text with an SI prefix and an optional ``VA`` (``"150"``, ``"1.2kVA"``)."""
    text = raw.strip().removesuffix("VA").strip() if isinstance(raw, str) else raw
    try:
        v = parse_value(text, "")
    except UnitError as exc:
        raise rd.fail(path, f"{exc} (volt-amperes, e.g. \"150\" or \"1.2kVA\")") from None
    if not 0 < v <= 1e7:
        raise rd.fail(path, f"must be positive and at most 1e+07 VA, got {v:g}")
    return v


@dataclass(frozen=True)
class TransformerSource(_Periodic):
    """``kind = "transformer"``: a mains transformer described by its nameplate.

    With regulation r (no-load rise over full-load voltage): V_oc = V_fl (1 + r) and the series
    resistance of the whole secondary R = (V_oc - V_fl) / I_rated, treating the drop at the rated
    resistive load as resistive.  With measured winding resistances Rp and Rs: the turns ratio n
    solves V_fl = n V_p - I_rated (Rs + n^2 Rp), R = Rs + n^2 Rp (the primary referred to the
    secondary), V_oc = n V_p.  (Derived here; docs/reference.md, Sources.)
    """

    kind: ClassVar[str] = "transformer"
    primary_vrms: float = key("primary_vrms", "V", "rated primary (mains) voltage", required=True,
                              need='the rated primary voltage, e.g. "230"', above=0, minimum=MIN_EMF, maximum=100e3,
                              label="rated primary voltage")
    secondary_vrms: float = key("secondary_vrms", "V", "rated secondary voltage at rated current, whole winding "
                                "(a 300-0-300 V winding is 600 with centre_tap = true)", required=True,
                                need='the rated secondary voltage, e.g. "600"', above=0, minimum=MIN_EMF,
                                maximum=200e3, label="rated secondary voltage")
    rated_current: float = key("rated_current", "A", "rated secondary RMS current", required=True,
                               need='the rated secondary current, e.g. "150m"', above=0, maximum=1e3)
    frequency: float = _frequency()
    regulation: float | None = key("regulation", "%", "rise of the secondary voltage from full load to no load",
                                   None, percent_max=1.0)
    primary_resistance: float | None = key("primary_resistance", "ohm", "measured primary winding resistance "
                                           "(with secondary_resistance, instead of regulation)", None,
                                           minimum=0, maximum=1e6)
    secondary_resistance: float | None = key("secondary_resistance", "ohm", "measured resistance of the whole "
                                             "secondary", None, minimum=0, maximum=1e6)
    leakage_inductance: float = key("leakage_inductance", "H", "leakage inductance referred to the whole secondary",
                                    0.0, shown="0", minimum=0, maximum=1e3)
    centre_tap: bool = key("centre_tap", "bool", "the secondary has a centre tap (needed for topology centre-tap)",
                           False, shown="false")
    mains_tolerance: float | None = _tolerance()
    snubber: Snubber | None = snubber_key("the secondary (each half for centre-tap)")
    heaters: tuple[HeaterWinding, ...] = key("heaters", "list", "heater and filament windings on the same core, "
                                             '[{ vrms = "6.3", i = "3" }, ...]: their current adds to the primary\'s',
                                             (), reader=read_heaters, of=(HeaterWinding,))
    va_rating: float | None = key("rated_va", "VA", "the transformer's VA rating, every winding together, for "
                                  "`simkit check`", None, shown="none", reader=read_va)
    topology: str = "bridge"  # the rectifier it feeds (a centre tap splits the winding): set by the reader

    inverter: ClassVar[None] = None

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        has_reg = "regulation" in t
        has_res = "primary_resistance" in t or "secondary_resistance" in t
        if has_reg == has_res:
            raise rd.fail(f"{path}.regulation", "give either regulation (e.g. \"8%\") or both primary_resistance "
                          "and secondary_resistance" + ("" if not has_reg else ", not both"))
        if has_res:
            rd.need(t, "primary_resistance", path, "with secondary_resistance, the measured primary resistance")
            rd.need(t, "secondary_resistance", path, "with primary_resistance, the measured secondary resistance")

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if math.isnan(self.turns_ratio):
            raise rd.fail(f"{path}.primary_resistance", "with these winding resistances the transformer cannot "
                          f"deliver {self.secondary_vrms:g} V at {self.rated_current:g} A from "
                          f"{self.primary_vrms:g} V; check the values")
        if self.topology == "centre-tap" and not self.centre_tap:
            raise rd.fail(f"{path}.centre_tap", "topology centre-tap needs a centre-tapped secondary: set "
                          "centre_tap = true (secondary_vrms is then the whole winding, e.g. 600 for 300-0-300)")

    @property
    def transformer(self) -> TransformerSource:
        """The nameplate and what was derived from it (this object)."""
        return self

    @property
    def turns_ratio(self) -> float:
        """Secondary/primary turns, from the open-circuit voltage (NaN: the nameplate is impossible)."""
        vp, vs, ir = self.primary_vrms, self.secondary_vrms, self.rated_current
        if self.regulation is not None:
            return vs * (1 + self.regulation) / vp
        rp, rs = self.primary_resistance or 0.0, self.secondary_resistance or 0.0
        # rp*ir*n^2 - vp*n + (vs + ir*rs) = 0: the smaller (physical) root.
        a, b, c = rp * ir, -vp, vs + ir * rs
        if a == 0:
            return c / vp
        disc = b * b - 4 * a * c
        return math.nan if disc < 0 else (-b - math.sqrt(disc)) / (2 * a)

    @property
    def open_circuit_vrms(self) -> float:
        """Whole secondary, V."""
        return self.turns_ratio * self.primary_vrms

    @property
    def series_resistance(self) -> float:
        """Whole secondary with the primary referred to it, ohm."""
        if self.regulation is not None:
            return (self.open_circuit_vrms - self.secondary_vrms) / self.rated_current
        n = self.turns_ratio
        return (self.secondary_resistance or 0.0) + n * n * (self.primary_resistance or 0.0)

    @property
    def regulation_share(self) -> float:
        """No-load rise over full-load voltage of the high-voltage winding; heater windings share it."""
        return self.open_circuit_vrms / self.secondary_vrms - 1.0

    def heater_emf(self, h: HeaterWinding) -> float:
        """A heater winding's open-circuit EMF, V RMS: its voltage at its load raised by the shared regulation."""
        return h.vrms * (1.0 + self.regulation_share)

    def heater_resistance(self, h: HeaterWinding) -> float:
        """A heater winding's series resistance (its copper and the primary's, referred), ohm."""
        return (self.heater_emf(h) - h.vrms) / h.i

    def _per_winding(self) -> tuple[float, float, float]:
        voc, rser, leak = self.open_circuit_vrms, self.series_resistance, self.leakage_inductance
        if self.topology != "centre-tap":
            return voc, rser, leak
        # Each half: half the EMF; half the secondary resistance plus the primary referred to one half.
        # With only a regulation figure, the copper is taken as split evenly between primary and
        # secondary (common practice).
        r_sec = self.secondary_resistance if self.secondary_resistance is not None else rser / 2
        r_pri_ref = rser - r_sec
        return voc / 2, r_sec / 2 + r_pri_ref / 4, leak / 4

    @property
    def vrms(self) -> float:
        """Equivalent open-circuit EMF per winding (each half for a centre tap), V RMS."""
        return self._per_winding()[0]

    @property
    def resistance(self) -> float:
        """Equivalent series resistance per winding, ohm."""
        return self._per_winding()[1]

    @property
    def inductance(self) -> float:
        return self._per_winding()[2]



def read_efficiency_table(rd: Reader, raw: Any, path: str,
                          table: Mapping[str, Any] | None = None) -> tuple[tuple[float, float], ...]:
    """``efficiency_table = [[fraction of rated power, efficiency], ...]``."""
    if not isinstance(raw, list) or len(raw) < 2:
        raise rd.fail(path, "expected a list of at least two [fraction of rated power, efficiency] pairs, "
                      'e.g. [[0.1, "70%"], [1.0, "88%"]]')
    out: list[tuple[float, float]] = []
    for k, pair in enumerate(raw):
        if not isinstance(pair, list) or len(pair) != 2:
            raise rd.fail(f"{path}.{k}", f"expected [fraction, efficiency], got {show(pair)}")
        try:
            frac = parse_value(pair[0], "")
            eff = parse_percent(pair[1])
        except UnitError as exc:
            raise rd.fail(f"{path}.{k}", str(exc)) from None
        if not 0 <= frac <= 2 or not 0 < eff <= 1:
            raise rd.fail(f"{path}.{k}", "fraction must be 0..2 and efficiency above 0% and at most 100%")
        if out and frac <= out[-1][0]:
            raise rd.fail(f"{path}.{k}", "fractions must increase")
        out.append((frac, eff))
    return tuple(out)


@dataclass(frozen=True)
class InverterSource(_Periodic):
    """``kind = "inverter"``: a battery-fed inverter's output, sine, square or modified sine.

    A modified sine (three-level wave) of step height ``peak`` reaches the RMS ``vrms`` when
    it sits at +-peak for (vrms/peak)^2 of each half period (its RMS is peak x sqrt(on share));
    a square wave's peak is its RMS.
    """

    kind: ClassVar[str] = "inverter"
    vrms: float = key("vrms", "V", "nominal output RMS voltage", required=True,
                      need='the inverter\'s nominal output RMS voltage, e.g. "230"', above=0, minimum=MIN_EMF,
                      maximum=100e3)
    frequency: float = _frequency()
    rated_power: float = key("rated_power", "W", "rated output power", required=True,
                             need='the inverter\'s rated output power, e.g. "150"', above=0, maximum=1e6)
    waveform: str = key("waveform", "choice", '"sine", "modified-sine" or "square"', "sine", shown='"sine"',
                        choices=("sine", "modified-sine", "square"))
    peak_given: float | None = key("peak", "V", "modified-sine: the step height; the zero interval is set so that "
                                   "the RMS equals vrms", None, shown="sqrt(2) x vrms", above=0, maximum=200e3)
    output_resistance: float = key("output_resistance", "ohm", "output resistance", 0.0, shown="0", minimum=0,
                                   maximum=1e6)
    inductance: float = key("inductance", "H", "series inductance of the output", 0.0, shown="0", minimum=0,
                            maximum=1e3)
    efficiency: float | None = key("efficiency", "%", "efficiency at rated power (with idle_power)", None,
                                   percent_max=1.0 + 1e-12)
    idle_power: float = key("idle_power", "W", "battery power drawn with no load", 0.0, shown="0", minimum=0,
                            maximum=1e5)
    efficiency_table: tuple[tuple[float, float], ...] = key(
        "efficiency_table", "list", "[[fraction of rated power, efficiency], ...] instead of efficiency", (),
        reader=read_efficiency_table)
    regulated: bool = key("regulated", "bool", "holds its output against battery sag", False, shown="false")
    response_time_given: float | None = key("response_time", "s", "time constant of its input smoothing (how fast "
                                            "battery current follows the load)", None, shown="2 periods", above=0,
                                            maximum=100)
    edge_time_given: float | None = key("edge_time", "s", "rise and fall time of square and modified-sine edges",
                                        None, shown="period / 500", above=0)
    mains_tolerance: float | None = _tolerance()
    snubber: Snubber | None = snubber_key("the inverter's output")
    peak_power_given: float | None = key("peak_power", "W", "surge rating: the output power it holds for a few "
                                         "periods (switch-on), for `simkit check`", None, shown="2 x rated_power",
                                         above=0, maximum=1e6, label="surge power rating")

    transformer: ClassVar[None] = None
    rated_current: ClassVar[None] = None

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if "efficiency" in t and "efficiency_table" in t:
            raise rd.fail(f"{path}.efficiency_table", "give efficiency or efficiency_table, not both")
        if "efficiency_table" not in t:
            rd.need(t, "efficiency", path, 'the efficiency at rated power, e.g. "85%" (or an efficiency_table)')

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if self.waveform != "modified-sine" and self.peak_given is not None:
            raise rd.fail(f"{path}.peak", "applies to waveform modified-sine only")
        if self.waveform == "modified-sine" and self.peak < self.vrms:
            raise rd.fail(f"{path}.peak", f"must be at least vrms ({self.vrms:g} V): a three-level wave of peak "
                          f"{self.peak:g} V cannot reach that RMS")
        if self.efficiency is not None:
            if not 0 < self.efficiency <= 1:
                raise rd.fail(f"{path}.efficiency",
                              f"must be above 0% and at most 100%, got {self.efficiency * 100:g}%")
            loss = self.rated_power / self.efficiency - self.rated_power
            if loss < self.idle_power:
                raise rd.fail(f"{path}.idle_power", f"the idle power ({self.idle_power:g} W) exceeds the whole loss "
                              f"at rated power ({loss:.3g} W from the efficiency)")
        if self.edge_time_given is not None and self.edge_time_given > self.period / 8:
            raise rd.fail(f"{path}.edge_time", f"must be at most {self.period / 8:g}, got {self.edge_time_given:g}")

    @property
    def inverter(self) -> InverterSource:
        """The inverter's own parameters (this object)."""
        return self

    @property
    def peak_power(self) -> float:
        """Surge rating, W: as given, or twice the rated power (common practice, docs/sources.md#supply-9)."""
        return self.peak_power_given if self.peak_power_given is not None else PEAK_POWER_SHARE * self.rated_power

    @property
    def peak(self) -> float:
        """The waveform's peak (open circuit, nominal battery), V."""
        if self.waveform == "square":
            return self.vrms
        if self.waveform == "modified-sine" and self.peak_given is not None:
            return self.peak_given
        return math.sqrt(2.0) * self.vrms

    @property
    def duty(self) -> float:
        """Share of each half period at +-peak (modified sine; 1 for a square wave)."""
        return (self.vrms / self.peak) ** 2 if self.waveform == "modified-sine" else 1.0

    @property
    def resistance(self) -> float:
        return self.output_resistance

    @property
    def response_time(self) -> float:
        return self.response_time_given if self.response_time_given is not None else 2 * self.period

    @property
    def edge_time(self) -> float:
        return self.edge_time_given if self.edge_time_given is not None else self.period / 500


    @property
    def loss_k(self) -> float:
        """Coefficient of the loss that grows with the square of the output, 1/W."""
        if self.efficiency is None:
            return 0.0
        pr = self.rated_power
        return (pr / self.efficiency - pr - self.idle_power) / (pr * pr)


Source = SineSource | TransformerSource | InverterSource
SOURCE_KINDS: tuple[type, ...] = (SineSource, TransformerSource, InverterSource)


def source_foreign(name: str, chosen: type, owner: type | None) -> str:
    """The message for a key of another kind of source."""
    if chosen is SineSource:
        return 'belongs to another source kind; this is kind "sine" (set kind = "transformer" or "inverter")'
    if chosen is TransformerSource:
        return 'belongs to another source kind; this is kind "transformer"'
    return "belongs to another source kind; an inverter has output_resistance"


#: An inverter's surge rating when none is given, times its rated power (common practice).
PEAK_POWER_SHARE = 2.0


def worst_switch_on_phase(source: Source) -> float:
    """The switch-on instant (degrees of the period, as ``switch_on_phase``) with the highest surge.

    A sine: its crest, 90.  A square or modified sine: the start of the positive flat top, where
    the source steps to its full voltage and stays there longest (derived here).
    """
    inv = source.inverter
    if inv is None or inv.waveform == "sine":
        return 90.0
    return 90.0 - 90.0 * inv.duty


def switch_on_words(source: Source, phase: float) -> str:
    """What the source does at a switch-on phase, in words (how reports and check name that instant)."""
    inv = source.inverter
    ph = phase % 360.0
    if inv is None or inv.waveform == "sine":
        if abs(ph - 90.0) < 1e-9:
            return f"{phase:g}° (the crest)"
        return f"{phase:g}° of the sine"
    start = 90.0 - 90.0 * inv.duty  # the positive flat top spans [start, 180 - start]
    edge = inv.edge_time / inv.period * 360.0
    kind = "square" if inv.waveform == "square" else "modified sine"
    if abs(ph - start) <= edge:
        where = "the start of the positive step"
    elif start < ph < 180.0 - start:
        where = "on the positive step"
    elif start + 180.0 < ph < 360.0 - start:
        where = "on the negative step"
    else:
        where = "in the zero interval"
    return f"{phase:g}° of the period ({kind}: {where})"


@dataclass(frozen=True)
class Chemistry:
    """What a battery chemistry brings: voltage corners per cell, Peukert's exponent, the rating's hours.

    Common practice values (docs/sources.md#supply-8).
    """

    name: str
    cell_voltage: float  # V, a typical open-circuit cell voltage: counts the cells of a battery
    low: float  # V per cell: a battery nearly discharged
    high: float  # V per cell: a battery on charge
    peukert: float
    rated_hours: float  # h: the discharge time the capacity is rated at


CHEMISTRIES: dict[str, Chemistry] = {
    "lead-acid": Chemistry("lead-acid", 2.05, 11.5 / 6, 2.40, 1.15, 20.0),
    "lifepo4": Chemistry("lifepo4", 3.3, 3.0, 3.65, 1.03, 5.0),
    "li-ion": Chemistry("li-ion", 3.9, 3.0, 4.2, 1.05, 5.0),
}


@dataclass(frozen=True, kw_only=True)
class Battery:
    """``[battery]``: what feeds an inverter.

    Runtime follows Peukert's law from the capacity rating (C ampere-hours over H hours): a
    current I lasts H (C / (I H))^k hours; a current that varies (keying) uses up the battery at
    the mean of I^k, so it lasts C^k H^(1-k) / mean(I^k) (docs/sources.md#supply-6).
    """

    voltage: float = key("voltage", "V", "open-circuit battery voltage", required=True,
                         need='the open-circuit battery voltage, e.g. "12.6"', above=0, maximum=10e3)
    internal_resistance: float = key("internal_resistance", "ohm", "internal resistance plus wiring", 0.0, shown="0",
                                     minimum=0, maximum=1e3)
    capacity: float = key("capacity", "Ah", "rated capacity", required=True, need='the rated capacity, e.g. "7"',
                          above=0, maximum=1e6)
    usable_fraction: float = key("usable_fraction", "%", "share of the capacity you will use (e.g. 50% for "
                                 "lead-acid life)", 1.0, shown="100%", percent_max=1.0 + 1e-12)
    chemistry: str = key("chemistry", "choice", '"lead-acid", "lifepo4" or "li-ion": the defaults of cells, low, '
                         'high, peukert and rated_hours', "lead-acid", shown='"lead-acid"',
                         choices=tuple(CHEMISTRIES))
    cells_given: int | None = key("cells", "int", "cells in series", None,
                                  shown="voltage / 2.05, 3.3 or 3.9 V (by chemistry), rounded", minimum=1,
                                  maximum=5000)
    low_given: float | None = key("low", "V", "open-circuit voltage of a nearly discharged battery: the low corner "
                                  "of `check` and `run --battery low`", None,
                                  shown="cells x 1.917, 3.0 or 3.0 V", above=0, maximum=10e3,
                                  label="battery voltage, low corner")
    high_given: float | None = key("high", "V", "battery voltage on charge: the high corner of `check` and "
                                   "`run --battery high`", None, shown="cells x 2.40, 3.65 or 4.2 V", above=0,
                                   maximum=10e3, label="battery voltage, high corner")
    peukert_given: float | None = key("peukert", "", "Peukert exponent of the runtime (1: capacity independent of "
                                      "the current)", None, shown="1.15, 1.03 or 1.05", minimum=1.0, maximum=2.0,
                                      label="Peukert exponent")
    rated_hours_given: float | None = key("rated_hours", "", "hours of discharge the capacity is rated at (20 for "
                                          "the 20-hour rate)", None, shown="20, 5 or 5", above=0, maximum=1e4,
                                          label="capacity rating, hours")

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if self.usable_fraction <= 0:
            raise rd.fail(f"{path}.usable_fraction", "must be above 0%")
        if self.low > self.high:
            raise rd.fail(f"{path}.low", f"the low corner ({self.low:g} V) is above the high one ({self.high:g} V)")

    @property
    def kind(self) -> Chemistry:
        return CHEMISTRIES[self.chemistry]

    @property
    def cells(self) -> int:
        """Cells in series: as given, or the voltage over the chemistry's typical cell voltage, rounded."""
        if self.cells_given is not None:
            return self.cells_given
        return max(round(self.voltage / self.kind.cell_voltage), 1)

    @property
    def low(self) -> float:
        """The low corner's open-circuit voltage, V."""
        return self.low_given if self.low_given is not None else self.cells * self.kind.low

    @property
    def high(self) -> float:
        """The high corner's voltage, V."""
        return self.high_given if self.high_given is not None else self.cells * self.kind.high

    @property
    def peukert(self) -> float:
        return self.peukert_given if self.peukert_given is not None else self.kind.peukert

    @property
    def rated_hours(self) -> float:
        """Hours of the capacity rating."""
        return self.rated_hours_given if self.rated_hours_given is not None else self.kind.rated_hours

    def at(self, corner: str) -> Battery:
        """This battery at a voltage corner: "low", "high" or "nominal".  The same battery: its cells and
        corners stay those of its nominal voltage (they would otherwise be worked out again from the corner's)."""
        if corner == "nominal":
            return self
        return dataclasses.replace(self, voltage=self.low if corner == "low" else self.high, cells_given=self.cells,
                                   low_given=self.low, high_given=self.high)

    def runtime_h(self, current: float | np.ndarray, time: np.ndarray | None = None) -> float:
        """Hours until the usable share of the capacity is used, at a current (A) or a current over ``time``
        (s; the mean of I^k over it).  Infinite when nothing is drawn."""
        k = self.peukert
        if time is None:
            load = max(float(current), 0.0) ** k
        else:
            i = np.maximum(np.asarray(current, dtype=float), 0.0) ** k
            load = float(np.trapezoid(i, time) / (time[-1] - time[0])) if time[-1] > time[0] else float(i[0])
        if load <= 0:
            return math.inf
        c, h = self.capacity, self.rated_hours
        return self.usable_fraction * c**k * h ** (1 - k) / load
