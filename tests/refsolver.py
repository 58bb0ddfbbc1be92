"""Reference solver: steady state and switch-on of rectifiers with capacitor or choke input.

Responsibility: compute, with numpy and scipy only, the periodic steady state and the
switch-on transient of rectifiers fed by a sine source, so that simkit's ngspice results
can be checked against a program that shares no code with simkit. Nothing in this module
imports simkit, PySpice or ngspice.

Circuits
--------
The source is ``Vs(t) = sqrt(2) * vrms * sin(2*pi*f*t + phase)`` in series with ``Rs``
in every winding; ``RL`` is the load across the output and every capacitor of the
rectifier is ``C``.
Node 0 is ground and "a->b" is a diode with anode ``a`` and cathode ``b``. The node
names are those the nodal formulation (below) uses.

``half-wave``
    Winding 0->ac1; D1 ac1->rect; C from rect to 0; RL from rect to 0.
``centre-tap``
    Two half-windings from node 0 to ac1 and ac2, EMFs ``+Vs`` and ``-Vs``, each with
    its own ``Rs``; D1 ac1->rect, D2 ac2->rect; C from rect to 0; RL from rect to 0.
``bridge``
    One floating winding (EMF ``Vs`` from ac2 to ac1, series ``Rs``); D1 ac1->rect,
    D2 ac2->rect, D3 0->ac1, D4 0->ac2; C from rect to 0; RL from rect to 0.
``doubler``
    Full-wave doubler: winding from mid to ac1; D1 ac1->rect, D2 0->ac1; C1 rect-mid,
    C2 mid-0; RL from rect to 0. The output is about ``2*Vpk``.
``cascade``
    Half-wave Cockcroft-Walton chain with ``n`` stages: winding from 0 to p0; for
    stage k = 1..n: C(2k-1) from p(k) to p(k-1), D(2k-1) s(k-1)->p(k) (s0 = 0),
    D(2k) p(k)->s(k), C(2k) from s(k) to s(k-1). Output s(n) (= rect), RL from s(n)
    to 0.

Options, each changing the circuit above in one place:

``leakage`` (H, with ``winding_snubber``)
    Every winding gets a series inductance after its ``Rs`` (EMF, ``Rs``, ``L`` and
    then the winding terminal), and a series RC snubber (``C_sn`` on the terminal's
    side, then ``R_sn``) across its two terminals.
``choke`` (half-wave, centre-tap, bridge)
    Choke input: the rectifier output ``rect`` carries a series RC snubber to ground
    and feeds a choke ``L`` (with its winding resistance ``dcr``) to the output node
    ``f1``; the circuit's capacitor ``C`` and ``RL`` sit at ``f1``.
``tie`` (ohm; bridge and doubler)
    Both terminals of the floating winding (ac1 and ac2, or ac1 and mid) are tied to
    ground through this resistance.
``filters`` (sections)
    Further sections after the output above, in order: ``c`` a capacitor to ground at
    the present node, ``r`` a series resistor and ``l`` a series inductor (with its
    winding resistance) to the next node; ``RL`` moves to the last node.

Equations
---------
The states are the capacitor voltages ``u`` (V) and the inductor currents ``i_L`` (A).
At a given instant the capacitors act as voltage sources and the inductors as current
sources, so what remains is a resistive network of the windings' EMFs and
resistances, the resistors and the diodes. Two formulations solve it.

*Reduced* (capacitor input without leakage, ties or filter sections; the default there). In every
circuit above that network reduces to one scalar node equation (two independent ones
for the centre-tap) in a node voltage ``x``::

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

- half-wave: ``x = v(ac1)``, ``E = e``, ``R = Rs``, one diode with ``b = u``.
- centre-tap: the two halves are independent half-wave problems with ``E = +e`` and
  ``E = -e``.
- bridge: ``x = v(ac1)``. Kirchhoff's law at ac1 and ac2 gives ``h(v(ac1)) = -h(v(ac2))``
  with ``h(v) = i_D(v - u) - i_D(-v)``, which is increasing and odd about ``u/2``, so
  ``v(ac2) = u - v(ac1)`` exactly for identical diodes. Then ``E = (e + u)/2``,
  ``R = Rs/2``, D1 (``b = u``, ``sigma = +1``) and D3 (``b = 0``, ``sigma = -1``),
  and ``i_D2 = i_D3``, ``i_D4 = i_D1``.
- doubler: ``x = v(ac1)``, ``E = u2 + e``, ``R = Rs``; D1 ``b = u1 + u2``, D2 ``b = 0``.
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

*Nodal* (any circuit; required with leakage, a choke, ties or filter sections). Modified nodal analysis
of the network with the node voltages ``v`` (ground excluded) and the capacitor branch
currents ``i_C`` (from the capacitor's first node through it to its second) as
unknowns::

    G v + B i_C + A^T i_D(A v) = W e - K i_L     (Kirchhoff's current law, every node)
    B^T v = u                                    (every capacitor)

``G`` holds the conductances of the resistors and of each winding's ``Rs`` (a winding
without leakage is its Norton equivalent: ``e/Rs`` into its first terminal, out of its
second, ``W`` collecting these ``1/Rs`` with the half-winding's sign); ``B``, ``K`` and
``A`` are the +1/-1 incidence matrices of the capacitors, inductors and diodes (first
node +1). A winding with leakage is ``e/Rs`` with ``1/Rs`` into an inner node, then its
inductor to the terminal. These are the conditions for the minimum of the network's
content ``v'Gv/2 - (W e - K i_L)'v + sum_k Psi(A_k v)`` (``Psi`` the diode's co-content,
convex) on the affine set ``B'v = u``, the capacitor currents being the Lagrange
multipliers. The system is solved by Newton's method from the previous solution
projected onto that set (Newton's steps then keep ``B'v = u``). While a step exceeds
``1e-4`` of the voltage scale it is taken whole only where it lowers the content enough
(Armijo), else up to the content's minimum along it (bisection on its slope), so the
iteration converges from any start, ideal switches and exponentials alike. It stops when
the node-voltage step is below ``1e-12`` of the voltage scale (or below ``1e-8`` of it
and no longer shrinking: the rounding floor of a node held only by high-value ties).
Then::

    C du/dt = i_C,      L di_L/dt = K^T v  (the voltage across each inductor).

Both formulations give the same figures for the circuits they share
(``tests/test_refsolver.py`` checks it), which tests each against the other.

Integration and shooting
------------------------
The state derivative is integrated with ``scipy.integrate.solve_ivp`` (LSODA by
default, which turns stiff where a tiny ``Rs`` or a snubber makes loops fast;
``rtol = 1e-11``, ``atol = rtol`` times each state's scale: ``Vpk`` for voltages and
``Vpk/RL`` for currents; ``max_step = T/2000``). The periodic steady state is found by
shooting on ``Phi_T(x0) - x0 = 0``, ``Phi_T`` mapping the states over one period ``T``,
in states divided by their scales:

1. trust-region Newton at ``rtol = 1e-7``; the Jacobian of ``Phi_T`` comes from
   finite-difference copies of the state integrated in the same call (same step
   sequence); iterates stay within bounds (capacitors of the rectifier between 0 and
   the unloaded ideal-diode voltages, snubber capacitors and inductor currents within
   wide symmetric bounds);
2. chord iterations with that Jacobian on the full-accuracy single-trajectory map,
   until ``max|Phi_T(x0) - x0| <= 0.5e-9`` (scaled); the result is rejected above
   ``1e-9``.

Because shooting needs only a handful of periods, large ``omega*C*RL`` (1000 and more)
or a slowly decaying choke-input filter costs no more than a fast one. The figures are
taken from the dense output of the final period, sampled on a uniform grid joined with
the integrator's own step times (which cluster where a diode switches); means and RMS
values use the trapezoidal rule.

Diode laws
----------
``ideal``
    A switch: no forward drop, no reverse current. An optional on-resistance
    ``r_on`` (ohm, default 0) may be given. With ``r_on = 0`` the only resistance is
    ``Rs``; a cascade of two or more stages then has loops of diodes and capacitors
    with no resistance at all (for example D1, C3, D3, C2), where the current split
    between diodes is undefined, so it needs ``r_on > 0``; so does the nodal
    formulation, whose Newton iteration needs a conductance.
``exponential``
    The SPICE junction law with series resistance: ``i = Is*(exp(vj/(N*Vt)) - 1)``,
    terminal voltage ``v = vj + i*Rd``, ``Vt = k*T/q`` at ``T = 300.15 K`` (27 degC,
    the usual SPICE nominal temperature) with the exact SI values of ``k`` and ``q``
    (CODATA 2018). Junction capacitance, transit time, breakdown and GMIN are not
    modelled.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Literal, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.integrate import solve_ivp
from scipy.optimize import OptimizeResult, brentq
from scipy.special import wrightomega, xlogy

FloatArray = NDArray[np.float64]

Topology = Literal["half-wave", "centre-tap", "bridge", "doubler", "cascade"]
DiodeModel = Literal["ideal", "exponential"]
Formulation = Literal["auto", "reduced", "nodal"]
TOPOLOGIES: tuple[str, ...] = ("half-wave", "centre-tap", "bridge", "doubler", "cascade")

BOLTZMANN = 1.380649e-23  # J/K, exact in the SI since 2019 (CODATA 2018)
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact in the SI since 2019 (CODATA 2018)
NOMINAL_TEMPERATURE = 300.15  # K, 27 degC

SHOOTING_TOLERANCE = 1e-9  # residual of the periodic state, relative to each state's scale


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

    def content(self, v: FloatArray) -> FloatArray:
        """Co-content ``Psi(v)``, the integral of the current over the voltage from 0 (W).

        ``i*v - N*Vt*((i + Is)*ln(1 + i/Is) - i) - Rd*i^2/2`` for the exponential law
        (its derivative is ``i`` because ``v = N*Vt*ln(1 + i/Is) + i*Rd``), ``v^2/(2*r_on)``
        for ``v > 0`` (else 0) for the ideal one. Overflows to ``inf`` far in forward
        conduction without ``Rd``.

        Parameters
        ----------
        v : numpy.ndarray
            Terminal voltage, anode minus cathode (V).

        Returns
        -------
        numpy.ndarray
            Co-content (W).
        """
        if self.model == "ideal":
            return np.maximum(v, 0.0) ** 2 / (2.0 * self.r_on)
        nvt = self.n_vt
        if self.r_d == 0.0:
            return self.i_s * (nvt * np.expm1(v / nvt) - v)
        i = self.current(v)
        j = np.maximum(i + self.i_s, 0.0)
        return i * v - nvt * (xlogy(j, j / self.i_s) - i) - 0.5 * self.r_d * i * i

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
class Snubber:
    """A series RC: the capacitor on the first node's side, then the resistor.

    Parameters
    ----------
    c : float
        Capacitance (F), > 0.
    r : float
        Resistance (ohm), > 0.
    """

    c: float  # F
    r: float  # ohm

    def __post_init__(self) -> None:
        if not (self.c > 0 and self.r > 0):
            raise ValueError(f"Snubber: need c > 0 and r > 0, got c={self.c!r}, r={self.r!r}")


@dataclass(frozen=True)
class Choke:
    """A choke-input filter after the rectifier (module docstring, option ``choke``).

    Parameters
    ----------
    inductance : float
        Inductance (H), > 0.
    dcr : float
        Winding resistance of the choke (ohm), >= 0.
    snubber : Snubber
        The RC from the rectifier output to ground. It keeps that node defined while
        no diode conducts (discontinuous conduction), as in any simulation of the
        circuit; pass a small capacitance to make its effect negligible.
    """

    inductance: float  # H
    snubber: Snubber
    dcr: float = 0.0  # ohm

    def __post_init__(self) -> None:
        if not (self.inductance > 0 and self.dcr >= 0):
            raise ValueError(f"Choke: need inductance > 0 and dcr >= 0, got {self.inductance!r}, {self.dcr!r}")


@dataclass(frozen=True)
class Section:
    """One filter section after the rectifier's own output (module docstring, option ``filters``).

    Parameters
    ----------
    kind : {"c", "r", "l"}
        A capacitor to ground at the present node, or a resistor or inductor in series to
        the next node.
    value : float
        F, ohm or H, > 0.
    dcr : float
        Winding resistance of an inductor (ohm), >= 0.
    """

    kind: Literal["c", "r", "l"]
    value: float
    dcr: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in ("c", "r", "l") or not self.value > 0 or self.dcr < 0:
            raise ValueError(f"Section: need kind c, r or l, value > 0 and dcr >= 0, got {self!r}")


@dataclass(frozen=True)
class Circuit:
    """A rectifier with its source, filter and load.

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
        Every capacitor of the rectifier (the reservoir, or each doubler and cascade
        capacitor), or with a choke the capacitor after it (F), > 0; further filter
        sections carry their own values.
    diode : Diode
        Diode law, used for every diode.
    stages : int
        Number of cascade stages (cascade only; 1 is the half-wave doubler).
    leakage : float
        Series inductance of each winding (H), >= 0; needs ``winding_snubber``.
    winding_snubber : Snubber, optional
        The RC across each winding's terminals (with ``leakage`` only).
    choke : Choke, optional
        Choke input (half-wave, centre-tap and bridge).
    tie : float
        Resistance tying each terminal of a floating winding to ground (ohm); 0 for
        none. The nodal formulation of the bridge needs it.
    filters : tuple of Section
        Further filter sections after the rectifier's output (after its reservoir, or
        after the choke and its capacitor); ``RL`` sits at the last node.

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
    leakage: float = 0.0  # H
    winding_snubber: Snubber | None = None
    choke: Choke | None = None
    tie: float = 0.0  # ohm
    filters: tuple[Section, ...] = ()

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
        if self.leakage < 0 or self.tie < 0:
            raise ValueError("Circuit: leakage and tie must be >= 0")
        if self.leakage > 0 and self.winding_snubber is None:
            raise ValueError("Circuit.leakage: needs a winding_snubber (the terminal node floats "
                             "while no diode conducts)")
        if self.choke is not None and self.topology not in ("half-wave", "centre-tap", "bridge"):
            raise ValueError(f"Circuit.choke: only for half-wave, centre-tap and bridge, not {self.topology}")
        if self.tie > 0 and self.topology not in ("bridge", "doubler"):
            raise ValueError(f"Circuit.tie: only the bridge and doubler have a floating winding, not {self.topology}")

    @property
    def needs_nodal(self) -> bool:
        """True when only the nodal formulation describes the circuit."""
        return self.leakage > 0 or self.choke is not None or self.tie > 0 or bool(self.filters)

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


def _empty() -> FloatArray:
    return np.zeros((0, 0))


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
        Highest RMS AC current of the rectifier's and filter's capacitors (snubbers
        excluded): the reservoir (half-wave, centre-tap, bridge with capacitor input),
        the capacitor after the choke, or any stage capacitor (doubler, cascade) (A).
    time : numpy.ndarray
        Sample times over one period (s), uniform, ``t = 0`` at the rising zero
        crossing of the source EMF.
    vout : numpy.ndarray
        Output voltage at ``time`` (V).
    cap_voltage : numpy.ndarray
        Capacitor voltages, shape ``(n_caps, len(time))`` (V); in the nodal
        formulation every capacitor in the order of the module docstring, snubbers
        included (each winding's snubber after its winding, the choke's before the
        choke's capacitor).
    diode_current : numpy.ndarray
        Diode currents D1, D2, ..., shape ``(n_diodes, len(time))`` (A).
    residual : float
        Shooting residual ``max|Phi_T(x0) - x0|`` of the verification period,
        relative to each state's scale (dimensionless).
    shooting_iterations : int
        Period integrations of the shooting (trust-region Newton and chord
        iterations; line-search trials not counted).
    choke_avg, choke_rms, choke_peak, choke_min : float
        Mean, RMS, highest and lowest choke current (A); NaN without a choke.
    winding_peak : float
        Highest absolute winding current (A).
    inductor_current : numpy.ndarray
        Inductor currents at ``time``, shape ``(n_inductors, len(time))`` (A): the
        leakage inductances (one per winding), then the choke, then any inductor of
        the filter sections.
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
    choke_avg: float = math.nan  # A
    choke_rms: float = math.nan  # A
    choke_peak: float = math.nan  # A
    choke_min: float = math.nan  # A
    winding_peak: float = math.nan  # A
    inductor_current: FloatArray = field(default_factory=_empty)  # A


@dataclass(frozen=True)
class SwitchOn:
    """Switch-on transient from empty capacitors (and currentless inductors).

    Attributes
    ----------
    surge : float
        Highest diode current over the simulated cycles (A).
    surge_time : float
        Time of that current after switch-on (s).
    vcap_max : float
        Highest voltage across any capacitor (V), snubbers excluded.
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


@dataclass
class _Waves:
    """Waveforms of one formulation at given times (internal)."""

    vout: FloatArray  # V, (N,)
    i_d: FloatArray  # A, (K, N)
    v_d: FloatArray  # V, (K, N)
    i_cap: FloatArray  # A, rectifier and filter capacitors (snubbers excluded), (M, N)
    v_cap: FloatArray  # V, the same capacitors, (M, N)
    i_w: FloatArray  # A, winding currents, (W, N)
    i_l: FloatArray  # A, inductor currents, (n_inductors, N)
    choke: int | None  # row of the choke in i_l


class _Model(Protocol):
    """What the integrator needs from a formulation."""

    n_states: int
    scale: FloatArray
    lower: FloatArray
    upper: FloatArray
    start: FloatArray

    def derivative(self, t: float, y: FloatArray, phase: float) -> FloatArray: ...

    def waves(self, t: FloatArray, y: FloatArray, phase: float) -> _Waves: ...


class _Network:
    """The reduced formulation: tables of one circuit's node equation and Kirchhoff maps.

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
        self.circuit = circuit
        self.n_states = self.n_caps
        self.scale = np.full(self.n_caps, circuit.vpk)
        self.lower = np.zeros(self.n_caps)
        self.upper = _no_load_state(circuit)
        self.start = 0.9 * self.upper

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


    def derivative(self, t: float, u: FloatArray, phase: float) -> FloatArray:
        """``du/dt`` (V/s) for states ``u`` of shape ``(n_caps, N)``."""
        c = self.circuit
        i_sol, _ = self.solve_reduced(c.vpk * math.sin(c.omega * t + phase), u)
        i_load = (self.out_from_caps @ u) * (1.0 / c.rl)
        return (self.cap_from_reduced @ i_sol - self.load_column * i_load) * (1.0 / c.c)

    def waves(self, t: FloatArray, u: FloatArray, phase: float) -> _Waves:
        """Waveforms at times ``t`` (s) for states ``u`` (V) of shape ``(n_caps, len(t))``."""
        c = self.circuit
        i_d, v_d = self.solve(c.vpk * np.sin(c.omega * t + phase), u)
        vout = self.out_from_caps @ u
        i_cap = self.cap_from_diode @ i_d - self.load_column * (vout / c.rl)
        return _Waves(vout=vout, i_d=i_d, v_d=v_d, i_cap=i_cap, v_cap=u, i_w=self.winding_from_diode @ i_d,
                      i_l=np.zeros((0, t.size)), choke=None)


def _no_load_state(circuit: Circuit) -> FloatArray:
    """Voltages (V) of the rectifier's capacitors, unloaded, with ideal diodes.

    No periodic state of the loaded circuit exceeds them, so shooting keeps its
    iterates below them (and above zero). In the order of the module docstring.
    """
    vpk = circuit.vpk
    if circuit.topology == "doubler":
        return np.array([vpk, vpk])
    if circuit.topology == "cascade":
        x = np.full(2 * circuit.stages, 2.0 * vpk)
        x[0] = vpk
        return x
    return np.array([vpk])


class _Nodal:
    """The nodal formulation: the circuit's netlist and its modified nodal equations.

    Elements are added in the order of the module docstring (and of the circuits
    simkit builds): windings (each with its leakage inductance and snubber), ties,
    diodes and capacitors stage by stage, then the filter and the load.
    """

    def __init__(self, circuit: Circuit) -> None:
        if circuit.diode.is_switch:
            raise ValueError("refsolver: the nodal formulation needs a diode with a conductance "
                             "(exponential, or ideal with r_on > 0)")
        if circuit.topology == "bridge" and circuit.tie == 0.0:
            raise ValueError("refsolver: the nodal formulation of the bridge needs tie > 0 "
                             "(the winding floats while no diode conducts)")
        self.circuit = circuit
        self.nodes: dict[str, int] = {}
        self._res: list[tuple[int, int, float]] = []  # a, b, ohm
        self._src: list[tuple[int, int, float]] = []  # plus, minus, sign of the EMF
        self._diodes: list[tuple[int, int]] = []  # anode, cathode
        self._caps: list[tuple[int, int, bool]] = []  # first, second node, part of the rectifier/filter
        self._cap_values: list[float] = []  # F
        self._inds: list[tuple[int, int]] = []  # from, to
        self._ind_values: list[float] = []  # H
        self._windings: list[tuple[str, int]] = []  # ("source", index) or ("inductor", index)
        self.choke_row: int | None = None
        self._build()
        self._matrices()

    # -- netlist --------------------------------------------------------------------

    def _node(self, name: str) -> int:
        if name == "0":
            return -1
        return self.nodes.setdefault(name, len(self.nodes))

    def _resistor(self, a: str, b: str, r: float) -> None:
        self._res.append((self._node(a), self._node(b), r))

    def _capacitor(self, a: str, b: str, c: float, part: bool = True) -> None:
        self._caps.append((self._node(a), self._node(b), part))
        self._cap_values.append(c)

    def _inductor(self, a: str, b: str, value: float) -> int:
        self._inds.append((self._node(a), self._node(b)))
        self._ind_values.append(value)
        return len(self._inds) - 1

    def _diode(self, anode: str, cathode: str) -> None:
        self._diodes.append((self._node(anode), self._node(cathode)))

    def _snubber(self, a: str, b: str, snub: Snubber, tag: str) -> None:
        mid = f"{tag}m"
        self._capacitor(a, mid, snub.c, part=False)
        self._resistor(mid, b, snub.r)

    def _winding(self, k: int, plus: str, minus: str, sign: float) -> None:
        c = self.circuit
        if c.leakage > 0:
            inner = f"w{k}r"
            self._src.append((self._node(inner), self._node(minus), sign))
            self._windings.append(("inductor", self._inductor(inner, plus, c.leakage)))
            assert c.winding_snubber is not None
            self._snubber(plus, minus, c.winding_snubber, f"sw{k}")
        else:
            self._src.append((self._node(plus), self._node(minus), sign))
            self._windings.append(("source", len(self._src) - 1))

    def _build(self) -> None:
        c = self.circuit
        topo = c.topology
        if topo == "half-wave":
            self._winding(1, "ac1", "0", 1.0)
            self._diode("ac1", "rect")
        elif topo == "centre-tap":
            self._winding(1, "ac1", "0", 1.0)
            self._winding(2, "ac2", "0", -1.0)
            self._diode("ac1", "rect")
            self._diode("ac2", "rect")
        elif topo == "bridge":
            self._winding(1, "ac1", "ac2", 1.0)
            if c.tie > 0:
                self._resistor("ac1", "0", c.tie)
                self._resistor("ac2", "0", c.tie)
            self._diode("ac1", "rect")
            self._diode("ac2", "rect")
            self._diode("0", "ac1")
            self._diode("0", "ac2")
        elif topo == "doubler":
            self._winding(1, "ac1", "mid", 1.0)
            if c.tie > 0:
                self._resistor("ac1", "0", c.tie)
                self._resistor("mid", "0", c.tie)
            self._diode("ac1", "rect")
            self._diode("0", "ac1")
            self._capacitor("rect", "mid", c.c)
            self._capacitor("mid", "0", c.c)
        else:
            n = c.stages
            self._winding(1, "p0", "0", 1.0)
            s_prev = "0"
            for k in range(1, n + 1):
                p_k = f"p{k}"
                s_k = "rect" if k == n else f"s{k}"
                self._capacitor(p_k, f"p{k - 1}", c.c)
                self._diode(s_prev, p_k)
                self._diode(p_k, s_k)
                self._capacitor(s_k, s_prev, c.c)
                s_prev = s_k
        out = "rect"
        if c.choke is not None:
            ch = c.choke
            self._snubber("rect", "0", ch.snubber, "sr")
            if ch.dcr > 0:
                self.choke_row = self._inductor("rect", "l1r", ch.inductance)
                self._resistor("l1r", "f1", ch.dcr)
            else:
                self.choke_row = self._inductor("rect", "f1", ch.inductance)
            out = "f1"
            self._capacitor(out, "0", c.c)
        elif topo in ("half-wave", "centre-tap", "bridge"):
            self._capacitor("rect", "0", c.c)
        for k, sec in enumerate(c.filters, start=2):
            if sec.kind == "c":
                self._capacitor(out, "0", sec.value)
            elif sec.kind == "r":
                self._resistor(out, f"f{k}", sec.value)
                out = f"f{k}"
            elif sec.dcr > 0:
                self._inductor(out, f"l{k}r", sec.value)
                self._resistor(f"l{k}r", f"f{k}", sec.dcr)
                out = f"f{k}"
            else:
                self._inductor(out, f"f{k}", sec.value)
                out = f"f{k}"
        self._resistor(out, "0", c.rl)
        self.out = self._node(out)

    # -- equations ------------------------------------------------------------------

    def _matrices(self) -> None:
        c = self.circuit
        n = len(self.nodes)
        mc = len(self._caps)
        self.n = n
        self.size = n + mc

        def stamp(mat: FloatArray, a: int, b: int, col: int, val: float = 1.0) -> None:
            if a >= 0:
                mat[a, col] += val
            if b >= 0:
                mat[b, col] -= val

        g = np.zeros((n, n))
        for a, b, r in self._res:
            for p, q in ((a, b), (b, a)):
                if p >= 0:
                    g[p, p] += 1.0 / r
                    if q >= 0:
                        g[p, q] -= 1.0 / r
        self.src_in = np.zeros(n)  # W: current injected per volt of EMF
        for a, b, sign in self._src:
            for p, q in ((a, b), (b, a)):
                if p >= 0:
                    g[p, p] += 1.0 / c.rs
                    if q >= 0:
                        g[p, q] -= 1.0 / c.rs
            if a >= 0:
                self.src_in[a] += sign / c.rs
            if b >= 0:
                self.src_in[b] -= sign / c.rs
        b_inc = np.zeros((n, mc))
        for j, (a, b, _) in enumerate(self._caps):
            stamp(b_inc, a, b, j)
        self.k_inc = np.zeros((n, len(self._inds)))
        for j, (a, b) in enumerate(self._inds):
            stamp(self.k_inc, a, b, j)
        self.a_inc = np.zeros((len(self._diodes), n))
        for k, (a, b) in enumerate(self._diodes):
            if a >= 0:
                self.a_inc[k, a] = 1.0
            if b >= 0:
                self.a_inc[k, b] = -1.0
        m0 = np.zeros((self.size, self.size))
        m0[:n, :n] = g
        m0[:n, n:] = b_inc
        m0[n:, :n] = b_inc.T
        self.m0 = m0
        # dv = project @ r is the smallest change of v with B'dv = r (the capacitors form no loop).
        self.project = b_inc @ np.linalg.inv(b_inc.T @ b_inc) if mc else np.zeros((n, 0))
        self.cap_values = np.array(self._cap_values)
        self.ind_values = np.array(self._ind_values)
        self.part = np.array([p for _, _, p in self._caps], dtype=bool)
        self.n_caps = mc
        self.n_states = mc + len(self._inds)
        self.vscale = c.vpk * (2.0 * c.stages if c.topology == "cascade" else 2.0)  # V
        self._guess: dict[int, FloatArray] = {}
        # Shooting: scales, bounds and a start (module docstring).
        i_scale = c.vpk / c.rl
        wide_v = 4.0 * self.vscale
        wide_i = 1e3 * c.vpk / min(c.rs, c.rl)
        self.scale = np.concatenate([np.full(mc, c.vpk), np.full(len(self._inds), i_scale)])
        lower = np.concatenate([np.full(mc, -wide_v), np.full(len(self._inds), -wide_i)])
        upper = -lower
        start = np.zeros(self.n_states)
        parts = np.flatnonzero(self.part)
        if c.choke is not None:
            vdc = 2.0 / math.pi * c.vpk * c.rl / (c.rl + c.rs + c.choke.dcr)
            lower[parts], upper[parts], start[parts] = 0.0, c.vpk, vdc
            assert self.choke_row is not None
            start[mc + self.choke_row] = vdc / c.rl
        else:
            # The rectifier's own capacitors come first; the filters' after them.
            no_load = _no_load_state(c)
            own = parts[: no_load.size]
            lower[own], upper[own], start[own] = 0.0, no_load, 0.9 * no_load
        # Capacitors of further filter sections: at most the unloaded output.
        top = c.vpk * (2.0 * c.stages if c.topology == "cascade" else 2.0 if c.topology == "doubler" else 1.0)
        rest = parts[1 if c.choke is not None else _no_load_state(c).size:]
        lower[rest], upper[rest], start[rest] = 0.0, top, 0.8 * top
        self.lower, self.upper, self.start = lower, upper, start

    def solve(self, rhs: FloatArray, guess: FloatArray | None = None) -> FloatArray:
        """Node voltages and capacitor currents, shape ``(size, N)``, for right-hand sides ``rhs``.

        The network equations are the stationarity conditions of the convex content
        ``Phi(v) = v'Gv/2 - (W e - K i_L)'v + sum_k Psi(A_k v)`` (``Psi`` the diode's
        co-content, the integral of its current over its voltage) on the affine set
        ``B'v = u``, with the capacitor currents as Lagrange multipliers.  So: project
        the start onto that set, then take Newton steps (which keep ``B'v = u``) with a
        backtracking line search on ``Phi``, which makes the iteration converge from any
        start.  Started from ``guess``, else from the last solution with the same
        number of columns.
        """
        cols = rhs.shape[1]
        n = self.n
        z = self._guess.get(cols) if guess is None else guess
        z = np.zeros((self.size, cols)) if z is None else z.copy()
        z[:n] += self.project @ (rhs[n:] - self.m0[n:, :n] @ z[:n])  # onto B'v = u
        tol = 1e-12 * self.vscale
        previous = math.inf
        diode = self.circuit.diode
        for _ in range(200):
            i, g = diode.current_and_conductance(self.a_inc @ z[:n])
            f = self.m0 @ z - rhs
            f[:n] += self.a_inc.T @ i
            f[n:] = 0.0  # B'v = u holds (up to rounding) along the whole iteration
            jac = np.broadcast_to(self.m0, (cols, self.size, self.size)).copy()
            jac[:, :n, :n] += np.einsum("kN,kn,km->Nnm", g, self.a_inc, self.a_inc)
            dz = np.linalg.solve(jac, -f.T[:, :, None])[:, :, 0].T
            step = float(np.max(np.abs(dz[:n])))
            # Converged; or at the rounding floor, where Newton's steps stop shrinking
            # (a node held only by the 10 Meg ties carries rounding noise of about
            # 1e-16 A / 1e-7 S, some 1e-9 V).
            if step <= tol or (step <= 1e-8 * self.vscale and step > 0.25 * previous):
                z = z + dz
                self._guess[cols] = z
                return z
            previous = step
            if step <= 1e-4 * self.vscale:
                z = z + dz  # close to the solution: full Newton steps
                continue
            # Far from it: the whole step where it lowers the content enough (Armijo), else a
            # line search for the content's minimum along it.  Its slope there,
            # h(alpha) = (G(v + alpha dv) - b)'dv + sum_k i_D(x_k + alpha dx_k) dx_k, increases
            # with alpha (the content is convex) and h(0) = f'dv < 0: bisect for the root of h
            # in (0, 1) to 0.1 % and take the upper end (just past the minimum, so a diode
            # turning on there is on for the next Jacobian).
            alpha = self._line_search(z[:n], dz[:n], rhs[:n])
            z = z + alpha * dz
        raise RuntimeError("refsolver: nodal network did not converge")

    def _line_search(self, v: FloatArray, dv: FloatArray, b: FloatArray) -> FloatArray:
        """Step length per column for `solve` (the upper end of the bracket of the content's minimum)."""
        g_lin = self.m0[: self.n, : self.n]
        h0 = np.sum((g_lin @ v - b) * dv, axis=0)
        h1 = np.sum(dv * (g_lin @ dv), axis=0)
        x, dx = self.a_inc @ v, self.a_inc @ dv
        diode = self.circuit.diode

        def slope(alpha: FloatArray) -> FloatArray:
            return h0 + alpha * h1 + np.sum(diode.current(x + alpha * dx) * dx, axis=0)

        ones = np.ones(v.shape[1])
        # The whole step where it lowers the content enough (Armijo); the change is summed
        # term by term, no difference of large totals.
        with np.errstate(over="ignore", invalid="ignore"):
            change = h0 + 0.5 * h1 + np.sum(diode.content(x + dx) - diode.content(x), axis=0)
        search = ~(change <= 1e-4 * h0)
        if not search.any():
            return ones
        search &= slope(ones) > 0.0
        lo, hi = np.zeros_like(ones), ones.copy()
        for _ in range(80):
            if not np.any(search & (hi - lo > 1e-3 * hi)):
                break
            mid = 0.5 * (lo + hi)
            up = slope(mid) > 0.0
            hi = np.where(search & up, mid, hi)
            lo = np.where(search & ~up, mid, lo)
        return np.where(search, hi, 1.0)

    def _rhs(self, e: FloatArray | float, y: FloatArray) -> FloatArray:
        mc = self.n_caps
        cols = y.shape[1]
        rhs = np.empty((self.size, cols))
        rhs[: self.n] = self.src_in[:, None] * e - self.k_inc @ y[mc:]
        rhs[self.n:] = y[:mc]
        return rhs

    def derivative(self, t: float, y: FloatArray, phase: float) -> FloatArray:
        """``dy/dt`` for states ``y`` (capacitor voltages, then inductor currents), shape ``(n_states, N)``."""
        c = self.circuit
        z = self.solve(self._rhs(c.vpk * math.sin(c.omega * t + phase), y))
        out = np.empty_like(y)
        out[: self.n_caps] = z[self.n:] / self.cap_values[:, None]
        out[self.n_caps:] = (self.k_inc.T @ z[: self.n]) / self.ind_values[:, None]
        return out

    def waves(self, t: FloatArray, y: FloatArray, phase: float) -> _Waves:
        """Waveforms at times ``t`` (s) for states ``y`` of shape ``(n_states, len(t))``."""
        c = self.circuit
        e = c.vpk * np.sin(c.omega * t + phase)
        rhs = self._rhs(e, y)
        # Every 32nd point first; each of the others starts from the nearest of those.
        coarse = np.arange(0, t.size, 32)
        z_coarse = self.solve(rhs[:, coarse], np.zeros((self.size, coarse.size)))
        near = np.minimum((np.arange(t.size) + 16) // 32, coarse.size - 1)
        z = np.empty((self.size, t.size))
        for lo in range(0, t.size, 4096):  # in chunks, to bound the memory of the batched solve
            hi = min(lo + 4096, t.size)
            z[:, lo:hi] = self.solve(rhs[:, lo:hi], z_coarse[:, near[lo:hi]])
        v = z[: self.n]
        v_d = self.a_inc @ v
        i_d = self.circuit.diode.current(v_d)
        i_l = y[self.n_caps:]
        i_w = np.empty((len(self._windings), t.size))
        for row, (kind, k) in enumerate(self._windings):
            if kind == "inductor":
                i_w[row] = i_l[k]
            else:
                a, b, sign = self._src[k]
                va = v[a] if a >= 0 else 0.0
                vb = v[b] if b >= 0 else 0.0
                i_w[row] = (sign * e - (va - vb)) / c.rs
        return _Waves(vout=v[self.out], i_d=i_d, v_d=v_d, i_cap=z[self.n:][self.part],
                      v_cap=y[: self.n_caps][self.part], i_w=i_w, i_l=i_l, choke=self.choke_row)



def _model(circuit: Circuit, formulation: Formulation) -> _Model:
    """The formulation's equations for a circuit (module docstring)."""
    if formulation not in ("auto", "reduced", "nodal"):
        raise ValueError(f"formulation: expected 'auto', 'reduced' or 'nodal', got {formulation!r}")
    if formulation == "nodal" or (formulation == "auto" and circuit.needs_nodal):
        return _Nodal(circuit)
    if circuit.needs_nodal:
        raise ValueError("refsolver: leakage, a choke or ties need the nodal formulation")
    return _Network(circuit)


class _Integrator:
    """State derivative and period integration for one circuit."""

    def __init__(self, circuit: Circuit, rtol: float, steps_per_period: int, method: str,
                 formulation: Formulation = "auto") -> None:
        self.circuit = circuit
        self.model = _model(circuit, formulation)
        self.rtol = rtol
        self.max_step = circuit.period / steps_per_period
        self.method = method
        self.scale = self.model.scale

    def derivative(self, t: float, y: FloatArray, phase: float) -> FloatArray:
        """State derivative for states ``y`` of shape ``(n_states, N)``."""
        return self.model.derivative(t, y, phase)

    def integrate(self, u0: FloatArray, t_end: float, phase: float, *, rtol: float | None = None,
                  coarse: bool = False, dense: bool = False) -> tuple[FloatArray, OptimizeResult]:
        """Integrate the states from 0 to ``t_end``.

        Parameters
        ----------
        u0 : numpy.ndarray
            Initial states (V and A), shape ``(n_states, N)``; the ``N`` columns are
            independent copies integrated together (same step sequence).
        t_end : float
            End time (s).
        phase : float
            Source phase at ``t = 0`` (rad).
        rtol : float, optional
            Relative tolerance; the integrator's own by default. The absolute
            tolerance is ``rtol`` times each state's scale.
        coarse : bool
            Allow steps four times longer than ``max_step`` (for the first Newton
            stage, which only has to land near the periodic state).
        dense : bool
            Keep the dense output (``N = 1`` only); ``sol.sol(t)`` then gives the
            states at any ``t`` (s) and ``sol.t`` the step times (s).

        Returns
        -------
        tuple
            Final states ``(n_states, N)`` and the ``solve_ivp`` result.
        """
        m, cols = u0.shape
        rtol = self.rtol if rtol is None else rtol
        delta = 1e-7 * self.scale

        # The flat state is column by column, so the Jacobian is block diagonal.
        def rhs(t: float, y: FloatArray) -> FloatArray:
            return self.derivative(t, y.reshape(cols, m).T, phase).T.reshape(-1)

        def jac(t: float, y: FloatArray) -> FloatArray:
            u = y.reshape(cols, m).T
            pert = (u[:, :, None] + (delta[:, None] * np.eye(m))[:, None, :]).reshape(m, cols * m)
            f0 = self.derivative(t, u, phase)
            f1 = self.derivative(t, pert, phase).reshape(m, cols, m)
            blocks = (f1 - f0[:, :, None]) / delta  # [row, column copy, state]
            out = np.zeros((cols * m, cols * m))
            for k in range(cols):
                out[k * m:(k + 1) * m, k * m:(k + 1) * m] = blocks[:, k, :]
            return out

        kwargs = {} if self.method in ("RK23", "RK45", "DOP853") else {"jac": jac}
        sol = solve_ivp(rhs, (0.0, t_end), u0.T.reshape(-1), method=self.method, rtol=rtol,
                        atol=np.tile(rtol * self.scale, cols),
                        max_step=self.max_step * (4.0 if coarse else 1.0), dense_output=dense, **kwargs)
        if not sol.success:
            raise RuntimeError(f"refsolver: integration failed: {sol.message}")
        return sol.y[:, -1].reshape(cols, m).T, sol

    def period_map(self, x: FloatArray, h: FloatArray, rtol: float | None = None,
                   coarse: bool = False) -> tuple[FloatArray, FloatArray]:
        """``Phi_T(x)`` and its finite-difference Jacobian (steps ``h``, one per state)."""
        m = x.size
        cols = x[:, None] + np.hstack([np.zeros((m, 1)), np.diag(h)])
        y, _ = self.integrate(cols, self.circuit.period, 0.0, rtol=rtol, coarse=coarse)
        phi = y[:, 0]
        return phi, (y[:, 1:] - phi[:, None]) / h[None, :]



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

    Works on the states divided by their scales (``integ.scale``).

    1. Trust-region Newton at a coarse tolerance (``rtol = 1e-7``, steps up to four
       times ``max_step``), with the Jacobian of ``Phi_T`` from finite-difference
       copies of the state integrated in the same call, until the residual is below
       ``1e-6``. Iterates stay within the model's bounds.
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
        output), its scaled residual (dimensionless), iterations.
    """
    model = integ.model
    s = integ.scale
    lo, hi = model.lower, model.upper
    x = model.start.copy()
    m = x.size
    eye = np.eye(m)
    iters = 0
    radius = 0.5
    coarse_rtol = max(integ.rtol, 1e-7)

    def scaled(jac: FloatArray) -> FloatArray:
        return jac * s[None, :] / s[:, None]

    phi, jac = integ.period_map(x, 1e-5 * s, coarse_rtol, coarse=True)
    res = (phi - x) / s
    jac_s = scaled(jac)
    while np.max(np.abs(res)) > 1e-6:
        if iters == max_iter:
            raise RuntimeError("refsolver: shooting did not converge (coarse stage)")
        iters += 1
        dx = _trust_region_step(jac_s - eye, res, radius)
        xn = np.clip(x + dx * s, lo, hi)
        phin, jacn = integ.period_map(xn, 1e-5 * s, coarse_rtol, coarse=True)
        resn = (phin - xn) / s
        norm0 = float(np.linalg.norm(res))
        predicted = norm0**2 - float(np.linalg.norm(res + (jac_s - eye) @ ((xn - x) / s))) ** 2
        actual = norm0**2 - float(np.linalg.norm(resn)) ** 2
        ratio = actual / predicted if predicted > 0 else -1.0
        step = float(np.linalg.norm((xn - x) / s))
        if ratio < 0.25:
            radius = 0.25 * step
        elif ratio > 0.75 and step > 0.99 * radius:
            radius = 2.0 * radius
        if actual > 0:
            x, res, jac_s = xn, resn, scaled(jacn)
        if radius < 1e-9:
            break  # stalled at the coarse noise level: let the chord stage decide
    newton = np.linalg.pinv(jac_s - eye, rcond=1e-12)
    previous = math.inf
    refreshed = False
    for _ in range(max_iter):
        iters += 1
        y_end, sol = integ.integrate(x[:, None], integ.circuit.period, 0.0, dense=True)
        res = (y_end[:, 0] - x) / s
        residual = float(np.max(np.abs(res)))
        if residual <= 0.5 * SHOOTING_TOLERANCE:
            break
        if residual > 0.5 * previous and residual > 100.0 * integ.rtol and not refreshed:
            # The chord iteration stopped contracting above the integration noise.
            _, jac = integ.period_map(x, 1e-6 * s)
            newton = np.linalg.pinv(scaled(jac) - eye, rcond=1e-12)
            refreshed = True
        previous = residual
        x = np.clip(x - s * (newton @ res), lo, hi)
    return sol, residual, iters


def steady_state(circuit: Circuit, *, rtol: float = 1e-11, steps_per_period: int = 2000,
                 points: int = 20000, method: str = "LSODA", max_iter: int = 40,
                 formulation: Formulation = "auto") -> SteadyState:
    """Periodic steady state of a rectifier.

    Parameters
    ----------
    circuit : Circuit
        Circuit, source, filter, load and diode law.
    rtol : float
        Relative tolerance of ``solve_ivp``; the absolute tolerance is ``rtol``
        times each state's scale.
    steps_per_period : int
        ``max_step`` is the period divided by this (dimensionless).
    points : int
        Uniform samples per period (dimensionless); the figures use these joined
        with the integrator's step times, the waveforms these alone.
    method : str
        ``solve_ivp`` method. ``"LSODA"`` (the default) switches to a stiff
        method where a tiny ``Rs`` or ``r_on``, or a snubber, makes loops fast.
    max_iter : int
        Iteration limit of each shooting stage.
    formulation : {"auto", "reduced", "nodal"}
        Equations (module docstring): ``auto`` takes the reduced ones where they
        apply, else the nodal ones.

    Returns
    -------
    SteadyState
        Figures over one period and the waveforms.

    Raises
    ------
    RuntimeError
        If the periodic state is not found to ``1e-9`` of the states' scales.

    Examples
    --------
    >>> ss = steady_state(Circuit("half-wave", 100.0, 50.0, 1.0, 1e3, 1e-3))
    >>> 130.0 < ss.vdc < 141.5
    True
    """
    integ = _Integrator(circuit, rtol, steps_per_period, method, formulation)
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
    y = sol.sol(t)
    w = integ.model.waves(t, y, 0.0)
    i_load = w.vout / circuit.rl

    def mean(a: FloatArray) -> FloatArray:
        return np.trapezoid(a, t, axis=-1) / period

    def rms(a: FloatArray) -> FloatArray:
        return np.sqrt(mean(a * a))

    vdc = float(mean(w.vout))
    cap_ac = w.i_cap - mean(w.i_cap)[:, None]
    pick = np.searchsorted(t, uniform)
    choke: dict[str, float] = {}
    if w.choke is not None:
        i_ch = w.i_l[w.choke]
        choke = {"choke_avg": float(mean(i_ch)), "choke_rms": float(rms(i_ch)),
                 "choke_peak": float(i_ch.max()), "choke_min": float(i_ch.min())}
    return SteadyState(
        vdc=vdc,
        vout_max=float(w.vout.max()),
        vout_min=float(w.vout.min()),
        ripple_pp=float(w.vout.max() - w.vout.min()),
        ripple_rms=float(rms(w.vout - vdc)),
        idc=float(mean(i_load)),
        diode_peak=float(w.i_d.max()),
        diode_avg=float(mean(w.i_d).max()),
        diode_rms=float(rms(w.i_d).max()),
        piv=float(np.max(-w.v_d)),
        source_rms=float(rms(w.i_w).max()),
        cap_ripple_rms=float(rms(cap_ac).max()),
        time=uniform,
        vout=w.vout[pick],
        cap_voltage=y[: integ.model.n_states - w.i_l.shape[0]][:, pick],
        diode_current=w.i_d[:, pick],
        residual=residual,
        shooting_iterations=iters,
        winding_peak=float(np.abs(w.i_w).max()),
        inductor_current=w.i_l[:, pick],
        **choke,
    )


def switch_on(circuit: Circuit, phase_deg: float = 90.0, *, cycles: int = 5,
              rtol: float = 1e-11, steps_per_period: int = 2000, points_per_period: int = 4000,
              method: str = "LSODA", formulation: Formulation = "auto") -> SwitchOn:
    """Switch-on transient with every capacitor empty and every inductor currentless at ``t = 0``.

    Parameters
    ----------
    circuit : Circuit
        Circuit, source, filter, load and diode law.
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
    formulation : {"auto", "reduced", "nodal"}
        Equations, as for `steady_state`.

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
    integ = _Integrator(circuit, rtol, steps_per_period, method, formulation)
    phase = math.radians(phase_deg)
    t_end = cycles * circuit.period
    u0 = np.zeros((integ.model.n_states, 1))
    _, sol = integ.integrate(u0, t_end, phase, dense=True)
    t = np.union1d(np.linspace(0.0, t_end, cycles * points_per_period + 1), sol.t)
    y = sol.sol(t)
    w = integ.model.waves(t, y, phase)
    i_max = w.i_d.max(axis=0)
    k = int(np.argmax(i_max))
    return SwitchOn(
        surge=float(i_max[k]),
        surge_time=float(t[k]),
        vcap_max=float(np.max(np.abs(w.v_cap))),
        time=t,
        vout=w.vout,
        diode_current=w.i_d,
    )


__all__ = [
    "TOPOLOGIES",
    "Choke",
    "Circuit",
    "Diode",
    "Section",
    "Snubber",
    "SteadyState",
    "SwitchOn",
    "steady_state",
    "switch_on",
    "thermal_voltage",
]
