"""`simkit check`: every part against its ratings at the corners that bind, plus switch-off safety."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from simkit.checks.corners import Corners, corner_names, run_corners
from simkit.checks.rules import Findings, Verdict, evaluate
from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.report.text import CAUTIONS
from simkit.units import eng

#: Preferred fuse ratings, A (the R10 series used for miniature fuses, IEC 60127 style; from memory [M]).
FUSE_SERIES = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)


def next_fuse(current: float) -> float:
    """The smallest preferred fuse rating at or above ``current``, A."""
    if current <= 0:
        return 0.05
    decade = 10.0 ** math.floor(math.log10(current))
    for m in (*FUSE_SERIES, 10.0):
        if m * decade >= current * (1 - 1e-9):
            return round(m * decade, 6)
    return 10 * decade  # pragma: no cover


@dataclass
class CheckReport:
    design: Design
    corners: Corners
    findings: Findings
    fuse: dict[str, Any]

    @property
    def verdicts(self) -> list[Verdict]:
        return self.findings.verdicts

    @property
    def failed(self) -> bool:
        return any(v.verdict == "fail" for v in self.verdicts)

    def summary(self) -> dict[str, Any]:
        counts = {k: sum(1 for v in self.verdicts if v.verdict == k) for k in ("pass", "marginal", "fail")}
        return {**counts, "result": "fail" if counts["fail"] else ("marginal" if counts["marginal"] else "pass"),
                "not_checked": list(self.findings.not_checked), "fuse": self.fuse,
                "corners": [*self.corners.results, corner_names(self.corners.mains_tolerance)["off"]],
                "cautions": CAUTIONS}

    def to_json(self) -> dict[str, Any]:
        from simkit import __version__

        return {"simkit": __version__, "design": self.design.title,
                "verdicts": [v.to_json() for v in self.verdicts], "summary": self.summary()}


def suggest_fuse(design: Design, corners: Corners) -> dict[str, Any]:
    """A slow-blow fuse from the highest RMS current of the heavy corners (1.5 x, common practice)."""
    cn = corner_names(corners.mains_tolerance)
    heavy = corners.results[cn["heavy"]]
    src = design.source
    if src.inverter is not None and "battery_peak_current_a" in heavy.metrics:
        i = heavy.metrics["battery_peak_current_a"]
        where = "in the battery lead, at the battery"
    elif src.transformer is not None:
        # Primary current from the secondary VA plus about 10 % for magnetising current and losses (common practice).
        i = heavy.metrics["source_va"] * 1.1 / src.transformer.primary_vrms
        where = "in the transformer primary (mains side)"
    else:
        i = heavy.metrics["source_rms_a"]
        where = "in series with the winding that feeds the rectifier"
    rating = next_fuse(1.5 * i)
    return {"rating_a": rating, "type": "slow-blow (time-lag)", "where": where, "rms_current_a": i,
            "why": "1.5 x the highest RMS current, slow-blow because the switch-on surge would blow a fast fuse "
                   "(common practice)"}


def check_design(design: Design, engine: Engine | None = None) -> CheckReport:
    corners = run_corners(design, engine)
    findings = evaluate(design, corners)
    return CheckReport(design, corners, findings, suggest_fuse(design, corners))


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
