"""``run --probe``: each probed waveform as a CSV file and a plot (steady state above, switch-on below).

The CSV has one header line and one row per sample, both runs in one file::

    run,time (s),v(out) (V)
    steady,0.0,386.93...
    ...
    switch-on,0.0,0.0

``run`` is ``steady`` (time from the start of the steady-state measurement window, the
samples the figures are computed from) or ``switch-on`` (time after switch-on, every capacitor
empty at 0 s).  The last column is named ``v(NODE)``, ``i(PART)`` or ``v(PART)`` with its unit.
Numbers are SI, written with every digit (``repr``), so a spreadsheet or numpy reads back
exactly what simkit computed.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from simkit.design.model import Design
from simkit.netlist.circuit import Circuit
from simkit.pipeline.probes import TIME_MEANING, ProbeError, Waveform, find_probe
from simkit.report.outputs import OutputDir
from simkit.units import eng

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: A steady-state trace varying by less than this share of its size is drawn as a constant level.
FLAT = 1e-6
#: The first line of every probe CSV, with the probe's column and unit filled in.
HEADER = ("run", "time (s)", "{column} ({unit})")


def file_stem(name: str) -> str:
    """A probe's file name without extension: ``out`` -> ``probe-out``, ``v(C1)`` -> ``probe-v-C1``."""
    return "probe-" + re.sub(r"[^A-Za-z0-9_]+", "-", name).strip("-")


def header(wave: Waveform) -> list[str]:
    """The CSV header of a probe: ``run``, ``time (s)``, then ``v(out) (V)`` or ``i(D1) (A)``."""
    return [HEADER[0], HEADER[1], HEADER[2].format(column=wave.column, unit=wave.unit)]


def csv_text(waves: Sequence[Waveform]) -> str:
    """One probe over its runs as CSV text (the runs in the order given)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header(waves[0]))
    for wave in waves:
        for t, v in zip(wave.time.tolist(), wave.value.tolist(), strict=True):
            w.writerow([wave.run, repr(float(t)), repr(float(v))])
    return buf.getvalue()


def probe_figure(result: RunResult, steady: Waveform, start: Waveform) -> tuple[bytes, bytes]:
    """A probe over the steady-state window (above) and from switch-on (below): PNG and SVG bytes."""
    from simkit.report import plots

    words = f"{steady.quantity} {steady.column}"
    with plots.house_style():
        fig, axes = plots.new_figure(2, 6.6)
        ax = axes[0]
        v = steady.value
        mean = steady.mean()
        lo, hi = float(np.min(v)), float(np.max(v))
        # A variation under a thousandth of the level is drawn as the change from the mean (house style:
        # ticks of 555.98302 V read worse than ticks of 20 uV).
        size = max(abs(hi), abs(lo))
        flat = hi - lo <= FLAT * size  # numerical noise on a constant: show the level, not the noise
        offset = mean if not flat and hi - lo < plots.SMALL_RIPPLE * abs(mean) else 0.0
        ax.plot(steady.time, v - offset, color=plots.PALETTE[0], lw=1.4, label=steady.column)
        ax.axhline(mean - offset, color=plots.MUTED, lw=0.9, ls="--", label="its mean")
        if flat:
            plots.level_limits(ax, v, headroom=0.3)
            plots.note(ax, f"constant at {eng(mean, steady.unit)} (varies by under a millionth of it)")
        else:
            span = max(hi - lo, 1e-12)
            ax.set_ylim(lo - offset - 0.08 * span, hi - offset + 0.42 * span)  # headroom for the note
            zoom = "; the axis zooms on the variation" if lo > 0 or hi < 0 else ""
            plots.note(ax, f"mean {eng(mean, steady.unit)} (dashed); {eng(hi - lo, steady.unit)} peak to peak{zoom}")
        if offset:
            words_steady = f"{words} minus its mean {eng(mean, steady.unit)}"
        else:
            words_steady = words
        t0, t1 = result.window
        periods = round((t1 - t0) / result.circuit.period)
        last = "the last period" if periods == 1 else f"the last {periods} periods"
        plots.style_axes(ax, f"{steady.column} in steady state, {last}", TIME_MEANING["steady"], "s", words_steady,
                         steady.unit)
        plots.legend_outside(ax)
        ax = axes[1]
        ax.plot(start.time, start.value, color=plots.PALETTE[1], lw=1.2, label=start.column)
        k = int(np.argmax(np.abs(start.value)))
        plots.note(ax, f"largest {eng(float(start.value[k]), start.unit)} at {eng(float(start.time[k]), 's')}")
        top = float(np.max(start.value))
        bottom = float(np.min(start.value))
        pad = 0.25 * max(top - bottom, 1e-12)
        ax.set_ylim(bottom - 0.05 * pad, top + pad)
        plots.style_axes(ax, f"{start.column} from switch-on, capacitors empty", TIME_MEANING["switch-on"], "s",
                         words, start.unit)
        plots.legend_outside(ax)
        fig.suptitle(f"{steady.column}: {steady.meaning}", x=0.01, ha="left", fontsize=10.5, fontweight="bold",
                     color=plots.INK)
        return plots.figure_bytes(fig)


def probe_waves(result: RunResult, name: str) -> tuple[Waveform, Waveform]:
    """A probe's steady-state and switch-on waveforms."""
    return result.waveform(name, "steady"), result.waveform(name, "switch-on")


def probe_file_names(circuit: Circuit, names: Sequence[str]) -> list[str]:
    """The files ``--probe`` writes for these names (CSV and PNG each), in order; exit 2 on an unknown name."""
    files: list[str] = []
    for n in names:
        probe = find_probe(circuit, n)
        stem = file_stem(probe.name)
        files += [f"{stem}.csv", f"{stem}.png"]
    return list(dict.fromkeys(files))


def write_probes(result: RunResult, names: Sequence[str], out: OutputDir) -> list[str]:
    """Write ``probe-NAME.csv`` and ``probe-NAME.png`` for each name (each probe once); the names written."""
    written: list[str] = []
    done: set[str] = set()
    for n in names:
        steady, start = probe_waves(result, n)
        if steady.name in done:
            continue
        done.add(steady.name)
        stem = file_stem(steady.name)
        out.write(f"{stem}.csv", csv_text([steady, start]))
        png, _svg = probe_figure(result, steady, start)
        out.write(f"{stem}.png", png)
        written += [f"{stem}.csv", f"{stem}.png"]
    return written


def planned_files(design: Design, names: Sequence[str]) -> list[str]:
    """The files ``run --probe`` will write, checked before anything is simulated: exit 2 naming every valid
    probe when a name is not a node or part of the design."""
    from simkit.netlist.build import build_circuit

    try:
        return probe_file_names(build_circuit(design), names)
    except ProbeError as exc:
        raise ProbeError(f"{design.origin}: {exc}") from None
