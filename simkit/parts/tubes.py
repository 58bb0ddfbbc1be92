"""Built-in vacuum rectifiers: a Child-Langmuir plate law per plate, heater warm-up, and ratings.

Each plate conducts i = P * v^1.5 for a positive plate-to-cathode voltage v, and nothing in
reverse.  The perveance P is fitted to one datasheet drop point, "tube drop V_d at plate
current I_b per plate": P = I_b / V_d^1.5 (docs/sources.md, tube-1 and tube-2).  Datasheet
drops are quoted at a DC plate current while the plate really carries short pulses, so the
fit is a first approximation; the winding resistance stays a separate series resistance, so
it does not mix with the tube's law.

Each part's ``source`` says how far to trust its ratings: "read" in the maker's sheet, or
"from memory" with the sheet to check (RCA Receiving Tube Manual RC-30, the GE and Sylvania
sheets, the Mullard and Philips data books).  Most are from memory: docs/sources.md, tube-4,
tabulates them.

Heater warm-up: the cathode starts to emit at ``warmup_start`` and reaches full emission at
``warmup_full`` seconds after switch-on; between, emission grows linearly.  Directly heated
filaments take about 2-5 s, indirectly heated cathodes about 10-20 s (common practice,
docs/sources.md tube-3).
"""

from __future__ import annotations

from dataclasses import dataclass

from simkit.design.model import DiodeModel, TubeRatings, VacuumDiode

DIRECT = (2.0, 5.0)  # s: directly heated filament, emission starts and completes (common practice)
INDIRECT = (10.0, 20.0)  # s: indirectly heated cathode (common practice)


@dataclass(frozen=True)
class TubePart:
    name: str
    drop_v: float  # V, datasheet tube drop ...
    drop_i: float  # A, ... at this current per plate
    directly_heated: bool
    ratings: TubeRatings
    source: str
    description: str

    @property
    def perveance(self) -> float:
        """A/V^1.5 per plate, from the drop point."""
        return self.drop_i / self.drop_v**1.5

    def model(self) -> DiodeModel:
        start, full = DIRECT if self.directly_heated else INDIRECT
        vac = VacuumDiode(perveance=self.perveance, warmup_start=start, warmup_full=full,
                          directly_heated=self.directly_heated, ratings=self.ratings)
        return DiodeModel(name=self.name, is_=0.0, n=1.0, rs=0.0, source=self.source, vacuum=vac)


_PARTS: tuple[TubePart, ...] = (
    TubePart(
        "5U4GB", 47.0, 0.275, True,
        TubeRatings(piv=1550.0, peak_current=1.0, dc_current=0.275, max_input_capacitance=40e-6,
                    min_plate_resistance=67.0),
        "from memory, as given by the RCA 5U4GB sheet (RCA Receiving Tube Manual RC-30) and the GE 5U4GB "
        "sheet (not read: check them): PIV 1550 V, 1.0 A peak, 275 mA, 40 uF, 67 ohm per plate at "
        "450 Vrms; drop 44-50 V at 275 mA per plate (47 V used)",
        "full-wave, directly heated 5 V 3 A; 275 mA",
    ),
    TubePart(
        "5Y3GT", 60.0, 0.125, True,
        TubeRatings(piv=1400.0, peak_current=0.44, dc_current=0.125, max_input_capacitance=20e-6,
                    min_plate_resistance=50.0),
        "from memory, as given by the RCA 5Y3GT sheet (RCA Receiving Tube Manual RC-30; not read: check "
        "it): PIV 1400 V, 440 mA peak, 125 mA, 20 uF, 50 ohm per plate at 350 Vrms; drop about 60 V at "
        "125 mA per plate, read off the sheet's curves",
        "full-wave, directly heated 5 V 2 A; 125 mA",
    ),
    TubePart(
        "5AR4", 17.0, 0.25, False,
        TubeRatings(piv=1500.0, peak_current=0.75, dc_current=0.25, max_input_capacitance=60e-6,
                    min_plate_resistance=125.0),
        "from memory, as given by the Mullard GZ34 and RCA 5AR4 sheets (not read: check them): PIV "
        "1500-1700 V by maker (1500 used), 750 mA peak, 250 mA, 60 uF, 125 ohm per plate; drop 17 V at "
        "250 mA per plate",
        "full-wave (GZ34), indirectly heated; 250 mA",
    ),
    TubePart(
        "6X4", 22.0, 0.07, False,
        TubeRatings(piv=1250.0, peak_current=0.245, dc_current=0.07, max_input_capacitance=10e-6),
        "PIV 1250 V and 245 mA steady-state peak (1 A for at most 0.2 s): read in a 6X4 sheet with "
        "design-maximum ratings; 70 mA, 10 uF and the drop 22 V at 70 mA per plate from memory, as given "
        "by the RCA 6X4 sheet (RCA Receiving Tube Manual RC-30)",
        "full-wave (EZ90), indirectly heated 6.3 V 0.6 A; 70 mA",
    ),
    TubePart(
        "EZ80", 20.0, 0.09, False,
        TubeRatings(piv=1000.0, peak_current=0.27, dc_current=0.09, max_input_capacitance=50e-6,
                    min_plate_resistance=300.0),
        "from memory, as given by the Mullard EZ80 sheet (not read: check it): PIV 1000 V, 270 mA peak, "
        "90 mA, 50 uF; 300 ohm per anode at 2 x 350 V as the Philips sheet of the sibling EZ40 gives; "
        "drop 20 V at 90 mA per plate",
        "full-wave (6V4), indirectly heated; 90 mA",
    ),
    TubePart(
        "EZ81", 25.0, 0.15, False,
        TubeRatings(piv=1300.0, peak_current=0.45, dc_current=0.15, max_input_capacitance=50e-6,
                    min_plate_resistance=240.0),
        "from memory, as given by the Mullard EZ81 sheet (not read: check it): PIV 1300 V, 450 mA peak, "
        "150 mA, 50 uF, 240 ohm per anode at 2 x 350 V; the sheet gives the drop as curves only: "
        "25 V at 150 mA per plate",
        "full-wave (6CA4), indirectly heated; 150 mA",
    ),
    TubePart(
        "5V4G", 25.0, 0.175, False,
        TubeRatings(piv=1400.0, peak_current=0.525, dc_current=0.175, max_input_capacitance=10e-6,
                    min_plate_resistance=100.0),
        "from memory, as given by the RCA 5V4GA sheet (RCA Receiving Tube Manual RC-30; not read: check "
        "it): PIV 1400 V, 525 mA peak, 175 mA, 10-20 uF (10 used), 100 ohm per plate at 375 Vrms; drop "
        "25 V at 175 mA per plate",
        "full-wave, indirectly heated; 175 mA",
    ),
    TubePart(
        "5T4", 45.0, 0.225, True,
        TubeRatings(dc_current=0.225, max_input_capacitance=40e-6, min_plate_resistance=150.0),
        "from memory, as given by the RCA 5T4 sheet (not read: check it): 225 mA, 40 uF, 150 ohm per "
        "plate at 450 Vrms, drop 45 V at 225 mA per plate; PIV and peak current not known",
        "full-wave, directly heated; 225 mA",
    ),
)

TUBES: dict[str, TubePart] = {p.name.upper(): p for p in _PARTS}


def lookup(name: str) -> TubePart | None:
    return TUBES.get(name.strip().upper())


def names() -> list[str]:
    return [p.name for p in _PARTS]


def drop_at(perveance: float, current: float) -> float:
    """Tube drop at a plate current, V: v = (i / P)^(2/3) (Child-Langmuir)."""
    return (max(current, 0.0) / perveance) ** (2.0 / 3.0)
