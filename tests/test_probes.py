"""Waveforms at any node or part (``run --probe``, ``Result.waveform``) and the node map (``netlist --nodes``).

Checked against outside references: the independent reference solver (tests/refsolver.py, scipy
only) for the output and diode-current waveforms; Kirchhoff's current law and the periodic
steady state's charge and volt-second balance for the directions of every part's current and
voltage; an independent trapezoid integral (scipy) for the mean over the window.
"""

from __future__ import annotations

import csv
import io
import re
from functools import cache
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import trapezoid

from simkit.design.loader import design_from_dict, load_design
from simkit.netlist.build import build_circuit
from simkit.pipeline import RunResult, simulate
from simkit.pipeline.probes import ProbeError, deck_nodes, find_probe, node_map, node_map_text, probe_list
from tests.conftest import EXAMPLES
from tests.refsolver import steady_state, switch_on
from tests.test_cli import call
from tests.test_vs_refsolver import Case

AMP = EXAMPLES / "bench_amp_bridge_clc.toml"  # bridge into C-L-C, 4 k load, 100 k bleeder (invented example)

#: Waveforms against the reference solver, pointwise: a modest factor above the largest disagreement
#: measured over these cases (`pytest tests/test_probes.py -k refsolver`; docs/testing.md): output
#: 0.21 % of its ripple, diode current 0.08 % of its peak in steady state; after switch-on 1.7e-4 of
#: the highest output and 1.3e-4 of the surge (the switch-on run at the measuring step after the
#: surge period: samples further apart, so more between them to interpolate).
OUT_TOL = 5e-3
DIODE_TOL = 2.5e-3
START_TOL = 5e-4

CASES = [Case("bridge into C", "bridge", 300.0, 50.0, 20.0, 100e-6, 3000.0),
         Case("half-wave into C, 60 Hz", "half-wave", 250.0, 60.0, 10.0, 220e-6, 5000.0)]


@cache
def amp() -> RunResult:
    return simulate(load_design(AMP))


@pytest.mark.ngspice
@pytest.mark.parametrize("case", CASES, ids=lambda c: c.name)
def test_waveforms_agree_with_the_refsolver(case: Case) -> None:
    result = simulate(design_from_dict(case.design()))
    period = 1 / case.f
    ref = steady_state(case.circuit())
    # Both start the window at the source's rising zero crossing (simkit runs whole periods from phase 0).
    out = result.waveform("out")
    assert out.time[0] == 0.0 and out.time[-1] == pytest.approx(period, rel=1e-12)
    expected = np.interp(out.time, ref.time, ref.vout, period=period)
    assert np.max(np.abs(out.value - expected)) < OUT_TOL * ref.ripple_pp
    for k, d in enumerate(result.circuit.diodes):  # the solver numbers the diodes as the deck does
        i = result.waveform(d.name)
        expected = np.interp(i.time, ref.time, ref.diode_current[k], period=period)
        assert np.max(np.abs(i.value - expected)) < DIODE_TOL * ref.diode_peak, d.name
    # Switch-on at the crest (the default switch_on_phase, 90 degrees), every capacitor empty.
    start = switch_on(case.circuit(), 90.0, cycles=1)
    on = result.waveform("out", "switch-on")
    sel = on.time <= start.time[-1]
    assert 0.0 <= on.time[0] < 1e-6 * period  # time after switch-on: the first sample is a first tiny step
    assert np.max(np.abs(on.value[sel] - np.interp(on.time[sel], start.time, start.vout))) < \
        START_TOL * float(np.max(start.vout))
    for k, d in enumerate(result.circuit.diodes):
        i = result.waveform(d.name, "switch-on")
        assert np.max(np.abs(i.value[sel] - np.interp(i.time[sel], start.time, start.diode_current[k]))) < \
            START_TOL * start.surge, d.name


@pytest.mark.ngspice
def test_the_output_mean_over_the_window_is_vout_dc_v() -> None:
    r = amp()
    t, v = r.waveform("out")
    # The window is one whole period, ends interpolated exactly; scipy's trapezoid rule, not simkit's.
    assert t[-1] - t[0] == pytest.approx(r.circuit.period, rel=1e-12)
    assert trapezoid(v, t) / (t[-1] - t[0]) == pytest.approx(r.metrics["vout_dc_v"], rel=1e-12)
    i = r.waveform("RLOAD")
    assert trapezoid(i.value, i.time) / r.circuit.period == pytest.approx(r.metrics["iout_dc_a"], rel=1e-12)


@pytest.mark.ngspice
def test_part_currents_obey_kirchhoff_and_the_balances() -> None:
    """The direction each part's probe states, checked by circuit laws on the example (bridge, C1, L1 with
    DCR, C2, load and bleeder at out)."""
    r = amp()
    w = {p.name: r.waveform(p.name) for p in probe_list(r.circuit)}
    scale = float(np.max(w["D1"].value))
    # Kirchhoff's current law at node rect, at every sample: D1 and D2 deliver, C1 and L1 take.
    kcl = w["D1"].value + w["D2"].value - w["C1"].value - w["L1"].value
    assert np.max(np.abs(kcl)) < 1e-9 * scale
    # At node out: the choke feeds C2, the load and the bleeder.
    kcl = w["L1"].value - w["C2"].value - w["RLOAD"].value - w["RBLEED"].value
    assert np.max(np.abs(kcl)) < 1e-9 * scale
    # At the winding's + terminal (ac1): the winding's current leaves through D1 and returns through D3,
    # less the 10 M tie (under 50 uA here).
    assert np.max(np.abs(w["V1"].value - (w["D1"].value - w["D3"].value))) < 5e-5
    # Periodic steady state: a capacitor's mean current is zero (charge balance, rect-8), an inductor's
    # mean voltage is zero, so the choke's terminals drop only I_dc times its DCR (120 ohm).
    for c in ("C1", "C2"):
        assert abs(w[c].mean()) < 1e-4 * r.metrics["iout_dc_a"], c
    assert w["v(L1)"].mean() == pytest.approx(w["L1"].mean() * 120.0, rel=1e-3)
    # A diode's voltage is anode to cathode: negative while it blocks, its most negative the PIV figure.
    assert -float(np.min(w["v(D1)"].value)) == pytest.approx(r.parts["D1"].piv_v, rel=1e-12)
    assert float(np.max(w["D1"].value)) == pytest.approx(r.parts["D1"].peak_a, rel=1e-12)
    # Ohm's law on the bleeder: its current is its voltage over 100 k.
    assert np.allclose(w["RBLEED"].value, w["v(RBLEED)"].value / r.design.bleeder.r, rtol=1e-12, atol=0)


@pytest.mark.ngspice
def test_names_are_found_in_any_spelling_and_unknown_ones_list_the_valid() -> None:
    r = amp()
    assert r.waveform("i(D1)").name == "D1" and r.waveform("d1").name == "D1"
    assert r.waveform("v(out)").name == "out" and r.waveform("V(C1)").name == "v(C1)"
    assert r.waveform("out").column == "v(out)" and r.waveform("D1").column == "i(D1)"
    with pytest.raises(ProbeError) as info:
        r.waveform("D9")
    text = str(info.value)
    assert "D9" in text and "out" in text and "D1" in text and "v(NAME)" in text
    with pytest.raises(ProbeError):
        r.waveform("i(out)")  # a node has no current
    with pytest.raises(Exception, match="steady, switch-on"):
        r.waveform("out", run="later")


def test_every_deck_node_and_part_is_in_the_node_map() -> None:
    for example in sorted(EXAMPLES.glob("*.toml")):
        circuit = build_circuit(load_design(example))
        info = node_map(circuit)
        names = [n.name for n in info]
        assert names == deck_nodes(circuit) and "0" not in names and "out" in names
        used = {n for e in circuit.elements for n in e.nodes} - {"0"}
        assert set(names) == used, example.name
        for n in info:
            assert n.meaning and n.elements, (example.name, n.name)
        text = node_map_text(circuit)
        for d in circuit.diodes:
            assert f"\n  {d.name} " in text and f"v({d.name}):" in text
        # Every listed name is one a probe takes.
        for p in probe_list(circuit):
            found = find_probe(circuit, p.name)
            assert (found.name, found.quantity, found.meaning) == (p.name, p.quantity, p.meaning)


@pytest.mark.ngspice
def test_run_probe_writes_csv_with_the_documented_header(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out_dir = tmp_path / "res"
    code, _, err = call(["run", str(AMP), "--out", str(out_dir), "--probe", "out", "--probe", "D1",
                         "--probe", "v(C1)"], capsys)
    assert code == 0, err
    r = amp()
    for name, stem, header in (("out", "probe-out", "v(out) (V)"), ("D1", "probe-D1", "i(D1) (A)"),
                               ("v(C1)", "probe-v-C1", "v(C1) (V)")):
        text = (out_dir / f"{stem}.csv").read_text()
        assert text.splitlines()[0] == f"run,time (s),{header}"
        rows = list(csv.reader(io.StringIO(text)))[1:]
        runs = [row[0] for row in rows]
        assert runs[0] == "steady" and runs[-1] == "switch-on" and set(runs) == {"steady", "switch-on"}
        steady = np.array([[float(a), float(b)] for run, a, b in rows if run == "steady"])
        w = r.waveform(name)
        assert np.array_equal(steady[:, 0], w.time) and np.array_equal(steady[:, 1], w.value)  # every digit
        png = (out_dir / f"{stem}.png").read_bytes()
        assert png.startswith(b"\x89PNG\r\n\x1a\n")
    assert "probe-v-C1.csv" in err


def test_an_unknown_probe_is_bad_input_before_anything_runs(tmp_path: Path,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    out_dir = tmp_path / "res"
    code, out, err = call(["run", str(AMP), "--out", str(out_dir), "--probe", "out", "--probe", "nowhere"], capsys)
    assert code == 2 and out == ""
    line = err.strip()
    assert "\n" not in line and str(AMP) in line and "--probe nowhere" in line
    assert re.search(r"nodes \(voltage to the return\): .*\bout\b", line) and "D1" in line
    assert not out_dir.exists()  # refused before the output folder was made
    code, _, err = call(["run", str(AMP), "--probe", "out"], capsys)
    assert code == 2 and "--out" in err


def test_netlist_nodes_prints_the_map(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = call(["netlist", str(AMP), "--nodes"], capsys)
    assert code == 0
    assert re.search(r"^  out\s+the output", out, re.M) and re.search(r"^  rect\s+the rectifier's output", out, re.M)
    assert "connects: D1 cathode, D2 cathode, VC1 +, L1" in out
    assert re.search(r"^  RLOAD\s+current: load current into the load at node out$", out, re.M)
    assert "VDk: the 0 V current sense of diode Dk" in out  # the helpers are named, not listed as parts
