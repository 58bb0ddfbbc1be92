"""Labels that tell the truth: the invented-example banner comes from ``example = true`` only; corners are listed
once when they are one circuit; the fuse line names the current it used; the report's Summary starts with the
verdict; ``size --stock`` names the stock value that meets the target and the neighbour that misses it."""

from __future__ import annotations

from pathlib import Path

import pytest

from simkit.checks.corners import design_corner_names
from simkit.design.loader import design_from_dict, load_design, parse_toml_text
from simkit.sweep.size import run_size, summary_text
from tests.conftest import EXAMPLES

PLAIN = """
title = "{title}"
note = "{note}"
{example}
[source]
vrms = "250"
frequency = "50"
resistance = "25"
[rectifier]
topology = "bridge"
[[filter]]
c = "47u"
[load]
kind = "resistor"
r = "5k"
[bleeder]
r = "47k"
"""


def _design(title: str, note: str = "", example: str = ""):  # type: ignore[no-untyped-def]
    return design_from_dict(parse_toml_text(PLAIN.format(title=title, note=note, example=example)))


def test_the_banner_comes_from_the_key_only() -> None:
    from types import SimpleNamespace

    from simkit.report.design_report import is_invented

    def invented(d) -> bool:  # type: ignore[no-untyped-def]
        return is_invented(SimpleNamespace(design=d))  # type: ignore[arg-type]

    assert not invented(_design("An invented supply", "invented for a test"))  # words are not a key
    assert invented(_design("Bench supply", example="example = true"))
    assert not invented(_design("Bench supply", example="example = false"))
    assert all(load_design(p).example for p in sorted(EXAMPLES.glob("*.toml")))  # every shipped example says so


def test_corners_that_are_one_circuit_are_one_corner() -> None:
    fixed = design_corner_names(_design("fixed"))
    assert fixed["light"] == fixed["heavy"] == "nominal mains (no mains_tolerance), fixed load"
    keyed = design_corner_names(load_design(EXAMPLES / "portable_cw_inverter_doubler.toml"))
    assert keyed["light"].endswith("light load") and keyed["heavy"].endswith("heavy load")
    idle = design_corner_names(design_from_dict(parse_toml_text(PLAIN.format(title="idle", note="", example="")
                                                                .replace('[load]\nkind = "resistor"\nr = "5k"\n',
                                                                         ""))))
    assert idle["light"] == idle["heavy"] == idle["cold"] and idle["cold"].endswith("no load")


@pytest.mark.ngspice
def test_an_inverter_fuse_names_the_battery_rms_current() -> None:
    from simkit.analysis import metrics as mx
    from simkit.checks import check_design

    rep = check_design(load_design(EXAMPLES / "portable_cw_inverter_doubler.toml"))
    fz = rep.fuse
    assert fz["current"] == "the battery's RMS current" and "battery lead" in fz["where"]
    heavy = rep.corners.results[fz["corner"]]
    w = heavy.steady.final.waves
    t0, t1 = heavy.window
    # RMS of the battery current over the measuring window (num-4), between its mean and its peak.
    assert fz["current_a"] == pytest.approx(mx.rms(w.time, w.v("ib"), t0, t1))
    assert heavy.metrics["battery_current_a"] <= fz["current_a"] <= heavy.metrics["battery_peak_current_a"]
    # Light and heavy differ for a keyed load: both are simulated and listed (an inverter on a battery has
    # the battery's corners in place of the mains').
    assert len([c for c in rep.summary()["corners"] if "light load" in c or "heavy load" in c]) >= 2


@pytest.mark.ngspice
def test_the_report_summary_starts_with_the_verdict(tmp_path: Path) -> None:
    from simkit.checks import run_checks
    from simkit.pipeline import simulate
    from simkit.report.design_report import build_report

    text = PLAIN.format(title="summary", note="", example="").replace('r = "47k"', 'r = "47k"\nrating = { w = "1" }')
    d = design_from_dict(parse_toml_text(text))
    checks, err = run_checks(d)
    assert not err
    md = build_report(simulate(d), checks=checks).markdown()
    summary = md[md.index("## Summary"):]
    first = summary.split("\n\n")[1]
    # 47 k across about 350 V dissipates about 2.6 W, above 50 % of 1 W (and above the 1 W itself).
    assert first.startswith("**Verdict: FAIL**") and "RBLEED dissipation" in first and "Worst:" in first
    assert "To fix (stock values" in md and "bleeder.rating.w=" in md


def test_size_answers_with_a_stock_value_and_its_neighbour(capsys: pytest.CaptureFixture[str]) -> None:
    # A figure that falls as 1/C (ripple of a reservoir, rect-2): 1 mF.V / C meets 2 V from 500 uF up.  The E12
    # value to buy is 560 uF (1.79 V); its neighbour 470 uF (2.13 V) misses (IEC 60063 E12).
    def fake(design) -> dict[str, float]:  # type: ignore[no-untyped-def]
        return {"ripple_pp_v": 1e-3 / design.filters[0].value}

    res = run_size(EXAMPLES / "bench_amp_bridge_clc.toml", "filter.0.c=100u:1m", "ripple_pp_v<=2",
                   simulate_fn=fake, stock_series="E12")
    assert res.value == pytest.approx(500e-6, rel=0.01)
    st = res.stock
    assert st is not None and st.value == 560e-6 and st.met and st.figure == pytest.approx(1e-3 / 560e-6)
    assert st.neighbour == 470e-6 and st.neighbour_met is False
    text = summary_text(res)
    assert "stock (E12): filter.0.c = 560 µF" in text and "470 µF gives 2.128 V, which misses it" in text
    assert res.to_json()["stock"]["neighbour"]["value"] == 470e-6
    # A target met below a boundary (a figure that rises with the value): the stock value at or below it.
    res = run_size(EXAMPLES / "bench_amp_bridge_clc.toml", "filter.0.c=100u:1m", "ripple_pp_v>=2",
                   simulate_fn=fake, stock_series="E6")
    assert res.stock is not None and res.stock.value == 470e-6 and res.stock.neighbour == 680e-6
    # The low end of the range already meets the target closely (10 V at 100 uF): the search stops after one
    # simulation, and the high end, simulated once more, says larger values meet (ripple falls as 1/C).
    res = run_size(EXAMPLES / "bench_amp_bridge_clc.toml", "filter.0.c=100u:1m", "ripple_pp_v<=10",
                   simulate_fn=fake, stock_series="E12")
    assert res.value == pytest.approx(100e-6) and res.stock is not None
    assert res.stock.value == 100e-6 and res.stock.met and res.stock.neighbour == 82e-6
