"""Hum and hash: the ripple's harmonics, the diodes' turn-off ringing, snubbers, and the high-frequency analysis.

Every expected number names its source: docs/sources.md hash-1 (Fourier series of rectified
sines, dBV and dBuV), hash-2 (the series R-L-C ring), hash-3 (the snubber rule, common
practice), diode-7 (the makers' t_rr and C_J, and TT from the charge-control model), filt-3
(the L-C section), and ngspice's own Fourier analysis as an independent check of the numpy
routine.
"""

from __future__ import annotations

import json
import math
import re
import subprocess
from pathlib import Path

import numpy as np
import pytest

from simkit.analysis import spectrum
from simkit.analysis.ringing import measure_ring, turn_offs
from simkit.design.loader import load_design
from simkit.design.model import Design
from simkit.errors import DesignError
from simkit.netlist.build import build_circuit
from simkit.parts import diodes
from simkit.pipeline import DiodeResult, simulate
from simkit.pipeline.noise import e12, suggest_snubber, wants_hash
from tests.conftest import EXAMPLES, write_design
from tests.test_plots import check_house_style, drawn

HALF_WAVE_RINGING = """\
title = "Test: half-wave with leakage inductance and a snubber across the diode"
[source]
kind = "sine"
vrms = "300"
frequency = "50"
resistance = "20"
inductance = "10m"
[rectifier]
topology = "half-wave"
diode = "1N4007"
snubber = {{ c = "{c}", r = "{r}" }}
[[filter]]
c = "47u"
[load]
kind = "resistor"
r = "5k"
"""

CHOKE_INPUT = """\
title = "Test: centre-tap into a choke-input L-C section"
[source]
kind = "sine"
vrms = "300"
frequency = "50"
resistance = "1"
[rectifier]
topology = "centre-tap"
diode = "1N4007"
[[filter]]
l = "10"
dcr = "10"
[[filter]]
c = "50u"
[load]
kind = "resistor"
r = "5k"
"""

HALF_WAVE_RESISTIVE = """\
title = "Test: half-wave into a resistor, no filter"
[source]
kind = "sine"
vrms = "300"
frequency = "50"
resistance = "1"
[rectifier]
topology = "half-wave"
diode = "1N4007"
[load]
kind = "resistor"
r = "10k"
"""


# -- decibels and the spectrum routine (no simulator) -------------------------------------------


def test_dbv_dbuv_and_dbua_conversions() -> None:
    # hash-1: dBV = 20 log10(V / 1 V), dBuV = 20 log10(V / 1 uV) = dBV + 120, dBuA = 20 log10(I / 1 uA).
    assert spectrum.dbv(1.0) == pytest.approx(0.0, abs=1e-12)
    assert spectrum.dbv(0.1) == pytest.approx(-20.0)
    assert spectrum.dbv(2.0) == pytest.approx(6.0206, abs=1e-4)
    assert spectrum.dbuv(1e-6) == pytest.approx(0.0, abs=1e-9)
    assert spectrum.dbuv(1.0) == pytest.approx(120.0)
    assert spectrum.dbuv(3.16e-3) == pytest.approx(spectrum.dbv(3.16e-3) + 120.0)
    assert spectrum.dbua(1e-3) == pytest.approx(60.0)
    assert spectrum.Harmonic(100.0, 0.5).to_json() == {"frequency_hz": 100.0, "rms_v": 0.5, "dbv": spectrum.dbv(0.5)}


def _uneven(periods: int, f: float, n: int = 4000, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0.0, periods / f, n))
    return np.concatenate([[0.0], t, [periods / f]])


def test_harmonics_of_known_components_on_uneven_time_points() -> None:
    # Derived here: a DC level plus components of known RMS at 2f and 6f.
    f = 50.0
    t = _uneven(1, f, 20000)
    y = 3.0 + 2.0 * math.sqrt(2) * np.sin(2 * np.pi * 2 * f * t) + 0.5 * math.sqrt(2) * np.cos(
        2 * np.pi * 6 * f * t + 0.3)
    hs = spectrum.harmonics(t, y, 0.0, 1 / f, f)
    assert [h.frequency_hz for h in hs] == [f * k for k in range(1, 11)]
    assert hs[1].rms == pytest.approx(2.0, rel=2e-3)
    assert hs[5].rms == pytest.approx(0.5, rel=5e-3)
    assert max(h.rms for k, h in enumerate(hs) if k not in (1, 5)) < 5e-3


@pytest.mark.parametrize("periods", [1, 3])
def test_fourier_series_of_rectified_sines(periods: int) -> None:
    # hash-1: |sin| has 4/(3 pi) at 2f and 4/(15 pi) at 4f (peak); a half-wave sine 1/2 at f and 2/(3 pi) at 2f.
    f, vpk = 60.0, 100.0
    t = np.linspace(0.0, periods / f, 200001)
    full = spectrum.harmonics(t, vpk * np.abs(np.sin(2 * np.pi * f * t)), 0.0, periods / f, f)
    assert full[1].rms == pytest.approx(4 * vpk / (3 * math.pi) / math.sqrt(2), rel=1e-4)
    assert full[3].rms == pytest.approx(4 * vpk / (15 * math.pi) / math.sqrt(2), rel=1e-4)
    assert full[0].rms < 1e-6 * vpk and full[2].rms < 1e-6 * vpk
    half = spectrum.harmonics(t, vpk * np.maximum(np.sin(2 * np.pi * f * t), 0.0), 0.0, periods / f, f)
    assert half[0].rms == pytest.approx(vpk / 2 / math.sqrt(2), rel=1e-4)
    assert half[1].rms == pytest.approx(2 * vpk / (3 * math.pi) / math.sqrt(2), rel=1e-4)


def test_a_drift_is_taken_out_before_the_harmonics() -> None:
    # Derived here: a straight-line droop over the window would add a sawtooth (every harmonic at 1/k).
    f = 100.0
    t = np.linspace(0.0, 1 / f, 20001)
    ripple = 0.7 * math.sqrt(2) * np.sin(2 * np.pi * f * t)
    drooping = ripple - 5.0 * t * f
    raw = spectrum.harmonics(t, drooping, 0.0, 1 / f, f)
    fixed = spectrum.harmonics(t, drooping, 0.0, 1 / f, f, remove_drift=True)
    assert raw[2].rms > 0.2  # the sawtooth's third harmonic: 5 / (3 pi sqrt 2)
    assert fixed[0].rms == pytest.approx(0.7, rel=1e-3)
    assert max(h.rms for h in fixed[1:]) < 1e-3


def test_band_rms_counts_only_what_lies_above_the_band() -> None:
    # Parseval, derived here: a 50 Hz ripple and 10 mV RMS at 20 kHz; above 10 kHz only the latter.
    t = _uneven(1, 50.0, 200000)
    y = 1.0 * np.sin(2 * np.pi * 50 * t) + 0.3 * np.sin(2 * np.pi * 150 * t) + 0.01 * math.sqrt(2) * np.sin(
        2 * np.pi * 20e3 * t)
    assert spectrum.band_rms(t, y, 0.0, 0.02, 10e3, 1 << 16) == pytest.approx(0.01, rel=0.02)
    assert spectrum.band_rms(t, y - 0.01 * math.sqrt(2) * np.sin(2 * np.pi * 20e3 * t), 0.0, 0.02, 10e3,
                             1 << 16) < 1e-4


def test_a_synthetic_ring_is_measured() -> None:
    # hash-2: a ring exp(-t/tau) sin(2 pi f t) on a rising reverse voltage, after the current stops.
    f, tau, amp = 50e3, 0.4e-3, 20.0
    t = np.linspace(0.0, 4e-3, 400001)
    t_off = 1e-3
    current = np.where(t < t_off, 0.5 * (t_off - t) / t_off, 0.0) - np.where(t >= t_off, 1e-6, 0.0)
    after = np.clip(t - t_off, 0.0, None)
    vrev = np.where(t < t_off, -0.7, 5e4 * after + amp * np.exp(-after / tau) * np.sin(2 * np.pi * f * after))
    (off,) = turn_offs(t, current, 0.0, 4e-3)
    assert off == pytest.approx(t_off, abs=1e-8)
    ring = measure_ring(t, vrev, off, 0.8 * f, min_amplitude=0.1)
    assert ring.frequency_hz == pytest.approx(f, rel=0.01)
    assert ring.decay_s == pytest.approx(tau, rel=0.03)
    # The first quarter cycle lies before the moving average's first whole period: the largest swing measured
    # is the next one, 1.5 periods in (derived here: amp x exp(-1.5 / (f tau)) = 0.93 amp).
    assert ring.amplitude_v == pytest.approx(amp * math.exp(-1.5 / (f * tau)), rel=0.03)
    quiet = measure_ring(t, np.where(t < t_off, -0.7, 5e4 * after), off, f, min_amplitude=0.1)
    assert not quiet.rings


# -- the part library's dynamics (diode-7) ------------------------------------------------------


def test_transit_time_and_zero_bias_capacitance_from_the_makers_figures() -> None:
    # diode-7: TT = t_rr / ln(1 + I_F/I_R) with the makers' 0.5 A / 1 A test; CJO = C_J(4 V) (1 + 4/VJ)^M.
    assert diodes.tt_from_trr(75e-9) == pytest.approx(75e-9 / math.log(1.5))
    assert diodes.cjo_from_cj(10e-12) == pytest.approx(10e-12 * math.sqrt(5.0))
    uf = diodes.lookup("UF4007")
    assert uf is not None and uf.dynamics is not None
    assert uf.dynamics.trr == 75e-9 and uf.dynamics.cj == 10e-12  # diode-7 table
    assert diodes.junction_capacitance(uf.model(), 4.0) == pytest.approx(10e-12)
    n4007 = diodes.lookup("1N4007")
    assert n4007 is not None and n4007.dynamics is not None
    assert (n4007.dynamics.trr, n4007.dynamics.cj) == (1.5e-6, 15e-12)  # Diotec; Vishay 88503
    # Every built-in silicon part has dynamics with a source; the everyday model stays TT = 0, CJO = 0.
    for p in diodes.DIODES.values():
        assert p.dynamics is not None and p.dynamics.source
        assert "tt=0 cjo=0" in build_circuit(_design_with(p.name)).models[-1]


def _design_with(diode: str, extra: str = "") -> Design:
    from simkit.design.files import parse_toml_text
    from simkit.design.reader import design_from_dict

    text = HALF_WAVE_RESISTIVE.replace('diode = "1N4007"', f'diode = "{diode}"\n{extra}')
    return design_from_dict(parse_toml_text(text, "<test>"), "<test>")


@pytest.mark.ngspice
@pytest.mark.parametrize("name", ["1N4007", "UF4007", "1N5408", "1N4937"])
def test_the_transit_time_gives_the_makers_recovery_time(engine, name: str) -> None:  # type: ignore[no-untyped-def]
    # diode-7: the makers' t_rr test (forward 0.5 A, then a reverse drive of 1 A, until the reverse current has
    # fallen back to 0.25 A) on the high-frequency model reproduces the sheet's t_rr within 10 %.
    from dataclasses import replace

    from simkit.netlist.build import diode_model_line

    part = diodes.lookup(name)
    assert part is not None and part.dynamics is not None
    trr = part.dynamics.trr
    tt, cjo = diodes.dynamics(part.model())  # the high-frequency model's stored charge and capacitance
    model = diode_model_line(replace(part.model(), tt=tt, cjo=cjo))
    deck = "\n".join([
        f"* trr test of {name}",
        f"V1 in 0 PULSE(25.8 -50 {4 * trr:.4g} 10n 10n {20 * trr:.4g} {40 * trr:.4g})",
        "R1 in a 50", "VS a b 0", "D1 b 0 DRECT", model,
        f".tran {trr / 500:.4g} {8 * trr:.4g} 0 {trr / 500:.4g}", ".end", ""])
    w = engine.run(deck, 8 * trr)
    i = w.i("vs")
    t = w.time
    k0 = int(np.argmax((t > 4 * trr) & (i <= 0)))  # the current through zero
    k1 = k0 + int(np.argmin(i[k0:]))  # the reverse current at its height (about 1 A) ...
    after = np.flatnonzero((np.arange(len(t)) > k1) & (i >= -0.25))  # ... until back to a quarter of it
    t_end = t[after[0]]
    assert t_end - t[k0] == pytest.approx(trr, rel=0.10)


# -- keys, deck, choice of analysis -------------------------------------------------------------


def test_snubber_keys_are_read_and_refused_where_they_cannot_be(tmp_path: Path) -> None:
    d = load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"))), ())
    assert d.rectifier.snubber is not None and (d.rectifier.snubber.c, d.rectifier.snubber.r) == (1e-9, 10.0)
    bad = HALF_WAVE_RINGING.format(c="1n", r="10").replace(', r = "10"', "")
    with pytest.raises(DesignError, match=r"rectifier\.snubber\.r"):
        load_design(str(write_design(tmp_path, bad, "b1.toml")), ())
    tube = HALF_WAVE_RINGING.format(c="1n", r="10").replace('diode = "1N4007"', 'diode = "5Y3GT"')
    with pytest.raises(DesignError, match=r"rectifier\.snubber"):
        load_design(str(write_design(tmp_path, tube, "b2.toml")), ())
    table = HALF_WAVE_RINGING.format(c="1n", r="10").replace('snubber = { c = "1n", r = "10" }', 'snubber = "10n"')
    with pytest.raises(DesignError, match="expected a table"):
        load_design(str(write_design(tmp_path, table, "b3.toml")), ())


def test_the_deck_carries_the_designs_snubbers_in_place_of_simkits(tmp_path: Path) -> None:
    text = HALF_WAVE_RINGING.format(c="1n", r="10").replace('topology = "half-wave"', 'topology = "bridge"')
    d = load_design(str(write_design(tmp_path, text)), ())
    c = build_circuit(d)
    names = {e.name: e for e in c.elements}
    for k, dd in enumerate(c.diodes, 1):
        cap, res = names[f"CSD{k}"], names[f"RSD{k}"]
        assert cap.nodes[0] == dd.anode and res.nodes[1] == dd.cathode and cap.nodes[1] == res.nodes[0]
    assert "CSW1" not in names  # the design took charge of the damping
    plain = build_circuit(load_design(str(write_design(tmp_path, text.replace(
        'snubber = { c = "1n", r = "10" }', ""), "plain.toml")), ()))
    assert "CSW1" in {e.name for e in plain.elements}
    src = text.replace('inductance = "10m"', 'inductance = "10m"\nsnubber = { c = "4.7n", r = "1k" }')
    ws = build_circuit(load_design(str(write_design(tmp_path, src, "src.toml")), ()))
    cap = next(e for e in ws.elements if e.name == "CSS1")
    assert cap.nodes[0] == ws.windings[0].plus and "4.7n" in cap.value
    # The high-frequency deck alone has the diodes' dynamics.
    assert "tt=0 cjo=0" in c.models[-1]
    hf = build_circuit(d, dynamics=True).models[-1]
    assert re.search(r"tt=3\.69\d*u", hf) and re.search(r"cjo=33\.5\d*p", hf)


def test_when_the_high_frequency_analysis_runs(tmp_path: Path) -> None:
    plain = load_design(str(write_design(tmp_path, HALF_WAVE_RESISTIVE)), ())
    assert not wants_hash(plain) and wants_hash(plain, True)
    snubbed = load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"), "s.toml")), ())
    assert wants_hash(snubbed) and not wants_hash(snubbed, False)
    off = HALF_WAVE_RINGING.format(c="1n", r="10") + "[simulation]\nhash = false\n"
    assert not wants_hash(load_design(str(write_design(tmp_path, off, "off.toml")), ()))
    fast = HALF_WAVE_RINGING.format(c="1n", r="10").replace('snubber = { c = "1n", r = "10" }', "").replace(
        "1N4007", "UF4007")
    assert wants_hash(load_design(str(write_design(tmp_path, fast, "fast.toml")), ()))
    bare = fast.replace('inductance = "10m"', "")
    assert not wants_hash(load_design(str(write_design(tmp_path, bare, "bare.toml")), ()))


def test_the_suggested_snubber_follows_the_rule(tmp_path: Path) -> None:
    # hash-3 (common practice): C = 4 x C_J rounded up to E12, R = sqrt(L / C_J) to the nearest E12 value.
    assert e12(40e-12, up=True) == pytest.approx(47e-12)
    assert e12(31.6e3) == pytest.approx(33e3)
    assert e12(1.0) == pytest.approx(1.0)
    text = HALF_WAVE_RINGING.format(c="1n", r="10").replace('snubber = { c = "1n", r = "10" }', "").replace(
        "1N4007", "UF4007")
    d = load_design(str(write_design(tmp_path, text)), ())
    s = suggest_snubber(d, 800.0)
    assert s is not None
    assert s.capacitance_f == pytest.approx(10e-12)  # UF4007's C_J at 4 V (diode-7)
    assert (s.snubber.c, s.snubber.r) == (pytest.approx(47e-12), pytest.approx(33e3))
    assert s.frequency_hz == pytest.approx(1 / (2 * math.pi * math.sqrt(10e-3 * 10e-12)))
    assert suggest_snubber(load_design(str(write_design(tmp_path, text.replace('inductance = "10m"', ""),
                                                        "none.toml")), ()), 800.0) is None


# -- hum against the Fourier series (ngspice) ---------------------------------------------------


@pytest.mark.ngspice
def test_choke_input_hum_against_the_fourier_series_and_the_lc_section(tmp_path: Path) -> None:
    # hash-1: the rectifier's output is Vpk |sin|: 4 Vpk/(3 pi) at 2f and 4 Vpk/(15 pi) at 4f; filt-3: the L-C
    # section divides the 2f component by (2w)^2 L C - 1.  Within 5 % (measured: 0.1 % and below).
    d = load_design(str(write_design(tmp_path, CHOKE_INPUT)), ())
    r = simulate(d)
    vpk = d.source.vpeak
    rect, out = r.ripple_harmonics["rect"], r.ripple_harmonics["out"]
    assert rect[1].rms == pytest.approx(4 * vpk / (3 * math.pi) / math.sqrt(2), rel=0.05)
    assert rect[3].rms == pytest.approx(4 * vpk / (15 * math.pi) / math.sqrt(2), rel=0.05)
    w2 = 2 * 2 * math.pi * 50.0
    expected = 4 * vpk / (3 * math.pi) / math.sqrt(2) / (w2 * w2 * 10.0 * 50e-6 - 1)
    assert out[1].rms == pytest.approx(expected, rel=0.05)
    assert r.metrics["hum_frequency_hz"] == 100.0
    assert r.metrics["hum_dbv"] == pytest.approx(spectrum.dbv(out[1].rms))


@pytest.mark.ngspice
def test_half_wave_hum_is_at_the_source_frequency(tmp_path: Path) -> None:
    # hash-1: a half-wave rectified sine has Vpk/2 at f (within 2 %: the diode's drop).
    d = load_design(str(write_design(tmp_path, HALF_WAVE_RESISTIVE)), ())
    r = simulate(d)
    out = r.ripple_harmonics["out"]
    assert out[0].rms == pytest.approx(d.source.vpeak / 2 / math.sqrt(2), rel=0.02)
    assert r.metrics["hum_frequency_hz"] == 50.0


@pytest.mark.ngspice
def test_harmonics_agree_with_ngspices_own_fourier_analysis(tmp_path: Path) -> None:
    # ngspice's `fourier` command on the steady-state deck as `simkit netlist` exports it (its own
    # interpolation and transform), against simkit's: within 0.5 % (measured: 0.03 %).
    d = load_design(str(write_design(tmp_path, CHOKE_INPUT)), ())
    r = simulate(d)
    T = d.source.period
    lines = [x for x in r.deck.splitlines() if not x.startswith(".meas")]
    # A little over one period: ngspice refuses a window of exactly one period after `uic`, and the last
    # period of a periodic run has the same harmonics wherever it starts.
    lines = [re.sub(r"^(\.tran \S+) (\S+)", lambda m: f"{m.group(1)} {1.01 * T:.6g}", x) for x in lines]
    end = lines.index(".end")
    lines[end:end] = [".control", "set fourgridsize=8192", "run", "fourier 50 v(out)", ".endc"]
    deck = tmp_path / "four.cir"
    deck.write_text("\n".join(lines) + "\n")
    done = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120)
    rows = re.findall(r"^\s*(\d+)\s+(\S+)\s+(\S+)\s+\S+\s+\S+\s+\S+\s*$", done.stdout, re.M)
    theirs = {int(k): float(mag) / math.sqrt(2) for k, f, mag in rows if 1 <= int(k) <= 9}
    assert len(theirs) == 9, done.stdout[-2000:]
    ours = r.ripple_harmonics["out"]
    top = max(theirs.values())
    for k, rms in theirs.items():
        if rms > 0.01 * top:
            assert ours[k - 1].rms == pytest.approx(rms, rel=0.005), k


@pytest.mark.ngspice
def test_keyed_and_battery_hum_of_the_inverter_example() -> None:
    # Derived here: the steady state holds the key down, so the key-down hum (the last whole period of the
    # longest key-down, drift taken out) is within 3 dB of it; a full-wave doubler draws its battery
    # power, and so the battery current, at twice the source frequency.
    r = simulate(load_design(str(EXAMPLES / "portable_cw_inverter_doubler.toml"), ()))
    m = r.metrics
    assert m["hum_keydown_dbv"] == pytest.approx(m["hum_dbv"], abs=3.0)
    assert m["hum_keydown_frequency_hz"] == m["hum_frequency_hz"] == 100.0
    assert m["battery_hum_frequency_hz"] == 100.0
    assert m["battery_hum_a"] > 10 * r.battery_harmonics[0].rms
    doc = r.to_json()
    assert set(doc["ripple_harmonics_keydown"]) == set(doc["ripple_harmonics"])
    assert all(set(h) == {"frequency_hz", "rms_a", "dbua"} for h in doc["battery_harmonics"])


# -- the high-frequency analysis: rings against the R-L-C (ngspice) -----------------------------


@pytest.mark.ngspice
def test_a_snubbed_diode_rings_at_the_lc_frequency_and_decays_as_the_rlc(tmp_path: Path) -> None:
    # hash-2: with 1 nF across the diode and 10 mH feeding it, f = 1/(2 pi sqrt(L C)) (within 10 %; measured
    # 0.5 %) and the envelope falls to 1/e in 2 L / (R + R_winding) (within 15 %; measured 2 %).
    L, C, R, RW = 10e-3, 1e-9, 10.0, 20.0
    r = simulate(load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"))), ()))
    d1 = r.part("D1", DiodeResult)
    assert d1.ring_frequency_hz == pytest.approx(1 / (2 * math.pi * math.sqrt(L * C)), rel=0.10)
    assert d1.ring_decay_s == pytest.approx(2 * L / (R + RW), rel=0.15)
    assert r.hash is not None and r.metrics["hash_dbuv"] == pytest.approx(spectrum.dbuv(r.metrics["hash_rms_v"]))
    assert 0 < r.metrics["hash_rms_v"] < 0.1  # the reservoir passes little of it


@pytest.mark.ngspice
def test_critical_damping_leaves_no_overshoot(tmp_path: Path) -> None:
    # hash-2/hash-3: R = sqrt(L/C) damps the ring to a damping ratio of 1/2: one cycle later it is down to
    # exp(-2 pi 0.5 / sqrt(0.75)) = 2.7 % of its first swing, so no ring is reported, and the reverse voltage
    # overshoots the settled PIV by nothing worth a few percent; a light snubber rings on for dozens of cycles.
    L, C = 10e-3, 1e-9
    damped = simulate(load_design(str(write_design(
        tmp_path, HALF_WAVE_RINGING.format(c="1n", r=f"{math.sqrt(L / C):.4g}"))), ()))
    light = simulate(load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"), "l.toml")), ()))
    dd = damped.part("D1", DiodeResult)
    assert dd.ring_peak_v is not None and dd.ring_peak_v < 0.03 * dd.piv_v
    assert dd.ring_frequency_hz is not None and math.isnan(dd.ring_frequency_hz)

    def swings(res) -> int:  # type: ignore[no-untyped-def]
        h = res.hash
        w, (a, b), circuit = h.hf.run.waves, h.hf.window, h.hf.circuit
        x = circuit.diodes[0]
        (off,) = turn_offs(w.time, w.i(x.sense), a, b)
        return measure_ring(w.time, w.v(x.cathode) - w.v(x.anode), off, h.hf.ring_estimate_hz, 1e-3,
                            circuit.period / 8).peaks

    assert swings(damped) <= 2
    assert swings(light) >= 20


@pytest.mark.ngspice
def test_run_hash_and_the_hash_command_from_the_command_line(tmp_path: Path,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    from tests.test_cli import call

    text = HALF_WAVE_RINGING.format(c="1n", r="10").replace('snubber = { c = "1n", r = "10" }', "").replace(
        "1N4007", "UF4007")
    p = write_design(tmp_path, text)
    code, out, err = call(["run", str(p), "--json", "--no-hash"], capsys)
    assert code == 0, err
    assert "hash_rms_v" not in json.loads(out)["metrics"]
    code, out, err = call(["run", str(p), "--json", "--hash"], capsys)
    assert code == 0, err
    doc = json.loads(out)
    assert {"hash_rms_v", "hash_dbuv"} <= set(doc["metrics"]) and "high_frequency" in doc
    assert {"ring_frequency_hz", "ring_peak_v", "ring_decay_s"} <= set(doc["parts"]["D1"])
    code, out, err = call(["hash", str(p), "--json"], capsys)
    assert code == 0, err
    study = json.loads(out)
    assert study["suggestion"]["c"] == pytest.approx(47e-12) and study["suggestion"]["r"] == pytest.approx(33e3)
    assert study["after"]["metrics"]["hash_rms_v"] is not None
    code, out, err = call(["hash", str(p)], capsys)
    assert code == 0, err
    assert "Suggested snubber across each diode: 47 pF in series with 33 kΩ" in out
    assert 'snubber = { c = "47p", r = "33k" }' in out and "HIGH VOLTAGE" in out


@pytest.mark.ngspice
def test_the_report_has_the_hum_and_hash_section(tmp_path: Path) -> None:
    from simkit.report.design_report import build_report

    r = simulate(load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"))), ()))
    text = build_report(r).markdown()
    assert "## Hum and hash" in text and "### Diode turn-off and hash" in text
    assert "hum-spectrum.png" in text and "turn-off-ringing.png" in text
    assert "cannot draw" not in text  # the snubbers are in the schematic


# -- the schematic draws the design's snubbers ---------------------------------------------------


@pytest.mark.parametrize("topology", ["half-wave", "centre-tap", "bridge", "doubler", "cascade"])
def test_the_schematic_draws_every_snubber(tmp_path: Path, topology: str) -> None:
    from simkit.report.schematic import draw_schematic
    from tests.test_schematic import FILTERS, STAGES, TEMPLATE, check

    for rect, src in (('snubber = { c = "10n", r = "100" }\n', ""),
                      ('snubber = { c = "10n", r = "100" }\n', 'snubber = { c = "4.7n", r = "1k" }'),
                      ("", 'snubber = { c = "4.7n", r = "1k" }')):
        text = TEMPLATE.format(name=topology, lw="10m", topology=topology, diode="1N4007",
                               stages=rect + STAGES.get(topology, ""), regulator="", tap="",
                               filters="\n".join(f"[[filter]]\n{x}" for x in FILTERS["choke input"]))
        text = text.replace('inductance = "10m"', 'inductance = "10m"\n' + src)
        d = load_design(str(write_design(tmp_path, text)), ())
        c = build_circuit(d)
        sch = draw_schematic(d, c)
        check(sch, c)
        own = [e.name for e in c.elements if e.name.startswith(("CSD", "RSD", "CSS", "RSS"))]
        assert own and all("design" in sch.labels[n] for n in own)
        auto = [e.name for e in c.elements if e.name.startswith(("CSW", "CSR"))]
        assert all("added by simkit" in sch.labels[n] for n in auto)


# -- the plots keep the house style ---------------------------------------------------------------


@pytest.fixture
def caught(monkeypatch: pytest.MonkeyPatch):  # type: ignore[no-untyped-def]
    """The figures the plot functions make, kept open instead of written (as tests/test_plots.py does)."""
    from simkit.report import plots

    figures: list = []  # type: ignore[type-arg]
    monkeypatch.setattr(plots, "figure_bytes", lambda fig, tight=False: (figures.append(fig), (b"", b""))[1])
    yield figures
    import matplotlib.pyplot as plt

    for fig in figures:
        plt.close(fig)


@pytest.mark.ngspice
def test_the_spectrum_and_ringing_plots_keep_the_house_style(tmp_path: Path, caught: list) -> None:  # type: ignore[type-arg]
    # Our house style (derived here): labels in words with their unit, legends outside the data; the spectrum
    # on a log frequency axis with one bar group per harmonic, levels in dBV.
    from simkit.report import plots

    r = simulate(load_design(str(write_design(tmp_path, HALF_WAVE_RINGING.format(c="1n", r="10"))), ()))
    plots.hum_spectrum_figure(r)
    plots.ringing_figure(r)
    spectrum_fig, ringing_fig = (drawn(f) for f in caught)
    (ax,) = spectrum_fig.axes
    assert ax.get_xscale() == "log"
    assert re.fullmatch(r"hum level \(dBV\)", ax.get_ylabel())
    assert ax.get_xlabel().endswith("(Hz)") and "harmonics" in ax.get_xlabel()
    bars = [p for p in ax.patches if p.get_height() > 0]
    assert len(bars) >= 8  # f .. 10f of the one node, all within 60 dB of the largest
    tops = sorted(ax.get_ylim())
    assert tops[1] >= r.metrics["hum_dbv"]
    renderer = spectrum_fig.canvas.get_renderer()
    assert ax.get_legend().get_window_extent(renderer).x0 >= ax.get_window_extent(renderer).x1 - 0.5
    check_house_style(ringing_fig)
    assert "Turn-off of D1" in ringing_fig.axes[0].get_title(loc="left")
