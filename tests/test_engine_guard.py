"""The engine under attack (issue 14): words in titles, start-up files, Ctrl-C and threads.

Each test here failed before the fix it guards (see the commit that added it).
"""

from __future__ import annotations

import math
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from simkit.engine.ngspice import error_lines
from simkit.errors import SimulationError
from tests.conftest import BRIDGE_TOML, write_design

pytestmark = pytest.mark.ngspice

ROOT = Path(__file__).resolve().parent.parent

# A first-order RC step (standard circuit theory): v(out) = 10 (1 - exp(-t / 1 ms)).
RC_DECK = """* TITLE
V1 in 0 PULSE(0 10 0 1u 1u 1 2)
R1 in out 1k
C1 out 0 1u IC=0
.tran 10u 5m 0 10u uic
.end
"""

#: Words ngspice uses in its own failure messages; everyday words in a title.
TITLE_WORDS = [
    "Regulated supply with error amplifier",
    "singular matrix",
    "Timestep too small",
    "Unknown model",
    "no such vector",
    "onerror",
    "Error on line 3",
    "Error: circuit not parsed.",
    "doAnalyses: TRAN: simulation(s) aborted",
    "could not find a valid modelname; too few nodes",
]


def _simkit(*args: str, cwd: Path, timeout: float = 300) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "simkit.cli", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=timeout, env=env)


@pytest.mark.parametrize("title", TITLE_WORDS)
def test_words_of_ngspice_messages_in_a_title_do_not_fail_the_run(engine, title: str) -> None:  # type: ignore[no-untyped-def]
    w = engine.run(RC_DECK.replace("TITLE", title), 5e-3)
    assert w.time[-1] == pytest.approx(5e-3)
    assert float(w.v("out")[-1]) == pytest.approx(10 * (1 - math.exp(-5)), abs=0.02)


def test_a_design_titled_error_amplifier_simulates(tmp_path: Path) -> None:
    from simkit.design.loader import load_design
    from simkit.pipeline import simulate

    p = write_design(tmp_path, BRIDGE_TOML.replace("Test: bridge into CRC", "Regulated supply with error amplifier"))
    result = simulate(load_design(p))
    assert 250 < result.metrics["vout_dc_v"] < 360  # 250 V RMS bridge: below the 354 V crest


def test_a_file_named_error_without_title_simulates(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from simkit.cli import main

    p = write_design(tmp_path, BRIDGE_TOML.replace('title = "Test: bridge into CRC"\n', ""), "error-amp-supply.toml")
    with pytest.raises(SystemExit) as info:
        main(["run", str(p), "--json"])
    _, err = capsys.readouterr()
    assert info.value.code == 0, err


def test_real_failures_are_still_reported(engine) -> None:  # type: ignore[no-untyped-def]
    # A missing model: ngspice cannot parse the circuit, whatever the title says.
    deck = RC_DECK.replace("TITLE", "harmless").replace("C1 out 0 1u IC=0", "C1 out 0 1u IC=0\nD1 out 0 NOSUCH")
    with pytest.raises(SimulationError, match="did not complete"):
        engine.run(deck, 5e-3)
    # A stop time the deck never reaches is a failure too.
    with pytest.raises(SimulationError, match="stopped at"):
        engine.run(RC_DECK.replace("TITLE", "harmless"), 1.0)
    assert engine.run(RC_DECK.replace("TITLE", "again"), 5e-3).time[-1] == pytest.approx(5e-3)


def test_error_lines_leave_out_echoes_of_the_deck() -> None:
    deck = "* simkit deck: error amplifier, singular matrix\nd1 a b nomodel\n.end\n"
    stderr = ["*  simkit deck: error amplifier, singular matrix", "Error on line 2 or its substitute:",
              "d1 a b nomodel", "Warning: singular matrix:  check node d"]
    assert error_lines(stderr, deck) == ["Error on line 2 or its substitute:",
                                         "Warning: singular matrix:  check node d"]


def test_a_spiceinit_in_the_current_folder_is_not_run(tmp_path: Path) -> None:
    # ngspice sources ./.spiceinit at start-up; a shared design folder could carry one.
    marker = tmp_path / "PWNED"
    (tmp_path / ".spiceinit").write_text(f"shell touch {marker}\nset noaskquit\n", "ascii")
    write_design(tmp_path, BRIDGE_TOML)
    proc = _simkit("run", "design.toml", "--json", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert not marker.exists(), "ngspice ran the folder's .spiceinit"


def test_the_spiceinit_control_case_runs_in_ngspice(tmp_path: Path) -> None:
    """Control: the same file does run in the stock ngspice command line, so the test above
    would notice if the engine read it."""
    marker = tmp_path / "PWNED"
    (tmp_path / ".spiceinit").write_text(f"shell touch {marker}\n", "ascii")
    deck = tmp_path / "rc.cir"
    deck.write_text(RC_DECK.replace("TITLE", "rc"), "ascii")
    subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, cwd=tmp_path, timeout=60)
    assert marker.exists()


def test_the_current_folder_is_the_users_again_after_start_up(tmp_path: Path) -> None:
    script = textwrap.dedent("""
        import os
        from simkit.engine.ngspice import get_engine
        before = os.getcwd()
        get_engine()
        assert os.getcwd() == before, (before, os.getcwd())
        print("ok")
    """)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path, env=env,
                          timeout=120)
    assert proc.returncode == 0 and "ok" in proc.stdout, proc.stderr


def test_two_threads_share_the_engine_without_crashing(tmp_path: Path) -> None:
    # Two threads inside one libngspice crash the process (segmentation fault, measured before
    # the engine lock).  Run in a child so a crash cannot take the test session with it.
    script = textwrap.dedent(f"""
        import math, threading
        from simkit.engine.ngspice import get_engine
        deck = {RC_DECK.replace("TITLE", "threads")!r}
        errors = []
        def work():
            try:
                eng = get_engine()
                for _ in range(40):
                    w = eng.run(deck, 5e-3)
                    assert abs(float(w.v("out")[-1]) - 10 * (1 - math.exp(-5))) < 0.02
            except BaseException as exc:
                errors.append(repr(exc))
        threads = [threading.Thread(target=work) for _ in range(3)]
        for t in threads: t.start()
        for t in threads: t.join()
        print("errors", errors)
        assert not errors
    """)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path, env=env,
                          timeout=300)
    assert proc.returncode == 0, (proc.returncode, proc.stdout[-2000:], proc.stderr[-2000:])


def _interrupt(args: list[str], cwd: Path, wait_for: float) -> tuple[int, str, float]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen([sys.executable, "-m", "simkit.cli", *args], cwd=cwd, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    time.sleep(wait_for)
    assert proc.poll() is None, "the command finished before it could be interrupted; make it slower"
    t0 = time.monotonic()
    proc.send_signal(signal.SIGINT)
    try:
        _, err = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        raise AssertionError("Ctrl-C did not stop simkit within 60 s") from None
    return proc.returncode, err, time.monotonic() - t0


# Slow on purpose: a fine time step over a long switch-on run keeps ngspice busy for a minute (the cost
# limit raised so simkit agrees to run it).
SLOW = ["--set", "simulation.steps_per_period=100000", "--set", "simulation.switch_on_time=20",
        "--set", "simulation.max_points=1e10"]


@pytest.mark.parametrize("command", ["run", "check", "report"])
def test_ctrl_c_stops_at_once_with_exit_130(command: str, tmp_path: Path) -> None:
    write_design(tmp_path, BRIDGE_TOML)
    out = tmp_path / "out"
    extra = ["--out", str(out)] if command in ("run", "report") else []
    code, err, took = _interrupt([command, "design.toml", *SLOW, *extra], tmp_path, wait_for=3.0)
    assert code == 130, err
    assert err.strip().splitlines()[-1] == "simkit: interrupted"
    assert "Exception ignored" not in err and "Traceback" not in err
    # "At once": well under the seconds the rest of the simulation takes (generous for a loaded CI machine).
    assert took < 5.0
    # Nothing half-written: no results, no temporaries, no lock left behind.
    if out.exists():
        left = sorted(p.name for p in out.iterdir())
        assert left == [], left
