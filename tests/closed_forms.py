"""Closed-form rectifier results the tests hold simkit and the reference solver against.

Responsibility: one place for the formulas, each with its source or its derivation (all
"derived here" unless a publication is named), so that tests/test_refsolver.py (the
solver against them) and tests/test_physics.py (simkit against them) use the same ones.
Nothing here imports simkit.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import brentq

FloatArray = NDArray[np.float64]


def limit_phi(rs_over_rl: float, n: float) -> float:
    """Half conduction angle phi (rad) from ``tan(phi) - phi = pi*Rs/(n*RL)``.

    The infinite-capacitance limit of a capacitor-input rectifier with series resistance:
    the classical result behind O. H. Schade's curve families ("Analysis of Rectifier
    Operation", Proc. IRE 31(7), 1943, pp. 341-361); derivation done here.  With the output
    constant at Vdc = Vpk cos(phi), the ideal diode conducts for |theta| < phi around each
    crest and carries (Vpk cos(theta) - Vdc)/Rs; charge balance with the load, n pulses per
    period (1 half-wave, 2 full-wave, 1/2 for each capacitor of the full-wave doubler, which
    carries the whole load current but is charged once per period), gives
    n Vpk (sin(phi) - phi cos(phi)) / (pi Rs) = Vpk cos(phi) / RL.

    Parameters
    ----------
    rs_over_rl : float
        ``Rs/RL`` (dimensionless).
    n : float
        Pulses per period, as above (dimensionless).

    Returns
    -------
    float
        ``phi`` (rad).
    """
    target = math.pi * rs_over_rl / n
    return brentq(lambda p: math.tan(p) - p - target, 1e-9, math.pi / 2 - 1e-9, xtol=1e-15)


def limit_currents(phi: float, vpk: float, rs: float) -> tuple[float, float, float]:
    """Peak, mean and RMS diode current (A) of the limit of `limit_phi`.

    Derived here by integrating i(theta) = Vpk (cos(theta) - cos(phi)) / Rs over
    |theta| < phi, once per period.

    Parameters
    ----------
    phi : float
        Half conduction angle (rad).
    vpk : float
        Crest EMF (V).
    rs : float
        Series resistance (ohm).

    Returns
    -------
    tuple of float
        Peak, mean and RMS current (A).
    """
    c, s = math.cos(phi), math.sin(phi)
    i_pk = vpk * (1.0 - c) / rs
    i_avg = vpk * (s - phi * c) / (math.pi * rs)
    i_rms = vpk / rs * math.sqrt((phi * (1.0 + 2.0 * c * c) - 3.0 * s * c) / (2.0 * math.pi))
    return i_pk, i_avg, i_rms


def ideal_ripple(omega_c_rl: float, span: float) -> float:
    """Relative ripple ``r = dV_pp/Vpk`` of an ideal diode with Rs = 0 (derived here).

    The capacitor follows the source until the diode current omega*C*Vpk*cos(theta) +
    Vpk*sin(theta)/RL falls to zero, at theta = pi/2 + a with a = atan(1/(omega*C*RL)),
    voltage Vpk*cos(a); it then decays as exp(-(theta - pi/2 - a)/(omega*C*RL)) until the
    source (period ``span``: 2*pi half-wave, pi full-wave) reaches it again at
    theta = span + pi/2 - acos(1 - r), where it is Vpk*(1 - r)::

        cos(a) * exp(-(span - acos(1 - r) - a) / (omega*C*RL)) = 1 - r

    Parameters
    ----------
    omega_c_rl : float
        ``omega*C*RL`` with ``omega`` the mains angular frequency (dimensionless).
    span : float
        ``2*pi`` half-wave, ``pi`` full-wave (rad).

    Returns
    -------
    float
        ``r`` (dimensionless).
    """
    a = math.atan(1.0 / omega_c_rl)

    def g(r: float) -> float:
        return math.cos(a) * math.exp(-(span - math.acos(1.0 - r) - a) / omega_c_rl) - (1.0 - r)

    return brentq(g, 1e-12, 1.0 - 1e-12, xtol=1e-15)


def choke_input_vdc(topology: str, vpk: float, rs: float, dcr: float, rl: float, v_f: float = 0.0) -> float:
    """Output (V) of a full-wave choke-input filter with constant choke current (derived here).

    With infinite inductance the choke current is a constant I and the rectifier output is
    the full-wave rectified EMF less the winding drop: bridge ``|e| - Rs*I`` while
    ``|e| >= Rs*I``, else 0 (all four diodes share the current; the winding current is e/Rs);
    centre-tap ``|e| - Rs*I`` while ``|e| >= Rs*I/2``, else ``-Rs*I/2`` (both halves conduct,
    each with half the current).  Its mean is ``2*Vpk*cos(t0)/pi - Rs*I*(1 - 2*t0/pi)`` with
    ``sin(t0) = Rs*I/Vpk`` (bridge), ``2*Vpk*cos(t1)/pi - Rs*I*(1 - t1/pi)`` with
    ``sin(t1) = Rs*I/(2*Vpk)`` (centre-tap): with Rs -> 0 the familiar 2*Vpk/pi, the mean of
    a full-wave rectified sine.  The choke's mean voltage is its DCR drop and I = Vdc/RL.

    Parameters
    ----------
    topology : {"bridge", "centre-tap"}
        Rectifier.
    vpk : float
        Crest EMF (V).
    rs : float
        Series resistance of the winding, each half for centre-tap (ohm).
    dcr : float
        Choke resistance (ohm).
    rl : float
        Load (ohm).
    v_f : float
        Forward drop of the diodes in the current's path, all together (V), taken as
        constant; 0 for ideal diodes.

    Returns
    -------
    float
        Mean output voltage (V).
    """

    def balance(i: float) -> float:
        if topology == "bridge":
            t0 = math.asin(rs * i / vpk)
            rect = 2 * vpk * math.cos(t0) / math.pi - rs * i * (1 - 2 * t0 / math.pi)
        else:
            t1 = math.asin(rs * i / (2 * vpk))
            rect = 2 * vpk * math.cos(t1) / math.pi - rs * i * (1 - t1 / math.pi)
        return rect - v_f - dcr * i - rl * i

    return rl * brentq(balance, 0.0, vpk / rl, xtol=1e-15)


def choke_harmonics(vpk: float, omega: float, rs: float, dcr: float, inductance: float, c: float, rl: float,
                    kmax: int = 400) -> tuple[FloatArray, FloatArray]:
    """Choke current (A) and output (V) over one period, continuous conduction, small Rs (derived here).

    The rectified EMF of a full-wave rectifier is Vpk*|sin(theta)| = 2*Vpk/pi -
    (4*Vpk/pi) * sum_k cos(2*k*theta)/(4*k^2 - 1) (its Fourier series, computed here).  While
    a diode pair always conducts, the rectifier output is that less Rs*i, so the filter is a
    linear circuit driven by the series: each harmonic sees Rs + DCR + j*2k*w*L in series
    with C || RL.

    Parameters
    ----------
    vpk : float
        Crest EMF (V).
    omega : float
        Mains angular frequency (rad/s).
    rs, dcr : float
        Winding and choke resistance (ohm).
    inductance : float
        Choke (H).
    c : float
        Capacitor after the choke (F).
    rl : float
        Load (ohm).
    kmax : int
        Harmonics summed.

    Returns
    -------
    tuple of numpy.ndarray
        Choke current (A) and output voltage (V) at 40001 points over one period.
    """
    theta = np.linspace(0.0, 2 * math.pi, 40001)
    i0 = (2 * vpk / math.pi) / (rs + dcr + rl)
    current = np.full_like(theta, i0)
    out = np.full_like(theta, i0 * rl)
    for k in range(1, kmax + 1):
        vk = -(4 * vpk / math.pi) / (4 * k * k - 1)
        z_rc = rl / (1 + 2j * k * omega * c * rl)
        ik = vk / (rs + dcr + 2j * k * omega * inductance + z_rc)
        phase = np.exp(2j * k * theta)
        current += np.real(ik * phase)
        out += np.real(ik * z_rc * phase)
    return current, out


def critical_inductance(rl: float, omega: float) -> float:
    """Critical inductance ``R_L/(3 omega)`` of a full-wave choke-input filter (H).

    F. E. Terman, Radio Engineers' Handbook, 1943 (from memory); derived here: the second
    harmonic of the rectified EMF, 4 Vpk/(3 pi) = 2/3 of Vdc = 2 Vpk/pi, drives an AC current
    of about (2/3) Vdc/(2 omega L) through the choke when the capacitor shunts the load well,
    and conduction stays continuous while that stays below Idc = Vdc/R_L.
    """
    return rl / (3 * omega)


def leakage_limit(vpk: float, omega: float, inductance: float, rl: float, pulses: int) -> tuple[float, float]:
    """Vdc (V) and peak diode current (A) with series inductance, infinite C, Rs = 0 (derived here).

    A diode conducts from theta = a, where the EMF reaches the output (sin(a) = Vdc/Vpk),
    while L di/dt = Vpk sin(theta) - Vdc; so
    i(theta) = Vpk/(w L) * (cos(a) - cos(theta) - sin(a)*(theta - a)) until it returns to zero
    at theta = b.  Its peak is at theta = pi - a.  Charge balance with ``pulses`` pulses per
    period: pulses/(2 pi) * integral of i over (a, b) = Vdc/RL.  Valid while one pulse ends
    before the next begins.
    """
    x = omega * inductance

    def end(a: float) -> float:
        return brentq(lambda b: math.cos(a) - math.cos(b) - math.sin(a) * (b - a), math.pi - a, 2 * math.pi,
                      xtol=1e-15)

    def balance(a: float) -> float:
        b = end(a)
        q = (b - a) * math.cos(a) - (math.sin(b) - math.sin(a)) - math.sin(a) * (b - a) ** 2 / 2
        return pulses * vpk / (2 * math.pi * x) * q - vpk * math.sin(a) / rl

    a = brentq(balance, 1e-6, math.pi / 2 - 1e-6, xtol=1e-15)
    if pulses == 2 and end(a) >= math.pi + a:
        raise ValueError("leakage_limit: the pulses overlap")
    return vpk * math.sin(a), vpk / x * (2 * math.cos(a) - math.sin(a) * (math.pi - 2 * a))


def first_pulse_peak(vpk: float, omega: float, rs: float, rl: float, c: float) -> float:
    """Peak current (A) of the first charging pulse after switch-on at the zero crossing (half-wave).

    Closed form of the first-order circuit (derived here): while the ideal diode conducts,
    the capacitor sees the Thevenin source k*Vpk*sin(wt) (k = RL/(Rs+RL)) behind
    R' = Rs || RL, so v(t) = A*sin(wt - d) + A*sin(d)*exp(-t/tau) with tau = R'*C,
    A = k*Vpk/sqrt(1 + (w*tau)^2), d = atan(w*tau); the diode current is
    (Vpk*sin(wt) - v)/Rs, evaluated on a fine grid over the first half period.
    """
    k = rl / (rs + rl)
    tau = rs * rl / (rs + rl) * c
    d = math.atan(omega * tau)
    a = k * vpk / math.sqrt(1.0 + (omega * tau) ** 2)
    t = np.linspace(0.0, math.pi / omega, 200001)
    v = a * np.sin(omega * t - d) + a * math.sin(d) * np.exp(-t / tau)
    i = (vpk * np.sin(omega * t) - v) / rs
    return float(i.max())
