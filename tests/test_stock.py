"""Stock values (simkit/stock.py) against their sources: the E series of IEC 60063, the R10 series of ISO 3,
and the ratings capacitors and resistors are sold in; and the sweep spec that walks an E series."""

from __future__ import annotations

import math

import pytest

from simkit import stock
from simkit.errors import UsageError
from simkit.sweep.specs import parse_spec

#: IEC 60063 (from memory; docs/sources.md#num-7): the E series are rounded from 10^(i/n), two significant
#: figures for E3 to E24, except these E24 values, which keep their older, historical numbers.
E24_HISTORICAL = {2.7: 2.6, 3.0: 2.9, 3.3: 3.2, 3.6: 3.5, 3.9: 3.8, 4.3: 4.2, 4.7: 4.6, 8.2: 8.3}


@pytest.mark.parametrize("name,n", [("E3", 3), ("E6", 6), ("E12", 12), ("E24", 24)])
def test_e_series_against_iec_60063(name: str, n: int) -> None:
    values = stock.E_SERIES[name]
    assert len(values) == n
    for i, v in enumerate(values):
        rounded = round(10 ** (i / n), 1)  # the geometric series, two significant figures
        # Every value is the rounded geometric one, or an E24 member that keeps its historical number; no other
        # deviation is allowed.
        assert v == rounded or (v in E24_HISTORICAL and E24_HISTORICAL[v] == rounded), (name, i, v, rounded)
        assert abs(v / 10 ** (i / n) - 1) < 0.05  # within a few % of the geometric series


def test_each_e_series_is_every_other_value_of_the_next() -> None:
    # IEC 60063: E(n) is every second value of E(2n).
    for small, big in (("E3", "E6"), ("E6", "E12"), ("E12", "E24")):
        assert stock.E_SERIES[small] == stock.E_SERIES[big][::2]


def test_stock_values_above_and_below() -> None:
    # A builder buys 470 uF or 560 uF for 480.1 uF (E12), 22 k for 21 k (E12), 20 k (E24).
    assert stock.at_least(480.1e-6, "E12") == 560e-6 and stock.at_most(480.1e-6, "E12") == 470e-6
    assert stock.at_least(21e3, "E12") == 22e3 and stock.at_least(19.5e3, "E24") == 20e3
    assert stock.at_least(470e-6, "E12") == 470e-6 == stock.at_most(470e-6, "E12")  # a stock value is itself
    assert stock.at_least(9.3, "E12") == 10.0 and stock.at_most(0.95, "E6") == 0.68  # across a decade
    assert stock.neighbours(50e3, "E6") == (47e3, 68e3)
    with pytest.raises(stock.StockError):
        stock.at_least(0.0, "E12")
    with pytest.raises(ValueError):
        stock.series("E7")


def test_r10_series() -> None:
    # ISO 3 R10 (num-3): 1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8 per decade (the fuse series too, next_fuse).
    assert stock.R10 == (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)
    assert all(abs(m / 10 ** (i / 10) - 1) < 0.015 for i, m in enumerate(stock.R10))  # 10^(i/10), rounded
    assert stock.at_least(0.27, "R10") == 0.315 and stock.at_least(3.3, "R10") == 4.0


def test_capacitor_voltages_and_resistor_powers() -> None:
    # The ratings parts are sold in (common practice, num-8): a 516 V peak at 90 % derating needs 630 V.
    assert stock.capacitor_volts(516 / 0.9) == 630
    assert stock.capacitor_volts(450) == 450 and stock.capacitor_volts(451) == 500
    assert stock.resistor_watts(4.2) == 5 and stock.resistor_watts(0.3) == 0.5 and stock.resistor_watts(11) == 15
    assert {160, 250, 350, 400, 450, 500, 630, 800, 1000} <= set(stock.CAPACITOR_VOLTS)
    assert {0.25, 0.5, 1, 2, 3, 5, 10} <= set(stock.RESISTOR_WATTS)
    with pytest.raises(stock.StockError):
        stock.resistor_watts(1e3)


def test_values_as_set_takes_them() -> None:
    assert [stock.compact(x) for x in (47e3, 4.7e-4, 630.0, 0.5, 1e6, 2.2e-6)] == ["47k", "470u", "630", "0.5",
                                                                                  "1M", "2.2u"]


def test_a_sweep_spec_walks_an_e_series() -> None:
    spec = parse_spec("E12:22u:470u", "filter.0.c")
    expected = [m * 1e-5 for m in (2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)] + \
        [m * 1e-4 for m in (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7)]
    assert all(math.isclose(a, b, rel_tol=1e-12) for a, b in zip(spec.values, expected, strict=True))
    assert spec.kind == "log"  # about equal ratios: plotted on a log axis
    assert parse_spec("e6:1k:10k").values == (1e3, 1.5e3, 2.2e3, 3.3e3, 4.7e3, 6.8e3, 10e3)
    for bad in ("E12:22u", "E12:0:1u", "E12:105u:110u", "E12:x:1u"):
        with pytest.raises(UsageError):
            parse_spec(bad)
