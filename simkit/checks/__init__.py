"""`simkit check`: every part against its ratings at the corners that bind, plus switch-off safety."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from simkit import __version__
from simkit.checks.corners import Corners, run_corners
from simkit.checks.rules import Findings, Verdict, evaluate
from simkit.checks.supply import supply_verdicts
from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.safety import CAUTIONS

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
                "corners": [*self.corners.results, self.corners.names["off"]],
                "cautions": CAUTIONS}

    def to_json(self) -> dict[str, Any]:
        return {"simkit": __version__, "design": self.design.title,
                "verdicts": [v.to_json() for v in self.verdicts], "summary": self.summary()}


def suggest_fuse(design: Design, corners: Corners) -> dict[str, Any]:
    """A slow-blow fuse from the highest RMS current of the heavy corners (1.5 x, common practice)."""
    cn = corners.names
    heavy = corners.results[cn["heavy"]]
    src = design.source
    if src.inverter is not None and "battery_peak_current_a" in heavy.metrics:
        # The battery's low corner draws the most current for the same power.
        i = max(r.metrics.get("battery_peak_current_a", 0.0) for r in corners.results.values())
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
    supply_verdicts(design, corners, findings)
    return CheckReport(design, corners, findings, suggest_fuse(design, corners))
