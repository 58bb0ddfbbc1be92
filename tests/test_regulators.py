"""Regulators after the rectifier: shunt (zener, glow tube) and series pass, against the parts' sheets, the
SPICE models' own laws and hand arithmetic, each named beside its check."""

from __future__ import annotations

import math

import pytest

from simkit.analysis import metrics as mx
from simkit.checks import check_design
from simkit.design.loader import design_from_dict, parse_toml_text
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


#: Thermal voltage at SPICE's 27 degC (k/q x 300.15 K, CODATA 2018), V.
VT = 8.617333262e-5 * 300.15


def test_zener_string_regulation_arithmetic() -> None:
    # A zener as a SPICE diode in breakdown (simkit's model: BV = count x voltage, RS = count x resistance,
    # IBV = 1 mA, N = 1): for a current I well above IBV, V = BV + N Vt ln(I/IBV) + RS I (the SPICE diode's
    # breakdown law, from memory; derived here for I >> IBV).  Two 75 V zeners of 20 ohm each; the load steps
    # from 10 to 20 mA take about that much off the zeners (KCL: the resistor current barely changes, the
    # input being stiff; measured: 0.9 % less).
    base = SUPPLY + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\nzener = { voltage = "75", count = 2, ' \
        'resistance = "20" }\n[load]\nkind = "current"\ni = "{i}"\n'
    a = run(base.replace("{i}", "10m"))
    b = run(base.replace("{i}", "20m"))
    ia, ib = a.parts["DZ"].current_min_a, b.parts["DZ"].current_min_a
    assert a.parts["DZ"].struck is None  # a zener has nothing to strike
    assert ia - ib == pytest.approx(0.010, rel=0.02)
    # Measured: the output change within 0.001 %, the level within 0.4 mV (the zener current ripples a little).
    dv = a.metrics["reg_vout_v"] - b.metrics["reg_vout_v"]
    assert dv == pytest.approx(40 * (ia - ib) + VT * math.log(ia / ib), rel=1e-4)
    assert a.metrics["reg_vout_v"] == pytest.approx(150 + 40 * ia + VT * math.log(ia / 1e-3), abs=2e-3)


def test_glow_tube_regulation_against_the_od3_sheet() -> None:
    # OD3/VR150 (RCA data sheet, from memory): operating voltage 150 V, operating current 5 to 40 mA,
    # regulation 5.5 V over that range.  Two loads (15 and 25 mA) leave the tube two currents in its range.
    def od3(load: str):  # type: ignore[no-untyped-def]
        return run(SUPPLY + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\ntube = "OD3"\n[load]\n'
                   f'kind = "current"\ni = "{load}"\n')

    light, heavy = od3("15m"), od3("25m")
    i_light, i_heavy = light.parts["GLOW"].current_min_a, heavy.parts["GLOW"].current_min_a
    for r, i in ((light, i_light), (heavy, i_heavy)):
        assert 5e-3 < i < 40e-3
        assert r.parts["GLOW"].struck is True  # regulating, so it struck in the start-up run
        assert abs(r.metrics["reg_vout_v"] - 150.0) <= 5.5
    # The slope is the sheet's 5.5 V over 35 mA.  Measured +0.64 %: the 1 ohm on-resistance of the switch
    # simkit strikes the tube with adds to its 157 ohm.
    slope = (light.metrics["reg_vout_v"] - heavy.metrics["reg_vout_v"]) / (i_light - i_heavy)
    assert slope == pytest.approx(5.5 / 35e-3, rel=1e-2)
    # The dropping resistor carries load plus tube current (KCL), so V_in - V_out = R (I_load + I_tube).
    # Measured within 0.02 %.
    drop = light.metrics["reg_vin_v"] - light.metrics["reg_vout_v"]
    assert drop == pytest.approx(3.3e3 * (0.015 + i_light), rel=1e-3)


def test_series_pass_dissipation_is_headroom_times_current() -> None:
    # P = (V_in - V_out) I (the pass device carries the load current); the means of a product and the product
    # of the means differ by the ripples' covariance, measured 1e-10 here.
    r = run(SUPPLY + '[regulator]\nkind = "series"\nreference = "200"\n[load]\nkind = "resistor"\nr = "4k"\n')
    m = r.metrics
    expected = (m["reg_vin_v"] - m["reg_vout_v"]) * m["iout_dc_a"]
    assert m["reg_dissipation_w"] == pytest.approx(expected, rel=1e-6)
    # The output sits a gate-source voltage below the 200 V reference.  IRF840 (Vishay/IR data sheet, from
    # memory): VGS(th) 2 to 4 V, gfs 4.9 S at 4.8 A; with the square law i = kp/2 (Vgs - Vth)^2 that gfs
    # gives kp = gfs^2/(2 I) = 2.5 A/V^2 and Vgs = Vth + sqrt(2 I/kp) (derived here).  The sheet's own
    # threshold range bounds the output:
    kp = 4.9**2 / (2 * 4.8)
    overdrive = math.sqrt(2 * m["iout_dc_a"] / kp)
    assert 200 - 4.0 - overdrive < m["reg_vout_v"] < 200 - 2.0 - overdrive
    # Plumbing of the library part (Vth = 3.5 V, simkit's pick within 2-4 V): measured 26 mV above, the
    # reference zener's own rise at its 2 mA (Vt ln(2 mA/1 mA) plus its resistance).
    assert m["reg_vout_v"] == pytest.approx(200 - 3.5 - overdrive, abs=0.05)


def test_ripple_rejection_of_the_filtered_reference() -> None:
    # First-order filters (standard circuit theory, derived here): the reference zener divides the input
    # ripple by r_z / (R_ref + r_z), the RC filter by sqrt(1 + (w R C)^2); an ideal follower passes the gate
    # ripple.  Conditions: r_z << R_ref and << R, w R C >> 1.  Here r_z = 2 x 200 ohm, R_ref from 2 mA, R C =
    # 100 k x 100 n.  Measured: 6.6 % below it at the fundamental (the output ripple is 1/800 of the input's,
    # near ngspice's resolution at reltol 1e-4).
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
    # Plumbing: the figure is 20 log10 of the peak-to-peak ripples' ratio.
    pp_in = mx.peak_to_peak(w.time, w.v("raw"), t0, t1)
    pp_out = mx.peak_to_peak(w.time, w.v("out"), t0, t1)
    assert r.metrics["ripple_rejection_db"] == pytest.approx(20 * math.log10(pp_in / pp_out), rel=1e-9)


def test_glow_tube_that_fails_to_strike_at_low_mains() -> None:
    # Two OA2 in series strike at 2 x 185 V = 370 V (RCA data sheet, from memory); a 250 V winding gives about
    # 350 V, less the load's drop: they never strike, so the check fails and the start-up run shows no current.
    text = SUPPLY + ('[regulator]\nkind = "shunt"\nresistance = "2.2k"\ntube = "OA2"\ncount = 2\n'
                     '[load]\nkind = "current"\ni = "10m"\n')
    design = design_from_dict(parse_toml_text(text))
    rep = check_design(design)
    strike = next(v for v in rep.verdicts if v.rule == "strikes at switch-on")
    assert strike.verdict == "fail" and strike.corner.startswith("low mains")
    assert strike.value < 370 and strike.limit == pytest.approx(370.0)
    assert rep.corners.results[strike.corner].parts["GLOW"].struck is False
