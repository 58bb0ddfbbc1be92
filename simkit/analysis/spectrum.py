"""The spectrum of a waveform over whole periods: harmonics of the source frequency, and band RMS.

Pure numpy.  ngspice's time points are not evenly spaced, so a window is first resampled onto a
uniform grid (:func:`resample`, linear interpolation, the window's ends exact); the discrete
Fourier transform of a window of ``n`` whole periods then puts the ``k``-th harmonic of the
source exactly on bin ``n k``, with no leakage between harmonics.  An RMS is the one-sided
amplitude over the square root of two.  Levels in decibels: dBV is dB re 1 V RMS, dBuV dB re
1 uV RMS (the receiver's unit), dBuA dB re 1 uA RMS.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Harmonics of the source frequency reported per node.
HARMONICS = 10
#: Samples per period of the uniform grid the harmonics are computed on: far above the tenth
#: harmonic, and fine enough that linear interpolation between ngspice's points costs nothing
#: the harmonics show (derived here: the grid's own error is below 1e-4 of a harmonic at the
#: engine's steps of 200 or more per period).
GRID_PER_PERIOD = 8192
#: Below this, a level is reported as this floor in decibels (an exact zero has no logarithm).
FLOOR_RMS = 1e-12


@dataclass(frozen=True)
class Harmonic:
    """One harmonic of a waveform: its frequency, RMS and level."""

    frequency_hz: float
    rms: float  # in the waveform's unit (V or A)

    @property
    def dbv(self) -> float:
        return dbv(self.rms)

    def to_json(self, unit: str = "v") -> dict[str, float]:
        """``{"frequency_hz", "rms_v", "dbv"}`` (voltage) or ``{"frequency_hz", "rms_a", "dbua"}`` (current)."""
        if unit == "a":
            return {"frequency_hz": self.frequency_hz, "rms_a": self.rms, "dbua": dbua(self.rms)}
        return {"frequency_hz": self.frequency_hz, "rms_v": self.rms, "dbv": dbv(self.rms)}


def dbv(rms_v: float) -> float:
    """Level in dB re 1 V RMS: 20 log10(V / 1 V)."""
    return 20.0 * math.log10(max(abs(rms_v), FLOOR_RMS))


def dbuv(rms_v: float) -> float:
    """Level in dB re 1 uV RMS: 20 log10(V / 1 uV) = dBV + 120."""
    return 20.0 * math.log10(max(abs(rms_v), FLOOR_RMS) / 1e-6)


def dbua(rms_a: float) -> float:
    """Level in dB re 1 uA RMS: 20 log10(I / 1 uA)."""
    return 20.0 * math.log10(max(abs(rms_a), FLOOR_RMS) / 1e-6)


def resample(t: np.ndarray, y: np.ndarray, t0: float, t1: float, n: int) -> np.ndarray:
    """``n`` samples of y at t0, t0 + (t1 - t0)/n, ... (the end point t1 left out: a periodic window)."""
    if t1 <= t0 or n < 2:
        raise ValueError("empty window")
    grid = t0 + (t1 - t0) * np.arange(n) / n
    return np.interp(grid, t, y)


def periodic(t: np.ndarray, y: np.ndarray, t0: float, t1: float, n: int, remove_drift: bool) -> np.ndarray:
    """:func:`resample`, and with ``remove_drift`` less the straight line from y(t0) to y(t1).

    For a window that is not quite periodic (a key-down interval, where the output still droops;
    a run still settling) the drift y(t1) - y(t0) would otherwise appear as a sawtooth with every
    harmonic at 1/k of its size, and its jump at the window's ends as content at every frequency.
    """
    yy = resample(t, y, t0, t1, n)
    if not remove_drift:
        return yy
    drift = float(np.interp(t1, t, y) - np.interp(t0, t, y))
    return yy - drift * np.arange(n) / n


def harmonics(t: np.ndarray, y: np.ndarray, t0: float, t1: float, fundamental: float, count: int = HARMONICS,
              remove_drift: bool = False) -> list[Harmonic]:
    """The first ``count`` harmonics of the fundamental in y over [t0, t1].

    Parameters
    ----------
    t, y : ndarray
        Time (s) and values, any spacing.
    t0, t1 : float
        The window; it should hold whole periods of the fundamental (rounded to the nearest).
    fundamental : float
        The source frequency, Hz.
    remove_drift : bool
        Take out a straight-line drift over the window first (:func:`periodic`).

    Returns
    -------
    list of Harmonic
        k = 1 .. count: frequency k x fundamental and the RMS of that component.
    """
    periods = max(round((t1 - t0) * fundamental), 1)
    n = GRID_PER_PERIOD * periods
    yy = periodic(t, y, t0, t1, n, remove_drift)
    spec = np.fft.rfft(yy) / n
    out = []
    for k in range(1, count + 1):
        b = k * periods
        amp = 2.0 * abs(spec[b]) if b < len(spec) else 0.0
        out.append(Harmonic(k * fundamental, float(amp / math.sqrt(2.0))))
    return out


def above(t: np.ndarray, y: np.ndarray, t0: float, t1: float, f_low: float, samples: int) -> tuple[np.ndarray,
                                                                                                   np.ndarray]:
    """The content of y above ``f_low`` over [t0, t1] as a waveform: (uniform times, values), drift taken out."""
    n = max(samples, 8)
    yy = periodic(t, y, t0, t1, n, remove_drift=True)
    spec = np.fft.rfft(yy)
    spec[np.fft.rfftfreq(n, d=(t1 - t0) / n) <= f_low] = 0.0
    return t0 + (t1 - t0) * np.arange(n) / n, np.fft.irfft(spec, n)


def band_rms(t: np.ndarray, y: np.ndarray, t0: float, t1: float, f_low: float, samples: int) -> float:
    """RMS of the content of y above ``f_low`` over [t0, t1] (Parseval on a uniform grid of ``samples``).

    The window should hold whole periods of every slow component (the source's harmonics), so
    that none of them leaks above ``f_low``; a straight-line drift over it (a run that is not
    quite periodic yet) is taken out first, or its jump at the window's ends would count as hash.
    """
    yy = periodic(t, y, t0, t1, max(samples, 8), remove_drift=True)
    n = len(yy)
    spec = np.fft.rfft(yy) / n
    freqs = np.fft.rfftfreq(n, d=(t1 - t0) / n)
    power = 2.0 * np.abs(spec) ** 2  # one-sided: each bin's mean square (DC and Nyquist below)
    power[0] = 0.0
    if n % 2 == 0:
        power[-1] /= 2.0
    return float(math.sqrt(float(np.sum(power[freqs > f_low]))))


def largest(hs: list[Harmonic]) -> Harmonic | None:
    """The harmonic with the largest RMS (None for an empty list)."""
    return max(hs, key=lambda h: h.rms) if hs else None
