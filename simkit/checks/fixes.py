"""Fixes for simkit's own rules: for each fail or marginal verdict, the stock parts that make it pass.

:func:`propose` gives every fail and marginal verdict that has no fix yet the fix its rule's
fixer (:data:`FIXERS`, by the verdict's ``code``) proposes.  A fixer aims at a value inside the
limit by the marginal band and 1 % more (:func:`FixContext.aim`), so that the fixed design
passes rather than lands on the edge, and picks ratings from the series parts are sold in
(:mod:`simkit.stock`): capacitor voltages, resistor powers, E12 resistances, R10 currents.

Verdicts that one change fixes together share it: the rectifier's diodes (a part that meets
every diode rule at once, or a string of them), the pass device, the bleeder.  The bleeder's
fix is checked by simulating the switch-off again from the same charge with the new value.

Another module's rule provides its own fix through :func:`simkit.checks.rules.make_verdict`
(``fix=``) or registers a fixer here with :func:`fixer`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

from simkit.analysis.discharge import discharge
from simkit.checks.corners import Corners
from simkit.checks.fix import SLACK, Assignment, Fix, aim
from simkit.checks.rules import Findings, RatedPart, Verdict, capacitor_ratings, resistor_ratings
from simkit.design.model import Bleeder, Design, DiodeModel, SeriesRegulator, ShuntRegulator
from simkit.engine.ngspice import Engine, get_engine
from simkit.parts import diodes as diode_library
from simkit.parts import regulators as regulator_library
from simkit.parts import tubes as tube_library
from simkit.pipeline import CapacitorResult, RegulatorResult
from simkit.stock import StockError, at_least, at_most, between, capacitor_volts, resistor_watts
from simkit.units import eng

#: A sharing resistor across each diode of a string: this many ohms per volt of the diode's VRRM, so it carries
#: about 2 mA at the rating, a hundred times a small rectifier's leakage (common practice; docs/sources.md#diode-8).
SHARING_OHMS_PER_VOLT = 500.0
#: The largest balancing resistor a fix proposes (common practice: 100-220 k across each electrolytic).
BALANCING_MAX = 220e3
#: The most diodes a string fix proposes per position.
MAX_STRING = 20
#: Above this a bleeder is best made of several resistors in series: a single resistor's voltage rating is
#: typically 250-750 V (common practice; docs/sources.md#num-8).
RESISTOR_VOLTS = 500.0
#: Tries of the bleeder search (each one a switch-off simulation).
BLEEDER_TRIES = 8
#: Tries of a quicker soft start for a pass device (each one a simulation of the heavy corner).
SOFT_START_TRIES = 4

Fixer = Callable[["FixContext", Verdict], Fix | None]
#: Fixers by verdict code.
FIXERS: dict[str, Fixer] = {}


def fixer(code: str) -> Callable[[Fixer], Fixer]:
    """Register the fixer of a rule's verdicts (by their ``code``)."""

    def register(fn: Fixer) -> Fixer:
        FIXERS[code] = fn
        return fn

    return register


@dataclass
class FixContext:
    """What a fixer may read: the design, its corners and verdicts; shared fixes are kept in ``shared``."""

    design: Design
    corners: Corners
    verdicts: list[Verdict]
    engine: Engine | None = None
    shared: dict[str, Fix | None] = field(default_factory=dict)

    @property
    def aim(self) -> float:
        """The share of a limit a fixed value should reach at most: outside the marginal band, with slack."""
        return aim(self.design.checks.marginal)

    def once(self, name: str, make: Callable[[], Fix | None]) -> Fix | None:
        """A fix several verdicts share, made once."""
        if name not in self.shared:
            self.shared[name] = make()
        return self.shared[name]

    def of(self, *codes: str) -> list[Verdict]:
        """Every verdict (pass included) of these rules."""
        return [v for v in self.verdicts if v.code in codes]


def propose(design: Design, corners: Corners, findings: Findings, engine: Engine | None = None) -> None:
    """Give each fail and marginal verdict without a fix the one its rule's fixer proposes (in place)."""
    ctx = FixContext(design, corners, findings.verdicts, engine)
    out: list[Verdict] = []
    for v in findings.verdicts:
        if v.verdict != "pass" and v.fix is None:
            make = FIXERS.get(v.code)
            try:
                fx = make(ctx, v) if make is not None else None
            except StockError as exc:  # a rating beyond any stock part: the design itself must change
                fx = Fix((), f"{exc}: no stock part takes it; change the design (less stored charge, a lower "
                             "voltage or current)")
            if fx is None:
                fx = Fix((), "no automatic fix for this rule: change the part or the design by hand")
            v = replace(v, fix=fx)
        out.append(v)
    findings.verdicts[:] = out


# --- where a part's keys are -----------------------------------------------------------------------------------


def _filter_index(design: Design, kind: str, k: int) -> int:
    """The [[filter]] position of the k-th (0-based) section of one kind."""
    return [i for i, s in enumerate(design.filters) if s.kind == kind][k]


def _rated(ctx: FixContext, name: str, parts: Callable[[Design, Any], list[RatedPart]]) -> tuple[str, str | None]:
    """(rating path, parts-file name) of a capacitor or resistor by its deck name, as the rules found it."""
    circuit = next(iter(ctx.corners.results.values())).circuit
    found = next(p for p in parts(ctx.design, circuit) if p.name == name)
    return found.path, found.part


def _library_note(part: str, what: str) -> Fix:
    return Fix((), f"the part {part!r} comes from your parts file: choose one rated {what} (or give rating = "
                   "{ ... } in the design instead of part)")


# --- diodes ----------------------------------------------------------------------------------------------------


@dataclass
class _Needs:
    """What the rectifier's diodes must take: the string's reverse voltage and each diode's currents."""

    string_v: float = 0.0  # V, the whole position's reverse voltage
    ifsm: float = 0.0
    i2t: float = 0.0
    ifav: float = 0.0
    failing: set[str] = field(default_factory=set)  # codes of the failing or marginal diode rules


def _diode_needs(ctx: FixContext) -> _Needs:
    n = ctx.design.rectifier.series
    need = _Needs()
    for v in ctx.of("diode.reverse_voltage", "diode.surge", "diode.i2t", "diode.mean_current"):
        if v.verdict != "pass":
            need.failing.add(v.code)
        if v.code == "diode.reverse_voltage":
            need.string_v = max(need.string_v, v.value * n)
        elif v.code == "diode.surge":
            need.ifsm = max(need.ifsm, v.value)
        elif v.code == "diode.i2t":
            need.i2t = max(need.i2t, v.value)
        else:
            need.ifav = max(need.ifav, v.value)
    return need


def _fits(model: DiodeModel, need: _Needs, aim: float, derate: float, n: int) -> bool:
    """Does a diode, n of them in series per position, meet every need (a failing rule needs a rating)?"""
    r = model.ratings
    checks = (("diode.reverse_voltage", r.vrrm, need.string_v / n / derate), ("diode.surge", r.ifsm, need.ifsm),
              ("diode.i2t", r.i2t, need.i2t), ("diode.mean_current", r.ifav, need.ifav))
    for code, rating, value in checks:
        if value <= 0:
            continue
        if rating is None:
            if code in need.failing:
                return False
            continue
        if value > aim * rating:
            return False
    return True


def _diode_fix(ctx: FixContext) -> Fix | None:
    """One change to the rectifier that meets every diode rule: a library part, a string, or both."""
    d = ctx.design
    rect = d.rectifier
    current = rect.diode
    need = _diode_needs(ctx)
    derate = d.checks.diode_voltage
    aim = ctx.aim
    candidates: list[DiodeModel] = [current]
    if current.name != "inline":
        candidates += sorted((p.model() for p in diode_library.DIODES.values() if p.name != current.name),
                             key=lambda m: (m.ratings.ifav or 0.0, m.ratings.vrrm or 0.0, m.ratings.ifsm or 0.0))
    best = _best_string(candidates, need, aim, derate)
    sets: list[Assignment] = []
    words: list[str] = []
    if best is not None:
        n, model = best
    else:  # no part takes the surge: the part and string for the rest, the surge limited by a series resistance
        rest = _Needs(need.string_v, 0.0, 0.0, need.ifav, need.failing - {"diode.surge", "diode.i2t"})
        found = _best_string(candidates, rest, aim, derate, prefer_surge=True)
        n, model = found if found is not None else (rect.series, current)
    if model.name != current.name:
        sets.append(Assignment("rectifier.diode", model.name, keep="first"))
        r = model.ratings
        words.append(f"{model.name} (VRRM {r.vrrm:g} V, IFSM {r.ifsm:g} A, IF(AV) {r.ifav:g} A)")
    if n != rect.series:
        sets.append(Assignment("rectifier.series", n))
    if n > 1:
        sets += _sharing(ctx, model, n, need.string_v)
        share = need.string_v / n
        words.append(f"{n} in series per position, {eng(share, 'V')} each of the {eng(need.string_v, 'V')}, with a "
                     f"{eng(_sharing_r(model), 'Ω')} sharing resistor across each diode")
    if best is None:
        limit = _surge_limit(ctx, model)
        if limit is not None:
            sets.append(limit[0])
            words.append(limit[1])
        else:
            return Fix(tuple(sets), "no library diode takes the switch-on surge and the source has no series "
                       "resistance key: limit the surge in the primary (a resistor or NTC thermistor)")
    if not sets:
        return None
    return Fix(tuple(sets), "; ".join(words))


def _best_string(candidates: list[DiodeModel], need: _Needs, aim: float, derate: float,
                 prefer_surge: bool = False) -> tuple[int, DiodeModel] | None:
    """The fewest diodes per position, then the current part (first candidate), then the smaller part; or, with
    ``prefer_surge``, the largest surge rating among the fewest."""
    best: tuple[tuple[float, ...], int, DiodeModel] | None = None
    for rank, model in enumerate(candidates):
        for n in range(1, MAX_STRING + 1):
            if _fits(model, need, aim, derate, n):
                key = (n, -(model.ratings.ifsm or 0.0), rank) if prefer_surge else (n, rank)
                if best is None or key < best[0]:
                    best = (key, n, model)
                break
    return None if best is None else (best[1], best[2])


def _sharing_r(model: DiodeModel) -> float:
    vrrm = model.ratings.vrrm or 1000.0
    return at_most(SHARING_OHMS_PER_VOLT * vrrm, "E12")


def _sharing(ctx: FixContext, model: DiodeModel, n: int, string_v: float) -> list[Assignment]:
    """The sharing resistors of a string of n: 500 ohm per volt of VRRM, rated for the share's peak."""
    r = _sharing_r(model)
    watts = (string_v / n) ** 2 / r  # the peak reverse voltage held all the time: an upper bound
    w = _watts(ctx, watts)
    return [Assignment("rectifier.sharing", r, keep="min"), Assignment("rectifier.sharing_rating.w", w)]


def _watts(ctx: FixContext, dissipation: float) -> float:
    return resistor_watts(dissipation / (ctx.design.checks.resistor_power * ctx.aim))


def _surge_limit(ctx: FixContext, model: DiodeModel) -> tuple[Assignment, str] | None:
    """A series resistance that brings the switch-on surge within the part's IFSM and I2t."""
    d = ctx.design
    src = d.source
    if src.transformer is not None:
        return None
    need = _diode_needs(ctx)
    r = model.ratings
    scale = 1.0
    if r.ifsm and need.ifsm:
        scale = max(scale, need.ifsm / (ctx.aim * r.ifsm))  # the surge falls about as 1/R
    if r.i2t and need.i2t:
        scale = max(scale, math.sqrt(need.i2t / (ctx.aim * r.i2t)))  # i^2 t: the square of the current
    key = "output_resistance" if src.inverter is not None else "resistance"
    r_old = src.resistance
    base = r_old if r_old > 0 else 1.0
    add = at_least(max(base * scale - r_old, 0.1), "E12")
    total = r_old + add
    return (Assignment(f"source.{key}", total),
            f"a {eng(add, 'Ω')} resistor (or an NTC thermistor of at least that, cold) in series with the source "
            f"limits the switch-on surge (source.{key} is the total, {eng(total, 'Ω')})")


@fixer("diode.reverse_voltage")
@fixer("diode.surge")
@fixer("diode.i2t")
@fixer("diode.mean_current")
def _diodes(ctx: FixContext, v: Verdict) -> Fix | None:
    return ctx.once("diodes", lambda: _diode_fix(ctx))


# --- vacuum rectifiers -------------------------------------------------------------------------------------------


def _tube_fix(ctx: FixContext) -> Fix | None:
    """A library tube that meets the failing tube rules (PIV, peak current, DC current)."""
    need: dict[str, float] = {}
    for v in ctx.of("tube.piv", "tube.peak_current", "tube.dc_current"):
        need[v.code] = max(need.get(v.code, 0.0), v.value)
    derate = ctx.design.checks.diode_voltage
    aim = ctx.aim
    current = ctx.design.rectifier.diode.name
    fits = []
    for part in tube_library.TUBES.values():
        tr = part.ratings
        ok = all(rating is not None and value <= aim * rating for rating, value in (
            (None if tr.piv is None else tr.piv * derate, need.get("tube.piv", 0.0)),
            (tr.peak_current, need.get("tube.peak_current", 0.0)), (tr.dc_current, need.get("tube.dc_current", 0.0)))
            if value > 0)
        if ok and part.name != current:
            fits.append(part)
    if not fits:
        return _silicon_instead(ctx, need)
    part = min(fits, key=lambda p: (p.ratings.dc_current or 0.0, p.ratings.piv or 0.0))
    return Fix((Assignment("rectifier.diode", part.name, keep="first"),),
               f"{part.name} (PIV {part.ratings.piv:g} V, {part.ratings.peak_current:g} A peak, "
               f"{(part.ratings.dc_current or 0) * 1e3:g} mA DC)")


def _silicon_instead(ctx: FixContext, need: dict[str, float]) -> Fix:
    """No tube takes it: silicon diodes in its place (a solid-state replacement), strung for the voltage."""
    aim = ctx.aim
    derate = ctx.design.checks.diode_voltage
    piv = max(need.get("tube.piv", 0.0), max((v.value for v in ctx.of("tube.piv")), default=0.0))
    dc = need.get("tube.dc_current", 0.0)
    wants = _Needs(string_v=piv, ifav=dc, failing={"diode.reverse_voltage"} if piv else set())
    models = sorted((p.model() for p in diode_library.DIODES.values()),
                    key=lambda m: (m.ratings.ifav or 0.0, m.ratings.vrrm or 0.0))
    found = _best_string(models, wants, aim, derate, prefer_surge=True)
    if found is None:
        return Fix((), "no tube or diode of the library takes these ratings: lower the voltage or the load")
    n, model = found
    sets = [Assignment("rectifier.diode", model.name, keep="first")]
    if n > 1:
        sets += [Assignment("rectifier.series", n), *_sharing(ctx, model, n, piv)]
    return Fix(tuple(sets), f"no tube of the library takes {eng(piv, 'V')} in reverse and {eng(dc, 'A')}: silicon "
               f"diodes in its place ({n} x {model.name} per plate), with the heater winding freed; the output "
               "rises by the tube's drop")


@fixer("tube.piv")
@fixer("tube.dc_current")
def _tubes(ctx: FixContext, v: Verdict) -> Fix | None:
    return ctx.once("tubes", lambda: _tube_fix(ctx))


@fixer("tube.peak_current")
def _tube_peak(ctx: FixContext, v: Verdict) -> Fix | None:
    src = ctx.design.source
    if src.transformer is not None or src.inverter is not None:
        return ctx.once("tubes", lambda: _tube_fix(ctx))
    total = src.resistance * v.value / (ctx.aim * v.limit)  # the peak falls about as 1/R
    add = at_least(max(total - src.resistance, 0.1), "E12")
    return Fix((Assignment("source.resistance", src.resistance + add),),
               f"a {eng(add, 'Ω')} resistor in each plate lead (source.resistance is the total per plate) brings the "
               f"peak plate current within {eng(v.limit, 'A')}")


@fixer("tube.plate_resistance")
def _tube_resistance(ctx: FixContext, v: Verdict) -> Fix | None:
    src = ctx.design.source
    if src.transformer is not None or src.inverter is not None:
        return Fix((), f"put {eng(v.limit - v.value, 'Ω')} or more in series with each plate")
    add = at_least(v.limit * (1 + ctx.design.checks.marginal) * (1 + SLACK) - v.value, "E12")
    return Fix((Assignment("source.resistance", v.value + add),),
               f"a {eng(add, 'Ω')} resistor in each plate lead makes the supply resistance per plate "
               f"{eng(v.value + add, 'Ω')} (source.resistance is the total)")


@fixer("tube.input_c")
def _tube_input(ctx: FixContext, v: Verdict) -> Fix | None:
    c = at_most(v.limit * ctx.aim, "E12")
    return Fix((Assignment("filter.0.c", c, keep="min"),),
               f"a {eng(c, 'F')} reservoir, within the tube's {eng(v.limit, 'F')} maximum")


# --- capacitors -------------------------------------------------------------------------------------------------


@fixer("capacitor.voltage")
def _capacitor_voltage(ctx: FixContext, v: Verdict) -> Fix | None:
    path, part = _rated(ctx, v.part, capacitor_ratings)
    need = v.value / (ctx.design.checks.capacitor_voltage * ctx.aim)
    try:
        volts = capacitor_volts(need)
    except StockError:
        return Fix((), f"no capacitor is sold for {eng(need, 'V')}: put capacitors in series (with balancing "
                       "resistors) or lower the voltage")
    if part is not None:
        return _library_note(part, f"{volts:g} V or more")
    return Fix((Assignment(f"{path}.v", volts),),
               f"a {volts:g} V capacitor: {eng(v.value, 'V')} is {v.value / volts * 100:.0f} % of it")


@fixer("capacitor.ripple")
def _capacitor_ripple(ctx: FixContext, v: Verdict) -> Fix | None:
    path, part = _rated(ctx, v.part, capacitor_ratings)
    amps = at_least(v.value / ctx.aim, "R10")
    if part is not None:
        return _library_note(part, f"for {eng(amps, 'A')} ripple or more")
    return Fix((Assignment(f"{path}.ripple", amps),),
               f"a capacitor rated for {eng(amps, 'A')} RMS ripple (or two in parallel sharing it)")


def _balancing_fix(ctx: FixContext) -> Fix | None:
    """A balancing resistor across each stage capacitor: five times the capacitor's rated leakage."""
    d = ctx.design
    c = d.rectifier.capacitance
    if c is None:
        return None
    peaks = [p.peak_v for r in ctx.corners.results.values() for p in r.of_kind(CapacitorResult).values()
             if p.role == "stage capacitor"]
    each = max(peaks) if peaks else d.source.vpeak
    # Rated leakage of an aluminium electrolytic: 0.01 C V (uA, with C in uF and V in volts); a resistor carrying
    # five times that at the same V is R = V / (5 x 0.01 C V) = 20 / C(uF) Mohm (docs/sources.md#mult-5).
    r = at_most(min(BALANCING_MAX, 20.0 / (c * 1e6) * 1e6), "E12")
    w = _watts(ctx, each**2 / r)
    return Fix((Assignment("rectifier.balancing", r, keep="min"), Assignment("rectifier.balancing_rating.w", w)),
               f"a {eng(r, 'Ω')} {w:g} W resistor across each stage capacitor ({eng(each, 'V')} each) sets the "
               "share: it carries five times the capacitor's rated leakage")


@fixer("capacitor.balancing")
def _balancing(ctx: FixContext, v: Verdict) -> Fix | None:
    return ctx.once("balancing", lambda: _balancing_fix(ctx))


# --- chokes, resistors, windings ------------------------------------------------------------------------------------


@fixer("choke.current")
def _choke(ctx: FixContext, v: Verdict) -> Fix | None:
    i = _filter_index(ctx.design, "l", int(v.part[1:]) - 1)
    amps = at_least(v.value / ctx.aim, "R10")
    part = ctx.design.filters[i].part
    if part is not None:
        return _library_note(part, f"for {eng(amps, 'A')} DC or more")
    return Fix((Assignment(f"filter.{i}.rating.i", amps),), f"a choke rated for {eng(amps, 'A')} DC")


@fixer("resistor.dissipation")
def _resistor(ctx: FixContext, v: Verdict) -> Fix | None:
    path, part = _rated(ctx, v.part, resistor_ratings)
    w = _watts(ctx, v.value)
    if part is not None:
        return _library_note(part, f"{w:g} W or more")
    return Fix((Assignment(f"{path}.w", w),), f"a {w:g} W resistor: it dissipates {eng(v.value, 'W')}, "
               f"{v.value / w * 100:.0f} % of its rating")


@fixer("winding.current")
def _winding(ctx: FixContext, v: Verdict) -> Fix | None:
    src = ctx.design.source
    extra = 1.1 if src.transformer is not None else 1.0  # a nameplate's current also sets its model's resistance
    amps = at_least(v.value * extra / ctx.aim, "R10")
    what = "a transformer whose high-voltage winding is rated" if src.transformer is not None else "a winding rated"
    return Fix((Assignment("source.rated_current", amps),),
               f"{what} {eng(amps, 'A')} RMS: the rectifier's peaky current heats it as {eng(v.value, 'A')} RMS")


@fixer("heater.current")
def _heater(ctx: FixContext, v: Verdict) -> Fix | None:
    k = int(v.part[2:]) - 1
    amps = at_least(v.value / ctx.aim, "R10")
    return Fix((Assignment(f"source.heaters.{k}.rated_current", amps),), f"a heater winding rated {eng(amps, 'A')}")


@fixer("transformer.va")
def _transformer_va(ctx: FixContext, v: Verdict) -> Fix | None:
    va = at_least(v.value / ctx.aim, "R10")
    return Fix((Assignment("source.rated_va", va),), f"a transformer rated {va:g} VA for every winding together")


@fixer("inverter.va")
def _inverter(ctx: FixContext, v: Verdict) -> Fix | None:
    w = at_least(v.value / ctx.aim, "R10")
    return Fix((Assignment("source.rated_power", w),), f"an inverter rated {w:g} W (it must deliver "
               f"{eng(v.value, 'VA')} into the capacitor input)")


# --- regulators --------------------------------------------------------------------------------------------------


@fixer("regulator.headroom")
def _headroom(ctx: FixContext, v: Verdict) -> Fix | None:
    reg = ctx.design.regulator
    assert isinstance(reg, SeriesRegulator)
    want = v.limit * (1 + ctx.design.checks.marginal) * (1 + SLACK)
    corner = ctx.corners.results.get(v.corner)
    ref = reg.reference - (want - v.value)
    if corner is not None and "reg_vin_min_v" in corner.metrics:
        # In dropout the headroom says little: from the input's lowest point (keying included), the headroom
        # wanted, and the gate's voltage at the load current (square law, reg-4), the reference that brings it
        # back into regulation.
        vin_min = corner.metrics["reg_vin_min_v"]
        current = max(corner.metrics.get("iout_dc_a", 0.0), 1e-6)
        vgs = reg.device.vto + math.sqrt(2 * current / reg.device.kp)
        ref = min(ref, vin_min - want + vgs)
    if reg.reference_given is not None:
        new = math.floor(ref)
        return Fix((Assignment("regulator.reference", float(new), keep="min"),),
                   f"a {new:g} V reference: the output falls by {eng(reg.reference - new, 'V')} and the regulator "
                   f"keeps {eng(v.limit, 'V')} of headroom (or raise the supply)")
    z = reg.zener
    each = at_most(ref / z.count, "E24")
    return Fix((Assignment("regulator.zener.voltage", each, keep="min"),),
               f"{z.count} x {each:g} V zeners: the output falls to keep the headroom (or raise the supply)")


def _mosfet_fix(ctx: FixContext) -> Fix | None:
    """A library MOSFET that takes every pass-device rule; or, when only the switch-on peak is too much for the
    largest one, that device with a quicker soft start (a smaller reference filter), checked by simulation."""
    pol = ctx.design.checks
    need = {"pass.dissipation": 0.0, "pass.vds": 0.0, "pass.id": 0.0}
    for v in ctx.of(*need):
        need[v.code] = max(need[v.code], v.value)
    aim = ctx.aim
    reg = ctx.design.regulator
    assert isinstance(reg, SeriesRegulator)

    def takes(m: regulator_library.Mosfet, dissipation: float) -> bool:
        return dissipation <= aim * pol.resistor_power * m.pd and need["pass.vds"] <= aim * pol.diode_voltage * \
            m.vdss and need["pass.id"] <= aim * m.id_max

    fits = [m for m in regulator_library.MOSFETS.values() if takes(m, need["pass.dissipation"])
            and m.name != reg.device.name]
    if fits:
        m = min(fits, key=lambda m: (m.pd, m.vdss))
        return Fix((Assignment("regulator.device", m.name, keep="first"),),
                   f"{m.name} (PD {m.pd:g} W at a 25 C case, VDSS {m.vdss:g} V, ID {m.id_max:g} A) on a heatsink "
                   "that keeps its case near 25 C")
    steady = max((r.part("MPASS", RegulatorResult).dissipation_peak_w for r in ctx.corners.results.values()
                  if "MPASS" in r.parts), default=0.0)
    big = [m for m in regulator_library.MOSFETS.values() if takes(m, steady)]
    if big:
        m = max(big, key=lambda m: m.pd)
        soft = _soft_start(ctx, reg, m, aim * pol.resistor_power * m.pd)
        if soft is not None:
            sets = ([Assignment("regulator.device", m.name, keep="first")] if m.name != reg.device.name else []) + \
                [Assignment("regulator.filter_c", soft[0], keep="min")]
            return Fix(tuple(sets), f"{m.name} on a heatsink, and a quicker soft start ({eng(soft[0], 'F')} in the "
                       f"reference filter): the output follows the input sooner, so the switch-on peak falls to "
                       f"{eng(soft[1], 'W')}")
    return Fix((), f"no MOSFET of the library takes {eng(need['pass.dissipation'], 'W')} and "
                   f"{eng(need['pass.vds'], 'V')}: give a larger one inline (device = {{ vto, kp, vdss, id, pd }})")


def _soft_start(ctx: FixContext, reg: SeriesRegulator, device: regulator_library.Mosfet,
                limit: float) -> tuple[float, float] | None:
    """The largest E12 reference-filter capacitor (a few steps down) whose switch-on peak is within ``limit``."""
    from simkit.checks.corners import heavy_corner
    from simkit.pipeline import simulate

    dev = device.device()
    design, vscale = heavy_corner(ctx.design)
    engine = ctx.engine or get_engine()
    c = reg.filter_c
    for _ in range(SOFT_START_TRIES):
        c = at_most(c / 2.1, "E12")
        trial = replace(design, regulator=replace(reg, filter_c=c, device=dev))
        peak = simulate(trial, engine, vscale=vscale, regulation=False).part(
            "MPASS", RegulatorResult).switch_on_dissipation_peak_w or 0.0
        if peak <= limit:
            return c, peak
    return None


@fixer("pass.dissipation")
@fixer("pass.vds")
@fixer("pass.id")
def _mosfet(ctx: FixContext, v: Verdict) -> Fix | None:
    return ctx.once("mosfet", lambda: _mosfet_fix(ctx))


def _load_current(ctx: FixContext, corner: str) -> float:
    r = ctx.corners.results.get(corner)
    return r.metrics.get("iout_dc_a", 0.0) if r is not None else 0.0


@fixer("shunt.current_min")
def _shunt_min(ctx: FixContext, v: Verdict) -> Fix | None:
    reg = ctx.design.regulator
    assert isinstance(reg, ShuntRegulator)
    load = _load_current(ctx, v.corner)
    want = v.limit * (1 + ctx.design.checks.marginal) * (1 + SLACK)
    r = at_most(reg.resistance * (load + max(v.value, 0.0)) / (load + want), "E12")
    return Fix((Assignment("regulator.resistance", r, keep="min"),),
               f"a {eng(r, 'Ω')} dropping resistor passes more current, so the shunt keeps at least "
               f"{eng(v.limit, 'A')}")


@fixer("shunt.current_max")
def _shunt_max(ctx: FixContext, v: Verdict) -> Fix | None:
    reg = ctx.design.regulator
    assert isinstance(reg, ShuntRegulator)
    load = _load_current(ctx, v.corner)
    want = v.limit * ctx.aim
    r = at_least(reg.resistance * (load + v.value) / (load + want), "E12")
    return Fix((Assignment("regulator.resistance", r),),
               f"a {eng(r, 'Ω')} dropping resistor keeps the shunt current within {eng(v.limit, 'A')}")


@fixer("shunt.strike")
def _strike(ctx: FixContext, v: Verdict) -> Fix | None:
    reg = ctx.design.regulator
    assert isinstance(reg, ShuntRegulator)
    r_corner = ctx.corners.results.get(v.corner)
    if r_corner is None:
        return None
    vin = r_corner.metrics["reg_vin_v"]
    load = r_corner.metrics["iout_dc_a"]
    want = v.limit * (1 + ctx.design.checks.marginal) * (1 + SLACK)
    if vin <= want or load <= 0:
        return Fix((), f"the raw supply ({eng(vin, 'V')}) is too low for the tubes to strike: raise it")
    r = at_most((vin - want) / load, "E12")
    return Fix((Assignment("regulator.resistance", r, keep="min"),),
               f"a {eng(r, 'Ω')} dropping resistor leaves {eng(vin - r * load, 'V')} to strike the tubes")


@fixer("shunt.zener_power")
def _zener(ctx: FixContext, v: Verdict) -> Fix | None:
    w = _watts(ctx, v.value)
    return Fix((Assignment("regulator.zener.power", w),), f"{w:g} W zeners")


# --- switch-off ----------------------------------------------------------------------------------------------------


def _bleeder_fix(ctx: FixContext) -> Fix | None:
    """The largest E12 bleeder that empties every capacitor in time, found by simulating the switch-off again from
    the same charge (a bisection over the E12 values around an estimate)."""
    d = ctx.design
    pol = d.checks
    off = ctx.corners.off
    if off is None:
        return None
    target = pol.safe_time * ctx.aim
    worst = max(off.time_to_safe.values())
    v0 = max(off.start_v.values())
    if d.bleeder is not None and math.isfinite(worst) and worst > 0:
        guess = d.bleeder.r * target / worst
    else:  # every capacitor in parallel: an underestimate of R when some are in series (a multiplier's)
        total_c = sum(c.value for c in off.circuit.capacitors if c.is_part)
        guess = target / (total_c * math.log(max(v0, pol.safe_voltage * 1.01) / pol.safe_voltage))
    engine = ctx.engine or get_engine()
    base = d
    if any(v.code == "capacitor.balancing" and v.verdict != "pass" for v in ctx.verdicts):
        balancing = ctx.once("balancing", lambda: _balancing_fix(ctx))  # its resistors discharge too
        r_bal = next((a.value for a in balancing.sets if a.path == "rectifier.balancing"), None) if balancing else None
        if isinstance(r_bal, float):
            base = replace(d, rectifier=replace(d.rectifier, balancing=r_bal))
    runs: dict[float, float] = {}

    def slowest(r: float) -> float:
        if r not in runs:
            trial = replace(base, bleeder=replace(d.bleeder, r=r) if d.bleeder else Bleeder(r=r))
            runs[r] = max(discharge(engine, trial, ctx.corners.state).time_to_safe.values())
        return runs[r]

    ladder = between(guess / 30.0, guess * 30.0, "E12")
    lo, hi = 0, len(ladder) - 1  # find the largest passing value: slowest() falls as R falls
    if slowest(ladder[lo]) > target:
        return Fix((), f"no bleeder down to {eng(ladder[lo], 'Ω')} empties the capacitors in time: check that every "
                       "capacitor has a path to it, or store less charge")
    for _ in range(BLEEDER_TRIES):
        if hi - lo <= 1:
            break
        mid = (lo + hi) // 2
        if slowest(ladder[mid]) <= target:
            lo = mid
        else:
            hi = mid
    r = ladder[hi] if slowest(ladder[hi]) <= target else ladder[lo]
    w = _watts(ctx, v0**2 / r)
    string = f"; across {eng(v0, 'V')} make it of resistors in series, each within its voltage rating" \
        if v0 > RESISTOR_VOLTS else ""
    return Fix((Assignment("bleeder.r", r, keep="min"), Assignment("bleeder.rating.w", w)),
               f"a {eng(r, 'Ω')} {w:g} W bleeder empties every capacitor below {pol.safe_voltage:g} V within "
               f"{slowest(r):.2g} s (it dissipates {eng(v0**2 / r, 'W')} from {eng(v0, 'V')}){string}")


@fixer("discharge")
def _discharge(ctx: FixContext, v: Verdict) -> Fix | None:
    fx = ctx.once("bleeder", lambda: _bleeder_fix(ctx))
    bleeder = ctx.design.bleeder
    if fx is not None and bleeder is not None and bleeder.part is not None:
        watts = next((a.value for a in fx.sets if a.path == "bleeder.rating.w"), None)
        return Fix(tuple(a for a in fx.sets if a.path == "bleeder.r"),
                   f"{fx.reason}; the part {bleeder.part!r} of your parts file must then be rated {watts} W or more")
    return fx
