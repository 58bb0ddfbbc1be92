"""Plots of runs, sweeps and spreads; with report/schematic.py (through schemdraw) the only
modules that import matplotlib, and only when a plot is asked for.

Our own house style (:data:`STYLE`): titles at the left that say what is shown and where
(node, part), axes in engineering notation with their unit (``EngFormatter``), a light
grid, no top or right frame, and one palette (:data:`PALETTE`) for every figure.  Each
figure comes as PNG (for documents and screens) and SVG (for print), byte-for-byte
repeatable: no dates or software versions, a fixed SVG hash salt.

The helpers :func:`new_figure`, :func:`style_axes`, :func:`figure_bytes` and
:func:`line_plot` are for every report (design, sweep, spread); the ``*_figure`` functions
draw one design's waveforms.
"""

from __future__ import annotations

import io
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from simkit.pipeline.results import DiodeResult

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: Our palette: deep blue for outputs, then brick, green, amber, plum, steel, brown, teal.
PALETTE: tuple[str, ...] = ("#1f3b73", "#b5452b", "#3f7f4f", "#d98c1f", "#7a3b69", "#4b6e8f", "#9c6b30",
                            "#2a8a8a")
INK = "#1d232b"
MUTED = "#5b6570"
GRID = "#e1e6ec"

#: Kept for callers of the old single-figure plot.
COLOURS = {"out": PALETTE[0], "rect": "#6f8fbf", "diodes": PALETTE[1:7], "start": "#3c4650"}

#: matplotlib settings of the house style, applied inside every plot function only.
STYLE: dict[str, Any] = {
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "text.color": INK,
    "axes.edgecolor": MUTED,
    "axes.labelcolor": INK,
    "axes.titlesize": 10.0,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlepad": 8.0,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": GRID,
    "grid.linewidth": 0.7,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "legend.frameon": False,
    "legend.fontsize": 8.0,
    "lines.linewidth": 1.4,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "svg.hashsalt": "simkit",
    "svg.fonttype": "path",  # text as outlines: the SVG prints the same without our fonts
    "path.simplify": True,
}

#: Resolution of the PNG files, dots per inch (8 in wide figures give 1200 pixels).
PNG_DPI = 150


def _mpl():  # type: ignore[no-untyped-def]
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import EngFormatter

    return plt, EngFormatter


@contextmanager
def house_style() -> Iterator[Any]:
    """``with house_style() as plt:`` draws with our style and restores matplotlib's after."""
    plt, _ = _mpl()
    with plt.rc_context(STYLE):
        yield plt


def new_figure(rows: int = 1, height: float = 3.4, width: float = 8.0, sharex: bool = False) -> tuple[Any, list[Any]]:
    """A figure of ``rows`` axes stacked, in the house style (call inside :func:`house_style`)."""
    plt, _ = _mpl()
    fig, axes = plt.subplots(rows, 1, figsize=(width, height), sharex=sharex, layout="constrained", squeeze=False)
    return fig, [a for a in axes[:, 0]]


def style_axes(ax: Any, title: str, xlabel: str, xunit: str, ylabel: str, yunit: str, logx: bool = False) -> None:
    """Title and axis labels, with engineering-notation ticks in ``xunit``/``yunit``.

    The unit is in every tick label (``20 ms``, ``1.2 kV``), so labels say only the quantity.
    """
    _, Eng = _mpl()
    ax.set_title(title)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    if logx:
        ax.set_xscale("log")
    ax.xaxis.set_major_formatter(Eng(unit=xunit, sep="\N{THIN SPACE}"))
    ax.yaxis.set_major_formatter(Eng(unit=yunit, sep="\N{THIN SPACE}"))


def save_figure(fig: Any, fmt: str, tight: bool = False) -> bytes:
    """One format (``png`` or ``svg``) of a figure, repeatable to the byte; the figure stays open."""
    plt, _ = _mpl()
    meta = {"png": {"Software": None}, "svg": {"Date": None, "Creator": None}}.get(fmt)
    if meta is None:
        raise ValueError(f"format {fmt!r}: png or svg")
    buf = io.BytesIO()
    extra: dict[str, Any] = {"bbox_inches": "tight", "pad_inches": 0.15} if tight else {}
    with plt.rc_context({"svg.hashsalt": "simkit"}):
        fig.savefig(buf, format=fmt, dpi=PNG_DPI, metadata=meta, **extra)
    return buf.getvalue()


def figure_bytes(fig: Any, tight: bool = False) -> tuple[bytes, bytes]:
    """PNG and SVG of a figure, repeatable to the byte; closes the figure."""
    plt, _ = _mpl()
    try:
        png = save_figure(fig, "png", tight)
        # The layout is done: keep it for the SVG instead of computing it again (a third of the time).
        fig.set_layout_engine("none")
        return png, save_figure(fig, "svg", tight)
    finally:
        plt.close(fig)


@dataclass(frozen=True)
class Series:
    """One line of a :func:`line_plot`: label, x and y values (SI), optional marker style."""

    label: str
    x: Sequence[float] | np.ndarray
    y: Sequence[float] | np.ndarray
    marker: str = "o"


def line_plot(series: Sequence[Series], title: str, xlabel: str, xunit: str, ylabel: str, yunit: str,
              logx: bool = False, height: float = 3.4) -> tuple[bytes, bytes]:
    """One axes of lines with markers (e.g. a figure against a swept value): PNG and SVG bytes."""
    with house_style():
        fig, (ax,) = new_figure(1, height)
        for k, s in enumerate(series):
            ax.plot(np.asarray(s.x, dtype=float), np.asarray(s.y, dtype=float), marker=s.marker, ms=4,
                    color=PALETTE[k % len(PALETTE)], label=s.label)
        style_axes(ax, title, xlabel, xunit, ylabel, yunit, logx)
        if len(series) > 1 or (series and series[0].label):
            ax.legend(loc="best")
        return figure_bytes(fig)


def histogram_plot(values: Sequence[float] | np.ndarray, title: str, xlabel: str, xunit: str,
                   bins: int = 20, marks: Sequence[tuple[str, float]] = (), height: float = 3.4) -> tuple[bytes, bytes]:
    """A histogram of one figure over many runs, with labelled vertical marks (nominal, limits)."""
    with house_style():
        fig, (ax,) = new_figure(1, height)
        ax.hist(np.asarray(values, dtype=float), bins=bins, color=PALETTE[5], edgecolor="white", linewidth=0.6)
        for k, (label, x) in enumerate(marks):
            ax.axvline(x, color=PALETTE[(k + 1) % len(PALETTE)], lw=1.3, ls="--", label=label)
        style_axes(ax, title, xlabel, xunit, "runs", "")
        if marks:
            ax.legend(loc="best")
        return figure_bytes(fig)


# -- one design's waveforms ---------------------------------------------------------------------


def _steady(result: RunResult) -> tuple[np.ndarray, np.ndarray, float]:
    """Selection of the steady-state measurement window, time from its start, and its start (s)."""
    w = result.steady.final.waves
    t0, _t1 = result.window
    sel = w.time >= t0 - 1e-12
    return sel, w.time[sel] - t0, t0


def _periods(result: RunResult) -> int:
    t0, t1 = result.window
    return round((t1 - t0) / result.circuit.period)


def _freq(result: RunResult) -> str:
    from simkit.units import eng

    return eng(1.0 / result.circuit.period, "Hz")


def _node_parts(result: RunResult, node: str) -> list[str]:
    """User parts across a node to ground (capacitors, load, bleeder), to name it in titles."""
    c = result.circuit
    names = [x.name for x in c.capacitors if x.role != "snubber" and x.plus == node and x.minus == "0"]
    names += [r.name for r in c.resistors if r.role in ("load", "bleeder") and r.a == node and r.b == "0"]
    if node == c.output and c.load_kind == "current":
        names.append("BLOAD")
    if node == c.output and c.load_kind == "resistor" and "RLOAD" not in names:
        names.append("RLOAD")
    return names


def _where(result: RunResult, node: str) -> str:
    parts = _node_parts(result, node)
    return f"node {node}" + (f" (across {', '.join(parts)})" if parts else "")


def output_steady_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Output voltage over the last periods in steady state (and the rectifier node when apart)."""
    from simkit.units import eng

    c = result.circuit
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    nodes = [c.output] if c.rectified == c.output else [c.output, c.rectified]
    with house_style():
        fig, axes = new_figure(len(nodes), 3.2 * len(nodes), sharex=True)
        for k, (ax, node) in enumerate(zip(axes, nodes, strict=True)):
            v = w.v(node)[sel]
            mean = float(np.mean(v)) if node != c.output else result.metrics["vout_dc_v"]
            pp = float(np.max(v) - np.min(v))
            ax.plot(t, v, color=PALETTE[0 if k == 0 else 5])
            ax.axhline(mean, color=MUTED, lw=0.9, ls="--")
            lo, hi = float(np.min(v)), float(np.max(v))
            span = max(hi - lo, 1e-9 * max(abs(hi), 1.0))
            ax.set_ylim(lo - 0.08 * span, hi + 0.38 * span)  # headroom for the note
            ax.text(0.995, 0.97, f"mean {eng(mean, 'V')}, ripple {eng(pp, 'V')} peak to peak",
                    transform=ax.transAxes, ha="right", va="top", color=INK, fontsize=8.5,
                    bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": GRID})
            what = "Output voltage" if node == c.output else "Rectifier output voltage"
            style_axes(ax, f"{what} at {_where(result, node)}, steady state",
                       "", "s", "voltage to node 0", "V")
        axes[-1].set_xlabel(f"time within the last {_periods(result)} periods of the steady state ({_freq(result)})")
        return figure_bytes(fig)


def _diode_label(result: RunResult, k: int) -> str:
    d = result.circuit.diodes[k]
    return f"{d.name} ({d.anode} → {d.cathode})"


def diode_currents_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Rectifier diode current pulses in steady state, one panel per diode on one scale."""
    from simkit.units import eng

    c = result.circuit
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    n = len(c.diodes)
    currents = [w.i(d.sense)[sel] for d in c.diodes]
    top = max(float(np.max(i)) for i in currents)
    low = min(0.0, min(float(np.min(i)) for i in currents))
    with house_style():
        fig, axes = new_figure(n, max(2.6, 1.55 * n + 0.8), sharex=True)
        for k, (ax, i) in enumerate(zip(axes, currents, strict=True)):
            ax.plot(t, i, color=PALETTE[1 + k % (len(PALETTE) - 1)])
            ax.set_ylim(low - 0.05 * (top - low), top * 1.18 if top > 0 else 1.0)
            diode = result.part(c.diodes[k].name, DiodeResult)
            peak, avg = diode.peak_a, diode.avg_a
            ax.text(0.995, 0.92, f"peak {eng(peak, 'A')}, mean {eng(avg, 'A')}", transform=ax.transAxes,
                    ha="right", va="top", fontsize=8.0, color=INK)
            title = f"Current in {_diode_label(result, k)}, anode to cathode" if k == 0 else _diode_label(result, k)
            style_axes(ax, title, "", "s", "current", "A")
        if n > 1:
            fig.suptitle("Rectifier diode currents in steady state", x=0.01, ha="left", fontsize=10.5,
                         fontweight="bold", color=INK)
        axes[-1].set_xlabel(f"time within the last {_periods(result)} periods of the steady state ({_freq(result)})")
        return figure_bytes(fig)


def switch_on_voltage_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Output (and rectifier node) voltage from switch-on with every capacitor empty."""
    from simkit.units import eng

    c = result.circuit
    s = result.start.waves
    phase = result.design.simulation.switch_on_phase
    with house_style():
        fig, (ax,) = new_figure(1, 3.6)
        ax.plot(s.time, s.v(c.output), color=PALETTE[0], label=f"output, {_where(result, c.output)}")
        if c.rectified != c.output:
            ax.plot(s.time, s.v(c.rectified), color=PALETTE[5], lw=1.0, label=f"rectifier output, node {c.rectified}")
        steady = result.metrics["vout_dc_v"]
        ax.axhline(steady, color=MUTED, lw=0.9, ls="--", label=f"steady-state mean output {eng(steady, 'V')}")
        peak_v = float(np.max(s.v(c.output)))
        k = int(np.argmax(s.v(c.output)))
        ax.annotate(f"highest {eng(peak_v, 'V')}", (float(s.time[k]), peak_v), xytext=(0, 8),
                    textcoords="offset points", ha="center", fontsize=8.0, color=INK)
        ax.set_ylim(bottom=min(0.0, float(np.min(s.v(c.output)))), top=max(peak_v, steady) * 1.15)
        style_axes(ax, f"Switch-on: output voltage at node {c.output}, capacitors empty, source from {phase:g}°",
                   f"time after switch-on ({_freq(result)} source)", "s", "voltage to node 0", "V")
        ax.legend(loc="lower right")
        return figure_bytes(fig)


def switch_on_current_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Diode currents from switch-on (the surge), over the first periods."""
    from simkit.units import eng

    c = result.circuit
    s = result.start.waves
    T = c.period
    span = min(float(s.time[-1]), 6 * T)
    sel = s.time <= span + 1e-12
    phase = result.design.simulation.switch_on_phase
    with house_style():
        fig, (ax,) = new_figure(1, 3.6)
        for k, d in enumerate(c.diodes):
            ax.plot(s.time[sel], s.i(d.sense)[sel], color=PALETTE[1 + k % (len(PALETTE) - 1)], lw=1.1,
                    label=_diode_label(result, k))
        worst = max(c.diodes, key=lambda d: result.part(d.name, DiodeResult).surge_peak_a)
        i_w = s.i(worst.sense)[sel]
        k = int(np.argmax(i_w))
        ax.annotate(f"{worst.name} peak {eng(float(i_w[k]), 'A')}", (float(s.time[sel][k]), float(i_w[k])),
                    xytext=(10, -4), textcoords="offset points", ha="left", va="top", fontsize=8.0, color=INK)
        ax.set_ylim(top=float(np.max(i_w)) * 1.3)  # room for the legend
        style_axes(ax, f"Switch-on surge: diode currents, anode to cathode, source from {phase:g}°",
                   f"time after switch-on, first {round(span / T)} periods", "s", "current", "A")
        ax.legend(loc="upper right", ncol=min(4, max(1, len(c.diodes) // 3 + 1)))
        return figure_bytes(fig)


def _load_senses(result: RunResult) -> list[tuple[str, str]]:
    """(load name, its 0 V sense source) for every load of the circuit."""
    c = result.circuit
    refs = getattr(c, "loads", None)
    if refs:
        return [(r.name, r.sense) for r in refs]
    sense = getattr(c, "load_sense", None)
    return [("load", sense)] if sense else []


def run_timeline_figure(result: RunResult, w: Any, what: str) -> tuple[bytes, bytes]:
    """Output voltage and load currents over a whole run's waveforms ``w`` (keyed or stepped loads)."""
    c = result.circuit
    loads = _load_senses(result)
    rows = 2 if loads else 1
    with house_style():
        fig, axes = new_figure(rows, 2.9 * rows + 0.4, sharex=True)
        t = w.time - w.time[0]
        axes[0].plot(t, w.v(c.output), color=PALETTE[0])
        style_axes(axes[0], f"{what}: output voltage at {_where(result, c.output)}", "", "s",
                   "voltage to node 0", "V")
        if loads:
            for k, (name, sense) in enumerate(loads):
                axes[1].plot(t, w.i(sense), color=PALETTE[1 + k % (len(PALETTE) - 1)], label=name)
            style_axes(axes[1], f"{what}: load current", "", "s", "current", "A")
            axes[1].legend(loc="upper right")
        axes[-1].set_xlabel("time from the start of the run" if w.time[0] > 0 else "time after switch-on")
        return figure_bytes(fig)


def run_figure_bytes(result: RunResult, fmt: str = "png") -> bytes:
    """One overview figure: output voltage and diode currents over the last periods, and the
    switch-on (``waveforms.png`` of ``run --out`` and ``demo``)."""
    c = result.circuit
    T = c.period
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    design = result.design
    with house_style() as plt:
        fig, axes = plt.subplots(3, 1, figsize=(8.0, 9.0), layout="constrained")
        ax = axes[0]
        ax.plot(t, w.v(c.output)[sel], color=PALETTE[0], lw=1.6, label=f"output (node {c.output}, left axis)")
        handles, labels = ax.get_legend_handles_labels()
        if c.rectified != c.output:
            # The rectifier node swings far more than the output: give it its own axis.
            axr = ax.twinx()
            axr.plot(t, w.v(c.rectified)[sel], color=COLOURS["rect"], lw=1.0, ls="--",
                     label=f"rectifier output (node {c.rectified}, right axis)")
            axr.spines["right"].set_visible(True)
            axr.grid(False)
            style_axes(axr, "", "", "s", "rectifier output", "V")
            h2, l2 = axr.get_legend_handles_labels()
            handles, labels = handles + h2, labels + l2
        style_axes(ax, f"Output voltage in steady state, last {_periods(result)} periods", "time", "s",
                   "output voltage", "V")
        ax.legend(handles, labels, loc="upper right")

        ax = axes[1]
        for k, d in enumerate(c.diodes):
            ax.plot(t, w.i(d.sense)[sel], lw=1.0, color=PALETTE[1 + k % (len(PALETTE) - 1)], label=d.name)
        style_axes(ax, "Rectifier diode currents in steady state", "time", "s", "current", "A")
        ax.legend(loc="upper right", ncol=min(4, max(1, len(c.diodes))))

        s = result.start.waves
        ax = axes[2]
        phase = design.simulation.switch_on_phase
        for k, d in enumerate(c.diodes):
            ax.plot(s.time, s.i(d.sense), lw=1.0, color=PALETTE[1 + k % (len(PALETTE) - 1)],
                    label=f"{d.name} current")
        style_axes(ax, f"Switch-on from empty capacitors at {phase:g}° of the source", "time", "s", "current", "A")
        ax2 = ax.twinx()
        ax2.spines["right"].set_visible(True)
        ax2.grid(False)
        ax2.plot(s.time, s.v(c.output), color=COLOURS["start"], lw=1.4, label="output voltage")
        style_axes(ax2, "", "", "s", "output voltage", "V")
        lines = ax.get_legend_handles_labels()
        lines2 = ax2.get_legend_handles_labels()
        ax.legend(lines[0] + lines2[0], lines[1] + lines2[1], loc="upper right")
        span = float(s.time[-1])
        ax.set_xlim(0, min(span, max(6 * T, span)))
        fig.suptitle(design.title, fontsize=11)
        try:
            return save_figure(fig, fmt)
        finally:
            plt.close(fig)
