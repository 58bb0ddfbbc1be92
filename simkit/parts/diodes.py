"""Built-in silicon rectifier diodes: SPICE junction parameters and datasheet ratings.

Each part's ``source`` names the maker's sheet its ratings come from and says how far to
trust them: "read" in the sheet, or "from memory" with the sheet to check (docs/sources.md,
entries diode-1 to diode-6).  The junction parameters are our own fit, not a vendor model:
IS, N and RS are chosen so the forward drop at the rated current sits between a typical
value and the datasheet maximum (V_F column), which is what sets the rectified voltage.  TT
and CJO are left at zero: stored charge and junction capacitance make a rectifier deck ring
with the winding's leakage inductance and slow ngspice down many times over
(docs/engine-notes.md, "TT = 0 and CJO = 0") while changing no figure of this tool.  No
breakdown voltage is modelled, so the reverse voltage a design puts on a diode is reported
as it is, not clipped.
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
