"""Time functions that drive a circuit after switch-on: keying, heater warm-up, load steps.

A :class:`Drive` is a piecewise-linear function of absolute time since switch-on, optionally
repeating.  It is rendered into an ngspice ``PWL`` source for any window of a run, so a run
restarted at a later time (a later chunk) continues the same function exactly.  When the key is
down comes from the design (:meth:`simkit.design.loads.KeyedLoad.elements`: rate keying or
Morse timing).
"""

from __future__ import annotations

import bisect
import itertools
import math
from dataclasses import dataclass

from simkit.units import spice


@dataclass(frozen=True)
class Drive:
    """A piecewise-linear function of time since switch-on.

    ``points`` are (t, y) with t rising from 0; before the first point y is the first value,
    after the last the last value.  With ``period`` the points describe one period
    [0, period) and the function repeats.
    """

    points: tuple[tuple[float, float], ...]
    period: float | None = None

    def value(self, t: float) -> float:
        if self.period:
            t = t % self.period
        ts = [p[0] for p in self.points]
        k = bisect.bisect_right(ts, t)
        if k == 0:
            return self.points[0][1]
        if k >= len(self.points):
            return self.points[-1][1]
        (t0, y0), (t1, y1) = self.points[k - 1], self.points[k]
        return y0 if t1 == t0 else y0 + (y1 - y0) * (t - t0) / (t1 - t0)

    def breakpoints(self, start: float, stop: float) -> list[tuple[float, float]]:
        """(t, y) over [start, stop] in absolute time, the ends included."""
        pts: list[tuple[float, float]] = [(start, self.value(start))]
        if self.period:
            first = math.floor(start / self.period)
            last = math.ceil(stop / self.period)
            for k in range(first, last + 1):
                base = k * self.period
                for t, y in self.points:
                    ta = base + t
                    if start < ta < stop:
                        pts.append((ta, y))
        else:
            pts += [(t, y) for t, y in self.points if start < t < stop]
        pts.append((stop, self.value(stop)))
        pts.sort(key=lambda p: p[0])
        # Drop points closer than a picosecond (PWL needs rising times).
        out = [pts[0]]
        for t, y in pts[1:]:
            if t - out[-1][0] > 1e-12:
                out.append((t, y))
        return out

    def pwl(self, offset: float, span: float) -> str:
        """``PWL(...)`` text for a run that starts at absolute time ``offset`` and lasts ``span``."""
        pts = self.breakpoints(offset, offset + span)
        body = " ".join(f"{spice(t - offset, 9)} {spice(y, 9)}" for t, y in pts)
        return f"PWL({body})"

    def intervals(self, start: float, stop: float, level: float = 0.5) -> list[tuple[float, float]]:
        """Spans of [start, stop] where the drive is at or above ``level`` (key-down times)."""
        pts = self.breakpoints(start, stop)
        out: list[tuple[float, float]] = []
        on_at: float | None = start if pts[0][1] >= level else None
        for (t0, y0), (t1, y1) in itertools.pairwise(pts):
            if (y0 < level) != (y1 < level):
                tc = t0 + (level - y0) * (t1 - t0) / (y1 - y0) if y1 != y0 else t1
                if y1 >= level:
                    on_at = tc
                elif on_at is not None:
                    out.append((on_at, tc))
                    on_at = None
        if on_at is not None:
            out.append((on_at, stop))
        return out


def keying_drive(elements: list[tuple[float, float]], cycle: float, rise: float, fall: float) -> Drive:
    """0 (key up) .. 1 (key down), with linear rise and fall, repeating every ``cycle`` seconds.

    Edges take at least a microsecond so that the PWL times keep rising.
    """
    rise, fall = max(rise, 1e-6), max(fall, 1e-6)
    pts: list[tuple[float, float]] = [(0.0, 0.0)]
    for start, length in elements:
        pts += [(start, 0.0), (start + rise, 1.0), (start + length, 1.0), (start + length + fall, 0.0)]
    pts.append((cycle, 0.0))
    pts.sort(key=lambda p: p[0])
    return Drive(tuple(pts), period=cycle)


def ramp(start: float, full: float) -> Drive:
    """0 until ``start``, rising linearly to 1 at ``full`` (heater warm-up)."""
    if full <= start:
        return Drive(((start, 0.0), (start + 1e-6, 1.0)))
    return Drive(((start, 0.0), (full, 1.0)))


def steps_drive(steps: tuple[tuple[float, float], ...], edge: float) -> Drive:
    """A current that steps to each value at its time, each change taking ``edge`` seconds."""
    pts: list[tuple[float, float]] = [(0.0, steps[0][1] if steps[0][0] <= 0 else 0.0)]
    level = pts[0][1]
    for t, i in steps:
        if t <= 0:
            continue
        pts += [(t, level), (t + edge, i)]
        level = i
    return Drive(tuple(pts))


def step_under_way(delay: float, on: float, edge: float, period: float) -> float | None:
    """A square or three-level wave's step that a run starting at t = 0 finds under way.

    The repeating step rises at ``delay`` (0 <= delay < period), holds for ``on`` (edges included
    half) and falls over ``edge``.  When it wraps past the period's end, the run starts inside it:
    the time from t = 0 until its fall begins (how long the step under way still holds), else None.
    """
    rest = delay + on - period  # the fall starts at delay + on (edges included half: rise e, top on - e)
    return rest if rest > edge / 2 else None
