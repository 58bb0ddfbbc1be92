"""Human-readable text: the figures table of ``run``, the parts table, and the safety cautions."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from simkit.units import eng

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

CAUTIONS = """\
HIGH VOLTAGE: these supplies can kill.  The figures above are a simulation, not a
guarantee.  Capacitors keep their charge after switch-off: discharge every capacitor
through a resistor and measure before touching, and never trust a bleeder alone.
Work one hand in your pocket, on an insulated floor.  Insulate and enclose every live
part, fuse the supply (slow-blow, because of the switch-on surge) and earth the
chassis.  Follow your local electrical codes, and have mains wiring done or checked by
a licensed person where the law requires it."""

_UNIT_OF_SUFFIX = {"_v": "V", "_a": "A", "_s": "s", "_w": "W", "_va": "VA", "_f": "F", "_ohm": "Ω",
                   "_a2s": "A²s", "_hz": "Hz", "_pct": "%"}
#: Figures whose unit takes no SI prefix when shown.
_PLAIN = {"_h": "h", "_pct": "%", "efficiency": "", "_a2s": "A²s"}


def unit_of(key: str) -> str:
    if key == "value_h":
        return "H"
    for suffix in sorted(_UNIT_OF_SUFFIX, key=len, reverse=True):
        if key.endswith(suffix):
            return _UNIT_OF_SUFFIX[suffix]
    return ""


def show(key: str, value: Any) -> str:
    if isinstance(value, float):
        if key != "value_h":
            for suffix, unit in _PLAIN.items():  # a prefix would mislead ((mA)²s, mh): print plainly
                if key.endswith(suffix):
                    return f"{value:.4g} {unit}".strip() if value == value else "n/a"
        return eng(value, unit_of(key))
    return str(value)


def run_table(result: RunResult) -> str:
    from simkit.pipeline import FIGURES

    d = result.design
    lines = [f"{d.title}", f"  design file: {d.origin}", ""]
    lines.append(f"  {'figure':<20} {'value':>12}   meaning")
    for key, (_unit, meaning) in FIGURES.items():
        if key in result.metrics:
            lines.append(f"  {key:<20} {show(key, result.metrics[key]):>12}   {meaning}")
    extra = [k for k in result.metrics if k not in FIGURES]
    for key in extra:
        lines.append(f"  {key:<20} {show(key, result.metrics[key]):>12}")
    lines.append("")
    lines.append("  per part (steady state unless marked switch-on):")
    for name, fig in result.parts.items():
        role = fig.get("role", "")
        items = [f"{k}={show(k, v)}" for k, v in fig.items() if k != "role"]
        lines.append(f"    {name:<7} {role}")
        lines.append(f"            {'  '.join(items)}")
    if result.warnings:
        lines.append("")
        lines.append("  warnings:")
        for wmsg in result.warnings:
            lines.append(f"    - {wmsg}")
    return "\n".join(lines) + "\n"
