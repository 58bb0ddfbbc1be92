"""simkit.units: engineering values in design files, and numbers written into decks and tables.

Expected values are SI definitions (k = 1e3, M = 1e6, m = 1e-3 ...) written as float
literals, so "exact" means: the same float Python gives for the decimal literal.
"""

from __future__ import annotations

import itertools
import math

import pytest

from simkit.units import UnitError, eng, parse_percent, parse_value, spice

# --- SI prefixes ------------------------------------------------------------------------

PREFIX_CASES: list[tuple[str, float]] = [
    ("1f", 1e-15),
    ("1p", 1e-12),
    ("1n", 1e-9),
    ("1u", 1e-6),
    ("1µ", 1e-6),  # U+00B5 MICRO SIGN
    ("1μ", 1e-6),  # U+03BC GREEK SMALL LETTER MU
    ("1m", 1e-3),
    ("1k", 1e3),
    ("1M", 1e6),
    ("1G", 1e9),
    ("1Meg", 1e6),
    ("1meg", 1e6),
    ("1MEG", 1e6),
]


@pytest.mark.parametrize(("text", "expected"), PREFIX_CASES)
def test_each_prefix(text: str, expected: float) -> None:
    assert parse_value(text) == expected


def test_capital_m_is_mega_and_small_m_is_milli() -> None:
    # SI, as the design file documents; the opposite of how SPICE reads "M".
    assert parse_value("1M", "ohm") == 1e6
    assert parse_value("1m", "ohm") == 1e-3
    assert parse_value("2.2M", "ohm") == 2.2e6
    assert parse_value("220m", "ohm") == 0.22
    assert parse_value("1M") != parse_value("1m")


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("250", 250.0),
        ("0", 0.0),
        ("-5", -5.0),
        ("+5", 5.0),
        (".5", 0.5),
        ("5.", 5.0),
        ("1e3", 1000.0),
        ("1E3", 1000.0),
        ("1.5e-3", 1.5e-3),
        ("2.5e+2", 250.0),
        (" 4.7k ", 4700.0),
        ("4.7 k", 4700.0),
        ("1e-3k", 1.0),
    ],
)
def test_plain_numbers(text: str, expected: float) -> None:
    assert parse_value(text) == expected


def test_numbers_pass_through() -> None:
    assert parse_value(250) == 250.0
    assert isinstance(parse_value(250), float)
    assert parse_value(0.0001, "F") == 1e-4
    assert parse_value(-3, "V") == -3.0


# --- "2k2" style ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("2k2", "ohm", 2200.0),
        ("4k7", "ohm", 4700.0),
        ("1M5", "ohm", 1.5e6),
        ("4R7", "ohm", 4.7),
        ("0R22", "ohm", 0.22),
        ("4u7", "F", 4.7e-6),
        ("4µ7", "F", 4.7e-6),
        ("3n3", "F", 3.3e-9),
        ("6p8", "F", 6.8e-12),
        ("2m2", "H", 2.2e-3),
        ("2k2Ω", "ohm", 2200.0),
        ("4u7F", "F", 4.7e-6),
    ],
)
def test_infix_style(text: str, unit: str, expected: float) -> None:
    assert parse_value(text, unit) == expected


# --- trailing units ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("100uF", "F", 1e-4),
        ("100 uF", "F", 1e-4),
        ("47µF", "F", 47e-6),
        ("1F", "F", 1.0),
        ("5kΩ", "ohm", 5000.0),
        ("5kohm", "ohm", 5000.0),
        ("220 ohms", "ohm", 220.0),
        ("1MegΩ", "ohm", 1e6),
        ("60Hz", "Hz", 60.0),
        ("50 Hz", "Hz", 50.0),
        ("1kHz", "Hz", 1000.0),
        ("10H", "H", 10.0),
        ("4.5H", "H", 4.5),
        ("250V", "V", 250.0),
        ("250Vrms", "V", 250.0),
        ("1.2kV", "V", 1200.0),
        ("150mA", "A", 0.15),
        ("5ms", "s", 5e-3),
    ],
)
def test_trailing_unit(text: str, unit: str, expected: float) -> None:
    assert parse_value(text, unit) == expected


def test_unit_letter_f_versus_femto() -> None:
    # "F" is not a prefix letter: "100F" is a hundred farads, "100f" a hundred femtofarads.
    assert parse_value("100F", "F") == 100.0
    assert parse_value("100f", "F") == 100e-15


# --- wrong unit for the quantity ----------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "unit", "said", "wanted"),
    [
        ("100uH", "F", "an inductance", "a capacitance"),
        ("10F", "H", "a capacitance", "an inductance"),
        ("5kV", "ohm", "a voltage", "a resistance"),
        ("60Hz", "V", "a frequency", "a voltage"),
        ("1kΩ", "F", "a resistance", "a capacitance"),
        ("100mA", "V", "a current", "a voltage"),
        ("2k2V", "ohm", "a voltage", "a resistance"),
    ],
)
def test_wrong_unit_is_refused(text: str, unit: str, said: str, wanted: str) -> None:
    with pytest.raises(UnitError) as info:
        parse_value(text, unit)
    msg = str(info.value)
    assert text in msg
    assert said in msg
    assert f"expected {wanted}" in msg


def test_a_unit_symbol_for_a_bare_number_is_refused() -> None:
    with pytest.raises(UnitError, match="expected a number"):
        parse_value("100uF", "")


# --- garbage, empty, wrong types ---------------------------------------------------------


@pytest.mark.parametrize(
    "text",
    [
        "abc",
        "k",
        "u100",
        "1..2",
        "1.2.3",
        "1kk",
        "1 0",
        "1e",
        "--5",
        "0x10",
        "1,5",
        "10%",
        "100 uF F",
        "1x",
        "nan",
        "NaN",
        "inf",
        "-inf",
        "Infinity",
        "1e999",
        "1e999k",
        "one",
        "True",
        "1_000",
        "٢٥٠",  # Arabic-Indic digits: float() takes them, a design file should not
        "１００u",  # fullwidth digits
    ],
)
def test_garbage_is_refused(text: str) -> None:
    with pytest.raises(UnitError) as info:
        parse_value(text, "F")
    # The message quotes what was written and, unless it is a number too large for a float, shows what
    # the user should write instead.
    message = str(info.value)
    assert message.startswith(repr(text))
    if text in ("1e999", "1e999k"):
        assert message == f"{text!r} is not a finite number"
    else:
        assert 'expected a capacitance such as "100u" or "47uF"' in message


def test_unknown_suffix_message_names_the_suffix_and_the_prefixes() -> None:
    with pytest.raises(UnitError) as info:
        parse_value("250x", "V")
    msg = str(info.value)
    assert "'x'" in msg
    assert "a voltage" in msg
    assert "f p n u m k M G" in msg


@pytest.mark.parametrize("text", ["", " ", "   \u00a0 "])
def test_empty_is_refused(text: str) -> None:
    with pytest.raises(UnitError, match="empty value, expected a resistance"):
        parse_value(text, "ohm")


@pytest.mark.parametrize("value", [True, False])
def test_booleans_are_refused(value: bool) -> None:
    # bool is an int subclass in Python; true must not silently become 1 farad.
    with pytest.raises(UnitError, match="true/false"):
        parse_value(value, "F")
    with pytest.raises(UnitError, match="true/false"):
        parse_percent(value)


@pytest.mark.parametrize(
    ("value", "word"),
    [(None, "NoneType"), ([1, 2], "a list"), ({"v": 1}, "a table"), ((1,), "tuple")],
)
def test_other_types_are_refused(value: object, word: str) -> None:
    with pytest.raises(UnitError) as info:
        parse_value(value, "V")
    assert word in str(info.value)
    assert "a voltage" in str(info.value)


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_non_finite_floats_are_refused(value: float) -> None:
    with pytest.raises(UnitError, match="not a finite number"):
        parse_value(value, "V")


def test_huge_integer_is_a_unit_error_not_an_overflow() -> None:
    # TOML allows an integer literal of any length; float() of it raises OverflowError.
    with pytest.raises(UnitError, match="too large"):
        parse_value(10**400, "V")
    with pytest.raises(UnitError, match="too large"):
        parse_percent(10**400)


@pytest.mark.parametrize(
    "text",
    [
        "1k\n.control\nshell touch /tmp/x\n.endc",
        "1k\n",
        "\n1k",
        "1k\r",
        "1\t0",
        "\t1k",
        "1k\x00",
        "1k\x1b[2J",
        "1k\x7f",
        "1\x0b",
        "1\x0c",
    ],
)
def test_control_characters_are_refused(text: str) -> None:
    with pytest.raises(UnitError, match="line break or control character"):
        parse_value(text, "ohm")


@pytest.mark.parametrize("text", ["10%\n", "10%\n.include /etc/passwd", "\x0010%"])
def test_control_characters_in_percent_are_refused(text: str) -> None:
    with pytest.raises(UnitError, match="line break or control character"):
        parse_percent(text)


# --- exact decimal results ----------------------------------------------------------------


def test_exact_decimal_results() -> None:
    # Each right-hand side is the float nearest the decimal value; naive float
    # arithmetic (mantissa * 1e-6) misses several of these by one ulp (3.3 * 1e-6, for one).
    assert parse_value("100u") == 1e-4
    assert parse_value("1.1m") == 0.0011
    assert parse_value("3.3u") == 3.3e-6
    assert parse_value("4.7u") == 4.7e-6
    assert parse_value("3.3n") == 3.3e-9
    assert parse_value("0.1k") == 100.0
    assert parse_value("220m") == 0.22
    assert parse_value("2k2") == 2200.0
    assert parse_value("6.8p") == 6.8e-12
    assert parse_value("0.3u") == 3e-7


MANTISSAS = ["1", "1.1", "2.2", "3.3", "4.7", "6.8", "0.1", "0.3", "33", "470", "999.9", "12.345"]
EXPONENTS = {"f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "m": -3, "k": 3, "M": 6, "Meg": 6, "G": 9}


@pytest.mark.parametrize(("mantissa", "prefix"), list(itertools.product(MANTISSAS, EXPONENTS)))
def test_prefix_equals_decimal_exponent_exactly(mantissa: str, prefix: str) -> None:
    # "4.7u" must be the very float that the literal 4.7e-6 is.
    assert parse_value(f"{mantissa}{prefix}") == float(f"{mantissa}e{EXPONENTS[prefix]}")


# --- percent ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("value", "expected"),
    [("10%", 0.1), (" 10 % ", 0.1), ("2.5%", 0.025), ("0%", 0.0), ("10", 0.1), (10, 0.1), (0.1, 0.1), ("0.1", 0.1)],
)
def test_parse_percent(value: object, expected: float) -> None:
    assert parse_percent(value) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize(
    "value", ["ten%", "%", "", "10%%", "nan%", "inf%", "nan", "inf", "1e999%", "1_0%", "١٠%", math.nan, math.inf]
)
def test_parse_percent_refuses(value: object) -> None:
    with pytest.raises(UnitError, match="percentage"):
        parse_percent(value)


def test_parse_percent_refuses_other_types() -> None:
    with pytest.raises(UnitError, match="a table"):
        parse_percent({"x": 1})


# --- the deck writer ---------------------------------------------------------------------


def test_spice_golden() -> None:
    # SPICE reads "M" as milli: mega must be written "Meg".
    assert spice(1e6) == "1Meg"
    assert spice(4.7e-6) == "4.7u"
    assert spice(220e-3) == "220m"


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (0.0, "0"),
        (1.0, "1"),
        (250.0, "250"),
        (1e3, "1k"),
        (4700.0, "4.7k"),
        (2.2e6, "2.2Meg"),
        (10e6, "10Meg"),
        (1e9, "1G"),
        (1e-3, "1m"),
        (100e-6, "100u"),
        (3.3e-9, "3.3n"),
        (6.8e-12, "6.8p"),
        (1e-15, "1f"),
        (-1e6, "-1Meg"),
        (-0.22, "-220m"),
        (999.99999999e3, "1Meg"),
        (353.5533905932738, "353.5534"),
    ],
)
def test_spice_format(value: float, text: str) -> None:
    assert spice(value) == text


@pytest.mark.parametrize("value", [1e3, 1e6, 2.2e6, 470e6, 1e9, 12.5e6])
def test_spice_never_writes_capital_m_for_mega(value: float) -> None:
    text = spice(value)
    assert "M" not in text.replace("Meg", "")
    assert not text.endswith("M")


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_spice_refuses_non_finite(value: float) -> None:
    with pytest.raises(ValueError, match="non-finite"):
        spice(value)


def test_spice_round_trips_through_the_parser() -> None:
    # Seven significant digits survive spice() -> parse_value() exactly, for every prefix.
    values = [float(f"{m}e{e}") for m in (1.0, 1.234567, 4.7, 9.999999, 3.3, 123.4567) for e in range(-15, 12)]
    for v in values + [-v for v in values]:
        assert parse_value(spice(v)) == v, (v, spice(v))


def test_spice_is_plain_ascii() -> None:
    for v in (1e-4, 0.22, 1e6, 4.7e-6, 353.5533905932738, 1 / 3):
        text = spice(v)
        assert text.isascii()
        assert " " not in text
        assert "\n" not in text


# --- numbers for people --------------------------------------------------------------------


@pytest.mark.parametrize(
    ("value", "unit", "text"),
    [
        (0.0022, "F", "2.2 mF"),
        (301.24, "V", "301.2 V"),
        (0.01534, "A", "15.34 mA"),
        (0.0, "V", "0 V"),
        (1e6, "ohm", "1 MΩ"),
        (4700.0, "ohm", "4.7 kΩ"),
        (100e-6, "F", "100 µF"),
        (-0.0022, "A", "-2.2 mA"),
        (47e-9, "F", "47 nF"),
        (5.0, "", "5"),
    ],
)
def test_eng(value: float, unit: str, text: str) -> None:
    assert eng(value, unit) == text


def test_eng_uses_capital_m_for_mega_for_people() -> None:
    # Tables are for people: SI "M", not the deck's "Meg".
    assert eng(2.2e6, "ohm") == "2.2 MΩ"
    assert "Meg" not in eng(2.2e6, "ohm")


def test_eng_not_a_number() -> None:
    assert eng(math.nan, "V") == "n/a"
