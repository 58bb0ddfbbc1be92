"""The design: frozen dataclasses of SI floats, built and validated by :mod:`simkit.design.loader`.

Nothing here parses text; everything here is already checked.  Sweeps derive new designs
with :func:`dataclasses.replace` or by re-loading an overridden dictionary.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Literal

Topology = Literal["half-wave", "centre-tap", "bridge", "doubler", "cascade"]
TOPOLOGIES: tuple[str, ...] = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")
FilterKind = Literal["c", "l", "r"]
LoadKind = Literal["resistor", "current", "tube", "keyed", "steps"]
SourceKind = Literal["sine", "transformer", "inverter"]
Waveform = Literal["sine", "modified-sine", "square"]


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
class Transformer:
    """Nameplate of a mains transformer, and what simkit derived from it."""

    primary_vrms: float  # V
    secondary_vrms: float  # V, whole secondary at rated current
    rated_current: float  # A (RMS)
    centre_tap: bool
    regulation: float | None  # fraction, no-load rise over full-load voltage
    primary_resistance: float | None  # ohm
    secondary_resistance: float | None  # ohm
    turns_ratio: float  # secondary/primary, from the open-circuit voltage
    open_circuit_vrms: float  # V, whole secondary
    series_resistance: float  # ohm, whole secondary with the primary referred to it

    @property
    def rated_va(self) -> float:
        return self.secondary_vrms * self.rated_current


@dataclass(frozen=True)
class Inverter:
    """A battery-fed inverter: waveform, output resistance and losses."""

    waveform: Waveform
    peak: float  # V, the waveform's peak (open circuit, nominal battery)
    duty: float  # fraction of each half period at +-peak (modified-sine; 1 for square)
    rated_power: float  # W
    efficiency: float | None  # at rated power
    idle_power: float  # W
    efficiency_table: tuple[tuple[float, float], ...]  # (fraction of rated power, efficiency)
    regulated: bool
    response_time: float  # s, time constant of its input (DC bus) smoothing
    edge_time: float  # s, rise/fall of the square and modified-sine edges

    def input_power(self, p_out: float) -> float:
        """Battery power for an output power, W (the loss model of the design file)."""
        p = max(p_out, 0.0)
        if self.efficiency_table:
            frac = p / self.rated_power
            pts = self.efficiency_table
            if frac <= pts[0][0]:
                eff = pts[0][1]
            elif frac >= pts[-1][0]:
                eff = pts[-1][1]
            else:
                eff = pts[-1][1]
                for (x0, y0), (x1, y1) in itertools.pairwise(pts):
                    if x0 <= frac <= x1:
                        eff = y0 + (y1 - y0) * (frac - x0) / (x1 - x0)
                        break
            return max(self.idle_power, p / eff)
        k = self.loss_k
        return self.idle_power + p + k * p * p

    @property
    def loss_k(self) -> float:
        """Coefficient of the loss that grows with the square of the output, 1/W."""
        if self.efficiency is None:
            return 0.0
        pr = self.rated_power
        return (pr / self.efficiency - pr - self.idle_power) / (pr * pr)


@dataclass(frozen=True)
class Battery:
    voltage: float  # V, open-circuit
    internal_resistance: float  # ohm
    capacity: float  # Ah
    usable_fraction: float = 1.0


@dataclass(frozen=True)
class Source:
    """The winding that feeds the rectifier: an EMF with series resistance and inductance.

    For every kind, ``vrms``, ``resistance`` and ``inductance`` are the equivalent per winding
    (each half for centre-tap) that the netlist uses; ``transformer`` and ``inverter`` keep
    what the design file said.
    """

    kind: SourceKind
    vrms: float  # V, open-circuit RMS (each half for centre-tap)
    frequency: float  # Hz
    resistance: float  # ohm, series (each half for centre-tap)
    inductance: float = 0.0  # H, series leakage (each half for centre-tap)
    mains_tolerance: float | None = None  # fraction, +- supply range
    transformer: Transformer | None = None
    inverter: Inverter | None = None
    rated_current: float | None = None  # A RMS per winding (half for centre-tap): what it may carry

    @property
    def vpeak(self) -> float:
        """Open-circuit peak voltage, V."""
        return math.sqrt(2.0) * self.vrms

    @property
    def period(self) -> float:
        """Source period, s."""
        return 1.0 / self.frequency


@dataclass(frozen=True)
class PartRating:
    """Ratings a design gives for one of its own parts (all optional)."""

    v: float | None = None  # V: capacitor rated voltage
    ripple: float | None = None  # A RMS: capacitor ripple-current rating
    ripple_frequency: float | None = None  # Hz at which the ripple rating is stated
    i: float | None = None  # A: choke rated DC current
    w: float | None = None  # W: resistor power rating
    source: str = "design file"


@dataclass(frozen=True)
class Rectifier:
    topology: Topology
    diode: DiodeModel
    stages: int = 1  # cascade only
    capacitance: float | None = None  # F, doubler and cascade stage capacitors
    capacitance_tolerance: float | None = None  # fraction, for spread
    capacitor_rating: PartRating | None = None  # of each stage capacitor
    capacitor_esr: float = 0.0  # ohm, of each stage capacitor
    balancing: float | None = None  # ohm across each stage capacitor
    balancing_rating: PartRating | None = None


@dataclass(frozen=True)
class FilterSection:
    """One filter section, from the rectifier towards the load."""

    kind: FilterKind
    value: float  # F for c, H for l, ohm for r
    esr: float = 0.0  # ohm, c only
    dcr: float = 0.0  # ohm, l only
    tolerance: float | None = None  # fraction of value, for spread
    rating: PartRating | None = None


@dataclass(frozen=True)
class KeyState:
    """What a keyed load draws in one key state: a current or a resistance."""

    i: float | None = None  # A
    r: float | None = None  # ohm


@dataclass(frozen=True)
class Keying:
    """When a keyed load is down: a fixed rate and duty, or Morse text at a speed."""

    rate: float | None = None  # Hz
    duty: float | None = None  # fraction of each cycle key-down
    morse: str | None = None  # text sent, repeated
    wpm: float | None = None  # words per minute (PARIS standard)
    rise: float = 5e-3  # s
    fall: float = 5e-3  # s


@dataclass(frozen=True)
class Load:
    kind: LoadKind
    r: float | None = None  # ohm, resistor
    i: float | None = None  # A, current
    tolerance: float | None = None  # fraction, for spread
    tube_v: float | None = None  # V, tube load operating point
    tube_i: float | None = None  # A
    down: KeyState | None = None
    up: KeyState | None = None
    keying: Keying | None = None
    steps: tuple[tuple[float, float], ...] = ()  # (time s, current A) from switch-on
    warmup: float | None = None  # s: draws nothing until then (heaters warming)
    at: int | None = None  # filter section the load hangs after; None: the output
    pushing: float | None = None  # Hz/V of an oscillator fed from this node
    name: str = "LOAD"

    @property
    def perveance(self) -> float:
        """Child-Langmuir perveance of a tube load, A/V^1.5, from its operating point."""
        assert self.tube_v and self.tube_i
        return self.tube_i / self.tube_v**1.5


@dataclass(frozen=True)
class Bleeder:
    r: float  # ohm
    tolerance: float | None = None  # fraction, for spread
    rating: PartRating | None = None


@dataclass(frozen=True)
class Zener:
    """A zener diode (or a string of ``count`` equal ones)."""

    voltage: float  # V each
    count: int = 1
    resistance: float = 10.0  # ohm, dynamic, each
    power: float | None = None  # W rating each


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
    name: str
    vto: float  # V
    kp: float  # A/V^2
    vdss: float | None = None  # V
    id_max: float | None = None  # A
    pd: float | None = None  # W
    source: str = ""


@dataclass(frozen=True)
class Regulator:
    """A shunt or series-pass regulator between the filter and the load."""

    kind: Literal["shunt", "series"]
    resistance: float | None = None  # ohm: shunt dropping resistor
    resistor_rating: PartRating | None = None
    zener: Zener | None = None  # shunt element, or the series reference
    glow: GlowSpec | None = None  # shunt element
    reference: float | None = None  # V, series: the reference voltage
    reference_current: float = 2e-3  # A, series: set-up current of the reference
    filter_r: float = 100e3  # ohm, series: reference RC filter
    filter_c: float = 1e-6  # F
    gate_resistor: float = 1e3  # ohm, series: gate stopper
    gate_zener: float = 15.0  # V, series: gate-source protection
    device: PassDevice | None = None  # series
    headroom: float = 5.0  # V, series: the least input-output difference that keeps regulating


@dataclass(frozen=True)
class CheckPolicy:
    """Derating and safety limits of `simkit check` (defaults: common practice)."""

    diode_voltage: float = 0.8  # share of VRRM / PIV a diode may see
    capacitor_voltage: float = 0.9  # share of the rated voltage
    resistor_power: float = 0.5  # share of the power rating (resistors, zeners, the pass device)
    marginal: float = 0.1  # within this share of a limit: "marginal"
    safe_voltage: float = 60.0  # V: every capacitor below this ...
    safe_time: float = 5.0  # s: ... within this time after switch-off (load gone)


@dataclass(frozen=True)
class SpreadOptions:
    distribution: Literal["uniform", "normal"] = "uniform"  # normal: tolerance = 3 sigma


@dataclass(frozen=True)
class SimulationOptions:
    switch_on_phase: float = 90.0  # degrees of the source at switch-on
    steps_per_period: int | None = None  # max time step is period / this; None: chosen by accuracy
    settle_tolerance: float = 1e-4  # relative change per period that counts as settled
    max_settle_time: float | None = None  # s; None: 400 periods
    switch_on_time: float | None = None  # s; None: chosen from the circuit's time constants
    reltol: float = 1e-5
    max_points: float = 2e7  # refuse a run whose estimated time points exceed this


@dataclass(frozen=True)
class Design:
    """A whole, validated design."""

    title: str
    source: Source
    rectifier: Rectifier
    filters: tuple[FilterSection, ...] = ()
    loads: tuple[Load, ...] = ()
    bleeder: Bleeder | None = None
    battery: Battery | None = None
    regulator: Regulator | None = None
    simulation: SimulationOptions = field(default_factory=SimulationOptions)
    spread: SpreadOptions = field(default_factory=SpreadOptions)
    checks: CheckPolicy = field(default_factory=CheckPolicy)
    note: str = ""
    origin: str = "<design>"  # file the design came from, for messages

    @property
    def output_is_series_element(self) -> bool:
        return bool(self.filters) and self.filters[-1].kind in ("l", "r")

    @property
    def keyed(self) -> tuple[Load, ...]:
        return tuple(ld for ld in self.loads if ld.kind == "keyed")

    @property
    def has_timeline(self) -> bool:
        """Anything that changes after switch-on: warm-ups or load steps."""
        d = self.rectifier.diode
        return any(ld.warmup or ld.kind == "steps" for ld in self.loads) or bool(
            d.vacuum and d.vacuum.warmup_full > 0)
