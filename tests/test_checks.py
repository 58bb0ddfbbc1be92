"""`simkit check`: every verdict's value against the reference solver or a closed form, its limit against the
datasheet or the derating policy (docs/reference.md), each source named beside it."""

from __future__ import annotations

import json
import math

import pytest

from simkit.checks import check_design, next_fuse
from simkit.checks.rules import judge
from simkit.cli import main
from simkit.design.loader import design_from_dict, parse_toml_text
from tests.refsolver import Circuit, steady_state
from tests.test_vs_refsolver import (
    CASES,
    REF_DIODE,
    SLOW_CRC,
    TOLERANCE,
    Case,
    reference,
    reference_switch_on,
    surge_i2t,
)

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


# The corners of BASE as the reference solver's circuits (tests/test_vs_refsolver.py: the same elements as
# simkit builds them).  High mains is 1.1 x 300 V.  The fixed 5 k load with the 47 k bleeder is 4.52 k in the
# light and heavy corners; the cold-load corner keeps only the bleeder.
LOADED = Case("check corner: high mains, 5 k and the bleeder", "bridge", 330.0, 50.0, 30.0, 47e-6,
              5e3 * 47e3 / (5e3 + 47e3), filters=(("r", 470.0), ("c", 100e-6)))
COLD = next(c for c in CASES if c.name == SLOW_CRC)  # high mains, only the 47 k bleeder


def test_judge_bands() -> None:
    # Plumbing of the verdict policy (docs/reference.md): fail beyond the limit, marginal within 10 % of it.
    assert judge(50, 100, 0.1) == ("pass", 0.5)
    assert judge(95, 100, 0.1)[0] == "marginal"
    assert judge(101, 100, 0.1)[0] == "fail"
    assert judge(120, 100, 0.1, minimum=True)[0] == "pass"  # a minimum limit (supply resistance per plate)
    assert judge(80, 100, 0.1, minimum=True)[0] == "fail"


def test_fuse_series() -> None:
    # Preferred fuse ratings of the R10 series (ISO 3 preferred numbers, as fuse ranges use them; from memory).
    assert next_fuse(0.27) == 0.315 and next_fuse(1.0) == 1.0 and next_fuse(4.1) == 5.0


@pytest.mark.ngspice
def test_diode_reverse_voltage_at_high_mains_cold() -> None:
    # The cold-load corner at +10 % mains gives the highest reverse voltage; the solver's PIV of that circuit
    # (a bridge diode sees the reservoir's crest plus the conducting diode's drop).  Measured within 0.0004 %.
    # Limit: 80 % (the derating policy, docs/reference.md) of VRRM 1000 V (Vishay 1N4001 thru 1N4007, doc.
    # 88503).
    v = verdict(report(BASE), "D3", "reverse voltage")
    assert v.value == pytest.approx(reference(COLD).piv, rel=TOLERANCE["piv"])
    assert v.limit == pytest.approx(0.8 * 1000.0)
    assert v.verdict == "pass" and v.corner.startswith("cold load")


@pytest.mark.ngspice
def test_diode_surge_and_mean_current() -> None:
    rep = report(BASE)
    # Switch-on at the crest (derived here): the whole EMF across Rs and two diodes, i = (1.1 Vpk - 2 V_F(i))/Rs
    # with V_F from the junction law of simkit's 1N4007 fit (IS 5 nA, N 1.8, RS 40 mohm, evaluated by the
    # solver's independent code).  Measured within 0.013 %.  Limit: IFSM 30 A (Vishay doc. 88503).
    v = verdict(rep, "D1", "surge current")
    vpk = 1.1 * SQ2 * 300
    i = vpk / 30
    for _ in range(50):  # a contraction: |d(2 V_F)/di| / Rs is below 0.01
        i = (vpk - 2 * float(REF_DIODE.voltage(i))) / 30
    assert v.value == pytest.approx(i, rel=5e-4)
    assert v.limit == 30.0 and v.verdict == "pass"
    # Charge balance: each bridge diode carries half the DC current; the heaviest corner is high mains.
    # Measured within 0.005 %.  Limit: IF(AV) 1 A (Vishay doc. 88503).
    m = verdict(rep, "D1", "mean current")
    heavy = rep.corners.results[m.corner]
    total = heavy.parts["RLOAD"].dc_a + heavy.parts["RBLEED"].dc_a
    assert m.value == pytest.approx(total / 2, rel=2e-4) and m.limit == 1.0
    # I2t over the half period around the surge, against the solver's switch-on of the same circuit (the
    # window of simkit's surge_i2t_a2s).  Measured within 0.027 %.  Limit: I2t 3.7 A2s (Vishay doc. 88503).
    i2t = verdict(rep, "D1", "surge I2t")
    assert i2t.value == pytest.approx(surge_i2t(reference_switch_on(LOADED), 1 / 50), rel=TOLERANCE["surge"])
    assert i2t.limit == 3.7 and i2t.verdict == "pass"


@pytest.mark.ngspice
def test_capacitor_voltage_and_ripple() -> None:
    rep = report(BASE)
    # The reservoir's highest voltage, in the cold-load corner at +10 % mains: the solver's highest voltage
    # of it, steady or at switch-on.  Measured within 0.0002 %.  Limit 90 % of 450 V = 405 V (the derating
    # policy), so it fails: a 450 V part on a 300 V winding at high mains with no load.
    v = verdict(rep, "C1", "peak voltage")
    cold = max(float(reference(COLD).cap_voltage[0].max()), reference_switch_on(COLD).vcap_max)
    assert v.value == pytest.approx(cold, rel=TOLERANCE["vdc"])
    assert v.limit == pytest.approx(405.0) and v.verdict == "fail"
    # Its ripple current at high mains against the solver's (the reservoir is the first capacitor, and it
    # carries more ripple current than the one after the 470 ohm).  Measured within 0.002 %.
    r = verdict(rep, "C1", "ripple current")
    assert r.value == pytest.approx(reference(LOADED).cap_ripple_rms, rel=TOLERANCE["capacitor"])
    assert r.limit == 0.5


@pytest.mark.ngspice
def test_resistor_dissipation_and_winding_current() -> None:
    rep = report(BASE)
    # The bleeder dissipates mean(v^2)/R = (Vdc^2 + V_ripple,rms^2)/R (Ohm's law), highest at the cold-load
    # corner: the solver's output there.  Measured within 0.0007 %.  Limit 50 % of 5 W (the policy).
    b = verdict(rep, "RBLEED", "dissipation")
    ref = reference(COLD)
    assert b.value == pytest.approx((ref.vdc**2 + ref.ripple_rms**2) / 47e3, rel=2 * TOLERANCE["vdc"])
    assert b.limit == pytest.approx(2.5) and b.verdict == "fail"
    # The winding's RMS current at high mains against the solver's.  Measured within 0.003 %.
    w = verdict(rep, "V1", "winding RMS current")
    assert w.value == pytest.approx(reference(LOADED).source_rms, rel=TOLERANCE["current"])
    assert w.limit == 0.3


@pytest.mark.ngspice
def test_choke_current_is_the_dc_through_it() -> None:
    toml = BASE.replace('r = "470"\nrating = { w = "5" }', 'l = "5"\ndcr = "100"\nrating = { i = "80m" }')
    rep = report(toml)
    v = verdict(rep, "L1", "DC current")
    # KCL: the choke carries the load and bleeder current (measured within 2e-7); 300 V x 1.1 into 5 k and
    # 47 k is about 90 mA, above the 80 mA rating given.
    corner = rep.corners.results[v.corner]
    assert v.value == pytest.approx(corner.parts["RLOAD"].dc_a + corner.parts["RBLEED"].dc_a, rel=1e-5)
    assert v.limit == pytest.approx(0.080) and v.verdict == "fail"


@pytest.mark.ngspice
def test_tube_rectifier_rules() -> None:
    # 5Y3GT (RCA data sheet, values from memory): input capacitance at most 20 uF, supply resistance at least
    # 50 ohm per plate, peak plate current 440 mA, PIV 1400 V.
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
    # A centre-tap plate sees 2 Vpk with no load (derived here; a vacuum plate has no forward drop at zero
    # current and no reverse current).  Measured within 0.003 %.
    assert piv.value == pytest.approx(2 * SQ2 * 350, rel=2e-4)
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
    # Each balancing resistor sees half the output (equal capacitors and resistors): P = (V/2)^2 / R (Ohm's
    # law); measured within 0.004 % (the ripple's share of mean(v^2)).
    vout = fixed.corners.results[rb.corner].metrics["vout_dc_v"]
    assert rb.value == pytest.approx((vout / 2) ** 2 / 100e3, rel=2e-4)


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
    # Exponential decay through the bleeder (derived here): t = R C ln(V0 / V_safe).  The limit, 60 V within
    # 5 s, is IEC 60204-1 cl. 6.2.4 (from memory), simkit's default.  Without a bleeder the capacitor keeps
    # its charge.  Measured within 0.005 % (V0, the corner's charge at switch-off, is the initial condition).
    none = report(DISCHARGE.replace("{bleeder}", ""))
    assert verdict(none, "C1", "discharge").verdict == "fail"
    assert math.isinf(verdict(none, "C1", "discharge").value)
    rep = report(DISCHARGE.replace("{bleeder}", '[bleeder]\nr = "22k"'))
    v = verdict(rep, "C1", "discharge")
    v0 = rep.corners.off.start_v["C1"]
    assert v.value == pytest.approx(22e3 * 100e-6 * math.log(v0 / 60), rel=2e-4)
    assert v.verdict == "pass" and v.limit == 5.0


@pytest.mark.ngspice
def test_piv_fails_at_high_mains_but_passes_at_nominal() -> None:
    # Half-wave into 100 uF and a 100 k bleeder: about 2 Vpk, 394 V at nominal and 454 V at +15 % mains; the
    # solver's PIV of both circuits.  VRRM 560 V x 80 % = 448 V: the nominal passes by more than the 10 %
    # marginal band, the high corner fails.
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
    high = verdict(report(toml), "D1", "reverse voltage")
    assert high.value == pytest.approx(_half_wave_piv(1.15 * 140), rel=TOLERANCE["piv"])
    assert high.limit == pytest.approx(448.0) and high.verdict == "fail"
    nominal = verdict(report(toml.replace('mains_tolerance = "15%"\n', "")), "D1", "reverse voltage")
    assert nominal.value == pytest.approx(_half_wave_piv(140.0), rel=TOLERANCE["piv"])
    assert nominal.verdict == "pass"


def _half_wave_piv(vrms: float) -> float:
    return steady_state(Circuit("half-wave", vrms, 50.0, 10.0, 100e3, 100e-6, REF_DIODE)).piv


def _fails(doc: dict) -> set[tuple[str, str]]:
    return {(v["part"], v["rule"]) for v in doc["verdicts"] if v["verdict"] == "fail"}


@pytest.mark.ngspice
def test_check_command_exit_codes_and_json(tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    # Which rules must fail, worked out with the solver's figures (not read from simkit's output):
    ref_cold, ref_loaded = reference(COLD), reference(LOADED)
    assert ref_cold.vdc**2 / 47e3 > 0.5 * 5  # bleeder at the cold corner: about 4.4 W against 50 % of 5 W
    assert (ref_loaded.vdc / LOADED.rl) ** 2 * 470 > 0.5 * 5  # R1 carries load and bleeder: about 3.7 W
    assert 47e3 * (47e-6 + 100e-6) * math.log(ref_cold.vdc / 60) > 5  # about 14 s to 60 V through 47 k
    assert float(ref_cold.cap_voltage.max()) > 0.9 * 450  # the capacitors exceed 405 V with no load
    discharge = {(c, "discharge below 60 V") for c in ("C1", "C2", "output")}
    expected = {("R1", "dissipation"), ("RBLEED", "dissipation"), *discharge}
    p = tmp_path / "d.toml"
    p.write_text(BASE)
    with pytest.raises(SystemExit) as info:
        main(["check", str(p), "--json"])
    out, _ = capsys.readouterr()
    assert info.value.code == 1
    doc = json.loads(out)
    assert set(doc["verdicts"][0]) >= {"part", "rule", "value", "limit", "margin", "verdict", "corner"}
    assert _fails(doc) == expected | {("C1", "peak voltage"), ("C2", "peak voltage")}
    assert doc["summary"]["fail"] == len(expected) + 2 and "fuse" in doc["summary"]
    assert "never trust it alone" in " ".join(doc["summary"]["cautions"].split())  # the bleeder caution
    # 630 V capacitors: the peak voltages pass; the resistors and the discharge still fail, so exit 1.
    p.write_text(BASE.replace('v = "450", ripple', 'v = "630", ripple').replace('c = "100u"\nrating = { v = "450" }',
                                                                                 'c = "100u"\nrating = { v = "630" }'))
    with pytest.raises(SystemExit) as info:
        main(["check", str(p), "--json"])
    out, _ = capsys.readouterr()
    assert info.value.code == 1 and _fails(json.loads(out)) == expected
    with pytest.raises(SystemExit) as info:
        main(["check", str(p)])
    out, _ = capsys.readouterr()
    assert info.value.code == 1
    assert "HIGH VOLTAGE" in out and "suggested fuse" in out and "slow-blow" in out
    assert "(80 % of a diode's VRRM, 90 % of a capacitor's voltage, 50 % of a resistor's power)" in out
    # The footer states the design's own derating, not the defaults.
    p.write_text(p.read_text() + '\n[checks]\ndiode_voltage = "70%"\nresistor_power = "60%"\n')
    with pytest.raises(SystemExit):
        main(["check", str(p)])
    out, _ = capsys.readouterr()
    assert "(70 % of a diode's VRRM, 90 % of a capacitor's voltage, 60 % of a resistor's power)" in out


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
    # A rating of 0 rates nothing: refused in a parts file as in the design's own rating tables.
    from simkit.errors import DesignError

    parts = tmp_path / "parts.toml"
    parts.write_text(parts.read_text().replace('v = "450"', 'v = "0"'))
    with pytest.raises(DesignError) as info:
        load_design(design)
    assert "capacitors.EL450.v" in str(info.value)
