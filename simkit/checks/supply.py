"""Verdicts on what feeds the rectifier from a battery: the inverter's own limits and its idle power.

- the inverter's mean output power with the key held down (the heavy corners) against its
  ``rated_power``;
- its highest one-period mean output power after switch-on at the worst instant for its
  waveform (charging empty capacitors) against ``peak_power`` (its surge rating; twice the
  rated power when not given, common practice);
- with a ``[battery]``: the share of the battery's power that the inverter's idle power takes
  at the design's own load (key-up and key-down weighted by the keying duty).  Above half, the
  inverter, not the load, sets the runtime: a warning (``marginal``), never a failure.

The corners (``checks/corners.py``) run an inverter on a battery at the battery's low and high
voltages, so every verdict here takes the worse of the two.
"""

from __future__ import annotations

from dataclasses import replace

from simkit.checks.corners import Corners
from simkit.checks.fix import Assignment, Fix, aim
from simkit.checks.rules import Findings, make_verdict
from simkit.design.model import Design, KeyedLoad
from simkit.stock import StockError, at_least

#: Above this share of the battery power the inverter's idle power dominates the runtime (common practice).
IDLE_SHARE = 0.5


def supply_verdicts(design: Design, corners: Corners, findings: Findings) -> None:
    """Add the inverter's verdicts to ``findings`` (nothing for a mains source)."""
    inv = design.source.inverter
    if inv is None:
        return
    pol = design.checks
    cn = corners.names
    loaded = [n for n in (cn["light"], cn["heavy"], cn["low"]) if n in corners.results]

    def add(rule: str, value: float, limit: float, unit: str, corner: str, basis: str, code: str,
            fix: Fix | None = None) -> None:
        findings.verdicts.append(make_verdict(pol, "V1", rule, value, limit, unit, corner, basis, rating=limit,
                                              code=code, fix=fix))

    def rated(path: str, need: float, what: str) -> Fix | None:
        """An inverter rated for ``need`` (watts) with the marginal band to spare, in the R10 series."""
        try:
            w = at_least(need / aim(pol.marginal), "R10")  # as every fix aims
        except StockError:
            return None  # propose() says that no stock part takes it
        return Fix((Assignment(path, w),), f"an inverter {what} {w:g} W or more")

    powers = [(corners.results[n].metrics.get("output_power_w"), n) for n in loaded]
    known = [(p, n) for p, n in powers if p is not None]
    if known:
        p, where = max(known)
        add("inverter output power, key down", p, inv.rated_power, "W", where,
            f"rated {inv.rated_power:g} W (source.rated_power); the mean real power with the heaviest load",
            "inverter.power", rated("source.rated_power", p, "rated for"))
    heavy = corners.results.get(cn["heavy"])
    surge = heavy.metrics.get("inverter_switch_on_power_w") if heavy is not None else None
    if surge is not None:
        given = "source.peak_power" if inv.peak_power_given is not None else "2 x rated_power, common practice"
        add("inverter switch-on power", surge, inv.peak_power, "W", cn["on"],
            f"surge rating {inv.peak_power:g} W ({given})"
            "; the highest mean over one period while the empty capacitors charge: an inverter short of it "
            "limits its current or shuts down at switch-on", "inverter.surge",
            rated("source.peak_power", surge, "whose surge rating (its maker's peak or start-up power) is"))
    if design.battery is not None and inv.idle_power > 0:
        share = idle_share(design, corners)
        if share is not None:
            value, where = share
            findings.verdicts.append(make_verdict(
                pol, "V1", "inverter idle power, share of the battery power", 100 * value, 100 * IDLE_SHARE, "%",
                where, f"a warning above {IDLE_SHARE:.0%}: the inverter's own {inv.idle_power:g} W "
                "(source.idle_power) then sets the runtime more than the load does (common practice)",
                code="inverter.idle", limit_kind="policy",
                fix=Fix((), "a smaller inverter, or one with a lower idle power, runs longer on the same battery")))
            # A warning above the share, never a failure; below it a pass (no marginal band).
            v = findings.verdicts[-1]
            findings.verdicts[-1] = replace(v, verdict="marginal") if value > IDLE_SHARE else \
                replace(v, verdict="pass", fix=None)


def idle_share(design: Design, corners: Corners) -> tuple[float, str] | None:
    """Idle power over the battery power at the design's own load, and the corners it comes from.

    A keyed load draws its key-up power (light corner) and key-down power (heavy corner), weighted by
    the keying duty; any other load is what the light corner draws.
    """
    inv = design.source.inverter
    assert inv is not None
    cn = corners.names
    light, heavy = corners.results.get(cn["light"]), corners.results.get(cn["heavy"])
    if light is None or "input_power_w" not in light.metrics:
        return None
    p = light.metrics["input_power_w"]
    where = cn["light"]
    keyed = next((ld for ld in design.loads if isinstance(ld, KeyedLoad)), None)
    if keyed is not None and heavy is not None and "input_power_w" in heavy.metrics:
        duty = keyed.duty_share()
        p = duty * heavy.metrics["input_power_w"] + (1 - duty) * p
        where = f"{cn['light']} and {cn['heavy']}, {100 * duty:.0f} % key-down"
    if p <= 0:
        return None
    return inv.idle_power / p, where
