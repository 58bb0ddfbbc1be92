"""Stock values: the series that parts are sold in (E series, capacitor voltages, resistor powers, R10).

A builder buys 470 µF, not 480.1 µF.  The checks' fixes, ``simkit size --stock`` and sweep
specs such as ``E12:22u:470u`` pick values from these series:

- the E series of IEC 60063 (E3, E6, E12, E24), one decade's mantissas each, for resistors,
  capacitors and zener voltages (docs/sources.md#num-7);
- rated voltages of capacitors as makers sell them, 6.3 V to 10 kV (common practice,
  docs/sources.md#num-8);
- power ratings of resistors, 1/8 W to 100 W (common practice, docs/sources.md#num-8);
- the R10 series of preferred numbers (ISO 3), for ratings with no series of their own: a
  choke's DC current, a winding's current, a transformer's VA (docs/sources.md#num-3).

Every function takes and returns SI floats.

Example
-------
>>> at_least(480.1e-6, "E12"), at_most(480.1e-6, "E12")
(0.00056, 0.00047)
"""

from __future__ import annotations

import math
from collections.abc import Iterator

from simkit.units import eng

#: The E series of IEC 60063: the mantissas of one decade, in order.
E_SERIES: dict[str, tuple[float, ...]] = {
    "E3": (1.0, 2.2, 4.7),
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2,
            6.8, 7.5, 8.2, 9.1),
}

#: Rated DC voltages capacitors are sold in, V (electrolytics up to 450-550 V, film and ceramic beyond).
CAPACITOR_VOLTS: tuple[float, ...] = (6.3, 10, 16, 25, 35, 50, 63, 100, 160, 200, 250, 350, 400, 450, 500, 630, 800,
                                      1000, 1250, 1600, 2000, 2500, 3000, 4000, 5000, 6300, 8000, 10000)

#: Power ratings resistors are sold in, W (film 1/8-3 W, wirewound 2-17 W, aluminium-housed 10-100 W).
RESISTOR_WATTS: tuple[float, ...] = (0.125, 0.25, 0.5, 1, 2, 3, 5, 7, 10, 15, 25, 50, 100)

#: The R10 series of preferred numbers (ISO 3): one decade's mantissas.
R10: tuple[float, ...] = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)

#: The names a user may give for a series (``--stock E12``, ``--vary filter.0.c=E12:22u:470u``).
SERIES_NAMES: tuple[str, ...] = tuple(E_SERIES)


class StockError(ValueError):
    """A value no series holds (zero, negative, not finite, beyond a fixed list's end)."""


def series(name: str) -> tuple[float, ...]:
    """The mantissas of an E series by name (``"E12"``, case-insensitive); ValueError for another name."""
    key = name.strip().upper()
    if key not in E_SERIES:
        raise ValueError(f"{name!r} is not an E series; one of {', '.join(E_SERIES)}")
    return E_SERIES[key]


def _decades(mantissas: tuple[float, ...], x: float) -> Iterator[float]:
    """Stock values around ``x``: the decade below, x's own and the one above, ascending."""
    d = math.floor(math.log10(x))
    for k in (d - 1, d, d + 1, d + 2):
        for m in mantissas:
            yield _round(m * 10.0**k)


def _round(x: float) -> float:
    """A stock value as the float nearest its decimal spelling (4.7e-6, not 4.7000000000000005e-6)."""
    return float(f"{x:.6g}")


def _check(x: float) -> None:
    if not (math.isfinite(x) and x > 0):
        raise StockError(f"{x!r} has no stock value (expected a positive number)")


def at_least(x: float, name: str) -> float:
    """The smallest value of a decade series (an E series or ``"R10"``) at or above ``x``."""
    _check(x)
    mant = R10 if name.strip().upper() == "R10" else series(name)
    return next(v for v in _decades(mant, x) if v >= x * (1 - 1e-9))


def at_most(x: float, name: str) -> float:
    """The largest value of a decade series (an E series or ``"R10"``) at or below ``x``."""
    _check(x)
    mant = R10 if name.strip().upper() == "R10" else series(name)
    return max(v for v in _decades(mant, x) if v <= x * (1 + 1e-9))


def between(low: float, high: float, name: str) -> list[float]:
    """Every value of an E series from ``low`` to ``high`` (both included when they are stock), ascending."""
    _check(low)
    _check(high)
    lo, hi = min(low, high), max(low, high)
    mant = series(name)
    out: list[float] = []
    for k in range(math.floor(math.log10(lo)) - 1, math.floor(math.log10(hi)) + 2):
        for m in mant:
            v = _round(m * 10.0**k)
            if lo * (1 - 1e-9) <= v <= hi * (1 + 1e-9) and v not in out:
                out.append(v)
    return out


def neighbours(x: float, name: str) -> tuple[float, float]:
    """The stock values just below and just above ``x`` in an E series (x itself when it is stock, both sides)."""
    return at_most(x, name), at_least(x, name)


def _from_list(values: tuple[float, ...], x: float, what: str) -> float:
    _check(x)
    for v in values:
        if v >= x * (1 - 1e-9):
            return float(v)
    raise StockError(f"{what} of {x:.4g} is beyond the largest stock rating ({values[-1]:g})")


def capacitor_volts(v: float) -> float:
    """The lowest stock capacitor voltage rating at or above ``v``, V."""
    return _from_list(CAPACITOR_VOLTS, v, "a capacitor voltage")


def resistor_watts(w: float) -> float:
    """The lowest stock resistor power rating at or above ``w``, W."""
    return _from_list(RESISTOR_WATTS, w, "a resistor power")


def compact(x: float) -> str:
    """A value as ``--set`` takes it, no space or unit: plain from 0.01 to 1000, with an SI prefix beyond.

    >>> compact(47000.0), compact(4.7e-4), compact(630.0), compact(0.5)
    ('47k', '470u', '630', '0.5')
    """
    if x == 0:
        return "0"
    if 0.01 <= abs(x) < 1000:
        return f"{x:.4g}"
    return eng(x, "", 4).replace(" ", "").replace("µ", "u")
