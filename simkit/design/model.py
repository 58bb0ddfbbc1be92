"""The design: frozen dataclasses of SI floats, built and validated by :mod:`simkit.design.loader`.

Nothing here parses text; everything here is already checked.  Sweeps derive new designs
with :func:`dataclasses.replace` or by re-loading an overridden dictionary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal

Topology = Literal["half-wave", "centre-tap", "bridge", "doubler", "cascade"]
TOPOLOGIES: tuple[str, ...] = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")
FilterKind = Literal["c", "l", "r"]
LoadKind = Literal["resistor", "current"]


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
    is_: float  # A, saturation current
    n: float  # emission coefficient
    rs: float  # ohm, series resistance
    bv: float | None = None  # V, reverse breakdown (None: no breakdown modelled)
    tt: float = 0.0  # s, transit time (0: no stored charge, see ENGINE-NOTES trap 1)
    cjo: float = 0.0  # F, zero-bias junction capacitance (0: no ringing)
    ratings: DiodeRatings = field(default_factory=DiodeRatings)
    source: str = ""  # where the ratings come from


@dataclass(frozen=True)
class Source:
    """The winding that feeds the rectifier: an EMF with series resistance and inductance."""

    kind: Literal["sine"]
    vrms: float  # V, open-circuit RMS (each half for centre-tap)
    frequency: float  # Hz
    resistance: float  # ohm, series (each half for centre-tap)
    inductance: float = 0.0  # H, series leakage (each half for centre-tap)
    mains_tolerance: float | None = None  # fraction, +- supply range

    @property
    def vpeak(self) -> float:
        """Open-circuit peak voltage, V."""
        return math.sqrt(2.0) * self.vrms

    @property
    def period(self) -> float:
        """Source period, s."""
        return 1.0 / self.frequency


@dataclass(frozen=True)
class Rectifier:
    topology: Topology
    diode: DiodeModel
    stages: int = 1  # cascade only
    capacitance: float | None = None  # F, doubler and cascade stage capacitors
    capacitance_tolerance: float | None = None  # fraction, for spread


@dataclass(frozen=True)
class FilterSection:
    """One filter section, from the rectifier towards the load."""

    kind: FilterKind
    value: float  # F for c, H for l, ohm for r
    esr: float = 0.0  # ohm, c only
    dcr: float = 0.0  # ohm, l only
    tolerance: float | None = None  # fraction of value, for spread


@dataclass(frozen=True)
class Load:
    kind: LoadKind
    r: float | None = None  # ohm, resistor
    i: float | None = None  # A, current
    tolerance: float | None = None  # fraction, for spread


@dataclass(frozen=True)
class Bleeder:
    r: float  # ohm
    tolerance: float | None = None  # fraction, for spread


@dataclass(frozen=True)
class SpreadOptions:
    distribution: Literal["uniform", "normal"] = "uniform"  # normal: tolerance = 3 sigma


@dataclass(frozen=True)
class SimulationOptions:
    switch_on_phase: float = 90.0  # degrees of the source at switch-on
    steps_per_period: int = 1000  # max time step is period / steps_per_period
    settle_tolerance: float = 1e-4  # relative change per period that counts as settled
    max_settle_time: float | None = None  # s; None: 400 periods
    switch_on_time: float | None = None  # s; None: chosen from the circuit's time constants
    reltol: float = 1e-4


@dataclass(frozen=True)
class Design:
    """A whole, validated design."""

    title: str
    source: Source
    rectifier: Rectifier
    filters: tuple[FilterSection, ...] = ()
    load: Load | None = None
    bleeder: Bleeder | None = None
    simulation: SimulationOptions = field(default_factory=SimulationOptions)
    spread: SpreadOptions = field(default_factory=SpreadOptions)
    note: str = ""
    origin: str = "<design>"  # file the design came from, for messages

    @property
    def output_is_series_element(self) -> bool:
        return bool(self.filters) and self.filters[-1].kind in ("l", "r")
