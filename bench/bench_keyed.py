"""Keyed designs: ``simkit run`` against the naive stock-ngspice run of the same circuit, at equal accuracy.

The naive run a user would write: the circuit with its keyed load as a PWL current, every
capacitor and inductor empty, ``.tran`` over two keying cycles with the maximum step one source
period / 200, and ``.meas ... INTEG`` of the output over every whole key-down and key-up interval of
the second cycle (their weighted sums are the key-down and key-up means).  It comes in two
flavours: with simkit's own tolerances (``reltol`` of the design, as bench_run.py's naive decks)
and stock (no ``.options`` line: ngspice's defaults, reltol 1e-3), the fastest a user would get.
The reference: the same circuit from empty over ``ref_cycles`` keying cycles at one period / 1000
and reltol 1e-6, measured over its last cycle.

For each design: the wall time of ``simkit run DESIGN --json`` in a fresh process (the whole
command: start-up, steady state, switch-on, steady keying, figures) and its peak memory (the
child's maximum resident set), against ``ngspice -b`` on each naive deck in a fresh process;
each timed several times, the cases taking turns, the best kept.  Accuracy: simkit's and the
naive runs' key-down and key-up means against the reference.  Goals (issue 12): ratio <= 1.0
against the naive run, peak memory < 200 MB, means within 0.5 % of the reference.

A keyed sweep: ``simkit sweep --jobs 1`` over four capacitor values of the first design against
the four naive decks (stock flavour) run one after another.

The designs are invented for benchmarking (a Morse-keyed 60 Hz doubler with a 6.4 s keying
cycle; the same station on a battery and a modified-sine inverter; a slow choke-input supply
keyed at 2 Hz).  Other processes make times noisy: the load average is printed.

Run:  python bench/bench_keyed.py [--repeat 3] [--only NAME ...] [--no-sweep] [--json FILE]
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import subprocess
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from _common import exe, loadavg, parse_meas, rel  # bench/ is on the path: the scripts run as files

DOUBLER = """\
title = "Benchmark (invented): Morse-keyed 60 Hz doubler, 6.4 s keying cycle"
[source]
kind = "sine"
vrms = "120"
frequency = "60"
resistance = "4"
inductance = "2m"
[rectifier]
topology = "doubler"
diode = "1N5408"
capacitance = "220u"
[[filter]]
r = "47"
[[filter]]
c = "100u"
[load]
kind = "keyed"
down = { i = "90m" }
up = { i = "10m" }
morse = "CQ CQ TEST"
wpm = 18
[bleeder]
r = "47k"
"""

INVERTER = """\
title = "Benchmark (invented): battery, modified-sine inverter and doubler, Morse-keyed"
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
morse = "CQ CQ TEST"
wpm = 18
rise = "4m"
fall = "4m"
pushing_hz_per_v = 15
[bleeder]
r = "100k"
"""

SLOW = """\
title = "Benchmark (invented): slow choke-input supply keyed at 2 Hz"
[source]
vrms = "350"
frequency = "60"
resistance = "40"
[rectifier]
topology = "centre-tap"
diode = "1N4007"
[[filter]]
l = "10"
dcr = "100"
[[filter]]
c = "2200u"
esr = "0.1"
[load]
kind = "keyed"
down = { i = "120m" }
up = { i = "20m" }
rate = "2"
duty = "50%"
"""


@dataclass
class Case:
    name: str
    text: str
    ref_cycles: int  # keying cycles of the reference run (from empty: enough to settle)


CASES = [Case("doubler", DOUBLER, 4), Case("inverter", INVERTER, 4), Case("slow", SLOW, 40)]
SWEEP_VARY = "filter.1.c=47u,100u,220u,470u"
NAIVE_STEPS = 200
#: Keying cycles a naive run may take, tried in turn until its means are within TOL of the reference.
NAIVE_CYCLES = (2, 4, 8, 16, 32)
REF_STEPS = 1000
TOL = 0.005


def intervals(design_file: Path, sets: list[str], c0: float, c1: float) -> tuple[list[tuple[float, float]],
                                                                               list[tuple[float, float]]]:
    """Whole key-down and key-up spans of [c0, c1], as simkit's figures take them."""
    from simkit.design.loader import load_design
    from simkit.netlist.build import keying_drive
    from simkit.pipeline.dynamic import _key_up

    d = load_design(design_file, sets)
    drive = keying_drive(d.keyed[0])
    return drive.intervals(c0, c1, level=0.999), _key_up(c0, c1, drive)


def deck(design_file: Path, sets: list[str], cycles: int, steps: int, reltol: float | None) -> tuple[str, float]:
    """A from-empty deck over ``cycles`` keying cycles, .meas INTEG over the last cycle's intervals.
    ``reltol`` None: stock ngspice (no .options line).  Returns the deck and its span."""
    from simkit.design.loader import load_design
    from simkit.netlist.build import build_circuit, keying_drive
    from simkit.netlist.circuit import Transient, render
    from simkit.units import spice

    d = load_design(design_file, sets)
    c = build_circuit(d, mode="keyed")
    cycle = keying_drive(d.keyed[0]).period or 0.0
    span = cycles * cycle
    downs, ups = intervals(design_file, sets, span - cycle, span)
    meas = [f".meas tran kd{k} INTEG v({c.output}) from={spice(a, 12)} to={spice(b, 12)}"
            for k, (a, b) in enumerate(downs)]
    meas += [f".meas tran ku{k} INTEG v({c.output}) from={spice(a, 12)} to={spice(b, 12)}"
             for k, (a, b) in enumerate(ups)]
    tran = Transient(tstop=span, tmax=c.period / steps, reltol=reltol or 1e-3)
    text = render(c, tran, {}, meas, ["naive keyed run: everything empty, written by bench/bench_keyed.py"])
    if reltol is None:
        text = "\n".join(line for line in text.splitlines() if not line.startswith(".options")) + "\n"
    return text, span


def ngspice_b(ngspice: str, path: Path, downs: list[tuple[float, float]],
              ups: list[tuple[float, float]]) -> tuple[float, float, float]:
    """Wall time and the key-down and key-up means of one ``ngspice -b`` run."""
    t0 = time.perf_counter()
    proc = subprocess.run([ngspice, "-b", str(path)], capture_output=True, text=True, cwd=path.parent, check=False)
    wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(f"ngspice -b {path} failed:\n{proc.stdout[-1500:]}\n{proc.stderr[-1500:]}")
    found = parse_meas(proc.stdout)
    down = sum(found[f"kd{k}"] for k in range(len(downs))) / sum(b - a for a, b in downs)
    up = sum(found[f"ku{k}"] for k in range(len(ups))) / sum(b - a for a, b in ups)
    return wall, down, up


def simkit_run(simkit: str, design: Path) -> tuple[float, float, dict[str, Any]]:
    """Wall time, peak resident memory (MB) and the JSON of ``simkit run --json`` in a fresh process."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        t0 = time.perf_counter()
        proc = subprocess.Popen([simkit, "run", str(design), "--json"], stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        if proc.returncode != 0:
            raise RuntimeError(f"simkit run {design} failed: {err.read()[-2000:]!r}")
        return wall, usage.ru_maxrss / 1024.0, json.loads(out.read())


def run_case(case: Case, work: Path, ngspice: str, simkit: str, repeat: int) -> dict[str, Any]:
    from simkit.design.loader import load_design
    from simkit.netlist.build import keying_drive

    design = work / f"{case.name}.toml"
    design.write_text(case.text, "utf-8")
    cycle = keying_drive(load_design(design).keyed[0]).period or 0.0
    ref_text, ref_span = deck(design, [], case.ref_cycles, REF_STEPS, 1e-6)
    ref_path = work / f"{case.name}-ref.cir"
    ref_path.write_text(ref_text, "utf-8")
    ref_t, ref_down, ref_up = ngspice_b(ngspice, ref_path, *intervals(design, [], ref_span - cycle, ref_span))
    naive: dict[str, tuple[Path, int]] = {}
    for flavour, reltol in (("simkit_reltol", load_design(design).simulation.reltol), ("stock", None)):
        text, span = deck(design, [], 2, NAIVE_STEPS, reltol)
        naive[flavour] = (work / f"{case.name}-naive-{flavour}.cir", 2)
        naive[flavour][0].write_text(text, "utf-8")
    # A slow circuit is not settled after two cycles from empty: the fair naive run is the shortest
    # (in doubling cycles) whose means are within TOL of the reference.
    for n in NAIVE_CYCLES:
        text, span = deck(design, [], n, NAIVE_STEPS, None)
        path = work / f"{case.name}-naive-stock-{n}.cir"
        path.write_text(text, "utf-8")
        _, down, up = ngspice_b(ngspice, path, *intervals(design, [], span - cycle, span))
        if max(rel(down, ref_down), rel(up, ref_up)) <= TOL:
            break
    naive["stock_settled"] = (path, n)
    times: dict[str, list[float]] = {"simkit": [], **{k: [] for k in naive}}
    means: dict[str, tuple[float, float]] = {}
    peak = 0.0
    doc: dict[str, Any] = {}
    for _ in range(repeat):
        wall, mb, doc = simkit_run(simkit, design)
        times["simkit"].append(wall)
        peak = max(peak, mb)
        for k, (path, n) in naive.items():
            wall, down, up = ngspice_b(ngspice, path, *intervals(design, [], (n - 1) * cycle, n * cycle))
            times[k].append(wall)
            means[k] = (down, up)
    m = doc["metrics"]
    means["simkit"] = (m["vout_keydown_v"], m["vout_keyup_v"])
    best = {k: min(v) for k, v in times.items()}
    errors = {k: {"keydown": rel(v[0], ref_down), "keyup": rel(v[1], ref_up)} for k, v in means.items()}
    return {
        "keying_cycle_s": cycle, "reference": {"cycles": case.ref_cycles, "step": f"T/{REF_STEPS}", "reltol": 1e-6,
                                               "seconds": ref_t, "keydown_v": ref_down, "keyup_v": ref_up},
        "naive_step": f"T/{NAIVE_STEPS}", "naive_settled_cycles": naive["stock_settled"][1], "seconds": times,
        "best_s": best,
        "ratio_simkit_over_naive": {k: best["simkit"] / best[k] for k in naive},
        "simkit_peak_mb": peak, "errors_vs_reference": errors,
        "meets": {"ratio_stock": best["simkit"] <= best["stock_settled"], "memory": peak < 200.0,
                  "accuracy": max(errors["simkit"].values()) <= TOL},
        "simkit_figures": {k: m.get(k) for k in ("vout_keydown_v", "vout_keyup_v", "sag_v", "recovery_time_s",
                                                 "droop_v", "overshoot_v", "chirp_hz")},
        "simkit_warnings": doc.get("warnings", []),
    }


def run_sweep(work: Path, ngspice: str, simkit: str) -> dict[str, Any]:
    from simkit.design.loader import load_design
    from simkit.netlist.build import keying_drive

    design = work / "sweep.toml"
    design.write_text(DOUBLER, "utf-8")
    key, values = SWEEP_VARY.split("=")
    sets = [[f"{key}={v}"] for v in values.split(",")]
    cycle = keying_drive(load_design(design).keyed[0]).period or 0.0
    decks = []
    for k, s in enumerate(sets):
        text, _ = deck(design, s, 2, NAIVE_STEPS, None)
        p = work / f"sweep-naive{k}.cir"
        p.write_text(text, "utf-8")
        decks.append((p, intervals(design, s, cycle, 2 * cycle)))
    t0 = time.perf_counter()
    naive = [ngspice_b(ngspice, p, *iv) for p, iv in decks]
    naive_s = time.perf_counter() - t0
    out = work / "sweep-out"
    t0 = time.perf_counter()
    proc = subprocess.run([simkit, "sweep", str(design), "--vary", SWEEP_VARY, "--jobs", "1", "--out", str(out)],
                          capture_output=True, text=True, check=False)
    simkit_s = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(f"simkit sweep failed:\n{proc.stderr[-2000:]}")
    with open(out / "sweep.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    worst = max(max(rel(float(r["vout_keydown_v"]), n[1]), rel(float(r["vout_keyup_v"]), n[2]))
                for r, n in zip(rows, naive, strict=True))
    return {"points": len(sets), "naive_stock_s": naive_s, "simkit_s": simkit_s, "ratio": simkit_s / naive_s,
            "worst_mean_difference_vs_naive": worst}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", choices=[c.name for c in CASES], action="append")
    ap.add_argument("--no-sweep", action="store_true")
    ap.add_argument("--json", type=Path)
    args = ap.parse_args()
    ngspice, simkit = exe("ngspice"), exe("simkit")
    print(f"bench_keyed: load average {loadavg()}, {os.cpu_count()} cores", flush=True)
    results: dict[str, Any] = {"load_average": loadavg()}
    with tempfile.TemporaryDirectory(prefix="simkit-bench-keyed-") as tmp:
        work = Path(tmp)
        for case in CASES:
            if args.only and case.name not in args.only:
                continue
            r = run_case(case, work, ngspice, simkit, args.repeat)
            results[case.name] = r
            b = r["best_s"]
            e = r["errors_vs_reference"]
            print(f"\n({case.name}) keying cycle {r['keying_cycle_s']:.3g} s; reference {case.ref_cycles} cycles at "
                  f"T/{REF_STEPS}, reltol 1e-6 ({r['reference']['seconds']:.1f} s)")
            print(f"  simkit run --json            {b['simkit']:7.3f} s   peak {r['simkit_peak_mb']:.0f} MB")
            for k in ("simkit_reltol", "stock", "stock_settled"):
                what = f"{k}, {r['naive_settled_cycles']} cycles" if k == "stock_settled" else f"{k}, 2 cycles"
                print(f"  naive ngspice -b ({what:24s}) {b[k]:7.3f} s   ratio simkit/naive "
                      f"{r['ratio_simkit_over_naive'][k]:.2f}")
            for k in ("simkit", "simkit_reltol", "stock", "stock_settled"):
                print(f"  {k:14s} vs reference: key-down {100 * e[k]['keydown']:.3f} %, key-up "
                      f"{100 * e[k]['keyup']:.3f} %")
            ok = r["meets"]
            print(f"  goals: ratio <= 1 (stock, settled) {'met' if ok['ratio_stock'] else 'NOT MET'}; memory < 200 MB "
                  f"{'met' if r['meets']['memory'] else 'NOT MET'}; means within 0.5 % "
                  f"{'met' if r['meets']['accuracy'] else 'NOT MET'}", flush=True)
        if not args.no_sweep and not args.only:
            s = run_sweep(work, ngspice, simkit)
            results["sweep"] = s
            print(f"\n(sweep) {s['points']} points of the doubler ({SWEEP_VARY}): simkit sweep --jobs 1 "
                  f"{s['simkit_s']:.2f} s, naive stock decks {s['naive_stock_s']:.2f} s, ratio {s['ratio']:.2f}; "
                  f"means within {100 * s['worst_mean_difference_vs_naive']:.3f} % of the naive runs")
    if args.json:
        args.json.write_text(json.dumps(results, indent=2) + "\n", "utf-8")


if __name__ == "__main__":
    main()
