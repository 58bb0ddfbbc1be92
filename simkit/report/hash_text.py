"""The text ``simkit hash`` prints: the ringing and hash of the design, a snubber, and the figures with it."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from simkit.analysis.highfreq import HF_PERIODS
from simkit.pipeline.noise import SNUBBER_C_RATIO
from simkit.pipeline.results import DiodeResult
from simkit.report.text import show, text_table
from simkit.safety import CAUTIONS
from simkit.units import eng, spice

if TYPE_CHECKING:
    from simkit.pipeline import RunResult
    from simkit.pipeline.hash_study import HashStudy


def _cell(key: str, value: float | None) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "none" if key == "ring_frequency_hz" else "–"
    return show(key, value)


def _rows(result: RunResult) -> list[tuple[str, str, str, str, str]]:
    rows = []
    for name, d in result.of_kind(DiodeResult).items():
        rows.append((name, show("piv_v", d.piv_v), _cell("ring_frequency_hz", d.ring_frequency_hz),
                     _cell("ring_peak_v", d.ring_peak_v), _cell("ring_decay_s", d.ring_decay_s)))
    return rows


def _result_lines(result: RunResult, what: str) -> list[str]:
    m = result.metrics
    lines = [f"{what}:"]
    lines += text_table([("diode", "settled PIV", "ring", "above PIV", "decay (1/e)"), *_rows(result)])
    band = eng(result.design.simulation.hash_band, "Hz")
    if "hash_rms_v" in m:
        lines.append(f"  hash at the output above {band}: {show('hash_rms_v', m['hash_rms_v'])} "
                     f"({show('hash_dbuv', m['hash_dbuv'])})")
    if "hum_dbv" in m:
        lines.append(f"  hum at the output: {show('hum_dbv', m['hum_dbv'])} at "
                     f"{show('hum_frequency_hz', m['hum_frequency_hz'])}")
    auto = [e.name for e in (result.hash.hf.circuit.elements if result.hash is not None else [])
            if e.name.startswith(("CSW", "RSW"))]
    if auto:
        lines.append(f"  with the snubber simkit adds across the winding ({', '.join(auto)}; drawn in the schematic); "
                     "a snubber of the design's own replaces it")
    h = result.hash
    if h is not None and h.snubber_dissipation_w:
        lines.append("  snubber resistors, with the ringing: " + ", ".join(
            f"{n} {eng(p, 'W')}" + (" (simkit's)" if n.startswith(("RSW", "RSR")) else "")
            for n, p in h.snubber_dissipation_w.items()))
    return lines


def hash_text(study: HashStudy) -> str:
    before, s, after = study.before, study.suggestion, study.after
    d = before.design
    lines = [d.title, f"  design file: {d.origin}", ""]
    h = before.hash
    if h is not None:
        lines.append(f"  high-frequency analysis: {HF_PERIODS} periods from the steady "
                     f"state with the diodes' reverse recovery and junction capacitance, step at most "
                     f"{eng(h.hf.step, 's')}")
    lines += _result_lines(before, "As designed")
    lines.append("")
    if s is None:
        why = "the rectifier is a tube" if d.rectifier.diode.is_vacuum else \
            "no series inductance feeds the diodes (source.inductance is 0), so nothing rings with them"
        lines.append(f"No snubber suggested: {why}.")
    else:
        lines.append(f"Suggested snubber across each diode: {eng(s.snubber.c, 'F')} in series with "
                     f"{eng(s.snubber.r, 'Ω')}")
        lines.append(f"  from L = {eng(s.inductance_h, 'H')} (the winding's leakage inductance) ringing with the "
                     f"diode's {eng(s.capacitance_f, 'F')} at {eng(s.frequency_hz, 'Hz')}: C about "
                     f"{SNUBBER_C_RATIO:g} x that (rounded up to the E12 series), R = sqrt(L/C_J) (common practice)")
        own = d.rectifier.snubber
        if own is not None:
            lines.append(f"  in place of the design's own ({eng(own.c, 'F')}, {eng(own.r, 'Ω')}) in the figures below")
        lines.append(f'  in the design file: [rectifier] snubber = {{ c = "{spice(s.snubber.c)}", '
                     f'r = "{spice(s.snubber.r)}" }}')
        lines.append("  rate each capacitor for the diode's full reverse voltage with margin, and each resistor "
                     "for its dissipation")
        if after is not None:
            lines.append("")
            lines += _result_lines(after, "With the suggested snubber")
    warnings = [*before.warnings, *(after.warnings if after is not None else [])]
    if warnings:
        lines.append("")
        lines += [f"  warning: {w}" for w in dict.fromkeys(warnings)]
    lines.append("")
    lines.append(CAUTIONS)
    return "\n".join(lines) + "\n"
