"""Designs side by side: the terminal table of ``simkit compare``, its plots on shared axes and its report.

Reads a :class:`simkit.sidebyside.Comparison` (duck-typed: ``entries`` with ``label``, ``design``,
``result``, ``verdicts``, ``check_error``; ``figure_names``; ``differences()``; ``to_json()``).
The first design is the reference: changes are another design's figure minus the first's, and
as a share of the first's.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from simkit.figures import FIGURES
from simkit.report.document import Document
from simkit.report.outputs import OutputDir
from simkit.report.text import show
from simkit.safety import CAUTIONS
from simkit.units import eng

#: The files ``compare --report`` writes.
REPORT_FILES: tuple[str, ...] = ("report.md", "report.html", "compare.json", "output-steady.png", "output-steady.svg",
                                 "switch-on.png", "switch-on.svg")


def change_text(key: str, diff: float | None, ref: float | None) -> str:
    """``+4.2 V (+1.1 %)``; ``same`` for no change; ``–`` where there is nothing to compare."""
    if diff is None or ref is None:
        return "–"
    if diff == 0:
        return "same"
    sign = "+" if diff > 0 else "−"
    share = f" ({_share(sign, abs(diff) / abs(ref))})" if ref else ""
    return f"{sign}{show(key, abs(diff))}{share}"


def _share(sign: str, x: float) -> str:
    p = 100 * x
    return "under 0.001 %" if p < 0.001 else f"{sign}{float(f'{p:.2g}'):g} %"


def _ref(metrics: dict[str, float], key: str) -> float | None:
    v = metrics.get(key)
    return float(v) if isinstance(v, (int, float)) and math.isfinite(v) else None


def table_rows(comparison: Any) -> tuple[list[str], list[list[str]]]:
    """Headers and rows of the figures table: value per design, then each change from the first."""
    entries = comparison.entries
    n = len(entries)
    headers = ["figure", *[f"[{k}]" for k in range(1, n + 1)], *[f"[{k}] − [1]" for k in range(2, n + 1)]]
    diffs = comparison.differences()
    ref = entries[0].result.metrics
    rows = []
    for key in comparison.figure_names:
        values = [show(key, e.result.metrics[key]) if key in e.result.metrics else "–" for e in entries]
        changes = [change_text(key, diffs[key][k], _ref(ref, key)) for k in range(1, n)]
        rows.append([key, *values, *changes])
    return headers, rows


def verdict_rows(comparison: Any) -> list[list[str]]:
    """One row per design: its check result and how many verdicts pass, are marginal, fail."""
    rows = []
    for k, e in enumerate(comparison.entries, 1):
        v = e.verdicts
        if v is None:
            rows.append([f"[{k}]", "not checked" if not e.check_error else f"could not check: {e.check_error}",
                         "", "", ""])
        else:
            rows.append([f"[{k}]", v["result"], str(v["pass"]), str(v["marginal"]), str(v["fail"])])
    return rows


def _aligned(headers: list[str], rows: list[list[str]], right_from: int = 1) -> list[str]:
    widths = [max(len(r[i]) for r in [headers, *rows]) for i in range(len(headers))]
    out = []
    for r in [headers, *rows]:
        cells = [c.ljust(widths[i]) if i < right_from else c.rjust(widths[i]) for i, c in enumerate(r)]
        out.append("  " + "  ".join(cells).rstrip())
    return out


def compare_text(comparison: Any) -> str:
    """The terminal output: the designs, the figures as columns with the changes, the verdict counts."""
    lines = ["designs (changes are from [1]):"]
    for k, e in enumerate(comparison.entries, 1):
        lines.append(f"  [{k}] {e.label}: {e.design.title}")
    lines.append("")
    headers, rows = table_rows(comparison)
    lines += _aligned(headers, rows)
    if comparison.checked:
        lines += ["", "checks (as simkit check):"]
        lines += _aligned(["design", "result", "pass", "marginal", "fail"], verdict_rows(comparison), right_from=2)
    warned = [(k, w) for k, e in enumerate(comparison.entries, 1) for w in e.result.warnings]
    if warned:
        lines += ["", "warnings:"]
        lines += [f"  [{k}] {w}" for k, w in warned]
    lines += ["", CAUTIONS]
    return "\n".join(lines) + "\n"


# -- plots on shared axes ----------------------------------------------------------------------------


def _steady_out(result: Any) -> tuple[np.ndarray, np.ndarray]:
    w = result.waveform(result.circuit.output, "steady")
    return w.time, w.value


def _name(k: int, label: str) -> str:
    return f"[{k}] {label}" if len(label) <= 48 else f"[{k}] {label[:45]}..."


def output_figure(comparison: Any) -> tuple[bytes, bytes]:
    """Every design's output over its last steady-state period on shared axes: the level, then the ripple
    (each output minus its own mean) so ripples of different size and shape read side by side."""
    from simkit.report import plots

    with plots.house_style():
        fig, (top, bottom) = plots.new_figure(2, 6.4, sharex=True)
        everything = []
        for k, e in enumerate(comparison.entries, 1):
            t, v = _steady_out(e.result)
            colour = plots.PALETTE[(k - 1) % len(plots.PALETTE)]
            top.plot(t, v, color=colour, lw=1.4, label=_name(k, e.label))
            bottom.plot(t, v - e.result.metrics["vout_dc_v"], color=colour, lw=1.4, label=_name(k, e.label))
            everything.append(v)
        lo, hi = plots.level_limits(top, np.concatenate(everything), headroom=0.25)
        if math.isfinite(lo):
            plots.note(top, plots.change_text(lo, hi, "V", "lowest to highest"))
        plots.style_axes(top, "Output voltage in steady state, each design's last period", "", "",
                         "output voltage", "V")
        plots.legend_outside(top)
        ripples = [float(e.result.metrics["ripple_pp_v"]) for e in comparison.entries]
        plots.note(bottom, "ripple peak to peak: " + ", ".join(f"[{k}] {eng(r, 'V')}" for k, r in
                                                                  enumerate(ripples, 1)))
        top_r = max(float(np.max(np.abs(v - e.result.metrics["vout_dc_v"])))
                    for v, e in zip(everything, comparison.entries, strict=True))
        bottom.set_ylim(-1.15 * top_r if top_r > 0 else -1, 1.6 * top_r if top_r > 0 else 1)
        plots.style_axes(bottom, "Ripple: each output minus its own mean", "", "", "output minus its mean", "V")
        plots.legend_outside(bottom)
        plots.unit_axis(bottom.xaxis, "time from the start of the steady-state measurement window", "s")
        return plots.figure_bytes(fig)


def switch_on_figure(comparison: Any) -> tuple[bytes, bytes]:
    """Every design from switch-on on shared axes: output voltage, then the current of each design's
    diode with the highest surge over the first periods."""
    from simkit.report import plots

    with plots.house_style():
        fig, (top, bottom) = plots.new_figure(2, 6.6)
        span = 0.0
        for k, e in enumerate(comparison.entries, 1):
            colour = plots.PALETTE[(k - 1) % len(plots.PALETTE)]
            w = e.result.waveform(e.result.circuit.output, "switch-on")
            top.plot(w.time, w.value, color=colour, lw=1.3, label=_name(k, e.label))
            top.axhline(e.result.metrics["vout_dc_v"], color=colour, lw=0.8, ls="--")
            span = max(span, min(float(w.time[-1]), 6 * e.result.circuit.period))
        for k, e in enumerate(comparison.entries, 1):
            colour = plots.PALETTE[(k - 1) % len(plots.PALETTE)]
            diodes = [d.name for d in e.result.circuit.diodes]
            worst = max(diodes, key=lambda n: e.result.parts[n].surge_peak_a)
            w = e.result.waveform(worst, "switch-on")
            sel = w.time <= span + 1e-12
            bottom.plot(w.time[sel], w.value[sel], color=colour, lw=1.0, label=f"[{k}] {worst}: peak "
                        f"{eng(e.result.parts[worst].surge_peak_a, 'A')}")
        plots.style_axes(top, "Switch-on, capacitors empty: output voltage (dashed: each steady-state mean)",
                         "time after switch-on", "s", "output voltage", "V")
        top.set_ylim(bottom=min(0.0, top.get_ylim()[0]))
        plots.legend_outside(top)
        plots.style_axes(bottom, "Switch-on surge: each design's diode with the highest peak, anode to cathode",
                         "time after switch-on", "s", "diode current", "A")
        plots.legend_outside(bottom)
        return plots.figure_bytes(fig)


# -- the report ----------------------------------------------------------------------------------------


def build_report(comparison: Any) -> Document:
    """The side-by-side report as a :class:`Document` (nothing written yet)."""
    n = len(comparison.entries)
    doc = Document(f"Side by side: {n} designs", subtitle="Comparison by simkit: each design simulated as simkit run "
                                                          "does" + (", and checked as simkit check does" if
                                                                    comparison.checked else ""))
    if any(e.design.example for e in comparison.entries):  # as the design file says (example = true), not its words
        doc.note("**Invented examples** are among these designs: made up for demonstration; their part values are "
                 "plausible, not taken from a real build or measured.")
    doc.heading("Designs")
    doc.table(["", "design", "file", "changed with --set", "title"],
              [[f"[{k}]", e.label, e.file, "; ".join(e.overrides) or "–", e.design.title]
               for k, e in enumerate(comparison.entries, 1)], align="lllll", markup=False)
    doc.heading("Figures")
    doc.paragraph("Each design's figures; the changes are from design [1], in the figure's unit and as a share of "
                  "design [1]'s value.")
    headers, rows = table_rows(comparison)
    meaning = {k: FIGURES[k].meaning if k in FIGURES else "" for k in comparison.figure_names}
    # Values and changes stay on one line each (a no-break space inside "−45 %").
    doc.table([*headers, "meaning"], [[r[0], *(c.replace(" ", "\u00a0") for c in r[1:]), meaning[r[0]]]
                                      for r in rows],
              align="l" + "r" * (len(headers) - 1) + "l", markup=False)
    if comparison.checked:
        doc.heading("Checks")
        doc.paragraph("Every part against its ratings at the corners that bind, as `simkit check` does.")
        doc.table(["design", "result", "pass", "marginal", "fail"], verdict_rows(comparison), align="llrrr",
                  markup=False)
    warned = [(k, w) for k, e in enumerate(comparison.entries, 1) for w in e.result.warnings]
    if warned:
        doc.heading("Warnings")
        doc.bullets([f"[{k}] {w}" for k, w in warned], markup=False)
    doc.heading("Waveforms")
    png, svg = output_figure(comparison)
    doc.image("output-steady", png, svg, "Output voltage of every design over its last steady-state period, on "
              "shared axes; below, each output minus its own mean (the ripple)")
    png, svg = switch_on_figure(comparison)
    doc.image("switch-on", png, svg, "From switch-on with every capacitor empty: output voltage, and the surge in "
              "each design's hardest-working diode")
    doc.cautions()
    doc.attach("compare.json", json.dumps(comparison.to_json(), indent=2) + "\n")
    return doc


def write_report(comparison: Any, out: OutputDir) -> list[str]:
    """Write report.md, report.html, compare.json and the plots into ``out``; the names written."""
    return build_report(comparison).write(out)
