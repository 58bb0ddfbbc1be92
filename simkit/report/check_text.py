"""The text ``simkit check`` prints: one line per verdict, the summary, the fuse and the cautions."""

from __future__ import annotations

import math

from simkit.checks import CheckReport
from simkit.safety import CAUTIONS
from simkit.units import eng


def _show(v: float, unit: str) -> str:
    if unit == "missing":
        return f"{v:g} missing"
    if not math.isfinite(v):
        return "never" if unit == "s" else str(v)
    if unit in ("A2s",):
        return f"{v:.4g} A²s"
    return eng(v, {"ohm": "Ω", "VA": "VA"}.get(unit, unit))


def report_text(rep: CheckReport) -> str:
    rows = [("part", "rule", "value", "limit", "margin", "verdict", "corner")]
    for v in rep.verdicts:
        margin = "" if v.margin is None or not math.isfinite(v.margin) else f"{v.margin * 100:+.0f} %"
        limit = "none" if v.unit == "missing" else _show(v.limit, v.unit)
        rows.append((v.part, v.rule, _show(v.value, v.unit), limit, margin, v.verdict.upper()
                     if v.verdict != "pass" else "pass", v.corner))
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]))]
    lines = [f"{rep.design.title}", f"  design file: {rep.design.origin}", ""]
    for k, r in enumerate(rows):
        lines.append("  " + "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip())
        if k == 0:
            lines.append("  " + "  ".join("-" * w for w in widths))
    s = rep.summary()
    lines.append("")
    lines.append(f"  {s['pass']} pass, {s['marginal']} marginal, {s['fail']} fail: {s['result'].upper()}")
    if s["not_checked"]:
        lines.append("  not checked (no rating given):")
        lines += [f"    - {x}" for x in s["not_checked"]]
    fz = rep.fuse
    lines.append(f"  suggested fuse: {eng(fz['rating_a'], 'A')} {fz['type']}, {fz['where']} "
                 f"({fz['why']}; highest RMS current {eng(fz['rms_current_a'], 'A')})")
    lines.append("  the limits' sources are in --json (basis); derating per [checks] in the design file")
    lines.append("")
    lines.append(CAUTIONS)
    return "\n".join(lines) + "\n"
