"""`simkit check`: every part against its ratings at the corners that bind, plus switch-off safety, with fixes."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from simkit import __version__
from simkit.checks.corners import Corners, nominal_corners, run_corners
from simkit.checks.fix import Assignment, Fix, merge, set_line
from simkit.checks.rules import Findings, NotChecked, Verdict, evaluate, make_verdict
from simkit.checks.supply import supply_verdicts
from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.pipeline import RunResult
from simkit.safety import CAUTIONS
from simkit.stock import at_least

__all__ = ["Assignment", "CheckReport", "Fix", "NotChecked", "Verdict", "check_design", "make_verdict",
           "next_fuse", "nominal_check", "run_checks", "suggest_fuse"]

#: Added to a transformer's primary current for its magnetising current and losses (common practice).
MAGNETISING = 0.10


def next_fuse(current: float) -> float:
    """The smallest preferred fuse rating at or above ``current``, A: miniature fuses come in the R10 series
    (IEC 60127 style, from memory [M]; :data:`simkit.stock.R10`)."""
    if current <= 0:
        return 0.05
    return at_least(current, "R10")


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

    @property
    def fixes(self) -> list[Assignment]:
        """Every fail and marginal verdict's fix, merged: one assignment per path (``check --fix``)."""
        return merge(v.fix for v in self.verdicts if v.verdict != "pass")

    @property
    def fix_line(self) -> str:
        """The merged fixes as ``--set A=1 --set B=2`` (empty when nothing needs fixing)."""
        return set_line(self.fixes)

    def worst(self, count: int = 3) -> list[Verdict]:
        """The worst verdict of each failing rule, worst first: fails above a part's absolute rating, then the
        others, each by how far beyond its limit (then the marginal ones); ``count`` of them."""
        def key(v: Verdict) -> tuple[int, float]:
            times = v.times_limit
            beyond = (v.limit / v.value if v.value else math.inf) if v.minimum else (times or 0.0)
            rank = 0 if v.exceeds == "rating" else 1 if v.verdict == "fail" else 2
            return rank, -beyond

        seen: set[str] = set()
        out = []
        for v in sorted((v for v in self.verdicts if v.verdict != "pass"), key=key):
            if v.rule not in seen:
                seen.add(v.rule)
                out.append(v)
        return out[:count]

    def summary(self) -> dict[str, Any]:
        counts = {k: sum(1 for v in self.verdicts if v.verdict == k) for k in ("pass", "marginal", "fail")}
        exceeds = {k: sum(1 for v in self.verdicts if v.exceeds == k) for k in ("rating", "derating", "limit")}
        corners = list(dict.fromkeys([*self.corners.results, self.corners.names["on"], self.corners.names["off"]]))
        return {**counts, "result": "fail" if counts["fail"] else ("marginal" if counts["marginal"] else "pass"),
                "fails_above_rating": exceeds["rating"], "fails_above_derating": exceeds["derating"],
                "fails_above_limit": exceeds["limit"],
                "not_checked": [str(x) for x in self.findings.not_checked],
                "not_checked_rules": [x.to_json() for x in self.findings.not_checked],
                "fix": [a.text() for a in self.fixes], "fuse": self.fuse, "corners": corners, "cautions": CAUTIONS}

    def to_json(self) -> dict[str, Any]:
        return {"simkit": __version__, "design": self.design.title,
                "verdicts": [v.to_json() for v in self.verdicts], "summary": self.summary()}


def suggest_fuse(design: Design, corners: Corners) -> dict[str, Any]:
    """A slow-blow fuse: 1.5 x the current it carries at the heavy corner (common practice), named as used.

    A transformer's fuse is in its primary, sized on the primary's RMS current with every winding
    reflected (``primary_rms_a``) plus 10 % for magnetising current and losses; an inverter's in
    the battery lead, on the battery's RMS current; otherwise in series with the winding, on its
    RMS current.
    """
    corner = corners.names["heavy"]
    heavy = corners.results[corner]
    src = design.source
    if src.inverter is not None and design.battery is not None and heavy.circuit.battery_nodes:
        # The battery's low corner draws the most current for the same power.
        i, corner = max((r.metrics["battery_rms_a"], name) for name, r in corners.results.items()
                        if "battery_rms_a" in r.metrics)
        what, where = "the battery's RMS current", "in the battery lead, at the battery"
    elif src.transformer is not None and "primary_rms_a" in heavy.metrics:
        i = heavy.metrics["primary_rms_a"] * (1 + MAGNETISING)
        what = ("the primary's RMS current (every winding reflected, plus 10 % for magnetising current and "
                "losses)")
        where = "in the transformer primary (mains side)"
    else:
        i = heavy.metrics["source_rms_a"]
        what, where = "the winding's RMS current", "in series with the winding that feeds the rectifier"
    rating = next_fuse(1.5 * i)
    return {"rating_a": rating, "type": "slow-blow (time-lag)", "where": where, "current_a": i, "current": what,
            "corner": corner,
            "why": f"1.5 x {what}, slow-blow because the switch-on surge would blow a fast fuse (common practice)"}


def check_design(design: Design, engine: Engine | None = None, fixes: bool = True) -> CheckReport:
    """Simulate the corners, judge every rule, and (``fixes``) give each fail and marginal verdict its fix."""
    corners = run_corners(design, engine)
    findings = evaluate(design, corners)
    supply_verdicts(design, corners, findings)
    if fixes:
        from simkit.checks.fixes import propose

        propose(design, corners, findings, engine)
    return CheckReport(design, corners, findings, suggest_fuse(design, corners))


def nominal_check(result: RunResult) -> Findings:
    """The rules against one run at nominal conditions (no corners, no switch-off run, no fixes)."""
    return evaluate(result.design, nominal_corners(result))


def run_checks(design: Design) -> tuple[CheckReport | None, str]:
    """The design's stress checks (``simkit check``), or None and why they could not run: for reports and
    pages that show the checks beside the figures and go on without them."""
    from simkit.errors import SimkitError

    try:
        return check_design(design), ""
    except SimkitError as exc:
        return None, str(exc)
