"""The figure functions on synthetic signals with known answers (no simulator).

simkit takes every figure from ngspice's waveforms with the pure functions of
simkit/analysis/metrics.py (and discharge.time_below); here they get signals whose answers are
known in closed form, on uneven time grids like the simulator's.  Where the trapezoidal rule is
exact (piecewise-linear signals sampled at their corners, constants) the answers are exact; for
smooth signals the tolerance is the trapezoidal rule's own error bound, (b - a) h^2 max|f''| / 12
for a grid with steps up to h (a standard result of numerical analysis), and the comment says so.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from simkit.analysis import metrics as mx
from simkit.analysis.discharge import time_below
from simkit.analysis.estimate import conduction_half_angle
from tests.closed_forms import limit_phi

T = 0.02  # s, one period of a 50 Hz signal
W = 2 * math.pi / T


def uneven(t0: float, t1: float, n: int, seed: int, extra: tuple[float, ...] = ()) -> np.ndarray:
    """A sorted grid on [t0, t1] of n random points plus the ends and ``extra`` (s)."""
    rng = np.random.default_rng(seed)
    return np.unique(np.concatenate([[t0, t1], rng.uniform(t0, t1, n), extra]))


def max_step(t: np.ndarray) -> float:
    return float(np.max(np.diff(t)))


def trapezoid_bound(t: np.ndarray, f2: float) -> float:
    """The trapezoidal rule's error bound on grid t for an integrand with |f''| <= f2: sum h^3 f2 / 12."""
    return float(np.sum(np.diff(t) ** 3)) * f2 / 12


# --- clip: the window's ends interpolated in ------------------------------------------------------------


def test_clip_interpolates_the_window_ends() -> None:
    t = np.array([0.0, 1.0, 3.0, 6.0])
    y = 2.0 * t  # linear, so interpolation is exact
    tt, yy = mx.clip(t, y, 0.5, 4.0)
    assert tt.tolist() == [0.5, 1.0, 3.0, 4.0]
    assert yy.tolist() == [1.0, 2.0, 6.0, 8.0]
    # A window ending on a sample keeps it once, as the interpolated end.
    tt, yy = mx.clip(t, y, 1.0, 3.0)
    assert tt.tolist() == [1.0, 3.0] and yy.tolist() == [2.0, 6.0]


def test_clip_refuses_an_empty_window() -> None:
    t = np.array([0.0, 1.0])
    with pytest.raises(ValueError, match="empty window"):
        mx.clip(t, t, 0.5, 0.5)


# --- means and RMS values --------------------------------------------------------------------------------


def test_mean_of_a_ramp_is_exact_on_any_grid() -> None:
    # The mean of y = a + b t over [t0, t1] is a + b (t0 + t1)/2; linear interpolation and the trapezoidal
    # rule are exact for it, whatever the grid and wherever the window's ends fall.
    t = uneven(0.0, 1.0, 37, seed=1)
    y = 3.0 - 7.0 * t
    assert mx.mean(t, y, 0.123, 0.789) == pytest.approx(3.0 - 7.0 * (0.123 + 0.789) / 2, rel=1e-13)


def test_sine_with_offset_over_whole_periods() -> None:
    # y = D + A sin(w t) over two whole periods: mean D, RMS sqrt(D^2 + A^2/2), AC RMS A/sqrt(2), within
    # the trapezoidal rule's error bound for y (|y''| <= A w^2) and y^2 (|(y^2)''| <= 2 A w^2 (2A + D)).
    d, a = 5.0, 3.0
    t = uneven(0.0, 2 * T, 20000, seed=2)
    y = d + a * np.sin(W * t)
    span = 2 * T
    assert mx.mean(t, y, 0.0, span) == pytest.approx(d, abs=trapezoid_bound(t, a * W * W) / span)
    ms = d * d + a * a / 2
    ms_bound = trapezoid_bound(t, 2 * a * W * W * (2 * a + d)) / span
    assert mx.rms(t, y, 0.0, span) ** 2 == pytest.approx(ms, abs=ms_bound)
    # The AC part's mean square is the mean square less the mean's square (both within their bounds).
    assert mx.ac_rms(t, y, 0.0, span) ** 2 == pytest.approx(a * a / 2, abs=ms_bound + 3 * d * trapezoid_bound(
        t, a * W * W) / span)


def test_square_wave_rms_and_mean_are_exact() -> None:
    # A square wave of +V for a quarter period and -V for the rest, its edges 1 us wide and every corner on
    # the grid: y is piecewise linear, so the trapezoidal rule gives its mean exactly.  On [0, T]: +V from 0,
    # a fall across T/4 (its linear halves cancel), -V, and half of the next rise, from -V to 0 over e/2.
    v, e = 10.0, 1e-6
    corners = (0.0, T / 4 - e / 2, T / 4 + e / 2, T - e / 2, T)
    t = uneven(0.0, T, 5000, seed=3, extra=corners)

    def square(tt: np.ndarray) -> np.ndarray:
        up = np.clip((tt - (T - e / 2)) / e, 0.0, 1.0)  # the rise at the end of the period, half of it inside
        down = np.clip((tt - (T / 4 - e / 2)) / e, 0.0, 1.0)
        return v * (1.0 - 2.0 * down + 2.0 * up)

    y = square(t)
    # Exact mean: the plateaus V (T/4 - e/2) and -V (3T/4 - e), the half rise -V e/4, over T.
    expected_mean = (v * (T / 4 - e / 2) - v * (3 * T / 4 - e) - v * e / 4) / T
    assert mx.mean(t, y, 0.0, T) == pytest.approx(expected_mean, rel=1e-12)
    # The RMS: y^2 = V^2 except across the edges, where it dips; with the edges 1 us of 20 ms the RMS is V
    # less at most e/T of it.  The extremes are exact.
    assert v * (1 - e / T) <= mx.rms(t, y, 0.0, T) <= v
    assert mx.peak(t, y, 0.0, T) == v and mx.trough(t, y, 0.0, T) == -v
    assert mx.peak_to_peak(t, y, 0.0, T) == 2 * v


def test_sawtooth_rms_within_the_trapezoid_bound() -> None:
    # A sawtooth rising linearly from -A to A over 0.9 T and falling back over 0.1 T (corners on the grid):
    # mean 0 exactly (piecewise linear, symmetric about zero on each ramp); RMS A/sqrt(3), the RMS of any
    # linear ramp between -A and A, within the trapezoidal rule's bound for y^2 ((y^2)'' = 2 slope^2).
    a = 4.0
    corners = tuple(k * T + 0.9 * T for k in range(3)) + tuple(k * T for k in range(4))
    t = uneven(0.0, 3 * T, 30000, seed=4, extra=corners)
    phase = (t / T) % 1.0
    y = np.where(phase < 0.9, -a + 2 * a * phase / 0.9, a - 2 * a * (phase - 0.9) / 0.1)
    y[-1] = -a  # t = 3T closes the last period
    assert abs(mx.mean(t, y, 0.0, 3 * T)) <= 1e-12 * a
    steepest = 2 * a / (0.1 * T)
    bound = trapezoid_bound(t, 2 * steepest**2) / (3 * T)
    assert mx.rms(t, y, 0.0, 3 * T) ** 2 == pytest.approx(a * a / 3, abs=bound)
    assert bound < 1e-4 * a * a / 3  # the grid is fine enough for the check to mean something
    assert mx.peak_to_peak(t, y, 0.0, 3 * T) == pytest.approx(2 * a, rel=1e-15)


def test_peak_and_trough_include_the_interpolated_window_ends() -> None:
    # On a ramp the extremes of a window are its ends, interpolated between samples.
    t = np.array([0.0, 1.0, 2.0, 3.0])
    y = 10.0 * t
    assert mx.peak(t, y, 0.5, 2.5) == pytest.approx(25.0, rel=1e-15)
    assert mx.trough(t, y, 0.5, 2.5) == pytest.approx(5.0, rel=1e-15)


def test_integral_square_of_a_constant_and_of_a_sine() -> None:
    # I^2 t of a constant current: I^2 (t1 - t0), exact.  Of a sine: A^2 T/2 per period, within the
    # trapezoidal rule's bound for sin^2 ((A^2 sin^2)'' <= 2 A^2 w^2).
    t = uneven(0.0, 3 * T, 15000, seed=5)
    assert mx.integral_square(t, np.full_like(t, 2.5), 0.001, 0.05) == pytest.approx(6.25 * 0.049, rel=1e-13)
    assert mx.integral_square(t, 7.0 * np.sin(W * t), 0.0, 2 * T) == pytest.approx(
        49.0 * T, abs=trapezoid_bound(t, 2 * 49.0 * W * W))


def test_period_stats_of_a_rising_ramp() -> None:
    # y = 2 + 50 t: over each whole period [a, a + T] the mean is the mid value, the low the start and the
    # high the end (exact for a ramp); the partial period at the end is left out.
    t = uneven(0.0, 3.5 * T, 400, seed=6)
    y = 2.0 + 50.0 * t
    stats = mx.period_stats(t, y, T, t_start=0.25 * T)
    assert len(stats) == 3
    for k, s in enumerate(stats):
        a = 0.25 * T + k * T
        assert s.mean == pytest.approx(2.0 + 50.0 * (a + T / 2), rel=1e-13)
        assert s.low == pytest.approx(2.0 + 50.0 * a, rel=1e-13)
        assert s.high == pytest.approx(2.0 + 50.0 * (a + T), rel=1e-13)
    assert len(mx.period_stats(t, y, T)) == 3  # from the first sample


def test_one_period_mean_of_a_sine_on_a_ramp_is_the_ramp_at_the_window_midpoint() -> None:
    # y = D + k t + A sin(w t) (derived here): over any whole period the sine's mean is 0 and the ramp's is its
    # value at the window's midpoint, so the mean centred on x is D + k x, the one starting at x D + k (x + T/2).
    # The running integral is the trapezoidal rule (exact for the ramp, within its bound for the sine at each
    # sample); between samples it is interpolated linearly, off by at most h^2/8 max|y'| at each window end.
    d, k, a = 300.0, 40.0, 20.0
    t = uneven(0.0, 5 * T, 8000, seed=9)
    y = d + k * t + a * np.sin(W * t)
    area = mx.running_integral(t, y)
    assert area[0] == 0.0 and area[-1] == pytest.approx(np.trapezoid(y, t), rel=1e-13)
    h = max_step(t)
    bound = 2 * (trapezoid_bound(t, a * W * W) + h * h / 8 * (a * W + k)) / T
    at = np.linspace(T / 2, 4.5 * T, 41)
    assert np.max(np.abs(mx.one_period_mean(t, y, T, at) - (d + k * at))) <= bound
    start = np.linspace(0.0, 4 * T, 41)
    assert np.max(np.abs(mx.one_period_mean(t, y, T, start, centred=False) - (d + k * (start + T / 2)))) <= bound
    # The same from a running integral kept apart (as a thinned trace keeps it), and a single time.
    assert mx.integral_period_mean(t, area, T, 2 * T)[0] == mx.one_period_mean(t, y, T, 2 * T)[0]
    # Where the period reaches past the samples there is no mean.
    assert np.isnan(mx.one_period_mean(t, y, T, np.array([0.4 * T, 4.6 * T]))).all()
    assert np.isnan(mx.one_period_mean(t, y, T, np.array([-0.1 * T, 4.1 * T]), centred=False)).all()


def test_thin_indices_keep_the_slots_and_each_periods_extremes() -> None:
    # 1000 even samples a period, 7 slots a period: a slot starts at sample ceil(1000 j / 7) of each period
    # (143, 286, 429, 572, 715, 858).  A sine from phase 0 peaks at sample 250 and bottoms at 750 of every period;
    # a rising ramp is lowest at a period's first sample and highest at its last (999) (derived here).
    t = np.linspace(0.0, 3 * T, 3001)
    kept = mx.thin_indices(t, T, 7, [np.sin(W * t), t.copy()])
    per_period = [0, 143, 250, 286, 429, 572, 715, 750, 858, 999]
    assert kept.tolist() == [p * 1000 + i for p in range(3) for i in per_period] + [3000]
    assert mx.thin_indices(t[:3], T, 7, [t[:3]]).tolist() == [0, 1, 2]  # too short to thin


# --- time_below: when a capacitor falls below the safe voltage for good -------------------------------


def test_time_below_of_a_linear_fall_is_exact() -> None:
    # v = 400 - 100 t crosses 60 V at t = 3.4 s; linear interpolation between samples is exact for it.
    t = uneven(0.0, 5.0, 50, seed=7)
    assert time_below(t, 400.0 - 100.0 * t, 60.0) == pytest.approx(3.4, rel=1e-13)


def test_time_below_of_an_exponential_decay() -> None:
    # v = V0 exp(-t/tau) falls below V_safe at tau ln(V0/V_safe) (exponential decay, derived here); linear
    # interpolation between samples h apart errs by at most h^2 |v''| / (8 |v'|) = h^2 / (8 tau) in time.
    v0, tau, safe = 450.0, 2.2, 60.0
    t = uneven(0.0, 10.0, 4000, seed=8)
    h = max_step(t)
    expected = tau * math.log(v0 / safe)
    assert time_below(t, v0 * np.exp(-t / tau), safe) == pytest.approx(expected, abs=h * h / (8 * tau) + 1e-12)


def test_time_below_takes_the_last_crossing_and_the_edge_cases() -> None:
    t = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0])
    v = np.array([100.0, 50.0, 80.0, 20.0, 10.0, 5.0])  # below 60 at 1 s, above again at 2 s, below for good
    assert time_below(t, v, 60.0) == pytest.approx(2.0 + 20.0 / 60.0, rel=1e-15)
    assert time_below(t, np.full(6, 30.0), 60.0) == 0.0  # never above: safe from the start
    assert time_below(t, np.full(6, 90.0), 60.0) == math.inf  # still above at the end
    assert time_below(t, np.array([90.0, 90.0, 90.0, 90.0, 60.0, 60.0]), 60.0) == math.inf  # on the limit


# --- the estimate's conduction angle ------------------------------------------------------------------


@pytest.mark.parametrize("x", [1e-4, 0.005, 0.02, 0.1, 1.0])
def test_conduction_half_angle_solves_the_infinite_c_limit(x: float) -> None:
    # tan(phi) - phi = pi Rs/(n RL) (tests/closed_forms.py: the limit behind Schade's curves; derivation done
    # here), solved by brentq there and by bisection in simkit.
    assert conduction_half_angle(x) == pytest.approx(limit_phi(x, 1.0), rel=1e-12)
    assert conduction_half_angle(0.0) == 0.0
