"""Helpers of the robustness tests (issue 14): the command line in-process and in a child process."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from simkit.cli import main

ROOT = Path(__file__).resolve().parent.parent


def call(args: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    """``simkit ARGS`` in this process: (exit code, stdout, stderr)."""
    with pytest.raises(SystemExit) as info:
        main(args)
    out, err = capsys.readouterr()
    return int(info.value.code or 0), out, err


def simkit_proc(*args: str, cwd: Path, timeout: float = 120) -> subprocess.CompletedProcess[str]:
    """``simkit ARGS`` in a child process (for what could hang or fill the memory)."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "simkit.cli", *args], capture_output=True, text=True, cwd=cwd,
                          timeout=timeout, env=env)


def one_line_error(err: str) -> str:
    """The error message, checked to be one line of "simkit: error: ...", no traceback."""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("simkit: error: "), err
    assert "Traceback" not in err and "internal error" not in err
    return lines[0]
