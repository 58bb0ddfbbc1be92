"""``simkit size``: the value of one parameter that meets a target figure, by bracketed root finding.

The figure, minus the target, is a function of the parameter that changes sign between the two
ends of ``LOW:HIGH``; Brent's method (:func:`scipy.optimize.brentq`) finds where it crosses zero,
one simulation per step.  When the range spans a decade or more the search runs on the logarithm
of the value, where figures such as ripple against capacitance are close to straight lines and
Brent needs fewer steps.  The search stops as soon as a simulated value meets the target within
``ftol`` (0.5 % of the target by default) or the bracket is narrower than ``rtol`` of the value.

For ``FIGURE<=VALUE`` and ``FIGURE>=VALUE`` the answer is the simulated value closest to the
boundary that meets the target (on the safe side); for ``FIGURE=VALUE`` the one closest to it.
"""

from __future__ import annotations

import math
import re
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TextIO

from simkit.design.loader import apply_overrides, design_from_dict, read_toml
from simkit.errors import DesignError, UsageError
from simkit.figures import FIGURES
from simkit.sweep.plot import unit_of_path
from simkit.sweep.specs import override_text, parse_number
from simkit.units import UNIT_SYMBOLS, UnitError, eng, parse_value

_TARGET = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(<=|>=|==|=)\s*(\S.*?)\s*$")
_PATH = re.compile(r"^[A-Za-z0-9_]+(\.[A-Za-z0-9_]+)*$")


class _Close(Exception):
    """Raised inside the root finder when a simulated value already meets the target closely."""


@dataclass(frozen=True)
class Target:
    """``FIGURE<=VALUE``, ``FIGURE>=VALUE`` or ``FIGURE=VALUE``."""

    figure: str
    op: str  # "<=", ">=", "="
    value: float  # SI

    def met(self, y: float, ftol: float) -> bool:
        if self.op == "<=":
            return y <= self.value
        if self.op == ">=":
            return y >= self.value
        return abs(y - self.value) <= ftol * abs(self.value)

    def text(self, unit: str = "") -> str:
        return f"{self.figure} {self.op} {eng(self.value, unit)}"


@dataclass
class SizeResult:
    design: str
    path: str
    low: float
    high: float
    target: Target
    value: float  # the answer, SI
    figure: float  # the figure the answer gives
    met: bool
    log_scale: bool
    evaluations: list[tuple[float, float]] = field(default_factory=list)  # (value, figure), in order
    stock: StockAnswer | None = None  # with --stock: the stock value to buy and its neighbour

    @property
    def simulations(self) -> int:
        return len(self.evaluations) + (self.stock.simulations if self.stock is not None else 0)

    def to_json(self) -> dict[str, Any]:
        from simkit import __version__

        return {"simkit": __version__, "design": self.design, "vary": self.path, "low": self.low,
                "high": self.high, "target": {"figure": self.target.figure, "op": self.target.op,
                                              "value": self.target.value},
                "value": self.value, "figure": self.figure, "met": self.met, "log_scale": self.log_scale,
                "simulations": self.simulations,
                "evaluations": [{"value": x, "figure": y} for x, y in self.evaluations],
                **({"stock": self.stock.to_json()} if self.stock is not None else {})}


@dataclass
class StockAnswer:
    """``size --stock``: the stock value that meets the target, and the neighbour on the other side that misses it."""

    series: str
    value: float
    figure: float
    met: bool
    neighbour: float | None
    neighbour_figure: float | None
    neighbour_met: bool | None
    simulations: int

    def to_json(self) -> dict[str, Any]:
        return {"series": self.series, "value": self.value, "figure": self.figure, "met": self.met,
                "neighbour": None if self.neighbour is None else {
                    "value": self.neighbour, "figure": self.neighbour_figure, "met": self.neighbour_met}}


def parse_target(text: str) -> Target:
    """Parse ``--target "ripple_pp_v<=2"`` (exit 2 on a mistake)."""
    m = _TARGET.match(text)
    if not m:
        raise UsageError(f"--target {text!r}: expected FIGURE<=VALUE, FIGURE>=VALUE or FIGURE=VALUE, "
                         "e.g. \"ripple_pp_v<=2\"")
    figure, op, raw = m.group(1), m.group(2), m.group(3)
    if figure not in FIGURES:
        raise UsageError(f"--target {text!r}: {figure!r} is not a figure; choose from {', '.join(FIGURES)}")
    unit = FIGURES[figure].unit
    try:
        value = parse_value(raw, unit if unit in UNIT_SYMBOLS else "")
    except UnitError as exc:
        raise UsageError(f"--target {text!r}: {exc}") from None
    return Target(figure, "=" if op == "==" else op, value)


def parse_bracket(item: str) -> tuple[str, float, float]:
    """Parse ``--vary PATH=LOW:HIGH`` (exit 2 on a mistake)."""
    if "=" not in item:
        raise UsageError(f"--vary {item!r}: expected PATH=LOW:HIGH, e.g. filter.0.c=10u:1m")
    path, _, spec = item.partition("=")
    path = path.strip()
    if not _PATH.match(path):
        raise UsageError(f"--vary {item!r}: PATH must be a dotted key such as filter.0.c")
    parts = spec.split(":")
    if len(parts) != 2:
        raise UsageError(f"--vary {path}: size searches a range LOW:HIGH (two values), got {spec!r}")
    try:
        low, high = (parse_number(p) for p in parts)
    except UnitError as exc:
        raise UsageError(f"--vary {path}: {exc}") from None
    if low == high:
        raise UsageError(f"--vary {path}: LOW and HIGH are the same; give a range to search")
    return path, min(low, high), max(low, high)


def run_size(design_file: str | Path, vary: str, target_text: str, overrides: Sequence[str] = (),
             ftol: float = 0.005, rtol: float = 1e-3, max_simulations: int = 40,
             simulate_fn: Callable[[Any], dict[str, float]] | None = None,
             stream: TextIO | None = None, stock_series: str | None = None) -> SizeResult:
    """Find the value of one design parameter that meets a target figure.

    Parameters
    ----------
    design_file : str or Path
        The TOML design file.
    vary : str
        ``PATH=LOW:HIGH``, the parameter and the range to search (SI numbers, prefixes allowed).
    target_text : str
        ``FIGURE<=VALUE``, ``FIGURE>=VALUE`` or ``FIGURE=VALUE``.
    overrides : sequence of str
        ``--set PATH=VALUE`` applied first.
    ftol : float
        Stop when a simulated figure meets the target within this fraction of it.
    rtol : float
        Stop when the bracket is narrower than this fraction of the value.
    max_simulations : int
        Give up (exit 3) after this many simulations.
    simulate_fn : callable, optional
        Design -> figures (default: simulate with this process's engine).
    stream : file, optional
        Where each step is reported (default stderr).
    stock_series : str, optional
        ``"E12"``, ``"E24"``, ``"E6"`` or ``"E3"``: also answer with the stock value of that series
        (IEC 60063) that meets the target, and its neighbour that misses it.

    Example
    -------
    ``run_size("psu.toml", "filter.0.c=10u:1m", "ripple_pp_v<=2")`` finds the smallest reservoir
    (within the tolerances) whose ripple is at most 2 V.
    """
    from scipy.optimize import brentq

    from simkit.errors import SimulationError

    out = stream if stream is not None else sys.stderr
    path, low, high = parse_bracket(vary)
    target = parse_target(target_text)
    origin = str(design_file)
    data = apply_overrides(read_toml(design_file), overrides, origin)
    base = design_from_dict(data, origin=origin)
    if simulate_fn is None:
        simulate_fn = _simulate_metrics
    log = low > 0 and high / low >= 10.0
    evaluations: list[tuple[float, float]] = []
    unit = FIGURES[target.figure].unit
    xunit = unit_of_path(path)
    scale = max(abs(target.value), 1e-12)

    def figure_at(x: float) -> float:
        if len(evaluations) >= max_simulations:
            raise SimulationError(f"size: no answer after {max_simulations} simulations",
                                  hint="narrow the range, or loosen the target")
        try:
            tree = apply_overrides(data, [f"{path}={override_text(float(x))}"], origin)
            design = design_from_dict(tree, origin=origin)
        except DesignError as exc:
            raise UsageError(f"--vary {path}={eng(x, xunit)}: {exc}") from None
        y = simulate_fn(design)[target.figure]
        if y is None or not math.isfinite(y):
            raise SimulationError(f"size: {target.figure} is not a number at {path} = {eng(x, xunit)}")
        evaluations.append((float(x), float(y)))
        print(f"simkit: size: {path} = {eng(x, xunit)} gives {target.figure} = {eng(y, unit)}", file=out)
        return float(y)

    cache: dict[float, float] = {}
    log_figure = False  # search on log(figure) too, once both ends are known positive (ripple ~ 1/C)

    def g(u: float) -> float:
        if u not in cache:
            cache[u] = figure_at((low if u == u_lo else high if u == u_hi else 10.0 ** u) if log else u)
        y = cache[u]
        if abs(y - target.value) <= ftol * scale and (target.op == "=" or target.met(y, ftol)):
            raise _Close
        if log_figure:
            return math.log(max(y, 1e-300)) - math.log(target.value)
        return y - target.value

    u_lo, u_hi = (math.log10(low), math.log10(high)) if log else (low, high)
    try:
        g_lo = g(u_lo)
        g_hi = g(u_hi)
        if g_lo * g_hi > 0:
            y_lo, y_hi = evaluations[0][1], evaluations[1][1]
            where = "met across" if target.met(y_lo, ftol) and target.met(y_hi, ftol) else "not met anywhere in"
            raise UsageError(
                f"size: {target.figure} is {eng(y_lo, unit)} at {path} = {eng(low, xunit)} and {eng(y_hi, unit)} "
                f"at {eng(high, xunit)}: the target {target.text(unit)} is {where} this range, so there is no "
                "boundary to find; give a range whose ends fall on either side of the target"
            )
        log_figure = target.value > 0 and cache[u_lo] > 0 and cache[u_hi] > 0
        xtol = math.log10(1.0 + rtol) if log else rtol * max(abs(low), abs(high))
        brentq(g, u_lo, u_hi, xtol=xtol, rtol=4 * sys.float_info.epsilon, maxiter=max_simulations)
    except _Close:
        pass
    meeting = [(x, y) for x, y in evaluations if target.met(y, ftol)]
    pool = meeting or evaluations
    best_x, best_y = min(pool, key=lambda e: abs(e[1] - target.value))
    result = SizeResult(base.title, path, low, high, target, best_x, best_y, bool(meeting), log, evaluations)
    if stock_series is not None:
        # The high end meets: larger values meet.  When the low end already met the target closely, the
        # search never simulated the high end: that one more simulation says which way the stock value lies.
        y_high = cache[u_hi] if u_hi in cache else figure_at(high)
        up = target.met(y_high, ftol)
        result.stock = _stock_answer(stock_series, best_x, up, target, ftol, figure_at)
    return result


def _stock_answer(name: str, x: float, up: bool, target: Target, ftol: float,
                  figure_at: Callable[[float], float]) -> StockAnswer:
    """The stock value on the meeting side of ``x`` (stepping further if it misses), and its neighbour."""
    from simkit import stock

    if x <= 0:
        raise UsageError(f"--stock {name}: the answer {x:g} is not positive, so no stock value holds it")
    sims = 0
    if target.op == "=":  # the nearer of the two neighbours
        lo, hi = stock.neighbours(x, name)
        y_lo, y_hi = figure_at(lo), figure_at(hi) if hi != lo else None
        sims += 1 if y_hi is None else 2
        if y_hi is None or abs(y_lo - target.value) <= abs(y_hi - target.value):
            return StockAnswer(name, lo, y_lo, target.met(y_lo, ftol), hi if y_hi is not None else None, y_hi,
                               None if y_hi is None else target.met(y_hi, ftol), sims)
        return StockAnswer(name, hi, y_hi, target.met(y_hi, ftol), lo, y_lo, target.met(y_lo, ftol), sims)
    step = stock.at_least if up else stock.at_most
    value = step(x, name)
    y = figure_at(value)
    sims += 1
    for _ in range(3):  # the boundary value misses by rounding: one stock step further
        if target.met(y, ftol):
            break
        value = step(value * (1.0001 if up else 0.9999), name)
        y = figure_at(value)
        sims += 1
    other = (stock.at_most if up else stock.at_least)(value * (0.9999 if up else 1.0001), name)
    y_other = figure_at(other)
    sims += 1
    return StockAnswer(name, value, y, target.met(y, ftol), other, y_other, target.met(y_other, ftol), sims)


def _simulate_metrics(design: Any) -> dict[str, float]:
    from simkit.pipeline import simulate

    return dict(simulate(design).metrics)


def summary_text(result: SizeResult) -> str:
    unit = FIGURES[result.target.figure].unit
    xunit = unit_of_path(result.path)
    verdict = "meets" if result.met else "does NOT meet"
    scale = "logarithmic" if result.log_scale else "linear"
    text = (f"{result.path} = {eng(result.value, xunit)} gives {result.target.figure} = {eng(result.figure, unit)}, "
            f"which {verdict} {result.target.text(unit)}\n")
    st = result.stock
    if st is not None:
        word = "meets" if st.met else "does NOT meet"
        text += (f"  stock ({st.series}): {result.path} = {eng(st.value, xunit)} gives {eng(st.figure, unit)}, which "
                 f"{word} the target\n")
        if st.neighbour is not None and st.neighbour_figure is not None:
            word = "meets it too" if st.neighbour_met else "misses it"
            text += (f"  its neighbour {eng(st.neighbour, xunit)} gives {eng(st.neighbour_figure, unit)}, which "
                     f"{word}\n")
    return text + (f"  found in {result.simulations} simulations ({scale} search of {eng(result.low, xunit)} to "
                   f"{eng(result.high, xunit)})\n")
