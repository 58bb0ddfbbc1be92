"""Nothing lost, nothing written elsewhere (issue 14): links, locks, temporaries, the machine's faults.

Each test failed before the fix it guards (the commit that added it says how that was checked).
Most run the output layer or the command line without simulating; a few go end to end.
"""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from simkit.errors import OutputError, UsageError
from simkit.report.outputs import LOCK, MANIFEST, TMP_SUFFIX, OutputDir, held_locks, write_atomic
from tests.conftest import BRIDGE_TOML, write_design
from tests.robust_helpers import ROOT, call, one_line_error
from tests.sweep_helpers import DESIGN, fake_point


def temporaries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.rglob(f"*{TMP_SUFFIX}"))


@pytest.fixture
def outside(tmp_path: Path) -> Path:
    """A file outside every output folder, which no command may touch."""
    p = tmp_path / "precious.txt"
    p.write_text("the user's own file\n", "utf-8")
    return p


# --- symbolic links ---------------------------------------------------------------------------


@pytest.mark.ngspice
def test_run_out_never_writes_through_links_planted_under_temporary_names(
        tmp_path: Path, outside: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    out = tmp_path / "res"
    out.mkdir()
    for name in ("result.json.tmp-simkit", "deck.cir.tmp-simkit", ".simkit-manifest.json.tmp",
                 ".simkit-manifest.json.tmp-simkit"):
        (out / name).symlink_to(outside)
    code, _, err = call(["run", str(p), "--out", str(out)], capsys)
    assert code == 0, err
    assert outside.read_text("utf-8") == "the user's own file\n"
    assert json.loads((out / "result.json").read_text("utf-8"))["design"] == "Test: bridge into CRC"
    assert temporaries(out) == sorted(n for n in os.listdir(out) if n.endswith(TMP_SUFFIX))  # only the planted ones


@pytest.mark.parametrize("force", [False, True])
def test_a_link_where_a_result_goes_is_refused_force_included(tmp_path: Path, outside: Path, force: bool) -> None:
    out = OutputDir(tmp_path / "res", force=force)
    (out.path / "result.json").symlink_to(outside)
    with pytest.raises(OutputError, match=r"result\.json: is a symbolic link"):
        out.check(["result.json"])
    with pytest.raises(OutputError, match=r"result\.json: is a symbolic link"):
        out.write("result.json", "{}")
    assert outside.read_text("utf-8") == "the user's own file\n"
    assert (out.path / "result.json").is_symlink()
    assert temporaries(out.path) == []
    out.close()


def test_a_linked_manifest_is_refused(tmp_path: Path, outside: Path) -> None:
    folder = tmp_path / "res"
    folder.mkdir()
    (folder / MANIFEST).symlink_to(outside)
    with pytest.raises(OutputError, match="symbolic link"):
        OutputDir(folder)
    assert outside.read_text("utf-8") == "the user's own file\n"


def test_sweep_force_never_truncates_through_a_linked_journal(tmp_path: Path, outside: Path) -> None:
    from simkit.sweep.runner import RunOptions, run_sweep
    from simkit.sweep.worker import no_prepare

    design = write_design(tmp_path, DESIGN)
    out = tmp_path / "sweep"
    out.mkdir()
    (out / "sweep.journal").symlink_to(outside)
    opts = RunOptions(out=out, jobs=1, progress=False, evaluate=fake_point, prepare=no_prepare, force=True)
    with pytest.raises(UsageError, match=r"sweep\.journal: is a symbolic link"):
        run_sweep(design, ["load.r=1k,2k"], opts)
    assert outside.read_text("utf-8") == "the user's own file\n"


@pytest.mark.ngspice
def test_netlist_o_on_a_dangling_link_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    target = tmp_path / "elsewhere" / "created.cir"
    target.parent.mkdir()
    link = tmp_path / "deck.cir"
    link.symlink_to(target)
    for force in ([], ["--force"]):
        code, _, err = call(["netlist", str(p), "-o", str(link), *force], capsys)
        assert code == 2, err
        assert "deck.cir: is a symbolic link" in one_line_error(err)
    assert not target.exists()


def test_new_on_a_dangling_link_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "created.toml"
    link = tmp_path / "design.toml"
    link.symlink_to(target)
    code, _, err = call(["new", str(link)], capsys)
    assert code == 2
    assert "design.toml: is a symbolic link" in one_line_error(err)
    assert not target.exists()


def test_new_writes_a_new_file_and_never_replaces_one(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = tmp_path / "supply.toml"
    assert call(["new", str(p)], capsys)[0] == 0
    assert "[rectifier]" in p.read_text("utf-8")
    p.write_text("mine\n", "utf-8")
    code, _, err = call(["new", str(p)], capsys)
    assert code == 2 and "exists" in err
    assert p.read_text("utf-8") == "mine\n"
    assert temporaries(tmp_path) == []


def test_demo_refuses_a_linked_example_folder_before_simulating(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from simkit.demo import example_files

    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    out = tmp_path / "results"
    out.mkdir()
    (out / example_files()[0].stem).symlink_to(elsewhere, target_is_directory=True)
    code, _, err = call(["demo", "--out", str(out), "--force"], capsys)
    assert code == 2, err
    assert "is a symbolic link" in err
    assert list(elsewhere.iterdir()) == []


def test_a_failed_write_leaves_no_temporary(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A full disk, as the operating system reports it, in the middle of writing a result.
    out = OutputDir(tmp_path / "res")
    out.write("keep.txt", "first\n")
    real_write = os.write

    def full(fd: int, data: bytes) -> int:
        if len(data) > 100:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(fd, data)

    monkeypatch.setattr(os, "write", full)
    with pytest.raises(OutputError, match="No space left on device"):
        out.write("big.bin", b"x" * 1000)
    monkeypatch.undo()
    assert temporaries(out.path) == []
    assert not (out.path / "big.bin").exists()
    assert (out.path / "keep.txt").read_text("utf-8") == "first\n"
    out.close()


def test_write_atomic_replaces_only_regular_files(tmp_path: Path) -> None:
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    with pytest.raises(OutputError, match="FIFO"):
        write_atomic(fifo, "x")
    (tmp_path / "dir").mkdir()
    with pytest.raises(OutputError, match="folder"):
        write_atomic(tmp_path / "dir", "x")
    write_atomic(tmp_path / "plain.txt", "one")
    write_atomic(tmp_path / "plain.txt", "two")
    assert (tmp_path / "plain.txt").read_text() == "two"
    assert temporaries(tmp_path) == []


# --- one writer per folder --------------------------------------------------------------------


HOLDER = textwrap.dedent("""
    import sys, time
    from simkit.report.outputs import OutputDir, set_command
    set_command("simkit sweep")
    out = OutputDir(sys.argv[1])
    print("locked", flush=True)
    time.sleep(60)
""")


def _hold(folder: Path) -> subprocess.Popen[str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen([sys.executable, "-c", HOLDER, str(folder)], stdout=subprocess.PIPE, text=True, env=env)
    assert proc.stdout is not None and proc.stdout.readline().strip() == "locked"
    return proc


def test_a_second_writer_is_refused_naming_the_holder(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folder = tmp_path / "shared"
    holder = _hold(folder)
    try:
        with pytest.raises(OutputError) as info:
            OutputDir(folder)
        text = str(info.value)
        assert f"process {holder.pid}" in text and "simkit sweep" in text
        # The command line: exit 2 before anything is simulated (no ngspice needed for the refusal).
        design = write_design(tmp_path, BRIDGE_TOML)
        code, _, err = call(["run", str(design), "--out", str(folder)], capsys)
        assert code == 2
        assert f"process {holder.pid}" in one_line_error(err)
        assert not (folder / "result.json").exists()
    finally:
        holder.kill()
        holder.wait()
    # The holder died without cleaning up: its lock is taken over.
    assert (folder / LOCK).exists()
    with OutputDir(folder) as out:
        out.write("a.txt", "a")
    assert not (folder / LOCK).exists()


def test_a_stale_lock_file_is_taken_over(tmp_path: Path) -> None:
    folder = tmp_path / "f"
    folder.mkdir()
    (folder / LOCK).write_text("pid 999999999\ncommand simkit sweep\n", "utf-8")  # nobody holds its flock
    with OutputDir(folder) as out:
        assert out.path / LOCK in held_locks()
    assert not (folder / LOCK).exists()


def test_sweep_and_run_in_one_folder_cannot_lose_manifest_entries(tmp_path: Path) -> None:
    from simkit.sweep.runner import RunOptions, run_sweep
    from simkit.sweep.worker import no_prepare

    design = write_design(tmp_path, DESIGN)
    out = tmp_path / "both"
    opts = RunOptions(out=out, jobs=1, progress=False, evaluate=fake_point, prepare=no_prepare)
    run_sweep(design, ["load.r=1k,2k"], opts)
    # Another writer that does not know the lock protocol (an older simkit) adds its own entry
    # while a command has the folder open: saving the manifest merges instead of overwriting.
    with OutputDir(out) as first:
        manifest = json.loads((out / MANIFEST).read_text("utf-8"))
        manifest["other.txt"] = "0" * 64
        (out / MANIFEST).write_text(json.dumps(manifest), "utf-8")
        first.write("result.json", "{}\n")
    manifest = json.loads((out / MANIFEST).read_text("utf-8"))
    assert {"sweep.csv", "sweep.json", "other.txt", "result.json"} <= set(manifest)
    # ...and the sweep resumes without --force.
    again = run_sweep(design, ["load.r=1k,2k"], opts)
    assert again.resumed and again.computed == 0


def test_an_output_folder_is_locked_while_open_and_left_clean(tmp_path: Path) -> None:
    folder = tmp_path / "new" / "deep"
    with OutputDir(folder):
        assert (folder / LOCK).exists()
    # Created for nothing: removed again, with the parents it created.
    assert not (tmp_path / "new").exists()


# --- the machine's faults are exit 2, found before simulating ---------------------------------


def test_an_unwritable_output_folder_is_exit_2_before_simulating(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    import simkit.cli
    import simkit.demo

    def no_simulation(*args: object, **kwargs: object) -> None:
        raise AssertionError("simulated before checking the output folder")

    monkeypatch.setattr(simkit.cli, "_simulate", no_simulation)
    monkeypatch.setattr(simkit.demo, "simulate", no_simulation)
    p = write_design(tmp_path, BRIDGE_TOML)
    # /proc/self cannot hold new folders or files, whoever runs the test (root included).
    for args in (["run", str(p), "--out", "/proc/self/simkit-out"], ["report", str(p), "--out", "/proc/self/x"],
                 ["netlist", str(p), "-o", "/proc/self/x/deck.cir"], ["new", "/proc/self/x/new.toml"],
                 ["demo", "--out", "/proc/self/x"]):
        code, _, err = call(args, capsys)
        assert code == 2, (args, err)
        assert "/proc/self/" in one_line_error(err), err


@pytest.mark.parametrize("target", ["/dev/full", "/dev/null"])
def test_a_device_as_netlist_output_is_refused(target: str, tmp_path: Path,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    code, _, err = call(["netlist", str(p), "-o", target, "--force"], capsys)
    assert code == 2
    assert "is a device" in one_line_error(err)


def test_a_missing_parent_folder_is_named(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = call(["new", str(tmp_path / "no" / "such" / "x.toml")], capsys)
    assert code == 2
    assert "does not exist" in one_line_error(err)


def test_read_only_and_full_disks_are_exit_2(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    # As the operating system reports them (root ignores permissions, so they are simulated here).
    import simkit.report.outputs as outputs

    real_open = os.open
    target = tmp_path / "ro"
    target.mkdir()
    for code_, words in ((errno.EROFS, "Read-only file system"), (errno.ENOSPC, "No space left on device"),
                         (errno.EPERM, "Operation not permitted")):
        def refuse(path: object, flags: int, *args: object, code_: int = code_, words: str = words) -> int:
            if str(path).startswith(str(target)):
                raise OSError(code_, words, str(path))
            return real_open(path, flags, *args)  # type: ignore[arg-type]

        monkeypatch.setattr(outputs.os, "open", refuse)
        try:
            code, _, err = call(["new", str(target / "x.toml")], capsys)
            assert code == 2 and words in one_line_error(err)
            with pytest.raises(OutputError, match=words):
                OutputDir(target)
        finally:
            monkeypatch.undo()


@pytest.mark.skipif(not hasattr(os, "fork"), reason="fork is a POSIX call")
def test_a_forked_worker_does_not_keep_the_parents_journal_locked(tmp_path: Path) -> None:
    # flock(2): the lock belongs to the open file, which a fork shares.  A sweep worker forked while its
    # parent held the journal must not hold it once the parent let go (a resume right after a kill of the
    # parent would be refused until the worker noticed).  The journal's descriptor is marked as the sweep
    # marks it (simkit.sweep.journal); the folder lock is marked when taken.
    import fcntl
    import subprocess
    import sys

    from simkit.report.outputs import keep_from_children

    path = tmp_path / "sweep.journal"
    path.write_text("{}\n", "utf-8")
    fh = open(path, "r+b")  # closed below, in the parent only
    fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    keep_from_children(fh.fileno())
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: tell the parent it runs, then live on for a while holding its copies
        try:
            os.close(r)
            os.write(w, b"x")
            time.sleep(5)
        finally:
            os._exit(0)
    try:
        os.close(w)
        assert os.read(r, 1) == b"x"
        keep_from_children(fh.fileno(), False)
        fh.close()  # the parent lets go while the child still runs
        probe = ("import fcntl, sys; f = open(sys.argv[1], 'rb'); fcntl.flock(f.fileno(), "
                 "fcntl.LOCK_EX | fcntl.LOCK_NB); print('taken')")
        done = subprocess.run([sys.executable, "-c", probe, str(path)], capture_output=True, text=True, timeout=60)
        assert done.returncode == 0 and "taken" in done.stdout, done.stderr
    finally:
        os.kill(pid, 9)
        os.waitpid(pid, 0)
        os.close(r)
