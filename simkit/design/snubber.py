"""An RC snubber a design fits: ``snubber = { c = "10n", r = "100" }`` across each diode or across the winding.

Declared once here and used by ``[rectifier] snubber`` (one across each rectifier diode) and
``[source] snubber`` (one across each winding, each half for a centre tap).  Where they go in
the circuit and how they are named is :mod:`simkit.netlist.build`'s business.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from simkit.design.vocab import Reader, key, read_section, show

#: Snubber capacitors below this are refused, F: under a picofarad is the wiring's own capacitance.
MIN_SNUBBER_C = 1e-12


@dataclass(frozen=True)
class Snubber:
    """A resistor in series with a capacitor, fitted across a diode or a winding."""

    c: float = key("c", "F", "the snubber's capacitor", required=True, need='the snubber capacitance, e.g. c = "10n"',
                   minimum=MIN_SNUBBER_C, maximum=1e-3, label="snubber capacitance")
    r: float = key("r", "ohm", "the resistor in series with it", required=True,
                   need='the snubber resistance, e.g. r = "100"', above=0, maximum=1e9, label="snubber resistance")


def read_snubber(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> Snubber:
    """``snubber = { c = "10n", r = "100" }``."""
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected a table such as {{ c = "10n", r = "100" }}, got {show(raw)}')
    return read_section(rd, Snubber, raw, path)


def snubber_key(where: str) -> Any:
    """The ``snubber`` key of a section: ``where`` says what it goes across."""
    return key("snubber", "table", f'an RC snubber across {where}, {{ c = "10n", r = "100" }}; it replaces the '
               "damping simkit adds across a winding", None, shown="none", reader=read_snubber, of=(Snubber,))
