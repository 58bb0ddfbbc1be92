"""Sources and loads: transformer nameplates, inverters and batteries, vacuum rectifiers, tube, keyed
and stepped loads.  Each check names the law, standard or hand calculation it is held against.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from simkit.analysis import metrics as mx
from simkit.design import morse
from simkit.design.loader import design_from_dict, parse_toml_text
from simkit.design.model import DiodeModel
from simkit.errors import DesignError
from simkit.netlist import drives
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Transient, render
from simkit.parts import tubes
from simkit.pipeline import simulate
from tests.refsolver import Circuit, Diode, steady_state, switch_on
from tests.test_injection import FORBIDDEN_STARTS
from tests.test_vs_refsolver import TOLERANCE

SQ2 = math.sqrt(2.0)
NEAR_IDEAL = DiodeModel(name="near-ideal", is_=1e-12, n=0.05, rs=0.0)


# --- Morse timing (ITU-R M.1677-1) ---------------------------------------------------------------------


def test_paris_is_fifty_units() -> None:
    # ITU-R M.1677-1 gives the element and gap lengths: a dot is one unit, a dash three; the gaps are one
    # unit within a character, three between characters and seven between words.  Counting words per
    # minute with the word PARIS (and its word space) is an operating convention (common practice): PARIS
    # is then 50 units long, which is why a dot lasts 1.2/wpm s.
    elements, cycle = morse.morse_elements("PARIS")
    assert cycle == 50
    # P = .--.  A = .-  R = .-.  I = ..  S = ...  (the letters of ITU-R M.1677-1)
    lengths = [n for _, n in elements]
    assert lengths == [1, 3, 3, 1, 1, 3, 1, 3, 1, 1, 1, 1, 1, 1]
    starts = [s for s, _ in elements]
    # P: 0, 2, 6, 10; A starts 3 units after P ends (11 + 3 = 14), ...; S ends at 43; + 7 = 50.
    assert starts[:6] == [0, 2, 6, 10, 14, 16]
    assert starts[-1] + 1 == 43


def test_word_at_20_wpm_lasts_three_seconds() -> None:
    # ITU-R M.1677-1's lengths with the PARIS convention (common practice): at 20 wpm a dot is 1.2/20 = 60 ms
    # and PARIS plus its word space 3.0 s.
    d = drives.keying_drive(*morse.keying_elements("PARIS", 20), 0.0, 0.0)
    assert d.period == pytest.approx(3.0)
    downs = d.intervals(0.0, 3.0)  # edges of a microsecond, so 1e-5 s of tolerance
    assert downs[0] == pytest.approx((0.0, 0.06), abs=1e-5)
    assert downs[1] == pytest.approx((0.12, 0.30), abs=1e-5)  # the first dash: 3 dots, after a 1-dot gap
    key_down = sum(b - a for a, b in downs)
    assert key_down == pytest.approx(22 * 0.06, abs=1e-4)  # 8 dots + 4 dashes x 3 = 22 units down in PARIS


def test_two_words_are_seven_units_apart() -> None:
    # ITU-R M.1677-1: the space between words is seven units.
    elements, cycle = morse.morse_elements("E E")
    assert elements == [(0, 1), (8, 1)] and cycle == 16


def test_morse_refuses_what_it_cannot_send() -> None:
    assert morse.morse_problem("CQ DE TEST") is None
    assert "no Morse code" in (morse.morse_problem("hello!\n.control") or "")


@pytest.mark.parametrize("text", [".include /etc/passwd", "shell touch x", "1k\n.control\nshell rm x\n.endc"])
def test_hostile_morse_text_is_refused_or_never_reaches_the_deck(text: str) -> None:
    toml = KEYED_TOML.replace('rate = "4"\nduty = "50%"', f"morse = {text!r}\nwpm = 40".replace("'", '"'))
    try:
        design = design_from_dict(parse_toml_text(toml))
    except DesignError as exc:
        # Refused: as bad TOML, or by the Morse check naming the key.
        assert "TOML syntax error" in str(exc) or "load.morse" in str(exc), str(exc)
        return
    deck = render(build_circuit(design, mode="keyed"), Transient(tstop=1.0, tmax=2e-5))
    for line in deck.splitlines():
        low = line.strip().lower()
        assert not low.startswith(FORBIDDEN_STARTS)
        if not low.startswith("*"):
            assert "shell" not in low and "passwd" not in low and "include" not in low


# --- transformer nameplate arithmetic ------------------------------------------------------------------


def _transformer(**extra: str | bool) -> dict:
    src = {"kind": "transformer", "primary_vrms": "230", "frequency": "50", "secondary_vrms": "600",
           "rated_current": "150m", **extra}
    return {"source": src, "rectifier": {"topology": "bridge"}, "filter": [{"c": "100u"}],
            "load": {"kind": "resistor", "r": "4k"}}


def test_regulation_gives_open_circuit_voltage_and_series_resistance() -> None:
    # Regulation = (V_no-load - V_full-load) / V_full-load (the usual definition, from memory); the drop
    # at rated current is taken as resistive: R = (V_oc - V_fl) / I = 600 * 0.08 / 0.15 = 320 ohm.
    s = design_from_dict(_transformer(regulation="8%")).source
    assert s.vrms == pytest.approx(648.0)
    assert s.resistance == pytest.approx(320.0)
    assert s.transformer is not None and s.transformer.turns_ratio == pytest.approx(648 / 230)


def test_winding_resistances_give_the_same_nameplate_voltage() -> None:
    # Referred-impedance equivalent circuit (standard transformer theory): V_fl = n Vp - I (Rs + n^2 Rp).
    s = design_from_dict(_transformer(primary_resistance="10", secondary_resistance="200")).source
    t = s.transformer
    assert t is not None
    n = t.turns_ratio
    assert n * 230 - 0.15 * (200 + n * n * 10) == pytest.approx(600.0)
    assert s.resistance == pytest.approx(200 + n * n * 10)


def test_centre_tap_halves() -> None:
    # Each half carries the load alternately: half the EMF; half the secondary resistance plus the primary
    # referred to one half (turns ratio halved, so a quarter).  With regulation only, the copper is taken as
    # split evenly between primary and secondary (common practice): R_half = R/4 + R/8 = 3R/8.
    d = _transformer(regulation="8%", centre_tap=True)
    d["rectifier"] = {"topology": "centre-tap"}
    s = design_from_dict(d).source
    assert s.vrms == pytest.approx(324.0)
    assert s.resistance == pytest.approx(3 * 320 / 8)


# --- inverter waveforms and battery ----------------------------------------------------------------------

INVERTER_TOML = """\
title = "Test: inverter"
[source]
kind = "inverter"
waveform = "modified-sine"
vrms = "230"
frequency = "50"
output_resistance = "5"
rated_power = "150"
efficiency = "85%"
idle_power = "6"
[battery]
voltage = "12.6"
internal_resistance = "20m"
capacity = "7"
usable_fraction = "50%"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "5k"
"""


@pytest.mark.ngspice
@pytest.mark.parametrize("waveform,peak", [("modified-sine", 230 * SQ2), ("square", 230.0), ("sine", 230 * SQ2)])
def test_inverter_waveform_rms_and_peak(waveform: str, peak: float) -> None:
    # A three-level wave of peak Vp at +-Vp for a fraction d of the time has RMS Vp sqrt(d) (definition of
    # RMS); simkit sets d so that the RMS equals vrms.  A square wave's RMS is its peak.  With no battery the
    # open-circuit EMF is exact.  Measured: RMS 0.12 % low for the square and modified-sine waves (their
    # edges, T/500 long, and the trapezoid rule across them on the simulator's steps), 6e-8 for the sine.
    # Peaks: the highest sample of a sine sampled at least every 1/steps of its period lies below its crest
    # by at most 1 - cos(pi/steps) (derived here): 3.4e-5 measured at 200 steps; the flat tops exactly.
    toml = INVERTER_TOML.replace('waveform = "modified-sine"', f'waveform = "{waveform}"')
    toml = toml[: toml.index("[battery]")] + toml[toml.index("[rectifier]"):]
    design = design_from_dict(parse_toml_text(toml))
    r = simulate(design)
    w = r.steady.final.waves
    t0, t1 = r.window
    emf = w.v("w1q") - w.v("ac2")
    assert mx.rms(w.time, emf, t0, t1) == pytest.approx(230.0, rel=3e-3)
    sampled = 1 - math.cos(math.pi / r.steady.steps) if waveform == "sine" else 0.0
    assert peak * (1 - sampled) - 1e-6 * peak <= mx.peak(w.time, emf, t0, t1) <= peak * (1 + 1e-6)


@pytest.mark.ngspice
def test_battery_runtime_and_loss_model_arithmetic() -> None:
    design = design_from_dict(parse_toml_text(INVERTER_TOML.replace('usable_fraction = "50%"',
                                                                    'usable_fraction = "50%"\npeukert = "1"')))
    r = simulate(design)
    m = r.metrics
    # Plumbing: with Peukert's exponent 1 the runtime is usable capacity / mean current (supply-6); the
    # mean of I^1 over the window's samples against the clipped mean: 1e-6 apart at most.
    assert m["runtime_h"] == pytest.approx(7 * 0.5 / m["battery_current_a"], rel=1e-6)
    # Loss model of the design file (docs/reference.md): P_in = P_idle + P_out + k P_out^2 with k from the
    # efficiency at rated power, k = (150/0.85 - 150 - 6) / 150^2.  The model smooths the output power over
    # its response time, so the mean input power follows the mean output power's value: measured 0.006 %.
    k = (150 / 0.85 - 150 - 6) / 150**2
    p = m["output_power_w"]
    assert m["input_power_w"] == pytest.approx(6 + p + k * p * p, rel=2e-4)
    # The battery terminal: V = Vb - Rb I (Ohm's law) at every instant, so also for the means (exact).
    assert m["battery_voltage_v"] == pytest.approx(12.6 - 0.02 * m["battery_current_a"], rel=1e-9)
    # I = P_in / V at every instant; the mean of the ratio and the ratio of the means differ by the
    # ripple's covariance, measured 3.5e-6.
    assert m["battery_current_a"] == pytest.approx(m["input_power_w"] / m["battery_voltage_v"], rel=2e-5)
    # Plumbing: the efficiency is defined as output over input power.
    assert m["efficiency"] == pytest.approx(p / m["input_power_w"], rel=1e-12)


@pytest.mark.ngspice
def _emf_and_terminal(r: object) -> tuple[float, float]:
    """RMS inverter EMF and mean battery terminal voltage over a run's figure window (V)."""
    w = r.steady.final.waves  # type: ignore[attr-defined]
    t0, t1 = r.window  # type: ignore[attr-defined]
    return mx.rms(w.time, w.v("w1q") - w.v("ac2"), t0, t1), mx.mean(w.time, w.v("vt"), t0, t1)


def test_battery_sag_lowers_an_unregulated_output() -> None:
    base = design_from_dict(parse_toml_text(INVERTER_TOML))
    weak = design_from_dict(parse_toml_text(INVERTER_TOML.replace('internal_resistance = "20m"',
                                                                  'internal_resistance = "200m"')))
    ra, rb = simulate(base), simulate(weak)
    a, b = ra.metrics, rb.metrics
    # Ohm's law at the battery (exact for the means): the 0.2 ohm battery sags by 0.2 ohm times its current.
    assert b["battery_voltage_v"] == pytest.approx(12.6 - 0.2 * b["battery_current_a"], rel=1e-9)
    # Plumbing of the inverter model (docs/reference.md): an unregulated inverter's EMF is its waveform
    # times V_terminal / V_battery, so the EMF's RMS follows the mean terminal voltage from one battery to the
    # other.  Measured within 0.07 % (the terminal voltage ripples with the load over the period).
    (emf_a, vt_a), (emf_b, vt_b) = _emf_and_terminal(ra), _emf_and_terminal(rb)
    assert emf_b / emf_a == pytest.approx(vt_b / vt_a, rel=2e-3)
    # The diodes' drop does not shrink with the EMF, so the output falls by a larger share than the
    # battery (derived here); measured 3.13 % against 3.03 %.
    sag_batt = (a["battery_voltage_v"] - b["battery_voltage_v"]) / a["battery_voltage_v"]
    sag_out = (a["vout_dc_v"] - b["vout_dc_v"]) / a["vout_dc_v"]
    assert sag_out > sag_batt > 0
    reg = design_from_dict(parse_toml_text(INVERTER_TOML.replace('idle_power = "6"', 'idle_power = "6"\n'
                                                                 "regulated = true").replace(
        'internal_resistance = "20m"', 'internal_resistance = "200m"')))
    # Regulated: the output is what an unsagging battery would give (the base case scaled back up by its own
    # sag, to first order).  Measured within 0.01 %.
    unsagged = a["vout_dc_v"] * 12.6 / a["battery_voltage_v"]
    assert simulate(reg).metrics["vout_dc_v"] == pytest.approx(unsagged, rel=5e-4)


# --- vacuum rectifiers and tube loads ------------------------------------------------------------------


def test_perveance_is_fitted_through_the_sheet_drop_point() -> None:
    # Child-Langmuir plate law i = P v^1.5 (space-charge-limited diode; Langmuir 1913, from memory) through
    # one point of the 5T4 sheet: a tube drop of 45 V at 225 mA per plate (from memory).  P = 0.225 / 45^1.5.
    part = tubes.lookup("5T4")
    assert part is not None
    assert part.perveance == pytest.approx(0.225 / 45.0**1.5, rel=1e-12)
    # The drop at a current is the law solved for v: with P = 1e-3 A/V^1.5 a plate drops 100 V at 1 A
    # (100^1.5 = 1000) and 25 V at 125 mA (25^1.5 = 125).
    assert tubes.drop_at(1e-3, 1.0) == pytest.approx(100.0, rel=1e-12)
    assert tubes.drop_at(1e-3, 0.125) == pytest.approx(25.0, rel=1e-12)


def _ct_tube_reference(vrms: float, f: float, rs: float, perv: float, c: float, rl: float) -> dict[str, float]:
    """An independent solution (scipy) of a centre-tap capacitor-input rectifier with Child-Langmuir plates.

    Each half: EMF e(t) = +-sqrt(2) vrms sin(wt) behind Rs; a plate conducts i = P v^1.5 with v = e - i Rs - vc,
    so i solves i = P (e - vc - i Rs)^1.5 (brentq).  C dvc/dt = i1 + i2 - vc/R_L.  The periodic steady state is
    found by shooting on vc over one period (brentq on vc(T) - vc(0)).
    """
    w = 2 * math.pi * f
    T = 1 / f

    def plate(drive: float) -> float:
        if drive <= 0:
            return 0.0
        return brentq(lambda i: i - perv * max(drive - i * rs, 0.0) ** 1.5, 0.0, drive / rs)

    def rhs(t: float, y: np.ndarray) -> list[float]:
        e = SQ2 * vrms * math.sin(w * t)
        vc = y[0]
        return [(plate(e - vc) + plate(-e - vc) - vc / rl) / c]

    def period(v0: float) -> float:
        sol = solve_ivp(rhs, (0, T), [v0], max_step=T / 2000, rtol=1e-9, atol=1e-9)
        return float(sol.y[0, -1])

    v0 = brentq(lambda v: period(v) - v, 0.5 * SQ2 * vrms, SQ2 * vrms, xtol=1e-7)
    sol = solve_ivp(rhs, (0, T), [v0], max_step=T / 4000, rtol=1e-10, atol=1e-10, dense_output=True)
    t = np.linspace(0, T, 8001)
    vc = sol.sol(t)[0]
    i1 = np.array([plate(SQ2 * vrms * math.sin(w * tk) - v) for tk, v in zip(t, vc, strict=True)])
    return {"vdc": float(np.trapezoid(vc, t) / T), "ripple": float(vc.max() - vc.min()), "ipk": float(i1.max())}


@pytest.mark.ngspice
def test_tube_rectifier_matches_an_independent_scipy_solution() -> None:
    # An independent solution (the function above; scipy only, none of simkit's code), held at the
    # tolerances of the reference-solver comparisons (tests/test_vs_refsolver.py).  Measured: Vdc 0.0006 %,
    # ripple 0.013 %, peak plate current 0.004 %.
    vrms, f, rs, c, rl = 350.0, 50.0, 100.0, 20e-6, 4e3
    part = tubes.lookup("5Y3GT")
    assert part is not None
    toml = f"""
[source]
vrms = "{vrms}"
frequency = "{f}"
resistance = "{rs}"
[rectifier]
topology = "centre-tap"
diode = "5Y3GT"
[[filter]]
c = "{c}"
[load]
kind = "resistor"
r = "{rl}"
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    ref = _ct_tube_reference(vrms, f, rs, part.perveance, c, rl)
    assert r.metrics["vout_dc_v"] == pytest.approx(ref["vdc"], rel=TOLERANCE["vdc"])
    assert r.metrics["ripple_pp_v"] == pytest.approx(ref["ripple"], rel=TOLERANCE["ripple"])
    assert r.metrics["diode_peak_a"] == pytest.approx(ref["ipk"], rel=TOLERANCE["current"])


@pytest.mark.ngspice
def test_tube_load_follows_the_three_halves_power_law() -> None:
    # Child-Langmuir law (space-charge-limited diode, i = P v^1.5; Langmuir 1913, from memory): the load
    # fitted through 250 V at 60 mA draws 60 mA x (V/250)^1.5 at the voltage the supply settles to.  The
    # means differ from the law by the ripple's curvature term, measured 1e-6.
    toml = """
[source]
vrms = "300"
frequency = "50"
resistance = "20"
[rectifier]
topology = "bridge"
[[filter]]
c = "470u"
[load]
kind = "tube"
point = { v = "250", i = "60m" }
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    v = r.parts["BLOAD"].dc_v
    assert r.metrics["iout_dc_a"] == pytest.approx(0.06 * (v / 250) ** 1.5, rel=5e-6)


@pytest.mark.ngspice
def test_cold_load_leaves_the_reservoir_at_the_crest_as_the_refsolver() -> None:
    # Before the load's heaters are warm (1 s) the reservoir charges as if unloaded, to the crest less the
    # drops of two diodes at the ever smaller charging current: the classic overstress with a silicon
    # rectifier.  The solver's switch-on of the same circuit without a load over the same second gives
    # that peak (its reduced formulation has no 10 Meg ties on the winding, which draw microamperes).
    # Measured: peak within 0.001 %, the rise to 90 % of the loaded output within 0.2 ns.
    toml = """
[source]
vrms = "300"
frequency = "50"
resistance = "20"
[rectifier]
topology = "bridge"
diode = { is = "5n", n = 1.8, rs = "40m" }
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "4k"
warmup = "1"
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    law = Diode("exponential", i_s=5e-9, n=1.8, r_d=0.04)
    cold = switch_on(Circuit("bridge", 300.0, 50.0, 20.0, 1e12, 100e-6, law), 90.0, cycles=50, rtol=1e-9,
                     steps_per_period=200, points_per_period=200)
    assert r.metrics["cap_peak_warmup_v"] == pytest.approx(cold.vcap_max, rel=TOLERANCE["vdc"])
    assert cold.vcap_max < SQ2 * 300
    # Rise time: the first time the output reaches 90 % of its loaded steady value (interpolated).
    target = 0.9 * steady_state(Circuit("bridge", 300.0, 50.0, 20.0, 4e3, 100e-6, law)).vdc
    k = int(np.argmax(cold.vout >= target))
    t_rise = cold.time[k - 1] + (target - cold.vout[k - 1]) * (cold.time[k] - cold.time[k - 1]) / (
        cold.vout[k] - cold.vout[k - 1])
    assert r.metrics["rise_time_s"] == pytest.approx(t_rise, abs=1e-7)


@pytest.mark.ngspice
def test_heater_warm_up_softens_the_surge() -> None:
    # A vacuum rectifier whose cathode warms over seconds charges the reservoir gently (common practice: the
    # reason tube rectifiers need no surge limiting).  A fully emitting 5Y3GT switched on at the crest would
    # draw i = P (Vpk - i Rs)^1.5 (Child-Langmuir plate with the winding resistance, solved here): 2.1 A.
    # Warming up, the highest plate current stays at the steady repetitive peak (measured 0.2 % above it).
    base = """
[source]
vrms = "350"
frequency = "50"
resistance = "50"
[rectifier]
topology = "centre-tap"
diode = "5Y3GT"
[[filter]]
c = "20u"
[load]
kind = "resistor"
r = "4k"
"""
    tube = simulate(design_from_dict(parse_toml_text(base)))
    part = tubes.lookup("5Y3GT")
    assert part is not None
    vpk = SQ2 * 350
    hot = brentq(lambda i: i - part.perveance * (vpk - 50 * i) ** 1.5, 0.0, vpk / 50)
    assert tube.metrics["surge_peak_a"] < 0.2 * hot
    assert tube.metrics["surge_peak_a"] == pytest.approx(tube.metrics["diode_peak_a"], rel=5e-3)
    # Plumbing: the start-up run follows the part's warm-up (emission from 2 s, full at 5 s for a directly
    # heated filament: simkit's own figures, common practice), so the output rises only after 2 s.
    vac = part.model().vacuum
    assert vac is not None
    assert vac.warmup_start < tube.metrics["rise_time_s"] < vac.warmup_full


# --- keyed and stepped loads -------------------------------------------------------------------------------

KEYED_TOML = """\
title = "Test: keyed"
[source]
vrms = "250"
frequency = "50"
resistance = "10"
[rectifier]
topology = "bridge"
[[filter]]
c = "470u"
[load]
kind = "keyed"
down = { r = "2.5k" }
up = { r = "25k" }
rate = "4"
duty = "50%"
"""


@pytest.mark.ngspice
def test_keyed_levels_follow_the_refsolver_static_outputs() -> None:
    # Keying slower than the supply settles (500 ms per state; output time constant about 37 ms): each key
    # state heads for its own steady output, which the solver gives for the same circuit and diode law
    # (its reduced formulation has no 10 Meg ties; they change these levels by about 1e-5).  The means over
    # whole key intervals include the exponential change between the levels: with the supply's output
    # resistance R_out = dV/dI between the two steady states and tau = C R_out, each mean lies dV tau / L
    # towards the other level (L = 0.5 s per state), so sag = dV (1 - 2 tau / L) (derived here, first
    # order).  Measured: levels within 0.009 %, sag within 0.24 %.
    design = design_from_dict(parse_toml_text(KEYED_TOML.replace('rate = "4"', 'rate = "1"')))
    design = replace(design, rectifier=replace(design.rectifier, diode=NEAR_IDEAL))
    m = simulate(design).metrics
    near_ideal = Diode("exponential", i_s=1e-12, n=0.05, r_d=0.0)
    down = steady_state(Circuit("bridge", 250.0, 50.0, 10.0, 2.5e3, 470e-6, near_ideal)).vdc
    up = steady_state(Circuit("bridge", 250.0, 50.0, 10.0, 25e3, 470e-6, near_ideal)).vdc
    dv = up - down
    tau = 470e-6 * dv / (down / 2.5e3 - up / 25e3)
    assert m["vout_keydown_v"] == pytest.approx(down + dv * tau / 0.5, rel=1.5e-3)
    assert m["vout_keyup_v"] == pytest.approx(up - dv * tau / 0.5, rel=1.5e-3)
    assert m["sag_v"] == pytest.approx(dv * (1 - 2 * tau / 0.5), rel=1e-2)
    # Plumbing: one keying cycle at 1 Hz.
    assert m["keying_cycle_s"] == pytest.approx(1.0, rel=1e-12)


@pytest.mark.ngspice
def test_keyed_droop_of_a_large_reservoir() -> None:
    # Hand calculation for a reservoir too large to follow the keying (C dV/dt = I, derived here): the
    # rectifier delivers about the mean load current, so over a key-down the output's period mean falls by
    # (I_down - I_mean) (t_down - T) / C.  I_mean = (100 + 10) / 2 mA with 50 % duty.  Its own error, from
    # the rectifier's current rising as the output falls, is -5.7 % here (measured).
    toml = KEYED_TOML.replace('c = "470u"', 'c = "4700u"').replace('down = { r = "2.5k" }', 'down = { i = "100m" }') \
        .replace('up = { r = "25k" }', 'up = { i = "10m" }').replace('rate = "4"', 'rate = "2"')
    design = design_from_dict(parse_toml_text(toml))
    r = simulate(design)
    t_down = 0.25 - 5e-3  # half the 0.5 s cycle, less the 5 ms rise
    expected = (0.100 - 0.055) * (t_down - 0.02) / 4700e-6
    assert r.metrics["droop_v"] == pytest.approx(expected, rel=0.08)
    assert r.metrics["droop_v"] < expected


@pytest.mark.ngspice
def test_loads_at_filter_nodes_obey_kcl() -> None:
    # KCL and Ohm's law: the current through the series resistor is the sum of what hangs after it
    # (measured within 0.0034 %: the output still drifts by that much of the charge per period).
    toml = """
[source]
vrms = "300"
frequency = "50"
resistance = "20"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[[filter]]
r = "1k"
[[filter]]
c = "47u"
[[load]]
kind = "resistor"
r = "10k"
at = 0
[[load]]
kind = "current"
i = "20m"
[bleeder]
r = "100k"
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    p = r.parts
    assert p["RLOAD1"].node == "rect" and p["BLOAD2"].node == "out"
    through_r1 = p["R1"].dc_a
    assert through_r1 == pytest.approx(p["BLOAD2"].dc_a + p["RBLEED"].dc_a, rel=2e-4)
    # A current load draws its current (its 5 V knee is far below the 386 V it sees).
    assert p["BLOAD2"].dc_a == pytest.approx(0.02, rel=1e-9)
    # Plumbing: iout_dc_a is defined as the sum of the loads' currents.
    assert r.metrics["iout_dc_a"] == pytest.approx(p["RLOAD1"].dc_a + p["BLOAD2"].dc_a, rel=1e-12)
    assert p["RLOAD1"].dc_a == pytest.approx(p["RLOAD1"].dc_v / 10e3, rel=1e-9)


@pytest.mark.ngspice
def test_load_steps_give_sag_between_the_settled_levels() -> None:
    # Consistency of two analyses (simkit against itself, not a physics reference): each level the stepped
    # start-up run settles to is the steady output at that load, from a separate steady-state run.
    # Measured within 0.014 %; the sag between them within 0.11 % of the steady runs' difference.
    design = design_from_dict(parse_toml_text("""
[source]
vrms = "300"
frequency = "50"
resistance = "30"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[[filter]]
r = "220"
[[filter]]
c = "100u"
[load]
kind = "steps"
steps = [[0, "20m"], ["0.5", "120m"], ["1.0", "20m"]]
"""))
    r = simulate(design)
    heavy = simulate(replace(design, loads=(replace(design.loads[0], steps=((0.0, 0.12),)),)))
    assert r.metrics["vout_keydown_v"] == pytest.approx(heavy.metrics["vout_dc_v"], rel=5e-4)
    assert r.metrics["vout_keyup_v"] == pytest.approx(r.metrics["vout_dc_v"], rel=5e-4)
    assert r.metrics["sag_v"] == pytest.approx(r.metrics["vout_dc_v"] - heavy.metrics["vout_dc_v"], rel=3e-3)
