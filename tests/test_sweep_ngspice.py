"""Sweeps, spreads and sizing with the real simulator: kill and resume, failures, seeds, a known answer.

Sources of the expected values are named beside each check: the reference solver (tests/refsolver.py)
for figures, numpy as an independent reference for the steps and statistics, Ohm's law, and
docs/reference.md for the behaviour (one row per point, no point lost or duplicated, exit codes).
"""

from __future__ import annotations

import csv
import itertools
import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from simkit.cli import main
from simkit.design.loader import apply_overrides, design_from_dict, parse_toml_text
from simkit.pipeline import simulate
from tests.conftest import ROOT
from tests.refsolver import Circuit, Diode, steady_state
from tests.test_vs_refsolver import TOLERANCE

TINY = """\
title = "Test: bridge, one reservoir, resistor load"
[source]
vrms = "250"
frequency = "50"
resistance = "{rs}"
mains_tolerance = "10%"
[rectifier]
topology = "bridge"
diode = "1N4007"
[[filter]]
c = "100u"
tolerance = "20%"
[load]
kind = "resistor"
r = "5k"
tolerance = "5%"
"""


def tiny(tmp_path: Path, rs: str = "25", name: str = "tiny.toml") -> Path:
    p = tmp_path / name
    p.write_text(TINY.format(rs=rs), "utf-8")
    return p


def call(args: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    with pytest.raises(SystemExit) as info:
        main(args)
    out, err = capsys.readouterr()
    return int(info.value.code or 0), out, err


def read_csv(path: Path) -> list[dict[str, str]]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def journal(path: Path) -> list[dict]:  # type: ignore[type-arg]
    raw = path.read_bytes()
    return [json.loads(line) for line in raw[: raw.rfind(b"\n") + 1].splitlines()[1:]]


def _alive(pid: int) -> bool:
    """Is the process running (a zombie has ended; proc(5): the state is the field after the name)?"""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] not in (b"Z", b"X")
    except (OSError, IndexError):
        return False


@pytest.mark.ngspice
def test_a_killed_sweep_resumes_without_losing_or_duplicating_points(tmp_path: Path) -> None:
    design = tiny(tmp_path)
    out = tmp_path / "out"
    n = 20
    cmd = [sys.executable, "-m", "simkit.cli", "sweep", str(design), "--vary", f"filter.0.c=47u:470u:{n}log",
           "--jobs", "2", "--out", str(out)]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    jpath = out / "sweep.journal"
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if jpath.exists() and len(journal(jpath)) >= 3:
                break
            time.sleep(0.02)
        assert proc.poll() is None, "the sweep ended before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)  # no clean-up at all: as a power cut is for the parent
    finally:
        proc.wait(30)
    before = journal(jpath)
    assert 3 <= len(before) < n, "the kill must land mid-sweep"
    # The workers notice their parent is gone and exit by themselves.
    workers = {e["worker"] for e in before}
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and any(_alive(w) for w in workers):
        time.sleep(0.1)
    left = [w for w in workers if _alive(w)]
    for w in left:  # clean up what this test started before failing
        os.kill(w, signal.SIGKILL)
    assert not left, f"worker processes outlived their killed parent: {left}"

    done = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "resuming" in done.stderr
    after = journal(jpath)
    # Finished points are kept as they were (not recomputed), the rest are added, none twice.
    assert after[: len(before)] == before
    points = [e["point"] for e in after]
    assert sorted(points) == list(range(n))
    rows = read_csv(out / "sweep.csv")
    assert [int(r["point"]) for r in rows] == list(range(n))
    # numpy.geomspace is the independent reference for the log steps of 47u..470u
    assert np.allclose([float(r["filter.0.c"]) for r in rows], np.geomspace(47e-6, 470e-6, n), rtol=1e-13, atol=0)
    assert all(r["error"] == "" for r in rows)
    # Plumbing: each row holds its own point's figures.  The first point starts from the closed-form estimate
    # as a run alone does: the same to the 7 digits the CSV gives.  Later points start from their solved
    # neighbour (docs/reference.md, How simkit simulates) and may settle on the step the neighbour verified:
    # the same within the accuracy the step is chosen for (0.05 % on DC, 0.5 % on ripple).
    for row, tol in ((rows[0], (1e-6, 1e-6)), (rows[-1], (5e-4, 5e-3))):
        alone = simulate(design_from_dict(apply_overrides(parse_toml_text(TINY.format(rs="25")),
                                                          [f"filter.0.c={row['filter.0.c']}"], "tiny.toml")))
        for key, rel in zip(("vout_dc_v", "ripple_pp_v"), tol, strict=True):
            assert float(row[key]) == pytest.approx(alone.metrics[key], rel=rel), key
    # The ripple falls as C grows (a larger capacitor discharges less between pulses).
    ripple = [float(r["ripple_pp_v"]) for r in rows]
    assert all(b < a for a, b in itertools.pairwise(ripple))


@pytest.mark.ngspice
def test_a_point_that_fails_does_not_stop_the_sweep(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    design = tiny(tmp_path)
    out = tmp_path / "out"
    code, stdout, err = call(["sweep", str(design), "--vary", "filter.0.c=-10u,100u", "--vary", "load.r=2k,5k",
                              "--jobs", "2", "--out", str(out), "--plot", "ripple_pp_v,vout_dc_v", "--report"],
                             capsys)
    assert code == 0, err
    assert "4 of 4 points done, 2 failed" in stdout
    rows = read_csv(out / "sweep.csv")
    assert len(rows) == 4
    failed = [r for r in rows if r["error"]]
    assert len(failed) == 2 and all(float(r["filter.0.c"]) == -10e-6 for r in failed)
    assert all("filter.0.c" in r["error"] and r["vout_dc_v"] == "" for r in failed)
    ok = [r for r in rows if not r["error"]]
    # Each row ran with its own load: Ohm's law for the means, I = V / R (measured within 1e-12).
    assert len(ok) == 2
    for r in ok:
        assert float(r["iout_dc_a"]) == pytest.approx(float(r["vout_dc_v"]) / float(r["load.r"]), rel=1e-6)
    png = (out / "sweep.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 10_000
    # --report: the document names the failed points and carries the high-voltage cautions (DEVELOPERS.md rule)
    md = (out / "report.md").read_text("utf-8")
    assert "## Failed points" in md and "filter.0.c: must be positive" in md
    assert "High-voltage cautions" in md and (out / "report.html").stat().st_size > 10_000


@pytest.mark.ngspice
def test_plot_figures_may_be_repeated_or_listed(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # "--plot a --plot b" is "--plot a,b": the same plot, to the byte (the plots are repeatable).
    design = tiny(tmp_path)
    pngs = []
    for name, plots in (("listed", ["--plot", "ripple_pp_v,vout_dc_v"]),
                        ("repeated", ["--plot", "ripple_pp_v", "--plot", "vout_dc_v"])):
        code, _, err = call(["sweep", str(design), "--vary", "load.r=2k,5k", "--jobs", "1", "--out",
                             str(tmp_path / name), *plots], capsys)
        assert code == 0, err
        pngs.append((tmp_path / name / "sweep.png").read_bytes())
    assert pngs[0] == pngs[1]


@pytest.mark.ngspice
def test_spread_with_a_seed_gives_the_same_results_twice(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    design = tiny(tmp_path)
    results = []
    for name in ("a", "b"):
        code, stdout, err = call(["spread", str(design), "--runs", "4", "--seed", "7", "--jobs", "2",
                                  "--out", str(tmp_path / name), *(["--report"] if name == "b" else [])], capsys)
        assert code == 0, err
        assert "ripple_pp_v" in stdout
        results.append((tmp_path / name / "spread.csv").read_text("utf-8"))
    assert results[0] == results[1]  # same seed: the same draws and the same figures, to the last digit
    md = (tmp_path / "b" / "report.md").read_text("utf-8")
    assert "## What was drawn" in md and "filter.0.tolerance" in md and "High-voltage cautions" in md
    rows = read_csv(tmp_path / "a" / "spread.csv")
    assert len(rows) == 4 and all(r["error"] == "" for r in rows)
    # Every draw within its tolerance of the nominal (uniform: docs/reference.md, [spread] distribution)
    for r in rows:
        assert abs(float(r["filter.0.c"]) / 100e-6 - 1) <= 0.20
        assert abs(float(r["load.r"]) / 5000 - 1) <= 0.05
        assert abs(float(r["source.vrms"]) / 250 - 1) <= 0.10
    summary = json.loads((tmp_path / "a" / "spread.json").read_text("utf-8"))["summary"]["figures"]["ripple_pp_v"]
    ripple = [float(r["ripple_pp_v"]) for r in rows]
    # numpy.percentile as the independent reference for the 1/50/99 % points, extremes with their run
    assert summary["p1"] == pytest.approx(np.percentile(ripple, 1), rel=1e-12)
    assert summary["p50"] == pytest.approx(np.median(ripple), rel=1e-12)
    assert summary["p99"] == pytest.approx(np.percentile(ripple, 99), rel=1e-12)
    assert summary["max"] == max(ripple) and summary["max_run"] == ripple.index(max(ripple))


@pytest.mark.ngspice
def test_size_finds_the_reservoir_of_the_refsolver(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    design = tiny(tmp_path, rs="5")
    target = 2.0
    code, stdout, err = call(["size", str(design), "--vary", "filter.0.c=10u:10m", "--target",
                              f"ripple_pp_v<={target:g}", "--json"], capsys)
    assert code == 0, err
    doc = json.loads(stdout)
    c = doc["value"]
    assert doc["met"] and doc["log_scale"]
    # The size contract (docs/reference.md): the target is met, within 2 % of it.
    assert target * 0.98 <= doc["figure"] <= target
    assert doc["simulations"] <= 12
    # Plumbing: a run of the sized design gives the figure size reported.
    code, stdout, err = call(["run", str(design), "--json", "--set", f"filter.0.c={c!r}"], capsys)
    assert code == 0, err
    assert json.loads(stdout)["metrics"]["ripple_pp_v"] == pytest.approx(doc["figure"], rel=1e-6)
    # The solver gives the same ripple for the capacitor size found (same circuit and the library 1N4007's
    # junction law; its reduced formulation has no 10 Meg ties, which change the ripple by about 1e-5).
    law = Diode("exponential", i_s=5e-9, n=1.8, r_d=0.04)
    ref = steady_state(Circuit("bridge", 250.0, 50.0, 5.0, 5e3, c, law))
    assert doc["figure"] == pytest.approx(ref.ripple_pp, rel=TOLERANCE["ripple"])


@pytest.mark.ngspice
def test_size_says_when_the_range_does_not_bracket_the_target(tmp_path: Path,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    design = tiny(tmp_path)
    code, _, err = call(["size", str(design), "--vary", "filter.0.c=1m:2m", "--target", "ripple_pp_v<=20"], capsys)
    assert code == 2  # bad input (docs/reference.md, exit codes)
    assert "met across this range" in err
    code, _, err = call(["size", str(design), "--vary", "filter.0.c=1u:2m", "--target", "ripple_p<=2"], capsys)
    assert code == 2 and "not a figure" in err


@pytest.mark.ngspice
def test_sweep_on_a_local_dask_cluster_resumes_and_records_failures(tmp_path: Path) -> None:
    import dask
    from distributed import LocalCluster

    from simkit.sweep.runner import RunOptions, run_sweep
    from simkit.sweep.worker import simulate_point

    design = tiny(tmp_path)
    out = tmp_path / "out"
    varies = ["filter.0.c=-1u,47u,100u,220u", "load.r=2k,5k"]
    # Loopback only; one thread per worker process (one ngspice each); a worker that dies is not retried.
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}), \
            LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                         dashboard_address=None) as cluster:
        opts = RunOptions(out=out, scheduler=cluster.scheduler_address, progress=False, evaluate=simulate_point)
        first = run_sweep(design, varies, opts)
        assert first.finished == 8 and first.failed == 2
        # Drop the last two finished points from the journal, as if they had been in flight at a crash.
        jpath = out / "sweep.journal"
        lines = jpath.read_text("utf-8").splitlines(keepends=True)
        dropped = {json.loads(x)["point"] for x in lines[-2:]}
        jpath.write_text("".join(lines[:-2]), "utf-8")
        again = run_sweep(design, varies, opts)
        assert again.resumed and again.computed == len(dropped - {0, 1})
        # A point that kills its cluster worker becomes an error row; the others finish.
        from tests.sweep_helpers import fake_point

        crash = RunOptions(out=tmp_path / "crash", scheduler=cluster.scheduler_address, progress=False,
                           evaluate=fake_point)
        report = run_sweep(design, ["source.vrms=100,666,300"], crash)
    assert report.finished == 3 and report.failed == 1
    crash_rows = read_csv(tmp_path / "crash" / "sweep.csv")
    assert "cluster could not run this point" in crash_rows[1]["error"]
    assert float(crash_rows[2]["vout_dc_v"]) == pytest.approx(math.sqrt(2) * 300)
    rows = read_csv(out / "sweep.csv")
    assert [int(r["point"]) for r in rows] == list(range(8))
    assert sorted(e["point"] for e in journal(out / "sweep.journal")) == list(range(8))
    assert sum(1 for r in rows if r["error"]) == 2 and all(r["vout_dc_v"] for r in rows if not r["error"])


@pytest.mark.ngspice
def test_sweep_with_check_adds_the_verdicts(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    design = tiny(tmp_path)
    out = tmp_path / "out"
    code, stdout, err = call(["sweep", str(design), "--vary", "bleeder.r=22k,100k", "--set", "bleeder.r=100k",
                              "--check", "--jobs", "2", "--out", str(out)], capsys)
    assert code == 0, err
    rows = read_csv(out / "sweep.csv")
    rule = "check:C1 discharge below 60 V"
    assert rule in rows[0] and "check:D1 reverse voltage" in rows[0]
    # Exponential decay through the bleeder (derived here): t = R C ln(V0/V_safe), from V0, the reservoir's
    # charge in the cold-load corner at +10 % mains (the solver's steady state of that circuit: 275 V, no
    # load, the bleeder alone), to 60 V.  The limit, 60 V within 5 s, is IEC 60204-1 cl. 6.2.4 (from
    # memory), simkit's default: 22 k gives about 4.1 s, inside it; 100 k about 18.6 s, beyond it.
    law = Diode("exponential", i_s=5e-9, n=1.8, r_d=0.04)
    seconds = {}
    for r_bleed in (22e3, 100e3):
        v0 = steady_state(Circuit("bridge", 275.0, 50.0, 25.0, r_bleed, 100e-6, law)).vout_max
        seconds[r_bleed] = r_bleed * 100e-6 * math.log(v0 / 60)
    assert seconds[22e3] < 5 < seconds[100e3]
    assert rows[0][rule] == "pass" and rows[1][rule] == "fail"
    assert rows[1]["check"] == "fail"
    assert "check: " in stdout and "1 fail" in stdout
