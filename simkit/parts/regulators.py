"""Regulator parts: glow-discharge voltage-regulator tubes and high-voltage MOSFETs for series pass.

Each part's ``source`` names the maker's sheet and says how far to trust its values: "read" in
the sheet, or "from memory" with the sheet to check before relying on a tight margin (the RCA
Receiving Tube Manual RC-30 for the glow tubes, Vishay Siliconix's sheets for the MOSFETs).
docs/sources.md tabulates them (reg-1, reg-5) and the models (reg-2, reg-3, reg-4).

A glow tube maintains about its ``maintaining`` voltage plus ``resistance`` times its
current while it conducts between ``i_min`` and ``i_max``; it conducts only once the voltage
across it has exceeded ``striking`` and goes out below about ``extinction``.

A MOSFET is modelled by the square law above threshold, i_d = kp/2 (v_gs - vto)^2 (SPICE
level 1, channel-length modulation neglected), with kp fitted to the datasheet's forward
transconductance: kp = g_fs^2 / (2 i_d) at its test current.
"""

from __future__ import annotations

from dataclasses import dataclass

from simkit.design.devices import GlowSpec, PassDevice


@dataclass(frozen=True)
class GlowTube:
    name: str
    maintaining: float  # V at mid current
    striking: float  # V
    i_min: float  # A
    i_max: float  # A
    resistance: float  # ohm, dynamic (regulation over the current range / range)
    source: str

    @property
    def extinction(self) -> float:
        """Voltage below which the discharge goes out, V (just under the maintaining voltage)."""
        return self.maintaining - 3.0

    def spec(self, count: int = 1) -> GlowSpec:
        """This tube as a design's regulator uses it (``count`` in series)."""
        return GlowSpec(self.name, count, self.maintaining, self.striking, self.extinction, self.i_min, self.i_max,
                        self.resistance, self.source)


@dataclass(frozen=True)
class Mosfet:
    name: str
    vto: float  # V, threshold
    kp: float  # A/V^2
    vdss: float  # V
    id_max: float  # A continuous (case 25 C)
    pd: float  # W (case 25 C; needs a heatsink to get near it)
    source: str

    def device(self) -> PassDevice:
        """This MOSFET as a series regulator's pass device."""
        return PassDevice(vto=self.vto, kp=self.kp, vdss=self.vdss, id_max=self.id_max, pd=self.pd, name=self.name,
                          source=self.source)


GLOW: dict[str, GlowTube] = {
    t.name: t
    for t in (
        GlowTube("OA2", 150.0, 185.0, 5e-3, 30e-3, 6.0 / 25e-3, "from memory, as given by the RCA Receiving Tube "
                 "Manual RC-30 (not read: check it): OA2 150 V, starting 185 V, 5-30 mA, regulation about 6 V"),
        GlowTube("OB2", 108.0, 133.0, 5e-3, 30e-3, 1.0 / 25e-3, "from memory, as given by the RCA Receiving Tube "
                 "Manual RC-30 (not read: check it): OB2 108 V, starting 133 V, 5-30 mA, regulation about 1 V"),
        GlowTube("OC3", 105.0, 115.0, 5e-3, 40e-3, 4.0 / 35e-3, "from memory, as given by the RCA Receiving Tube "
                 "Manual RC-30 (not read: check it): OC3/VR105 105 V, starting 115 V, 5-40 mA, regulation about "
                 "4 V"),
        GlowTube("OD3", 150.0, 160.0, 5e-3, 40e-3, 5.5 / 35e-3, "from memory, as given by the RCA Receiving Tube "
                 "Manual RC-30 (not read: check it): OD3/VR150 150 V, starting 160 V, 5-40 mA, regulation about "
                 "5.5 V"),
    )
}

MOSFETS: dict[str, Mosfet] = {
    m.name: m
    for m in (
        Mosfet("IRF840", 3.5, 2.5, 500.0, 8.0, 125.0, "Vishay Siliconix, IRF840, SiHF840, doc. 91070 "
               "(read): VDSS 500 V, ID 8 A, PD 125 W, VGS(th) 2-4 V, gfs 4.9 S (min) at 4.8 A"),
        Mosfet("IRF830", 3.5, 1.6, 500.0, 4.5, 74.0, "Vishay Siliconix, IRF830, SiHF830: VDSS 500 V, "
               "ID 4.5 A, PD 74 W (read); VGS(th) 2-4 V, gfs 2.5 S at 2 A from memory (check the sheet)"),
        Mosfet("IRFBG20", 3.5, 0.5, 1000.0, 1.4, 54.0, "from memory, as given by Vishay Siliconix, "
               "IRFBG20, SiHFBG20 (not read: check it): VDSS 1000 V, ID 1.4 A, PD 54 W, VGS(th) 2-4 V, gfs "
               "about 0.7 S at 0.8 A"),
    )
}


def glow(name: str) -> GlowTube | None:
    return GLOW.get(name.strip().upper())


def mosfet(name: str) -> Mosfet | None:
    return MOSFETS.get(name.strip().upper())
