"""Figures from waveforms: pure numpy on (time, value) arrays over whole periods.

ngspice's time points are not evenly spaced, so every mean and RMS is a trapezoid integral,
with the window's ends interpolated exactly onto the period boundaries.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np


def clip(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> tuple[np.ndarray, np.ndarray]:
    """The samples of y on [t0, t1], with the end points interpolated in."""
    if t1 <= t0:
        raise ValueError("empty window")
    inside = (t > t0) & (t < t1)
    tt = np.concatenate(([t0], t[inside], [t1]))
    yy = np.concatenate(([np.interp(t0, t, y)], y[inside], [np.interp(t1, t, y)]))
    return tt, yy


def mean(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Time average of y over [t0, t1]."""
    tt, yy = clip(t, y, t0, t1)
    return float(np.trapezoid(yy, tt) / (t1 - t0))


def rms(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Root-mean-square of y over [t0, t1]."""
    tt, yy = clip(t, y, t0, t1)
    return float(math.sqrt(max(np.trapezoid(yy * yy, tt) / (t1 - t0), 0.0)))


def ac_rms(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """RMS of the AC part of y (y minus its mean) over [t0, t1]."""
    m = mean(t, y, t0, t1)
    return rms(t, y - m, t0, t1)


def peak(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Highest value of y on [t0, t1]."""
    _, yy = clip(t, y, t0, t1)
    return float(np.max(yy))


def trough(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Lowest value of y on [t0, t1]."""
    _, yy = clip(t, y, t0, t1)
    return float(np.min(yy))


def peak_to_peak(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    _, yy = clip(t, y, t0, t1)
    return float(np.max(yy) - np.min(yy))


def integral_square(t: np.ndarray, y: np.ndarray, t0: float, t1: float) -> float:
    """Integral of y^2 over [t0, t1] (I^2 t of a current, A^2 s).

    Exact for y linear between samples: h (a^2 + a b + b^2) / 3 per interval.  The trapezoidal rule
    on y^2, h (a^2 + b^2) / 2, adds h (a - b)^2 / 6 per interval: on the steep edges of a surge
    pulse sampled at the measuring step that is a few tenths of a percent too much.
    """
    tt, yy = clip(t, y, t0, t1)
    a, b = yy[:-1], yy[1:]
    return float(np.sum(np.diff(tt) * (a * a + a * b + b * b)) / 3.0)


@dataclass(frozen=True)
class PeriodStats:
    mean: float
    low: float
    high: float


def period_stats(t: np.ndarray, y: np.ndarray, period: float, t_start: float | None = None) -> list[PeriodStats]:
    """Mean, minimum and maximum of y over each whole period from t_start to the end."""
    t0 = float(t[0]) if t_start is None else t_start
    n = math.floor((float(t[-1]) - t0) / period + 1e-9)
    out = []
    for k in range(n):
        a = t0 + k * period
        b = a + period
        out.append(PeriodStats(mean(t, y, a, b), trough(t, y, a, b), peak(t, y, a, b)))
    return out


def running_integral(t: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Trapezoid integral of y from the first sample to each sample (same length as t)."""
    return np.concatenate(([0.0], np.cumsum(np.diff(t) * (y[1:] + y[:-1]) / 2)))


def integral_period_mean(t: np.ndarray, area: np.ndarray, period: float, at: np.ndarray | float,
                         centred: bool = True) -> np.ndarray:
    """Mean over one period centred on each time of ``at`` (``centred=False``: the period starting there),
    from ``area``, the running integral at the samples ``t``; NaN where that period reaches past ``t``.

    Taking it from the running integral lets a thinned trace that kept the full trace's integral give the
    full trace's mean.
    """
    x = np.atleast_1d(np.asarray(at, dtype=float))
    lo, hi = (x - period / 2, x + period / 2) if centred else (x, x + period)
    out = (np.interp(hi, t, area) - np.interp(lo, t, area)) / period
    eps = max(1e-12, 1e-9 * period)  # rounding of at + period, not a period past the samples
    out[(lo < t[0] - eps) | (hi > t[-1] + eps)] = np.nan
    return out


def one_period_mean(t: np.ndarray, y: np.ndarray, period: float, at: np.ndarray | float,
                    centred: bool = True) -> np.ndarray:
    """Mean of y over one period centred on (or, ``centred=False``, starting at) each time of ``at``
    (trapezoid integral); NaN where that period reaches past the samples."""
    return integral_period_mean(t, running_integral(t, y), period, at, centred)


def thin_indices(t: np.ndarray, period: float, per_period: int, watched: Iterable[np.ndarray]) -> np.ndarray:
    """Indices of the samples a thinned trace keeps: the first and last, the first of each of ``per_period``
    even slots a period, and in every period where each watched vector is highest and lowest (the first
    such sample), so every peak figure survives at a fraction of the memory."""
    n = len(t)
    if n < 4:
        return np.arange(n)
    keep = np.zeros(n, dtype=bool)
    keep[[0, n - 1]] = True
    slot = np.floor((t - t[0]) / (period / per_period) + 1e-9).astype(np.int64)
    keep[np.flatnonzero(np.diff(slot)) + 1] = True
    per = np.floor((t - t[0]) / period + 1e-9).astype(np.int64)
    starts = np.concatenate(([0], np.flatnonzero(np.diff(per)) + 1))
    # Each sample's period, numbered 0, 1, ... in order (``per`` may skip a number over a long step).
    seg = np.cumsum(np.concatenate(([0], np.diff(per) != 0)))
    lengths = np.diff(np.concatenate((starts, [n])))
    for y in watched:
        for extreme in (np.maximum.reduceat(y, starts), np.minimum.reduceat(y, starts)):
            hit = np.flatnonzero(y == np.repeat(extreme, lengths))
            # The first hit of each period: where the period number changes along the hits.
            keep[hit[np.concatenate(([True], np.diff(seg[hit]) != 0))]] = True
    return np.flatnonzero(keep)
