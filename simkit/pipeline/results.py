"""What a run of one design gives: its figures, and per part the quantities the checks and reports read.

Per-part results are typed (:class:`DiodeResult`, :class:`CapacitorResult`, ...): code reads
their attributes; ``to_json`` gives the ``parts`` of ``run --json``, keyed by the quantities of
:data:`simkit.figures.PART_FIGURES`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any, TypeVar

from simkit import __version__
from simkit.analysis.keyed import KeyedRun
from simkit.analysis.runs import Run
from simkit.analysis.spectrum import Harmonic
from simkit.analysis.steady import SteadyState
from simkit.design.model import Design
from simkit.design.reader import design_to_inputs
from simkit.netlist.circuit import Circuit


@dataclass
class PartResult:
    """What every part's result says: what the part is."""

    role: str

    def to_json(self) -> dict[str, Any]:
        return {k: _clean(v) for k, v in asdict(self).items() if v is not None}


@dataclass
class DiodeResult(PartResult):
    peak_a: float
    avg_a: float
    rms_a: float
    piv_v: float
    surge_peak_a: float
    surge_i2t_a2s: float
    switch_on_piv_v: float
    # The high-frequency analysis (run --hash, simkit hash): the ring after turn-off.
    ring_frequency_hz: float | None = None
    ring_peak_v: float | None = None
    ring_decay_s: float | None = None


@dataclass
class CapacitorResult(PartResult):
    value_f: float
    peak_v: float
    dc_v: float
    ripple_pp_v: float
    ripple_rms_a: float
    switch_on_peak_v: float
    esr_dissipation_w: float | None = None


@dataclass
class InductorResult(PartResult):
    value_h: float
    dc_a: float
    rms_a: float
    peak_a: float
    switch_on_peak_a: float
    dcr_dissipation_w: float | None = None


@dataclass
class ResistorResult(PartResult):
    value_ohm: float
    dissipation_w: float
    dc_a: float
    rms_a: float
    peak_v: float


@dataclass
class LoadResult(PartResult):
    node: str
    dc_v: float
    dc_a: float
    dissipation_w: float
    value_ohm: float | None = None


@dataclass
class WindingResult(PartResult):
    vrms_v: float
    rms_a: float
    peak_a: float
    apparent_power_va: float
    surge_peak_a: float


@dataclass
class RegulatorResult(PartResult):
    dissipation_w: float
    dissipation_peak_w: float
    vds_max_v: float | None = None  # series pass device
    id_max_a: float | None = None
    switch_on_dissipation_peak_w: float | None = None
    current_min_a: float | None = None  # shunt element
    current_max_a: float | None = None
    switch_on_voltage_max_v: float | None = None
    struck: bool | None = None  # glow tubes: did they strike at switch-on


P = TypeVar("P", bound=PartResult)


@dataclass
class RunResult:
    """One design simulated: figures (``metrics``), per-part results, warnings, and the runs behind them."""

    design: Design
    circuit: Circuit
    metrics: dict[str, float]
    parts: dict[str, PartResult]
    warnings: list[str]
    steady: SteadyState
    start: Run
    window: tuple[float, float] = (0.0, 0.0)
    keyed: KeyedRun | None = None
    extra: dict[str, Any] = field(default_factory=dict)
    # Hum: the first ten harmonics at every filter node (steady state, key-down) and of the battery current.
    ripple_harmonics: dict[str, list[Harmonic]] = field(default_factory=dict)
    keydown_harmonics: dict[str, list[Harmonic]] = field(default_factory=dict)
    battery_harmonics: list[Harmonic] = field(default_factory=list)
    hash: Any = None  # simkit.pipeline.noise.HashResult when the high-frequency analysis ran

    @property
    def periods(self) -> int:
        """Whole source periods the steady-state figures are taken over."""
        t0, t1 = self.window
        return round((t1 - t0) / self.circuit.period)

    def part(self, name: str, kind: type[P]) -> P:
        """One part's result, of the kind asked for (a KeyError when there is no such part)."""
        p = self.parts[name]
        if not isinstance(p, kind):
            raise KeyError(f"{name} is a {type(p).__name__}, not a {kind.__name__}")
        return p

    def of_kind(self, kind: type[P]) -> dict[str, P]:
        """Every part of one kind, by name."""
        return {k: v for k, v in self.parts.items() if isinstance(v, kind)}

    def to_json(self) -> dict[str, Any]:
        doc = {
            "simkit": __version__,
            "design": self.design.title,
            "inputs": design_to_inputs(self.design),
            "metrics": {k: _clean(v) for k, v in self.metrics.items()},
            "parts": {k: v.to_json() for k, v in self.parts.items()},
            "warnings": list(self.warnings),
        }
        doc.update(self._noise_json())
        return doc

    def _noise_json(self) -> dict[str, Any]:
        """``ripple_harmonics`` (and at key-down, of the battery current) and the high-frequency run's settings."""
        out: dict[str, Any] = {"ripple_harmonics": {n: [h.to_json() for h in hs]
                                                    for n, hs in self.ripple_harmonics.items()}}
        if self.keydown_harmonics:
            out["ripple_harmonics_keydown"] = {n: [h.to_json() for h in hs] for n, hs in self.keydown_harmonics.items()}
        if self.battery_harmonics:
            out["battery_harmonics"] = [h.to_json("a") for h in self.battery_harmonics]
        if self.hash is not None:
            out["high_frequency"] = self.hash.to_json()
        return out

    @property
    def deck(self) -> str:
        """The steady-state deck with its .meas lines, as ``simkit netlist`` prints it."""
        from simkit.pipeline.decks import steady_deck  # decks reads results, not the other way round

        return steady_deck(self)

    def waveform(self, name: str, run: str = "steady") -> Any:
        """A node's voltage, a part's current or ``v(PART)`` over the steady-state window or the
        switch-on run: a :class:`simkit.pipeline.probes.Waveform` (unpacks as ``time, value``)."""
        from simkit.pipeline.probes import waveform  # probes reads results, not the other way round

        return waveform(self, name, run)


def _clean(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v
