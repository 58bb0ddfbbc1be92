"""``--vary PATH=SPEC`` parsing and the points of a sweep (grid or paired), each a design or an error.

A SPEC is a list (``22u,47u,100u``), a linear range ``START:STOP:COUNT``, a logarithmic one
``START:STOP:COUNTlog``, or the stock values of an E series between two values,
``E12:22u:470u`` (IEC 60063; :mod:`simkit.stock`).  List items are taken as ``--set`` takes a value (TOML when valid,
text otherwise), so a list may hold part names or topologies as well as numbers; range ends are
engineering numbers and the steps are SI floats.

Points are made by :func:`simkit.design.loader.apply_overrides` on the raw TOML dictionary and
:func:`simkit.design.loader.design_from_dict`, exactly as ``simkit run --set`` would: a value that
makes no sense (a negative capacitance in a range) gives an error row, while a PATH that does not
exist in the design file is bad input (exit 2) before anything runs.

Example
-------
>>> parse_spec("10u:1m:5log").values
(1e-05, 3.1622776601683795e-05, 0.0001, 0.00031622776601683794, 0.001)
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from simkit import stock
from simkit.design.files import override_value
from simkit.design.loader import apply_overrides, design_from_dict
from simkit.design.model import Design
from simkit.errors import DesignError, UsageError
from simkit.units import UnitError, parse_value

#: A sweep larger than this is almost certainly a typing mistake (and would take days).
MAX_POINTS = 100_000
#: Units tried, in order, to show a list item as an SI number in result files.
_UNITS_TRIED = ("", "F", "H", "ohm", "V", "A", "Hz", "s")
_RANGE_COUNT = re.compile(r"^\s*([0-9]+)\s*(log)?\s*$", re.IGNORECASE)
_PATH = re.compile(r"^[A-Za-z0-9_]+(\.[A-Za-z0-9_]+)*$")
_STOCK = re.compile(r"^\s*[Ee](3|6|12|24)\s*:", re.ASCII)

Value = float | int | str | bool


@dataclass(frozen=True)
class VarySpec:
    """One ``--vary PATH=SPEC``: the dotted PATH and the values it takes, in order."""

    path: str
    text: str  # the SPEC as given, for messages and the sweep's identity
    kind: str  # "list" | "linear" | "log"
    values: tuple[Value, ...]  # what goes into the design (floats for ranges, as --set reads list items)

    @property
    def log(self) -> bool:
        return self.kind == "log"


@dataclass(frozen=True)
class Point:
    """One point of a sweep: its number, the varied values and either a design or why not."""

    index: int
    values: dict[str, Value]  # PATH -> value as put into the design
    design: Design | None
    error: str | None = None


def parse_vary(item: str) -> VarySpec:
    """Parse one ``PATH=SPEC`` option value (exit 2 on any mistake)."""
    if "=" not in item:
        raise UsageError(f"--vary {item!r}: expected PATH=SPEC, e.g. filter.0.c=22u,47u,100u or "
                         "filter.0.c=10u:1m:9log")
    path, _, spec = item.partition("=")
    path = path.strip()
    if not path or not _PATH.match(path):
        raise UsageError(f"--vary {item!r}: PATH must be a dotted key such as filter.0.c or load.r")
    try:
        return parse_spec(spec, path)
    except UsageError as exc:
        raise UsageError(f"--vary {path}: {exc}") from None


def parse_spec(spec: str, path: str = "") -> VarySpec:
    """Parse a SPEC: a list ``a,b,c`` or a range ``START:STOP:COUNT[log]``."""
    text = spec.strip()
    if not text:
        raise UsageError("empty SPEC; give a list (22u,47u) or a range (10u:1m:9log)")
    if _STOCK.match(text):
        return _parse_stock(text, path)
    if ":" in text:
        return _parse_range(text, path)
    items = [s.strip() for s in text.split(",")]
    if any(not s for s in items):
        raise UsageError(f"{spec!r}: empty item in the list")
    values = tuple(_list_value(s) for s in items)
    bad = next((s for s, v in zip(items, values, strict=True) if isinstance(v, float) and not math.isfinite(v)), None)
    if bad is not None:  # nan and inf are TOML numbers, but no design value (and no JSON row) can hold them
        raise UsageError(f"{bad!r} is not a finite number")
    return VarySpec(path, text, "list", values)


def _parse_range(text: str, path: str) -> VarySpec:
    parts = text.split(":")
    if len(parts) != 3:
        raise UsageError(f"{text!r}: a range is START:STOP:COUNT, or START:STOP:COUNTlog for log steps")
    try:
        start = parse_number(parts[0])
        stop = parse_number(parts[1])
    except UnitError as exc:
        raise UsageError(f"{text!r}: {exc}") from None
    m = _RANGE_COUNT.match(parts[2])
    if not m:
        raise UsageError(f"{text!r}: COUNT must be a whole number, with 'log' after it for log steps "
                         "(e.g. 9 or 9log)")
    count = int(m.group(1))
    log = m.group(2) is not None
    if count < 1:
        raise UsageError(f"{text!r}: COUNT must be at least 1")
    if count > MAX_POINTS:
        raise UsageError(f"{text!r}: {count} steps is more than simkit sweeps ({MAX_POINTS})")
    if log:
        if not (start > 0 and stop > 0) and not (start < 0 and stop < 0):
            raise UsageError(f"{text!r}: log steps need START and STOP of the same sign, neither zero")
        values = log_steps(start, stop, count)
    else:
        values = linear_steps(start, stop, count)
    return VarySpec(path, text, "log" if log else "linear", tuple(values))


def _parse_stock(text: str, path: str) -> VarySpec:
    """``E12:22u:470u``: every value of an E series (IEC 60063) from START to STOP."""
    parts = text.split(":")
    if len(parts) != 3:
        raise UsageError(f"{text!r}: a stock range is SERIES:START:STOP, e.g. E12:22u:470u")
    name = parts[0].strip().upper()
    try:
        start = parse_number(parts[1])
        stop = parse_number(parts[2])
    except UnitError as exc:
        raise UsageError(f"{text!r}: {exc}") from None
    if not (start > 0 and stop > 0):
        raise UsageError(f"{text!r}: a stock range needs positive START and STOP")
    values = stock.between(start, stop, name)
    if not values:
        raise UsageError(f"{text!r}: no {name} value lies between {parts[1].strip()} and {parts[2].strip()}")
    if len(values) > MAX_POINTS:  # pragma: no cover - would need a range of thousands of decades
        raise UsageError(f"{text!r}: {len(values)} values is more than simkit sweeps ({MAX_POINTS})")
    # E-series values stand about equal ratios apart: plotted and described as a log range.
    return VarySpec(path, text, "log", tuple(values))


def linear_steps(start: float, stop: float, count: int) -> list[float]:
    """``count`` equal steps from start to stop, both ends exact."""
    if count == 1:
        return [start]
    n = count - 1
    # start + k*(stop-start)/n drifts at the far end; the weighted form hits both ends exactly.
    return [start if k == 0 else stop if k == n else (start * (n - k) + stop * k) / n for k in range(count)]


def log_steps(start: float, stop: float, count: int) -> list[float]:
    """``count`` steps of equal ratio from start to stop, both ends exact.

    Each value is computed from the logarithms of the ends (never by repeated multiplication),
    so the ratio of neighbours is the same to rounding and a decade point such as 100u in
    ``10u:1m:5log`` comes out as the float nearest 1e-4.
    """
    if count == 1:
        return [start]
    sign = -1.0 if start < 0 else 1.0
    a, b = math.log10(abs(start)), math.log10(abs(stop))
    n = count - 1
    out = []
    for k in range(count):
        if k == 0:
            out.append(start)
        elif k == n:
            out.append(stop)
        else:
            out.append(sign * 10.0 ** ((a * (n - k) + b * k) / n))
    return out


def _list_value(text: str) -> Value:
    """A list item read as ``--set`` reads a value: TOML when it is valid TOML, else text."""
    v = override_value(text)
    return v if isinstance(v, (str, int, float, bool)) else text


def override_text(value: Value) -> str:
    """The ``--set`` spelling of a value: floats in full precision (read back exactly)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, int):
        return str(value)
    return value


def parse_number(text: str) -> float:
    """An engineering number with or without its unit (``47u``, ``47uF``, ``4.7k``, ``4k7Ω``), SI float."""
    first: UnitError | None = None
    for unit in _UNITS_TRIED:
        try:
            return parse_value(text.strip(), unit)
        except UnitError as exc:
            first = first or exc
    assert first is not None
    raise first


def si_value(value: Value) -> Value:
    """A varied value as a result file shows it: an SI float when it is a number, else as given.

    >>> si_value("22u"), si_value(3), si_value("1N4007")
    (2.2e-05, 3, '1N4007')
    """
    if isinstance(value, bool) or isinstance(value, (int, float)):
        return value
    try:
        return parse_number(value)
    except UnitError:
        return value


# --- points ------------------------------------------------------------------------------------


def combine(specs: Sequence[VarySpec], paired: bool) -> list[dict[str, Value]]:
    """The value sets of every point: the grid of all specs, or (paired) the specs side by side."""
    if not specs:
        raise UsageError("give at least one --vary PATH=SPEC")
    paths = [s.path for s in specs]
    dup = sorted({p for p in paths if paths.count(p) > 1})
    if dup:
        raise UsageError(f"--vary {dup[0]} given twice; one --vary per PATH")
    if paired:
        lengths = {s.path: len(s.values) for s in specs}
        if len(set(lengths.values())) != 1:
            shown = ", ".join(f"{p} has {n}" for p, n in lengths.items())
            raise UsageError(f"--zip pairs the --vary values point by point, so they need the same count ({shown})")
        return [dict(zip(paths, vals, strict=True)) for vals in zip(*(s.values for s in specs), strict=True)]
    total = math.prod(len(s.values) for s in specs)
    if total > MAX_POINTS:
        raise UsageError(f"the grid has {total} points, more than simkit sweeps ({MAX_POINTS}); "
                         "use fewer steps or --zip")
    return [dict(zip(paths, vals, strict=True)) for vals in itertools.product(*(s.values for s in specs))]


def build_points(data: Mapping[str, Any], origin: str, specs: Sequence[VarySpec],
                 value_sets: Sequence[dict[str, Value]]) -> list[Point]:
    """Design (or error) of every point.  Exit 2 when a PATH itself is wrong.

    Parameters
    ----------
    data : mapping
        The design file's raw TOML dictionary, ``--set`` overrides already applied.
    origin : str
        The design file's name, for messages.
    specs : sequence of VarySpec
        The ``--vary`` options (their paths are checked here).
    value_sets : sequence of dict
        What :func:`combine` returned.
    """
    for spec in specs:
        _check_path(data, origin, spec)
    points: list[Point] = []
    for i, values in enumerate(value_sets):
        overrides = [f"{p}={override_text(v)}" for p, v in values.items()]
        try:
            tree = apply_overrides(dict(data), overrides, origin)
            design = design_from_dict(tree, origin=origin)
        except DesignError as exc:
            bad = next((path for path in values if _names_path(exc, path)), None)
            if bad is not None:
                raise UsageError(f"--vary {bad}: {exc.key}: {exc.problem}") from None
            points.append(Point(i, values, None, str(exc)))
            continue
        points.append(Point(i, values, design))
    if points and all(p.design is None for p in points):
        raise UsageError(f"no point of the sweep is a valid design; the first: {points[0].error}")
    return points


def _check_path(data: Mapping[str, Any], origin: str, spec: VarySpec) -> None:
    """A PATH must lead through the design file's tables and lists to a key the file may hold."""
    probe = f"{spec.path}={override_text(spec.values[0])}"
    try:
        tree = apply_overrides(dict(data), [probe], origin)
    except DesignError as exc:
        problem = re.sub(r"^--set [^:]*: ", "", exc.problem)
        raise UsageError(f"--vary {spec.path}: {problem}") from None
    try:
        design_from_dict(tree, origin=origin)
    except DesignError as exc:
        if _names_path(exc, spec.path):
            raise UsageError(f"--vary {spec.path}: {exc.key}: {exc.problem}") from None
        # Any other complaint may be about this value only: the point becomes an error row.


def _names_path(exc: DesignError, path: str) -> bool:
    """Whether the loader refused a key that the PATH itself names (or leads through)."""
    key = exc.key or ""
    return exc.problem.startswith("unknown key") and bool(key) and (path == key or path.startswith(key + "."))
