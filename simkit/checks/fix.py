"""What a fix is: ``--set`` assignments that make a failing verdict pass, with a one-line reason.

Any rule may attach a :class:`Fix` to its verdict (``Verdict(..., fix=Fix(...))``, or through
:func:`simkit.checks.rules.make_verdict`); simkit's own rules get theirs from
:mod:`simkit.checks.fixes`.  A fix is a list of :class:`Assignment`, each one ``--set PATH=VALUE``
as the user would type it, that applied together make that verdict pass.  Fixes of several
verdicts may set the same path (two capacitors' discharge both ask for a smaller bleeder):
:func:`merge` keeps, per path, the value that satisfies all of them (the larger rating, the
smaller resistor), as each assignment's ``keep`` says.

Example
-------
>>> f = Fix((Assignment("bleeder.r", 22e3, keep="min"), Assignment("bleeder.rating.w", 10.0)), "discharge")
>>> f.to_json()["set"]
['bleeder.r=22k', 'bleeder.rating.w=10']
"""

from __future__ import annotations

import shlex
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from simkit.stock import compact

#: How two assignments to one path combine: the larger, the smaller, or the one given first.
KEEPS = ("max", "min", "first")
#: Extra headroom a fix aims for beyond the marginal band: the fixed design's figures move a little.
SLACK = 0.01


def aim(marginal: float) -> float:
    """The share of a limit a fixed value should reach at most: outside the marginal band, with slack."""
    return (1.0 - marginal) / (1.0 + SLACK)


@dataclass(frozen=True)
class Assignment:
    """One ``--set PATH=VALUE``: an SI number, a whole number (a count) or text (a part name)."""

    path: str
    value: float | int | str
    keep: str = "max"  # which of two values for the same path satisfies both (KEEPS)

    def __post_init__(self) -> None:
        if self.keep not in KEEPS:
            raise ValueError(f"keep must be one of {KEEPS}, got {self.keep!r}")

    @property
    def shown(self) -> str:
        """The value as ``--set`` takes it (``47k``, ``2``, ``1N5408``)."""
        v = self.value
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, int):
            return str(v)
        if isinstance(v, float):
            return compact(v)
        return v

    def text(self) -> str:
        """``PATH=VALUE``."""
        return f"{self.path}={self.shown}"


@dataclass(frozen=True)
class Fix:
    """Assignments that, applied together, make one verdict pass; ``reason`` says why in one line.

    A fix with no assignments says what to do where no design key can (a part of the user's own
    parts file to replace, say); :func:`merge` and ``check --fix`` skip it.
    """

    sets: tuple[Assignment, ...]
    reason: str

    def to_json(self) -> dict[str, Any]:
        return {"set": [a.text() for a in self.sets], "reason": self.reason}


def merge(fixes: Iterable[Fix | None]) -> list[Assignment]:
    """One assignment per path from several fixes, in the order paths first appear."""
    out: dict[str, Assignment] = {}
    for fx in fixes:
        if fx is None:
            continue
        for a in fx.sets:
            old = out.get(a.path)
            if old is None:
                out[a.path] = a
            elif isinstance(old.value, int | float) and isinstance(a.value, int | float) and \
                    not isinstance(old.value, bool) and a.keep in ("max", "min"):
                bigger = a.value > old.value
                if (a.keep == "max" and bigger) or (a.keep == "min" and not bigger and a.value != old.value):
                    out[a.path] = a
    return list(out.values())


def set_line(assignments: Iterable[Assignment]) -> str:
    """The assignments as ``--set A=1 --set B=2``, quoted for a POSIX shell where needed."""
    return " ".join(f"--set {shlex.quote(a.text())}" for a in assignments)
