"""simkit's figures against published closed forms (REFERENCES.md sections 1 and 5).

Each check names its formula and source beside it.  The designs use a near-ideal diode
(N = 0.05: about 40 mV forward drop) where the formula assumes an ideal one, so the
tolerances are those REFERENCES.md section 5 recommends, not widened for the diode.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import brentq

from simkit.analysis import metrics as mx
from simkit.design.loader import design_from_dict
from simkit.design.model import Design, DiodeModel
from simkit.parts.diodes import forward_drop, lookup
from simkit.pipeline import RunResult, simulate

pytestmark = pytest.mark.ngspice

NEAR_IDEAL = DiodeModel(name="near-ideal", is_=1e-12, n=0.05, rs=0.0)
SQ2 = math.sqrt(2.0)


def make(topology: str, *, vrms: float = 100.0, f: float = 50.0, rs: float = 1.0, c: float | None = None,
         rl: float | None = 10e3, stages: int | None = None, filters: list[dict] | None = None,
         bleeder: float | None = None, diode: str | None = None, phase: float | None = None) -> Design:
    d: dict = {"title": f"test {topology}", "source": {"vrms": vrms, "frequency": f, "resistance": rs},
               "rectifier": {"topology": topology}}
    if topology in ("doubler", "cascade"):
        d["rectifier"]["capacitance"] = c
    elif c is not None:
        d["filter"] = [{"c": c}]
    if filters is not None:
        d["filter"] = filters
    if stages:
        d["rectifier"]["stages"] = stages
    if rl is not None:
        d["load"] = {"kind": "resistor", "r": rl}
    if bleeder is not None:
        d["bleeder"] = {"r": bleeder}
    if diode is not None:
        d["rectifier"]["diode"] = diode
    if phase is not None:
        d["simulation"] = {"switch_on_phase": phase}
    design = design_from_dict(d)
    if diode is None:
        design = replace(design, rectifier=replace(design.rectifier, diode=NEAR_IDEAL))
    return design


_RUNS: dict[str, RunResult] = {}


def run(topology: str, **kw: object) -> RunResult:
    """Simulate once per distinct design in this test session."""
    key = repr((topology, sorted(kw.items())))
    if key not in _RUNS:
        _RUNS[key] = simulate(make(topology, **kw))  # type: ignore[arg-type]
    return _RUNS[key]


def formula19_phi(rs: float, rl: float, n: float) -> float:
    """REFERENCES formula 19: tan(phi) - phi = pi*Rs/(n*R_L) (Waidelich 1941; Schade 1943 [M]; [D])."""
    k = math.pi * rs / (n * rl)
    return brentq(lambda p: math.tan(p) - p - k, 1e-12, math.pi / 2 - 1e-9)


# --- formula 19: the infinite-C limit with series resistance ----------------------------------------------


@pytest.mark.parametrize("topology,n", [("half-wave", 1.0), ("centre-tap", 2.0), ("bridge", 2.0)])
def test_vdc_matches_infinite_c_limit(topology: str, n: float) -> None:
    # REFERENCES formula 19 with the section 5 item 2 tolerance (within 0.2 % at omega*C*R_L >= 100);
    # here omega*C*R_L = 2*pi*50*1 mF*10 k = 3142 and Rs/R_L = 1e-3.
    rs, rl, c, vrms = 10.0, 10e3, 1e-3, 100.0
    r = run(topology, rs=rs, rl=rl, c=c, vrms=vrms)
    phi = formula19_phi(rs, rl, n)
    expected = SQ2 * vrms * math.cos(phi)
    assert r.metrics["vout_dc_v"] == pytest.approx(expected, rel=2e-3)
    # Peak diode current i_pk = Vpk (1 - cos phi) / Rs (formula 19); finite C makes it a little lower.
    ipk = SQ2 * vrms * (1 - math.cos(phi)) / rs
    assert r.metrics["diode_peak_a"] == pytest.approx(ipk, rel=0.05)
    # Diode RMS current (formula 19).
    irms = (SQ2 * vrms / rs) * math.sqrt(
        (phi * (1 + 2 * math.cos(phi) ** 2) - 3 * math.sin(phi) * math.cos(phi)) / (2 * math.pi))
    assert r.metrics["diode_rms_a"] == pytest.approx(irms, rel=0.05)


def test_full_wave_doubler_matches_formula19_with_n_half() -> None:
    # REFERENCES formula 19 with n = 1/2 for the full-wave doubler, V_dc per capacitor = Vpk cos(phi);
    # section 5 item 4 says to use it when Rs is not negligible (here Rs/R_L = 1e-3, omega*C*R_L = 6283).
    rs, rl, c, vrms = 20.0, 20e3, 1e-3, 100.0
    r = run("doubler", rs=rs, rl=rl, c=c, vrms=vrms)
    phi = formula19_phi(rs, rl, 0.5)
    assert r.metrics["vout_dc_v"] / 2 == pytest.approx(SQ2 * vrms * math.cos(phi), rel=3e-3)


# --- ripple -----------------------------------------------------------------------------------------------


def exact_ideal_ripple(wcr: float, full_wave: bool) -> float:
    """REFERENCES formula 4 (social.076.moe attachment [S], confirmed numerically [D]): r = dV_pp / Vpk."""
    span = math.pi if full_wave else 2 * math.pi

    def g(r: float) -> float:
        a = math.atan(1 / wcr)
        return math.cos(a) * math.exp(-(span - math.acos(1 - r) - a) / wcr) - (1 - r)

    return brentq(g, 1e-9, 1.0 - 1e-12)


@pytest.mark.parametrize("topology,full", [("half-wave", False), ("bridge", True)])
def test_ripple_matches_exact_ideal_diode_solution(topology: str, full: bool) -> None:
    # REFERENCES formula 4, exact for an ideal diode with Rs = 0; here Rs/R_L = 5e-5 and the near-ideal
    # diode drops about 40 mV, so 3 % is allowed.  omega*C*R_L = 2*pi*50*100u*2k = 62.8.
    rs, rl, c, vrms = 0.1, 2e3, 100e-6, 100.0
    r = run(topology, rs=rs, rl=rl, c=c, vrms=vrms)
    wcr = 2 * math.pi * 50 * c * rl
    expected = exact_ideal_ripple(wcr, full) * SQ2 * vrms
    assert r.metrics["ripple_pp_v"] == pytest.approx(expected, rel=0.03)


@pytest.mark.parametrize("topology,k", [("half-wave", 1.0), ("centre-tap", 2.0), ("bridge", 2.0)])
def test_simple_ripple_formula_is_an_upper_bound(topology: str, k: float) -> None:
    # REFERENCES formulas 2 and 3 (ripple ~ I/(f C), I/(2 f C)); section 5 item 1: they over-estimate,
    # use -15 %/+2 % for omega*C*R_L >= 100 and Rs/R_L <= 1 %.  Here omega*C*R_L = 3142, Rs/R_L = 1e-3.
    r = run(topology, rs=10.0, rl=10e3, c=1e-3, vrms=100.0)
    bound = r.metrics["iout_dc_a"] / (k * 50 * 1e-3)
    assert 0.85 * bound <= r.metrics["ripple_pp_v"] <= 1.02 * bound


def test_full_wave_doubler_ripple() -> None:
    # REFERENCES formula 5: ripple ~ I/(f C) at 2f for the full-wave doubler (first order) [D];
    # an over-estimate like formulas 2-3, so the section 5 item 1 band applies (Rs/R_L = 1e-4 here: the
    # doubler charges each capacitor through Rs at twice the load current, so Rs must be smaller).
    r = run("doubler", rs=2.0, rl=20e3, c=1e-3, vrms=100.0)
    bound = r.metrics["iout_dc_a"] / (50 * 1e-3)
    assert 0.85 * bound <= r.metrics["ripple_pp_v"] <= 1.02 * bound


def test_cascade_two_stages_ripple_and_drop() -> None:
    # REFERENCES formula 7 (Kuffel, Zaengl & Kuffel [M]; pe2bz notes [S]): ripple n(n+1)/2 * I/(fC); section 5
    # item 3 found 2.90 against 3 numerically at n = 2, so -8 %/+2 %.  The mean drop is checked against
    # formula 7a ([D], quasi-static: crest drop (I/fC)(2n^3/3 + n^2/4 + n/12) plus half the ripple), as
    # section 5 item 3 advises, after removing the 2n diode forward drops (the diode law of the model at
    # the peak current); Rs/R_L = 5e-6 adds little.
    n, c, rl, vrms = 2, 1e-3, 20e3, 100.0
    r = run("cascade", stages=n, rs=0.1, rl=rl, c=c, vrms=vrms)
    i_fc = r.metrics["iout_dc_a"] / (50 * c)
    ripple = n * (n + 1) / 2 * i_fc
    assert 0.92 * ripple <= r.metrics["ripple_pp_v"] <= 1.02 * ripple
    drop = 2 * n * SQ2 * vrms - r.metrics["vout_dc_v"] - 2 * n * forward_drop(NEAR_IDEAL, r.metrics["diode_peak_a"])
    quasi_static = i_fc * (2 * n**3 / 3 + n**2 / 4 + n / 12) + r.metrics["ripple_pp_v"] / 2
    assert drop == pytest.approx(quasi_static, rel=0.03)


# --- peak inverse voltage ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "topology,factor",
    [("half-wave", 2.0), ("centre-tap", 2.0), ("bridge", 1.0), ("doubler", 2.0), ("cascade", 2.0)],
)
def test_piv_with_no_load(topology: str, factor: float) -> None:
    # REFERENCES formula 14 (test-and-measurement-world.com [S]; Philmore catalogue [S]): capacitor input,
    # no load: half-wave 2Vpk, centre-tap 2Vpk, bridge Vpk, full-wave doubler 2Vpk, every cascade diode 2Vpk.
    vrms = 200.0
    kw: dict = {"rs": 5.0, "c": 100e-6, "rl": None, "bleeder": 10e6, "vrms": vrms}
    if topology == "cascade":
        kw["stages"] = 2
    r = run(topology, **kw)
    assert r.metrics["diode_piv_v"] == pytest.approx(factor * SQ2 * vrms, rel=0.01)


def test_piv_half_wave_resistive_load_is_vpk() -> None:
    # REFERENCES formula 14: a half-wave rectifier into a resistive load sees only Vpk in reverse.
    r = run("half-wave", rs=5.0, rl=5e3, vrms=200.0)
    assert r.metrics["diode_piv_v"] == pytest.approx(SQ2 * 200.0, rel=0.01)


# --- switch-on surge ---------------------------------------------------------------------------------------


def test_surge_at_crest_reaches_vpk_over_rs() -> None:
    # REFERENCES formula 18 ([D]): switch-on at the crest with an empty capacitor reaches (Vpk - V_F)/Rs.
    # With the 1N4007 model V_F at that current is computed from the same junction law.
    vrms, rs = 120.0, 10.0
    r = run("bridge", rs=rs, c=100e-6, rl=5e3, vrms=vrms, diode="1N4007", phase=90.0)
    part = lookup("1N4007")
    assert part is not None
    vpk = SQ2 * vrms
    i = vpk / rs
    for _ in range(20):  # two diodes in the path: i = (Vpk - 2 V_F(i)) / Rs
        i = (vpk - 2 * forward_drop(part, i)) / rs
    assert r.metrics["surge_peak_a"] == pytest.approx(i, rel=0.02)


def test_surge_at_zero_crossing_is_much_lower() -> None:
    # REFERENCES formula 18: switch-on at the zero crossing reaches only a fraction of Vpk/Rs (here the
    # capacitor follows the source, i ~ C dV/dt = omega C Vpk, a third of Vpk/Rs).
    vrms, rs = 120.0, 10.0
    r = run("bridge", rs=rs, c=100e-6, rl=5e3, vrms=vrms, diode="1N4007", phase=0.0)
    assert r.metrics["surge_peak_a"] < 0.6 * SQ2 * vrms / rs


# --- choke input, LC and RC sections ----------------------------------------------------------------------


def test_choke_input_gives_0_9_vrms_minus_ir_drops() -> None:
    # REFERENCES formula 9 (Crowhurst, Basic Audio vol. 3 [V]; Hammond guide "0.90 x Sec V AC" [V]):
    # full-wave choke input, L above L_crit = R_L/(3 omega) = 3.2 H here (formula 10), V_dc = 2Vpk/pi
    # minus the IR drops in the winding and the choke and the diode drop (near-ideal: 40 mV).
    vrms, rs, dcr, rl = 300.0, 20.0, 100.0, 3e3
    filters = [{"l": 20.0, "dcr": dcr}, {"c": 100e-6}]
    r = run("centre-tap", vrms=vrms, rs=rs, rl=rl, filters=filters)
    idc = r.metrics["iout_dc_a"]
    expected = 2 * SQ2 * vrms / math.pi - idc * (rs + dcr)
    assert r.metrics["vout_dc_v"] == pytest.approx(expected, rel=0.01)


def _harmonic(t: np.ndarray, y: np.ndarray, f: float, t0: float, t1: float) -> float:
    """Amplitude of the Fourier component of y at f over [t0, t1] (trapezoid rule, mean removed first: on a
    non-uniform time grid a large DC would leak into the harmonic through the quadrature error)."""
    tt, yy = mx.clip(t, y, t0, t1)
    yy = yy - np.trapezoid(yy, tt) / (t1 - t0)
    c = np.trapezoid(yy * np.cos(2 * np.pi * f * tt), tt)
    s = np.trapezoid(yy * np.sin(2 * np.pi * f * tt), tt)
    return float(2 * math.hypot(c, s) / (t1 - t0))


def test_lc_section_attenuates_ripple_as_formula_11() -> None:
    # REFERENCES formula 11 (ECE 442 slides [S]; Morgan Jones, Valve Amplifiers [V]): A = 1/|w_r^2 L C - 1|
    # on the ripple fundamental (2f for a bridge).  Load and choke resistance neglected there, so the load
    # is made much larger than X_C (20 k vs 16 ohm) and the DCR small: 3 %.
    L, c2 = 10.0, 100e-6
    r = run("bridge", rs=10.0, rl=20e3, vrms=250.0, filters=[{"c": 100e-6}, {"l": L, "dcr": 1.0}, {"c": c2}])
    w = r.steady.final.waves
    t0, t1 = r.window
    fr = 100.0
    a_in = _harmonic(w.time, w.v("rect"), fr, t0, t1)
    a_out = _harmonic(w.time, w.v("out"), fr, t0, t1)
    wr = 2 * math.pi * fr
    assert a_out / a_in == pytest.approx(1 / abs(wr**2 * L * c2 - 1), rel=0.03)


def test_rc_section_attenuates_ripple_as_formula_12() -> None:
    # REFERENCES formula 12 (first-order divider [D]): A = 1/sqrt(1 + (w_r R C)^2), R_L >> R so 2 %.
    R, c2 = 1e3, 47e-6
    r = run("bridge", rs=10.0, rl=100e3, vrms=250.0, filters=[{"c": 100e-6}, {"r": R}, {"c": c2}])
    w = r.steady.final.waves
    t0, t1 = r.window
    fr = 100.0
    a_in = _harmonic(w.time, w.v("rect"), fr, t0, t1)
    a_out = _harmonic(w.time, w.v("out"), fr, t0, t1)
    wr = 2 * math.pi * fr
    expected = 1 / math.sqrt(1 + (wr * R * c2) ** 2)
    # The load in parallel with C2 changes the divider by R/R_L = 1 %.
    assert a_out / a_in == pytest.approx(expected, rel=0.02)


# --- currents: KCL relations -------------------------------------------------------------------------------


def test_reservoir_ripple_current_by_kcl() -> None:
    # REFERENCES formula 15 (KCL [D]): I_C,rms = sqrt(I_R,rms^2 - I_dc^2), bridge: I_R,rms^2 = 2 I_D,rms^2.
    r = run("bridge", rs=10.0, rl=10e3, c=1e-3, vrms=100.0)
    m = r.metrics
    ic = math.sqrt(2 * m["diode_rms_a"] ** 2 - m["iout_dc_a"] ** 2)
    assert m["reservoir_ripple_a"] == pytest.approx(ic, rel=0.01)
    # Each bridge diode carries half the load current on average (KCL).
    assert m["diode_avg_a"] == pytest.approx(m["iout_dc_a"] / 2, rel=5e-3)
    # Winding RMS: the two diode pairs conduct in turn, I_w,rms^2 = 2 I_D,rms^2 (KCL).
    assert m["source_rms_a"] == pytest.approx(math.sqrt(2) * m["diode_rms_a"], rel=5e-3)
    # source_va is the winding's open-circuit RMS voltage times its RMS current (SPEC section 3).
    assert m["source_va"] == pytest.approx(100.0 * m["source_rms_a"], rel=1e-9)


def test_half_wave_transformer_current_ratio_rule_of_thumb() -> None:
    # Hammond design guide [V], a rule of thumb (common practice): capacitor-input half-wave I_ac = 3.57 I_dc,
    # Petra toroid notes [S] say 2.6.  REFERENCES section 5 item 5: these disagree and depend on Rs/R_L, so
    # only the band between them, widened by 20 %, is checked, at Rs/R_L = 2 %.
    r = run("half-wave", rs=40.0, rl=2e3, c=220e-6, vrms=120.0)
    ratio = r.metrics["source_rms_a"] / r.metrics["iout_dc_a"]
    assert 2.6 * 0.8 <= ratio <= 3.57 * 1.2
