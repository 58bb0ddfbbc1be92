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
is unique and bracketed by ``min(E, b)`` and ``max(E, b)``. For the ideal switch (at
most one diode of each orientation) it is closed form: ``x`` is ``E`` clipped to
``[b_down, b_up]`` and the clamping diode carries ``|E - x|/R``. Otherwise a safeguarded
Newton iteration (bisection fallback) starts from the closed-form current of the loop
through the diode that clamps first (Wright-omega form for the exponential law) and
stops when its step is below ``1e-13`` of the voltage scale. The reductions:

- half-wave: ``x = v(a)``, ``E = e``, ``R = Rs``, one diode with ``b = u``.
- centre-tap: the two halves are independent half-wave problems with ``E = +e`` and
  ``E = -e``.
- bridge: ``x = v(a1)``. Kirchhoff's law at a1 and a2 gives ``h(v(a1)) = -h(v(a2))``
  with ``h(v) = i_D(v - u) - i_D(-v)``, which is increasing and odd about ``u/2``, so
  ``v(a2) = u - v(a1)`` exactly for identical diodes. Then ``E = (e + u)/2``,
  ``R = Rs/2``, D1 (``b = u``, ``sigma = +1``) and D3 (``b = 0``, ``sigma = -1``),
  and ``i_D2 = i_D3``, ``i_D4 = i_D1``.
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

Integration and shooting
------------------------
``du/dt`` is integrated with ``scipy.integrate.solve_ivp`` (LSODA by default, which
turns stiff where a tiny ``Rs`` makes the conduction loops fast; ``rtol = 1e-11``,
``atol = rtol*Vpk``, ``max_step = T/2000``). The periodic steady state is found by
shooting on ``Phi_T(x0) - x0 = 0``, ``Phi_T`` mapping the capacitor voltages over one
period ``T``:

1. trust-region Newton at ``rtol = 1e-7``; the Jacobian of ``Phi_T`` comes from
   finite-difference copies of the state integrated in the same call (same step
   sequence); iterates stay between 0 and the unloaded ideal-diode voltages;
2. chord iterations with that Jacobian on the full-accuracy single-trajectory map,
   until ``max|Phi_T(x0) - x0| <= 0.5e-9 * Vpk``; the result is rejected above
   ``1e-9 * Vpk``.

Because shooting needs only a handful of periods, large ``omega*C*RL`` (1000 and more)
costs no more than small. The figures are taken from the dense output of the final
period, sampled on a uniform grid joined with the integrator's own step times (which
cluster where a diode switches); means and RMS values use the trapezoidal rule.

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
from functools import cached_property
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.integrate import solve_ivp
from scipy.optimize import OptimizeResult, brentq
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
        Thermal voltage (V); 0.0258649... V at 300.15 K.

    Examples
    --------
    >>> round(thermal_voltage(), 7)
    0.0258649
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
        On-resistance (ohm), ideal model only; 0 means a perfect switch. Values far
        below ``Rs`` (under about ``1e-4 * Rs``) make the equations very stiff and
        the solve slow.
    temperature : float
        Junction temperature (K) for ``Vt = k*T/q``.

    Examples
    --------
    >>> d = Diode("exponential", i_s=1e-9, n=1.8, r_d=0.05)
    >>> round(float(d.voltage(1.0)), 3)
    1.015
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

    @cached_property
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
            Current (A).
        """
        return self.current_and_conductance(v)[0]

    def current_and_conductance(self, v: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Current and small-signal conductance at a terminal voltage.

        For the exponential law with ``Rd > 0`` the closed form is
        ``i = (N*Vt/Rd) * W - Is`` and ``di/dv = W / ((1 + W) * Rd)`` with
        ``W = omega(ln(Is*Rd/(N*Vt)) + (v + Is*Rd)/(N*Vt))``, ``omega`` being the
        Wright omega function (``W = LambertW(exp(z))`` without overflow).

        Parameters
        ----------
        v : numpy.ndarray
            Terminal voltage, anode minus cathode (V).

        Returns
        -------
        tuple of numpy.ndarray
            Current (A) and conductance (S).
        """
        if self.model == "ideal":
            on = v > 0.0
            return np.where(on, v, 0.0) / self.r_on, np.where(on, 1.0 / self.r_on, 0.0)
        nvt = self.n_vt
        if self.r_d > 0.0:
            w = wrightomega(self._z0 + v / nvt)
            return nvt / self.r_d * w - self.i_s, w / ((1.0 + w) * self.r_d)
        ex = np.exp(np.minimum(v / nvt, 700.0))
        return self.i_s * (ex - 1.0), self.i_s / nvt * ex

    @cached_property
    def _z0(self) -> float:
        return math.log(self.i_s * self.r_d / self.n_vt) + self.i_s * self.r_d / self.n_vt

    def loop_current(self, u: FloatArray, r: float) -> FloatArray:
        """Current of one diode in series with a resistor.

        Solves ``u = v_D(i) + i*r`` for ``i`` in closed form.

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
        nvt = self.n_vt
        rt = self.r_d + r
        if rt == 0.0:
            return self.i_s * np.expm1(np.minimum(u / nvt, 700.0))
        z = math.log(self.i_s * rt / nvt) + (u + self.i_s * rt) / nvt
        return nvt / rt * wrightomega(z) - self.i_s


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
    shooting_iterations : int
        Period integrations of the shooting (trust-region Newton and chord
        iterations; line-search trials not counted).
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
    shooting_iterations: int


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
        Sample times (s), switch-on at 0: a uniform grid joined with the
        integrator's step times.
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
    """Tables of one circuit's node equation and Kirchhoff maps (module docstring).

    For each of the ``P`` independent node problems (2 for the centre-tap, else 1)
    ``E = e_coef[p]*e + e_caps @ u`` and ``b = b_caps @ u``. The ``K`` diodes of a
    problem have orientations ``sigma``. The solved currents, reshaped to
    ``(K*P, N)`` (either ``K`` or ``P`` is 1), give the physical diode currents by
    ``expand``; the capacitor currents are ``cap_from_diode @ i_D - cap_from_load *
    vout/RL`` with ``vout = out_from_caps @ u``; the winding currents are
    ``winding_from_diode @ i_D``.
    """

    def __init__(self, circuit: Circuit) -> None:
        topo = circuit.topology
        rs = circuit.rs
        if topo == "half-wave":
            # x = v(a); D1 a->out: b = u.
            self._setup(n_caps=1, e_coef=[1.0], e_caps=[[0.0]], b_caps=[[1.0]], sigma=[1.0], r=rs,
                        expand=[[1.0]], cap_from_diode=[[1.0]], cap_from_load=[1.0],
                        out_from_caps=[1.0], winding_from_diode=[[1.0]])
        elif topo == "centre-tap":
            # Two half-wave problems with E = +e and E = -e.
            self._setup(n_caps=1, e_coef=[1.0, -1.0], e_caps=[[0.0]], b_caps=[[1.0]], sigma=[1.0], r=rs,
                        expand=np.eye(2), cap_from_diode=[[1.0, 1.0]], cap_from_load=[1.0],
                        out_from_caps=[1.0], winding_from_diode=np.eye(2))
        elif topo == "bridge":
            # x = v(a1), v(a2) = u - x; solved D1 (b = u) and D3 (b = 0); D2 = D3, D4 = D1.
            self._setup(n_caps=1, e_coef=[0.5], e_caps=[[0.5]], b_caps=[[1.0], [0.0]], sigma=[1.0, -1.0],
                        r=rs / 2.0, expand=[[1, 0], [0, 1], [0, 1], [1, 0]],
                        cap_from_diode=[[1.0, 1.0, 0.0, 0.0]], cap_from_load=[1.0], out_from_caps=[1.0],
                        winding_from_diode=[[1.0, 0.0, -1.0, 0.0]])
        elif topo == "doubler":
            # States u1 = v(out) - v(m), u2 = v(m); x = v(a); D1 b = u1 + u2, D2 b = 0.
            self._setup(n_caps=2, e_coef=[1.0], e_caps=[[0.0, 1.0]], b_caps=[[1.0, 1.0], [0.0, 0.0]],
                        sigma=[1.0, -1.0], r=rs, expand=np.eye(2), cap_from_diode=np.eye(2),
                        cap_from_load=[1.0, 1.0], out_from_caps=[1.0, 1.0], winding_from_diode=[[1.0, -1.0]])
        else:
            # States u(2k-1) = v(p_k) - v(p_(k-1)), u(2k) = v(s_k) - v(s_(k-1)); x = v(p0).
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
            evens = np.tile([0.0, 1.0], n)
            self._setup(n_caps=m, e_coef=[1.0], e_caps=np.zeros((1, m)), b_caps=b_caps, sigma=sigma, r=rs,
                        expand=np.eye(m), cap_from_diode=cap_d, cap_from_load=evens, out_from_caps=evens,
                        winding_from_diode=[np.tile([-1.0, 1.0], n)])
        self.diode = circuit.diode
        self.vscale = circuit.vpk * (2.0 * circuit.stages if topo == "cascade" else 2.0)  # V

    def _setup(self, *, n_caps: int, e_coef: ArrayLike, e_caps: ArrayLike, b_caps: ArrayLike,
               sigma: ArrayLike, r: float, expand: ArrayLike, cap_from_diode: ArrayLike,
               cap_from_load: ArrayLike, out_from_caps: ArrayLike, winding_from_diode: ArrayLike) -> None:
        self.n_caps = n_caps
        self.e_coef = np.asarray(e_coef, dtype=float)
        self.e_caps = np.asarray(e_caps, dtype=float)
        self.b_caps = np.asarray(b_caps, dtype=float)
        self.sigma = np.asarray(sigma, dtype=float)
        self.r = float(r)  # ohm
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
        # Start from the closed-form current of the loop through the diode that
        # clamps first on each side; Newton then adds the other diodes (exact in one
        # step for piecewise-linear laws when that guess has the right active set).
        d = self.diode
        upper = b[self.up].min(axis=0) if self.up.size > 1 else b[self.up[0]]
        if self.down.size:
            lower = b[self.down].max(axis=0) if self.down.size > 1 else b[self.down[0]]
            over, under = big_e - upper, lower - big_e
            toward_up = over >= under
            x = big_e - np.where(toward_up, r, -r) * d.loop_current(np.maximum(over, under), r)
        else:
            x = big_e - r * d.loop_current(big_e - upper, r)
        tol = 1e-13 * self.vscale
        lo = hi = x
        for it in range(100):
            i, g = d.current_and_conductance(sig * (x - b))
            f = (big_e - x) / r - (sig * i).sum(axis=0)
            step = f / (-1.0 / r - g.sum(axis=0))
            if np.all(np.abs(step) <= tol):
                return x, i
            if it == 0:
                # F is decreasing and F(min(E, b)) >= 0 >= F(max(E, b)).
                lo = np.minimum(big_e, b.min(axis=0))
                hi = np.maximum(big_e, b.max(axis=0))
            lo = np.where(f > 0.0, x, lo)
            hi = np.where(f < 0.0, x, hi)
            xn = x - step
            x = np.where((xn >= lo) & (xn <= hi), xn, 0.5 * (lo + hi))
        raise RuntimeError("refsolver: diode network did not converge")


def _no_load_state(circuit: Circuit) -> FloatArray:
    """Capacitor voltages (V) of the unloaded circuit with ideal diodes.

    No periodic state of the loaded circuit exceeds them, so shooting keeps its
    iterates below them (and above zero).
    """
    vpk = circuit.vpk
    if circuit.topology == "doubler":
        return np.array([vpk, vpk])
    if circuit.topology == "cascade":
        x = np.full(2 * circuit.stages, 2.0 * vpk)
        x[0] = vpk
        return x
    return np.array([vpk])


class _Integrator:
    """Right-hand side ``du/dt`` and period integration for one circuit."""

    def __init__(self, circuit: Circuit, rtol: float, steps_per_period: int, method: str) -> None:
        self.circuit = circuit
        self.net = _Network(circuit)
        self.rtol = rtol
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

    def integrate(self, u0: FloatArray, t_end: float, phase: float, *, rtol: float | None = None,
                  coarse: bool = False, dense: bool = False) -> tuple[FloatArray, OptimizeResult]:
        """Integrate the states from 0 to ``t_end``.

        Parameters
        ----------
        u0 : numpy.ndarray
            Initial capacitor voltages (V), shape ``(n_caps, N)``; the ``N`` columns
            are independent copies integrated together (same step sequence).
        t_end : float
            End time (s).
        phase : float
            Source phase at ``t = 0`` (rad).
        rtol : float, optional
            Relative tolerance; the integrator's own by default. The absolute
            tolerance is ``rtol * Vpk`` (V).
        coarse : bool
            Allow steps four times longer than ``max_step`` (for the first Newton
            stage, which only has to land near the periodic state).
        dense : bool
            Keep the dense output (``N = 1`` only); ``sol.sol(t)`` then gives the
            states at any ``t`` (s) and ``sol.t`` the step times (s).

        Returns
        -------
        tuple
            Final states ``(n_caps, N)`` (V) and the ``solve_ivp`` result.
        """
        m, cols = u0.shape
        rtol = self.rtol if rtol is None else rtol

        # The flat state is column by column, so the Jacobian is block diagonal.
        def rhs(t: float, y: FloatArray) -> FloatArray:
            return self.derivative(t, y.reshape(cols, m).T, phase).T.reshape(-1)

        def jac(t: float, y: FloatArray) -> FloatArray:
            u = y.reshape(cols, m).T
            delta = 1e-7 * self.vscale
            pert = (u[:, :, None] + delta * np.eye(m)[:, None, :]).reshape(m, cols * m)
            f0 = self.derivative(t, u, phase)
            f1 = self.derivative(t, pert, phase).reshape(m, cols, m)
            blocks = (f1 - f0[:, :, None]) / delta  # [row, column copy, state]
            out = np.zeros((cols * m, cols * m))
            for k in range(cols):
                out[k * m:(k + 1) * m, k * m:(k + 1) * m] = blocks[:, k, :]
            return out

        kwargs = {} if self.method in ("RK23", "RK45", "DOP853") else {"jac": jac}
        sol = solve_ivp(rhs, (0.0, t_end), u0.T.reshape(-1), method=self.method, rtol=rtol,
                        atol=rtol * self.vscale, max_step=self.max_step * (4.0 if coarse else 1.0),
                        dense_output=dense,
                        **kwargs)
        if not sol.success:
            raise RuntimeError(f"refsolver: integration failed: {sol.message}")
        return sol.y[:, -1].reshape(cols, m).T, sol

    def period_map(self, x: FloatArray, h: float, rtol: float | None = None,
                   coarse: bool = False) -> tuple[FloatArray, FloatArray]:
        """``Phi_T(x)`` (V) and its finite-difference Jacobian (step ``h``, V)."""
        m = x.size
        cols = x[:, None] + np.hstack([np.zeros((m, 1)), h * np.eye(m)])
        y, _ = self.integrate(cols, self.circuit.period, 0.0, rtol=rtol, coarse=coarse)
        phi = y[:, 0]
        return phi, (y[:, 1:] - phi[:, None]) / h


def _trust_region_step(jac: FloatArray, res: FloatArray, radius: float) -> FloatArray:
    """Step ``dx`` minimising ``|res + jac @ dx|`` subject to ``|dx| <= radius``.

    The Newton step if it fits; otherwise the Levenberg-Marquardt step whose length
    is the radius (found from the singular value decomposition). Directions in which
    the period map barely contracts (a capacitor that neither charges nor
    discharges much in one period) get small steps instead of huge ones.
    """
    u_mat, sv, vt = np.linalg.svd(jac)
    coef = u_mat.T @ res
    if sv.min() > 1e-14 * sv.max():
        dx = -(vt.T @ (coef / sv))
        if np.linalg.norm(dx) <= radius:
            return dx

    def excess(mu: float) -> float:
        return float(np.linalg.norm(sv * coef / (sv * sv + mu))) - radius

    mu_hi = float(np.linalg.norm(sv * coef)) / radius
    mu_lo = 1e-30 * (mu_hi + 1e-300)
    mu = brentq(excess, mu_lo, mu_hi, xtol=1e-14 * mu_hi, rtol=1e-10) if excess(mu_lo) > 0 else mu_lo
    return -(vt.T @ (sv * coef / (sv * sv + mu)))


def _shoot(integ: _Integrator, max_iter: int) -> tuple[OptimizeResult, float, int]:
    """Find the periodic state by shooting on ``Phi_T(x) - x = 0``.

    1. Trust-region Newton at a coarse tolerance (``rtol = 1e-7``, steps up to four
       times ``max_step``), with the Jacobian of ``Phi_T`` from finite-difference
       copies of the state integrated in the same call, until the residual is below
       ``1e-6`` of ``Vpk``. Iterates stay between 0 and the unloaded voltages.
    2. Chord iterations at the integrator's own tolerance on the plain
       single-trajectory map (the one the figures are taken from), with that
       Jacobian, until the residual is below half the shooting tolerance; if they
       stop contracting above the integration noise, the Jacobian is recomputed
       once at full tolerance.

    Parameters
    ----------
    integ : _Integrator
        The circuit's integrator.
    max_iter : int
        Iteration limit for each stage.

    Returns
    -------
    tuple
        ``solve_ivp`` result of the periodic trajectory over one period (with dense
        output), its relative residual (dimensionless), iterations.
    """
    vs = integ.vscale
    x_max = _no_load_state(integ.circuit)
    x = 0.9 * x_max
    m = x.size
    eye = np.eye(m)
    iters = 0
    radius = 0.5 * vs
    coarse_rtol = max(integ.rtol, 1e-7)
    h = 1e-5 * vs
    phi, jac = integ.period_map(x, h, coarse_rtol, coarse=True)
    res = phi - x
    while np.max(np.abs(res)) > 1e-6 * vs:
        if iters == max_iter:
            raise RuntimeError("refsolver: shooting did not converge (coarse stage)")
        iters += 1
        dx = _trust_region_step(jac - eye, res, radius)
        xn = np.clip(x + dx, 0.0, x_max)
        phin, jacn = integ.period_map(xn, h, coarse_rtol, coarse=True)
        resn = phin - xn
        norm0 = float(np.linalg.norm(res))
        predicted = norm0**2 - float(np.linalg.norm(res + (jac - eye) @ (xn - x))) ** 2
        actual = norm0**2 - float(np.linalg.norm(resn)) ** 2
        ratio = actual / predicted if predicted > 0 else -1.0
        step = float(np.linalg.norm(xn - x))
        if ratio < 0.25:
            radius = 0.25 * step
        elif ratio > 0.75 and step > 0.99 * radius:
            radius = 2.0 * radius
        if actual > 0:
            x, res, jac = xn, resn, jacn
        if radius < 1e-9 * vs:
            break  # stalled at the coarse noise level: let the chord stage decide
    newton = np.linalg.pinv(jac - eye, rcond=1e-12)
    previous = math.inf
    refreshed = False
    for _ in range(max_iter):
        iters += 1
        y_end, sol = integ.integrate(x[:, None], integ.circuit.period, 0.0, dense=True)
        res = y_end[:, 0] - x
        residual = float(np.max(np.abs(res)) / vs)
        if residual <= 0.5 * SHOOTING_TOLERANCE:
            break
        if residual > 0.5 * previous and residual > 100.0 * integ.rtol and not refreshed:
            # The chord iteration stopped contracting above the integration noise.
            _, jac = integ.period_map(x, 1e-6 * vs)
            newton = np.linalg.pinv(jac - eye, rcond=1e-12)
            refreshed = True
        previous = residual
        x = np.clip(x - newton @ res, 0.0, x_max)
    return sol, residual, iters


def steady_state(circuit: Circuit, *, rtol: float = 1e-11, steps_per_period: int = 2000,
                 points: int = 20000, method: str = "LSODA", max_iter: int = 40) -> SteadyState:
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
        Uniform samples per period (dimensionless); the figures use these joined
        with the integrator's step times, the waveforms these alone.
    method : str
        ``solve_ivp`` method. ``"LSODA"`` (the default) switches to a stiff
        method where a tiny ``Rs`` or ``r_on`` makes the conduction loops fast.
    max_iter : int
        Iteration limit of each shooting stage.

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
    sol, residual, iters = _shoot(integ, max_iter)
    if residual > SHOOTING_TOLERANCE:
        raise RuntimeError(
            f"refsolver: shooting residual {residual:.2e} exceeds {SHOOTING_TOLERANCE:.0e} "
            "(try a larger rtol margin, a smaller max step, or a less extreme load)"
        )
    period = circuit.period
    uniform = np.arange(points) * (period / points)
    # Figures on the uniform grid joined with the integrator's own step times (which
    # cluster where a diode switches); means by the trapezoidal rule.
    t = np.union1d(np.append(uniform, period), sol.t)
    u = sol.sol(t)
    net = integ.net
    i_d, v_d = net.solve(integ.emf(t, 0.0), u)
    vout = net.out_from_caps @ u
    i_load = vout / circuit.rl
    i_cap = net.cap_from_diode @ i_d - net.load_column * i_load
    i_w = net.winding_from_diode @ i_d

    def mean(a: FloatArray) -> FloatArray:
        return np.trapezoid(a, t, axis=-1) / period

    def rms(a: FloatArray) -> FloatArray:
        return np.sqrt(mean(a * a))

    vdc = float(mean(vout))
    cap_ac = i_cap - mean(i_cap)[:, None]
    pick = np.searchsorted(t, uniform)
    return SteadyState(
        vdc=vdc,
        vout_max=float(vout.max()),
        vout_min=float(vout.min()),
        ripple_pp=float(vout.max() - vout.min()),
        ripple_rms=float(rms(vout - vdc)),
        idc=float(mean(i_load)),
        diode_peak=float(i_d.max()),
        diode_avg=float(mean(i_d).max()),
        diode_rms=float(rms(i_d).max()),
        piv=float(np.max(-v_d)),
        source_rms=float(rms(i_w).max()),
        cap_ripple_rms=float(rms(cap_ac).max()),
        time=uniform,
        vout=vout[pick],
        cap_voltage=u[:, pick],
        diode_current=i_d[:, pick],
        residual=residual,
        shooting_iterations=iters,
    )


def switch_on(circuit: Circuit, phase_deg: float = 90.0, *, cycles: int = 5,
              rtol: float = 1e-11, steps_per_period: int = 2000, points_per_period: int = 4000,
              method: str = "LSODA") -> SwitchOn:
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
    t_end = cycles * circuit.period
    u0 = np.zeros((integ.net.n_caps, 1))
    _, sol = integ.integrate(u0, t_end, phase, dense=True)
    t = np.union1d(np.linspace(0.0, t_end, cycles * points_per_period + 1), sol.t)
    u = sol.sol(t)
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
    "TOPOLOGIES",
    "Circuit",
    "Diode",
    "SteadyState",
    "SwitchOn",
    "steady_state",
    "switch_on",
    "thermal_voltage",
]
