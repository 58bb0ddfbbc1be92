"""Time functions that drive a circuit after switch-on: keying, Morse, heater warm-up, load steps.

A :class:`Drive` is a piecewise-linear function of absolute time since switch-on, optionally
repeating.  It is rendered into an ngspice ``PWL`` source for any window of a run, so a run
restarted at a later time (a later chunk) continues the same function exactly.

Morse timing follows ITU-R M.1677-1 (International Morse code), section 2: a dash is three
dots; the space between the signals of one character is one dot, between characters three
dots, between words seven dots.  The speed in words per minute uses the standard word
"PARIS" of 50 dot units, so one dot lasts 1.2/wpm seconds.
"""

from __future__ import annotations

import bisect
import itertools
import math
from dataclasses import dataclass

from simkit.units import spice

#: ITU-R M.1677-1, Part I, section 1: letters, figures and the punctuation the recommendation lists.
MORSE: dict[str, str] = {
    "A": ".-", "B": "-...", "C": "-.-.", "D": "-..", "E": ".", "F": "..-.", "G": "--.", "H": "....",
    "I": "..", "J": ".---", "K": "-.-", "L": ".-..", "M": "--", "N": "-.", "O": "---", "P": ".--.",
    "Q": "--.-", "R": ".-.", "S": "...", "T": "-", "U": "..-", "V": "...-", "W": ".--", "X": "-..-",
    "Y": "-.--", "Z": "--..",
    "1": ".----", "2": "..---", "3": "...--", "4": "....-", "5": ".....", "6": "-....", "7": "--...",
    "8": "---..", "9": "----.", "0": "-----",
    ".": ".-.-.-", ",": "--..--", ":": "---...", "?": "..--..", "'": ".----.", "-": "-....-",
    "/": "-..-.", "(": "-.--.", ")": "-.--.-", '"': ".-..-.", "=": "-...-", "+": ".-.-.", "@": ".--.-.",
}


def morse_problem(text: str) -> str | None:
    """Why a text cannot be sent (None when it can)."""
    if not text.strip():
        return "the Morse text is empty"
    if len(text) > 500:
        return f"the Morse text is {len(text)} characters long; keep it under 500"
    bad = sorted({c for c in text.upper() if c != " " and c not in MORSE})
    if bad:
        shown = ", ".join(repr(c) for c in bad[:5])
        return f"no Morse code for {shown} (ITU-R M.1677-1 letters, figures and . , : ? ' - / ( ) \" = + @)"
    return None


def morse_elements(text: str) -> tuple[list[tuple[int, int]], int]:
    """Key-down elements of a text in dot units, and the length of one repetition.

    Returns ``([(start, length), ...], cycle)``: each element starts ``start`` units after the
    beginning and lasts ``length`` units (1 for a dot, 3 for a dash).  The cycle ends with a
    word space (7 units) so that repetitions are separate words.
    """
    words = text.upper().split()
    t = 0
    out: list[tuple[int, int]] = []
    for wi, word in enumerate(words):
        if wi:
            t += 7 - 1  # a word space: seven units after the last element
        for ci, ch in enumerate(word):
            if ci:
                t += 3 - 1  # a character space replaces the element space already added
            code = MORSE[ch]
            for ei, sym in enumerate(code):
                if ei:
                    t += 1
                length = 1 if sym == "." else 3
                out.append((t, length))
                t += length
            t += 1  # element space; corrected above at character and word boundaries
    # After the last element: a word space before the text repeats.
    cycle = t - 1 + 7
    return out, cycle


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


def rate_keying(rate: float, duty: float, rise: float, fall: float) -> Drive:
    """Key down for ``duty`` of every 1/rate seconds, starting at the beginning of each cycle."""
    cycle = 1.0 / rate
    return keying_drive([(0.0, duty * cycle)], cycle, rise, fall)


def morse_keying(text: str, wpm: float, rise: float, fall: float) -> Drive:
    """Key a text at a speed (ITU-R M.1677-1 timing, PARIS: one dot = 1.2/wpm s)."""
    unit = 1.2 / wpm
    elements, cycle = morse_elements(text)
    return keying_drive([(s * unit, n * unit) for s, n in elements], cycle * unit, rise, fall)


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
