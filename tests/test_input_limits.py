"""Bad input that must stay bad input (issue 14): special files, huge and deep TOML, limits, messages.

Exit 2 with a one-line message naming the file and key, before anything is read that could hang
simkit or fill its memory, and before anything is simulated.  Each test failed before the fix it
guards (the commit that added it says how that was checked).
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from simkit.errors import DesignError
from tests.conftest import BRIDGE_TOML, write_design
from tests.robust_helpers import ROOT, call, one_line_error, simkit_proc
from tests.sweep_helpers import DESIGN

# --- the design file --------------------------------------------------------------------------


def test_toml_nested_500_levels_is_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML + "\n[" + ".".join(["a"] * 500) + "]\nx = 1\n")
    code, _, err = call(["check", str(p)], capsys)
    assert code == 2
    assert "nested too deeply" in one_line_error(err)
    q = write_design(tmp_path, BRIDGE_TOML + "\nx = " + "[" * 500 + "]" * 500 + "\n", "arrays.toml")
    code, _, err = call(["check", str(q)], capsys)
    assert code == 2 and "nested too deeply" in one_line_error(err)


def test_integers_of_thousands_of_digits_are_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML.replace('r = "5k"', "r = " + "9" * 5000))
    code, _, err = call(["check", str(p)], capsys)
    assert code == 2
    assert "too many digits" in one_line_error(err)
    q = write_design(tmp_path, BRIDGE_TOML, "plain.toml")
    code, _, err = call(["check", str(q), "--set", "load.r=" + "9" * 5000], capsys)
    assert code == 2
    assert len(one_line_error(err)) < 1000


def test_a_fifo_as_design_or_library_is_refused_at_once(tmp_path: Path) -> None:
    os.mkfifo(tmp_path / "design.fifo")
    proc = simkit_proc("check", "design.fifo", cwd=tmp_path, timeout=60)
    assert proc.returncode == 2 and "FIFO" in one_line_error(proc.stderr)
    write_design(tmp_path, BRIDGE_TOML.replace('title = "Test: bridge into CRC"',
                                               'title = "t"\nlibrary = "design.fifo"'))
    proc = simkit_proc("check", "design.toml", cwd=tmp_path, timeout=60)
    assert proc.returncode == 2 and "FIFO" in one_line_error(proc.stderr)


@pytest.mark.parametrize("device", ["/dev/zero", "/dev/urandom"])
def test_endless_devices_are_refused_without_reading(device: str, tmp_path: Path) -> None:
    # Run in a child limited to 1 GB of memory: reading the device until memory runs out fails loudly.
    limit = textwrap.dedent("""
        import resource, sys
        resource.setrlimit(resource.RLIMIT_AS, (1 << 30, 1 << 30))
        from simkit.cli import main
        main(sys.argv[1:])
    """)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-c", limit, "check", device], capture_output=True, text=True, env=env,
                          timeout=60, cwd=tmp_path)
    assert proc.returncode == 2 and "is a device" in one_line_error(proc.stderr)
    write_design(tmp_path, BRIDGE_TOML.replace('title = "Test: bridge into CRC"', f'title = "t"\nlibrary = "{device}"'))
    proc = subprocess.run([sys.executable, "-c", limit, "check", "design.toml"], capture_output=True, text=True,
                          env=env, timeout=60, cwd=tmp_path)
    assert proc.returncode == 2 and "is a device" in one_line_error(proc.stderr)


def test_a_design_file_over_the_size_limit_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from simkit.design.loader import MAX_DESIGN_BYTES

    p = write_design(tmp_path, BRIDGE_TOML + "#" * MAX_DESIGN_BYTES + "\n")
    code, _, err = call(["check", str(p)], capsys)
    assert code == 2 and "at most" in one_line_error(err)


def test_a_file_name_with_a_line_break_is_one_clear_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = tmp_path / "two\nlines.toml"
    p.write_text(BRIDGE_TOML.replace('title = "Test: bridge into CRC"\n', ""), "utf-8")
    code, _, err = call(["check", str(p)], capsys)
    assert code == 2
    line = one_line_error(err)
    assert "title" not in line and "line break" in line and "two\\nlines.toml" in line


def test_an_empty_path_says_so(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = call(["run", ""], capsys)
    assert code == 2
    line = one_line_error(err)
    assert "empty" in line and "folder" not in line


def test_a_huge_name_is_not_echoed_in_full(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    name = "k" * 100_000
    for text in (BRIDGE_TOML.replace("[bleeder]", f"[bleeder]\n{name} = 1"),
                 BRIDGE_TOML.replace('diode = "1N4007"', f'diode = "{name}"')):
        p = write_design(tmp_path, text)
        code, _, err = call(["check", str(p)], capsys)
        assert code == 2
        assert len(one_line_error(err)) < 1000
    code, _, err = call(["check", str(p), "--set", f"{name}=1"], capsys)
    assert code == 2 and len(err) < 2000


@pytest.mark.parametrize(("change", "key"), [
    (('vrms = "250"', 'vrms = "1e-300"'), "source.vrms"),
    (('c = "100u"', 'c = "1f"'), "filter.0.c"),
    (('diode = "1N4007"', 'diode = { kind = "vacuum", perveance = "1e-30" }'), "rectifier.diode.perveance"),
])
def test_absurdly_small_designs_are_refused(change: tuple[str, str], key: str, tmp_path: Path) -> None:
    from simkit.design.loader import load_design

    p = write_design(tmp_path, BRIDGE_TOML.replace(*change))
    with pytest.raises(DesignError, match="must be at least") as info:
        load_design(p)
    assert info.value.key == key


def test_a_one_femtofarad_cascade_is_refused(tmp_path: Path) -> None:
    from simkit.design.loader import load_design

    text = DESIGN.replace('topology = "bridge"', 'topology = "cascade"\nstages = 3\ncapacitance = "1f"')
    text = text.replace('[[filter]]\nc = "100u"\n', "")
    p = write_design(tmp_path, text)
    with pytest.raises(DesignError, match="must be at least") as info:
        load_design(p)
    assert info.value.key == "rectifier.capacitance"


# --- sweeps, spreads and their options --------------------------------------------------------


def test_vary_nan_and_inf_are_refused_before_any_journal(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, DESIGN)
    out = tmp_path / "sw"
    code, _, err = call(["sweep", str(p), "--vary", "filter.0.c=nan,inf,100u", "--out", str(out)], capsys)
    assert code == 2
    assert "not a finite number" in one_line_error(err)
    assert not (out / "sweep.journal").exists()


def test_spread_runs_are_capped_like_sweep_grids(tmp_path: Path) -> None:
    write_design(tmp_path, DESIGN.replace('c = "100u"', 'c = "100u"\ntolerance = "10%"'))
    t0 = time.monotonic()
    proc = simkit_proc("spread", "design.toml", "--runs", "1000000000000", cwd=tmp_path, timeout=60)
    assert proc.returncode == 2 and "--runs" in one_line_error(proc.stderr)
    assert time.monotonic() - t0 < 60
    assert not (tmp_path / "design-spread").exists()


@pytest.mark.parametrize("address", ["not a url", "tcp://", "tcp://host:0", "tcp://host:99999", "http://host:80"])
def test_a_malformed_scheduler_address_is_refused_before_anything(address: str, tmp_path: Path) -> None:
    write_design(tmp_path, DESIGN)
    proc = simkit_proc("sweep", "design.toml", "--vary", "load.r=1k,2k", "--scheduler", address, cwd=tmp_path,
                       timeout=60)
    assert proc.returncode == 2, proc.stderr
    assert "tcp://HOST:PORT" in one_line_error(proc.stderr)
    assert not (tmp_path / "design-sweep").exists()


def test_a_scheduler_nobody_answers_is_one_clean_line(tmp_path: Path) -> None:
    write_design(tmp_path, DESIGN)
    proc = simkit_proc("sweep", "design.toml", "--vary", "load.r=1k,2k", "--scheduler", "tcp://127.0.0.1:1",
                       cwd=tmp_path, timeout=120)
    assert proc.returncode == 2
    errors = [line for line in proc.stderr.splitlines() if line.startswith("simkit: error:")]
    assert len(errors) == 1 and "no Dask scheduler answered" in errors[0]
    assert "Traceback" not in proc.stderr and "Exception ignored" not in proc.stderr


def test_timeout_nan_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, DESIGN)
    code, _, err = call(["sweep", str(p), "--vary", "load.r=1k", "--timeout", "nan", "--out", str(tmp_path / "o")],
                        capsys)
    assert code == 2 and "--timeout" in err


def test_the_ohm_sign_is_a_unit_of_resistance() -> None:
    from simkit.units import parse_value

    assert parse_value("4.7k\u2126", "ohm") == pytest.approx(4700.0)  # U+2126 OHM SIGN
    assert parse_value("4.7k\u03a9", "ohm") == pytest.approx(4700.0)  # U+03A9 GREEK CAPITAL LETTER OMEGA


def test_one_point_starts_one_worker() -> None:
    from simkit.sweep.pool import ProcessPool
    from simkit.sweep.worker import no_prepare

    pool = ProcessPool(jobs=2, evaluate=_echo, prepare=no_prepare)
    outcomes = list(pool.run([(0, 5)]))
    assert len(outcomes) == 1 and outcomes[0].result["metrics"] == {"value": 5}
    assert pool.workers_started == 1


def _echo(payload: object) -> dict[str, object]:
    return {"metrics": {"value": payload}}
