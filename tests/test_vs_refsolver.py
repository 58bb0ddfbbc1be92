"""simkit against the independent reference solver (tests/refsolver.py: scipy only, no simkit code).

Both sides simulate the same circuit, element by element as simkit/netlist/build.py builds it:
the winding's EMF, resistance and leakage inductance, the 10 nF snubber with
R = sqrt(L/C) (clamped to 100 ohm .. 100 kohm) where inductance feeds the diodes, the 10 Meg
ties of a floating winding, the diodes with the same SPICE junction law (IS, N, RS of the
library 1N4007 fit), the capacitors, the choke with its winding resistance and the load.
simkit's 0 V sense sources change nothing.

The cases cover every topology at the usual operating points (omega*C*R_L 126-738, Rs/R_L
below 1 %), the hard regime where only a solver gives the answer (omega*C*R_L 3-10 with
Rs/R_L 5-10 %), choke input above and below the critical inductance, and winding leakage
inductance.  Each figure must agree within the tolerance of TOLERANCE, a modest factor above
the agreement measured (docs/testing.md lists both; `pytest tests/test_vs_refsolver.py -rP`
prints the agreement of every figure).  test_perturbed_decks_fail_the_refsolver_comparison
proves the comparisons can fail: it makes every deck simkit hands to ngspice a little wrong
(all capacitors 1.5 % low, or the source 0.4 % high) and requires every case to fail.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import cache
from typing import Any

import numpy as np
import pytest

from simkit.design.loader import design_from_dict
from simkit.engine.ngspice import Engine
from simkit.pipeline import DiodeResult, RunResult, simulate
from tests.refsolver import Choke, Circuit, Diode, Section, Snubber, SteadyState, SwitchOn, steady_state, switch_on

pytestmark = pytest.mark.ngspice

IS, N, RS = 5e-9, 1.8, 0.04  # the junction law given to simkit inline and to the solver
REF_DIODE = Diode(model="exponential", i_s=IS, n=N, r_d=RS)
TIE = 10e6  # ohm: build.py ties both ends of a floating winding to ground through 10 Meg
SNUB_C = 10e-9  # F: build.py's snubber capacitor

#: Relative tolerance per figure class: a modest factor (2 to 5) above the largest disagreement measured
#: over CASES with the engine that chooses its step by accuracy (docs/testing.md has the table and the
#: command): Vdc 0.011 %, PIV 0.012 %, ripple 0.25 %, diode, winding and choke currents 0.075 %, capacitor
#: ripple current 0.07 %, surge current 0.02 %, surge I2t 0.33 % (a half period around a peak whose place
#: moves with the samples on a broad choke-input surge).  Never looser than the ceilings of the issue that
#: set them: Vdc and PIV 0.2 %, ripple and currents 0.5 %, surge 0.5 %.
TOLERANCE: dict[str, float] = {
    "vdc": 5e-4,
    "piv": 5e-4,
    "ripple": 5e-3,
    "current": 2.5e-3,
    "capacitor": 2.5e-3,
    "surge": 1e-3,
    "i2t": 2.5e-3,
}


def snubber(inductance: float) -> Snubber:
    """build.py's snubber for an inductance: 10 nF and R = sqrt(L/C) within 100 ohm .. 100 kohm."""
    return Snubber(SNUB_C, min(max(math.sqrt(inductance / SNUB_C), 100.0), 100e3))


@dataclass(frozen=True)
class Case:
    """One circuit, for simkit (a design dictionary) and for the solver (a Circuit)."""

    name: str
    topology: str
    vrms: float  # V
    f: float  # Hz
    rs: float  # ohm
    c: float  # F
    rl: float  # ohm
    stages: int = 1
    leakage: float = 0.0  # H
    choke: tuple[float, float] | None = None  # (L in H, DCR in ohm)
    filters: tuple[tuple[str, float], ...] = ()  # further sections: ("r", ohm) or ("c", F)
    bleeder_only: bool = False  # rl is a bleeder, no load (simkit's idle supply)
    engine_issue: tuple[str, ...] = ()  # figures held in a separate, named test (see ENGINE ISSUES below)

    def design(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "title": f"vs reference: {self.name}",
            "source": {"vrms": self.vrms, "frequency": self.f, "resistance": self.rs, "inductance": self.leakage},
            "rectifier": {"topology": self.topology, "diode": {"is": IS, "n": N, "rs": RS}},
        }
        if self.bleeder_only:
            d["bleeder"] = {"r": self.rl}
        else:
            d["load"] = {"kind": "resistor", "r": self.rl}
        if self.topology in ("doubler", "cascade"):
            d["rectifier"]["capacitance"] = self.c
        elif self.choke is not None:
            d["filter"] = [{"l": self.choke[0], "dcr": self.choke[1]}, {"c": self.c}]
        else:
            d["filter"] = [{"c": self.c}]
        d["filter"] = d.get("filter", []) + [{kind: value} for kind, value in self.filters]
        if self.topology == "cascade":
            d["rectifier"]["stages"] = self.stages
        return d

    def circuit(self) -> Circuit:
        return Circuit(
            self.topology, self.vrms, self.f, self.rs, self.rl, self.c, REF_DIODE, stages=self.stages,  # type: ignore[arg-type]
            leakage=self.leakage, winding_snubber=snubber(self.leakage) if self.leakage else None,
            choke=Choke(self.choke[0], snubber(self.choke[0]), self.choke[1]) if self.choke else None,
            tie=TIE if self.topology in ("bridge", "doubler") else 0.0,
            filters=tuple(Section(kind, value) for kind, value in self.filters),  # type: ignore[arg-type]
        )


W50 = 2 * math.pi * 50.0
SLOW_CRC = "bridge, CRC, bleeder only"


def hard(topology: str, vrms: float, rs_over_rl: float, wcr: float, rl: float, stages: int = 1) -> Case:
    """A case of the hard regime: omega*C*R_L = wcr and Rs/R_L = rs_over_rl, at 50 Hz."""
    return Case(f"{topology}, wCR {wcr:g}, Rs/RL {100 * rs_over_rl:g} %", topology, vrms, 50.0,
                rs_over_rl * rl, wcr / (W50 * rl), rl, stages)


CASES: list[Case] = [
    # Usual operating points: omega*C*R_L 126-738, Rs/R_L 0.06-0.5 %.
    Case("half-wave", "half-wave", 120.0, 60.0, 5.0, 470e-6, 2e3),
    Case("centre-tap", "centre-tap", 250.0, 50.0, 20.0, 100e-6, 4e3),
    Case("bridge", "bridge", 250.0, 50.0, 15.0, 220e-6, 3e3),
    Case("doubler", "doubler", 120.0, 60.0, 3.0, 220e-6, 5e3),
    Case("cascade", "cascade", 200.0, 50.0, 10.0, 47e-6, 50e3, stages=2),
    # The hard regime: omega*C*R_L 3-10 with Rs/R_L 5-10 %.
    hard("half-wave", 230.0, 0.10, 3.0, 2e3),
    hard("centre-tap", 300.0, 0.05, 5.0, 3e3),
    hard("bridge", 300.0, 0.08, 4.0, 3e3),
    hard("doubler", 150.0, 0.05, 10.0, 5e3),
    hard("cascade", 200.0, 0.05, 10.0, 20e3, stages=2),
    # Choke input: critical inductance R_L/(3 omega) = 3.18 H at 3 k and 50 Hz (see
    # tests/test_refsolver.py); 10 H is above it (continuous conduction), 1.5 H below.
    Case("bridge, choke 10 H (above critical)", "bridge", 300.0, 50.0, 20.0, 47e-6, 3e3, choke=(10.0, 100.0)),
    Case("centre-tap, choke 1.5 H (below critical)", "centre-tap", 300.0, 50.0, 20.0, 47e-6, 3e3,
         choke=(1.5, 50.0)),
    # Winding leakage inductance (with build.py's snubber across the winding terminals).
    Case("half-wave, leakage 5 mH", "half-wave", 120.0, 60.0, 5.0, 220e-6, 1e3, leakage=5e-3),
    Case("centre-tap, leakage 20 mH", "centre-tap", 250.0, 50.0, 10.0, 100e-6, 3e3, leakage=20e-3),
    Case("bridge, leakage 20 mH", "bridge", 250.0, 50.0, 10.0, 100e-6, 2e3, leakage=20e-3),
    # A CRC filter: loaded (output time constant 47 uF x 833 ohm = 39 ms), and idle with only a bleeder
    # (the cold-load corner of tests/test_checks.py: 47 k x 100 uF = 4.7 s).
    Case("bridge, CRC, loaded", "bridge", 250.0, 50.0, 25.0, 100e-6, 5e3, filters=(("r", 1e3), ("c", 47e-6))),
    Case(SLOW_CRC, "bridge", 330.0, 50.0, 30.0, 47e-6, 47e3, filters=(("r", 470.0), ("c", 100e-6)),
         bleeder_only=True, engine_issue=("ripple_pp_v",)),
]
IDS = [c.name for c in CASES]

#: (simkit metric, solver attribute, tolerance class)
STEADY_FIGURES: list[tuple[str, str, str]] = [
    ("vout_dc_v", "vdc", "vdc"),
    ("diode_piv_v", "piv", "piv"),
    ("ripple_pp_v", "ripple_pp", "ripple"),
    ("ripple_rms_v", "ripple_rms", "ripple"),
    ("diode_peak_a", "diode_peak", "current"),
    ("diode_avg_a", "diode_avg", "current"),
    ("diode_rms_a", "diode_rms", "current"),
    ("source_rms_a", "source_rms", "current"),
    ("reservoir_ripple_a", "cap_ripple_rms", "capacitor"),
]
CHOKE_FIGURES: list[tuple[str, str, str]] = [
    ("dc_a", "choke_avg", "current"),
    ("rms_a", "choke_rms", "current"),
    ("peak_a", "choke_peak", "current"),
]


@cache
def reference(case: Case) -> SteadyState:
    return steady_state(case.circuit())


def start_span(case: Case) -> float:
    """Length of simkit's start-up run (simkit/analysis/steady.py switch_on_span), s: five
    periods, or three quarters of the choke's LC period when that is longer."""
    span = 5 / case.f
    if case.choke is not None:
        span = max(span, 0.75 * 2 * math.pi * math.sqrt(case.choke[0] * case.c))
    return span


@cache
def reference_switch_on(case: Case) -> SwitchOn:
    # Switch-on at the crest (simkit's default switch_on_phase = 90) with empty capacitors.  With
    # capacitor input the first pulse is the highest (the whole EMF across the winding and the diodes),
    # so one period holds the surge and its I2t window; a choke rings up over its LC period.
    cycles = math.ceil(start_span(case) * case.f - 1e-9) if case.choke is not None else 1
    return switch_on(case.circuit(), 90.0, cycles=cycles)


def surge_i2t(s: SwitchOn, period: float) -> float:
    """Highest I^2 t of any diode over the half period centred on its highest switch-on current
    (the window simkit's surge_i2t_a2s figure uses, that of the datasheets' 8.3 ms half-sine), A^2 s."""
    best = 0.0
    t = s.time
    for i in s.diode_current:
        tk = float(t[int(np.argmax(i))])
        a = max(0.0, tk - period / 4)
        b = min(float(t[-1]), a + period / 2)
        sel = (t >= a) & (t <= b)
        best = max(best, float(np.trapezoid(np.maximum(i[sel], 0.0) ** 2, t[sel])))
    return best


@cache
def simkit_result(case: Case) -> RunResult:
    return simulate(design_from_dict(case.design()))


def comparison(case: Case, result: RunResult) -> list[tuple[str, float, float, float, float]]:
    """Every compared figure: (name, simkit, solver, relative difference, tolerance)."""
    ref = reference(case)
    m = result.metrics
    rows = [(k, m[k], getattr(ref, a), TOLERANCE[cls]) for k, a, cls in STEADY_FIGURES]
    if case.choke is not None:
        choke = result.parts["L1"]
        rows += [(f"L1 {k}", getattr(choke, k), getattr(ref, a), TOLERANCE[cls]) for k, a, cls in CHOKE_FIGURES]
    on = reference_switch_on(case)
    rows.append(("surge_peak_a", m["surge_peak_a"], on.surge, TOLERANCE["surge"]))
    i2t = max(result.part(d.name, DiodeResult).surge_i2t_a2s for d in result.circuit.diodes)
    rows.append(("surge I2t", i2t, surge_i2t(on, 1 / case.f), TOLERANCE["i2t"]))
    return [(k, s, r, s / r - 1.0, tol) for k, s, r, tol in rows]


def outside(rows: list[tuple[str, float, float, float, float]]) -> list[str]:
    return [f"{k}: simkit {s:.6g}, solver {r:.6g}, {100 * d:+.4f} % (tolerance {100 * tol:g} %)"
            for k, s, r, d, tol in rows if not abs(d) <= tol]


def show(case: Case, rows: list[tuple[str, float, float, float, float]]) -> None:
    """Print the agreement (shown with pytest -rP)."""
    print(f"{case.name}:")
    for k, s, r, d, tol in rows:
        print(f"  {k:20s} simkit {s:12.6g}  solver {r:12.6g}  {100 * d:+.4f} %  (tolerance {100 * tol:g} %)")


@pytest.mark.parametrize("case", CASES, ids=IDS)
def test_steady_state_and_switch_on_agree_with_the_refsolver(case: Case) -> None:
    rows = comparison(case, simkit_result(case))
    show(case, rows)
    bad = outside([row for row in rows if row[0] not in case.engine_issue])
    assert not bad, f"{case.name}: " + "; ".join(bad)


# --- ENGINE ISSUES: one assertion each, at the tolerance the issue demands, until the engine meets it -------


def test_engine_issue_slow_crc_output_ripple_pp_agrees_with_the_refsolver() -> None:
    # FAILS with the engine of main at fe93872: +1.30 % (ripple RMS agrees within 0.06 %, every other figure within
    # 0.03 %).  The output of this idle CRC supply settles with 47 k x 100 uF = 4.7 s; at the default
    # settle_tolerance (1e-4) the steady state is declared while it still drifts, and the drift over the
    # two measured periods adds to the peak-to-peak ripple of 51 mV.  With settle_tolerance = 1e-6 the same
    # design agrees within 0.011 %.
    case = next(c for c in CASES if c.name == SLOW_CRC)
    simkit_ripple = simkit_result(case).metrics["ripple_pp_v"]
    assert simkit_ripple == pytest.approx(reference(case).ripple_pp, rel=TOLERANCE["ripple"])


# --- the comparisons can fail: perturbed decks -------------------------------------------------------------

_NUMBER = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(meg|[tgkmunpf])?$", re.IGNORECASE)
_SCALE = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}


def spice_number(text: str) -> float:
    """A SPICE number with an optional scale suffix (SPICE's own reading: m milli, meg mega)."""
    m = _NUMBER.match(text)
    assert m, text
    return float(m.group(1)) * _SCALE.get((m.group(2) or "").lower(), 1.0)


def perturb(deck: str, cap_factor: float = 1.0, amplitude_factor: float = 1.0) -> str:
    """Every capacitor value times cap_factor and every SIN amplitude times amplitude_factor."""
    out = []
    for line in deck.splitlines():
        if line[:1] in "Cc":
            tok = line.split()
            tok[3] = f"{spice_number(tok[3]) * cap_factor:.12g}"
            line = " ".join(tok)
        line = re.sub(r"SIN\(\s*(\S+)\s+(\S+)",
                      lambda g: f"SIN({g.group(1)} {spice_number(g.group(2)) * amplitude_factor:.12g}", line)
        out.append(line)
    return "\n".join(out) + "\n"


def test_perturb_rewrites_capacitors_and_sources() -> None:
    deck = "V1 w1p ac2 SIN(0 353.5534 50 0 0 90)    $ EMF\nC1 c1p 0 220u IC=337.5    $ reservoir\n" \
           "CSW1 ac1 sw1m 10n IC=0\nRSW1 sw1m ac2 1.414k\nRTAC1 ac1 0 10Meg\n"
    assert perturb(deck, cap_factor=0.5) == "V1 w1p ac2 SIN(0 353.5534 50 0 0 90)    $ EMF\n" \
        "C1 c1p 0 0.00011 IC=337.5 $ reservoir\nCSW1 ac1 sw1m 5e-09 IC=0\nRSW1 sw1m ac2 1.414k\nRTAC1 ac1 0 10Meg\n"
    assert "SIN(0 707.1068 50" in perturb(deck, amplitude_factor=2.0)
    assert spice_number("10Meg") == 10e6 and spice_number("1.5m") == 1.5e-3


PERTURBATIONS = {
    "capacitors 1.5 % low": {"cap_factor": 0.985},
    "source 0.4 % high": {"amplitude_factor": 1.004},
}


@pytest.mark.parametrize("what", list(PERTURBATIONS))
@pytest.mark.parametrize("case", CASES, ids=IDS)
def test_perturbed_decks_fail_the_refsolver_comparison(case: Case, what: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # Control for the comparison above: a simkit that simulates a slightly wrong circuit must fail it.
    original = Engine.run

    def wrong(self: Engine, deck: str, tstop: float, save: Any = None) -> Any:
        return original(self, perturb(deck, **PERTURBATIONS[what]), tstop, save)

    monkeypatch.setattr(Engine, "run", wrong)
    rows = comparison(case, simulate(design_from_dict(case.design())))
    show(case, rows)
    assert outside(rows), f"{case.name} with {what}: every figure still within tolerance"
