"""Engineering values: parse SI strings from design files, format numbers for decks and people.

Everything inside simkit is a plain float in SI units.  Strings with prefixes live only
here, in files and on the command line.

In design files ``M`` is mega and ``m`` milli, as in SI.  SPICE reads ``M`` as milli, so
:func:`spice` spells mega ``Meg``.

Examples
--------
>>> parse_value("4.7k", "ohm")
4700.0
>>> parse_value("100uF", "F")
0.0001
>>> spice(1e6)
'1Meg'
>>> eng(0.0022, "F")
'2.2 mF'
"""

from __future__ import annotations

import math
import re
from decimal import Decimal, InvalidOperation

#: SI prefixes accepted in design files (case matters: m is milli, M is mega).
PREFIXES: dict[str, float] = {
    "f": 1e-15,
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "µ": 1e-6,
    "μ": 1e-6,
    "m": 1e-3,
    "k": 1e3,
    "K": 1e3,  # not SI, but written so often for kilo that refusing it helps nobody
    "M": 1e6,
    "Meg": 1e6,
    "meg": 1e6,
    "MEG": 1e6,
    "G": 1e9,
}

#: Unit symbols accepted after a value, by the quantity a key holds.
UNIT_SYMBOLS: dict[str, tuple[str, ...]] = {
    "V": ("V", "v", "Vrms", "VAC", "Vac", "Vdc", "VDC"),
    "A": ("A",),
    "ohm": ("Ω", "Ω", "ohm", "ohms", "Ohm", "Ohms", "R"),  # Greek capital omega, then the ohm sign
    "F": ("F",),
    "H": ("H",),
    "Hz": ("Hz", "hz", "HZ"),
    "s": ("s", "sec"),
    "W": ("W",),
    "Ah": ("Ah",),
    "": (),
}

#: What each unit is called in messages.
UNIT_NAMES: dict[str, str] = {
    "V": "a voltage",
    "A": "a current",
    "ohm": "a resistance",
    "F": "a capacitance",
    "H": "an inductance",
    "Hz": "a frequency",
    "s": "a time",
    "W": "a power",
    "Ah": "a charge in ampere-hours",
    "": "a number",
}

#: Example values used in messages.
UNIT_EXAMPLES: dict[str, str] = {
    "V": '"250" or "1.2k"',
    "A": '"150m" or "1.5"',
    "ohm": '"25" or "4.7k"',
    "F": '"100u" or "47uF"',
    "H": '"10" or "4.5H"',
    "Hz": '"50" or "60Hz"',
    "s": '"5m" or "2"',
    "W": '"2" or "500m"',
    "Ah": '"7" or "1.2"',
    "": '"10" or "2.5"',
}

# [0-9], not \d: \d also matches other scripts' digits, which float() would quietly accept.
_NUMBER = r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_NUMBER_RE = re.compile(_NUMBER)
_PREFIX_ALT = "Meg|meg|MEG|[fpnuµμmkKMG]"
_VALUE_RE = re.compile(rf"^(?P<num>{_NUMBER})\s*(?P<prefix>{_PREFIX_ALT})?(?P<unit>[^0-9\s].*)?$")
# "2k2" style: the prefix takes the place of the decimal point ("4R7" = 4.7).
_INFIX_RE = re.compile(r"^(?P<a>[0-9]+)(?P<prefix>[pnuµμmkKMGR])(?P<b>[0-9]+)(?P<unit>[^0-9\s].*)?$")


class UnitError(ValueError):
    """A value that is not a valid engineering number for the quantity asked for."""


def _check_unit(unit_text: str, unit: str, raw: str) -> None:
    unit_text = unit_text.strip()
    if not unit_text:
        return
    if unit_text in UNIT_SYMBOLS.get(unit, ()):
        return
    for other, symbols in UNIT_SYMBOLS.items():
        if unit_text in symbols:
            raise UnitError(
                f"{raw!r} is {UNIT_NAMES[other]} ({unit_text}), expected {UNIT_NAMES[unit]}"
            )
    raise UnitError(
        f"{raw!r}: unknown suffix {unit_text!r}; expected {UNIT_NAMES[unit]} "
        f"such as {UNIT_EXAMPLES[unit]} (prefixes f p n u m k M G)"
    )


def parse_value(value: object, unit: str = "") -> float:
    """Parse a number or an engineering string into a float in SI units.

    Parameters
    ----------
    value : int, float or str
        ``220``, ``"220u"``, ``"4.7kΩ"``, ``"2k2"``, ``"1e-3"``.
    unit : str
        The quantity's unit key (``"V"``, ``"A"``, ``"ohm"``, ``"F"``, ``"H"``, ``"Hz"``,
        ``"s"``, ``"W"``, ``"Ah"`` or ``""`` for a bare number).  A trailing unit symbol
        in the string must match it.

    Returns
    -------
    float
        The value in SI units.

    Raises
    ------
    UnitError
        With a message that says what was expected.
    """
    if isinstance(value, bool):
        raise UnitError(f"got true/false, expected {UNIT_NAMES[unit]} such as {UNIT_EXAMPLES[unit]}")
    if isinstance(value, (int, float)):
        result = _to_float(value)
    elif isinstance(value, str):
        result = _parse_string(value, unit)
    else:
        raise UnitError(
            f"got {type_name(value)}, expected {UNIT_NAMES[unit]} such as {UNIT_EXAMPLES[unit]}"
        )
    if not math.isfinite(result):
        raise UnitError(f"{value!r} is not a finite number")
    return result


def _to_float(value: int | float) -> float:
    try:
        return float(value)
    except OverflowError:  # an integer literal with hundreds of digits
        raise UnitError(f"{type_name(value)} too large to be a finite number") from None


def type_name(value: object) -> str:
    """What a TOML value is, in the words of the design file (a table, not a dict)."""
    names = {dict: "a table", list: "a list", str: "text", bool: "true/false", int: "a number", float: "a number"}
    return names.get(type(value), f"a {type(value).__name__}")


def _has_control(text: str) -> bool:
    # Checked before stripping: "1k\n" is as wrong as "1k\n.control".
    return any(ord(ch) < 32 or ord(ch) == 127 for ch in text)


def _parse_string(raw: str, unit: str) -> float:
    if _has_control(raw):
        raise UnitError("the value contains a line break or control character")
    text = raw.strip()
    if not text:
        raise UnitError(f"empty value, expected {UNIT_NAMES[unit]} such as {UNIT_EXAMPLES[unit]}")
    m = _INFIX_RE.match(text)
    if m:
        _check_unit(m["unit"] or "", unit, raw)
        mult = "1" if m["prefix"] == "R" else _exact(PREFIXES[m["prefix"]])
        return _scaled(f"{m['a']}.{m['b']}", mult)
    m = _VALUE_RE.match(text)
    if not m:
        raise UnitError(
            f"{raw!r} is not a number; expected {UNIT_NAMES[unit]} such as {UNIT_EXAMPLES[unit]}"
        )
    # "F", "H", "A", "V", "s" are not prefix letters, so "100F" is 100 farads and "100f"
    # 100 femto.
    _check_unit(m["unit"] or "", unit, raw)
    if m["prefix"] is None:
        return float(m["num"])
    return _scaled(m["num"], _exact(PREFIXES[m["prefix"]]))


def _exact(mult: float) -> str:
    return f"{mult:.0e}"


def _scaled(number: str, mult: str) -> float:
    """Multiply in decimal so that "100u" is exactly the float nearest 1e-4."""
    try:
        return float(Decimal(number) * Decimal(mult))
    except InvalidOperation:
        raise UnitError(f"{number!r} is not a number") from None


def parse_percent(value: object) -> float:
    """Parse ``"10%"`` (or ``0.1``) into a fraction.

    A bare number larger than 1 is taken as percent (``10`` means 10 %).

    >>> parse_percent("10%")
    0.1
    """
    if isinstance(value, bool):
        raise UnitError('got true/false, expected a percentage such as "10%"')
    if isinstance(value, (int, float)):
        v = _to_float(value)
        if not math.isfinite(v):
            raise UnitError(f'{value!r} is not a percentage such as "10%"')
        return v / 100.0 if v > 1.0 else v
    if isinstance(value, str):
        if _has_control(value):
            raise UnitError("the value contains a line break or control character")
        text = value.strip()
        number = text[:-1].strip() if text.endswith("%") else text
        if not _NUMBER_RE.fullmatch(number):  # float() would take "nan", "1_0" and other scripts' digits
            raise UnitError(f'{value!r} is not a percentage such as "10%"')
        v = float(number)
        if not math.isfinite(v):
            raise UnitError(f'{value!r} is not a percentage such as "10%"')
        return v / 100.0 if text.endswith("%") else parse_percent(v)
    raise UnitError(f'got {type_name(value)}, expected a percentage such as "10%"')


# --- formatting -------------------------------------------------------------------------

_SPICE_STEPS: tuple[tuple[float, str], ...] = (
    (1e9, "G"),
    (1e6, "Meg"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "u"),
    (1e-9, "n"),
    (1e-12, "p"),
    (1e-15, "f"),
)


def _mantissa(x: float, digits: int) -> str:
    text = f"{x:.{digits}g}"
    if "e" in text:  # only for values outside the prefix table
        return text
    return text


def spice(x: float, digits: int = 7) -> str:
    """Format a float for a SPICE deck: ``1e6 -> '1Meg'``, ``4.7e-6 -> '4.7u'``.

    Deterministic: the same float always gives the same text.  Mega is ``Meg`` because
    SPICE reads ``M`` as milli.

    >>> spice(220e-3), spice(1e6), spice(4.7e-6), spice(0.0)
    ('220m', '1Meg', '4.7u', '0')
    """
    if not math.isfinite(x):
        raise ValueError(f"cannot write non-finite number {x!r} into a deck")
    if x == 0:
        return "0"
    ax = abs(x)
    for scale, suffix in _SPICE_STEPS:
        if ax >= scale * 0.9999999995:
            m = x / scale
            # Round first: 999.9999999 k should print as 1Meg.
            text = f"{m:.{digits}g}"
            if abs(float(text)) >= 1000 and suffix != "G":
                continue
            return _trim(text) + suffix
    return f"{x:.{digits}e}"


def _trim(text: str) -> str:
    if "e" in text or "." not in text:
        return text
    return text.rstrip("0").rstrip(".")


_ENG_STEPS: tuple[tuple[float, str], ...] = (
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "µ"),
    (1e-9, "n"),
    (1e-12, "p"),
)


def eng(x: float, unit: str = "", digits: int = 4) -> str:
    """Format a float for people in engineering notation: ``eng(0.0022, 'F') -> '2.2 mF'``.

    >>> eng(301.24, "V"), eng(0.01534, "A"), eng(0, "V")
    ('301.2 V', '15.34 mA', '0 V')
    """
    symbol = {"ohm": "Ω"}.get(unit, unit)
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if not math.isfinite(x):
        return f"{x} {symbol}".strip()
    if x == 0:
        return f"0 {symbol}".strip()
    ax = abs(x)
    for scale, prefix in _ENG_STEPS:
        if ax >= scale * 0.99995:
            text = f"{x / scale:.{digits}g}"
            if abs(float(text)) >= 1000 and prefix != "G":
                continue
            return f"{_trim(text)} {prefix}{symbol}".strip()
    return f"{x:.{digits}g} {symbol}".strip()
