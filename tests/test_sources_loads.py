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
from simkit.design.loader import design_from_dict, parse_toml_text
from simkit.design.model import DiodeModel
from simkit.netlist import drives
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Transient, render
from simkit.parts import tubes
from simkit.pipeline import simulate
from tests.test_injection import FORBIDDEN_STARTS

SQ2 = math.sqrt(2.0)
NEAR_IDEAL = DiodeModel(name="near-ideal", is_=1e-12, n=0.05, rs=0.0)


# --- Morse timing (ITU-R M.1677-1) ---------------------------------------------------------------------


def test_paris_is_fifty_units() -> None:
    # ITU-R M.1677-1 section 2 timing (dash = 3 dots; gaps 1, 3 and 7 dots); the standard word PARIS with
    # its word space is 50 units, which is why a dot lasts 1.2/wpm s.
    elements, cycle = drives.morse_elements("PARIS")
    assert cycle == 50
    # P = .--.  A = .-  R = .-.  I = ..  S = ...  (ITU-R M.1677-1 Part I, section 1)
    lengths = [n for _, n in elements]
    assert lengths == [1, 3, 3, 1, 1, 3, 1, 3, 1, 1, 1, 1, 1, 1]
    starts = [s for s, _ in elements]
    # P: 0, 2, 6, 10; A starts 3 units after P ends (11 + 3 = 14), ...; S ends at 43; + 7 = 50.
    assert starts[:6] == [0, 2, 6, 10, 14, 16]
    assert starts[-1] + 1 == 43


def test_word_at_20_wpm_lasts_three_seconds() -> None:
    # ITU-R M.1677-1 timing with PARIS: at 20 wpm a dot is 1.2/20 = 60 ms and PARIS plus its space 3.0 s.
    d = drives.morse_keying("PARIS", 20, 0.0, 0.0)
    assert d.period == pytest.approx(3.0)
    downs = d.intervals(0.0, 3.0)  # edges of a microsecond, so 1e-5 s of tolerance
    assert downs[0] == pytest.approx((0.0, 0.06), abs=1e-5)
    assert downs[1] == pytest.approx((0.12, 0.30), abs=1e-5)  # the first dash: 3 dots, after a 1-dot gap
    key_down = sum(b - a for a, b in downs)
    assert key_down == pytest.approx(22 * 0.06, abs=1e-4)  # 8 dots + 4 dashes x 3 = 22 units down in PARIS


def test_two_words_are_seven_units_apart() -> None:
    # ITU-R M.1677-1: the space between words is seven dots.
    elements, cycle = drives.morse_elements("E E")
    assert elements == [(0, 1), (8, 1)] and cycle == 16


def test_morse_refuses_what_it_cannot_send() -> None:
    assert drives.morse_problem("CQ DE TEST") is None
    assert "no Morse code" in (drives.morse_problem("hello!\n.control") or "")


@pytest.mark.parametrize("text", [".include /etc/passwd", "shell touch x", "1k\n.control\nshell rm x\n.endc"])
def test_hostile_morse_text_is_refused_or_never_reaches_the_deck(text: str) -> None:
    toml = KEYED_TOML.replace('rate = "4"\nduty = "50%"', f"morse = {text!r}\nwpm = 40".replace("'", '"'))
    try:
        data = parse_toml_text(toml)
    except Exception:
        return  # not even TOML: refused
    from simkit.errors import DesignError

    try:
        design = design_from_dict(data)
    except DesignError:
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
    # Regulation = (V_no-load - V_full-load) / V_full-load (the usual definition, from memory [M]); the drop
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
    # open-circuit EMF is exact.
    toml = INVERTER_TOML.replace('waveform = "modified-sine"', f'waveform = "{waveform}"')
    toml = toml[: toml.index("[battery]")] + toml[toml.index("[rectifier]"):]
    design = design_from_dict(parse_toml_text(toml))
    r = simulate(design)
    w = r.steady.final.waves
    t0, t1 = r.window
    emf = w.v("w1q") - w.v("ac2")
    assert mx.rms(w.time, emf, t0, t1) == pytest.approx(230.0, rel=0.01)
    assert mx.peak(w.time, emf, t0, t1) == pytest.approx(peak, rel=0.005)


@pytest.mark.ngspice
def test_battery_runtime_and_loss_model_arithmetic() -> None:
    design = design_from_dict(parse_toml_text(INVERTER_TOML))
    r = simulate(design)
    m = r.metrics
    # Runtime = usable capacity / mean current (hand arithmetic; Peukert's effect is not modelled).
    assert m["runtime_h"] == pytest.approx(7 * 0.5 / m["battery_current_a"], rel=1e-9)
    # Loss model of the design file: P_in = P_idle + P_out + k P_out^2 with k from the efficiency at rated
    # power: k = (150/0.85 - 150 - 6) / 150^2.  The smoothed output power follows the mean within 1 %.
    k = (150 / 0.85 - 150 - 6) / 150**2
    p = m["output_power_w"]
    assert m["input_power_w"] == pytest.approx(6 + p + k * p * p, rel=0.01)
    # The battery terminal: V = Vb - Rb * I (Ohm's law), I = P_in / V.
    assert m["battery_voltage_v"] == pytest.approx(12.6 - 0.02 * m["battery_current_a"], rel=1e-3)
    assert m["battery_current_a"] == pytest.approx(m["input_power_w"] / m["battery_voltage_v"], rel=0.01)
    assert m["efficiency"] == pytest.approx(p / m["input_power_w"], rel=1e-9)


@pytest.mark.ngspice
def test_battery_sag_lowers_an_unregulated_output() -> None:
    # An unregulated inverter's output follows its battery: with 0.2 ohm in the battery the output drops by
    # about the battery's own relative sag (hand arithmetic: V_out scales with V_terminal / V_battery).
    base = design_from_dict(parse_toml_text(INVERTER_TOML))
    weak = design_from_dict(parse_toml_text(INVERTER_TOML.replace('internal_resistance = "20m"',
                                                                  'internal_resistance = "200m"')))
    a, b = simulate(base).metrics, simulate(weak).metrics
    sag_batt = (a["battery_voltage_v"] - b["battery_voltage_v"]) / a["battery_voltage_v"]
    sag_out = (a["vout_dc_v"] - b["vout_dc_v"]) / a["vout_dc_v"]
    assert sag_batt > 0.01
    assert sag_out == pytest.approx(sag_batt, rel=0.15)
    reg = design_from_dict(parse_toml_text(INVERTER_TOML.replace('idle_power = "6"', 'idle_power = "6"\n'
                                                                 "regulated = true").replace(
        'internal_resistance = "20m"', 'internal_resistance = "200m"')))
    # Regulated: the output is what an unsagging battery would give (the base case scaled back up).
    unsagged = a["vout_dc_v"] * 12.6 / a["battery_voltage_v"]
    assert simulate(reg).metrics["vout_dc_v"] == pytest.approx(unsagged, rel=2e-3)


# --- vacuum rectifiers and tube loads ------------------------------------------------------------------


def test_perveance_fit_of_the_reference_example() -> None:
    # REFERENCES.md section 3: a drop of 45 V at 225 mA per plate (5T4) gives P = 0.225 / 45^1.5 = 7.45e-4.
    part = tubes.lookup("5T4")
    assert part is not None
    assert part.perveance == pytest.approx(7.45e-4, rel=2e-3)
    assert tubes.drop_at(part.perveance, 0.225) == pytest.approx(45.0)


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
    # Issue tolerances: Vdc within 2 %, ripple and peak plate current within 5 % of an independent solver
    # (the function above; scipy only, none of simkit's code).
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
    assert r.metrics["vout_dc_v"] == pytest.approx(ref["vdc"], rel=0.02)
    assert r.metrics["ripple_pp_v"] == pytest.approx(ref["ripple"], rel=0.05)
    assert r.metrics["diode_peak_a"] == pytest.approx(ref["ipk"], rel=0.05)


@pytest.mark.ngspice
def test_tube_load_follows_the_three_halves_power_law() -> None:
    # Child-Langmuir law (space-charge-limited diode, i = P v^1.5; e.g. Langmuir 1913, from memory [M]): the
    # load fitted through 250 V at 60 mA draws 60 mA x (V/250)^1.5 at the voltage the supply settles to.
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
    v = r.parts["BLOAD"]["dc_v"]
    assert r.metrics["iout_dc_a"] == pytest.approx(0.06 * (v / 250) ** 1.5, rel=2e-3)


@pytest.mark.ngspice
def test_cold_load_leaves_the_reservoir_at_the_crest() -> None:
    # Formula 1 (Vpk = sqrt(2) Vrms) and formula 18: before the load's heaters are warm, the reservoir charges
    # to the no-load crest less the diode drop -- the classic overstress with a silicon rectifier.
    toml = """
[source]
vrms = "300"
frequency = "50"
resistance = "20"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "4k"
warmup = "1"
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    vpk = SQ2 * 300
    assert r.metrics["cap_peak_warmup_v"] == pytest.approx(vpk - 2 * 0.7, rel=0.01)
    assert r.metrics["cap_peak_warmup_v"] > r.metrics["vout_dc_v"] + 10
    assert r.metrics["rise_time_s"] < 0.1  # the capacitor charges in the first cycles


@pytest.mark.ngspice
def test_heater_warm_up_softens_the_surge() -> None:
    # A vacuum rectifier whose cathode warms over seconds charges the reservoir gently (common practice: the
    # reason tube rectifiers need no surge limiting).  Same circuit with a silicon diode for comparison.
    base = """
[source]
vrms = "350"
frequency = "50"
resistance = "50"
[rectifier]
topology = "centre-tap"
diode = "{d}"
[[filter]]
c = "20u"
[load]
kind = "resistor"
r = "4k"
"""
    tube = simulate(design_from_dict(parse_toml_text(base.replace("{d}", "5Y3GT"))))
    silicon = simulate(design_from_dict(parse_toml_text(base.replace("{d}", "1N4007"))))
    assert tube.metrics["surge_peak_a"] < 0.3 * silicon.metrics["surge_peak_a"]
    assert tube.metrics["rise_time_s"] > 2.0  # emission starts 2 s after switch-on (directly heated)


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
def test_keyed_sag_matches_the_static_regulation_of_each_key_state() -> None:
    # Hand calculation for keying slower than the supply settles (500 ms per state; output resistance about
    # 50 ohm x 470 uF = 25 ms): each key state sits at its own static output, REFERENCES formula 19 (n = 2):
    # V = Vpk cos(phi), tan(phi) - phi = pi Rs / (2 R_L).
    design = design_from_dict(parse_toml_text(KEYED_TOML.replace('rate = "4"', 'rate = "1"')))
    design = replace(design, rectifier=replace(design.rectifier, diode=NEAR_IDEAL))
    r = simulate(design)
    m = r.metrics

    def static(rl: float) -> float:
        k = math.pi * 10 / (2 * rl)
        phi = brentq(lambda p: math.tan(p) - p - k, 1e-12, math.pi / 2 - 1e-9)
        return SQ2 * 250 * math.cos(phi)

    assert m["vout_keydown_v"] == pytest.approx(static(2.5e3), rel=5e-3)
    assert m["vout_keyup_v"] == pytest.approx(static(25e3), rel=5e-3)
    # The means over whole key intervals include the exponential change between the levels: with the
    # supply's output resistance R_out = dV/dI (from the same closed form) and tau = C R_out, each mean moves
    # towards the other level by dV tau / L (L = 0.5 s per state), so sag = dV (1 - 2 tau / L) (first order).
    dv = static(25e3) - static(2.5e3)
    i_down, i_up = static(2.5e3) / 2.5e3, static(25e3) / 25e3
    tau = 470e-6 * dv / (i_down - i_up)
    assert m["sag_v"] == pytest.approx(dv * (1 - 2 * tau / 0.5), rel=0.05)
    assert m["keying_cycle_s"] == pytest.approx(1.0)


@pytest.mark.ngspice
def test_keyed_droop_of_a_large_reservoir() -> None:
    # Hand calculation for a reservoir too large to follow the keying (C dV/dt = I): the rectifier delivers
    # about the mean load current, so over a key-down the output's period mean falls by
    # (I_down - I_mean) (t_down - T) / C.  I_mean = (100 + 10) / 2 mA with 50 % duty.
    toml = KEYED_TOML.replace('c = "470u"', 'c = "4700u"').replace('down = { r = "2.5k" }', 'down = { i = "100m" }') \
        .replace('up = { r = "25k" }', 'up = { i = "10m" }').replace('rate = "4"', 'rate = "2"')
    design = design_from_dict(parse_toml_text(toml))
    r = simulate(design)
    t_down = 0.25 - 5e-3  # half the 0.5 s cycle, less the 5 ms rise
    expected = (0.100 - 0.055) * (t_down - 0.02) / 4700e-6
    assert r.metrics["droop_v"] == pytest.approx(expected, rel=0.10)


@pytest.mark.ngspice
def test_loads_at_filter_nodes_obey_kcl() -> None:
    # KCL and Ohm's law: the current through the series resistor is the sum of what hangs after it.
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
    assert p["RLOAD1"]["node"] == "rect" and p["BLOAD2"]["node"] == "out"
    through_r1 = p["R1"]["dc_a"]
    assert through_r1 == pytest.approx(p["BLOAD2"]["dc_a"] + p["RBLEED"]["dc_a"], rel=2e-3)
    assert p["BLOAD2"]["dc_a"] == pytest.approx(0.02, rel=1e-3)
    assert r.metrics["iout_dc_a"] == pytest.approx(p["RLOAD1"]["dc_a"] + p["BLOAD2"]["dc_a"], rel=1e-9)
    assert p["RLOAD1"]["dc_a"] == pytest.approx(p["RLOAD1"]["dc_v"] / 10e3, rel=1e-3)


@pytest.mark.ngspice
def test_load_steps_give_sag_between_the_settled_levels() -> None:
    # Each settled level is the steady output at that load (checked against a separate steady run at the
    # heavy step: the same circuit, the same physics, so within the settle tolerance).
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
    assert r.metrics["vout_keydown_v"] == pytest.approx(heavy.metrics["vout_dc_v"], rel=2e-3)
    assert r.metrics["vout_keyup_v"] == pytest.approx(r.metrics["vout_dc_v"], rel=2e-3)
    assert r.metrics["sag_v"] > 30
