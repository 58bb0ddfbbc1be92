"""Stress and safety rules: each part's worst figure over the corners against its (derated) rating.

A verdict is ``fail`` when the value is beyond the limit, ``marginal`` when it is within
``checks.marginal`` (10 %) of it, ``pass`` otherwise.  The margin is the headroom as a
fraction of the limit (negative when failing).  Limits apply the design's derating policy
(``[checks]``; the defaults are common practice, not a standard): a diode may see 80 % of
its VRRM, a capacitor 90 % of its rated voltage, a resistor may dissipate 50 % of its
rating.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from simkit.checks.corners import Corners
from simkit.design.model import Design, PartRating, SeriesRegulator, ShuntRegulator
from simkit.pipeline import DiodeResult, RegulatorResult, RunResult


@dataclass(frozen=True)
class Verdict:
    part: str
    rule: str
    value: float
    limit: float
    unit: str
    corner: str
    verdict: str  # "pass" | "marginal" | "fail"
    margin: float | None  # headroom as a fraction of the limit
    basis: str = ""  # where the limit comes from

    def to_json(self) -> dict[str, Any]:
        def clean(x: float | None) -> float | None:
            return None if x is None or not math.isfinite(x) else x

        return {"part": self.part, "rule": self.rule, "value": clean(self.value), "limit": clean(self.limit),
                "margin": clean(self.margin), "verdict": self.verdict, "corner": self.corner, "unit": self.unit,
                "basis": self.basis}


@dataclass
class Findings:
    verdicts: list[Verdict] = field(default_factory=list)
    not_checked: list[str] = field(default_factory=list)


def judge(value: float, limit: float, marginal: float, minimum: bool = False) -> tuple[str, float | None]:
    """Verdict and margin of a value against a maximum (or, with ``minimum``, a minimum) limit."""
    if limit == 0:
        return ("pass" if value <= 0 else "fail"), None
    if math.isinf(value):
        return ("pass" if minimum else "fail"), -math.inf if not minimum else math.inf
    margin = (value - limit) / limit if minimum else (limit - value) / limit
    if margin < 0:
        return "fail", margin
    if margin < marginal:
        return "marginal", margin
    return "pass", margin


def _worst(corners: Corners, names: list[str], get: Callable[[RunResult], float | None]) -> tuple[float, str] | None:
    best: tuple[float, str] | None = None
    for name in names:
        r = corners.results.get(name)
        if r is None:
            continue
        v = get(r)
        if v is None:
            continue
        if best is None or v > best[0]:
            best = (v, name)
    return best


def _quantity(r: RunResult, part: str, name: str) -> float | None:
    """One quantity of one part's result (None when the part has no such quantity in this run)."""
    p = r.parts.get(part)
    v = getattr(p, name, None) if p is not None else None
    return float(v) if isinstance(v, float | int) and not isinstance(v, bool) else None


def evaluate(design: Design, corners: Corners) -> Findings:
    pol = design.checks
    f = Findings()
    cn = corners.names
    steady = [cn["light"], cn["heavy"], cn["low"], cn["cold"]]
    loaded = [cn["light"], cn["heavy"], cn["low"]]

    def add(part: str, rule: str, value: float, limit: float, unit: str, corner: str, basis: str,
            minimum: bool = False) -> None:
        verdict, margin = judge(value, limit, pol.marginal, minimum)
        f.verdicts.append(Verdict(part, rule, value, limit, unit, corner, verdict, margin, basis))

    def part_max(part: str, key: str, names: list[str] = steady) -> tuple[float, str] | None:
        return _worst(corners, names, lambda r: _quantity(r, part, key))

    any_result = corners.results[cn["heavy"]]
    circuit = any_result.circuit
    diode = design.rectifier.diode
    vac = diode.vacuum
    derate_txt = f"{pol.diode_voltage * 100:g} % of"

    # --- rectifiers -----------------------------------------------------------------------------------
    for d in circuit.diodes:
        piv = _worst(corners, steady, lambda r, n=d.name: max(r.part(n, DiodeResult).piv_v,
                                                                 r.part(n, DiodeResult).switch_on_piv_v))
        assert piv is not None
        on_diode = any_result.part(d.name, DiodeResult)
        surge = (on_diode.surge_peak_a, cn["on"])
        i2t = (on_diode.surge_i2t_a2s, cn["on"])
        avg = part_max(d.name, "avg_a", loaded)
        peak = part_max(d.name, "peak_a", loaded)
        if vac is None:
            r = diode.ratings
            src = diode.source or diode.name
            if r.vrrm:
                add(d.name, "reverse voltage", piv[0], pol.diode_voltage * r.vrrm, "V", piv[1],
                    f"{derate_txt} VRRM {r.vrrm:g} V ({src})")
            else:
                f.not_checked.append(f"{d.name} reverse voltage: no VRRM given")
            if r.ifsm:
                add(d.name, "surge current", surge[0], r.ifsm, "A", surge[1],
                    f"IFSM {r.ifsm:g} A, 8.3 ms half-sine ({src})")
            else:
                f.not_checked.append(f"{d.name} surge current: no IFSM given")
            if r.i2t:
                add(d.name, "surge I2t", i2t[0], r.i2t, "A2s", i2t[1], f"I2t {r.i2t:g} A2s ({src})")
            if r.ifav and avg:
                add(d.name, "mean current", avg[0], r.ifav, "A", avg[1], f"IF(AV) {r.ifav:g} A ({src})")
            elif not r.ifav:
                f.not_checked.append(f"{d.name} mean current: no IF(AV) given")
        else:
            tr = vac.ratings
            src = diode.source or diode.name
            if tr.piv:
                add(d.name, "peak inverse voltage", piv[0], pol.diode_voltage * tr.piv, "V", piv[1],
                    f"{derate_txt} PIV {tr.piv:g} V ({src})")
            else:
                f.not_checked.append(f"{d.name} peak inverse voltage: no PIV given")
            if tr.peak_current and peak:
                add(d.name, "peak plate current", peak[0], tr.peak_current, "A", peak[1],
                    f"peak plate current {tr.peak_current:g} A ({src})")
            elif not tr.peak_current:
                f.not_checked.append(f"{d.name} peak plate current: no rating given")
            if tr.min_plate_resistance is not None:
                add(d.name, "supply resistance per plate", design.source.resistance, tr.min_plate_resistance, "ohm",
                    "the design", f"minimum {tr.min_plate_resistance:g} ohm per plate ({src})", minimum=True)
    if vac is not None:
        tr = vac.ratings
        src = diode.source or diode.name
        first_c = design.filters[0].value if design.filters and design.filters[0].kind == "c" else None
        if tr.max_input_capacitance and first_c is not None:
            add(diode.name, "input capacitance", first_c, tr.max_input_capacitance, "F", "the design",
                f"maximum input capacitance {tr.max_input_capacitance * 1e6:g} uF ({src})")
        if tr.dc_current:
            dc = _worst(corners, loaded, lambda r: sum(p.avg_a for p in r.of_kind(DiodeResult).values())
                        / _per_path(design))
            if dc:
                add(diode.name, "DC output current", dc[0], tr.dc_current, "A", dc[1],
                    f"maximum DC output {tr.dc_current * 1e3:g} mA, capacitor input ({src})")

    # --- capacitors ---------------------------------------------------------------------------------------
    for name, rating, what in _capacitor_ratings(design, circuit):
        pk = part_max(name, "peak_v")
        rip = part_max(name, "ripple_rms_a", loaded)
        if rating is None or rating.v is None:
            f.not_checked.append(f"{name} voltage: no rating given ({what}: add rating = {{ v = ... }})")
        elif pk:
            add(name, "peak voltage", pk[0], pol.capacitor_voltage * rating.v, "V", pk[1],
                f"{pol.capacitor_voltage * 100:g} % of {rating.v:g} V ({rating.source})")
        if rating is not None and rating.ripple is not None and rip:
            at = f" at {rating.ripple_frequency:g} Hz" if rating.ripple_frequency else ""
            add(name, "ripple current", rip[0], rating.ripple, "A", rip[1],
                f"ripple rating {rating.ripple:g} A{at} (no frequency correction) ({rating.source})")
        elif rating is None or rating.ripple is None:
            f.not_checked.append(f"{name} ripple current: no ripple rating given")
    r = design.rectifier
    if r.topology in ("doubler", "cascade") and r.capacitance is not None:
        stage = [c.name for c in circuit.capacitors if c.role == "stage"]
        electrolytic = r.capacitance >= 1e-6
        if r.balancing is None and electrolytic:
            add(", ".join(stage), "balancing resistors across series capacitors", len(stage), 0, "missing",
                "the design", "electrolytic capacitors in series share voltage by their leakage unless each has "
                "a resistor across it (common practice)")
        elif r.balancing is None:
            f.not_checked.append("series stage capacitors under 1 uF (film): no balancing resistors checked")

    # --- chokes, resistors, winding -------------------------------------------------------------------------
    chokes = [s for s in design.filters if s.kind == "l"]
    for k, sec in enumerate(chokes, start=1):
        name = f"L{k}"
        dc = part_max(name, "dc_a", loaded)
        if sec.rating is not None and sec.rating.i is not None and dc:
            add(name, "DC current", abs(dc[0]), sec.rating.i, "A", dc[1], f"rated {sec.rating.i:g} A (design file)")
        else:
            f.not_checked.append(f"{name} current: no rating given (add rating = {{ i = ... }})")
    for name, rating in _resistor_ratings(design, circuit):
        diss = part_max(name, "dissipation_w")
        if rating is not None and rating.w is not None and diss:
            add(name, "dissipation", diss[0], pol.resistor_power * rating.w, "W", diss[1],
                f"{pol.resistor_power * 100:g} % of {rating.w:g} W (design file)")
        else:
            f.not_checked.append(f"{name} dissipation: no power rating given (add rating = {{ w = ... }})")
    src = design.source
    if src.rated_current:
        for w in circuit.windings:
            rms = part_max(w.name, "rms_a", loaded)
            if rms:
                add(w.name, "winding RMS current", rms[0], src.rated_current, "A", rms[1],
                    f"rated {src.rated_current:g} A ({'nameplate' if src.transformer else 'design file'})")
    elif src.inverter is None:
        f.not_checked.append("winding current: no rated_current given")
    if src.inverter is not None:
        va = _worst(corners, loaded, lambda r: r.metrics["source_va"])
        if va:
            add("V1", "inverter apparent power", va[0], src.inverter.rated_power, "VA", va[1],
                f"rated {src.inverter.rated_power:g} W; a capacitor-input load draws more VA than W")

    # --- regulator ----------------------------------------------------------------------------------------------
    reg = design.regulator
    if reg is not None:
        head = _worst(corners, loaded, lambda r: -r.metrics["reg_headroom_min_v"])
        if head and isinstance(reg, SeriesRegulator):
            add("MPASS", "headroom (dropout)", -head[0], reg.headroom, "V", head[1],
                f"at least {reg.headroom:g} V from input to output to keep regulating (regulator.headroom)",
                minimum=True)
        if isinstance(reg, SeriesRegulator):
            dev = reg.device
            diss = _worst(corners, loaded, lambda r: r.part("MPASS", RegulatorResult).dissipation_peak_w)
            on = (any_result.part("MPASS", RegulatorResult).switch_on_dissipation_peak_w or 0.0, cn["on"])
            if dev.pd and diss:
                worst = max(diss, on)
                add("MPASS", "pass device dissipation", worst[0], pol.resistor_power * dev.pd, "W", worst[1],
                    f"{pol.resistor_power * 100:g} % of PD {dev.pd:g} W at a 25 C case: it needs a heatsink "
                    f"({dev.source})")
            vds = _worst(corners, steady, lambda r: r.part("MPASS", RegulatorResult).vds_max_v)
            if dev.vdss and vds:
                add("MPASS", "drain-source voltage (SOA)", vds[0], pol.diode_voltage * dev.vdss, "V", vds[1],
                    f"{pol.diode_voltage * 100:g} % of VDSS {dev.vdss:g} V ({dev.source})")
            idm = _worst(corners, loaded, lambda r: r.part("MPASS", RegulatorResult).id_max_a)
            if dev.id_max and idm:
                add("MPASS", "drain current (SOA)", idm[0], dev.id_max, "A", idm[1],
                    f"ID {dev.id_max:g} A ({dev.source})")
        if isinstance(reg, ShuntRegulator):
            name = "DZ" if reg.zener is not None else "GLOW"
            lo = _worst(corners, loaded, lambda r: -r.metrics["shunt_current_min_a"])
            hi = _worst(corners, steady, lambda r: r.metrics.get("shunt_current_max_a"))
            if reg.glow is not None:
                g = reg.glow
                if lo:
                    add(name, "shunt current, lowest", -lo[0], g.i_min, "A", lo[1],
                        f"{g.name} regulates from {g.i_min * 1e3:g} mA ({g.source})", minimum=True)
                if hi:
                    add(name, "shunt current, highest", hi[0], g.i_max, "A", hi[1],
                        f"{g.name} carries at most {g.i_max * 1e3:g} mA ({g.source})")
                # Before it strikes the tube draws nothing, so the voltage across it is the raw supply less the
                # loads' drop in the dropping resistor (loads taken at their regulated current).
                low_corner = cn["low"] if cn["low"] in corners.results else cn["heavy"]
                r_low = corners.results[low_corner]
                avail = r_low.metrics["reg_vin_v"] - reg.resistance * r_low.metrics["iout_dc_a"] if reg.resistance \
                    else 0.0
                shunt = r_low.part(name, RegulatorResult)
                if shunt.struck is False and shunt.switch_on_voltage_max_v is not None:
                    avail = min(avail, shunt.switch_on_voltage_max_v)
                add(name, "strikes at switch-on", avail, g.striking * g.count, "V", low_corner,
                    f"{g.count} x {g.name} strike at {g.striking:g} V each ({g.source}); the value is the raw supply "
                    "less the load current's drop in the dropping resistor", minimum=True)
            elif reg.zener is not None and reg.zener.power:
                z = reg.zener
                pz = _worst(corners, steady, lambda r: r.part("DZ", RegulatorResult).dissipation_w / z.count)
                if pz:
                    add(name, "zener dissipation (each)", pz[0], pol.resistor_power * z.power, "W", pz[1],
                        f"{pol.resistor_power * 100:g} % of {z.power:g} W each (design file)")
            if reg.zener is not None and not reg.zener.power:
                f.not_checked.append("shunt zener dissipation: no power rating given (zener = { power = ... })")

    # --- switch-off ---------------------------------------------------------------------------------------------
    off = corners.off
    for name, t in off.time_to_safe.items():
        add(name, f"discharge below {pol.safe_voltage:g} V", t, pol.safe_time, "s", cn["off"],
            f"within {pol.safe_time:g} s, load gone; from {off.start_v[name]:.4g} V (IEC 61010-1 / IEC 60204-1 "
            "style limit, configurable)")
    return f


def _per_path(design: Design) -> float:
    """Diodes that carry each unit of DC output current in turn (2 for a bridge's pairs)."""
    return 2.0 if design.rectifier.topology == "bridge" else 1.0


def _capacitor_ratings(design: Design, circuit: Any) -> list[tuple[str, PartRating | None, str]]:
    caps = [c for c in circuit.capacitors if c.is_part]
    out: list[tuple[str, PartRating | None, str]] = []
    filt = iter([s for s in design.filters if s.kind == "c"])
    for c in caps:
        if c.role == "reference":
            continue  # the regulator's reference filter: at the reference voltage, no rating key
        if c.role == "stage":
            out.append((c.name, design.rectifier.capacitor_rating, "rectifier.capacitor_rating"))
        else:
            sec = next(filt)
            out.append((c.name, sec.rating, "filter section"))
    return out


def _resistor_ratings(design: Design, circuit: Any) -> list[tuple[str, PartRating | None]]:
    out: list[tuple[str, PartRating | None]] = []
    res_secs = iter([s for s in design.filters if s.kind == "r"])
    for r in circuit.resistors:
        if r.role == "filter":
            out.append((r.name, next(res_secs).rating))
        elif r.role == "bleeder":
            out.append((r.name, design.bleeder.rating if design.bleeder else None))
        elif r.role == "balancing":
            out.append((r.name, design.rectifier.balancing_rating))
        elif r.name == "RREG" and design.regulator is not None:
            out.append((r.name, design.regulator.resistor_rating))
    return out
