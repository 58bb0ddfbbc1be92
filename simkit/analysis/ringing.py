"""A rectifier diode's turn-off and the ringing after it, from its current and reverse voltage: pure numpy.

When a diode stops conducting, the inductance that fed it (the winding's leakage inductance)
rings with the capacitance across the diode (its junction capacitance, and any snubber) at
f = 1 / (2 pi sqrt(L C)), decaying with the resistance in the loop.  :func:`turn_offs` finds
the instants a diode stops conducting; :func:`measure_ring` takes the reverse voltage after
one of them apart:

1. from the expected ring frequency (the inductance and the capacitance that ring), a window
   of ``WINDOW_CYCLES`` ring periods after the turn-off is resampled onto a uniform grid;
2. the slow reverse voltage is taken out by a moving average over one ring period, which
   removes the ring and passes the slow part; what is left is the ring;
3. between successive zero crossings of the ring the largest excursion is a peak; the spacing
   of the peaks gives a better frequency, and steps 1-3 repeat until it agrees to 1 %;
4. the frequency is the number of half cycles over the time the peaks span, and the decay
   time the e-folding time of a straight-line fit of ln(peak) against time (a series R-L-C
   rings as exp(-t R / 2L) cos(2 pi f t): docs/sources.md hash-2).

A window with no excursion above ``min_amplitude`` has no ring (frequency and decay NaN).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

#: A conduction pulse is where the current is above this share of the diode's peak current.
ON_SHARE = 0.05
#: Peaks below this share of the ring's first peak are noise, not ring (they end the decay fit).
PEAK_FLOOR = 0.03
#: Uniform samples of a ring window at most (and at least).
MAX_SAMPLES = 1 << 20
MIN_SAMPLES = 1024
#: How many ring periods after the turn-off are looked at, and samples in each.
WINDOW_CYCLES = 30
SAMPLES_PER_CYCLE = 64


@dataclass(frozen=True)
class Ring:
    """The ringing after one turn-off."""

    turn_off_s: float  # s, when the diode stopped conducting
    frequency_hz: float  # NaN: no ring
    amplitude_v: float  # the ring's largest excursion about the slow reverse voltage, V (0: none)
    decay_s: float  # e-folding time of the ring's envelope, s (NaN: too few peaks; inf: not decaying)
    peaks: int  # peaks above PEAK_FLOOR of the first

    @property
    def rings(self) -> bool:
        return math.isfinite(self.frequency_hz)


def turn_offs(t: np.ndarray, i: np.ndarray, t0: float, t1: float) -> list[float]:
    """Instants in [t0, t1] at which a conduction pulse ends: the first time after each pulse that the
    current reaches zero (with stored charge it then reverses until the charge is gone)."""
    sel = (t >= t0) & (t <= t1)
    tt, ii = t[sel], i[sel]
    if len(tt) < 3:
        return []
    top = float(np.max(ii))
    if top <= 0:
        return []
    on = ii > ON_SHARE * top
    ends = np.flatnonzero(on[:-1] & ~on[1:])  # last "on" sample of each pulse
    out = []
    for k in ends:
        after = np.flatnonzero(ii[k:] <= 0.0)
        if len(after):
            j = k + int(after[0])
            # Interpolate the zero crossing between the last positive sample and this one.
            a, b = ii[j - 1], ii[j]
            frac = a / (a - b) if a != b and j > 0 else 0.0
            out.append(float(tt[j - 1] + frac * (tt[j] - tt[j - 1])) if j > 0 else float(tt[j]))
    return out


def _uniform(t: np.ndarray, v: np.ndarray, a: float, b: float, dt: float) -> tuple[np.ndarray, np.ndarray]:
    n = int(min(max((b - a) / dt, MIN_SAMPLES), MAX_SAMPLES))
    grid = a + (b - a) * np.arange(n) / (n - 1)
    return grid, np.interp(grid, t, v)


def _moving_average(y: np.ndarray, width: int) -> np.ndarray:
    """Centred moving average of ``width`` samples; only where the whole width fits (len(y) - width + 1 values)."""
    width = max(int(width), 1)
    c = np.concatenate([[0.0], np.cumsum(y)])
    return (c[width:] - c[:-width]) / width


def _ring_of(grid: np.ndarray, y: np.ndarray, f: float) -> tuple[np.ndarray, np.ndarray]:
    """The ring about the slow part: y less its moving average over one ring period (valid part only)."""
    dt = grid[1] - grid[0]
    width = max(round(1.0 / (f * dt)), 2)
    if width >= len(y):
        return grid[:0], y[:0]
    base = _moving_average(y, width)
    lo = width // 2
    return grid[lo:lo + len(base)], y[lo:lo + len(base)] - base


def _peaks(grid: np.ndarray, ring: np.ndarray) -> list[tuple[float, float]]:
    """(time, size) of the largest excursion between each pair of zero crossings (the ends are left out:
    an excursion cut by the window is not a whole half cycle)."""
    sign = np.signbit(ring)
    cross = np.flatnonzero(sign[:-1] != sign[1:]) + 1
    out = []
    for a, b in itertools.pairwise(cross):
        k = a + int(np.argmax(np.abs(ring[a:b])))
        out.append((float(grid[k]), float(abs(ring[k]))))
    return out


def measure_ring(t: np.ndarray, v: np.ndarray, start: float, f_guess: float, min_amplitude: float,
                 longest: float = math.inf) -> Ring:
    """The ring in ``v`` (a diode's reverse voltage) after the turn-off at ``start``.

    Parameters
    ----------
    t, v : ndarray
        Time (s) and reverse voltage (V) of the run, any spacing.
    start : float
        The turn-off instant (:func:`turn_offs`).
    f_guess : float
        The expected ring frequency, Hz (from the inductance and capacitance that ring); the
        measurement starts there and follows the zero crossings it finds (0: no ring expected).
    min_amplitude : float
        Excursions smaller than this are not a ring, V.
    longest : float
        Look at most this long after the turn-off, s (a share of the source period).
    """
    none = Ring(start, math.nan, 0.0, math.nan, 0)
    if not f_guess > 0:
        return none
    f = f_guess
    ring = grid = np.zeros(0)
    for _ in range(6):
        end = min(start + min(WINDOW_CYCLES / f, longest), float(t[-1]))
        if end - start <= 0:
            return none
        grid, y = _uniform(t, v, start, end, 1.0 / (SAMPLES_PER_CYCLE * f))
        grid, ring = _ring_of(grid, y, f)
        peaks = _peaks(grid, ring)
        big = [p for p in peaks if p[1] >= min_amplitude]
        if len(big) < 2:
            return none
        # Half periods between successive large excursions (adjacent ones: alternate in sign).
        halves = np.diff([p[0] for p in big[:8]])
        f_new = 1.0 / (2.0 * float(np.median(halves)))
        settled = abs(f_new - f) <= 0.01 * f
        f = f_new
        if settled:
            break
    peaks = _peaks(grid, ring)
    first = max(range(len(peaks)), key=lambda k: peaks[k][1])
    amp = peaks[first][1]
    if amp < min_amplitude:
        return none
    kept = [peaks[first]]
    for p in peaks[first + 1:]:
        if p[1] < max(PEAK_FLOOR * amp, min_amplitude / 2):
            break
        kept.append(p)
    if len(kept) >= 3:
        freq = (len(kept) - 1) / (2.0 * (kept[-1][0] - kept[0][0]))
        times = np.array([p[0] for p in kept])
        logs = np.log(np.array([p[1] for p in kept]))
        slope = float(np.polyfit(times - times[0], logs, 1)[0])
        decay = -1.0 / slope if slope < 0 else math.inf
    else:
        freq, decay = f, math.nan
    return Ring(start, float(freq), float(amp), float(decay), len(kept))


def strongest(rings: list[Ring]) -> Ring | None:
    """The ring with the largest amplitude (None when the list is empty)."""
    return max(rings, key=lambda r: r.amplitude_v) if rings else None
