"""Hum and hash: the ripple's harmonics at every filter node, and the high-frequency analysis's figures.

Hum (every run, pure numpy on waveforms the run already has): the first ten harmonics of the
source frequency at the rectifier's output, every filter node and the output
(:func:`filter_nodes`), over the steady-state period; at key-down for a keyed load (the last
whole period of the longest key-down of the settled keying cycle); and of the battery current
behind an inverter.  Figures ``hum_dbv``/``hum_frequency_hz`` (the output's largest harmonic),
``hum_keydown_*`` and ``battery_hum_*``.

Hash (only when asked, :func:`wants_hash`): the high-frequency run
(:mod:`simkit.analysis.highfreq`), then per rectifier diode the ring after its turn-off
(``ring_frequency_hz``, ``ring_decay_s``) and how far the reverse voltage goes above the
settled PIV (``ring_peak_v``), and at the output the RMS of everything above
``simulation.hash_band`` (``hash_rms_v``, ``hash_dbuv``).  :func:`suggest_snubber` proposes a
snubber from the inductance and the diode's junction capacitance; ``simkit hash`` runs the
design again with it for the before/after figures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from simkit.analysis import spectrum
from simkit.analysis.highfreq import HF_PERIODS, HighFreqRun, high_frequency, points
from simkit.analysis.keyed import KeyedRun, longest_key_down
from simkit.analysis.ringing import Ring, measure_ring, strongest, turn_offs
from simkit.design.model import Design
from simkit.design.snubber import Snubber
from simkit.engine.ngspice import Engine, Waveforms
from simkit.errors import DesignError
from simkit.netlist.build import DIODE_SNUBBER, SOURCE_SNUBBER, keying_drive
from simkit.netlist.circuit import Circuit
from simkit.parts.diodes import CJ_VOLTS, junction_capacitance

if TYPE_CHECKING:  # results import this module's types for RunResult; this one needs RunResult only as a type
    from simkit.pipeline.results import RunResult

#: A diode is "fast" for the automatic choice when its reverse recovery time is at most this, s.
FAST_TRR = 100e-9
#: Excursions of a diode's reverse voltage below this share of its PIV (or 0.1 V) are not a ring.
RING_FLOOR = 1e-3
#: A ring is looked at for at most this share of the source period after its turn-off.
RING_SPAN = 1 / 8
#: The suggested snubber capacitor, as a multiple of the capacitance that rings (common practice).
SNUBBER_C_RATIO = 4.0


# -- hum ----------------------------------------------------------------------------------------


def filter_nodes(circuit: Circuit) -> list[str]:
    """The nodes whose hum a builder cares about, from the rectifier to the output: the rectifier's
    output, the node after every filter section, the regulator's input, the output."""
    nodes = [circuit.rectified, *circuit.section_nodes]
    if circuit.regulator:
        nodes.append(circuit.regulator.get("input", "raw"))
    nodes.append(circuit.output)
    return [n for n in dict.fromkeys(nodes) if n != "0"]


def node_harmonics(circuit: Circuit, w: Waveforms, t0: float, t1: float, frequency: float,
                   remove_drift: bool = False) -> dict[str, list[spectrum.Harmonic]]:
    """The first ten harmonics at each filter node over [t0, t1] (times of ``w``)."""
    return {n: spectrum.harmonics(w.time, w.v(n), t0, t1, frequency, remove_drift=remove_drift)
            for n in filter_nodes(circuit)}


def keydown_window(design: Design, keyed: KeyedRun) -> tuple[float, float] | None:
    """The last whole source period of the longest key-down of the settled keying cycle (absolute times),
    or None when no key-down lasts a whole period."""
    if not design.keyed:
        return None
    longest = longest_key_down(keying_drive(design.keyed[0]), *keyed.window)
    if longest is None:
        return None
    a, b = longest
    T = design.source.period
    if b - a < T:
        return None
    return b - T, b


def attach_hum(result: RunResult) -> None:
    """The hum figures and spectra of a run (steady state, key-down, battery current)."""
    design, circuit = result.design, result.circuit
    f = design.source.frequency
    t0, t1 = result.window
    w = result.steady.final.waves
    m = result.metrics
    result.ripple_harmonics = node_harmonics(circuit, w, t0, t1, f)
    top = spectrum.largest(result.ripple_harmonics[circuit.output])
    if top is not None:
        m["hum_dbv"] = top.dbv
        m["hum_frequency_hz"] = top.frequency_hz
    keyed = result.keyed
    if keyed is not None and keyed.circuit is not None:
        win = keydown_window(design, keyed)
        if win is None:
            result.warnings.append("no key-down lasts a whole source period: the key-down hum is not given")
        else:
            # The keying cycle itself is kept thinned (a few samples a period): the spectrum needs the
            # period of the longest key-down that is simulated again at the measuring step, in full.
            ref = keyed.refined
            rt = None if ref is None else ref.waves.time + ref.offset
            if rt is None or rt[0] > win[0] + 1e-9 * f ** -1 or rt[-1] < win[1] - 1e-9 * f ** -1:
                result.warnings.append("the longest key-down was not simulated again in full: the key-down hum "
                                       "is not given")
            else:
                assert ref is not None
                shifted = Waveforms(time=rt, vectors=ref.waves.vectors)
                # The output still droops a little during key-down: a straight-line drift is taken out first.
                result.keydown_harmonics = node_harmonics(keyed.circuit, shifted, *win, f, remove_drift=True)
                top = spectrum.largest(result.keydown_harmonics[keyed.circuit.output])
                if top is not None:
                    m["hum_keydown_dbv"] = top.dbv
                    m["hum_keydown_frequency_hz"] = top.frequency_hz
    if "ib" in circuit.battery_nodes:
        result.battery_harmonics = spectrum.harmonics(w.time, w.v("ib"), t0, t1, f)
        top = spectrum.largest(result.battery_harmonics)
        if top is not None:
            m["battery_hum_a"] = top.rms
            m["battery_hum_frequency_hz"] = top.frequency_hz


def attach_snubbers(result: RunResult) -> None:
    """The design's own snubbers as parts (simkit's automatic ones are helpers, not listed): each resistor's
    dissipation, each capacitor's voltage.  The steady state has no diode dynamics, so these are the
    snubbers' work at the source frequency; the ringing adds little to it when the snubber damps it."""
    from simkit.analysis import metrics as mx
    from simkit.pipeline.results import CapacitorResult, ResistorResult  # results import this module's types

    circuit = result.circuit
    w = result.steady.final.waves
    sw = result.start.waves
    t0, t1 = result.window
    t = w.time
    own = tuple(f"R{p}" for p in (DIODE_SNUBBER, SOURCE_SNUBBER))
    for r in circuit.resistors:
        if r.role != "snubber" or not r.name.startswith(own):
            continue
        v = w.v(r.a) - w.v(r.b)
        across = _across(circuit, r.name[1:])
        result.parts[r.name] = ResistorResult(
            role=f"snubber resistor across {across}", value_ohm=r.value,
            dissipation_w=mx.mean(t, v * v, t0, t1) / r.value, dc_a=mx.mean(t, v, t0, t1) / r.value,
            rms_a=mx.rms(t, v, t0, t1) / r.value, peak_v=mx.peak(t, np.abs(v), t0, t1))
        cap = next(c for c in circuit.capacitors if c.name == "C" + r.name[1:])
        vc = w.v(cap.inner_plus) - w.v(cap.inner_minus)
        vc_on = sw.v(cap.inner_plus) - sw.v(cap.inner_minus)
        peak = max(mx.peak(t, np.abs(vc), t0, t1), float(np.max(np.abs(vc_on))))
        result.parts[cap.name] = CapacitorResult(
            role=f"snubber capacitor across {across}", value_f=cap.value, peak_v=peak, dc_v=mx.mean(t, vc, t0, t1),
            ripple_pp_v=mx.peak_to_peak(t, vc, t0, t1), ripple_rms_a=mx.ac_rms(t, v, t0, t1) / r.value,
            switch_on_peak_v=float(np.max(np.abs(vc_on))))


def _across(circuit: Circuit, tag: str) -> str:
    """What a design snubber ``SD2``/``SS1`` sits across: ``D2``, ``winding 1``."""
    k = tag[len(DIODE_SNUBBER):]
    return f"D{k}" if tag.startswith(DIODE_SNUBBER) else f"winding {k}"


# -- hash ---------------------------------------------------------------------------------------


@dataclass
class HashResult:
    """What the high-frequency analysis found."""

    hf: HighFreqRun
    rings: dict[str, Ring]  # per rectifier diode: its strongest ring in the measured period
    reverse_peak_v: dict[str, float]  # per diode: highest reverse voltage in the measured period
    hash_rms_v: float
    snubber_dissipation_w: dict[str, float] = field(default_factory=dict)  # each snubber resistor, with ringing
    notes: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {"step_s": self.hf.step, "periods": HF_PERIODS, "ring_estimate_hz": self.hf.ring_estimate_hz,
                "method": self.hf.method, "retried": self.hf.run.retried,
                "snubber_dissipation_w": dict(self.snubber_dissipation_w), "notes": list(self.notes)}


def wants_hash(design: Design, asked: bool | None = None) -> bool:
    """Whether a run includes the high-frequency analysis.

    ``asked`` (``--hash``/``--no-hash``) decides; else ``simulation.hash``; else automatically: when
    the design fits a snubber of its own (it was fitted against ringing, so its figures are
    wanted), or when an ultrafast diode (t_rr at most ``FAST_TRR``) is fed through series
    inductance (the classic source of hash).
    """
    if asked is not None:
        return asked
    if design.simulation.hash is not None:
        return design.simulation.hash
    if design.rectifier.snubber is not None or design.source.snubber is not None:
        return True
    trr = design.rectifier.diode.ratings.trr
    return trr is not None and trr <= FAST_TRR and design.source.inductance > 0


def attach_hash(engine: Engine, result: RunResult, vscale: float = 1.0, asked: bool = False) -> None:
    """Run the high-frequency analysis of a simulated design and add its figures to ``result``.

    ``asked``: the user asked for it (a design whose analysis would exceed ``simulation.max_points``
    is then refused, exit 2); when it was chosen automatically it is left out with a warning.
    """
    from simkit.pipeline.results import DiodeResult  # results import this module's types

    design, circuit = result.design, result.circuit
    piv = result.metrics.get("diode_piv_v", 0.0)
    need = points(design, piv)
    limit = design.simulation.max_points
    if need > limit:
        message = (f"the high-frequency analysis would need about {need:.3g} time points, over the limit of "
                   f"{limit:.3g}; raise simulation.max_points, or raise simulation.hash_band")
        if asked:
            raise DesignError(message, file=design.origin, key="simulation.max_points")
        result.warnings.append(message + "; it was left out")
        return
    hf = high_frequency(engine, design, result.steady.final, circuit, vscale, piv)
    w = hf.run.waves
    a, b = hf.window
    T = hf.circuit.period
    rings: dict[str, Ring] = {}
    peaks: dict[str, float] = {}
    for d in hf.circuit.diodes:
        vrev = w.v(d.cathode) - w.v(d.anode)
        sel = (w.time >= a) & (w.time <= b)
        peaks[d.name] = float(np.max(vrev[sel]))
        settled = result.part(d.name, DiodeResult).piv_v
        floor = max(RING_FLOOR * settled, 0.1)
        offs = turn_offs(w.time, w.i(d.sense), a, b)
        found = [measure_ring(w.time, vrev, t, hf.ring_estimate_hz, floor, RING_SPAN * T) for t in offs]
        ring = strongest([r for r in found if r.rings]) or Ring(offs[0] if offs else a, math.nan, 0.0, math.nan, 0)
        rings[d.name] = ring
        part = result.part(d.name, DiodeResult)
        part.ring_frequency_hz = ring.frequency_hz
        part.ring_decay_s = ring.decay_s
        part.ring_peak_v = max(peaks[d.name] - settled, 0.0)
    from simkit.analysis import metrics as mx

    dissipation = {}
    for r in hf.circuit.resistors:
        if r.role == "snubber":
            v = w.v(r.a) - w.v(r.b)
            dissipation[r.name] = mx.mean(w.time, v * v, a, b) / r.value
    samples = int(min(1 << 21, max(8192, 2 * (b - a) / hf.step)))
    hash_rms = spectrum.band_rms(w.time, w.v(hf.circuit.output), a, b, design.simulation.hash_band, samples)
    notes: list[str] = []
    if hf.run.retried and hf.method == "trap":
        notes.append("the high-frequency run needed safer options (method=gear), which damp ringing: the ring "
                     "figures are too low")
    slow = [r for r in rings.values() if math.isfinite(r.decay_s) and r.decay_s > T / 4]
    if slow:
        notes.append("a ring still lasts a large part of the period (decay time "
                     f"{max(r.decay_s for r in slow):.3g} s): it has not settled within the analysis")
    result.hash = HashResult(hf, rings, peaks, hash_rms, dissipation, notes)
    result.metrics["hash_rms_v"] = hash_rms
    result.metrics["hash_dbuv"] = spectrum.dbuv(hash_rms)
    result.warnings.extend(notes)


# -- suggestions --------------------------------------------------------------------------------


#: The E12 series: resistor and capacitor values are suggested as its members.
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)


def e12(value: float, up: bool = False) -> float:
    """The E12 value nearest to ``value`` in ratio (``up``: the smallest one at least ``value``)."""
    if value <= 0 or not math.isfinite(value):
        return value
    decade = 10.0 ** math.floor(math.log10(value))
    options = [x * decade * s for s in (0.1, 1.0, 10.0) for x in E12]
    if up:
        return min(x for x in options if x >= value * (1 - 1e-9))
    return min(options, key=lambda x: abs(math.log(x / value)))


@dataclass(frozen=True)
class Suggestion:
    """A snubber for each rectifier diode, and what it was worked out from."""

    snubber: Snubber
    inductance_h: float  # the inductance that feeds the diodes
    capacitance_f: float  # what rings with it: the diode's junction capacitance (at the makers' 4 V)
    frequency_hz: float  # the bare ring, 1 / (2 pi sqrt(L C))

    def to_json(self) -> dict[str, Any]:
        return {"c": self.snubber.c, "r": self.snubber.r, "inductance_h": self.inductance_h,
                "capacitance_f": self.capacitance_f, "frequency_hz": self.frequency_hz}


def suggest_snubber(design: Design, piv: float) -> Suggestion | None:
    """A snubber across each diode: C several times the capacitance that rings, R = sqrt(L / C_ring).

    The ring at turn-off is the inductance L that feeds the diodes with the capacitance across
    each diode, its junction capacitance C_ring, taken as the maker gives it (at 4 V: the ring
    starts where the reverse voltage is still low).  A capacitor of ``SNUBBER_C_RATIO`` times
    C_ring in series with R = sqrt(L / C_ring), the ring's characteristic impedance, damps it to
    about critical (common practice; docs/sources.md hash-3).  ``piv`` is not used by the rule;
    None when no inductance feeds the diodes (nothing rings) or the rectifier is a tube (no
    stored charge to snap off).
    """
    L = design.source.inductance
    diode = design.rectifier.diode
    if L <= 0 or diode.is_vacuum:
        return None
    c_ring = junction_capacitance(diode, CJ_VOLTS)
    if c_ring <= 0:
        return None
    c = e12(SNUBBER_C_RATIO * c_ring, up=True)
    r = e12(math.sqrt(L / c_ring))
    f = 1.0 / (2 * math.pi * math.sqrt(L * c_ring))
    return Suggestion(Snubber(c=c, r=r), L, c_ring, f)


def with_snubber(design: Design, snubber: Snubber) -> Design:
    """The design with ``snubber`` across each rectifier diode (and the high-frequency analysis on)."""
    return replace(design, rectifier=replace(design.rectifier, snubber=snubber),
                   simulation=replace(design.simulation, hash=True))

