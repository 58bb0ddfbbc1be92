"""Time `simkit sweep`: against naive fixed-span `ngspice -b` runs, in parallel, and as it grows.

The designs are small on purpose (an invented 250 V bridge with one reservoir capacitor and a
resistor load), so the whole benchmark takes a few minutes on 2 cores.

(a) A 64-point sweep (8 reservoir capacitors x 8 load resistors, log steps) through simkit's
    worker pool with one worker, against the same 64 designs run one after another as naive decks
    by ``ngspice -b``: every capacitor empty, ``.tran`` with simkit's maximum step and tolerances
    over a fixed span.  The span is the shortest fixed one that lets every design settle as far as
    simkit's detector requires (found from 3 s runs of the four corner designs): the best a naive
    user could pick knowing the answer.  Accuracy: output DC and ripple of each naive run against
    simkit's.  Two families: the shipped bench-amplifier example (bridge into C-L-C, a typical tube
    supply) and the same bridge with only a reservoir capacitor (it settles fastest from empty, the
    hardest case for simkit).  Goal: simkit's time per point at most half the naive one.
(b) The speed-up of ``--jobs 2`` over ``--jobs 1`` on the same sweep, against the speed-up that
    this machine gives a pure CPU-bound Python job of the same shape (64 tasks of about a point's
    duration in a spawned process pool, pool start-up included as the sweep's worker start-up is).
    Goal: at least 90 % of the machine's own speed-up.
(c) Time per point as a 1-D sweep grows from 16 to 256 points (default --jobs), and the memory of
    each worker process from its first to its last point.  Goal: flat.

Other processes on the machine make every time noisier: the load average is printed.  The
parallel comparison (b) alternates the sweep and the CPU job and keeps the best of --repeat.

Run:  python bench/bench_sweep.py [--repeat 2] [--quick] [--json FILE]
"""

from __future__ import annotations

import argparse
import json
import math
import multiprocessing
import os
import platform
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import bench_run  # the project's run benchmark: naive decks, `ngspice -b` and settling helpers

DESIGN = """\
title = "Benchmark (invented): 250 V bridge, one reservoir capacitor, resistor load"
[source]
vrms = "250"
frequency = "50"
resistance = "25"
[rectifier]
topology = "bridge"
diode = "1N4007"
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "5k"
"""
C_RANGE = ("47u", "470u")
R_RANGE = ("2k", "10k")
VARY_64 = [f"filter.0.c={C_RANGE[0]}:{C_RANGE[1]}:8log", f"load.r={R_RANGE[0]}:{R_RANGE[1]}:8log"]
GROWTH = (16, 64, 256)
#: Span of the runs that find where the corner designs have settled, s.
PROBE_SPAN = 3.0
#: Goals of issue 6.
NAIVE_RATIO_GOAL = 0.5  # simkit per point / naive per point, at most
PARALLEL_GOAL = 0.9  # sweep speed-up / CPU-bound speed-up, at least
FLAT_GOAL = 0.15  # per-point time may grow this much (relative) from 16 to 256 points


# --------------------------------------------------------------------------------------------
# the pure-Python CPU-bound job of (b)


def cpu_task(n: int) -> int:
    """Pure Python arithmetic, no I/O, no numpy: what a core gives an interpreter."""
    acc = 0
    for k in range(n):
        acc = (acc + k * k) % 1_000_003
    return acc


def cpu_pool(tasks: int, jobs: int, n: int) -> float:
    """Wall time of ``tasks`` cpu_task(n) on a spawned pool of ``jobs`` processes, start-up included, s."""
    ctx = multiprocessing.get_context("spawn")
    t0 = time.perf_counter()
    with ctx.Pool(jobs) as pool:
        pool.map(cpu_task, [n] * tasks, chunksize=1)
    return time.perf_counter() - t0


def calibrate(seconds: float) -> int:
    """Loop count of cpu_task that takes about ``seconds`` here."""
    n = 20_000
    while True:
        t0 = time.perf_counter()
        cpu_task(n)
        dt = time.perf_counter() - t0
        if dt > 0.02:
            return max(1000, int(n * seconds / dt))
        n *= 4


# --------------------------------------------------------------------------------------------
# sweeps


def timed_sweep(design: Path, varies: list[str], out: Path, jobs: int | None) -> tuple[float, Any]:
    """Wall time of one fresh sweep (worker start-up included) and its report."""
    from simkit.sweep.runner import RunOptions, run_sweep

    if out.exists():
        shutil.rmtree(out)
    opts = RunOptions(out=out, jobs=jobs, progress=False)
    t0 = time.perf_counter()
    report = run_sweep(design, varies, opts)
    wall = time.perf_counter() - t0
    if report.failed:
        bad = next(e for e in report.entries if e.get("error"))
        raise RuntimeError(f"a benchmark point failed: {bad['error']}")
    return wall, report


def worker_memory(report: Any) -> dict[int, tuple[float, float, int]]:
    """Per worker process: resident memory after its first and its last point (MB), and its points."""
    seen: dict[int, list[float]] = {}
    for e in sorted(report.entries, key=lambda e: e["point"]):
        if e.get("worker") and e.get("rss_mb") is not None:
            seen.setdefault(e["worker"], []).append(e["rss_mb"])
    return {w: (v[0], v[-1], len(v)) for w, v in seen.items()}


# --------------------------------------------------------------------------------------------
# naive runs


def naive_span(designs: list[Any], engine: Any) -> tuple[float, list[float]]:
    """The shortest fixed span after which every given design has settled as simkit requires, s."""
    from simkit.analysis.steady import MEASURE_PERIODS
    from simkit.netlist.build import build_circuit

    needed = []
    for d in designs:
        circuit = build_circuit(d)
        saved = bench_run.NAIVE_SPAN
        bench_run.NAIVE_SPAN = PROBE_SPAN  # naive_deck reads the span from its module
        try:
            deck = bench_run.naive_deck(d, circuit, MEASURE_PERIODS)
        finally:
            bench_run.NAIVE_SPAN = saved
        waves = engine.run(deck, PROBE_SPAN)
        t = bench_run.settle_point(waves, circuit, d.simulation.settle_tolerance) + MEASURE_PERIODS * circuit.period
        needed.append(t)
        del waves
    period = 1.0 / designs[0].source.frequency
    return math.ceil(max(needed) / period) * period, needed


def naive_runs(designs: list[Any], span: float, exe: str, work: Path) -> list[tuple[float, dict[str, float]]]:
    """``ngspice -b`` on the naive deck of each design over ``span``: wall time and .meas results."""
    from simkit.analysis.steady import MEASURE_PERIODS
    from simkit.netlist.build import build_circuit

    saved = bench_run.NAIVE_SPAN
    bench_run.NAIVE_SPAN = span  # naive_deck reads the span from its module
    try:
        decks = []
        for k, d in enumerate(designs):
            p = work / f"naive-{k:03d}.cir"
            p.write_text(bench_run.naive_deck(d, build_circuit(d), MEASURE_PERIODS), "utf-8")
            decks.append(p)
    finally:
        bench_run.NAIVE_SPAN = saved
    return [bench_run.ngspice_batch(exe, p) for p in decks]


# --------------------------------------------------------------------------------------------


def naive_case(name: str, design: Path, report: Any, sweep_wall: float, engine: Any, exe: str,
               work: Path) -> dict[str, Any]:
    """(a) for one family: the naive runs of the sweep's 64 designs, their time and accuracy."""
    from simkit.design.loader import apply_overrides, design_from_dict, read_toml

    data = read_toml(design)
    designs = []
    for e in report.entries:
        sets = [f"{k}={v!r}" for k, v in e["values"].items()]
        designs.append(design_from_dict(apply_overrides(data, sets, str(design)), origin=str(design)))
    corners = [designs[0], designs[7], designs[56], designs[63]]  # C and R at both ends
    span, needed = naive_span(corners, engine)
    sub = work / name
    sub.mkdir()
    results = naive_runs(designs, span, exe, sub)
    naive_total = sum(w for w, _ in results)
    pairs = list(zip(report.entries, results, strict=True))
    dv = [bench_run.signed_rel(e["metrics"]["vout_dc_v"], m["vout_dc_v"]) for e, (_, m) in pairs]
    dr = [bench_run.signed_rel(e["metrics"]["ripple_pp_v"], m["ripple_pp_v"]) for e, (_, m) in pairs]
    drift = [abs(m["vout_dc_v"] - m["vout_dc_v_prev"]) / abs(m["vout_dc_v"]) for _, m in results]
    n = len(designs)
    return {"name": name, "points": n, "sweep_s": sweep_wall, "per_point_s": sweep_wall / n,
            "naive_total_s": naive_total, "naive_per_point_s": naive_total / n, "naive_span_s": span,
            "corner_needed_s": needed, "ratio": (sweep_wall / n) / (naive_total / n),
            "vdc_rel_diff_max": max(map(abs, dv)), "ripple_rel_diff_max": max(map(abs, dr)),
            "naive_drift_max": max(drift), "period_s": 1.0 / designs[0].source.frequency}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=2, help="alternations of sweep and CPU job in (b); best kept")
    ap.add_argument("--quick", action="store_true", help="one repetition in (b), growth up to 64 points")
    ap.add_argument("--json", type=Path, help="also write every figure to this JSON file")
    ap.add_argument("--ngspice", default=shutil.which("ngspice") or "ngspice", help="the ngspice command")
    args = ap.parse_args(argv)
    repeat = 1 if args.quick else max(1, args.repeat)
    growth = tuple(n for n in GROWTH if not args.quick or n <= 64)
    t_start = time.perf_counter()
    load0 = os.getloadavg()

    from importlib import resources

    from simkit.engine.ngspice import get_engine
    from simkit.sweep.runner import default_jobs

    engine = get_engine()
    cores = default_jobs()
    doc: dict[str, Any] = {"python": platform.python_version(), "cpus": cores, "loadavg_start": list(load0),
                           "ngspice": bench_run.ngspice_version(args.ngspice)}
    with tempfile.TemporaryDirectory(prefix="simkit-bench-sweep-") as tmp:
        work = Path(tmp)
        design = work / "bridge.toml"
        design.write_text(DESIGN, "utf-8")
        clc = work / "bench_amp_bridge_clc.toml"
        clc.write_bytes((resources.files("simkit") / "examples" / "bench_amp_bridge_clc.toml").read_bytes())

        # (b), and (a)'s sweep of the C-only family: --jobs 1 and 2, alternating with the CPU-bound job
        print("bench: 64-point sweeps and the CPU-bound job ...", file=sys.stderr, flush=True)
        s1: list[float] = []
        s2: list[float] = []
        c1: list[float] = []
        c2: list[float] = []
        report1 = None
        n_loop = 0
        for rep in range(repeat):
            wall, r1 = timed_sweep(design, VARY_64, work / "s1", 1)
            s1.append(wall)
            report1 = report1 or r1
            if rep == 0:
                n_loop = calibrate(statistics.median(e["seconds"] for e in r1.entries))
            c1.append(cpu_pool(64, 1, n_loop))
            wall, _ = timed_sweep(design, VARY_64, work / "s2", 2)
            s2.append(wall)
            c2.append(cpu_pool(64, 2, n_loop))
        assert report1 is not None
        sweep_1, sweep_2, cpu_1, cpu_2 = min(s1), min(s2), min(c1), min(c2)

        # (a) naive runs of the same 64 designs, for both families
        print("bench: naive runs ...", file=sys.stderr, flush=True)
        cases = []
        wall_clc, report_clc = timed_sweep(clc, VARY_64, work / "sclc", 1)
        cases.append(naive_case("clc", clc, report_clc, wall_clc, engine, args.ngspice, work))
        cases.append(naive_case("c-only", design, report1, sweep_1, engine, args.ngspice, work))

        # (c) growth
        print("bench: growing sweeps ...", file=sys.stderr, flush=True)
        grow: list[dict[str, Any]] = []
        for n in growth:
            wall, rep_n = timed_sweep(design, [f"filter.0.c={C_RANGE[0]}:{C_RANGE[1]}:{n}log"], work / f"g{n}", None)
            grow.append({"points": n, "wall_s": wall, "per_point_s": wall / n,
                         "simulate_s_mean": statistics.mean(e["seconds"] for e in rep_n.entries),
                         "workers": worker_memory(rep_n)})

    speed_sweep = sweep_1 / sweep_2
    speed_cpu = cpu_1 / cpu_2
    ratio_b = speed_sweep / speed_cpu
    growth_c = grow[-1]["per_point_s"] / grow[0]["per_point_s"] - 1
    sim_growth = grow[-1]["simulate_s_mean"] / grow[0]["simulate_s_mean"] - 1
    load1 = os.getloadavg()

    titles = {"clc": "bridge into C-L-C (the shipped bench-amplifier example)",
              "c-only": "bridge into one reservoir capacitor (settles fastest: simkit's hardest case)"}
    out: list[str] = []
    out.append(f"simkit sweep benchmark  (Python {doc['python']}, {doc['ngspice']}, {cores} cores, load average "
               f"{load0[0]:.2f} at start, {load1[0]:.2f} at end)")
    out.append("")
    out.append(f"(a) 64 points ({VARY_64[0]} x {VARY_64[1]}), one core each side: simkit sweep --jobs 1 (worker "
               "start-up, journal and CSV included) against 64 `ngspice -b` runs from empty capacitors over the "
               "shortest fixed span that settles every design")
    for c in cases:
        ok = c["ratio"] <= NAIVE_RATIO_GOAL
        out.append(f"    {titles[c['name']]}:")
        out.append(f"      simkit {c['per_point_s'] * 1e3:.0f} ms per point; naive {c['naive_per_point_s'] * 1e3:.0f} "
                   f"ms per point over {c['naive_span_s'] * 1e3:.0f} ms ({round(c['naive_span_s'] / c['period_s'])} "
                   f"periods; the corners needed {', '.join(f'{x * 1e3:.0f}' for x in c['corner_needed_s'])} ms)")
        out.append(f"      ratio {c['ratio']:.2f} (goal <= {NAIVE_RATIO_GOAL}: {'meets' if ok else 'MISSES'}); "
                   f"simkit vs naive: Vdc max |diff| {c['vdc_rel_diff_max']:.1e}, ripple {c['ripple_rel_diff_max']:.1e}"
                   f"; naive Vdc drift over its last windows {c['naive_drift_max']:.1e}")
    out.append("")
    out.append("(b) parallel speed-up, --jobs 2 over --jobs 1 (64 points, C-only family), against this machine's "
               "CPU-bound Python job")
    out.append(f"    sweep:      {sweep_1:.2f} s -> {sweep_2:.2f} s, speed-up {speed_sweep:.2f}x")
    out.append(f"    CPU-bound:  {cpu_1:.2f} s -> {cpu_2:.2f} s, speed-up {speed_cpu:.2f}x  (64 tasks of "
               f"{cpu_1 / 64 * 1e3:.0f} ms, spawned pool, start-up included)")
    out.append(f"    ratio:      {ratio_b:.0%} of the machine's speed-up (goal >= {PARALLEL_GOAL:.0%}: "
               f"{'meets' if ratio_b >= PARALLEL_GOAL else 'MISSES'}); best of {repeat}: sweep 1 "
               f"{[round(x, 2) for x in s1]}, 2 {[round(x, 2) for x in s2]}; cpu 1 {[round(x, 2) for x in c1]}, "
               f"2 {[round(x, 2) for x in c2]}")
    out.append("")
    out.append(f"(c) time per point as the sweep grows (filter.0.c={C_RANGE[0]}:{C_RANGE[1]}:Nlog, --jobs {cores})")
    out.append("    points   wall      per point   vs first   simulate() mean   worker memory, first -> last point")
    for g in grow:
        mem = "; ".join(f"{a:.0f} -> {b:.0f} MB ({k} pts)" for a, b, k in g["workers"].values())
        out.append(f"    {g['points']:>6}   {g['wall_s']:6.2f} s  {g['per_point_s'] * 1e3:6.0f} ms  "
                   f"{g['per_point_s'] / grow[0]['per_point_s']:6.2f}x   {g['simulate_s_mean'] * 1e3:8.0f} ms        "
                   f"{mem}")
    flat = growth_c <= FLAT_GOAL
    out.append(f"    per point from {grow[0]['points']} to {grow[-1]['points']} points: {growth_c:+.0%} (goal: no "
               f"growth beyond {FLAT_GOAL:.0%}: {'meets' if flat else 'MISSES'}); simulate() alone {sim_growth:+.0%}."
               " Small sweeps pay the workers' start-up (about 0.7 s each) over fewer points.")
    wall_total = time.perf_counter() - t_start
    out.append("")
    out.append(f"(benchmark wall time {wall_total:.0f} s)")
    print("\n".join(out))
    if args.json:
        doc.update({
            "a": cases,
            "b": {"sweep_jobs1_s": s1, "sweep_jobs2_s": s2, "cpu_jobs1_s": c1, "cpu_jobs2_s": c2,
                  "speedup_sweep": speed_sweep, "speedup_cpu": speed_cpu, "ratio": ratio_b, "cpu_loop": n_loop},
            "c": [{**g, "workers": {str(k): v for k, v in g["workers"].items()}} for g in grow],
            "wall_s": wall_total, "loadavg_end": list(load1),
        })
        args.json.write_text(json.dumps(doc, indent=1) + "\n", "utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
