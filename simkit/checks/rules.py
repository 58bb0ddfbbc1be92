"""Stress and safety rules: each part's worst figure over the corners against its (derated) rating.

A verdict is ``fail`` when the value is beyond the limit, ``marginal`` when it is within
``checks.marginal`` (10 %) of it, ``pass`` otherwise.  The margin is the headroom as a
fraction of the limit (negative when failing, never below -100 %: a value several times its
limit says so by its ratio, ``times_limit``).  Limits apply the design's derating policy
(``[checks]``; the defaults are common practice, not a standard): a diode may see 80 % of
its VRRM, a capacitor 90 % of its rated voltage, a resistor may dissipate 50 % of its
rating.  A verdict keeps the part's own rating beside the derated limit, so a failure says
whether it is above the rating itself or only above the derating.

A rule that cannot be judged (no rating given) is a :class:`NotChecked`, never a pass.

Rules of other modules join through one interface: :func:`make_verdict` judges a value and
attaches an optional :class:`~simkit.checks.fix.Fix` (what to change so it passes);
:mod:`simkit.checks.fixes` supplies the fixes of the rules below.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from simkit.checks.corners import Corners
from simkit.checks.fix import Fix
from simkit.design.model import CheckPolicy, Design, PartRating, SeriesRegulator, ShuntRegulator
from simkit.pipeline import DiodeResult, RegulatorResult, RunResult

#: What a limit is: a part's rating (derated or not), or a safety or design limit of the policy.
LIMIT_KINDS = ("rating", "policy")


@dataclass(frozen=True)
class Verdict:
    part: str
    rule: str
    value: float
    limit: float
    unit: str
    corner: str
    verdict: str  # "pass" | "marginal" | "fail"
    margin: float | None  # headroom as a fraction of the limit, never below -1
    basis: str = ""  # where the limit comes from
    rating: float | None = None  # the part's own rating when the limit derates it (None: the limit is the rating)
    code: str = ""  # a stable name of the rule ("diode.reverse_voltage"): fixes find their rule by it
    minimum: bool = False  # the limit is a floor (headroom, supply resistance), not a ceiling
    limit_kind: str = "rating"  # LIMIT_KINDS: a part's rating, or a limit of the policy (discharge time)
    fix: Fix | None = None  # what to set so this verdict passes (fail and marginal verdicts)

    @property
    def times_limit(self) -> float | None:
        """The value as a multiple of the limit (None when the limit is zero)."""
        if self.limit == 0:
            return None
        return self.value / self.limit

    @property
    def exceeds(self) -> str:
        """For a fail: ``"rating"`` (beyond the part's absolute rating, or a policy limit: ``"limit"``) or
        ``"derating"`` (beyond the derated limit only); ``""`` otherwise."""
        if self.verdict != "fail":
            return ""
        if self.limit_kind == "policy":
            return "limit"
        if self.rating is None or self.rating == self.limit:
            return "rating"
        beyond = self.value < self.rating if self.minimum else self.value > self.rating
        return "rating" if beyond else "derating"

    def to_json(self) -> dict[str, Any]:
        def clean(x: float | None) -> float | None:
            return None if x is None or not math.isfinite(x) else x

        times = self.times_limit
        return {"part": self.part, "rule": self.rule, "value": clean(self.value), "limit": clean(self.limit),
                "margin": clean(self.margin), "verdict": self.verdict, "corner": self.corner, "unit": self.unit,
                "basis": self.basis, "rating": clean(self.rating), "exceeds": self.exceeds or None,
                "times_limit": clean(times),
                "limit_kind": self.limit_kind, "code": self.code,
                "fix": None if self.fix is None else self.fix.to_json()}


@dataclass(frozen=True)
class NotChecked:
    """A rule that could not be judged: the part, the rule, why, and the value when it is known."""

    part: str
    rule: str
    why: str
    value: float | None = None
    unit: str = ""
    corner: str = ""

    def __str__(self) -> str:
        return f"{self.part} {self.rule}: {self.why}"

    def to_json(self) -> dict[str, Any]:
        v = self.value if self.value is not None and math.isfinite(self.value) else None
        return {"part": self.part, "rule": self.rule, "why": self.why, "value": v, "unit": self.unit,
                "corner": self.corner}


@dataclass
class Findings:
    verdicts: list[Verdict] = field(default_factory=list)
    not_checked: list[NotChecked] = field(default_factory=list)


def judge(value: float, limit: float, marginal: float, minimum: bool = False) -> tuple[str, float | None]:
    """Verdict and margin of a value against a maximum (or, with ``minimum``, a minimum) limit.

    The margin is the headroom as a fraction of the limit, never below -1 (-100 %).
    """
    if limit == 0:
        return ("pass" if value <= 0 else "fail"), None
    if math.isinf(value):
        return ("pass" if minimum else "fail"), -1.0 if not minimum else math.inf
    margin = (value - limit) / limit if minimum else (limit - value) / limit
    margin = max(margin, -1.0)
    if margin < 0:
        return "fail", margin
    if margin < marginal:
        return "marginal", margin
    return "pass", margin


def make_verdict(policy: CheckPolicy, part: str, rule: str, value: float, limit: float, unit: str, corner: str,
                 basis: str, *, minimum: bool = False, rating: float | None = None, code: str = "",
                 limit_kind: str = "rating", fix: Fix | Callable[[], Fix | None] | None = None) -> Verdict:
    """Judge one value and make its :class:`Verdict`: the interface every rule uses, in any module.

    Parameters
    ----------
    policy : CheckPolicy
        The design's ``[checks]`` (its ``marginal`` band).
    part, rule, unit, corner, basis : str
        What is judged, where, and where the limit comes from.
    value, limit : float
        The worst value and its (derated) limit, SI.
    minimum : bool
        The limit is a floor.
    rating : float, optional
        The part's own rating when ``limit`` derates it (80 % of VRRM: the VRRM).
    code : str
        A stable name of the rule, e.g. ``"battery.current"``.
    limit_kind : str
        ``"rating"`` or ``"policy"`` (a safety limit such as a discharge time).
    fix : Fix, or a callable giving one, optional
        What to set so the verdict passes.  A callable is only called when the verdict is not a
        pass (a fix may cost a simulation).

    Example
    -------
    >>> v = make_verdict(CheckPolicy(), "D1", "reverse voltage", 900.0, 800.0, "V", "cold load", "80 % of 1000 V",
    ...                  rating=1000.0, fix=Fix((), "a string of two"))
    >>> v.verdict, v.exceeds, v.fix.reason
    ('fail', 'derating', 'a string of two')
    """
    verdict, margin = judge(value, limit, policy.marginal, minimum)
    if limit_kind not in LIMIT_KINDS:
        raise ValueError(f"limit_kind must be one of {LIMIT_KINDS}, got {limit_kind!r}")
    fx = None
    if verdict != "pass" and fix is not None:
        fx = fix() if callable(fix) else fix
    return Verdict(part, rule, value, limit, unit, corner, verdict, margin, basis, rating, code, minimum, limit_kind,
                   fx)


def _worst(corners: Corners, names: list[str], get: Callable[[RunResult], float | None]) -> tuple[float, str] | None:
    best: tuple[float, str] | None = None
    for name in dict.fromkeys(names):  # corners that are one run appear once
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
            minimum: bool = False, rating: float | None = None, code: str = "", limit_kind: str = "rating") -> None:
        f.verdicts.append(make_verdict(pol, part, rule, value, limit, unit, corner, basis, minimum=minimum,
                                       rating=rating, code=code, limit_kind=limit_kind))

    def skip(part: str, rule: str, why: str, got: tuple[float, str] | None = None, unit: str = "") -> None:
        f.not_checked.append(NotChecked(part, rule, why, got[0] if got else None, unit, got[1] if got else ""))

    def part_max(part: str, key: str, names: list[str] = steady) -> tuple[float, str] | None:
        return _worst(corners, names, lambda r: _quantity(r, part, key))

    any_result = corners.results[cn["heavy"]]
    circuit = any_result.circuit
    diode = design.rectifier.diode
    vac = diode.vacuum
    derate_txt = f"{pol.diode_voltage * 100:g} % of"
    n_series = design.rectifier.series
    each = f" (each of {n_series} in series)" if n_series > 1 else ""

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
                add(d.name, "reverse voltage" + each, piv[0], pol.diode_voltage * r.vrrm, "V", piv[1],
                    f"{derate_txt} VRRM {r.vrrm:g} V ({src})", rating=r.vrrm, code="diode.reverse_voltage")
            else:
                skip(d.name, "reverse voltage", "no VRRM given", piv, "V")
            if r.ifsm:
                add(d.name, "surge current", surge[0], r.ifsm, "A", surge[1],
                    f"IFSM {r.ifsm:g} A, 8.3 ms half-sine ({src})", code="diode.surge")
            else:
                skip(d.name, "surge current", "no IFSM given", surge, "A")
            if r.i2t:
                add(d.name, "surge I2t", i2t[0], r.i2t, "A2s", i2t[1], f"I2t {r.i2t:g} A2s ({src})",
                    code="diode.i2t")
            else:
                skip(d.name, "surge I2t", "no I2t rating given", i2t, "A2s")
            if r.ifav and avg:
                add(d.name, "mean current", avg[0], r.ifav, "A", avg[1], f"IF(AV) {r.ifav:g} A ({src})",
                    code="diode.mean_current")
            elif not r.ifav:
                skip(d.name, "mean current", "no IF(AV) given", avg, "A")
        else:
            tr = vac.ratings
            src = diode.source or diode.name
            if tr.piv:
                add(d.name, "peak inverse voltage", piv[0], pol.diode_voltage * tr.piv, "V", piv[1],
                    f"{derate_txt} PIV {tr.piv:g} V ({src})", rating=tr.piv, code="tube.piv")
            else:
                skip(d.name, "peak inverse voltage", "no PIV given", piv, "V")
            if tr.peak_current and peak:
                add(d.name, "peak plate current", peak[0], tr.peak_current, "A", peak[1],
                    f"peak plate current {tr.peak_current:g} A ({src})", code="tube.peak_current")
            elif not tr.peak_current:
                skip(d.name, "peak plate current", "no rating given", peak, "A")
            if tr.min_plate_resistance is not None:
                add(d.name, "supply resistance per plate", design.source.resistance, tr.min_plate_resistance, "ohm",
                    "the design", f"minimum {tr.min_plate_resistance:g} ohm per plate ({src})", minimum=True,
                    code="tube.plate_resistance")
            else:
                skip(d.name, "supply resistance per plate", "no minimum given")
    if vac is not None:
        tr = vac.ratings
        src = diode.source or diode.name
        first_c = design.filters[0].value if design.filters and design.filters[0].kind == "c" else None
        if tr.max_input_capacitance and first_c is not None:
            add(diode.name, "input capacitance", first_c, tr.max_input_capacitance, "F", "the design",
                f"maximum input capacitance {tr.max_input_capacitance * 1e6:g} uF ({src})", code="tube.input_c")
        elif first_c is not None:
            skip(diode.name, "input capacitance", "no maximum given", (first_c, "the design"), "F")
        dc = _worst(corners, loaded, lambda r: sum(p.avg_a for p in r.of_kind(DiodeResult).values())
                    / _per_path(design))
        if tr.dc_current:
            if dc:
                add(diode.name, "DC output current", dc[0], tr.dc_current, "A", dc[1],
                    f"maximum DC output {tr.dc_current * 1e3:g} mA, capacitor input ({src})", code="tube.dc_current")
        else:
            skip(diode.name, "DC output current", "no rating given", dc, "A")
    if n_series > 1 and vac is None:
        if design.rectifier.sharing is None:
            skip(", ".join(d.name for d in circuit.diodes), "voltage sharing in the strings",
                 "no sharing resistors (rectifier.sharing): the share rests on the diodes' matched leakage")

    # --- capacitors ---------------------------------------------------------------------------------------
    for rp in capacitor_ratings(design, circuit):
        name, rating = rp.name, rp.rating
        what = rp.path if rp.path == "rectifier.capacitor_rating" else "filter section"
        pk = part_max(name, "peak_v")
        rip = part_max(name, "ripple_rms_a", loaded)
        if rating is None or rating.v is None:
            skip(name, "peak voltage", f"no rating given ({what}: add rating = {{ v = ... }})", pk, "V")
        elif pk:
            add(name, "peak voltage", pk[0], pol.capacitor_voltage * rating.v, "V", pk[1],
                f"{pol.capacitor_voltage * 100:g} % of {rating.v:g} V ({rating.source})", rating=rating.v,
                code="capacitor.voltage")
        if rating is not None and rating.ripple is not None and rip:
            at = f" at {rating.ripple_frequency:g} Hz" if rating.ripple_frequency else ""
            add(name, "ripple current", rip[0], rating.ripple, "A", rip[1],
                f"ripple rating {rating.ripple:g} A{at} (no frequency correction) ({rating.source})",
                code="capacitor.ripple")
        elif rating is None or rating.ripple is None:
            skip(name, "ripple current", "no ripple rating given", rip, "A")
    r = design.rectifier
    if r.topology in ("doubler", "cascade") and r.capacitance is not None:
        stage = [c.name for c in circuit.capacitors if c.role == "stage"]
        electrolytic = r.capacitance >= 1e-6
        if r.balancing is None and electrolytic:
            add(", ".join(stage), "balancing resistors across series capacitors", len(stage), 0, "missing",
                "the design", "electrolytic capacitors in series share voltage by their leakage unless each has "
                "a resistor across it (common practice)", code="capacitor.balancing", limit_kind="policy")
        elif r.balancing is None:
            skip(", ".join(stage), "balancing resistors", "series stage capacitors under 1 uF (film): not needed "
                 "for the share, so not checked")

    # --- chokes, resistors, winding -------------------------------------------------------------------------
    chokes = [s for s in design.filters if s.kind == "l"]
    for k, sec in enumerate(chokes, start=1):
        name = f"L{k}"
        dc = part_max(name, "dc_a", loaded)
        if sec.rating is not None and sec.rating.i is not None and dc:
            add(name, "DC current", abs(dc[0]), sec.rating.i, "A", dc[1], f"rated {sec.rating.i:g} A (design file)",
                code="choke.current")
        else:
            skip(name, "DC current", "no rating given (add rating = { i = ... })",
                 (abs(dc[0]), dc[1]) if dc else None, "A")
    for rp in resistor_ratings(design, circuit):
        name, rating = rp.name, rp.rating
        diss = part_max(name, "dissipation_w")
        per = design.rectifier.series if name.startswith("RSH") else 1  # one string's resistors share it
        if diss:
            diss = (diss[0] / per, diss[1])
        what = " (each)" if per > 1 else ""
        if rating is not None and rating.w is not None and diss:
            add(name, "dissipation" + what, diss[0], pol.resistor_power * rating.w, "W", diss[1],
                f"{pol.resistor_power * 100:g} % of {rating.w:g} W (design file)", rating=rating.w,
                code="resistor.dissipation")
        else:
            skip(name, "dissipation" + what, "no power rating given (add rating = { w = ... })", diss, "W")
    src = design.source
    if src.rated_current:
        for w in circuit.windings:
            rms = part_max(w.name, "rms_a", loaded)
            if rms:
                add(w.name, "winding RMS current", rms[0], src.rated_current, "A", rms[1],
                    f"rated {src.rated_current:g} A ({'nameplate' if src.transformer else 'design file'})",
                    code="winding.current")
    elif src.inverter is None:
        for w in circuit.windings:
            skip(w.name, "winding RMS current", "no rated_current given", part_max(w.name, "rms_a", loaded), "A")
    if src.inverter is not None:
        va = _worst(corners, loaded, lambda r: r.metrics["source_va"])
        if va:
            add("V1", "inverter apparent power", va[0], src.inverter.rated_power, "VA", va[1],
                f"rated {src.inverter.rated_power:g} W; a capacitor-input load draws more VA than W",
                code="inverter.va")
    _transformer_rules(design, corners, loaded, add, skip)

    # --- regulator ----------------------------------------------------------------------------------------------
    reg = design.regulator
    if reg is not None:
        head = _worst(corners, loaded, lambda r: -r.metrics["reg_headroom_min_v"])
        if head and isinstance(reg, SeriesRegulator):
            add("MPASS", "headroom (dropout)", -head[0], reg.headroom, "V", head[1],
                f"at least {reg.headroom:g} V from input to output to keep regulating (regulator.headroom)",
                minimum=True, code="regulator.headroom", limit_kind="policy")
        if isinstance(reg, SeriesRegulator):
            dev = reg.device
            diss = _worst(corners, loaded, lambda r: r.part("MPASS", RegulatorResult).dissipation_peak_w)
            on = (any_result.part("MPASS", RegulatorResult).switch_on_dissipation_peak_w or 0.0, cn["on"])
            if dev.pd and diss:
                worst = max(diss, on)
                add("MPASS", "pass device dissipation", worst[0], pol.resistor_power * dev.pd, "W", worst[1],
                    f"{pol.resistor_power * 100:g} % of PD {dev.pd:g} W at a 25 C case: it needs a heatsink "
                    f"({dev.source})", rating=dev.pd, code="pass.dissipation")
            elif not dev.pd:
                skip("MPASS", "pass device dissipation", "no PD given", max(diss, on) if diss else on, "W")
            vds = _worst(corners, steady, lambda r: r.part("MPASS", RegulatorResult).vds_max_v)
            if dev.vdss and vds:
                add("MPASS", "drain-source voltage (SOA)", vds[0], pol.diode_voltage * dev.vdss, "V", vds[1],
                    f"{pol.diode_voltage * 100:g} % of VDSS {dev.vdss:g} V ({dev.source})", rating=dev.vdss,
                    code="pass.vds")
            elif not dev.vdss:
                skip("MPASS", "drain-source voltage (SOA)", "no VDSS given", vds, "V")
            idm = _worst(corners, loaded, lambda r: r.part("MPASS", RegulatorResult).id_max_a)
            if dev.id_max and idm:
                add("MPASS", "drain current (SOA)", idm[0], dev.id_max, "A", idm[1],
                    f"ID {dev.id_max:g} A ({dev.source})", code="pass.id")
            elif not dev.id_max:
                skip("MPASS", "drain current (SOA)", "no ID given", idm, "A")
        if isinstance(reg, ShuntRegulator):
            name = "DZ" if reg.zener is not None else "GLOW"
            lo = _worst(corners, loaded, lambda r: -r.metrics["shunt_current_min_a"])
            hi = _worst(corners, steady, lambda r: r.metrics.get("shunt_current_max_a"))
            if reg.glow is not None:
                g = reg.glow
                if lo:
                    add(name, "shunt current, lowest", -lo[0], g.i_min, "A", lo[1],
                        f"{g.name} regulates from {g.i_min * 1e3:g} mA ({g.source})", minimum=True,
                        code="shunt.current_min")
                if hi:
                    add(name, "shunt current, highest", hi[0], g.i_max, "A", hi[1],
                        f"{g.name} carries at most {g.i_max * 1e3:g} mA ({g.source})", code="shunt.current_max")
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
                    "less the load current's drop in the dropping resistor", minimum=True, code="shunt.strike")
            elif reg.zener is not None and reg.zener.power:
                z = reg.zener
                pz = _worst(corners, steady, lambda r: r.part("DZ", RegulatorResult).dissipation_w / z.count)
                if pz:
                    add(name, "zener dissipation (each)", pz[0], pol.resistor_power * z.power, "W", pz[1],
                        f"{pol.resistor_power * 100:g} % of {z.power:g} W each (design file)", rating=z.power,
                        code="shunt.zener_power")
            if reg.zener is not None and not reg.zener.power:
                skip("DZ", "zener dissipation (each)", "no power rating given (zener = { power = ... })")

    # --- switch-off ---------------------------------------------------------------------------------------------
    off = corners.off
    if off is not None:
        for name, t in off.time_to_safe.items():
            add(name, f"discharge below {pol.safe_voltage:g} V", t, pol.safe_time, "s", cn["off"],
                f"within {pol.safe_time:g} s, load gone; from {off.start_v[name]:.4g} V (IEC 61010-1 / IEC 60204-1 "
                "style limit, configurable)", code="discharge", limit_kind="policy")
    return f


def _transformer_rules(design: Design, corners: Corners, loaded: list[str], add: Callable[..., None],
                       skip: Callable[..., None]) -> None:
    """Heater windings' currents and the transformer's VA against their ratings (kind = "transformer")."""
    tr = design.source.transformer
    if tr is None:
        return
    for k, h in enumerate(tr.heaters, start=1):
        name = f"VH{k}"
        rms = _worst(corners, loaded, lambda r, n=name: _quantity(r, n, "rms_a"))
        if h.rated_current is None:
            skip(name, "heater winding RMS current", f"no rated_current given (source.heaters.{k - 1})", rms, "A")
        elif rms:
            add(name, "heater winding RMS current", rms[0], h.rated_current, "A", rms[1],
                f"rated {h.rated_current:g} A (source.heaters.{k - 1})", code="heater.current")
    va = _worst(corners, loaded, lambda r: r.metrics.get("transformer_va"))
    if tr.va_rating is None:
        if tr.heaters:
            skip("transformer", "total VA", "no rated_va given (source.rated_va)", va, "VA")
    elif va:
        add("transformer", "total VA", va[0], tr.va_rating, "VA", va[1],
            f"rated {tr.va_rating:g} VA for every winding together (source.rated_va); a capacitor input draws "
            "peaky current, so the high-voltage winding's VA is well above its DC power", code="transformer.va")


def _per_path(design: Design) -> float:
    """Diodes that carry each unit of DC output current in turn (2 for a bridge's pairs)."""
    return 2.0 if design.rectifier.topology == "bridge" else 1.0


@dataclass(frozen=True)
class RatedPart:
    """A capacitor or resistor of the deck with its rating: where the design gives that rating (the path a
    fix sets) and the parts-file name it came from, if any."""

    name: str  # deck name: C1, RBLEED, ...
    rating: PartRating | None
    path: str  # "filter.2.rating", "rectifier.capacitor_rating", "bleeder.rating", ...
    part: str | None = None


def capacitor_ratings(design: Design, circuit: Any) -> list[RatedPart]:
    """Every capacitor of the design (the regulator's reference filter aside: it has no rating key)."""
    out: list[RatedPart] = []
    filt = iter([i for i, s in enumerate(design.filters) if s.kind == "c"])
    for c in circuit.capacitors:
        if not c.is_part or c.role == "reference":
            continue
        if c.role == "stage":
            out.append(RatedPart(c.name, design.rectifier.capacitor_rating, "rectifier.capacitor_rating"))
        else:
            i = next(filt)
            out.append(RatedPart(c.name, design.filters[i].rating, f"filter.{i}.rating", design.filters[i].part))
    return out


def resistor_ratings(design: Design, circuit: Any) -> list[RatedPart]:
    """Every resistor of the design that has a power rating key."""
    out: list[RatedPart] = []
    res = iter([i for i, s in enumerate(design.filters) if s.kind == "r"])
    bleeder = design.bleeder
    for r in circuit.resistors:
        if r.role == "filter":
            i = next(res)
            out.append(RatedPart(r.name, design.filters[i].rating, f"filter.{i}.rating", design.filters[i].part))
        elif r.role == "bleeder":
            out.append(RatedPart(r.name, bleeder.rating if bleeder else None, "bleeder.rating",
                                 bleeder.part if bleeder else None))
        elif r.role == "balancing":
            out.append(RatedPart(r.name, design.rectifier.balancing_rating, "rectifier.balancing_rating"))
        elif r.role == "sharing":
            out.append(RatedPart(r.name, design.rectifier.sharing_rating, "rectifier.sharing_rating"))
        elif r.name == "RREG" and design.regulator is not None:
            out.append(RatedPart(r.name, design.regulator.resistor_rating, "regulator.resistor_rating"))
    return out
