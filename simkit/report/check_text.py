"""The text ``simkit check`` prints: one line per verdict (rating beside the derated limit), the rules not
checked, the fixes and their ``--set`` line, the summary, the fuse and the cautions; and ``simkit run``'s
closing line, the ratings exceeded at nominal conditions."""

from __future__ import annotations

import math
import shlex
from collections.abc import Iterable
from typing import Any

from simkit.checks import CheckReport, Verdict
from simkit.report.text import text_table
from simkit.safety import CAUTIONS
from simkit.units import eng

#: A failing value at least this many times its limit shows its ratio ("x3.2") instead of a margin.
RATIO_FROM = 2.0

#: What a failing verdict is beyond (:attr:`Verdict.exceeds`), in words.
EXCEEDS_TEXT = {"rating": "above rating", "derating": "above derating", "limit": "beyond limit"}


def value_text(v: float | None, unit: str) -> str:
    """A verdict's value, rating or limit as the check table prints it (``never`` for an infinite time)."""
    if v is None:
        return "–"
    if unit == "missing":
        return f"{v:g} missing"
    if not math.isfinite(v):
        return "never" if unit == "s" else str(v)
    if unit in ("A2s",):
        return f"{v:.4g} A²s"
    return eng(v, {"ohm": "Ω", "VA": "VA"}.get(unit, unit))


def ratio_text(v: Verdict) -> str:
    """``x3.2`` for a failing value at least :data:`RATIO_FROM` times its (ceiling) limit, else ``""``."""
    times = v.times_limit
    if v.minimum or v.verdict != "fail" or times is None or not math.isfinite(times) or times < RATIO_FROM:
        return ""
    return f"x{times:.2g}" if times < 10 else f"x{times:.0f}"


def margin_text(v: Verdict) -> str:
    """The margin as a builder reads it: ``+36 %``, ``-40 %``, or ``x3.2`` for a value several times its limit."""
    if v.unit == "missing" or v.margin is None:
        return ""
    if not math.isfinite(v.value):
        return "never" if v.unit == "s" else ""
    ratio = ratio_text(v)
    if ratio:
        return ratio
    if not math.isfinite(v.margin):
        return ""
    return f"{v.margin * 100:+.0f} %"


def exceeds_text(v: Verdict) -> str:
    """What a fail is beyond, in words (``above derating``); ``""`` when it is not a fail."""
    return EXCEEDS_TEXT.get(v.exceeds, "")


def verdict_text(v: Verdict) -> str:
    """``pass``, ``MARGINAL``, ``FAIL`` with what it is above: the rating, only the derating, or a limit."""
    if v.verdict == "pass":
        return "pass"
    if v.verdict != "fail":
        return v.verdict.upper()
    over = exceeds_text(v)
    return f"FAIL: {over}" if over else "FAIL"


def rating_text(v: Verdict) -> str:
    """The part's own rating; the limit when that is the rating itself; blank for a policy limit or a missing part."""
    if v.unit == "missing":
        return ""
    if v.rating is None:
        return "" if v.limit_kind == "policy" else value_text(v.limit, v.unit)
    return value_text(v.rating, v.unit)


def limit_text(v: Verdict) -> str:
    """The (derated) limit; ``none`` for a part the design lacks."""
    return "none" if v.unit == "missing" else value_text(v.limit, v.unit)


def report_text(rep: CheckReport, command: str = "") -> str:
    """The whole ``simkit check`` text.  ``command`` is how the design was checked, for the re-check line."""
    rows: list[tuple[str, ...]] = [("part", "rule", "value", "rating", "limit", "margin", "verdict", "corner")]
    for v in rep.verdicts:
        rows.append((v.part, v.rule, value_text(v.value, v.unit), rating_text(v), limit_text(v), margin_text(v),
                     verdict_text(v), v.corner))
    for x in rep.findings.not_checked:
        rows.append((x.part, x.rule, value_text(x.value, x.unit) if x.value is not None else "", "none", "",
                     "", "not checked", x.corner))
    lines = [f"{rep.design.title}", f"  design file: {rep.design.origin}", "", *text_table(rows)]
    s = rep.summary()
    lines.append("")
    lines.append(f"  {s['pass']} pass, {s['marginal']} marginal, {s['fail']} fail: {s['result'].upper()}"
                 + _fail_split(s))
    if rep.findings.not_checked:
        n = len(rep.findings.not_checked)
        lines.append(f"  {n} rule{'s' if n != 1 else ''} not checked, for want of a rating (rows 'not checked'; "
                     "add the rating to check them)")
    lines += fix_lines(rep, command)
    fz = rep.fuse
    lines.append(f"  suggested fuse: {eng(fz['rating_a'], 'A')} {fz['type']}, {fz['where']}: 1.5 x "
                 f"{fz['current']} at {fz['corner']}, {eng(fz['current_a'], 'A')} (common practice; slow-blow "
                 "because the switch-on surge would blow a fast fuse)")
    pol = rep.design.checks
    lines.append("  rating: the part's own; limit: the rating after derating per [checks] "
                 f"({100 * pol.diode_voltage:g} % of a diode's VRRM, {100 * pol.capacitor_voltage:g} % of a "
                 "capacitor's voltage, "
                 f"{100 * pol.resistor_power:g} % of a resistor's power); each limit's source is in --json (basis)")
    lines.append("")
    lines.append(CAUTIONS)
    return "\n".join(lines) + "\n"


def _fail_split(s: dict[str, Any]) -> str:
    if not s["fail"]:
        return ""
    parts = [f"{s['fails_above_rating']} above the part's absolute rating"] if s["fails_above_rating"] else []
    if s["fails_above_derating"]:
        parts.append(f"{s['fails_above_derating']} above the derating only")
    if s["fails_above_limit"]:
        parts.append(f"{s['fails_above_limit']} beyond a safety or design limit")
    return " (" + ", ".join(parts) + ")"


def fix_groups(verdicts: Iterable[Verdict]) -> list[tuple[list[str], str, tuple[str, ...]]]:
    """Each distinct fix of the fail and marginal verdicts once, in order of first use: (the verdicts it fixes as
    ``part rule``, its reason, its assignments as ``key=value``)."""
    groups: dict[tuple[tuple[str, ...], str], list[str]] = {}
    for v in verdicts:
        if v.verdict == "pass" or v.fix is None:
            continue
        key = (tuple(a.text() for a in v.fix.sets), v.fix.reason)
        groups.setdefault(key, []).append(f"{v.part} {v.rule}")
    return [(which, reason, sets) for (sets, reason), which in groups.items()]


def fix_lines(rep: CheckReport, command: str = "") -> list[str]:
    """What to change: each distinct fix once, with the verdicts it fixes, then every fix as one --set line."""
    groups = fix_groups(rep.verdicts)
    if not groups:
        return []
    out = ["", "  to fix (stock values; apply them all, then check again):"]
    for which, reason, sets in groups:
        out.append(f"    {', '.join(which)}")
        out.append(f"      {reason}" + (f": {' '.join(sets)}" if sets else " (no design key to set)"))
    line = rep.fix_line
    if line:
        out.append(f"  all fixes at once: {command or 'simkit check DESIGN'} {line}")
    out.append("")
    return out


def fix_only(rep: CheckReport) -> str:
    """``simkit check --fix``: the ``--set`` line of every fix, ready to paste (empty when nothing fails)."""
    line = rep.fix_line
    return line + "\n" if line else ""


def nominal_line(findings: Any) -> str:
    """``simkit run``'s last line: how many ratings the run exceeds at nominal conditions, and what to run next."""
    fails = [v for v in findings.verdicts if v.verdict == "fail"]
    above = sum(1 for v in fails if v.exceeds == "rating")
    if not fails:
        head = "no rating exceeded at nominal conditions"
    else:
        split = f", {above} of them above the part's absolute rating" if above else ""
        names = ", ".join(dict.fromkeys(f"{v.part} {v.rule}" for v in fails[:3])) + (", ..." if len(fails) > 3 else "")
        head = f"{len(fails)} rating{'s' if len(fails) != 1 else ''} exceeded at nominal conditions{split} ({names})"
    return f"check: {head}; run `simkit check` for the corners (high and low mains, switch-on, switch-off)\n"


def command_line(design: str, overrides: tuple[str, ...] | list[str], rep: CheckReport | None = None) -> str:
    """``simkit check DESIGN --set ...`` as the user ran it, quoted for a POSIX shell; with ``rep``, without the
    overrides its fixes replace (the fixes' own --set line follows it)."""
    fixed = {a.path for a in rep.fixes} if rep is not None else set()
    kept = [o for o in overrides if o.partition("=")[0].strip() not in fixed]
    return " ".join(["simkit check", shlex.quote(design), *[f"--set {shlex.quote(o)}" for o in kept]])
