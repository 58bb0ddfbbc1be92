"""Built-in silicon rectifier diodes: SPICE junction parameters and datasheet ratings.

Each part's ``source`` names the maker's sheet its ratings come from and says how far to
trust them: "read" in the sheet, or "from memory" with the sheet to check (docs/sources.md,
entries diode-1 to diode-6).  The junction parameters are our own fit, not a vendor model:
IS, N and RS are chosen so the forward drop at the rated current sits between a typical
value and the datasheet maximum (V_F column), which is what sets the rectified voltage.  TT
and CJO of the model every analysis uses are left at zero: stored charge and junction
capacitance make a rectifier deck ring with the winding's leakage inductance and slow ngspice
down many times over (docs/engine-notes.md, "TT = 0 and CJO = 0") while changing no figure of
the steady state.  Each part also carries its real dynamics (:attr:`DiodePart.dynamics`: the
maker's reverse recovery time and junction capacitance, with their source, turned into TT and
CJO), which only the high-frequency analysis (``simkit hash``, ``run --hash``) uses
(:func:`dynamics`).  No breakdown voltage is modelled, so the reverse voltage a design puts on
a diode is reported as it is, not clipped.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from simkit.design.model import DiodeModel, DiodeRatings

_VISHAY_88503 = "Vishay General Semiconductor, 1N4001 thru 1N4007, doc. 88503 (read)"
_VISHAY_88516 = "Vishay General Semiconductor, 1N5400 thru 1N5408, doc. 88516 (read)"
_VISHAY_88508 = "Vishay General Semiconductor, 1N4933 thru 1N4937, doc. 88508 (read)"
_UF4007 = (
    "from memory, as given by Vishay General Semiconductor, UF4001 thru UF4007 (not read: check it); "
    "the same ratings read in Vishay's US1A thru US1M sheet"
)


#: The makers' reverse recovery test (JEDEC style): forward current, then the reverse current the
#: circuit drives; t_rr ends when the reverse current has fallen back to a quarter of it.
TRR_IF = 0.5
TRR_IR = 1.0
#: The voltage at which the makers give the junction capacitance (at 1 MHz), V.
CJ_VOLTS = 4.0
#: SPICE's junction capacitance law CJ(V) = CJO / (1 + V/VJ)^M with its default grading (VJ = 1 V,
#: M = 0.5, the abrupt junction), which the high-frequency model keeps.
VJ = 1.0
M = 0.5


def tt_from_trr(trr: float, i_f: float = TRR_IF, i_r: float = TRR_IR) -> float:
    """SPICE transit time TT for a reverse recovery time measured from ``i_f`` into ``i_r``, s.

    Charge-control model: the stored charge TT x I_F is removed by the reverse current and by
    recombination; the storage phase lasts TT ln(1 + I_F / I_R) (docs/sources.md diode-7).  In
    SPICE's model the current snaps off when the charge is gone, so t_rr is that storage time.
    """
    return trr / math.log1p(i_f / i_r)


def cjo_from_cj(cj: float, volts: float = CJ_VOLTS) -> float:
    """SPICE zero-bias junction capacitance CJO that gives the maker's capacitance ``cj`` at ``volts``, F."""
    return cj * (1.0 + volts / VJ) ** M


@dataclass(frozen=True)
class Dynamics:
    """A part's reverse recovery time and junction capacitance as the maker gives them, and their source."""

    trr: float  # s, under the 0.5 A / 1 A / 0.25 A test
    cj: float  # F, at CJ_VOLTS and 1 MHz
    source: str

    @property
    def tt(self) -> float:
        return tt_from_trr(self.trr)

    @property
    def cjo(self) -> float:
        return cjo_from_cj(self.cj)


_N400X_DYNAMICS = Dynamics(
    trr=1.5e-6, cj=15e-12,
    source="t_rr 1.5 us typical under 0.5 A / 1 A / 0.25 A: Diotec Semiconductor, 1N4001 ... 1N4007 data sheet "
    "(read); C_J 15 pF at 4 V, 1 MHz: Vishay General Semiconductor doc. 88503 (read), Diotec the same")
_UF4007_DYNAMICS = Dynamics(
    trr=75e-9, cj=10e-12,
    source="t_rr 75 ns maximum under 0.5 A / 1 A / 0.25 A and C_J 10 pF at 4 V: from memory of the UF4001 thru "
    "UF4007 sheets (not read: check them); the same two figures read for the 600-1000 V parts of the US1A-US1M "
    "family (EIC Semiconductor, US1A - US1M, Rev. 06, 2008)")
_N5408_DYNAMICS = Dynamics(
    trr=1.5e-6, cj=30e-12,
    source="C_J 30 pF at 4 V, 1 MHz: Fairchild Semiconductor 1N5400-1N5408 Rev. C and General Semiconductor "
    "1N5400 thru 1N5408 (read); t_rr not given on those sheets: taken as the 1N400x's 1.5 us (Diotec), an "
    "assumption for the same standard-recovery junction (check it)")
_N4937_DYNAMICS = Dynamics(
    trr=150e-9, cj=12e-12,
    source="t_rr 150 ns maximum under 0.5 A / 1 A / 0.25 A: Fairchild Semiconductor 1N4933GP-1N4937GP (read); "
    "C_J 12 pF at 4 V, 1 MHz: Vishay General Semiconductor doc. 88508 (read)")


@dataclass(frozen=True)
class DiodePart:
    name: str
    is_: float  # A
    n: float
    rs: float  # ohm
    ratings: DiodeRatings
    source: str
    description: str
    sources_id: str = "diode-1"  # entry of docs/sources.md that explains the ratings
    dynamics: Dynamics | None = None  # reverse recovery and junction capacitance (docs/sources.md diode-7)

    def model(self) -> DiodeModel:
        return DiodeModel(
            name=self.name,
            is_=self.is_,
            n=self.n,
            rs=self.rs,
            ratings=self.ratings,
            source=self.source,
        )


def _n400x(name: str, vrrm: float) -> DiodePart:
    return DiodePart(
        name=name,
        is_=5e-9,
        n=1.8,
        rs=0.04,
        ratings=DiodeRatings(
            vrrm=vrrm, ifav=1.0, ifsm=30.0, i2t=3.7, trr=None, vf=1.1, vf_current=1.0
        ),
        source=_VISHAY_88503,
        description=f"{vrrm:.0f} V 1 A general-purpose rectifier",
        dynamics=_N400X_DYNAMICS,
    )


_PARTS: tuple[DiodePart, ...] = (
    _n400x("1N4001", 50.0),
    _n400x("1N4002", 100.0),
    _n400x("1N4003", 200.0),
    _n400x("1N4004", 400.0),
    _n400x("1N4005", 600.0),
    _n400x("1N4006", 800.0),
    _n400x("1N4007", 1000.0),
    DiodePart(
        name="UF4007",
        is_=3e-9,
        n=2.2,
        rs=0.15,
        ratings=DiodeRatings(
            vrrm=1000.0, ifav=1.0, ifsm=30.0, trr=75e-9, vf=1.7, vf_current=1.0
        ),
        source=_UF4007,
        description="1000 V 1 A ultrafast rectifier (75 ns)",
        sources_id="diode-4",
        dynamics=_UF4007_DYNAMICS,
    ),
    DiodePart(
        name="1N5408",
        is_=15e-9,
        n=1.8,
        rs=0.02,
        ratings=DiodeRatings(vrrm=1000.0, ifav=3.0, ifsm=200.0, vf=1.2, vf_current=3.0),
        source=_VISHAY_88516
        + "; Diodes Incorporated's glass-passivated 1N5408G rates the surge at only 125 A (read)",
        description="1000 V 3 A general-purpose rectifier",
        sources_id="diode-2",
        dynamics=_N5408_DYNAMICS,
    ),
    DiodePart(
        name="1N4937",
        is_=5e-9,
        n=1.9,
        rs=0.06,
        ratings=DiodeRatings(
            vrrm=600.0, ifav=1.0, ifsm=30.0, trr=200e-9, vf=1.2, vf_current=1.0
        ),
        source=_VISHAY_88508,
        description="600 V 1 A fast-recovery rectifier (200 ns)",
        sources_id="diode-3",
        dynamics=_N4937_DYNAMICS,
    ),
)

DIODES: dict[str, DiodePart] = {p.name.upper(): p for p in _PARTS}

#: Thermal voltage used for forward-drop arithmetic in the library (300.15 K), V.
VT_300K = 1.380649e-23 * 300.15 / 1.602176634e-19


def forward_drop(part: DiodePart | DiodeModel, current: float) -> float:
    """Forward voltage of the model at a DC current, V (junction plus RS)."""
    return part.n * VT_300K * math.log1p(current / part.is_) + current * part.rs


def lookup(name: str) -> DiodePart | None:
    """Find a library diode by name, case-insensitive."""
    return DIODES.get(name.strip().upper())


def names() -> list[str]:
    return [p.name for p in _PARTS]


def dynamics(model: DiodeModel) -> tuple[float, float]:
    """TT and CJO for the high-frequency analysis, s and F.

    A built-in part (the library's own model, not a parts-file entry of the same name) gets its
    datasheet dynamics; an inline or parts-file diode keeps the ``tt`` and ``cjo`` it was given;
    a vacuum rectifier has neither (no stored charge; its few picofarads are not modelled).
    """
    if model.is_vacuum:
        return 0.0, 0.0
    part = lookup(model.name)
    if part is not None and part.dynamics is not None and model.source == part.source:
        return part.dynamics.tt, part.dynamics.cjo
    return model.tt, model.cjo


def junction_capacitance(model: DiodeModel, volts: float) -> float:
    """The high-frequency model's junction capacitance at a reverse voltage, F (SPICE's law, VJ and M above)."""
    _, cjo = dynamics(model)
    return cjo / (1.0 + max(volts, 0.0) / VJ) ** M
