"""Human-readable text: the figures table of ``run`` and the parts table, values with their units."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from simkit.figures import FIGURES
from simkit.figures import unit_of as figure_unit
from simkit.units import eng

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: How a unit is written for people (prefixes are added by eng()).
SYMBOLS = {"ohm": "Ω", "A2s": "A²s", "dBuV": "dBµV"}
#: Units shown without an SI prefix: a prefix would mislead ((mA)²s, mh).
_PLAIN = ("h", "%", "", "A2s", "dB", "dBV", "dBuV")


def unit_of(key: str) -> str:
    """How a figure's or part quantity's unit is written (from :mod:`simkit.figures`)."""
    u = figure_unit(key)
    return SYMBOLS.get(u, u)


def show(key: str, value: Any) -> str:
    """A figure's value with its unit, as tables show it ("n/a" for a figure not computed)."""
    if value is None:  # a figure with no value (no ring to measure), as run --json gives it
        return "n/a"
    if isinstance(value, bool) or not isinstance(value, float | int):
        return str(value)
    if not math.isfinite(value):
        return "n/a"
    u = figure_unit(key)
    if u in _PLAIN:
        return f"{value:.4g} {SYMBOLS.get(u, u)}".strip()
    return eng(float(value), SYMBOLS.get(u, u))


def run_table(result: RunResult) -> str:
    d = result.design
    lines = [f"{d.title}", f"  design file: {d.origin}", ""]
    lines.append(f"  {'figure':<20} {'value':>12}   meaning")
    for key, fig in FIGURES.items():
        meaning = fig.meaning
        if key in result.metrics:
            lines.append(f"  {key:<20} {show(key, result.metrics[key]):>12}   {meaning}")
    extra = [k for k in result.metrics if k not in FIGURES]
    for key in extra:
        lines.append(f"  {key:<20} {show(key, result.metrics[key]):>12}")
    lines.append("")
    lines.append("  per part (steady state unless marked switch-on):")
    for name, part in result.parts.items():
        fields = part.to_json()
        role = fields.pop("role", "")
        items = [f"{k}={show(k, v)}" for k, v in fields.items()]
        lines.append(f"    {name:<7} {role}")
        lines.append(f"            {'  '.join(items)}")
    if result.warnings:
        lines.append("")
        lines.append("  warnings:")
        for wmsg in result.warnings:
            lines.append(f"    - {wmsg}")
    return "\n".join(lines) + "\n"


def text_table(rows: list[tuple[str, ...]]) -> list[str]:
    """Rows as aligned columns for the terminal, the first row a header underlined with dashes."""
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]))]
    out = []
    for k, r in enumerate(rows):
        out.append("  " + "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip())
        if k == 0:
            out.append("  " + "  ".join("-" * w for w in widths))
    return out
