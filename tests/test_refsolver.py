"""Tests of the reference solver (tests/refsolver.py) against closed forms, each at its own precision.

Responsibility: show that the independent rectifier solver reproduces exact and limiting
closed-form results, so that it can serve as the yardstick for simkit.  Every expected
number names its source beside it: a published result, or "derived here" where the
derivation is ours (written out in the comment or in tests/closed_forms.py).
Each tolerance is a modest factor above the agreement measured (docs/testing.md), or the
closed form's own error where the closed form is a limit.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tests.closed_forms import (
    choke_harmonics,
    choke_input_vdc,
    critical_inductance,
    first_pulse_peak,
    ideal_ripple,
    leakage_limit,
    limit_currents,
    limit_phi,
)
from tests.refsolver import (
    Choke,
    Circuit,
    Diode,
    Snubber,
    SteadyState,
    Topology,
    steady_state,
    switch_on,
    thermal_voltage,
)

F = 50.0  # Hz, test mains frequency
OMEGA = 2.0 * math.pi * F  # rad/s
VRMS = 300.0  # V, test winding EMF
VPK = math.sqrt(2.0) * VRMS  # V: the crest of a sine is sqrt(2) times its RMS value (definition of RMS)
RL = 10e3  # ohm, test load

# A silicon rectifier law of the 1N4007 class (Is, N, Rd as commonly circulated
# SPICE model values, from memory). Only a plausible forward drop matters here.
SILICON = Diode("exponential", i_s=7.03e-9, n=1.81, r_d=0.034)
IDEAL = Diode("ideal")
# An ideal switch with 1 milliohm on-resistance: the nodal formulation needs a conductance.
SWITCH = Diode("ideal", r_on=1e-3)


@cache
def solve(circuit: Circuit) -> SteadyState:
    """Steady state, computed once per circuit for the whole module."""
    return steady_state(circuit)


def cap_for(omega_c_rl: float, rl: float = RL) -> float:
    """Capacitance (F) for a chosen ``omega*C*RL`` (dimensionless) at the test frequency."""
    return omega_c_rl / (OMEGA * rl)


# --- the diode law and constants ---------------------------------------------------------------------------


def test_thermal_voltage_at_spice_nominal_temperature() -> None:
    # k/q = 8.617333262e-5 V/K (the Boltzmann constant in eV/K, CODATA 2018, exact in the 2019 SI;
    # value from memory), times T = 300.15 K (27 degC, SPICE's nominal temperature).
    assert thermal_voltage() == pytest.approx(8.617333262e-5 * 300.15, rel=1e-9)


@pytest.mark.parametrize("r_d", [0.0, 0.034])
def test_diode_law_closed_form_inverts_the_junction_equation(r_d: float) -> None:
    # The SPICE junction law v = N Vt ln(1 + i/Is) + i Rd (its definition): the solver's closed-form
    # current (Wright omega) must give back the current that produced each voltage, over 12 decades.
    d = Diode("exponential", i_s=7.03e-9, n=1.81, r_d=r_d)
    i = np.logspace(-9, 3, 61)
    v = d.voltage(i)
    assert np.allclose(d.current(v), i, rtol=1e-11, atol=0.0)
    # ... and the conductance is the derivative di/dv (central difference, 1 uV).
    _, g = d.current_and_conductance(v)
    fd = (d.current(v + 1e-6) - d.current(v - 1e-6)) / 2e-6
    assert np.allclose(g, fd, rtol=1e-5, atol=0.0)
    # ... and the co-content (the nodal Newton's line search minimises it) has the current as its
    # derivative (central difference, 10 uV; measured within 1e-7).
    fd = (d.content(v + 1e-5) - d.content(v - 1e-5)) / 2e-5
    assert np.allclose(fd, i, rtol=1e-6, atol=1e-12)


def test_cascade_of_ideal_switches_is_rejected() -> None:
    # Circuit fact (derived here): D1, C3, D3 and C2 form a loop without resistance, so the
    # current split between ideal switches is undefined; the solver must refuse.
    with pytest.raises(ValueError, match="r_on"):
        Circuit("cascade", VRMS, F, 10.0, RL, 100e-6, Diode("ideal"), stages=2)


# --- the infinite-C limit with series resistance ---------------------------------------------------------


# tan(phi) - phi = pi Rs/(n RL), Vdc = Vpk cos(phi) (tests/closed_forms.py: the limit behind Schade's
# curves, Proc. IRE 1943; derivation done here).  (topology, n, Rs/RL): all four give phi = 25.37 deg.
LIMIT_CASES: list[tuple[Topology, float, float]] = [
    ("half-wave", 1.0, 0.01),
    ("centre-tap", 2.0, 0.02),
    ("bridge", 2.0, 0.02),
    ("doubler", 0.5, 0.005),
]


def limit_circuit(topology: Topology, rs_over_rl: float, diode: Diode = IDEAL) -> Circuit:
    """The test circuit at ``omega*C*RL = 1000`` with ``Rs = rs_over_rl * RL`` (ohm)."""
    return Circuit(topology, VRMS, F, rs_over_rl * RL, RL, cap_for(1000.0), diode)


@pytest.mark.parametrize(("topology", "n", "rs_over_rl"), LIMIT_CASES)
def test_infinite_c_limit_vdc(topology: Topology, n: float, rs_over_rl: float) -> None:
    ss = solve(limit_circuit(topology, rs_over_rl))
    expected = VPK * math.cos(limit_phi(rs_over_rl, n))  # per capacitor
    per_cap = ss.vdc / 2.0 if topology == "doubler" else ss.vdc
    # A finite C lets the output sag between pulses, so the exact value lies below the limit
    # (derived here); at omega*C*RL = 1000 by 0.003 % (bridge) to 0.009 % (doubler), measured.
    assert per_cap <= expected
    assert per_cap == pytest.approx(expected, rel=2.5e-4)


@pytest.mark.parametrize(("topology", "n", "rs_over_rl"), LIMIT_CASES)
def test_infinite_c_limit_diode_currents(topology: Topology, n: float, rs_over_rl: float) -> None:
    ss = solve(limit_circuit(topology, rs_over_rl))
    i_pk, i_avg, i_rms = limit_currents(limit_phi(rs_over_rl, n), VPK, rs_over_rl * RL)
    # Measured at omega*C*RL = 1000: within 0.019 % (doubler peak), the finite-C effect.
    assert ss.diode_peak == pytest.approx(i_pk, rel=5e-4)
    assert ss.diode_avg == pytest.approx(i_avg, rel=5e-4)
    assert ss.diode_rms == pytest.approx(i_rms, rel=5e-4)


def test_infinite_c_limit_scales_with_n() -> None:
    # Schade's scaling (Proc. IRE 1943, as above): the ratios I_pk/I_avg and I_rms/I_avg depend on
    # Rs/(n RL) only, so the four circuits of LIMIT_CASES (all at Rs/(n RL) = 1 %) agree (derived here
    # from limit_currents: both ratios are functions of phi alone).
    ratios = []
    for topology, _, rs_over_rl in LIMIT_CASES:
        ss = solve(limit_circuit(topology, rs_over_rl))
        ratios.append((ss.diode_peak / ss.diode_avg, ss.diode_rms / ss.diode_avg))
    i_pk, i_avg, i_rms = limit_currents(limit_phi(0.01, 1.0), VPK, 0.01 * RL)
    for pk, rms in ratios:
        assert pk == pytest.approx(i_pk / i_avg, rel=2e-4)  # measured within 0.009 %
        assert rms == pytest.approx(i_rms / i_avg, rel=1e-4)  # measured within 0.006 %


@pytest.mark.parametrize(
    ("topology", "share"), [("half-wave", 1.0), ("centre-tap", 0.5), ("bridge", 0.5), ("doubler", 1.0)]
)
def test_charge_balance_of_diode_currents(topology: Topology, share: float) -> None:
    # Charge balance (Kirchhoff's current law averaged over a period, derived here): a half-wave
    # diode carries the whole load current, each of the two full-wave diodes half of it, and each
    # doubler diode recharges one capacitor that carries the whole load current.
    rs_over_rl = {t: r for t, _, r in LIMIT_CASES}[topology]
    ss = solve(limit_circuit(topology, rs_over_rl))
    assert ss.idc == pytest.approx(ss.vdc / RL, rel=1e-12)
    assert ss.diode_avg == pytest.approx(share * ss.idc, rel=1e-6)  # measured within 1.6e-7


@pytest.mark.parametrize(
    ("topology", "rs_over_rl", "pulses"),
    [("half-wave", 0.01, 1), ("centre-tap", 0.02, 2), ("bridge", 0.02, 2)],
)
def test_reservoir_ripple_current_by_kcl(topology: Topology, rs_over_rl: float, pulses: int) -> None:
    ss = solve(limit_circuit(topology, rs_over_rl))
    i_r_rms_sq = pulses * ss.diode_rms**2  # derived here: the k diodes feeding the reservoir conduct in turn
    # Exact form (derived here): over a period mean(i_C * vout) = C mean(v dv/dt) = 0, so with a
    # resistive load I_C,rms^2 = I_R,rms^2 - Idc^2 - (V_ripple,rms/RL)^2.
    exact = math.sqrt(i_r_rms_sq - ss.idc**2 - (ss.ripple_rms / RL) ** 2)
    assert ss.cap_ripple_rms == pytest.approx(exact, rel=3e-7)  # measured within 5e-8


# --- exact ripple with ideal diodes and no source resistance ----------------------------------------------


@pytest.mark.parametrize(
    ("topology", "omega_c_rl", "span"),
    [("half-wave", 3.0, 2.0 * math.pi), ("half-wave", 10.0, 2.0 * math.pi), ("half-wave", 30.0, 2.0 * math.pi),
     ("bridge", 3.0, math.pi), ("bridge", 10.0, math.pi)],
)
def test_exact_ripple_of_ideal_diodes(topology: Topology, omega_c_rl: float, span: float) -> None:
    # Rs/RL = 1e-5 stands in for Rs = 0; measured within 0.006 %.
    circuit = Circuit(topology, VRMS, F, 1e-5 * RL, RL, cap_for(omega_c_rl))
    ss = solve(circuit)
    assert ss.ripple_pp == pytest.approx(ideal_ripple(omega_c_rl, span) * VPK, rel=2e-4)
    # With Rs = 0 the capacitor follows the source up to its crest; Rs/RL = 1e-5 leaves 0.001 %.
    assert ss.vout_max == pytest.approx(VPK, rel=3e-5)


# --- Cockcroft-Walton cascade -------------------------------------------------------------------------------


@pytest.mark.parametrize("stages", [1, 2])
def test_cascade_ripple_and_crest_drop(stages: int) -> None:
    # Negligible resistance: Rs/RL = 1e-6 and diode on-resistance 1e-7*RL, so that
    # omega*C*(Rs + r_on) stays far below one radian; omega*C*RL = 3000.
    rl = 100e3
    circuit = Circuit("cascade", VRMS, F, 1e-6 * rl, rl, cap_for(3000.0, rl),
                      Diode("ideal", r_on=1e-7 * rl), stages=stages)
    ss = solve(circuit)
    n = stages
    q = ss.idc / (F * circuit.c)  # I/(fC), V
    # Ripple n(n+1)/2 * I/(fC): Kuffel, Zaengl & Kuffel, High Voltage Engineering: Fundamentals,
    # 2nd ed. 2000, sec. 2.2.2 (from memory).  The formula assumes each capacitor loses its share of
    # charge all at once; its own error here is -2.1 % (n = 1) and -3.3 % (n = 2), measured.
    assert ss.ripple_pp == pytest.approx(n * (n + 1) / 2 * q, rel=0.045)
    assert ss.ripple_pp < n * (n + 1) / 2 * q
    # Drop of the crest below 2n Vpk, (2n^3/3 + n^2/4 + n/12) I/(fC): derived here by the same
    # quasi-static charge bookkeeping; its own error here +0.18 % (n = 1), -0.32 % (n = 2), measured.
    assert 2 * n * VPK - ss.vout_max == pytest.approx((2 * n**3 / 3 + n**2 / 4 + n / 12) * q, rel=0.006)


# --- peak inverse voltage ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("topology", "stages", "piv_over_vpk"),
    [
        # Derived here (KVL at the EMF's negative crest, capacitors at their no-load voltages):
        ("half-wave", 1, 2.0),  # the reservoir's Vpk plus the winding's Vpk
        ("centre-tap", 1, 2.0),  # the reservoir's Vpk plus the other half's Vpk
        ("bridge", 1, 1.0),  # the conducting diode pair puts the reservoir's Vpk across the others
        ("doubler", 1, 2.0),  # each diode across the series string minus the other's capacitor
        ("cascade", 2, 2.0),  # every diode across one 2 Vpk capacitor of the other column
    ],
)
def test_piv_no_load(topology: Topology, stages: int, piv_over_vpk: float) -> None:
    # "No load": omega*C*RL ~ 9400 (RL = 3 Mohm, C = 10 uF), Rs = 10 ohm; ideal diodes with 1 ohm
    # on-resistance.  The capacitors never exceed their no-load voltages, so the no-load PIV bounds the
    # result; the small load lowers it by 0.013 % (centre-tap) to 0.30 % (cascade), measured.
    circuit = Circuit(topology, VRMS, F, 10.0, 3e6, 10e-6, Diode("ideal", r_on=1.0), stages=stages)
    ss = solve(circuit)
    assert ss.piv <= piv_over_vpk * VPK
    assert ss.piv == pytest.approx(piv_over_vpk * VPK, rel=4e-3)


# --- switch-on surge -----------------------------------------------------------------------------------------

SURGE_RS = 10.0  # ohm
SURGE_C = 470e-6  # F; omega*Rs*C = 1.48, so the capacitor charges within a cycle


@pytest.mark.parametrize("topology", ["half-wave", "bridge"])
def test_surge_at_crest(topology: Topology) -> None:
    circuit = Circuit(topology, VRMS, F, SURGE_RS, RL, SURGE_C)
    result = switch_on(circuit, 90.0, cycles=2)
    # Derived here: switch-on at the crest with an empty capacitor puts the whole EMF across Rs
    # (ideal diode): Vpk/Rs at t = 0, and nothing later exceeds it.
    assert result.surge == pytest.approx(VPK / SURGE_RS, rel=1e-12)
    assert result.surge_time == 0.0
    assert result.vcap_max <= VPK * (1.0 + 1e-9)  # a half- or full-wave reservoir never exceeds the crest


def test_surge_at_zero_crossing() -> None:
    circuit = Circuit("half-wave", VRMS, F, SURGE_RS, RL, SURGE_C)
    result = switch_on(circuit, 0.0, cycles=2)
    # Measured within 0.00003 % of the closed form (here 0.60 Vpk/Rs).
    assert result.surge == pytest.approx(first_pulse_peak(VPK, OMEGA, SURGE_RS, RL, SURGE_C), rel=2e-6)


def test_surge_with_forward_drop() -> None:
    circuit = Circuit("half-wave", VRMS, F, SURGE_RS, RL, SURGE_C, SILICON)
    result = switch_on(circuit, 90.0, cycles=1)
    # Derived here: at t = 0 the empty capacitor puts the whole EMF across Rs and the diode, so
    # i_pk Rs + V_D(i_pk) = Vpk, reached at the crest.
    v_f = float(SILICON.voltage(result.surge))
    assert result.surge * SURGE_RS + v_f == pytest.approx(VPK, rel=1e-9)
    assert result.surge_time == 0.0


# --- the two formulations agree ------------------------------------------------------------------------------


@pytest.mark.parametrize(("topology", "stages", "tie", "rel"), [
    ("half-wave", 1, 0.0, 5e-7),
    ("centre-tap", 1, 0.0, 5e-7),
    # The nodal bridge needs its floating winding tied down; 10 Gohm ties draw about 1e-6 of the
    # diode current (measured 3.5e-7 relative on the figures), the reduced formulation has none.
    ("bridge", 1, 1e10, 2e-6),
    ("doubler", 1, 0.0, 5e-7),
    ("cascade", 2, 0.0, 5e-7),
])
def test_nodal_and_reduced_formulations_agree(topology: Topology, stages: int, tie: float, rel: float) -> None:
    # Two independent sets of equations for the same circuit (module docstring of refsolver.py):
    # one reduced by hand to a scalar node equation, one by modified nodal analysis.  Measured
    # within 1.2e-7 without ties (peaks and ripple, read on the two solutions' own time grids;
    # means within 1e-9).
    circuit = Circuit(topology, VRMS, F, 50.0, 5e3, 20e-6, SILICON, stages=stages)
    reduced = solve(circuit)
    nodal = steady_state(Circuit(topology, VRMS, F, 50.0, 5e3, 20e-6, SILICON, stages=stages, tie=tie),
                         formulation="nodal")
    for name in ("vdc", "ripple_pp", "diode_peak", "diode_avg", "diode_rms", "piv", "source_rms",
                 "cap_ripple_rms"):
        assert getattr(nodal, name) == pytest.approx(getattr(reduced, name), rel=rel), name


# --- choke input ------------------------------------------------------------------------------------------


CHOKE_RL = 3e3  # ohm
L_CRIT = critical_inductance(CHOKE_RL, OMEGA)  # 3.18 H (tests/closed_forms.py: Terman, derived here)


def choke_circuit(topology: Topology, rs: float, inductance: float, dcr: float, c: float,
                  diode: Diode = SWITCH) -> Circuit:
    # A 1 nF snubber keeps the rectifier output defined while no diode conducts; its current (about
    # omega C Vpk = 0.1 mA) changes the figures by about 1e-5.
    snub = Snubber(1e-9, math.sqrt(inductance / 1e-9))
    return Circuit(topology, VRMS, F, rs, CHOKE_RL, c, diode, choke=Choke(inductance, snub, dcr),
                   tie=10e6 if topology == "bridge" else 0.0)


@pytest.mark.parametrize("topology", ["bridge", "centre-tap"])
def test_choke_input_vdc_with_a_large_choke(topology: Topology) -> None:
    ss = solve(choke_circuit(topology, 20.0, 10 * L_CRIT, 100.0, 470e-6))
    # Measured within 0.0003 %.
    assert ss.vdc == pytest.approx(choke_input_vdc(topology, VPK, 20.0, 100.0, CHOKE_RL), rel=2e-5)
    assert ss.choke_min > 0.8 * ss.choke_avg  # continuous conduction with a small ripple current


@pytest.mark.parametrize("topology", ["bridge", "centre-tap"])
def test_choke_input_ripple_above_critical_inductance(topology: Topology) -> None:
    # 1.25 L_crit: the choke current dips to a tenth of its mean but never stops.  Rs = 1 ohm keeps
    # the commutation overlap (where the harmonic model does not hold) to 0.01 degree.
    ss = solve(choke_circuit(topology, 1.0, 1.25 * L_CRIT, 10.0, 47e-6))
    current, out = choke_harmonics(VPK, OMEGA, 1.0, 10.0, 1.25 * L_CRIT, 47e-6, CHOKE_RL)
    # Measured within 0.0004 % (ripple) and 0.0004 % (choke current extremes).
    assert ss.ripple_pp == pytest.approx(out.max() - out.min(), rel=1e-4)
    assert ss.choke_peak == pytest.approx(current.max(), rel=1e-4)
    assert ss.choke_min == pytest.approx(current.min(), rel=1e-4)
    assert ss.vdc == pytest.approx(out.mean(), rel=1e-5)
    assert 0 < current.min() < 0.2 * current.mean()


def test_choke_input_below_critical_inductance_conducts_discontinuously() -> None:
    # 0.7 L_crit: the harmonic model (continuous conduction) would need a negative choke current,
    # which the diodes cannot carry (derived here); so conduction stops for part of each half period
    # and the output rises towards the crest, above the continuous-conduction value.  A near-ideal
    # exponential diode (N = 0.05 and 1 milliohm: about 35 mV forward) keeps the network smooth.
    near_ideal = Diode("exponential", i_s=1e-12, n=0.05, r_d=1e-3)
    ss = solve(choke_circuit("bridge", 1.0, 0.7 * L_CRIT, 10.0, 47e-6, near_ideal))
    current, _ = choke_harmonics(VPK, OMEGA, 1.0, 10.0, 0.7 * L_CRIT, 47e-6, CHOKE_RL)
    assert current.min() < 0
    # Measured: 288.7 V against 269.1 V for continuous conduction.
    assert ss.vdc > 1.05 * choke_input_vdc("bridge", VPK, 1.0, 10.0, CHOKE_RL)
    # The choke current falls to zero (and a little below, 3 % of its mean, ringing with the snubber).
    assert ss.choke_min < 0.0


# --- winding leakage inductance ----------------------------------------------------------------------------


@pytest.mark.parametrize(("topology", "inductance", "pulses"),
                         [("half-wave", 0.2, 1), ("half-wave", 0.05, 1), ("centre-tap", 0.2, 2)])
def test_leakage_inductance_against_its_limit(topology: Topology, inductance: float, pulses: int) -> None:
    # omega*C*RL = 1e5 stands in for infinite C; Rs = 0.01 ohm for zero; a 1 nF snubber with
    # R = sqrt(L/C) across the winding (its current about 0.1 mA).  Measured within 0.003 %.
    rl = 2e3
    snub = Snubber(1e-9, math.sqrt(inductance / 1e-9))
    ss = solve(Circuit(topology, VRMS, F, 0.01, rl, cap_for(1e5, rl), SWITCH, leakage=inductance,
                       winding_snubber=snub))
    vdc, i_pk = leakage_limit(VPK, OMEGA, inductance, rl, pulses)
    assert ss.vdc == pytest.approx(vdc, rel=1e-4)
    assert ss.diode_peak == pytest.approx(i_pk, rel=1e-4)


# --- the shooting itself -------------------------------------------------------------------------------------


def test_periodic_state_with_an_independent_integrator() -> None:
    # Integrate the returned state over one more period with a different method (explicit DOP853 on
    # the textbook half-wave equations, written out here) and check that it repeats.
    rs, c = 0.01 * RL, cap_for(3000.0)
    ss = solve(Circuit("half-wave", VRMS, F, rs, RL, c))

    def rhs(t: float, v: np.ndarray) -> np.ndarray:
        i_d = max(VPK * math.sin(OMEGA * t) - v[0], 0.0) / rs  # ideal diode in series with Rs
        return np.array([(i_d - v[0] / RL) / c])

    v0 = float(ss.cap_voltage[0, 0])
    end = solve_ivp(rhs, (0.0, 1.0 / F), [v0], method="DOP853", rtol=1e-12, atol=1e-9,
                    max_step=1.0 / (F * 4000)).y[0, -1]
    assert end == pytest.approx(v0, rel=1e-8)
    assert ss.residual <= 1e-9
