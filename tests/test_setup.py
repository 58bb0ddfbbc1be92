"""The test set-up itself: the --ngspice switch skips only for a missing engine (tests/conftest.py)."""

from __future__ import annotations

import pytest

from simkit.engine import ngspice
from simkit.errors import EngineMissingError
from tests.conftest import _ngspice_available


def test_a_missing_engine_is_reported_as_missing(monkeypatch: pytest.MonkeyPatch) -> None:
    def missing() -> None:
        raise EngineMissingError("the ngspice shared library could not be loaded (stand-in)")

    monkeypatch.setattr(ngspice, "get_engine", missing)
    assert _ngspice_available() == "the ngspice shared library could not be loaded (stand-in)"


def test_any_other_engine_failure_is_not_a_skip(monkeypatch: pytest.MonkeyPatch) -> None:
    # A bug in simkit's engine start-up must fail the run, not skip every simulator test.
    def broken() -> None:
        raise ZeroDivisionError("a bug")

    monkeypatch.setattr(ngspice, "get_engine", broken)
    with pytest.raises(ZeroDivisionError, match="a bug"):
        _ngspice_available()
