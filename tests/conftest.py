"""Test set-up: the --ngspice switch (required | if_available | disabled) and shared fixtures.

In CI and `make test` the switch is `required`: a test marked `ngspice` fails loudly when
the shared library is missing, it never skips silently.  With `if_available` only the
missing-engine error (simkit.errors.EngineMissingError) turns the simulator tests into
skips; any other failure to start the engine fails the run.
"""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "simkit" / "examples"


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption(
        "--ngspice",
        choices=("required", "if_available", "disabled"),
        default="required",
        help="tests that need ngspice: required (default; fail without it), if_available, disabled",
    )


def _ngspice_available() -> str | None:
    """None when the engine loads; the reason when it is missing.

    Only the missing-engine error means "missing": any other exception is a simkit bug and
    propagates, so it fails the session instead of turning every simulator test into a skip.
    """
    from simkit.engine.ngspice import get_engine
    from simkit.errors import EngineMissingError

    try:
        get_engine()
    except EngineMissingError as exc:
        return str(exc)
    return None


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    mode = config.getoption("--ngspice")
    if mode == "required":
        return
    reason = "ngspice tests disabled (--ngspice disabled)" if mode == "disabled" else _ngspice_available()
    if reason is None:
        return
    marker = pytest.mark.skip(reason=f"ngspice: {reason}")
    for item in items:
        if "ngspice" in item.keywords:
            item.add_marker(marker)


@pytest.fixture(scope="session")
def engine():  # type: ignore[no-untyped-def]
    """The process's ngspice engine (fails, not skips, when it cannot load)."""
    from simkit.engine.ngspice import get_engine

    return get_engine()


def write_design(tmp_path: Path, text: str, name: str = "design.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, "utf-8")
    return p


BRIDGE_TOML = """\
title = "Test: bridge into CRC"
[source]
kind = "sine"
vrms = "250"
frequency = "50"
resistance = "25"
[rectifier]
topology = "bridge"
diode = "1N4007"
[[filter]]
c = "100u"
esr = "0.2"
[[filter]]
r = "1k"
[[filter]]
c = "47u"
[load]
kind = "resistor"
r = "5k"
[bleeder]
r = "220k"
"""
