"""Netlists: generated structure, deterministic text, golden decks current, and ngspice -b agreement."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from simkit import goldens
from simkit.design.loader import design_from_dict
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Transient, render
from simkit.pipeline import simulate

ROOT = Path(__file__).resolve().parent.parent


def _design(topology: str, **extra: object):  # type: ignore[no-untyped-def]
    d: dict = {"source": {"vrms": "120", "frequency": "60", "resistance": "5"},
               "rectifier": {"topology": topology}, "load": {"kind": "resistor", "r": "10k"}}
    if topology in ("doubler", "cascade"):
        d["rectifier"]["capacitance"] = "100u"
    else:
        d["filter"] = [{"c": "100u"}]
    if topology == "cascade":
        d["rectifier"]["stages"] = 3
    d.update(extra)
    return design_from_dict(d)


@pytest.mark.parametrize(
    "topology,diodes,caps",
    [("half-wave", 1, 1), ("centre-tap", 2, 1), ("bridge", 4, 1), ("doubler", 2, 2), ("cascade", 6, 6)],
)
def test_each_topology_has_its_parts(topology: str, diodes: int, caps: int) -> None:
    c = build_circuit(_design(topology))
    assert len(c.diodes) == diodes
    assert len([x for x in c.capacitors if x.role != "snubber"]) == caps
    assert len(c.windings) == (2 if topology == "centre-tap" else 1)


@pytest.mark.parametrize("topology", ["bridge", "doubler"])
def test_floating_winding_is_tied_to_ground(topology: str) -> None:
    # A winding connected only through diodes has no DC path to ground while they block, and the circuit
    # matrix is then singular; build.py ties both ends to ground through 10 Meg (docs/reference.md, The deck).
    deck = render(build_circuit(_design(topology)), Transient(tstop=0.1, tmax=1e-5))
    ties = [line for line in deck.splitlines() if line.startswith("RT")]
    assert len(ties) == 2
    assert all(" 10Meg" in line for line in ties)


def test_snubber_where_inductance_feeds_diodes() -> None:
    # Inductance feeding diodes rings with the circuit's small capacitances when they turn off; build.py
    # damps it with an RC snubber across the winding (leakage) or the rectifier output (choke input).
    leak = design_from_dict({"source": {"vrms": 120, "frequency": 60, "resistance": 5, "inductance": "5m"},
                             "rectifier": {"topology": "bridge"}, "filter": [{"c": "100u"}]})
    assert any(c.role == "snubber" for c in build_circuit(leak).capacitors)
    choke = design_from_dict({"source": {"vrms": 120, "frequency": 60, "resistance": 5},
                              "rectifier": {"topology": "centre-tap"}, "filter": [{"l": 10}, {"c": "47u"}],
                              "load": {"kind": "resistor", "r": "3k"}})
    assert any(c.role == "snubber" for c in build_circuit(choke).capacitors)
    plain = _design("bridge")
    assert not any(c.role == "snubber" for c in build_circuit(plain).capacitors)


def test_diode_model_defaults_do_not_ring() -> None:
    # Stored charge and junction capacitance ring with leakage inductance and slow ngspice down without
    # changing any figure of this tool, so the library diodes have TT = 0 and CJO = 0 unless the design
    # says otherwise (docs/reference.md).
    deck = render(build_circuit(_design("bridge")), Transient(tstop=0.1, tmax=1e-5))
    model = next(line for line in deck.splitlines() if line.startswith(".model"))
    assert "tt=0" in model and "cjo=0" in model


_RENDER = """
import sys
from simkit.design.loader import design_from_dict
from simkit.netlist.build import build_circuit
from simkit.netlist.circuit import Transient, render
d = design_from_dict({"source": {"vrms": "120", "frequency": "60", "resistance": "5"},
                      "rectifier": {"topology": "bridge"}, "filter": [{"c": "100u"}],
                      "load": {"kind": "resistor", "r": "10k"}, "bleeder": {"r": "2.2M"}})
sys.stdout.write(render(build_circuit(d), Transient(tstop=0.1, tmax=1e-5)))
"""


def test_deck_is_deterministic_and_spells_mega_meg() -> None:
    # The same design gives the same deck in separate interpreters with different string hashing
    # (set and dict order), so decks can be compared and kept as goldens.
    decks = []
    for seed in ("1", "2"):
        env = {**os.environ, "PYTHONHASHSEED": seed, "PYTHONPATH": str(ROOT)}
        out = subprocess.run([sys.executable, "-c", _RENDER], capture_output=True, text=True, env=env, timeout=60)
        assert out.returncode == 0, out.stderr
        decks.append(out.stdout)
    assert decks[0] == decks[1]
    a = decks[0]
    assert "RBLEED out 0 2.2Meg" in a
    # SPICE reads M as milli: no value may end in a bare M.
    for line in a.splitlines():
        if not line.startswith(("*", ".")):
            assert not any(tok.endswith("M") for tok in line.split("$")[0].split()), line


def test_explicit_max_step() -> None:
    d = _design("bridge")
    deck = render(build_circuit(d), Transient(tstop=0.1, tmax=1 / 60 / 1000))
    tran = next(line for line in deck.splitlines() if line.startswith(".tran"))
    assert tran.split()[4] == "16.66667u"  # the fourth field is TMAX: period / 1000


@pytest.mark.ngspice
def test_golden_decks_are_current() -> None:
    problems = goldens.check(ROOT / "netlists")
    assert not problems, "stale golden decks (run `make netlists`):\n" + "\n".join(problems)


@pytest.mark.ngspice
@pytest.mark.parametrize("topology", ["half-wave", "centre-tap", "bridge", "doubler", "cascade"])
def test_exported_deck_reproduces_run_in_ngspice_command_line(topology: str, tmp_path: Path) -> None:
    # docs/reference.md (The deck): `ngspice -b` on the netlist prints the figures `run` reports.  Measured
    # within 0.0022 % (cascade; ngspice prints 7 digits).
    result = simulate(_design(topology))
    deck = tmp_path / "deck.cir"
    deck.write_text(result.deck)
    out = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120)
    values = {}
    for line in out.stdout.splitlines():
        parts = line.split("=")
        if len(parts) >= 2 and parts[0].strip() in ("vout_dc_v", "ripple_pp_v", "iout_dc_a"):
            values[parts[0].strip()] = float(parts[1].split()[0])
    assert set(values) == {"vout_dc_v", "ripple_pp_v", "iout_dc_a"}, out.stdout[-2000:]
    for key, value in values.items():
        assert value == pytest.approx(result.metrics[key], rel=1e-4), key


def test_user_reference_is_current() -> None:
    # docs/reference.md carries the key and figure tables generated from the code; regenerate with
    # `python -m simkit.docgen` when this fails.
    from simkit import docgen

    text = (ROOT / "docs" / "reference.md").read_text("utf-8")
    assert docgen.render(text) == text
