"""`simkit check`: every rule worked by hand from datasheet numbers and closed forms named beside it."""

from __future__ import annotations

import json
import math

import pytest

from simkit.checks import check_design, next_fuse
from simkit.checks.rules import judge
from simkit.cli import main
from simkit.design.loader import design_from_dict, parse_toml_text

SQ2 = math.sqrt(2.0)

BASE = """
title = "check fixture"
[source]
vrms = "300"
frequency = "50"
resistance = "30"
mains_tolerance = "10%"
rated_current = "0.3"
[rectifier]
topology = "bridge"
diode = "1N4007"
[[filter]]
c = "47u"
rating = { v = "450", ripple = "0.5" }
[[filter]]
r = "470"
rating = { w = "5" }
[[filter]]
c = "100u"
rating = { v = "450" }
[load]
kind = "resistor"
r = "5k"
[bleeder]
r = "47k"
rating = { w = "5" }
"""

_REPORTS: dict[str, object] = {}


def report(text: str):  # type: ignore[no-untyped-def]
    if text not in _REPORTS:
        _REPORTS[text] = check_design(design_from_dict(parse_toml_text(text)))
    return _REPORTS[text]


def verdict(rep, part: str, rule: str):  # type: ignore[no-untyped-def]
    found = [v for v in rep.verdicts if v.part == part and v.rule.startswith(rule)]
    assert len(found) == 1, [(v.part, v.rule) for v in rep.verdicts]
    return found[0]


def test_judge_bands() -> None:
    # The verdict policy of the issue: fail beyond the limit, marginal within 10 % of it.
    assert judge(50, 100, 0.1) == ("pass", 0.5)
    assert judge(95, 100, 0.1)[0] == "marginal"
    assert judge(101, 100, 0.1)[0] == "fail"
    assert judge(120, 100, 0.1, minimum=True)[0] == "pass"  # a minimum limit (supply resistance per plate)
    assert judge(80, 100, 0.1, minimum=True)[0] == "fail"


def test_fuse_series() -> None:
    # Preferred fuse ratings (R10 series, IEC 60127 style, from memory [M]).
    assert next_fuse(0.27) == 0.315 and next_fuse(1.0) == 1.0 and next_fuse(4.1) == 5.0


@pytest.mark.ngspice
def test_diode_reverse_voltage_at_high_mains_cold() -> None:
    # Formula 14: a bridge diode sees Vpk in reverse with no load (cold load corner), at +10 % mains, less the
    # forward drop of the diode conducting opposite it; limit 80 % of VRRM 1000 V (Vishay 88503).  The CRC
    # filter does not overshoot (no choke).
    v = verdict(report(BASE), "D3", "reverse voltage")
    assert v.value == pytest.approx(1.1 * SQ2 * 300 - 0.8, rel=0.01)
    assert v.limit == pytest.approx(800.0)
    assert v.verdict == "pass" and v.corner.startswith("cold load")


@pytest.mark.ngspice
def test_diode_surge_and_mean_current() -> None:
    # Formula 18: switch-on at the crest gives about (1.1 Vpk - 2 V_F) / Rs through D1 and D4; IFSM 30 A.
    v = verdict(report(BASE), "D1", "surge current")
    assert v.value == pytest.approx((1.1 * SQ2 * 300 - 2 * 1.0) / 30, rel=0.03)
    assert v.limit == 30.0 and v.verdict == "pass"
    # KCL: each bridge diode carries half the DC current; the heaviest corner is high mains.
    rep = report(BASE)
    m = verdict(rep, "D1", "mean current")
    heavy = rep.corners.results[m.corner]
    total = sum(p["dc_a"] for k, p in heavy.parts.items() if k in ("RLOAD", "RBLEED"))
    assert m.value == pytest.approx(total / 2, rel=5e-3) and m.limit == 1.0  # IF(AV) 1 A (Vishay 88503)
    i2t = verdict(rep, "D1", "surge I2t")
    assert 0 < i2t.value < i2t.limit == 3.7  # I2t 3.7 A2s (Vishay 88503)


@pytest.mark.ngspice
def test_capacitor_voltage_and_ripple() -> None:
    # Formula 1 at +10 % mains and no load: the reservoir reaches 1.1 sqrt(2) 300 V less two diode drops;
    # limit 90 % of 450 V = 405 V, so it fails (a 450 V part on a 300 V winding at high mains with no load).
    rep = report(BASE)
    v = verdict(rep, "C1", "peak voltage")
    assert v.value == pytest.approx(1.1 * SQ2 * 300 - 1.5, rel=0.01)
    assert v.limit == pytest.approx(405.0) and v.verdict == "fail"
    r = verdict(rep, "C1", "ripple current")
    # Formula 15 (KCL): the reservoir's ripple current equals the corner's own figure.
    assert r.value == pytest.approx(rep.corners.results[r.corner].metrics["reservoir_ripple_a"], rel=1e-9)
    assert r.limit == 0.5


@pytest.mark.ngspice
def test_resistor_dissipation_and_winding_current() -> None:
    rep = report(BASE)
    b = verdict(rep, "RBLEED", "dissipation")
    # Ohm's law: the bleeder dissipates V^2 / R at the highest output (cold load, high mains); 50 % of 5 W.
    cold = rep.corners.results[b.corner]
    assert b.value == pytest.approx(cold.metrics["vout_dc_v"] ** 2 / 47e3, rel=2e-3)
    assert b.limit == pytest.approx(2.5)
    w = verdict(rep, "V1", "winding RMS current")
    assert w.limit == 0.3 and w.value == pytest.approx(rep.corners.results[w.corner].metrics["source_rms_a"])


@pytest.mark.ngspice
def test_choke_current_is_the_dc_through_it() -> None:
    toml = BASE.replace('r = "470"\nrating = { w = "5" }', 'l = "5"\ndcr = "100"\nrating = { i = "80m" }')
    rep = report(toml)
    v = verdict(rep, "L1", "DC current")
    # KCL: the choke carries the load and bleeder current; 300 V x 1.1 into 5 k and 47 k is about 90 mA > 80 mA.
    corner = rep.corners.results[v.corner]
    assert v.value == pytest.approx(corner.parts["RLOAD"]["dc_a"] + corner.parts["RBLEED"]["dc_a"], rel=5e-3)
    assert v.verdict == "fail"


@pytest.mark.ngspice
def test_tube_rectifier_rules() -> None:
    # 5Y3GT (tubeofile aggregate of the RCA sheet [S] and memory [M]): input capacitance at most 20 uF, supply
    # resistance at least 50 ohm per plate, peak plate current 440 mA, PIV 1400 V.
    toml = """
[source]
vrms = "350"
frequency = "50"
resistance = "30"
[rectifier]
topology = "centre-tap"
diode = "5Y3GT"
[[filter]]
c = "40u"
[load]
kind = "resistor"
r = "3.3k"
"""
    rep = report(toml)
    assert verdict(rep, "5Y3GT", "input capacitance").verdict == "fail"  # 40 uF > 20 uF
    res = verdict(rep, "D1", "supply resistance per plate")
    assert res.value == 30 and res.limit == 50 and res.verdict == "fail"
    piv = verdict(rep, "D1", "peak inverse voltage")
    assert piv.value == pytest.approx(2 * SQ2 * 350, rel=0.02)  # formula 14: centre-tap 2 Vpk (no mains tolerance)
    assert piv.limit == pytest.approx(0.8 * 1400)
    pk = verdict(rep, "D1", "peak plate current")
    assert pk.limit == 0.44


@pytest.mark.ngspice
def test_series_capacitors_need_balancing_resistors() -> None:
    toml = """
[source]
vrms = "120"
frequency = "60"
resistance = "4"
[rectifier]
topology = "doubler"
capacitance = "220u"
capacitor_rating = { v = "250" }
{balancing}
[load]
kind = "current"
i = "60m"
"""
    bare = report(toml.replace("{balancing}", ""))
    assert verdict(bare, "C1, C2", "balancing").verdict == "fail"  # common practice for electrolytics in series
    fixed = report(toml.replace("{balancing}", 'balancing = "100k"\nbalancing_rating = { w = "1" }'))
    assert not [v for v in fixed.verdicts if v.rule.startswith("balancing")]
    rb = verdict(fixed, "RBAL1", "dissipation")
    # Each balancing resistor sees about half the output: P = (V/2)^2 / R (Ohm's law).
    vout = fixed.corners.results[rb.corner].metrics["vout_dc_v"]
    assert rb.value == pytest.approx((vout / 2) ** 2 / 100e3, rel=0.03)


DISCHARGE = """
title = "discharge"
[source]
vrms = "318.2"
frequency = "50"
resistance = "5"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[load]
kind = "resistor"
r = "10k"
{bleeder}
"""


@pytest.mark.ngspice
def test_discharge_fails_without_a_bleeder_and_passes_with_one() -> None:
    # REFERENCES formula 17 (sdev.dk [S]): t = R C ln(V0 / V_safe); 60 V within 5 s needs R <= 24.8 k at 450 V
    # on 100 uF.  Without a bleeder the capacitor keeps its charge.
    none = report(DISCHARGE.replace("{bleeder}", ""))
    assert verdict(none, "C1", "discharge").verdict == "fail"
    assert math.isinf(verdict(none, "C1", "discharge").value)
    rep = report(DISCHARGE.replace("{bleeder}", '[bleeder]\nr = "22k"'))
    v = verdict(rep, "C1", "discharge")
    v0 = rep.corners.off.start_v["C1"]
    assert v.value == pytest.approx(22e3 * 100e-6 * math.log(v0 / 60), rel=0.05)
    assert v.verdict == "pass" and v.limit == 5.0


@pytest.mark.ngspice
def test_piv_fails_at_high_mains_but_passes_at_nominal() -> None:
    # Formula 14: half-wave with no load, PIV = 2 Vpk.  2 sqrt(2) 140 = 396 V nominal, 455 V at +15 % mains;
    # VRRM 560 V x 80 % = 448 V: above the nominal by more than the 10 % marginal band, below the high corner.
    toml = """
[source]
vrms = "140"
frequency = "50"
resistance = "10"
mains_tolerance = "15%"
[rectifier]
topology = "half-wave"
diode = { is = "5n", n = 1.8, rs = "40m", vrrm = "560" }
[[filter]]
c = "100u"
[bleeder]
r = "100k"
"""
    high = report(toml)
    assert verdict(high, "D1", "reverse voltage").verdict == "fail"
    nominal = report(toml.replace('mains_tolerance = "15%"\n', ""))
    v = verdict(nominal, "D1", "reverse voltage")
    assert v.verdict == "pass" and v.value == pytest.approx(2 * SQ2 * 140, rel=0.01)


@pytest.mark.ngspice
def test_check_command_exit_codes_and_json(tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    p = tmp_path / "d.toml"
    p.write_text(BASE)
    with pytest.raises(SystemExit) as info:
        main(["check", str(p), "--json"])
    out, _ = capsys.readouterr()
    assert info.value.code == 1  # C1 fails at high mains (see above)
    doc = json.loads(out)
    assert set(doc["verdicts"][0]) >= {"part", "rule", "value", "limit", "margin", "verdict", "corner"}
    assert doc["summary"]["fail"] >= 1 and "fuse" in doc["summary"]
    assert "never trust a bleeder alone" in doc["summary"]["cautions"]
    p.write_text(BASE.replace('v = "450", ripple', 'v = "630", ripple').replace('c = "100u"\nrating = { v = "450" }',
                                                                                 'c = "100u"\nrating = { v = "630" }'))
    with pytest.raises(SystemExit) as info:
        main(["check", str(p)])
    out, _ = capsys.readouterr()
    assert "HIGH VOLTAGE" in out and "suggested fuse" in out and "slow-blow" in out
    assert info.value.code == (1 if " FAIL " in out else 0)


@pytest.mark.ngspice
def test_ratings_from_a_user_part_library(tmp_path) -> None:  # type: ignore[no-untyped-def]
    # A parts file of the user's: a diode by name, a capacitor's rating and ESR, a resistor's power rating.
    (tmp_path / "parts.toml").write_text(
        '[diodes.MYDIODE]\nis = "5n"\nn = 1.8\nrs = "40m"\nvrrm = "800"\nifsm = "25"\n'
        '[capacitors.EL450]\nv = "450"\nripple = "0.6"\nesr = "0.4"\n[resistors.R3W]\nw = "3"\n')
    design = tmp_path / "d.toml"
    design.write_text(DISCHARGE.replace("{bleeder}", '[bleeder]\nr = "22k"\npart = "R3W"')
                      .replace('title = "discharge"', 'title = "library"\nlibrary = "parts.toml"')
                      .replace('topology = "bridge"', 'topology = "bridge"\ndiode = "MYDIODE"')
                      .replace('c = "100u"', 'c = "100u"\npart = "EL450"'))
    from simkit.design.loader import load_design

    d = load_design(design)
    assert d.filters[0].esr == 0.4 and d.filters[0].rating is not None and d.filters[0].rating.v == 450
    rep = check_design(d)
    assert verdict(rep, "D1", "reverse voltage").limit == pytest.approx(0.8 * 800)
    assert verdict(rep, "D1", "surge current").limit == 25
    assert verdict(rep, "C1", "peak voltage").limit == pytest.approx(0.9 * 450)
    assert verdict(rep, "RBLEED", "dissipation").limit == pytest.approx(0.5 * 3)
