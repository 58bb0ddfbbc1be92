"""``simkit compare``: several designs, or variants of one, simulated and put side by side.

Each design is simulated as ``simkit run`` does and, unless told not to, checked as ``simkit
check`` does.  The first design is the reference: every difference is another design's figure
minus the first's.  :class:`Comparison` holds the results; :mod:`simkit.report.compare` prints
them, draws them on shared axes and writes the report.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from simkit import __version__
from simkit.design.loader import load_design
from simkit.design.model import Design
from simkit.errors import UsageError
from simkit.figures import FIGURES


@dataclass
class Compared:
    """One column of a comparison: a design, its run and its checks."""

    label: str
    file: str
    overrides: tuple[str, ...]
    design: Design
    result: Any  # simkit.pipeline.RunResult
    checks: Any = None  # simkit.checks.CheckReport, when checked
    check_error: str = ""

    @property
    def figures(self) -> dict[str, float]:
        return dict(self.result.metrics)

    @property
    def verdicts(self) -> dict[str, Any] | None:
        """Verdict counts and the overall result, as ``check --json``'s summary gives them (None unchecked)."""
        if self.checks is None:
            return None
        s = self.checks.summary()
        return {"pass": s["pass"], "marginal": s["marginal"], "fail": s["fail"], "result": s["result"]}


@dataclass
class Comparison:
    """Designs side by side: ``entries`` in order, the first is the reference."""

    entries: list[Compared]
    checked: bool = True

    @property
    def figure_names(self) -> list[str]:
        """Every figure any design has: the figures table's order, then any others by name."""
        seen: set[str] = set()
        for e in self.entries:
            seen.update(e.result.metrics)
        return [k for k in FIGURES if k in seen] + sorted(seen - set(FIGURES))

    def differences(self) -> dict[str, list[float | None]]:
        """Per figure, each design's value minus the first design's (None where either has none)."""
        ref = self.entries[0].result.metrics
        out: dict[str, list[float | None]] = {}
        for k in self.figure_names:
            row: list[float | None] = []
            for e in self.entries:
                a, b = ref.get(k), e.result.metrics.get(k)
                ok = isinstance(a, (int, float)) and isinstance(b, (int, float)) and math.isfinite(a) and \
                    math.isfinite(b)
                row.append(float(b - a) if ok else None)  # type: ignore[operator]
            out[k] = row
        return out

    def to_json(self) -> dict[str, Any]:
        """``simkit compare --json``: the designs with their figures, and the differences from the first."""
        return {
            "simkit": __version__,
            "designs": [{"file": e.file, "label": e.label, "title": e.design.title, "set": list(e.overrides),
                         "figures": {k: _finite(v) for k, v in e.result.metrics.items()},
                         "verdicts": e.verdicts, "warnings": list(e.result.warnings)}
                        for e in self.entries],
            "differences": self.differences(),
        }


def _finite(v: Any) -> Any:
    return v if not isinstance(v, float) or math.isfinite(v) else None


def variant_overrides(text: str) -> tuple[str, ...]:
    """One ``--variant``: ``PATH=VALUE``, several joined by ``;`` (``filter.0.c=100u; load.r=4k``)."""
    items = tuple(s.strip() for s in text.split(";") if s.strip())
    if not items or any("=" not in s for s in items):
        raise UsageError(f"--variant {text!r}: expected PATH=VALUE, several joined by ';' "
                         "(e.g. \"filter.0.c=100u; load.r=4k\")")
    return items


def columns(files: Sequence[str], overrides: Sequence[str], variants: Sequence[str]) -> list[tuple[str, str,
                                                                                                   tuple[str, ...]]]:
    """(label, file, overrides) of every column: each file, or one file and each ``--variant`` of it."""
    if not files:
        raise UsageError("give the design files to compare (or one design and --variant)")
    if variants and len(files) != 1:
        raise UsageError("--variant compares variants of one design: give exactly one design file with it")
    if not variants and len(files) < 2:
        raise UsageError("compare needs two designs or more, or one design and --variant PATH=VALUE")
    base = tuple(overrides)
    if variants:
        f = files[0]
        name = Path(f).name
        cols = [(name, f, base)]
        for v in variants:
            extra = variant_overrides(v)
            cols.append((f"{name} with {'; '.join(extra)}", f, (*base, *extra)))
        return cols
    names = [Path(f).name for f in files]
    labels = [str(f) if names.count(n) > 1 else n for f, n in zip(files, names, strict=True)]
    return [(label, f, base) for label, f in zip(labels, files, strict=True)]


def compare_files(files: Sequence[str], overrides: Sequence[str] = (), variants: Sequence[str] = (),
                  check: bool = True, echo: Callable[[str], None] | None = None) -> Comparison:
    """Load every column first (a bad file stops everything before any simulation), then run each."""
    cols = columns(files, overrides, variants)
    loaded = [(label, file, ov, load_design(file, ov)) for label, file, ov in cols]
    return run_columns(loaded, check, echo)


def compare_designs(designs: Sequence[Any], labels: Sequence[str] | None = None, check: bool = True) -> Comparison:
    """The API's entry: designs from :func:`simkit.load` (objects with ``model``, ``origin`` and ``overrides``)."""
    if len(designs) < 2:
        raise UsageError("compare needs two designs or more")
    if labels is not None and len(labels) != len(designs):
        raise UsageError(f"labels: {len(labels)} given for {len(designs)} designs")
    auto = [Path(d.origin).name + (f" with {'; '.join(d.overrides)}" if d.overrides else "") for d in designs]
    chosen = list(labels) if labels is not None else auto
    return run_columns([(lab, d.origin, tuple(d.overrides), d.model) for lab, d in zip(chosen, designs, strict=True)],
                       check)


def run_columns(loaded: Sequence[tuple[str, str, tuple[str, ...], Design]], check: bool,
                echo: Callable[[str], None] | None = None) -> Comparison:
    from simkit.pipeline import simulate

    entries: list[Compared] = []
    for k, (label, file, ov, design) in enumerate(loaded, 1):
        if echo is not None:
            echo(f"simkit: [{k}/{len(loaded)}] simulating {label}")
        result = simulate(design)
        entry = Compared(label, file, ov, design, result)
        if check:
            from simkit.checks import run_checks

            entry.checks, entry.check_error = run_checks(design)
        entries.append(entry)
    return Comparison(entries, checked=check)
