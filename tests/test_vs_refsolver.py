"""simkit against the independent reference solver (tests/refsolver.py: scipy only, no simkit code).

The same circuits and the same SPICE-style diode law (IS, N, RS of the library 1N4007 fit) on
both sides.  Tolerances of the core issue: Vdc within 1 %, ripple within 5 %, peak and RMS
diode current within 5 %; PIV, mean diode current and winding RMS current checked too.
"""

from __future__ import annotations

import pytest

from simkit.design.loader import design_from_dict
from simkit.pipeline import simulate
from tests.refsolver import Circuit, Diode, steady_state, switch_on

pytestmark = pytest.mark.ngspice

IS, N, RS = 5e-9, 1.8, 0.04  # simkit's 1N4007 fit (simkit/parts/diodes.py)
REF_DIODE = Diode(model="exponential", i_s=IS, n=N, r_d=RS)

CASES = [
    # topology, vrms, f, Rs, C, RL, stages
    ("half-wave", 120.0, 60.0, 5.0, 470e-6, 2e3, 1),
    ("centre-tap", 250.0, 50.0, 20.0, 100e-6, 4e3, 1),
    ("bridge", 250.0, 50.0, 15.0, 220e-6, 3e3, 1),
    ("doubler", 120.0, 60.0, 3.0, 220e-6, 5e3, 1),
    ("cascade", 200.0, 50.0, 10.0, 47e-6, 50e3, 2),
]


def _simkit(topology: str, vrms: float, f: float, rs: float, c: float, rl: float, stages: int):  # type: ignore[no-untyped-def]
    d: dict = {"title": f"vs reference: {topology}",
               "source": {"vrms": vrms, "frequency": f, "resistance": rs},
               "rectifier": {"topology": topology, "diode": {"is": IS, "n": N, "rs": RS}},
               "load": {"kind": "resistor", "r": rl}}
    if topology in ("doubler", "cascade"):
        d["rectifier"]["capacitance"] = c
    else:
        d["filter"] = [{"c": c}]
    if topology == "cascade":
        d["rectifier"]["stages"] = stages
    return simulate(design_from_dict(d))


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_steady_state_agrees_with_the_reference_solver(case: tuple) -> None:
    topology, vrms, f, rs, c, rl, stages = case
    ref = steady_state(Circuit(topology, vrms, f, rs, rl, c, diode=REF_DIODE, stages=stages))
    m = _simkit(*case).metrics
    assert m["vout_dc_v"] == pytest.approx(ref.vdc, rel=0.01)
    assert m["ripple_pp_v"] == pytest.approx(ref.ripple_pp, rel=0.05)
    assert m["diode_peak_a"] == pytest.approx(ref.diode_peak, rel=0.05)
    assert m["diode_rms_a"] == pytest.approx(ref.diode_rms, rel=0.05)
    assert m["diode_avg_a"] == pytest.approx(ref.diode_avg, rel=0.01)
    assert m["diode_piv_v"] == pytest.approx(ref.piv, rel=0.01)
    assert m["source_rms_a"] == pytest.approx(ref.source_rms, rel=0.05)
    assert m["ripple_rms_v"] == pytest.approx(ref.ripple_rms, rel=0.05)


@pytest.mark.parametrize("topology", ["half-wave", "bridge"])
def test_switch_on_surge_agrees_with_the_reference_solver(topology: str) -> None:
    # Switch-on at the crest (switch_on_phase = 90) with empty capacitors; formula 18 says about (Vpk - V_F)/Rs.
    case = next(c for c in CASES if c[0] == topology)
    _, vrms, f, rs, c, rl, stages = case
    ref = switch_on(Circuit(topology, vrms, f, rs, rl, c, diode=REF_DIODE, stages=stages), phase_deg=90.0)
    m = _simkit(*case).metrics
    assert m["surge_peak_a"] == pytest.approx(ref.surge, rel=0.02)
