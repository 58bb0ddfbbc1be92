"""Time `simkit run` against raw `ngspice -b` and against a naive fixed-span run from empty capacitors.

For every design (by default the example designs shipped inside the package):

(a) same deck, same span: simkit's engine (libngspice in this process) running exactly the
    steady-state deck that ``simkit netlist`` exports, against ``ngspice -b`` running the same
    deck file in a fresh process.  Target: engine <= 1.3 x ``ngspice -b``.
    Whole run: ``simulate()`` (switch-on run, steady-state chunks, maybe Newton shooting
    steps) in this process with a warm engine, and the ``simkit run --json`` command line in a
    fresh process, both against ``ngspice -b`` on the final deck alone.
(b) naive: the same circuit, every capacitor and inductor at zero, ``.tran`` to 2 s with the
    same maximum step and tolerances, run by ``ngspice -b``.  Its output DC and ripple over the
    same number of final periods are compared with simkit's figures, and the naive run is
    checked for having settled.  Target on the choke filters (the slow-settling cases):
    simkit >= 5 x faster than the naive run.

Every time is taken with ``time.perf_counter``; each case runs several times, the cases taking
turns, and the best (or, with --stat median, the median) is reported; every sample is in the
JSON.  The engine is warmed up once first; import and library-load times are reported on
their own.  Other processes on the machine make every time noisier: compare the load average
printed in the heading.

Run:  python bench/bench_run.py [--repeat 5] [--repeat-slow 3] [--stat min|median] [--json FILE]
                                [DESIGN.toml ...]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, cast

from _common import parse_meas  # bench/ is on the path: the scripts run as files

if TYPE_CHECKING:
    from simkit.design.model import Design
    from simkit.engine.ngspice import Engine, Waveforms
    from simkit.netlist.circuit import Circuit
    from simkit.pipeline import RunResult

#: Span of the naive run, s.
NAIVE_SPAN = 2.0
#: Target (a): simkit's engine time over `ngspice -b` wall time on the same deck, at most.
SAME_SPAN_TARGET = 1.3
#: Target (b): naive `ngspice -b` time over simkit's whole-run time, at least (choke filters).
NAIVE_SPEEDUP_TARGET = 5.0
#: A naive run counts as settled when its output ripple changed by less than this, relative
#: (simkit's detector allows 0.2 % of the ripple per period).
RIPPLE_SETTLED = 0.002



# --------------------------------------------------------------------------------------------
# timing helpers


def time_calls(fn: Callable[[], object], repeat: int) -> list[float]:
    """Wall times of ``repeat`` calls of fn, s."""
    out: list[float] = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


#: How the samples of one case become its figure: "min" (best of N: other load on the machine
#: only ever adds time) or "median".  Set by --stat.
STAT = "min"


def med(samples: list[float]) -> float:
    """The figure of a case's samples (see STAT); NaN for none."""
    if not samples:
        return math.nan
    return min(samples) if STAT == "min" else statistics.median(samples)


@dataclass
class EngineCall:
    tstop: float  # s, simulated span of the call
    seconds: float  # wall time of the call


@dataclass
class TimedEngine:
    """Stands in for simkit's engine and records every run (span and wall time)."""

    inner: Engine
    calls: list[EngineCall] = field(default_factory=list)

    def run(self, deck: str, tstop: float, save: Iterable[str] | None = None) -> Waveforms:
        t0 = time.perf_counter()
        waves = self.inner.run(deck, tstop, save)
        self.calls.append(EngineCall(tstop, time.perf_counter() - t0))
        return waves


# --------------------------------------------------------------------------------------------
# the ngspice command line


def ngspice_batch(exe: str, deck: Path) -> tuple[float, dict[str, float]]:
    """Run ``ngspice -b deck``; wall time (s) and its .meas results."""
    t0 = time.perf_counter()
    proc = subprocess.run([exe, "-b", str(deck)], capture_output=True, text=True, cwd=deck.parent, check=False)
    wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(f"ngspice -b {deck} failed (rc {proc.returncode}):\n{proc.stdout[-2000:]}"
                           f"\n{proc.stderr[-2000:]}")
    return wall, parse_meas(proc.stdout)


def ngspice_version(exe: str) -> str:
    proc = subprocess.run([exe, "-v"], capture_output=True, text=True, check=False)
    m = re.search(r"ngspice-\S+", proc.stdout + proc.stderr)
    return m.group(0) if m else "unknown"


def find_simkit_exe() -> str | None:
    near = Path(sys.executable).with_name("simkit")
    if near.exists():
        return str(near)
    return shutil.which("simkit")


# --------------------------------------------------------------------------------------------
# decks


def meas_pair(circuit: Circuit, t0: float, t1: float, suffix: str = "") -> list[str]:
    """simkit's own .meas lines for output DC and ripple over [t0, t1], optionally renamed."""
    from simkit.pipeline import measure_lines

    wanted = ("vout_dc_v", "ripple_pp_v")
    lines = [ln for ln in measure_lines(circuit, t0, t1) if ln.split()[2] in wanted]
    if suffix:
        lines = [ln.replace(f" {w} ", f" {w}{suffix} ") for ln in lines for w in wanted if f" {w} " in ln]
    return lines


#: Steps per period of a naive run when the design does not fix them (the coarsest that keeps the
#: figures of simkit's examples within its tolerances: bench/bench_engine.py measures it).
NAIVE_STEPS = 200


def naive_steps(design: Design) -> int:
    return design.simulation.steps_per_period or NAIVE_STEPS


def naive_deck(design: Design, circuit: Circuit, periods: int) -> str:
    """The circuit from all-zero state, `.tran` to NAIVE_SPAN, the naive max step and simkit's reltol.

    .meas lines give DC and ripple over the last ``periods`` periods and over the ``periods``
    before them (suffix ``_prev``), to judge whether the run had settled.
    """
    from simkit.netlist.circuit import Transient, render

    T = circuit.period
    tran = Transient(tstop=NAIVE_SPAN, tmax=T / naive_steps(design), reltol=design.simulation.reltol)
    t1 = NAIVE_SPAN
    t0 = t1 - periods * T
    meas = meas_pair(circuit, t0, t1) + meas_pair(circuit, t0 - periods * T, t0, "_prev")
    header = [f"naive run: all capacitors and inductors empty, {NAIVE_SPAN:g} s, written by bench/bench_run.py"]
    return render(circuit, tran, {}, meas, header)


def settle_point(waves: Waveforms, circuit: Circuit, tol: float) -> float:
    """Earliest start of a period from which every later period's mean output stays within
    ``tol`` of the last period's (relative) and its ripple within RIPPLE_SETTLED: the span a
    naive run with a perfect guess would have needed before its measurement window, s."""
    from simkit.analysis.metrics import period_stats

    stats = period_stats(waves.time, waves.v(circuit.output), circuit.period, 0.0)
    last = stats[-1]
    pp_last = last.high - last.low
    k = len(stats) - 1
    while k > 0:
        s = stats[k - 1]
        ok_mean = abs(s.mean - last.mean) <= tol * abs(last.mean)
        ok_pp = abs((s.high - s.low) - pp_last) <= RIPPLE_SETTLED * max(abs(pp_last), 1e-12)
        if not (ok_mean and ok_pp):
            break
        k -= 1
    return k * circuit.period


def signed_rel(a: float, b: float) -> float:
    """(a - b) relative to |b|, with its sign (bench._common.rel is the size only)."""
    return (a - b) / abs(b) if b else math.inf


# --------------------------------------------------------------------------------------------
# one design


@dataclass
class Case:
    name: str
    path: Path
    choke: bool  # a filter with a choke: the slow-settling kind
    data: dict[str, Any] = field(default_factory=dict)


def bench_design(case: Case, engine: Engine, ngspice: str, simkit_exe: str | None, work: Path,
                 repeat: int, repeat_slow: int) -> None:
    """Time one design; the cases take turns within each repetition, so a change in the
    machine's load during the benchmark hits both sides of every ratio alike."""
    from simkit.analysis.steady import MEASURE_PERIODS
    from simkit.design.loader import load_design
    from simkit.pipeline import simulate

    design = load_design(case.path)
    timed = TimedEngine(engine)
    proxy = cast("Engine", timed)
    whole: list[float] = []  # simulate(), in this process, warm engine
    engine_share: list[float] = []  # of it, inside engine.run
    eng_same: list[float] = []  # engine.run on the exported deck
    batch: list[float] = []  # ngspice -b on the exported deck
    naive_b: list[float] = []  # ngspice -b on the naive deck
    naive_eng: list[float] = []  # engine.run on the naive deck
    needed = math.nan
    cli: list[float] = []  # simkit run --json, fresh process
    meas: dict[str, float] = {}
    nm: dict[str, float] = {}
    cli_doc: dict[str, Any] = {}
    deck_path = work / f"{case.name}.cir"
    naive_path = work / f"{case.name}-naive-{NAIVE_SPAN:g}s.cir"
    result: RunResult | None = None
    calls: list[EngineCall] = []

    for rep in range(max(repeat, repeat_slow)):
        if rep < repeat:
            timed.calls.clear()
            t0 = time.perf_counter()
            result = simulate(design, engine=proxy)
            whole.append(time.perf_counter() - t0)
            calls = list(timed.calls)
            engine_share.append(sum(c.seconds for c in calls))
        assert result is not None
        if rep == 0:
            deck_path.write_text(result.deck, "utf-8")
            naive_path.write_text(naive_deck(design, result.circuit, MEASURE_PERIODS), "utf-8")
        if rep < repeat:
            deck = deck_path.read_text("utf-8")
            tstop = result.steady.final.tstop
            t0 = time.perf_counter()
            engine.run(deck, tstop)
            eng_same.append(time.perf_counter() - t0)
            wall, meas = ngspice_batch(ngspice, deck_path)
            batch.append(wall)
        if rep < repeat_slow:
            wall, nm = ngspice_batch(ngspice, naive_path)
            naive_b.append(wall)
            t0 = time.perf_counter()
            waves = engine.run(naive_path.read_text("utf-8"), NAIVE_SPAN)
            naive_eng.append(time.perf_counter() - t0)
            if rep == 0:  # where could a naive run have stopped?
                needed = settle_point(waves, result.circuit, design.simulation.settle_tolerance)
            del waves
            if simkit_exe:
                t0 = time.perf_counter()
                proc = subprocess.run([simkit_exe, "run", str(case.path), "--json"], capture_output=True,
                                      text=True, check=False)
                cli.append(time.perf_counter() - t0)
                if proc.returncode != 0:
                    raise RuntimeError(f"simkit run {case.path} failed (rc {proc.returncode}): "
                                       f"{proc.stderr[-2000:]}")
                cli_doc = json.loads(proc.stdout)
    assert result is not None
    circuit = result.circuit
    T = circuit.period
    d = case.data
    d["simkit"] = {
        "seconds": whole,
        "time_s": med(whole),
        "engine_seconds": engine_share,
        "engine_time_s": med(engine_share),
        "engine_runs": len(calls),
        "shooting_steps": result.steady.shooting_steps,
        "switch_on_span_s": result.start.tstop,
        "settle_time_s": result.metrics["settle_time_s"],
        "simulated_s": sum(c.tstop for c in calls),
        "settled": result.steady.settled,
        "vout_dc_v": result.metrics["vout_dc_v"],
        "ripple_pp_v": result.metrics["ripple_pp_v"],
        "runs": [{"span_s": c.tstop, "seconds": c.seconds} for c in calls],
    }
    ratio_same = med(eng_same) / med(batch)
    d["final_deck"] = {
        "span_s": result.steady.final.tstop,
        "engine_seconds": eng_same,
        "engine_time_s": med(eng_same),
        "ngspice_b_seconds": batch,
        "ngspice_b_time_s": med(batch),
        "ratio_engine_over_ngspice_b": ratio_same,
        "meets_target": ratio_same <= SAME_SPAN_TARGET,
        "ngspice_b_vout_dc_v": meas.get("vout_dc_v", math.nan),
        "ngspice_b_ripple_pp_v": meas.get("ripple_pp_v", math.nan),
    }
    d["whole_run_ratio_over_ngspice_b_final"] = med(whole) / med(batch)
    if cli:
        d["cli"] = {
            "seconds": cli,
            "time_s": med(cli),
            "ratio_over_ngspice_b_final": med(cli) / med(batch),
            "vout_dc_v": cli_doc["metrics"]["vout_dc_v"],
        }

    # (b) the naive run: settled?  how close to simkit?  and where could it have stopped?
    v_last, v_prev = nm["vout_dc_v"], nm["vout_dc_v_prev"]
    p_last, p_prev = nm["ripple_pp_v"], nm["ripple_pp_v_prev"]
    drift = abs(v_last - v_prev) / MEASURE_PERIODS / abs(v_last)
    ripple_change = abs(p_last - p_prev) / abs(p_last) if p_last else math.inf
    tol = design.simulation.settle_tolerance
    needed += MEASURE_PERIODS * T
    speedup = med(naive_b) / med(whole)
    d["naive"] = {
        "span_s": NAIVE_SPAN,
        "max_step_s": T / naive_steps(design),
        "ngspice_b_seconds": naive_b,
        "ngspice_b_time_s": med(naive_b),
        "engine_seconds": naive_eng,
        "engine_time_s": med(naive_eng),
        "ratio_engine_over_ngspice_b": med(naive_eng) / med(naive_b),
        "vout_dc_v": v_last,
        "ripple_pp_v": p_last,
        "vout_drift_per_period": drift,
        "ripple_change_last_windows": ripple_change,
        "settled": drift < tol and ripple_change < RIPPLE_SETTLED,
        "rel_diff_vout_dc": signed_rel(result.metrics["vout_dc_v"], v_last),
        "rel_diff_ripple_pp": signed_rel(result.metrics["ripple_pp_v"], p_last),
        "span_needed_s": needed,
        "speedup_simkit": speedup,
        "speedup_oracle_naive_est": med(naive_b) * needed / NAIVE_SPAN / med(whole),
        "meets_target": speedup >= NAIVE_SPEEDUP_TARGET,
        "target_applies": case.choke,
    }
    if cli:
        d["naive"]["speedup_cli"] = med(naive_b) / med(cli)


# --------------------------------------------------------------------------------------------
# printing


def ms(s: float) -> str:
    return f"{s * 1e3:.1f} ms" if s < 10 else f"{s:.2f} s"


def table(headers: list[str], rows: list[list[str]]) -> str:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(headers)]
    lines = ["  ".join(h.rjust(w) if i else h.ljust(w) for i, (h, w) in enumerate(zip(headers, widths, strict=True)))]
    lines.append("  ".join("-" * w for w in widths))
    for r in rows:
        lines.append("  ".join(c.rjust(w) if i else c.ljust(w) for i, (c, w) in enumerate(zip(r, widths, strict=True))))
    return "\n".join(lines)


def report(cases: list[Case], meta: dict[str, Any]) -> str:
    out: list[str] = []
    st = meta["startup"]
    out.append(f"simkit benchmark  ({meta['ngspice']}, Python {meta['python']}, {meta['cpus']} CPUs, "
               f"load average at start {meta['loadavg'][0]:.2f})")
    what = "best" if meta["stat"] == "min" else "median"
    out.append(f"each time: the {what} of {meta['repeat']} runs (naive 2 s runs and the command line: "
               f"{meta['repeat_slow']}); all samples in the JSON")
    out.append("")
    out.append("start-up, once per process (excluded from the per-run times below):")
    out.append(f"  import numpy {ms(st['import_numpy_s'])}, scipy.optimize {ms(st['import_scipy_optimize_s'])}, "
               f"rest of simkit.pipeline {ms(st['import_simkit_pipeline_s'])}")
    out.append(f"  PySpice import + libngspice load {ms(st['engine_load_s'])}; "
               f"first simulate() (warm-up, {meta['warmup_design']}) {ms(st['warmup_simulate_s'])}")
    out.append(f"  process start alone: `ngspice -v` {ms(st['ngspice_start_s'])}, "
               f"`simkit --version` {ms(st.get('simkit_version_s', math.nan))}")
    out.append("")

    out.append("(a) the exported steady-state deck, same span: simkit engine (in process) vs `ngspice -b` (wall)")
    rows = []
    for c in cases:
        f = c.data["final_deck"]
        n = c.data["naive"]
        rows.append([c.name, ms(f["span_s"]), ms(f["engine_time_s"]), ms(f["ngspice_b_time_s"]),
                     f"{f['ratio_engine_over_ngspice_b']:.2f}x", "meets" if f["meets_target"] else "MISSES",
                     ms(n["engine_time_s"]), ms(n["ngspice_b_time_s"]), f"{n['ratio_engine_over_ngspice_b']:.2f}x"])
    out.append(table(["design", "span", "engine", "ngspice -b", "ratio", f"<= {SAME_SPAN_TARGET}x",
                      f"{NAIVE_SPAN:g} s deck: engine", "ngspice -b", "ratio"], rows))
    out.append(f"  right: the naive {NAIVE_SPAN:g} s deck of (b) the same way, a long span where ngspice's process"
               " start no longer counts (no target)")
    out.append("")

    out.append("(a) whole run vs `ngspice -b` on the final deck alone")
    rows = []
    for c in cases:
        s = c.data["simkit"]
        cli = c.data.get("cli")
        rows.append([
            c.name, str(s["engine_runs"]), str(s["shooting_steps"]), f"{s['simulated_s']:.3f} s",
            ms(s["time_s"]), ms(s["engine_time_s"]), f"{c.data['whole_run_ratio_over_ngspice_b_final']:.1f}x",
            ms(cli["time_s"]) if cli else "-", f"{cli['ratio_over_ngspice_b_final']:.1f}x" if cli else "-",
        ])
    out.append(table(["design", "runs", "shoots", "simulated", "simulate()", "of it engine", "ratio",
                      "simkit run (CLI)", "ratio"], rows))
    out.append("  runs: engine runs in one simulate() (switch-on, chunks, shooting); simulated: their total span")
    out.append("")

    out.append(f"(b) naive: all state zero, .tran to {NAIVE_SPAN:g} s, same max step, `ngspice -b`")
    rows = []
    for c in cases:
        n = c.data["naive"]
        rows.append([
            c.name, "yes" if c.choke else "no", ms(n["ngspice_b_time_s"]), ms(c.data["simkit"]["time_s"]),
            f"{n['speedup_simkit']:.1f}x", f"{n['speedup_cli']:.2f}x" if "speedup_cli" in n else "-",
            f"{n['span_needed_s']:.3f} s", f"{n['speedup_oracle_naive_est']:.1f}x",
            ("meets" if n["meets_target"] else "MISSES") if n["target_applies"] else "(n/a)",
        ])
    out.append(table(["design", "choke", "naive -b", "simulate()", "speed-up", "vs CLI", "naive needed",
                      "vs that (est.)", f">= {NAIVE_SPEEDUP_TARGET:g}x"], rows))
    out.append(f"  naive needed: time from which the naive output's period mean stays within the settle tolerance"
               f" and its ripple within {RIPPLE_SETTLED:.1%} of their 2 s values, plus the measurement window;")
    out.append("  vs that (est.): speed-up against a naive run of just that span (its time scaled by span)")
    out.append("")

    out.append("(b) accuracy: simkit's figures vs the naive run's last periods, and the naive run's own settling")
    rows = []
    for c in cases:
        n = c.data["naive"]
        s = c.data["simkit"]
        f = c.data["final_deck"]
        rows.append([
            c.name, f"{s['vout_dc_v']:.4f}", f"{n['vout_dc_v']:.4f}", f"{n['rel_diff_vout_dc']:+.1e}",
            f"{s['ripple_pp_v']:.5g}", f"{n['ripple_pp_v']:.5g}", f"{n['rel_diff_ripple_pp']:+.1e}",
            f"{n['vout_drift_per_period']:.1e}", "yes" if n["settled"] else "NO",
            f"{signed_rel(f['ngspice_b_vout_dc_v'], s['vout_dc_v']):+.0e}",
        ])
    out.append(table(["design", "Vdc simkit", "Vdc naive", "rel", "ripple simkit", "ripple naive", "rel",
                      "naive drift/T", "settled", "deck -b Vdc"], rows))
    out.append("  naive drift/T: change per period of the naive Vdc between its last two measurement windows;")
    out.append("  deck -b Vdc: `ngspice -b` on the exported deck against simkit's Vdc (the deck reproduces the figure)")
    out.append("")

    out.append("summary:")
    for c in cases:
        f = c.data["final_deck"]
        n = c.data["naive"]
        out.append(f"  {c.name}: same-span overhead {f['ratio_engine_over_ngspice_b']:.2f}x "
                   f"({'meets' if f['meets_target'] else 'misses'} <= {SAME_SPAN_TARGET}x); "
                   f"on the {NAIVE_SPAN:g} s deck {n['ratio_engine_over_ngspice_b']:.2f}x")
    for c in cases:
        n = c.data["naive"]
        goal = f">= {NAIVE_SPEEDUP_TARGET:g}x"
        verdict = (f"{'meets' if n['meets_target'] else 'misses'} {goal}" if c.choke
                   else f"no choke: the {goal} target is for choke filters")
        settled = "the naive run had settled" if n["settled"] else "the naive run had NOT settled at 2 s"
        out.append(f"  {c.name}: {n['speedup_simkit']:.1f}x faster than the naive 2 s run in process "
                   f"({verdict}); "
                   f"as a fresh `simkit run` {n.get('speedup_cli', math.nan):.2f}x; {settled}; "
                   f"Vdc differs {n['rel_diff_vout_dc']:+.1e}, ripple {n['rel_diff_ripple_pp']:+.1e}")
    with_cli = [c for c in cases if "cli" in c.data]
    if with_cli:
        cli = statistics.mean(c.data["cli"]["time_s"] for c in with_cli)
        sim = statistics.mean(c.data["simkit"]["time_s"] for c in with_cli)
        imports = st["import_numpy_s"] + st["import_scipy_optimize_s"] + st["import_simkit_pipeline_s"]
        out.append(f"  a fresh `simkit run` takes {cli:.2f} s on average, of which simulate() {sim:.2f} s; the rest is "
                   f"start-up: imports {imports:.2f} s (scipy.optimize alone {st['import_scipy_optimize_s']:.2f} s), "
                   f"PySpice + libngspice {st['engine_load_s']:.2f} s, Python + click about "
                   f"{st.get('simkit_version_s', math.nan):.2f} s")
    return "\n".join(out) + "\n"


# --------------------------------------------------------------------------------------------


def default_designs() -> list[Path]:
    from importlib import resources

    root = resources.files("simkit") / "examples"
    return sorted(Path(str(p)) for p in root.iterdir() if str(p).endswith(".toml"))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("designs", nargs="*", type=Path, help="design files (default: the shipped examples)")
    ap.add_argument("--repeat", type=int, default=5, help="runs per short case")
    ap.add_argument("--repeat-slow", type=int, default=3, help="runs per naive 2 s case and per `simkit run`")
    ap.add_argument("--json", type=Path, help="also write every figure and sample to this JSON file")
    ap.add_argument("--stat", choices=("min", "median"), default="min",
                    help="figure of each case's samples: best of N (default) or median")
    ap.add_argument("--ngspice", default=shutil.which("ngspice") or "ngspice", help="the ngspice command")
    args = ap.parse_args(argv)
    global STAT
    STAT = args.stat
    if args.repeat < 1 or args.repeat_slow < 1:
        ap.error("--repeat and --repeat-slow must be at least 1")
    t_start = time.perf_counter()
    loadavg = os.getloadavg()

    # start-up costs, measured as the first imports of this process
    startup: dict[str, float] = {}
    t0 = time.perf_counter()
    import numpy  # noqa: F401

    t1 = time.perf_counter()
    import scipy.optimize  # noqa: F401  (simkit.analysis.estimate imports it)

    t2 = time.perf_counter()
    from simkit.design.loader import load_design
    from simkit.engine.ngspice import get_engine
    from simkit.pipeline import simulate

    t3 = time.perf_counter()
    engine = get_engine()
    t4 = time.perf_counter()
    startup.update(import_numpy_s=t1 - t0, import_scipy_optimize_s=t2 - t1, import_simkit_pipeline_s=t3 - t2,
                   engine_load_s=t4 - t3)

    paths = args.designs or default_designs()
    cases: list[Case] = []
    for p in paths:
        design = load_design(p)
        cases.append(Case(p.stem, p, any(f.kind == "l" for f in design.filters)))
    # warm-up: one whole run, so the first timed run pays no first-use costs
    t0 = time.perf_counter()
    simulate(load_design(paths[0]), engine=engine)
    startup["warmup_simulate_s"] = time.perf_counter() - t0

    ngs_start = time_calls(lambda: subprocess.run([args.ngspice, "-v"], capture_output=True, check=False),
                           args.repeat)
    startup["ngspice_start_s"] = med(ngs_start)
    simkit_exe = find_simkit_exe()
    if simkit_exe:
        sv = time_calls(lambda: subprocess.run([simkit_exe, "--version"], capture_output=True, check=False),
                        args.repeat_slow)
        startup["simkit_version_s"] = med(sv)
    else:
        print("bench: the simkit command was not found; command-line times skipped", file=sys.stderr)

    with tempfile.TemporaryDirectory(prefix="simkit-bench-") as tmp:
        for case in cases:
            print(f"bench: {case.name} ...", file=sys.stderr, flush=True)
            bench_design(case, engine, args.ngspice, simkit_exe, Path(tmp), args.repeat, args.repeat_slow)

    meta: dict[str, Any] = {
        "ngspice": ngspice_version(args.ngspice),
        "python": platform.python_version(),
        "platform": platform.platform(),
        "cpus": os.cpu_count(),
        "loadavg": list(loadavg),
        "repeat": args.repeat,
        "repeat_slow": args.repeat_slow,
        "stat": args.stat,
        "warmup_design": cases[0].name,
        "startup": startup,
        "targets": {"same_span_max_ratio": SAME_SPAN_TARGET, "naive_min_speedup": NAIVE_SPEEDUP_TARGET,
                    "naive_span_s": NAIVE_SPAN},
    }
    text = report(cases, meta)
    meta["bench_wall_s"] = time.perf_counter() - t_start
    print(text, end="")
    print(f"(benchmark wall time {meta['bench_wall_s']:.1f} s)")
    if args.json:
        doc = {**meta, "designs": {c.name: {"path": str(c.path), "choke": c.choke, **c.data} for c in cases}}
        args.json.write_text(json.dumps(_finite(doc), indent=2) + "\n", "utf-8")
        print(f"bench: wrote {args.json}", file=sys.stderr)
    return 0


def _finite(x: Any) -> Any:
    """The document with every non-finite float replaced by None (JSON has no NaN or inf)."""
    if isinstance(x, dict):
        return {str(k): _finite(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_finite(v) for v in x]
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


if __name__ == "__main__":
    sys.exit(main())
