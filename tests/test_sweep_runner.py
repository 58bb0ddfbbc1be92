"""The sweep machinery without a simulator: failures, dying and hanging workers, resume, guards.

Points are evaluated by the stand-ins of tests/sweep_helpers.py in real spawned worker processes.
What is expected comes from docs/reference.md (Sweeps): one row per point, no point lost or
duplicated, a failed point recorded with its error while the sweep goes on, another sweep's
results never replaced without --force, exit 2 for bad input.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import pytest

from simkit.errors import SimulationError, UsageError
from simkit.sweep.journal import open_journal
from simkit.sweep.runner import RunOptions, RunReport, run_sweep
from simkit.sweep.worker import no_prepare
from tests.sweep_helpers import DESIGN, fake_point, prepare_that_exits, prepare_without_simulator


@pytest.fixture
def design(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    markers = tmp_path / "markers"
    markers.mkdir()
    monkeypatch.setenv("SIMKIT_TEST_MARKERS", str(markers))  # spawned workers inherit it
    p = tmp_path / "design.toml"
    p.write_text(DESIGN, "utf-8")
    return p


def sweep(design: Path, out: Path, varies: list[str], **kw: object) -> RunReport:
    opts = RunOptions(out=out, jobs=int(kw.pop("jobs", 2)), timeout=float(kw.pop("timeout", 60.0)),  # type: ignore[call-overload]
                      force=bool(kw.pop("force", False)), retry_failed=bool(kw.pop("retry_failed", False)),
                      progress=False, evaluate=fake_point, prepare=no_prepare)
    return run_sweep(design, varies, opts, **kw)  # type: ignore[arg-type]


def rows(out: Path) -> list[dict[str, str]]:
    with open(out / "sweep.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def journal_points(out: Path) -> list[int]:
    lines = (out / "sweep.journal").read_text("utf-8").splitlines()[1:]
    return [json.loads(line)["point"] for line in lines]


def test_failing_dying_and_hanging_points_do_not_stop_the_sweep(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    report = sweep(design, out, ["source.vrms=100,555,666,444,777,300"], timeout=3.0)
    assert report.finished == 6 and report.complete
    got = {float(r["source.vrms"]): r for r in rows(out)}
    assert list(got) == [100, 555, 666, 444, 777, 300]  # one row per point, in point order
    for v in (100.0, 300.0, 444.0):
        # plumbing: the stand-in's figure is sqrt(2) x vrms (tests/sweep_helpers.py), so each row holds its own point
        assert float(got[v]["vout_dc_v"]) == pytest.approx(math.sqrt(2) * v, rel=1e-12)
        assert got[v]["error"] == ""
    assert "did not complete" in got[555]["error"]
    assert "died" in got[666]["error"] and "SIGABRT" in got[666]["error"] and got[666]["vout_dc_v"] == ""
    assert "--timeout" in got[777]["error"]
    doc = json.loads((out / "sweep.json").read_text("utf-8"))
    by_point = {r["point"]: r for r in doc["rows"]}
    assert doc["complete"] and doc["failed"] == 3
    entries = {json.loads(x)["point"]: json.loads(x) for x in (out / "sweep.journal").read_text().splitlines()[1:]}
    assert entries[2]["attempts"] == 2  # the point that kills its worker was tried once more, then recorded
    assert entries[3]["attempts"] == 2 and entries[3]["error"] is None  # died once, fine on a fresh worker
    assert by_point[4]["error"].startswith("stopped after 3 s")
    assert sorted(journal_points(out)) == list(range(6))  # none duplicated


def test_resume_keeps_finished_points_and_retry_failed_redoes_failures(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    first = sweep(design, out, ["source.vrms=100,333,300"])
    assert first.failed == 1 and first.computed == 3
    (Path(str(design.parent / "markers")) / "fixed").write_text("x")
    again = sweep(design, out, ["source.vrms=100,333,300"])
    assert again.resumed and again.computed == 0 and again.failed == 1  # finished (even failed) points are kept
    retried = sweep(design, out, ["source.vrms=100,333,300"], retry_failed=True)
    assert retried.computed == 1 and retried.failed == 0
    assert [float(r["vout_dc_v"]) for r in rows(out)] == pytest.approx([math.sqrt(2) * v for v in (100, 333, 300)])
    assert len(rows(out)) == 3


def test_torn_last_line_is_cut_and_the_point_run_again(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    sweep(design, out, ["filter.0.c=10u:100u:5log"])
    j = out / "sweep.journal"
    raw = j.read_bytes()
    cut = raw.rstrip(b"\n").rfind(b"\n") + 1
    j.write_bytes(raw[: cut + 25])  # a power cut in the middle of writing the last point
    lost = json.loads(raw[cut:])["point"]
    report = sweep(design, out, ["filter.0.c=10u:100u:5log"])
    assert report.computed == 1
    assert sorted(journal_points(out)) == list(range(5)) and journal_points(out)[-1] == lost
    assert [int(r["point"]) for r in rows(out)] == list(range(5))


def test_another_sweep_is_refused_without_force(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    sweep(design, out, ["load.r=1k,2k"])
    before = (out / "sweep.csv").read_bytes()
    with pytest.raises(UsageError, match="another sweep"):
        sweep(design, out, ["load.r=1k,3k"])
    with pytest.raises(UsageError, match="another sweep"):
        sweep(design, out, ["load.r=1k,2k"], overrides=["source.vrms=200"])
    design.write_text(DESIGN.replace('"10"', '"12"'), "utf-8")  # the design file changed
    with pytest.raises(UsageError, match="design file"):
        sweep(design, out, ["load.r=1k,2k"])
    assert (out / "sweep.csv").read_bytes() == before
    report = sweep(design, out, ["load.r=1k,3k"], force=True)
    assert report.computed == 2 and not report.resumed
    assert [r["load.r"] for r in rows(out)] == ["1000.0", "3000.0"]


def test_files_simkit_did_not_write_are_kept(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "sweep.csv").write_text("my own notes\n", "utf-8")
    with pytest.raises(UsageError, match="refusing to overwrite"):
        sweep(design, out, ["load.r=1k,2k"])
    assert (out / "sweep.csv").read_text("utf-8") == "my own notes\n"
    assert not (out / "sweep.journal").exists()
    (out / "sweep.csv").unlink()
    (out / "sweep.journal").write_text("not a journal\n", "utf-8")
    with pytest.raises(UsageError, match="not a simkit journal"):
        sweep(design, out, ["load.r=1k,2k"])


def test_one_writer_per_journal(tmp_path: Path) -> None:
    first = open_journal(tmp_path / "sweep.journal", {"kind": "sweep"}, force=False)
    try:
        with pytest.raises(UsageError, match="another simkit"):
            open_journal(tmp_path / "sweep.journal", {"kind": "sweep"}, force=False)
    finally:
        first.close()


def test_csv_columns_and_zip(design: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    sweep(design, out, ["filter.0.c=10u,20u", "load.r=1k,2k"], paired=True)
    header = (out / "sweep.csv").read_text("utf-8").splitlines()[0].split(",")
    # docs/reference.md (sweep.csv): the varied values named by PATH, then every figure, then the error column
    assert header == ["point", "filter.0.c", "load.r", "vout_dc_v", "ripple_pp_v", "warnings", "error"]
    got = rows(out)
    assert [(float(r["filter.0.c"]), float(r["load.r"])) for r in got] == [(10e-6, 1000.0), (20e-6, 2000.0)]
    assert float(got[1]["ripple_pp_v"]) == pytest.approx(1 / 20e-6)


def test_flat_rows_are_the_csv_rows() -> None:
    # The API's Sweep.rows and sweep.csv come from the same rows: same columns in the same order.
    from simkit.sweep.table import csv_text, flat_rows

    entries = [{"point": 0, "values": {"load.r": 4000.0}, "metrics": {"vout_dc_v": 300.5}, "check": "marginal",
                "verdicts": {"D1 reverse voltage": "marginal"}, "warnings": ["w1", "w2"], "error": None},
               {"point": 1, "values": {"load.r": -1.0}, "metrics": {}, "warnings": [],
                "error": "load.r: must be above 0\nsecond line"}]
    flat = flat_rows(["load.r"], entries, no_figure=math.nan)
    parsed = list(csv.DictReader(csv_text(["load.r"], entries).splitlines()))
    assert [list(r) for r in flat] == [list(r) for r in parsed]
    assert list(flat[0]) == ["point", "load.r", "vout_dc_v", "check", "check:D1 reverse voltage", "warnings", "error"]
    assert flat[0]["check:D1 reverse voltage"] == parsed[0]["check:D1 reverse voltage"] == "marginal"
    assert flat[0]["warnings"] == ["w1", "w2"] and parsed[0]["warnings"] == "w1; w2"
    assert math.isnan(flat[1]["vout_dc_v"]) and parsed[1]["vout_dc_v"] == "" and flat[1]["check"] is None
    assert parsed[1]["error"] == "load.r: must be above 0 / second line"
    assert flat_rows(["load.r"], entries)[1]["vout_dc_v"] is None


@pytest.mark.parametrize(("prepare", "words"), [(prepare_that_exits, "die while starting"),
                                                 (prepare_without_simulator, "could not start the simulator")])
def test_workers_that_cannot_start_stop_the_run_with_exit_3(design: Path, tmp_path: Path, prepare: object,
                                                          words: str) -> None:
    opts = RunOptions(out=tmp_path / "out", jobs=2, progress=False, evaluate=fake_point,
                      prepare=prepare)  # type: ignore[arg-type]
    with pytest.raises(SimulationError, match=words) as info:
        run_sweep(design, ["load.r=1k,2k,3k"], opts)
    assert info.value.exit_code == 3  # the simulation could not be completed (docs/reference.md, exit codes)
    assert journal_points(tmp_path / "out") == []  # no point blamed for it


def test_workers_are_forked_only_where_that_is_safe(monkeypatch: pytest.MonkeyPatch) -> None:
    # Python's multiprocessing documentation: fork copies the parent as it is (its threads do not come
    # along, a loaded library's state does), so a parent with threads or with ngspice loaded spawns.
    import sys
    import threading

    from simkit.sweep import pool

    monkeypatch.setattr(sys, "platform", "linux")
    monkeypatch.setitem(sys.modules, "PySpice", object())
    assert pool._start_method() == "spawn"
    monkeypatch.delitem(sys.modules, "PySpice")
    monkeypatch.setattr(threading, "active_count", lambda: 1)
    assert pool._start_method() == "fork"
    monkeypatch.setattr(threading, "active_count", lambda: 2)
    assert pool._start_method() == "spawn"
    monkeypatch.setattr(threading, "active_count", lambda: 1)
    monkeypatch.setattr(sys, "platform", "darwin")
    assert pool._start_method() == "spawn"
