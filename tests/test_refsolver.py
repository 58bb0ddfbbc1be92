"""Tests of the reference solver (tests/refsolver.py) against published closed forms.

Responsibility: show that the independent rectifier solver reproduces the closed-form
results collected in REFERENCES.md (formula numbers below are that file's section 1;
tolerances follow its section 5), so that it can serve as the yardstick for simkit.
Every expected number names its source beside it.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

try:  # tests/ is a package
    from tests.refsolver import Circuit, Diode, SteadyState, Topology, steady_state, switch_on, thermal_voltage
except ImportError:  # tests/ on sys.path itself
    from refsolver import (  # type: ignore[no-redef]
        Circuit,
        Diode,
        SteadyState,
        Topology,
        steady_state,
        switch_on,
        thermal_voltage,
    )

F = 50.0  # Hz, test mains frequency
OMEGA = 2.0 * math.pi * F  # rad/s
VRMS = 300.0  # V, test winding EMF
VPK = math.sqrt(2.0) * VRMS  # V, formula 1 (Hammond guide [V]): exact for a sine
RL = 10e3  # ohm, test load

# A silicon rectifier law of the 1N4007 class (Is, N, Rd as commonly circulated
# SPICE model values, from memory). Only a plausible forward drop matters here.
SILICON = Diode("exponential", i_s=7.03e-9, n=1.81, r_d=0.034)
IDEAL = Diode("ideal")


@cache
def solve(circuit: Circuit) -> SteadyState:
    """Steady state, computed once per circuit for the whole module."""
    return steady_state(circuit)


def cap_for(omega_c_rl: float, rl: float = RL) -> float:
    """Capacitance for a chosen ``omega*C*RL`` at the test frequency.

    Parameters
    ----------
    omega_c_rl : float
        ``omega*C*RL`` (dimensionless).
    rl : float
        Load (ohm).

    Returns
    -------
    float
        Capacitance (F).
    """
    return omega_c_rl / (OMEGA * rl)


def formula19_phi(rs_over_rl: float, n: float) -> float:
    """Half conduction angle from ``tan(phi) - phi = pi*Rs/(n*RL)`` (formula 19).

    Parameters
    ----------
    rs_over_rl : float
        ``Rs/RL`` (dimensionless).
    n : float
        1 half-wave, 2 full-wave, 1/2 full-wave doubler.

    Returns
    -------
    float
        ``phi`` (rad).
    """
    target = math.pi * rs_over_rl / n
    return brentq(lambda p: math.tan(p) - p - target, 1e-9, math.pi / 2 - 1e-9, xtol=1e-15)


def formula4_ripple(omega_c_rl: float, span: float) -> float:
    """Relative ripple ``r = dV_pp/Vpk`` solving formula 4 with ``brentq``.

    Parameters
    ----------
    omega_c_rl : float
        ``omega*C*RL`` with ``omega`` the mains angular frequency (dimensionless).
    span : float
        Discharge span: ``2*pi`` for half-wave, ``pi`` for full-wave (rad).

    Returns
    -------
    float
        ``r`` (dimensionless).
    """
    a = math.atan(1.0 / omega_c_rl)

    def g(r: float) -> float:
        return math.cos(a) * math.exp(-(span - math.acos(1.0 - r) - a) / omega_c_rl) - (1.0 - r)

    return brentq(g, 1e-12, 1.0 - 1e-12, xtol=1e-15)


# --- constants ------------------------------------------------------------------------


def test_thermal_voltage_at_spice_nominal_temperature() -> None:
    # k/q = 8.617333262e-5 V/K (Boltzmann constant in eV/K, CODATA 2018, exact in the
    # 2019 SI; value from memory), times T = 300.15 K [D].
    assert thermal_voltage() == pytest.approx(8.617333262e-5 * 300.15, rel=1e-9)


def test_cascade_of_ideal_switches_is_rejected() -> None:
    # Circuit fact [D]: D1, C3, D3 and C2 form a loop without resistance, so the
    # current split between ideal switches is undefined; the solver must refuse.
    with pytest.raises(ValueError, match="r_on"):
        Circuit("cascade", VRMS, F, 10.0, RL, 100e-6, Diode("ideal"), stages=2)


# --- formula 19: infinite-C limit with series resistance ---------------------------

# (topology, n in formula 19, Rs/RL): the three values give the same phi, 25.37 deg,
# as in REFERENCES.md section 2 (half-wave 1 %, full-wave 2 %, doubler 0.5 %).
FORMULA19_CASES: list[tuple[Topology, float, float]] = [
    ("half-wave", 1.0, 0.01),
    ("centre-tap", 2.0, 0.02),
    ("bridge", 2.0, 0.02),
    ("doubler", 0.5, 0.005),
]


def formula19_circuit(topology: Topology, rs_over_rl: float, diode: Diode = IDEAL) -> Circuit:
    """The test circuit at ``omega*C*RL = 1000`` with ``Rs = rs_over_rl * RL`` (ohm)."""
    return Circuit(topology, VRMS, F, rs_over_rl * RL, RL, cap_for(1000.0), diode)


@pytest.mark.parametrize(("topology", "n", "rs_over_rl"), FORMULA19_CASES)
def test_formula19_vdc(topology: Topology, n: float, rs_over_rl: float) -> None:
    ss = solve(formula19_circuit(topology, rs_over_rl))
    phi = formula19_phi(rs_over_rl, n)
    expected = VPK * math.cos(phi)  # formula 19 [D]: Vdc = Vpk*cos(phi), per capacitor
    per_cap = ss.vdc / 2.0 if topology == "doubler" else ss.vdc
    # Section 5 item 2: exact solutions approach the limit from below, within 0.2 %
    # at omega*C*RL >= 100 (here 1000).
    assert per_cap <= expected * (1.0 + 1e-6)
    assert per_cap == pytest.approx(expected, rel=2e-3)


@pytest.mark.parametrize(("topology", "n", "rs_over_rl"), FORMULA19_CASES)
def test_formula19_diode_currents(topology: Topology, n: float, rs_over_rl: float) -> None:
    ss = solve(formula19_circuit(topology, rs_over_rl))
    rs = rs_over_rl * RL
    phi = formula19_phi(rs_over_rl, n)
    c, s = math.cos(phi), math.sin(phi)
    i_pk = VPK * (1.0 - c) / rs  # formula 19 [D]
    i_avg = VPK * (s - phi * c) / (math.pi * rs)  # formula 19 [D]
    i_rms = VPK / rs * math.sqrt((phi * (1.0 + 2.0 * c * c) - 3.0 * s * c) / (2.0 * math.pi))  # formula 19 [D]
    # "within a few %" at finite omega*C*RL; 1 % is used (finite-C effects are smaller).
    assert ss.diode_peak == pytest.approx(i_pk, rel=0.01)
    assert ss.diode_avg == pytest.approx(i_avg, rel=0.01)
    assert ss.diode_rms == pytest.approx(i_rms, rel=0.01)
    # REFERENCES.md section 2 [D]: with Rs/(n*RL) = 1 % all three circuits give
    # I_pk/I_avg = 10.68 and I_rms/I_avg = 2.920 (Schade's n-scaling).
    assert ss.diode_peak / ss.diode_avg == pytest.approx(10.68, rel=2e-3)
    assert ss.diode_rms / ss.diode_avg == pytest.approx(2.920, rel=2e-3)


@pytest.mark.parametrize(
    ("topology", "share"), [("half-wave", 1.0), ("centre-tap", 0.5), ("bridge", 0.5), ("doubler", 1.0)]
)
def test_charge_balance_of_diode_currents(topology: Topology, share: float) -> None:
    # Charge balance (KCL averaged over a period) [D]: a half-wave diode carries the
    # whole load current, each of the two full-wave diodes half of it, and each
    # doubler diode recharges one capacitor that carries the whole load current.
    rs_over_rl = dict((t, r) for t, _, r in FORMULA19_CASES)[topology]
    ss = solve(formula19_circuit(topology, rs_over_rl))
    assert ss.idc == pytest.approx(ss.vdc / RL, rel=1e-12)
    assert ss.diode_avg == pytest.approx(share * ss.idc, rel=1e-5)


# --- formula 15: reservoir ripple current from the diode RMS (KCL) --------------------


@pytest.mark.parametrize(
    ("topology", "rs_over_rl", "pulses"),
    [("half-wave", 0.01, 1), ("centre-tap", 0.02, 2), ("bridge", 0.02, 2)],
)
def test_formula15_cap_ripple_current(topology: Topology, rs_over_rl: float, pulses: int) -> None:
    ss = solve(formula19_circuit(topology, rs_over_rl))
    i_r_rms_sq = pulses * ss.diode_rms**2  # formula 15 [D]: I_R,rms^2 = k * I_D,rms^2
    expected = math.sqrt(i_r_rms_sq - ss.idc**2)  # formula 15 [D]: KCL with a DC load
    # "Small ripple" condition: the load current ripple is ~0.1 % here.
    assert ss.cap_ripple_rms == pytest.approx(expected, rel=1e-3)
    # Exact form [D]: over a period mean(i_C * vout) = C*mean(v dv/dt) = 0, so with a
    # resistive load I_C,rms^2 = I_R,rms^2 - Idc^2 - (V_ripple,rms/RL)^2.
    exact = math.sqrt(i_r_rms_sq - ss.idc**2 - (ss.ripple_rms / RL) ** 2)
    assert ss.cap_ripple_rms == pytest.approx(exact, rel=1e-5)


# --- formula 4: exact ripple with ideal diodes and no source resistance -------------


@pytest.mark.parametrize(
    ("topology", "omega_c_rl", "span"),
    [("half-wave", 10.0, 2.0 * math.pi), ("half-wave", 30.0, 2.0 * math.pi), ("bridge", 10.0, math.pi)],
)
def test_formula4_exact_ripple(topology: Topology, omega_c_rl: float, span: float) -> None:
    # Rs/RL = 1e-5 stands in for Rs = 0 (its effect on the ripple is ~1e-4 relative).
    circuit = Circuit(topology, VRMS, F, 1e-5 * RL, RL, cap_for(omega_c_rl))
    ss = solve(circuit)
    r = formula4_ripple(omega_c_rl, span)  # formula 4 [S], checked [D]; pi for full-wave
    assert ss.ripple_pp == pytest.approx(r * VPK, rel=5e-3)
    # With Rs = 0 the capacitor follows the source up to its crest (formula 4's model).
    assert ss.vout_max == pytest.approx(VPK, rel=1e-3)


# --- formulas 2 and 3: linear-discharge ripple as an upper bound --------------------


@pytest.mark.parametrize(
    ("topology", "ripple_per_cycle"), [("half-wave", 1.0), ("bridge", 2.0), ("centre-tap", 2.0)]
)
def test_formulas2_3_ripple_upper_bound(topology: Topology, ripple_per_cycle: float) -> None:
    circuit = Circuit(topology, VRMS, F, 1e-3 * RL, RL, cap_for(300.0))
    ss = solve(circuit)
    bound = ss.idc / (ripple_per_cycle * F * circuit.c)  # formula 2 [S] (half-wave), 3 [S] (full-wave)
    # Section 5 item 1: an over-estimate; -15 %/+2 % for omega*C*RL >= 100, Rs/RL <= 1 %.
    assert 0.85 * bound <= ss.ripple_pp <= 1.02 * bound


# --- formulas 6, 7 and 7a: Cockcroft-Walton cascade ---------------------------------


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
    ripple = n * (n + 1) / 2 * q  # formula 7 [S] (formula 6 for n = 1)
    crest_drop = (2 * n**3 / 3 + n**2 / 4 + n / 12) * q  # formula 7a [D] (formula 6 for n = 1)
    assert ss.ripple_pp == pytest.approx(ripple, rel=0.05)  # brief: about 5 %
    assert 2 * n * VPK - ss.vout_max == pytest.approx(crest_drop, rel=0.03)  # brief: about 3 %


# --- formula 14: peak inverse voltage without load ----------------------------------


@pytest.mark.parametrize(
    ("topology", "stages", "piv_over_vpk"),
    [
        ("half-wave", 1, 2.0),  # formula 14: half-wave 2 Vpk (Philmore catalogue [S])
        ("centre-tap", 1, 2.0),  # formula 14: centre-tap 2 Vpk, Vpk per half (test-and-measurement-world [S])
        ("bridge", 1, 1.0),  # formula 14: bridge Vpk (same row of REFERENCES.md, [S] sources)
        ("doubler", 1, 2.0),  # formula 14: full-wave doubler 2 Vpk (same row, [S] sources)
        ("cascade", 2, 2.0),  # formula 14: every CW diode 2 Vpk (teck-bytes blog [S])
    ],
)
def test_formula14_piv_no_load(topology: Topology, stages: int, piv_over_vpk: float) -> None:
    # "No load": omega*C*RL ~ 9400 (RL = 3 Mohm, C = 10 uF, about 100 times a working
    # design's value), Rs = 10 ohm; ideal diodes with 1 ohm on-resistance.
    circuit = Circuit(topology, VRMS, F, 10.0, 3e6, 10e-6, Diode("ideal", r_on=1.0),
                      stages=stages)
    ss = solve(circuit)
    assert ss.piv == pytest.approx(piv_over_vpk * VPK, rel=0.01)


# --- formula 18: switch-on surge ---------------------------------------------------

SURGE_RS = 10.0  # ohm
SURGE_C = 470e-6  # F; omega*Rs*C = 1.48, so the capacitor charges within a cycle


@pytest.mark.parametrize("topology", ["half-wave", "bridge"])
def test_formula18_surge_at_crest(topology: Topology) -> None:
    circuit = Circuit(topology, VRMS, F, SURGE_RS, RL, SURGE_C)
    result = switch_on(circuit, 90.0, cycles=2)
    # Formula 18 [D]: switch-on at the crest with an empty capacitor reaches Vpk/Rs
    # (ideal diode, V_F = 0).
    assert result.surge == pytest.approx(VPK / SURGE_RS, rel=0.01)
    assert result.vcap_max <= VPK * (1.0 + 1e-9)  # a half- or full-wave capacitor never exceeds the crest [D]


def first_pulse_peak(rs: float, rl: float, c: float) -> float:
    """Peak current (A) of the first charging pulse after switch-on at the zero crossing.

    Closed form of the first-order circuit [D]: while the ideal diode conducts, the
    capacitor sees the Thevenin source k*Vpk*sin(wt) (k = RL/(Rs+RL)) behind
    R' = Rs || RL, so v(t) = A*sin(wt - d) + A*sin(d)*exp(-t/tau) with tau = R'*C,
    A = k*Vpk/sqrt(1 + (w*tau)^2), d = atan(w*tau); the diode current is
    (Vpk*sin(wt) - v)/Rs.
    """
    k = rl / (rs + rl)
    tau = rs * rl / (rs + rl) * c
    d = math.atan(OMEGA * tau)
    a = k * VPK / math.sqrt(1.0 + (OMEGA * tau) ** 2)
    t = np.linspace(0.0, 0.5 / F, 200001)
    v = a * np.sin(OMEGA * t - d) + a * math.sin(d) * np.exp(-t / tau)
    i = (VPK * np.sin(OMEGA * t) - v) / rs
    return float(i.max())


def test_formula18_surge_at_zero_crossing() -> None:
    circuit = Circuit("half-wave", VRMS, F, SURGE_RS, RL, SURGE_C)
    result = switch_on(circuit, 0.0, cycles=2)
    assert result.surge == pytest.approx(first_pulse_peak(SURGE_RS, RL, SURGE_C), rel=2e-3)
    # Formula 18 note [D]: at the zero crossing the surge is clearly below Vpk/Rs.
    assert result.surge < 0.8 * VPK / SURGE_RS


def test_formula18_surge_with_forward_drop() -> None:
    circuit = Circuit("half-wave", VRMS, F, SURGE_RS, RL, SURGE_C, SILICON)
    result = switch_on(circuit, 90.0, cycles=1)
    # Formula 18 [D]: i_pk <= (Vpk - V_F)/Rs, reached at the crest: at t = 0 the
    # empty capacitor puts the whole EMF across Rs and the diode.
    v_f = float(SILICON.voltage(result.surge))
    assert result.surge * SURGE_RS + v_f == pytest.approx(VPK, rel=1e-9)
    assert result.surge_time == 0.0


# --- exponential diode: output lowered by the forward drop(s) -----------------------


@pytest.mark.parametrize(
    ("topology", "rs_over_rl", "diodes_in_path"), [("half-wave", 0.01, 1), ("bridge", 0.02, 2)]
)
def test_exponential_diode_lowers_vdc_by_forward_drops(
    topology: Topology, rs_over_rl: float, diodes_in_path: int
) -> None:
    ideal = solve(formula19_circuit(topology, rs_over_rl))
    real = solve(formula19_circuit(topology, rs_over_rl, SILICON))
    drop = ideal.vdc - real.vdc
    # Sanity band [D]: the diodes subtract their forward drop from the EMF while they
    # conduct; a conduction pulse ~ cos(wt) - cos(phi) carries most of its charge at
    # currents between a tenth of its peak and its peak, and the exponential law
    # gives drops between V_D(i_pk/10) and V_D(i_pk) there (about 0.12 V apart).
    low = diodes_in_path * float(SILICON.voltage(real.diode_peak / 10.0))
    high = diodes_in_path * float(SILICON.voltage(real.diode_peak))
    assert low <= drop <= high


# --- the shooting itself -------------------------------------------------------------


def test_periodic_state_with_an_independent_integrator() -> None:
    # Integrate the returned state over one more period with a different method
    # (explicit DOP853 on the textbook half-wave equations) and check periodicity [D].
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
