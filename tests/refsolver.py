"""Reference solver: steady state and switch-on of capacitor-input rectifiers.

Responsibility: compute, with numpy and scipy only, the periodic steady state and the
switch-on transient of capacitor-input rectifiers fed by a sine source, so that
simkit's ngspice results can be checked against a program that shares no code with
simkit. Nothing in this module imports simkit, PySpice or ngspice.

Circuits
--------
The source is ``Vs(t) = sqrt(2) * vrms * sin(2*pi*f*t + phase)`` in series with ``Rs``
in every winding; ``RL`` is the load across the output and every capacitor is ``C``.
Node 0 is ground and "a->b" is a diode with anode ``a`` and cathode ``b``.

``half-wave``
    Winding 0->a; D1 a->out; C out-0; RL out-0.
``centre-tap``
    Two half-windings from node 0 to a1 and a2, EMFs ``+Vs`` and ``-Vs``, each with
    its own ``Rs``; D1 a1->out, D2 a2->out; C out-0; RL out-0.
``bridge``
    One floating winding (EMF ``Vs`` from a2 to a1, series ``Rs``); D1 a1->out,
    D2 a2->out, D3 0->a1, D4 0->a2; C out-0; RL out-0.
``doubler``
    Full-wave doubler: winding from m to a; D1 a->out, D2 0->a; C1 out-m, C2 m-0;
    RL out-0. The output is about ``2*Vpk``.
``cascade``
    Half-wave Cockcroft-Walton chain with ``n`` stages: winding from 0 to p0; for
    stage k = 1..n: C(2k-1) from p(k-1) to p(k), D(2k-1) s(k-1)->p(k) (s0 = 0),
    D(2k) p(k)->s(k), C(2k) from s(k-1) to s(k). Output s(n), RL from s(n) to 0.

Equations
---------
The states are the capacitor voltages ``u`` (V). At a given instant the capacitors act
as voltage sources, so what remains is a resistive network of the winding(s), ``Rs``
and the diodes. In every circuit above that network reduces to one scalar node
equation (two independent ones for the centre-tap) in a node voltage ``x``::

    F(x) = (E - x) / R - sum_k sigma_k * i_D(sigma_k * (x - b_k)) = 0

where ``E`` and ``b_k`` are affine in the source EMF and ``u``, ``R`` is a resistance,
``sigma_k = +1`` for a diode whose anode is the node ``x`` and ``-1`` for one whose
cathode is, and ``i_D(v)`` is the diode law. ``F`` is strictly decreasing, so the root
is unique and bracketed by ``min(E, b)`` and ``max(E, b)``. It is found in closed form
for the ideal diode (a clip of ``E`` between the two clamp levels) and otherwise by a
safeguarded Newton iteration started from the closed-form current of the dominant
conduction loop (Lambert/Wright-omega form for the exponential diode). The reductions:

- half-wave: ``x = v(a)``, ``E = e``, ``R = Rs``, one diode with ``b = u``.
- centre-tap: the two halves are independent half-wave problems with ``E = +e`` and
  ``E = -e``.
- bridge: ``x = v(a1)``. The diode network is symmetric, so ``v(a2) = u - v(a1)``
  exactly for identical diodes; then ``E = (e + u)/2``, ``R = Rs/2``, D1 (``b = u``,
  ``sigma = +1``) and D3 (``b = 0``, ``sigma = -1``), and ``i_D2 = i_D3``,
  ``i_D4 = i_D1``.
- doubler: ``x = v(a)``, ``E = u2 + e``, ``R = Rs``; D1 ``b = u1 + u2``, D2 ``b = 0``.
- cascade: ``x = v(p0)``, ``E = e``, ``R = Rs``. With ``P_k`` the sum of the odd
  capacitor voltages up to stage k and ``S_k`` that of the even ones,
  D(2k-1) has ``b = S(k-1) - P(k)``, ``sigma = -1``; D(2k) has ``b = S(k) - P(k)``,
  ``sigma = +1``.

Kirchhoff's current law then gives the capacitor currents as a fixed linear map of the
diode currents and the load current ``i_L = vout/RL``; ``C du/dt`` is that current.
For the cascade (capacitor voltages ``u(2k-1) = v(p_k) - v(p_{k-1})`` and
``u(2k) = v(s_k) - v(s_{k-1})``)::

    C du(2k-1)/dt = sum_{j>=k} (i_D(2j-1) - i_D(2j))
    C du(2k)/dt   = sum_{j>=k} i_D(2j) - sum_{j>k} i_D(2j-1) - i_L

The ODE is integrated with ``scipy.integrate.solve_ivp`` (tight tolerances, ``max_step``
a small fraction of the period). The periodic steady state is found by shooting:
Newton on ``Phi_T(x0) - x0 = 0`` where ``Phi_T`` maps the state over one period; the
Jacobian comes from finite-difference copies of the state integrated in the same call
(so they share the step sequence). The result is accepted only if the residual of a
separate verification period is below ``1e-9`` of the crest voltage.

Diode laws
----------
``ideal``
    A switch: no forward drop, no reverse current. An optional on-resistance
    ``r_on`` (ohm, default 0) may be given. With ``r_on = 0`` the only resistance is
    ``Rs``; a cascade of two or more stages then has loops of diodes and capacitors
    with no resistance at all (for example D1, C3, D3, C2), where the current split
    between diodes is undefined, so it needs ``r_on > 0``.
``exponential``
    The SPICE junction law with series resistance: ``i = Is*(exp(vj/(N*Vt)) - 1)``,
    terminal voltage ``v = vj + i*Rd``, ``Vt = k*T/q`` at ``T = 300.15 K`` (27 degC,
    the usual SPICE nominal temperature) with the exact SI values of ``k`` and ``q``
    (CODATA 2018). Junction capacitance, transit time, breakdown and GMIN are not
    modelled.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from scipy.integrate import solve_ivp
from scipy.special import wrightomega

FloatArray = NDArray[np.float64]

Topology = Literal["half-wave", "centre-tap", "bridge", "doubler", "cascade"]
DiodeModel = Literal["ideal", "exponential"]
TOPOLOGIES: tuple[str, ...] = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")

BOLTZMANN = 1.380649e-23  # J/K, exact in the SI since 2019 (CODATA 2018)
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact in the SI since 2019 (CODATA 2018)
NOMINAL_TEMPERATURE = 300.15  # K, 27 degC

SHOOTING_TOLERANCE = 1e-9  # residual of the periodic state, relative to Vpk


def thermal_voltage(temperature: float = NOMINAL_TEMPERATURE) -> float:
    """Return the thermal voltage ``k*T/q``.

    Parameters
    ----------
    temperature : float
        Junction temperature (K).

    Returns
    -------
    float
        Thermal voltage (V); 0.025864... V at 300.15 K.

    Examples
    --------
    >>> round(thermal_voltage(), 7)
    0.0258642
    """
    return BOLTZMANN * temperature / ELEMENTARY_CHARGE


@dataclass(frozen=True)
class Diode:
    """Diode law shared by every diode of a circuit.

    Parameters
    ----------
    model : {"ideal", "exponential"}
        ``ideal`` is a switch with optional on-resistance; ``exponential`` is the
        SPICE junction law with series resistance.
    i_s : float
        Saturation current ``Is`` (A), exponential model only.
    n : float
        Emission coefficient ``N`` (dimensionless), exponential model only.
    r_d : float
        Series resistance ``Rd`` (ohm), exponential model only.
    r_on : float
        On-resistance (ohm), ideal model only; 0 means a perfect switch.
    temperature : float
        Junction temperature (K) for ``Vt = k*T/q``.

    Examples
    --------
    >>> d = Diode("exponential", i_s=1e-9, n=1.8, r_d=0.05)
    >>> 0.5 < d.voltage(1.0) < 1.2
    True
    """

    model: DiodeModel = "ideal"
    i_s: float = 1e-14  # A
    n: float = 1.0  # dimensionless
    r_d: float = 0.0  # ohm
    r_on: float = 0.0  # ohm
    temperature: float = NOMINAL_TEMPERATURE  # K

    def __post_init__(self) -> None:
        if self.model not in ("ideal", "exponential"):
            raise ValueError(f"Diode.model: expected 'ideal' or 'exponential', got {self.model!r}")
        if self.model == "exponential" and not (self.i_s > 0 and self.n > 0):
            raise ValueError(f"Diode: need i_s > 0 and n > 0, got i_s={self.i_s}, n={self.n}")
        if self.r_d < 0 or self.r_on < 0 or self.temperature <= 0:
            raise ValueError("Diode: r_d and r_on must be >= 0 and temperature > 0")

    @property
    def is_switch(self) -> bool:
        """True for the ideal diode with zero on-resistance (handled in closed form)."""
        return self.model == "ideal" and self.r_on == 0.0

    @property
    def n_vt(self) -> float:
        """Return ``N*Vt`` (V)."""
        return self.n * thermal_voltage(self.temperature)

    def voltage(self, i: FloatArray | float) -> FloatArray:
        """Terminal voltage at a forward current.

        Parameters
        ----------
        i : array_like
            Current (A); must exceed ``-Is`` for the exponential model.

        Returns
        -------
        numpy.ndarray
            Terminal voltage (V): ``N*Vt*ln(1 + i/Is) + i*Rd`` or ``i*r_on``.
        """
        i = np.asarray(i, dtype=float)
        if self.model == "ideal":
            return i * self.r_on
        return self.n_vt * np.log1p(i / self.i_s) + i * self.r_d

    def current(self, v: FloatArray) -> FloatArray:
        """Current at a terminal voltage.

        Parameters
        ----------
        v : numpy.ndarray
            Terminal voltage, anode minus cathode (V). Not defined for the
            perfect switch (``is_switch``).

        Returns
        -------
        numpy.ndarray
            Current (A). For ``Rd > 0`` the closed form
            ``i = (N*Vt/Rd) * omega(ln(Is*Rd/(N*Vt)) + (v + Is*Rd)/(N*Vt)) - Is``
            is used, with ``omega`` the Wright omega function.
        """
        if self.model == "ideal":
            return np.maximum(v, 0.0) / self.r_on
        return self._loop_current(v, 0.0)

    def conductance(self, v: FloatArray) -> FloatArray:
        """Small-signal conductance ``di/dv`` at a terminal voltage.

        Parameters
        ----------
        v : numpy.ndarray
            Terminal voltage (V).

        Returns
        -------
        numpy.ndarray
            Conductance (S).
        """
        if self.model == "ideal":
            return np.where(v > 0.0, 1.0 / self.r_on, 0.0)
        nvt = self.n_vt
        if self.r_d > 0.0:
            w = wrightomega(math.log(self.i_s * self.r_d / nvt) + (v + self.i_s * self.r_d) / nvt)
            return np.real(w / (1.0 + w)) / self.r_d
        return self.i_s / nvt * np.exp(np.minimum(v / nvt, 700.0))

    def loop_current(self, u: FloatArray, r: float) -> FloatArray:
        """Current of one diode in series with a resistor.

        Solves ``u = v_D(i) + i*r`` for ``i``.

        Parameters
        ----------
        u : numpy.ndarray
            Voltage across the diode and resistor together (V).
        r : float
            Extra series resistance (ohm), > 0 unless the diode has its own.

        Returns
        -------
        numpy.ndarray
            Current (A).
        """
        if self.model == "ideal":
            return np.maximum(u, 0.0) / (self.r_on + r)
        return self._loop_current(u, r)

    def _loop_current(self, u: FloatArray, r: float) -> FloatArray:
        nvt = self.n_vt
        rt = self.r_d + r
        if rt == 0.0:
            return self.i_s * np.expm1(np.minimum(u / nvt, 700.0))
        z = math.log(self.i_s * rt / nvt) + (u + self.i_s * rt) / nvt
        return nvt / rt * np.real(wrightomega(z)) - self.i_s


@dataclass(frozen=True)
class Circuit:
    """A capacitor-input rectifier with its source and load.

    Parameters
    ----------
    topology : {"half-wave", "centre-tap", "bridge", "doubler", "cascade"}
        Circuit, as described in the module docstring.
    vrms : float
        Open-circuit RMS EMF of the winding (V); for centre-tap, each half.
    f : float
        Source frequency (Hz).
    rs : float
        Series resistance of each winding (ohm), > 0.
    rl : float
        Load resistance (ohm), > 0.
    c : float
        Every capacitor (F), > 0.
    diode : Diode
        Diode law, used for every diode.
    stages : int
        Number of cascade stages (cascade only; 1 is the half-wave doubler).

    Examples
    --------
    >>> Circuit("bridge", vrms=250.0, f=50.0, rs=25.0, rl=5e3, c=100e-6).vpk
    353.5533905932738
    """

    topology: Topology
    vrms: float  # V
    f: float  # Hz
    rs: float  # ohm
    rl: float  # ohm
    c: float  # F
    diode: Diode = Diode()
    stages: int = 1

    def __post_init__(self) -> None:
        if self.topology not in TOPOLOGIES:
            raise ValueError(f"Circuit.topology: expected one of {TOPOLOGIES}, got {self.topology!r}")
        for name in ("vrms", "f", "rs", "rl", "c"):
            if not getattr(self, name) > 0:
                raise ValueError(f"Circuit.{name}: must be > 0, got {getattr(self, name)!r}")
        if self.stages < 1:
            raise ValueError(f"Circuit.stages: must be >= 1, got {self.stages}")
        if self.topology == "cascade" and self.stages >= 2 and self.diode.is_switch:
            raise ValueError(
                "Circuit.diode: a cascade of 2 or more stages with ideal diodes needs "
                "r_on > 0 (diode-capacitor loops without resistance)"
            )

    @property
    def vpk(self) -> float:
        """Crest EMF ``sqrt(2)*vrms`` (V)."""
        return math.sqrt(2.0) * self.vrms

    @property
    def omega(self) -> float:
        """Angular frequency ``2*pi*f`` (rad/s)."""
        return 2.0 * math.pi * self.f

    @property
    def period(self) -> float:
        """Source period ``1/f`` (s)."""
        return 1.0 / self.f


@dataclass(frozen=True)
class SteadyState:
    """Periodic steady state of a rectifier, over one source period.

    Attributes
    ----------
    vdc : float
        Mean output voltage (V).
    vout_max, vout_min : float
        Crest and trough of the output voltage (V).
    ripple_pp : float
        Peak-to-peak output ripple (V).
    ripple_rms : float
        RMS of the AC part of the output voltage (V).
    idc : float
        Mean load current (A).
    diode_peak : float
        Highest peak forward current of any diode (A).
    diode_avg : float
        Highest mean current of any diode (A).
    diode_rms : float
        Highest RMS current of any diode (A).
    piv : float
        Highest reverse voltage across any diode (V).
    source_rms : float
        RMS winding current (A); for centre-tap, the higher of the two halves.
    cap_ripple_rms : float
        RMS AC current of the output capacitor (half-wave, centre-tap, bridge) or the
        highest of any capacitor (doubler, cascade) (A).
    time : numpy.ndarray
        Sample times over one period (s), uniform, ``t = 0`` at the rising zero
        crossing of the source EMF.
    vout : numpy.ndarray
        Output voltage at ``time`` (V).
    cap_voltage : numpy.ndarray
        Capacitor voltages, shape ``(n_caps, len(time))`` (V).
    diode_current : numpy.ndarray
        Diode currents D1, D2, ..., shape ``(n_diodes, len(time))`` (A).
    residual : float
        Shooting residual ``max|Phi_T(x0) - x0|`` of the verification period,
        relative to the crest EMF (dimensionless).
    newton_iterations : int
        Newton iterations the shooting took.
    """

    vdc: float  # V
    vout_max: float  # V
    vout_min: float  # V
    ripple_pp: float  # V
    ripple_rms: float  # V
    idc: float  # A
    diode_peak: float  # A
    diode_avg: float  # A
    diode_rms: float  # A
    piv: float  # V
    source_rms: float  # A
    cap_ripple_rms: float  # A
    time: FloatArray  # s
    vout: FloatArray  # V
    cap_voltage: FloatArray  # V
    diode_current: FloatArray  # A
    residual: float  # dimensionless
    newton_iterations: int


@dataclass(frozen=True)
class SwitchOn:
    """Switch-on transient from empty capacitors.

    Attributes
    ----------
    surge : float
        Highest diode current over the simulated cycles (A).
    surge_time : float
        Time of that current after switch-on (s).
    vcap_max : float
        Highest voltage across any capacitor (V).
    time : numpy.ndarray
        Sample times (s), switch-on at 0.
    vout : numpy.ndarray
        Output voltage at ``time`` (V).
    diode_current : numpy.ndarray
        Diode currents, shape ``(n_diodes, len(time))`` (A).
    """

    surge: float  # A
    surge_time: float  # s
    vcap_max: float  # V
    time: FloatArray  # s
    vout: FloatArray  # V
    diode_current: FloatArray  # A


class _Network:
    """Linear maps and node equation of one circuit (see the module docstring).

    ``E = e_coef[p]*e + e_caps @ u`` and ``b = b_caps @ u`` for each of the ``P``
    independent node problems; the solved diode currents, shape ``(K*P, N)`` with the
    problem index fastest, map to the physical diodes by ``expand``. The capacitor
    currents are ``cap_from_diode @ i_D - cap_from_load * vout/RL`` and the winding
    currents ``winding_from_diode @ i_D``.
    """

    def __init__(self, circuit: Circuit) -> None:
        topo = circuit.topology
        rs = circuit.rs
        if topo == "half-wave":
            self._setup(1, [1.0], [[0.0]], [[1.0]], [1.0], rs, [[1.0]],
                        [[1.0]], [1.0], [1.0], [[1.0]])
        elif topo == "centre-tap":
            self._setup(1, [1.0, -1.0], [[0.0]], [[1.0]], [1.0], rs, np.eye(2),
                        [[1.0, 1.0]], [1.0], [1.0], np.eye(2))
        elif topo == "bridge":
            self._setup(1, [0.5], [[0.5]], [[1.0], [0.0]], [1.0, -1.0], rs / 2.0,
                        [[1, 0], [0, 1], [0, 1], [1, 0]],
                        [[1.0, 1.0, 0.0, 0.0]], [1.0], [1.0], [[1.0, 0.0, -1.0, 0.0]])
        elif topo == "doubler":
            self._setup(2, [1.0], [[0.0, 1.0]], [[1.0, 1.0], [0.0, 0.0]], [1.0, -1.0], rs,
                        np.eye(2), np.eye(2), [1.0, 1.0], [1.0, 1.0], [[1.0, -1.0]])
        else:
            n = circuit.stages
            m = 2 * n
            b_caps = np.zeros((m, m))
            sigma = np.zeros(m)
            cap_d = np.zeros((m, m))
            for k in range(1, n + 1):
                odd, even = 2 * k - 2, 2 * k - 1  # zero-based rows of D(2k-1), D(2k)
                b_caps[odd, 1:2 * k - 2:2] = 1.0  # + S(k-1)
                b_caps[odd, 0:2 * k:2] = -1.0  # - P(k)
                b_caps[even, 1:2 * k:2] = 1.0  # + S(k)
                b_caps[even, 0:2 * k:2] = -1.0  # - P(k)
                sigma[odd], sigma[even] = -1.0, 1.0
                for j in range(k, n + 1):
                    cap_d[odd, 2 * j - 2] += 1.0
                    cap_d[odd, 2 * j - 1] -= 1.0
                    cap_d[even, 2 * j - 1] += 1.0
                    if j > k:
                        cap_d[even, 2 * j - 2] -= 1.0
            cap_l = np.tile([0.0, 1.0], n)
            self._setup(m, [1.0], np.zeros((1, m)), b_caps, sigma, rs, np.eye(m), cap_d,
                        cap_l, cap_l, [np.tile([-1.0, 1.0], n)])
        self.diode = circuit.diode

    def _setup(self, n_caps: int, e_coef: list[float], e_caps: object, b_caps: object,
               sigma: object, r: float, expand: object, cap_from_diode: object,
               cap_from_load: object, out_from_caps: object,
               winding_from_diode: object) -> None:
        self.n_caps = n_caps
        self.e_coef = np.asarray(e_coef, dtype=float)
        self.e_caps = np.asarray(e_caps, dtype=float)
        self.b_caps = np.asarray(b_caps, dtype=float)
        self.sigma = np.asarray(sigma, dtype=float)
        self.r = float(r)
        self.expand = np.asarray(expand, dtype=float)
        self.cap_from_diode = np.asarray(cap_from_diode, dtype=float)
        self.cap_from_load = np.asarray(cap_from_load, dtype=float)
        self.out_from_caps = np.asarray(out_from_caps, dtype=float)
        self.winding_from_diode = np.asarray(winding_from_diode, dtype=float)
        self.up = np.flatnonzero(self.sigma > 0)
        self.down = np.flatnonzero(self.sigma < 0)
        self.cap_from_reduced = self.cap_from_diode @ self.expand
        self.load_column = self.cap_from_load[:, None]

    def solve(self, e: FloatArray | float, u: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Diode currents and voltages for source EMF ``e`` and states ``u``.

        Parameters
        ----------
        e : float or numpy.ndarray
            Source EMF (V), scalar or shape ``(N,)``.
        u : numpy.ndarray
            Capacitor voltages (V), shape ``(n_caps, N)``.

        Returns
        -------
        tuple of numpy.ndarray
            Diode currents (A) and terminal voltages (V), each ``(n_diodes, N)``.
        """
        i_sol, v_sol = self.solve_reduced(e, u)
        return self.expand @ i_sol, self.expand @ v_sol

    def solve_reduced(self, e: FloatArray | float, u: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Currents and voltages of the diodes of the node equation(s).

        Same as `solve` but before ``expand``: shape ``(K*P, N)``. Either ``K`` or
        ``P`` is 1 in every circuit, so a plain reshape orders them as ``expand``
        expects.
        """
        n_pts = u.shape[1]
        bu = self.b_caps @ u
        if self.e_coef.size == 1:
            big_e = self.e_coef[0] * e + (self.e_caps @ u)[0]
            b = bu
        else:
            big_e = (self.e_coef[:, None] * e + (self.e_caps @ u)).reshape(-1)
            b = np.tile(bu, self.e_coef.size)
        x, i_sol = self._node(big_e, b)
        v_sol = self.sigma[:, None] * (x - b)
        rows = self.expand.shape[1]
        return i_sol.reshape(rows, n_pts), v_sol.reshape(rows, n_pts)

    def _node(self, big_e: FloatArray, b: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Solve ``F(x) = 0`` for every column; return ``x`` and the diode currents."""
        sig = self.sigma[:, None]
        r = self.r
        if self.diode.is_switch:
            # Perfect switches, at most one per side: x is E clipped to the clamps and
            # the clamping diode carries the whole winding current.
            x = big_e
            if self.down.size:
                x = np.maximum(x, b[self.down[0]])
            if self.up.size:
                x = np.minimum(x, b[self.up[0]])
            return x, np.maximum(sig * (big_e - x), 0.0) / r
        upper = b[self.up].min(axis=0) if self.up.size else np.full_like(big_e, np.inf)
        lower = b[self.down].max(axis=0) if self.down.size else np.full_like(big_e, -np.inf)
        d = self.diode
        x = big_e.copy()
        if self.up.size:
            x = np.where(big_e > upper, big_e - r * d.loop_current(big_e - upper, r), x)
        if self.down.size:
            x = np.where(big_e < lower, big_e + r * d.loop_current(lower - big_e, r), x)
        lo = np.minimum(big_e, b.min(axis=0))
        hi = np.maximum(big_e, b.max(axis=0))
        tol = 1e-13 * (np.abs(big_e) + np.abs(b).max(axis=0) + 1.0)
        for _ in range(100):
            v = sig * (x - b)
            i = d.current(v)
            f = (big_e - x) / r - (sig * i).sum(axis=0)
            df = -1.0 / r - d.conductance(v).sum(axis=0)
            lo = np.where(f > 0.0, x, lo)
            hi = np.where(f < 0.0, x, hi)
            xn = x - f / df
            xn = np.where((xn >= lo) & (xn <= hi), xn, 0.5 * (lo + hi))
            done = np.abs(xn - x) <= tol
            x = xn
            if done.all():
                break
        else:
            raise RuntimeError("refsolver: diode network did not converge")
        return x, d.current(sig * (x - b))


def _initial_state(circuit: Circuit) -> FloatArray:
    """No-load capacitor voltages (V), scaled down so that shooting starts charging."""
    vpk = circuit.vpk
    if circuit.topology == "doubler":
        x = np.array([vpk, vpk])
    elif circuit.topology == "cascade":
        x = np.full(2 * circuit.stages, 2.0 * vpk)
        x[0] = vpk
    else:
        x = np.array([vpk])
    return 0.9 * x


class _Integrator:
    """Right-hand side ``du/dt`` and period integration for one circuit."""

    def __init__(self, circuit: Circuit, rtol: float, steps_per_period: int, method: str) -> None:
        self.circuit = circuit
        self.net = _Network(circuit)
        self.rtol = rtol
        self.atol = rtol * circuit.vpk
        self.max_step = circuit.period / steps_per_period
        self.method = method
        self.vscale = circuit.vpk

    def emf(self, t: FloatArray, phase: float) -> FloatArray:
        """Source EMF (V) at times ``t`` (s) for a phase (rad)."""
        c = self.circuit
        return c.vpk * np.sin(c.omega * t + phase)

    def derivative(self, t: float, u: FloatArray, phase: float) -> FloatArray:
        """``du/dt`` (V/s) for states ``u`` of shape ``(n_caps, N)``."""
        net = self.net
        c = self.circuit
        i_sol, _ = net.solve_reduced(c.vpk * math.sin(c.omega * t + phase), u)
        i_load = (net.out_from_caps @ u) * (1.0 / c.rl)
        return (net.cap_from_reduced @ i_sol - net.load_column * i_load) * (1.0 / c.c)

    def integrate(self, u0: FloatArray, t_end: float, phase: float,
                  t_eval: FloatArray | None = None) -> tuple[FloatArray, FloatArray]:
        """Integrate states ``u0`` (``(n_caps, N)``) from 0 to ``t_end`` (s).

        Returns the final states and, if ``t_eval`` is given, the states there,
        shape ``(n_caps, N, len(t_eval))``.
        """
        shape = u0.shape

        def rhs(t: float, y: FloatArray) -> FloatArray:
            return self.derivative(t, y.reshape(shape), phase).reshape(-1)

        sol = solve_ivp(rhs, (0.0, t_end), u0.reshape(-1), method=self.method, rtol=self.rtol,
                        atol=self.atol, max_step=self.max_step, t_eval=t_eval)
        if not sol.success:
            raise RuntimeError(f"refsolver: integration failed: {sol.message}")
        y_end = sol.y[:, -1].reshape(shape) if t_eval is None else None
        if t_eval is not None:
            ys = sol.y.reshape(shape + (-1,))
            return ys[..., -1], ys
        assert y_end is not None
        return y_end, np.empty(0)

    def period_map(self, x: FloatArray, h: float) -> tuple[FloatArray, FloatArray]:
        """``Phi_T(x)`` and its finite-difference Jacobian (step ``h``, V)."""
        m = x.size
        cols = x[:, None] + np.hstack([np.zeros((m, 1)), h * np.eye(m)])
        y, _ = self.integrate(cols, self.circuit.period, 0.0)
        phi = y[:, 0]
        return phi, (y[:, 1:] - phi[:, None]) / h


def _shoot(integ: _Integrator, max_iter: int) -> tuple[FloatArray, float, int]:
    """Find the periodic state by Newton shooting on ``Phi_T(x) - x = 0``.

    Newton with a finite-difference Jacobian and a backtracking line search runs
    until the step is negligible; then the state is polished with the last Jacobian
    against the plain single-trajectory map (the one the figures are taken from,
    whose step sequence differs slightly from the multi-column one).

    Returns
    -------
    tuple
        Periodic state (V), relative residual of the plain map, Newton iterations.
    """
    vs = integ.vscale
    period = integ.circuit.period
    h = 1e-6 * vs
    x = _initial_state(integ.circuit)
    m = x.size
    phi, jac = integ.period_map(x, h)
    res = phi - x
    iters = 0
    while np.max(np.abs(res)) > 1e-3 * SHOOTING_TOLERANCE * vs:
        if iters == max_iter:
            raise RuntimeError("refsolver: shooting did not converge")
        iters += 1
        dx = np.linalg.solve(jac - np.eye(m), -res)
        big = np.max(np.abs(dx)) / (0.5 * vs)
        if big > 1.0:
            dx /= big
        lam = 1.0
        while True:
            xn = np.maximum(x + lam * dx, 0.0)
            phin, jacn = integ.period_map(xn, h)
            resn = phin - xn
            if np.linalg.norm(resn) < np.linalg.norm(res) or lam < 1e-3:
                break
            lam *= 0.5
        step = np.max(np.abs(xn - x))
        x, res, jac = xn, resn, jacn
        if step <= 1e-3 * SHOOTING_TOLERANCE * vs:
            break
    newton = np.linalg.inv(jac - np.eye(m))
    for _ in range(6):
        y, _ = integ.integrate(x[:, None], period, 0.0)
        res = y[:, 0] - x
        residual = float(np.max(np.abs(res)) / vs)
        if residual <= 0.25 * SHOOTING_TOLERANCE:
            break
        x = np.maximum(x - newton @ res, 0.0)
    return x, residual, iters


def steady_state(circuit: Circuit, *, rtol: float = 1e-10, steps_per_period: int = 2000,
                 points: int = 20000, method: str = "RK45", max_iter: int = 40) -> SteadyState:
    """Periodic steady state of a capacitor-input rectifier.

    Parameters
    ----------
    circuit : Circuit
        Circuit, source, load and diode law.
    rtol : float
        Relative tolerance of ``solve_ivp``; the absolute tolerance is
        ``rtol * Vpk`` (V).
    steps_per_period : int
        ``max_step`` is the period divided by this (dimensionless).
    points : int
        Uniform samples per period for the figures (dimensionless).
    method : str
        ``solve_ivp`` method; ``"RK45"`` by default, ``"Radau"`` for very stiff
        cases (tiny ``Rs`` or ``r_on`` with large ``C``).
    max_iter : int
        Newton iteration limit.

    Returns
    -------
    SteadyState
        Figures over one period and the waveforms.

    Raises
    ------
    RuntimeError
        If the periodic state is not found to ``1e-9`` of ``Vpk``.

    Examples
    --------
    >>> ss = steady_state(Circuit("half-wave", 100.0, 50.0, 1.0, 1e3, 1e-3))
    >>> 130.0 < ss.vdc < 141.5
    True
    """
    integ = _Integrator(circuit, rtol, steps_per_period, method)
    x, residual, iters = _shoot(integ, max_iter)
    period = circuit.period
    t = np.arange(points + 1) * (period / points)
    y_end, ys = integ.integrate(x[:, None], period, 0.0, t_eval=t)
    vpk = circuit.vpk
    if residual > SHOOTING_TOLERANCE:
        raise RuntimeError(f"refsolver: shooting residual {residual:.2e} exceeds {SHOOTING_TOLERANCE:.0e}")
    u = ys[:, 0, :-1]  # drop the endpoint: a uniform periodic grid
    t = t[:-1]
    net = integ.net
    i_d, v_d = net.solve(integ.emf(t, 0.0), u)
    vout = net.out_from_caps @ u
    i_load = vout / circuit.rl
    i_cap = net.cap_from_diode @ i_d - np.outer(net.cap_from_load, i_load)
    i_w = net.winding_from_diode @ i_d
    vdc = float(vout.mean())

    def rms(a: FloatArray) -> FloatArray:
        return np.sqrt(np.mean(a * a, axis=-1))

    cap_ac = i_cap - i_cap.mean(axis=1, keepdims=True)
    return SteadyState(
        vdc=vdc,
        vout_max=float(vout.max()),
        vout_min=float(vout.min()),
        ripple_pp=float(vout.max() - vout.min()),
        ripple_rms=float(rms(vout - vdc)),
        idc=float(i_load.mean()),
        diode_peak=float(i_d.max()),
        diode_avg=float(i_d.mean(axis=1).max()),
        diode_rms=float(rms(i_d).max()),
        piv=float(np.max(-v_d)),
        source_rms=float(rms(i_w).max()),
        cap_ripple_rms=float(rms(cap_ac).max()),
        time=t,
        vout=vout,
        cap_voltage=u,
        diode_current=i_d,
        residual=residual,
        newton_iterations=iters,
    )


def switch_on(circuit: Circuit, phase_deg: float = 90.0, *, cycles: int = 5,
              rtol: float = 1e-10, steps_per_period: int = 2000, points_per_period: int = 4000,
              method: str = "RK45") -> SwitchOn:
    """Switch-on transient with every capacitor empty at ``t = 0``.

    Parameters
    ----------
    circuit : Circuit
        Circuit, source, load and diode law.
    phase_deg : float
        Source phase at switch-on (degrees); 90 is the crest, 0 the rising zero
        crossing.
    cycles : int
        Source periods simulated (dimensionless).
    rtol : float
        Relative tolerance of ``solve_ivp``.
    steps_per_period : int
        ``max_step`` is the period divided by this.
    points_per_period : int
        Samples per period for the figures.
    method : str
        ``solve_ivp`` method.

    Returns
    -------
    SwitchOn
        Surge current, highest capacitor voltage and waveforms.

    Examples
    --------
    >>> s = switch_on(Circuit("half-wave", 100.0, 50.0, 10.0, 1e3, 1e-3), 90.0, cycles=1)
    >>> round(s.surge, 3)
    14.142
    """
    integ = _Integrator(circuit, rtol, steps_per_period, method)
    phase = math.radians(phase_deg)
    n = cycles * points_per_period
    t = np.linspace(0.0, cycles * circuit.period, n + 1)
    u0 = np.zeros((integ.net.n_caps, 1))
    _, ys = integ.integrate(u0, t[-1], phase, t_eval=t)
    u = ys[:, 0, :]
    i_d, _ = integ.net.solve(integ.emf(t, phase), u)
    i_max = i_d.max(axis=0)
    k = int(np.argmax(i_max))
    return SwitchOn(
        surge=float(i_max[k]),
        surge_time=float(t[k]),
        vcap_max=float(np.max(np.abs(u))),
        time=t,
        vout=integ.net.out_from_caps @ u,
        diode_current=i_d,
    )


__all__ = [
    "Circuit",
    "Diode",
    "SteadyState",
    "SwitchOn",
    "TOPOLOGIES",
    "steady_state",
    "switch_on",
    "thermal_voltage",
]
