"""Steady keying, the battery and the inverter: recovery against closed forms, Peukert's law against a maker's
discharge table, battery corners against hand arithmetic, the inverter's verdicts, switch-on inside a step,
and the progress hook."""

from __future__ import annotations

import io
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from simkit import progress
from simkit.analysis import keyed as kd
from simkit.analysis import metrics as mx
from simkit.cli import main
from simkit.design.loader import design_from_dict, parse_toml_text
from simkit.design.sources import Battery, InverterSource, switch_on_words, worst_switch_on_phase
from simkit.engine.ngspice import Waveforms
from simkit.errors import DesignError
from simkit.netlist import drives
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Circuit, Transient, render
from simkit.pipeline import simulate
from tests.refsolver import steady_state
from tests.test_vs_refsolver import Case

STATION = """\
title = "Test (invented): keyed station on a battery"
[source]
kind = "inverter"
waveform = "modified-sine"
vrms = "230"
frequency = "50"
output_resistance = "6"
rated_power = "150"
efficiency = "85%"
idle_power = "5"
[battery]
voltage = "12.6"
internal_resistance = "30m"
capacity = "7"
usable_fraction = "50%"
[rectifier]
topology = "doubler"
diode = "1N4007"
capacitance = "100u"
[[filter]]
r = "100"
[[filter]]
c = "47u"
[load]
kind = "keyed"
down = { i = "110m" }
up = { i = "15m" }
morse = "TEST"
wpm = 25
rise = "4m"
fall = "4m"
[bleeder]
r = "100k"
"""


def station(text: str = STATION):  # type: ignore[no-untyped-def]
    return design_from_dict(parse_toml_text(text))


# --- recovery ------------------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_recovery_of_an_rc_filtered_keyed_load_refsolver() -> None:
    # A bridge and reservoir feeding an R-C section, keyed between 50 k and 5 k every second.  Seen from the
    # output capacitor the supply is a Thevenin source: R_th from the reference solver's steady outputs at the
    # two loads (R_th = dV/dI, the chord), so after key-down the output settles as a first-order system with
    # tau = C (R_th || R_down) (derived here).  It enters a band of 2 % of the step after tau ln 50
    # (keyed-1), late by half the 5 ms load ramp (a ramp's response lags the step's by half its length,
    # derived here), with the supply ripple on top.  Measured: 0.84 % (the reservoir's own fast pole and the
    # rectifier's curvature that the chord leaves out).
    case = Case("keyed R-C", "bridge", 250.0, 50.0, 10.0, 47e-6, 5e3, filters=(("r", 1e3), ("c", 100e-6)))
    d = case.design()
    d["load"] = {"kind": "keyed", "down": {"r": "5k"}, "up": {"r": "50k"}, "rate": "0.5", "duty": "50%"}
    r = simulate(design_from_dict(d))
    down, up = (steady_state(replace(case, rl=rl).circuit()).vdc for rl in (5e3, 50e3))
    r_th = (up - down) / (down / 5e3 - up / 50e3)
    tau = 100e-6 * r_th * 5e3 / (r_th + 5e3)
    expected = tau * math.log(1 / 0.02) + 5e-3 / 2
    assert r.metrics["recovery_time_s"] == pytest.approx(expected, rel=0.03)
    # The ripple rides on top: the keyed run's ripple at key-down is there, and small against the step.
    assert 0 < r.metrics["ripple_keydown_pp_v"] < 0.05 * (up - down)


@pytest.mark.ngspice
def test_recovery_is_a_number_when_the_ripple_is_wider_than_the_band() -> None:
    # A doubler with small capacitors: the output ripple at key-down is several times the settle band (2 % of
    # the step), which a band on the raw output could never hold; on the one-period mean the output settles.
    text = STATION.replace('capacitance = "100u"', 'capacitance = "22u"').replace('c = "47u"', 'c = "10u"')
    r = simulate(station(text))
    m = r.metrics
    band = 0.02 * m["droop_v"]
    assert m["ripple_keydown_pp_v"] > 3 * band
    rec = m["recovery_time_s"]
    assert math.isfinite(rec) and 0 < rec < 0.144  # the longest key-down of TEST at 25 wpm is 144 ms
    assert not [w for w in r.warnings if "recover" in w]


@pytest.mark.ngspice
def test_recovery_is_na_when_the_key_down_is_too_short_to_settle() -> None:
    # An R-C section of tau = 10 k x 100 uF = 1 s keyed at 4 Hz: 125 ms of key-down is an eighth of tau, the
    # output is still falling at key-up, so there is no recovery to measure, and a warning says so.
    toml = """
title = "Test: slow R-C keyed fast"
[source]
vrms = "250"
frequency = "50"
resistance = "10"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[[filter]]
r = "10k"
[[filter]]
c = "100u"
[load]
kind = "keyed"
down = { i = "10m" }
up = { i = "1m" }
rate = "4"
duty = "50%"
"""
    r = simulate(design_from_dict(parse_toml_text(toml)))
    assert math.isnan(r.metrics["recovery_time_s"])
    assert any("has not recovered before the load changes again" in w for w in r.warnings)


def test_the_keyed_runs_means_come_exactly_out_of_the_thinned_trace() -> None:
    # The thinned trace keeps the running integral of every vector at its samples, so a mean between kept
    # samples is the trapezoid integral of the full-resolution trace (num-4): equal to rounding, however few
    # samples are kept.  A synthetic 50 Hz ripple on a slow exponential, on uneven time steps.
    T = 0.02
    rng = np.random.default_rng(1)
    t = np.cumsum(rng.uniform(2e-5, 4e-4, 20000))
    t -= t[0]
    v = 300 - 10 * np.exp(-t / 0.3) + 2 * np.sin(2 * np.pi * 50 * t)
    circuit = Circuit("synthetic", period=T, output="out")
    trace = kd._Trace(["out"])
    half = len(t) // 2
    trace.add(circuit, Waveforms(t[: half + 1], {"out": v[: half + 1]}), 0.0)
    trace.add(circuit, Waveforms(t[half:] - t[half], {"out": v[half:]}), float(t[half]))
    tt, vec, areas = trace.build()
    assert len(tt) < len(t) / 3  # 24 samples a period and the extremes, of about 95
    run = kd.KeyedRun(kd.Run("", float(tt[-1]), Waveforms(tt, vec), {}), 1.0, (0.0, 1.0), True, 1.0, circuit, areas)
    for a, b in ((tt[100], tt[3000]), (tt[7], tt[9]), (tt[2000], tt[-1])):
        assert run.mean("out", a, b) == pytest.approx(mx.mean(t, v, a, b), rel=1e-12, abs=1e-9)
    # Between kept samples the integral is interpolated linearly: off by at most dt^2/8 max|v'| at each end,
    # dt = T/24 the kept spacing (derived here: the error of linear interpolation of a function whose second
    # derivative is v').  Measured: 1.6 mV over a 30 ms span.
    slope = 2 * 2 * math.pi * 50 + 10 / 0.3
    for a, b in ((0.1, 0.13), (0.5, 2.0), (1.234, 1.234 + T)):
        bound = 2 * (T / 24) ** 2 / 8 * slope / (b - a)
        assert abs(run.mean("out", a, b) - mx.mean(t, v, a, b)) <= bound
    # The one-period mean takes the ripple out: what is left is the exponential's own mean over the period
    # (derived here: the mean of e^(-t/tau) over [t - T/2, t + T/2] is e^(-t/tau) sinh(T/2tau) / (T/2tau)).
    at = np.array([0.5, 1.0, 2.0])
    shape = math.sinh(T / 0.6) / (T / 0.6)
    assert run.period_mean("out", at) == pytest.approx(300 - 10 * np.exp(-at / 0.3) * shape, abs=2e-3)


def test_lead_in_from_the_slowest_mode() -> None:
    # A one-period map whose slowest multiplier is 0.5 decays with tau = 1/ln 2 = 1.443 periods; the lead-in
    # lets it decay to 1e-3 twice over: ceil(2 tau ln 1000) + 1 = 21 periods (derived here).
    jac = np.diag([0.5, 0.1])
    assert kd.slowest_periods(jac) == pytest.approx(1 / math.log(2), rel=1e-12)
    assert kd.lead_periods(jac, 1000) == 21
    assert kd.lead_periods(jac, 10) == 10  # never more than a keying cycle
    assert kd.lead_periods(None, 50) == 50  # unknown: a whole cycle
    assert kd.lead_periods(np.diag([1e-6]), 50) == kd.MIN_LEAD_PERIODS


@pytest.mark.ngspice
def test_keying_settles_in_one_cycle_and_agrees_with_a_long_run_from_empty() -> None:
    # The keyed figures against the naive way, the same circuit from empty capacitors over four keying cycles
    # at a period / 1000 and reltol 1e-6 (an ngspice run of simkit's own keyed circuit, not an independent
    # solver: it checks the shortcut, the lead-in and the coarse keying step).  Measured: 4e-6.
    d = station()
    r = simulate(d)
    assert r.keyed is not None and r.keyed.settled and r.keyed.cycles == 1
    c = build_circuit(d, mode="keyed")
    cycle = r.keyed.cycle
    from simkit.engine.ngspice import get_engine

    w = get_engine().run(render(c, Transient(tstop=4 * cycle, tmax=c.period / 1000, reltol=1e-6), {}), 4 * cycle)
    from simkit.netlist.build import keying_drive

    drive = keying_drive(d.keyed[0])
    downs = drive.intervals(3 * cycle, 4 * cycle, level=0.999)
    vd = sum(mx.mean(w.time, w.v("out"), a, b) * (b - a) for a, b in downs) / sum(b - a for a, b in downs)
    assert r.metrics["vout_keydown_v"] == pytest.approx(vd, rel=1e-4)


# --- the battery: Peukert's law and the corners ------------------------------------------------------------


def battery(**kw: object) -> Battery:
    return Battery(**{"voltage": 12.6, "capacity": 7.0, **kw})  # type: ignore[arg-type]


def test_peukert_gives_the_rated_capacity_at_the_rated_current() -> None:
    # supply-6: at its rated current C/H a battery lasts its rated H hours, whatever k (derived here).
    b = battery(peukert_given=1.3, rated_hours_given=20.0)
    assert b.runtime_h(7.0 / 20) == pytest.approx(20.0, rel=1e-12)
    # k = 1: capacity / current; and usable_fraction takes its share.
    assert battery(peukert_given=1.0).runtime_h(2.0) == pytest.approx(3.5, rel=1e-12)
    assert battery(peukert_given=1.0, usable_fraction=0.5).runtime_h(2.0) == pytest.approx(1.75, rel=1e-12)
    # A current that varies: the mean of I^k; a constant one gives the constant-current answer.
    t = np.linspace(0, 10, 101)
    assert b.runtime_h(np.full_like(t, 1.5), t) == pytest.approx(b.runtime_h(1.5), rel=1e-12)
    # Half the time at 2 A and half at 0: the battery is used at 2^k / 2, so it lasts 2^(1-k) times as long
    # as at 1 A steady (derived here): drawing the same charge in bursts costs more with k > 1.
    burst = np.where(t < 5, 2.0, 0.0)
    tt = np.concatenate([t[t < 5], [5.0 - 1e-12, 5.0], t[t > 5]])
    bb = np.concatenate([burst[t < 5], [2.0, 0.0], burst[t > 5]])
    assert b.runtime_h(bb, tt) == pytest.approx(b.runtime_h(1.0) * 2 ** (1 - 1.3), rel=1e-6)
    assert battery().runtime_h(0.0) == math.inf


def test_peukert_against_a_makers_discharge_table() -> None:
    # Panasonic LC-R061R3 (6 V 1.3 Ah VRLA) data sheet, capacity at 25 C: 1.3 Ah at the 20-hour rate, 1.05 Ah
    # at the 5-hour rate, 0.85 Ah at the 1-hour rate (read; supply-6).  The exponent fitted to its 20 h and 1 h
    # points, k = ln 20 / ln(0.85 / 0.065) = 1.165, predicts how long the 5-hour current lasts: the sheet says
    # 5 h, the law 5.1 h (2 % over, derived here; within 3 %).
    i20, i1 = 1.3 / 20, 0.85 / 1
    k = math.log(20) / math.log(i1 / i20)
    assert k == pytest.approx(1.165, abs=1e-3)
    b = Battery(voltage=6.3, capacity=1.3, chemistry="lead-acid", peukert_given=k, rated_hours_given=20.0)
    assert b.cells == 3
    assert b.runtime_h(i1) == pytest.approx(1.0, rel=1e-9)  # the fit's own point
    assert b.runtime_h(1.05 / 5) == pytest.approx(5.0, rel=0.03)
    # The default lead-acid exponent, 1.15 (common practice, supply-8), is near this battery's 1.165.
    assert battery().peukert == 1.15 and battery().rated_hours == 20.0


@pytest.mark.parametrize("chemistry,voltage,cells,low,high", [
    # supply-8, hand arithmetic: cells = round(voltage / typical cell voltage); corners = cells x per cell.
    ("lead-acid", 12.6, 6, 11.5, 14.4),
    ("lead-acid", 24.0, 12, 23.0, 28.8),
    ("lifepo4", 12.8, 4, 12.0, 14.6),
    ("lifepo4", 25.6, 8, 24.0, 29.2),
    ("li-ion", 11.1, 3, 9.0, 12.6),
    ("li-ion", 16.8, 4, 12.0, 16.8),
])
def test_battery_corners_by_chemistry(chemistry: str, voltage: float, cells: int, low: float, high: float) -> None:
    b = battery(voltage=voltage, chemistry=chemistry)
    assert b.cells == cells
    assert b.low == pytest.approx(low, rel=1e-12) and b.high == pytest.approx(high, rel=1e-12)
    assert b.at("low").voltage == pytest.approx(low, rel=1e-12) and b.at("nominal") is b
    # A corner is the same battery: its cells and corners stay (12.6 V lead-acid at 14.4 V is still 6 cells,
    # not 7 worked out from 14.4 V).
    for corner in ("low", "high"):
        c = b.at(corner)
        assert (c.cells, c.low, c.high) == (b.cells, b.low, b.high), corner
    given = battery(voltage=voltage, chemistry=chemistry, low_given=10.0, high_given=15.0, cells_given=5)
    assert (given.low, given.high, given.cells) == (10.0, 15.0, 5)


def test_battery_corner_keys_are_checked() -> None:
    text = STATION.replace('usable_fraction = "50%"', 'usable_fraction = "50%"\nlow = "15"\nhigh = "14"')
    with pytest.raises(DesignError) as exc:
        station(text)
    assert exc.value.key == "battery.low" and exc.value.exit_code == 2
    with pytest.raises(DesignError) as exc:
        station(STATION.replace('usable_fraction = "50%"', 'usable_fraction = "50%"\nchemistry = "nicad"'))
    assert exc.value.key == "battery.chemistry"


def test_a_speed_without_morse_text_is_refused_not_ignored() -> None:
    with pytest.raises(DesignError) as exc:
        station(STATION.replace('morse = "TEST"\nwpm = 25', 'rate = "5"\nduty = "40%"\nwpm = 25'))
    assert exc.value.key == "load.wpm" and "morse" in str(exc.value)
    assert station(STATION.replace('morse = "TEST"\nwpm = 25', 'rate = "5"\nduty = "40%"')).loads[0].rate == 5.0


@pytest.mark.ngspice
def test_run_with_the_battery_low(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # run --battery low: the battery at 11.5 V (six lead-acid cells, supply-8), its terminal V = Vb - Rb I at
    # every instant (Ohm's law; the means exactly so).
    path = tmp_path / "station.toml"
    path.write_text(STATION.replace("[load]", "[load_]").split("[load_]")[0] + '[load]\nkind = "current"\n'
                    'i = "50m"\n', "utf-8")
    with pytest.raises(SystemExit) as exc:
        main(["run", str(path), "--battery", "low", "--json"])
    assert exc.value.code == 0
    out, err = capsys.readouterr()
    m = json.loads(out)["metrics"]
    assert m["battery_voltage_v"] == pytest.approx(11.5 - 0.03 * m["battery_current_a"], rel=1e-9)
    assert "battery low: 11.5 V" in err and "simkit: steady" not in err  # no progress line off a terminal
    mains = tmp_path / "mains.toml"
    mains.write_text('[source]\nvrms = "120"\nfrequency = "60"\nresistance = "4"\n[rectifier]\ntopology = "bridge"\n'
                     '[[filter]]\nc = "100u"\n[load]\nkind = "resistor"\nr = "5k"\n', "utf-8")
    with pytest.raises(SystemExit) as exc:
        main(["run", str(mains), "--battery", "low"])
    assert exc.value.code == 2 and "--battery low needs a [battery] section" in capsys.readouterr().err


@pytest.mark.ngspice
def test_battery_while_keying() -> None:
    # Plumbing of the definitions (figures table): the key-down current is the steady state's (the key held
    # until everything settled); keying never draws more on average than that, and its peak is at least it.
    r = simulate(station())
    m = r.metrics
    assert m["battery_keydown_current_a"] == m["battery_current_a"]
    assert m["battery_keyup_current_a"] < m["battery_keyed_current_a"] < m["battery_keydown_current_a"]
    assert m["battery_peak_current_a"] >= m["battery_keydown_current_a"]
    # Runtime while keying: Peukert on the current as it varies, between the key-down and key-up runtimes.
    b = r.design.battery
    assert b.runtime_h(m["battery_keydown_current_a"]) < m["runtime_keyed_h"] < b.runtime_h(
        m["battery_keyup_current_a"])


# --- the inverter ------------------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_check_gives_the_inverter_its_verdicts_at_the_battery_corners() -> None:
    from simkit.checks import check_design

    d = station()
    rep = check_design(d)
    cn = rep.corners.names
    assert cn["light"] == "battery high (14.4 V), light load" and cn["low"] == "battery low (11.5 V), heavy load"
    assert cn["low"] in rep.corners.results
    low = rep.corners.results[cn["low"]].metrics
    assert low["battery_voltage_v"] == pytest.approx(11.5 - 0.03 * low["battery_current_a"], rel=1e-9)
    by_rule = {v.rule: v for v in rep.verdicts if v.part == "V1"}
    out = by_rule["inverter output power, key down"]
    loaded = [rep.corners.results[n].metrics["output_power_w"] for n in (cn["light"], cn["heavy"], cn["low"])]
    assert out.value == max(loaded) and out.limit == 150.0
    on = by_rule["inverter switch-on power"]
    assert on.limit == 300.0 and on.corner.startswith("switch-on at 45° of the period (modified sine: the start")
    # Charging the empty capacitors takes at least their stored energy over the run that charges them
    # (1/2 C V^2 of each; derived here): the switch-on power is no small figure.
    assert on.value > 100.0
    idle = by_rule["inverter idle power, share of the battery power"]
    assert idle.verdict == "pass" and 0 < idle.value < 50


@pytest.mark.ngspice
def test_idle_power_that_dominates_is_a_warning() -> None:
    # A 15 W idle inverter feeding a few watts: run warns, check marks it marginal (never a fail).
    from simkit.checks import check_design

    text = STATION.replace('idle_power = "5"', 'idle_power = "15"').replace('down = { i = "110m" }',
                                                                          'down = { i = "5m" }')
    text = text.replace('up = { i = "15m" }', 'up = { i = "2m" }')
    r = simulate(station(text))
    assert any("idle power" in w and "sets the runtime" in w for w in r.warnings)
    idle = next(v for v in check_design(station(text)).verdicts if v.rule.startswith("inverter idle power"))
    assert idle.verdict == "marginal" and idle.value > 50
    assert idle.fix is not None and not idle.fix.sets and "smaller inverter" in idle.fix.reason


@pytest.mark.ngspice
def test_an_inverter_short_of_its_surge_gets_a_rating_that_passes() -> None:
    # The fix interface (docs/reference.md, Fixes): the surge rating to buy, R10 (IEC 60063 style series),
    # with the marginal band to spare; applied, the verdict passes (the switch-on itself does not change).
    from simkit.checks import check_design
    from simkit.design.loader import apply_overrides, design_from_dict, parse_toml_text

    text = STATION.replace('rated_power = "150"', 'rated_power = "150"\npeak_power = "50"')
    on = next(v for v in check_design(station(text)).verdicts if v.rule == "inverter switch-on power")
    assert on.verdict == "fail" and on.fix is not None
    (a,) = on.fix.sets
    assert a.path == "source.peak_power" and a.value >= on.value / (1 - 0.1 - 0.01)
    fixed = design_from_dict(apply_overrides(parse_toml_text(text), [a.text()], "station.toml"))
    again = next(v for v in check_design(fixed).verdicts if v.rule == "inverter switch-on power")
    assert again.verdict == "pass"


def test_worst_switch_on_instant_per_waveform() -> None:
    # A sine's worst instant is its crest; a step waveform's is where its positive step begins, 90 - 90 d
    # degrees for a step held a share d of each half period (derived here, supply-4: d = (vrms/peak)^2).
    def inv(waveform: str, peak: float | None = None) -> InverterSource:
        return InverterSource(vrms=230.0, frequency=50.0, rated_power=150.0, waveform=waveform, peak_given=peak,
                              efficiency=0.85)

    assert worst_switch_on_phase(inv("sine")) == 90.0
    assert worst_switch_on_phase(inv("modified-sine")) == pytest.approx(45.0, abs=1e-9)
    assert worst_switch_on_phase(inv("modified-sine", 400.0)) == pytest.approx(90 - 90 * (230 / 400) ** 2)
    assert worst_switch_on_phase(inv("square")) == 0.0
    assert switch_on_words(inv("modified-sine"), 90.0) == "90° of the period (modified sine: on the positive step)"
    assert switch_on_words(inv("modified-sine"), 0.0).endswith("in the zero interval)")
    # The step under way at t = 0: at 90° of a modified sine the step began T/8 earlier and falls T/8 later.
    T = 0.02
    assert drives.step_under_way((T / 4 - T / 8 - T / 4) % T, T / 4, T / 500, T) == pytest.approx(T / 8)
    assert drives.step_under_way(0.0, T / 4, T / 500, T) is None


@pytest.mark.ngspice
def test_a_switch_on_inside_a_step_starts_at_full_voltage() -> None:
    # switch_on_phase = 90 on a modified sine: the run starts a quarter period in, in the middle of the positive
    # step (supply-4: at +-peak from T/8 to 3T/8 of each half period for d = 1/2), so the unit wave is 1 from
    # the first instant until T/8 later, then 0 until the negative step at 3T/8.
    d = station()
    c = build_circuit(d, phase_deg=90.0, mode="start")
    from simkit.engine.ngspice import get_engine

    w = get_engine().run(render(c, Transient(tstop=0.04, tmax=2e-5)), 0.04)
    T = 0.02
    for t, want in ((1e-4, 1.0), (T / 8 - 1e-4, 1.0), (T / 8 + 1e-4, 0.0), (3 * T / 8 + 1e-4, -1.0),
                    (T - 1e-4, 1.0)):
        assert float(np.interp(t, w.time, w.v("wave"))) == pytest.approx(want, abs=1e-6), t


# --- progress ------------------------------------------------------------------------------------------------


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_reaches_every_listener_with_its_stage() -> None:
    assert progress.callback() is None  # nobody listens: analyses get None and skip the calls
    outer: list[progress.Update] = []
    inner: list[progress.Update] = []
    with progress.listen(outer.append):
        progress.report("steady state", 0.02)
        with progress.listen(inner.append), progress.stage("corner 1 of 2"):
            cb = progress.callback()
            assert cb is not None
            cb("switch-on", 0.5, 2.0)
    assert [u.analysis for u in outer] == ["steady state", "switch-on"] and len(inner) == 1
    u = inner[0]
    assert (u.stage, u.done, u.total, u.share) == ("corner 1 of 2", 0.5, 2.0, 0.25)
    assert progress.line_text(u).startswith("simkit: switch-on: 500 ms of 2 s simulated (25 %) [corner 1 of 2]")
    assert progress.callback() is None


def test_the_status_line_shows_only_on_a_terminal_after_its_delay() -> None:
    tty, log = _Tty(), io.StringIO()
    for stream in (tty, log):
        with progress.terminal(stream, delay=0.0):
            progress.report("steady keying", 3.0, 12.0)
    assert "steady keying: 3 s of 12 s simulated (25 %)" in tty.getvalue() and tty.getvalue().endswith("\r")
    assert log.getvalue() == ""
    quiet, slow = _Tty(), _Tty()
    with progress.terminal(quiet, enabled=False, delay=0.0):
        progress.report("steady keying", 3.0, 12.0)
    with progress.terminal(slow, delay=60.0):
        progress.report("steady keying", 3.0, 12.0)
    assert quiet.getvalue() == "" and slow.getvalue() == ""


@pytest.mark.ngspice
def test_simulate_reports_its_analyses() -> None:
    got: list[progress.Update] = []
    with progress.listen(got.append):
        simulate(station())
    analyses = {u.analysis for u in got}
    assert {"steady state", "switch-on", "steady keying"} <= analyses
    keyed = [u for u in got if u.analysis == "steady keying"]
    assert keyed[-1].total is not None and keyed[-1].done == pytest.approx(keyed[-1].total)
