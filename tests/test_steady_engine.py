"""The steady-state engine: its step choice, its checks, and the limits on what it will run.

Sources: the step choice is held against simkit's own runs at a step ten and more times finer
(one period / 4000, reltol 1e-6, at least four times finer), which is what "accurate enough" means
for a step; energy
conservation (the power a source delivers over a period of a periodic state goes into loads and
losses, none into stored energy) is standard circuit theory; the rest is simkit's contract
(docs/reference.md, "How simkit simulates").
"""

from __future__ import annotations

import copy
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from simkit.analysis import runs, steady
from simkit.design.loader import design_from_dict
from simkit.errors import DesignError, SimulationError
from simkit.netlist.build import build_circuit
from simkit.pipeline import WindingResult, simulate

pytestmark = pytest.mark.ngspice


def _design(topology: str, vrms: float, f: float, rs: float, c: float, rl: float, *, stages: int = 1,
            inductance: float = 0.0, filters: list[dict] | None = None) -> dict:
    d: dict = {"title": f"step test: {topology}",
               "source": {"vrms": vrms, "frequency": f, "resistance": rs, "inductance": inductance},
               "rectifier": {"topology": topology, "diode": "1N4007"},
               "load": {"kind": "resistor", "r": rl}}
    if topology in ("doubler", "cascade"):
        d["rectifier"]["capacitance"] = c
    if topology == "cascade":
        d["rectifier"]["stages"] = stages
    else:
        d["filter"] = filters if filters is not None else [{"c": c}]
    return d


# Every topology, each with a narrow conduction pulse (large omega C R_L, small Rs: the hard case for the
# step) and, for the plain rectifiers, one at low omega C R_L with a large Rs.
CASES = {
    "half-wave": _design("half-wave", 120, 60, 2.0, 1000e-6, 2e3),
    "half-wave, low wCR": _design("half-wave", 120, 60, 100.0, 10e-6, 1e3),
    "centre-tap": _design("centre-tap", 250, 50, 20, 100e-6, 4e3),
    "bridge": _design("bridge", 250, 50, 15, 220e-6, 3e3),
    "bridge, low wCR": _design("bridge", 250, 50, 250, 8e-6, 3e3),
    "doubler": _design("doubler", 120, 60, 3, 220e-6, 5e3),
    "cascade": _design("cascade", 200, 50, 10, 47e-6, 50e3, stages=2),
    "choke input": _design("centre-tap", 350, 60, 60, 0, 3.3e3,
                           filters=[{"l": "10", "dcr": "150"}, {"c": "40u", "esr": "0.5"}]),
    "leakage inductance": _design("bridge", 250, 50, 15, 100e-6, 3e3, inductance=0.05),
    "C-L-C": {**_design("bridge", 300, 50, 30, 0, 2e3, filters=[{"c": "22u", "esr": "0.5"}, {"l": "5", "dcr": "120"},
                                                               {"c": "100u", "esr": "0.3"}]),
              "bleeder": {"r": "100k"}},
}
FIGURES = ("vout_dc_v", "ripple_pp_v", "diode_peak_a", "diode_rms_a", "diode_avg_a", "diode_piv_v",
           "reservoir_ripple_a", "source_rms_a", "surge_peak_a", "cap_peak_v")
#: The accuracy the automatic step must reach against the fine run: what the comparisons with the
#: independent solver demand (0.2 % on DC and PIV, 0.5 % on ripple and currents), with room to spare.
LIMIT = {"vout_dc_v": 5e-4, "diode_piv_v": 1e-3}
DEFAULT_LIMIT = 4e-3


@pytest.mark.parametrize("name", list(CASES))
def test_automatic_step_matches_a_four_times_finer_run(name: str) -> None:
    base = CASES[name]
    fine_d = copy.deepcopy(base)
    fine_d["simulation"] = {"steps_per_period": 4000, "reltol": 1e-6, "settle_tolerance": 1e-6}
    fine = simulate(design_from_dict(fine_d)).metrics
    auto = simulate(design_from_dict(base))
    assert auto.steady.steps <= 1000, "a step near the reference's would prove nothing"
    for f in FIGURES:
        assert auto.metrics[f] == pytest.approx(fine[f], rel=LIMIT.get(f, DEFAULT_LIMIT)), f


def test_a_failed_halving_test_moves_to_the_step_it_predicts_not_to_twice_the_steps() -> None:
    # This bridge into C-L-C fails the halving test at 200 steps a period by a little (its ripple moves
    # 0.23 % at 400, measured): errors going as the step squared, about 250 steps pass (0.096 % at 500,
    # measured), and they are what it measures at; test_automatic_step_matches_a_four_times_finer_run
    # holds its figures against one period / 4000.
    auto = simulate(design_from_dict(CASES["C-L-C"]))
    assert 200 < auto.steady.steps < 400


def test_the_step_follows_the_conduction_pulse() -> None:
    # A narrow pulse (large reservoir, stiff winding) needs more steps than a wide one (small reservoir,
    # soft winding): the rule puts POINTS_PER_PULSE points in the shortest pulse.
    narrow = simulate(design_from_dict(CASES["half-wave"])).steady.steps
    wide = simulate(design_from_dict(CASES["half-wave, low wCR"])).steady.steps
    assert narrow > wide >= steady.MIN_STEPS


def _broken_and_settled(design_dict: dict) -> tuple[list[steady.Check], list[steady.Check]]:
    """The checks of a span started 20 % below the periodic state, and of the periodic state itself."""
    from simkit.engine.ngspice import get_engine

    d = design_from_dict(design_dict)
    result = simulate(d)
    c = result.circuit
    eng = get_engine()
    x = dict(result.steady.final.ics)
    space = steady._Space(d, c, x, 1.0)
    bad = {k: (0.8 * v if k.startswith("C") else v) for k, v in x.items() if not k.startswith("v(")}
    broken = runs.run_span(eng, d, c, c.period, bad, result.steady.steps)
    return steady.verify(d, c, broken, space, None, 1e-4), result.steady.checks


def test_power_balance_catches_a_state_that_is_not_periodic() -> None:
    # Energy conservation: in a periodic state the stored energy returns each period, so the source's
    # power is what loads and losses take; a reservoir 20 % low takes a share of it to recharge.
    broken, settled = _broken_and_settled(CASES["bridge"])
    power = {c.name: c for c in broken}["power balance"]
    assert not power.ok and power.value > 0.05
    assert all(c.ok for c in settled), settled


def test_power_balance_of_the_periodic_state_against_the_loss_budget() -> None:
    # The source's power equals the load's plus every resistive and diode loss (energy conservation),
    # here computed from the waveforms term by term, independently of the check's own bookkeeping.
    d = design_from_dict(CASES["bridge"])
    r = simulate(d)
    w, c = r.steady.final.waves, r.circuit
    t0, t1 = r.window
    from simkit.analysis import metrics as mx

    p_src = sum(mx.mean(w.time, (w.v(x.emf) - w.v(x.minus)) * -w.i(x.name), t0, t1) for x in c.windings)
    p_res = sum(mx.mean(w.time, (w.v(x.a) - w.v(x.b)) ** 2, t0, t1) / x.value for x in c.resistors)
    p_dio = sum(mx.mean(w.time, (w.v(x.anode) - w.v(x.cathode)) * w.i(x.sense), t0, t1) for x in c.diodes)
    assert p_src == pytest.approx(p_res + p_dio, rel=2e-3)


def test_power_balance_counts_stored_energy_not_a_models_state() -> None:
    # Energy conservation holds for the circuit's capacitors and inductors; an inverter model's smoothed
    # output power (a capacitor whose "voltage" is in watts, following the load over its response time) is
    # no stored energy.  On the shipped regulated inverter example that state still creeps by a few mV per
    # period at the periodic point's tolerance, which read as a 0.35 % power imbalance when it was counted.
    from simkit.design.loader import load_design

    root = Path(__file__).resolve().parent.parent
    r = simulate(load_design(root / "simkit" / "examples" / "portable_cw_regulated.toml"))
    power = {c.name: c for c in r.steady.checks}["power balance"]
    assert power.ok and power.value < 0.5 * steady.POWER_TOL, power
    assert not any("not verified" in w for w in r.warnings)


HUGE = {"title": "a 5 F reservoir behind 1 H of leakage inductance",
        "source": {"vrms": "250", "frequency": "50", "resistance": "25", "inductance": "1"},
        "rectifier": {"topology": "bridge"}, "filter": [{"c": "5"}],
        "load": {"kind": "resistor", "r": "5k"}}


def test_huge_reservoir_gets_its_true_steady_state_and_a_warning_about_its_rise() -> None:
    r = simulate(design_from_dict(HUGE))
    assert r.steady.settled and all(c.ok for c in r.steady.checks)
    m = r.metrics
    # Energy conservation: the winding delivers what the load takes plus the losses (not the load's
    # power out of the capacitor's charge).
    p_load = m["vout_dc_v"] ** 2 / 5e3
    p_src = sum(w.apparent_power_va for w in r.of_kind(WindingResult).values())
    assert p_src > p_load
    # A far larger or smaller reservoir changes the ripple, not the DC (the inductance sets it).
    r3 = simulate(design_from_dict({**HUGE, "filter": [{"c": "0.5"}]}))
    assert r3.metrics["vout_dc_v"] == pytest.approx(m["vout_dc_v"], rel=1e-4)
    assert r3.metrics["ripple_pp_v"] == pytest.approx(10 * m["ripple_pp_v"], rel=0.02)
    # The rise takes hours: said before simulating, and no rise time is made up.
    assert any("to rise after switch-on" in x for x in r.warnings)
    assert math.isnan(m["rise_time_s"])


def test_a_state_that_cannot_balance_is_refused_not_reported(monkeypatch: pytest.MonkeyPatch) -> None:
    # With the search cut to the first span, the reported state would draw the load's power from the
    # capacitor: the run stops with exit 3 and says why.
    monkeypatch.setattr(steady, "NEWTON_ITERATIONS", 0)
    d = design_from_dict({**HUGE, "simulation": {"max_settle_time": "20m"}})
    with pytest.raises(SimulationError, match="power") as exc:
        simulate(d)
    assert exc.value.exit_code == 3


def test_cost_over_the_limit_is_refused_before_simulating(tmp_path: Path) -> None:
    # A 100 kHz source keyed once a second: two keying cycles are 200 000 source periods.
    d = design_from_dict({"title": "too long", "source": {"vrms": "100", "frequency": "100k", "resistance": "1"},
                          "rectifier": {"topology": "bridge"}, "filter": [{"c": "10u"}],
                          "load": {"kind": "keyed", "rate": "1", "duty": "50%", "down": {"i": "10m"},
                                   "up": {"i": "1m"}}})
    with pytest.raises(DesignError, match="max_points") as exc:
        simulate(d)
    assert exc.value.key == "simulation.max_points" and exc.value.exit_code == 2
    # Raising the limit is the documented way through (the estimate is over it, not the design wrong).
    d2 = replace(d, simulation=replace(d.simulation, max_points=1e12))
    from simkit.pipeline import check_cost

    assert sum(c.points for c in check_cost(d2, build_circuit(d2))) > 2e7


def test_warm_start_gives_the_same_figures() -> None:
    # A sweep's point starts from its neighbour's periodic state: the same fixed point, within the
    # settle tolerance.
    a = design_from_dict(CASES["bridge"])
    b = design_from_dict({**CASES["bridge"], "load": {"kind": "resistor", "r": 3.3e3}})
    simulate(a, warm=True)
    warm = simulate(b, warm=True)
    cold = simulate(b)
    for f in ("vout_dc_v", "ripple_pp_v", "diode_peak_a", "diode_rms_a"):
        # The two may settle on different steps (the neighbour's verified one): within the step's accuracy.
        assert warm.metrics[f] == pytest.approx(cold.metrics[f], rel=LIMIT.get(f, DEFAULT_LIMIT)), f
    assert warm.steady.settle_time < cold.steady.settle_time


def test_the_kept_circuit_gives_the_figures_of_a_fresh_load_every_span() -> None:
    # Newton's spans alter the circuit ngspice holds instead of loading each deck (simkit.engine): the
    # figures must be those of loading every deck afresh.  Measured: the same to 1e-14 (ngspice's solver
    # starts each run from what the last left in its matrices; its answer is the same to round-off).
    from simkit.engine.ngspice import get_engine

    d = design_from_dict(CASES["choke input"])
    engine = get_engine()
    before = engine.reused
    kept = simulate(d)
    assert engine.reused > before
    engine.reuse = False
    try:
        fresh = simulate(d)
    finally:
        engine.reuse = True
    assert kept.metrics.keys() == fresh.metrics.keys()
    for f, v in kept.metrics.items():
        assert v == pytest.approx(fresh.metrics[f], rel=1e-9, abs=1e-12, nan_ok=True), f


def test_the_warm_start_predicts_a_power_law_state_and_a_linear_jacobian() -> None:
    # Along a sweep of the load, a choke's current goes as 1/R and the Jacobian's entries move smoothly:
    # the predictor fits the state's logarithm against the values' logarithms, so from solutions at 1, 2
    # and 4 kohm it predicts 8 kohm's state exactly (a straight fit of the state itself would give
    # 0.05 A - 0.075 A for 400 V / 8 kohm = 0.05 A ... 0.0125 A off), and a Jacobian linear in log R.
    import importlib

    sim = importlib.import_module("simkit.pipeline.simulate")
    saved = list(sim._WARM)
    sim._WARM.clear()
    try:
        spec = CASES["choke input"]
        circuits = {r: build_circuit(design_from_dict({**spec, "load": {"kind": "resistor", "r": r}}))
                    for r in (1e3, 2e3, 4e3, 8e3)}
        names = tuple(runs.state_names(circuits[1e3]))
        n = len(names)

        def state(r: float) -> np.ndarray:
            return np.array([400.0 / r if name.startswith("L") else 400.0 - r / 100 for name in names])

        def jac(r: float) -> np.ndarray:
            return np.full((n, n), 0.1) + 0.01 * math.log(r) * np.eye(n)

        for r in (1e3, 2e3, 4e3):
            sim._remember(circuits[r], 1.0, steady.Solution(names, state(r), jac(r), 400, 400))
        got = sim._nearest(circuits[8e3], 1.0)
        assert got is not None
        chokes = [k for k, name in enumerate(names) if name.startswith("L")]
        assert chokes
        assert np.allclose(got.x[chokes], state(8e3)[chokes], rtol=1e-9)
        assert np.allclose(got.jacobian, jac(8e3), rtol=1e-9)
    finally:
        sim._WARM[:] = saved


def test_switch_on_run_keeps_bounded_memory_on_a_long_timeline() -> None:
    # A load that waits 40 s for its heaters: the start-up run covers the timeline, but chunks after the
    # rise keep about THIN_PER_PERIOD samples per period (plus each watched extreme).
    d = design_from_dict({**CASES["bridge"], "load": {"kind": "resistor", "r": 3e3, "warmup": "40"}})
    r = simulate(d)
    from simkit.analysis.startup import THIN_PER_PERIOD

    periods = r.start.tstop * d.source.frequency
    assert r.start.tstop > 40
    assert len(r.start.waves.time) < periods * (THIN_PER_PERIOD + 2 * 12) + 2000
    assert np.all(np.diff(r.start.waves.time) > 0)
