"""The "Hum and hash" section of a design report: the ripple's harmonics at each filter node and, when the
high-frequency analysis ran, the diodes' turn-off ringing and the hash at the output."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from simkit.analysis.highfreq import HF_PERIODS
from simkit.pipeline.results import DiodeResult
from simkit.report.document import Document
from simkit.report.text import show
from simkit.units import eng

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: Picture stems of the section: always, and only with the high-frequency analysis.
SPECTRUM_IMAGE = "hum-spectrum"
RINGING_IMAGE = "turn-off-ringing"


def _level(rms: float) -> str:
    return f"{20 * math.log10(max(rms, 1e-12)):.1f} dBV ({eng(rms, 'V')})"


def harmonic_rows(result: RunResult) -> list[list[str]]:
    """One row per harmonic: its frequency, then its level at each filter node."""
    spectra = result.ripple_harmonics
    nodes = list(spectra)
    count = len(next(iter(spectra.values()))) if spectra else 0
    return [[eng(spectra[nodes[0]][k].frequency_hz, "Hz"), *[_level(spectra[n][k].rms) for n in nodes]]
            for k in range(count)]


def add_section(doc: Document, result: RunResult) -> list[str]:
    """Write the section into ``doc``; returns the picture stems it added."""
    from simkit.report import plots

    m = result.metrics
    f = result.design.source.frequency
    doc.heading("Hum and hash")
    images = []
    if result.ripple_harmonics:
        nodes = list(result.ripple_harmonics)
        doc.paragraph(f"Hum: the first ten harmonics of the {eng(f, 'Hz')} source in the ripple at the rectifier's "
                      "output, after each filter section and at the output, over the steady-state period; levels in "
                      "dBV (dB re 1 V RMS) with the RMS voltage. "
                      + (f"The output's largest is **{show('hum_dbv', m['hum_dbv'])}** at "
                         f"{show('hum_frequency_hz', m['hum_frequency_hz'])}." if "hum_dbv" in m else ""))
        doc.table(["harmonic", *[f"node {n}" for n in nodes]], harmonic_rows(result), align="r" + "r" * len(nodes),
                  markup=False)
        extra = []
        if "hum_keydown_dbv" in m:
            extra.append(f"at key-down (the last whole period of the longest key-down) the output's largest "
                         f"harmonic is {show('hum_keydown_dbv', m['hum_keydown_dbv'])} at "
                         f"{show('hum_keydown_frequency_hz', m['hum_keydown_frequency_hz'])}")
        if "battery_hum_a" in m:
            extra.append(f"the battery current's largest harmonic is {eng(m['battery_hum_a'], 'A')} RMS at "
                         f"{show('battery_hum_frequency_hz', m['battery_hum_frequency_hz'])}: the leads from the "
                         "battery carry it, keep them short and twisted")
        if extra:
            doc.paragraph("Also: " + "; ".join(extra) + ".")
        png, svg = plots.hum_spectrum_figure(result)
        doc.image(SPECTRUM_IMAGE, png, svg, "The ripple's harmonics at each filter node, bars in dBV on a log "
                  "frequency axis" + (", at key-down" if result.keydown_harmonics else "")
                  + (", and the battery current's in dBµA" if result.battery_harmonics else ""))
        images.append(SPECTRUM_IMAGE)
    h = result.hash
    if h is None:
        doc.paragraph("The high-frequency analysis (each diode's turn-off with its reverse recovery and junction "
                      "capacitance, the ringing after it, and the hash at the output) did not run for this report: "
                      "`simkit report --hash` adds it, `simkit hash` also suggests a snubber.")
        return images
    band = eng(result.design.simulation.hash_band, "Hz")
    doc.heading("Diode turn-off and hash", 3)
    doc.paragraph(f"{HF_PERIODS} periods from the steady state with each diode's reverse recovery and junction "
                  f"capacitance (from its maker's figures), at a step of at most {eng(h.hf.step, 's')}; the last "
                  f"period is measured. Hash at the output, everything above {band}: "
                  f"**{show('hash_rms_v', m['hash_rms_v'])}** ({show('hash_dbuv', m['hash_dbuv'])}).")
    rows = []
    for name, d in result.of_kind(DiodeResult).items():
        freq = "none" if d.ring_frequency_hz is None or not math.isfinite(d.ring_frequency_hz) \
            else show("ring_frequency_hz", d.ring_frequency_hz)
        decay = "–" if d.ring_decay_s is None or not math.isfinite(d.ring_decay_s) else show("ring_decay_s",
                                                                                              d.ring_decay_s)
        rows.append([name, show("piv_v", d.piv_v), freq, show("ring_peak_v", d.ring_peak_v or 0.0), decay])
    doc.table(["diode", "settled PIV", "ring", "above the PIV", "decay to 1/e"], rows, align="lrrrr", markup=False)
    auto = [e.name for e in h.hf.circuit.elements if e.name.startswith(("CSW", "RSW"))]
    if auto:
        doc.paragraph(f"The ring figures include the snubber simkit adds across the winding ({', '.join(auto)}, drawn "
                      "in the schematic): without it, or a snubber of the design's own, nothing but the diode's few "
                      "picofarads would damp the leakage inductance, and no simulation can say how high that would "
                      "ring without the winding's own capacitance.")
    for n in h.notes:
        doc.note(n, kind="caution")
    if h.rings:
        png, svg = plots.ringing_figure(result)
        doc.image(RINGING_IMAGE, png, svg, "The turn-off of the diode with the strongest ring, and the output's "
                  f"content above {band} over the measured period (through an ideal high-pass filter: the small "
                  "ripples either side of a sharp event are the filter's own)")
        images.append(RINGING_IMAGE)
    return images
