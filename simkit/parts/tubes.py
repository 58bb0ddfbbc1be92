"""Built-in vacuum rectifiers: a Child-Langmuir plate law per plate, heater warm-up, and ratings.

Each plate conducts i = P * v^1.5 for a positive plate-to-cathode voltage v, and nothing in
reverse.  The perveance P is fitted to one datasheet drop point, "tube drop V_d at plate
current I_b per plate": P = I_b / V_d^1.5 (REFERENCES.md section 3, "Fitting a
Child-Langmuir perveance per plate").  Datasheet drops are quoted at a DC plate current
while the plate really carries short pulses, so the fit is a first approximation; the
winding resistance stays separate from the tube, as REFERENCES.md advises.

Tags as in REFERENCES.md: [V] read in the datasheet, [S] secondary source, [M] from memory
(unverified; check the primary sheet: RCA RC-30, GE/Sylvania sheets, Mullard/Philips books).

Heater warm-up: the cathode starts to emit at ``warmup_start`` and reaches full emission at
``warmup_full`` seconds after switch-on; between, emission grows linearly.  Directly heated
filaments take about 2-5 s, indirectly heated cathodes about 10-20 s (common practice).
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
        "peak plate current 1.0 A and 40 uF: T. Mayer, 'Tube of the month: 5U4', monoandstereo.com "
        "(2021), citing the GE sheet [S]; PIV 1550 V, 275 mA, 67 ohm at 450 Vrms and the drop "
        "44-50 V at 275 mA per plate (47 V used) [M]",
        "full-wave, directly heated 5 V 3 A; 275 mA",
    ),
    TubePart(
        "5Y3GT", 60.0, 0.125, True,
        TubeRatings(piv=1400.0, peak_current=0.44, dc_current=0.125, max_input_capacitance=20e-6,
                    min_plate_resistance=50.0),
        "125 mA and 20 uF: tubeofile.com aggregate of the RCA 5Y3GT sheet [S]; drop about 60 V at "
        "125 mA read from curves [S]; PIV 1400 V, 440 mA peak, 50 ohm at 350 Vrms [M]",
        "full-wave, directly heated 5 V 2 A; 125 mA",
    ),
    TubePart(
        "5AR4", 17.0, 0.25, False,
        TubeRatings(piv=1500.0, peak_current=0.75, dc_current=0.25, max_input_capacitance=60e-6,
                    min_plate_resistance=125.0),
        "60 uF: tubeofile GZ37 note comparing with the GZ34 sheet [S]; PIV 1500-1700 V (1500 used), "
        "750 mA peak, 250 mA, 125 ohm per plate and the drop 17 V at 250 mA [M]",
        "full-wave (GZ34), indirectly heated; 250 mA",
    ),
    TubePart(
        "6X4", 22.0, 0.07, False,
        TubeRatings(piv=1250.0, peak_current=0.245, dc_current=0.07, max_input_capacitance=10e-6),
        "PIV 1250 V and 245 mA steady-state peak (1 A for 0.2 s): 6X4 design-maximum data sheet [V]; "
        "70 mA, 10 uF and the drop 22 V at 70 mA per plate [M]",
        "full-wave (EZ90), indirectly heated 6.3 V 0.6 A; 70 mA",
    ),
    TubePart(
        "EZ80", 20.0, 0.09, False,
        TubeRatings(piv=1000.0, peak_current=0.27, dc_current=0.09, max_input_capacitance=50e-6,
                    min_plate_resistance=300.0),
        "90 mA and 50 uF: elreamanding (low quality) [S]; 300 ohm per anode at 2 x 350 V: the EZ40 "
        "sibling from the Philips sheet [S]; PIV 1000 V, 270 mA peak and the drop 20 V at 90 mA [M]",
        "full-wave (6V4), indirectly heated; 90 mA",
    ),
    TubePart(
        "EZ81", 25.0, 0.15, False,
        TubeRatings(piv=1300.0, peak_current=0.45, dc_current=0.15, max_input_capacitance=50e-6,
                    min_plate_resistance=240.0),
        "150 mA: elreamanding [S]; PIV 1300 V, 450 mA peak, 50 uF, 240 ohm per anode at 2 x 350 V [M]; "
        "the sheet gives curves only: drop 25 V at 150 mA per plate [M]",
        "full-wave (6CA4), indirectly heated; 150 mA",
    ),
    TubePart(
        "5V4G", 25.0, 0.175, False,
        TubeRatings(piv=1400.0, peak_current=0.525, dc_current=0.175, max_input_capacitance=10e-6,
                    min_plate_resistance=100.0),
        "all values [M] (nothing found): PIV 1400 V, 525 mA peak, 175 mA, 10-20 uF (10 used), "
        "100 ohm at 375 Vrms, drop 25 V at 175 mA per plate",
        "full-wave, indirectly heated; 175 mA",
    ),
    TubePart(
        "5T4", 45.0, 0.225, True,
        TubeRatings(dc_current=0.225, max_input_capacitance=40e-6, min_plate_resistance=150.0),
        "225 mA, 40 uF, 150 ohm per plate at 450 Vrms and the drop 45 V at 225 mA per plate: "
        "tubeofile.com from the 5T4 sheet [S]; PIV and peak current not found",
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
