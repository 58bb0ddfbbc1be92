"""Regulators after the rectifier: shunt (zener, glow tube) and series pass, against hand arithmetic."""

from __future__ import annotations

import math

import pytest

from simkit.checks import check_design
from simkit.design.loader import design_from_dict, parse_toml_text
from simkit.parts.regulators import glow
from simkit.pipeline import simulate
from tests.test_physics import _harmonic

pytestmark = pytest.mark.ngspice

SUPPLY = """
title = "regulator fixture"
[source]
vrms = "250"
frequency = "50"
resistance = "20"
mains_tolerance = "10%"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[[filter]]
r = "1k"
[[filter]]
c = "100u"
"""


def run(text: str):  # type: ignore[no-untyped-def]
    return simulate(design_from_dict(parse_toml_text(text)))


def test_zener_string_regulation_arithmetic() -> None:
    # Shunt regulation (zener datasheet model): V = n (Vz + r_z I_z).  Two 75 V zeners of 20 ohm each; the
    # load steps from 10 to 20 mA take that much off the zeners, so the output moves by 2 x 20 ohm x 10 mA.
    base = SUPPLY + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\nzener = { voltage = "75", count = 2, ' \
        'resistance = "20" }\n[load]\nkind = "current"\ni = "{i}"\n'
    a = run(base.replace("{i}", "10m"))
    b = run(base.replace("{i}", "20m"))
    dz = a.parts["DZ"]["current_min_a"] - b.parts["DZ"]["current_min_a"]
    assert dz == pytest.approx(0.010, rel=0.05)  # KCL: the resistor current barely changes (V_in is stiff)
    dv = a.metrics["reg_vout_v"] - b.metrics["reg_vout_v"]
    assert dv == pytest.approx(2 * 20 * dz, rel=0.05)
    # and the level: V ~ 150 V + 40 ohm x I_z (the SPICE breakdown knee adds a few n*Vt*ln(I/IBV) tens of mV)
    iz = a.metrics["shunt_current_min_a"]
    assert a.metrics["reg_vout_v"] == pytest.approx(150 + 40 * iz, abs=0.5)


def test_glow_tube_regulation_arithmetic() -> None:
    # OD3 (RCA manual, from memory [M]): maintaining 150 V, dynamic resistance 5.5 V / 35 mA; V = Vm + r I.
    tube = glow("OD3")
    assert tube is not None
    r = run(SUPPLY + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\ntube = "OD3"\n[load]\nkind = "current"\n'
            'i = "15m"\n')
    i = r.metrics["shunt_current_min_a"]
    assert 5e-3 < i < 40e-3
    assert r.metrics["reg_vout_v"] == pytest.approx(tube.maintaining + tube.resistance * i, abs=0.3)
    # The dropping resistor carries load plus tube current (KCL), so V_in - V_out = R (I_load + I_tube).
    drop = r.metrics["reg_vin_v"] - r.metrics["reg_vout_v"]
    assert drop == pytest.approx(3.3e3 * (0.015 + r.parts["GLOW"]["current_min_a"]), rel=0.01)


def test_series_pass_dissipation_is_headroom_times_current() -> None:
    # P = (V_in - V_out) I (the pass device carries the load current); means over the period, so within 2 %.
    r = run(SUPPLY + '[regulator]\nkind = "series"\nreference = "200"\n[load]\nkind = "resistor"\nr = "4k"\n')
    m = r.metrics
    expected = (m["reg_vin_v"] - m["reg_vout_v"]) * m["iout_dc_a"]
    assert m["reg_dissipation_w"] == pytest.approx(expected, rel=0.02)
    # The output sits a gate-source voltage below the reference: level-1 square law,
    # Vgs = Vto + sqrt(2 I / kp) with the IRF840 defaults (Vto 3.5 V, kp 2.5 A/V^2).
    vgs = 3.5 + math.sqrt(2 * m["iout_dc_a"] / 2.5)
    assert m["reg_vout_v"] == pytest.approx(200 - vgs, abs=0.5)


def test_ripple_rejection_of_the_filtered_reference() -> None:
    # First-order filters (standard circuit theory): the reference zener divides the input ripple by
    # r_z / (R_ref + r_z), the RC filter by sqrt(1 + (w R C)^2); an ideal follower passes the gate ripple.
    # Conditions: r_z << R_ref and << R, w R C >> 1.  Here r_z = 2 x 200 ohm, R_ref from 2 mA, R C = 100 k x 100 n.
    text = SUPPLY + ('[regulator]\nkind = "series"\nzener = { voltage = "100", count = 2, resistance = "200" }\n'
                     'filter_r = "100k"\nfilter_c = "100n"\n[load]\nkind = "resistor"\nr = "5k"\n')
    r = run(text)
    w = r.steady.final.waves
    t0, t1 = r.window
    a_in = _harmonic(w.time, w.v("raw"), 100.0, t0, t1)
    a_out = _harmonic(w.time, w.v("out"), 100.0, t0, t1)
    r_ref = float(r.circuit.regulator["reference_resistor"])
    wrc = 2 * math.pi * 100 * 100e3 * 100e-9
    expected = (400 / (r_ref + 400)) / math.sqrt(1 + wrc**2)
    assert a_out / a_in == pytest.approx(expected, rel=0.10)
    assert r.metrics["ripple_rejection_db"] > 40


def test_glow_tube_that_fails_to_strike_at_low_mains() -> None:
    # Two OA2 in series strike at 2 x 185 V = 370 V (RCA manual, from memory [M]); a 250 V winding gives about
    # 350 V, less the load's drop: they never strike, so the check fails and the start-up run shows no current.
    text = SUPPLY + ('[regulator]\nkind = "shunt"\nresistance = "2.2k"\ntube = "OA2"\ncount = 2\n'
                     '[load]\nkind = "current"\ni = "10m"\n')
    design = design_from_dict(parse_toml_text(text))
    rep = check_design(design)
    strike = next(v for v in rep.verdicts if v.rule == "strikes at switch-on")
    assert strike.verdict == "fail" and strike.corner.startswith("low mains")
    assert strike.value < 370
    assert rep.corners.results[strike.corner].parts["GLOW"]["struck"] is False
