"""Plots of runs, sweeps and spreads; with report/schematic.py (through schemdraw) the only
modules that import matplotlib, and only when a plot is asked for.

Our own house style (:data:`STYLE`), the same in design, sweep and spread plots:

- titles at the left that say what is shown and where (node, part);
- axis labels in words with their unit, the unit carrying the SI prefix the ticks are in
  ("output voltage (V)", "time (ms)", "diode current (mA)"), plain numbers on the ticks;
- legends outside the plotting area, at its right, so they never cover a curve;
- traces that coincide (within :data:`SAME_TRACE` of the plot's scale) drawn once and
  named together ("D1 = D4"), so no trace hides under another without a word;
- a level (an output voltage, a figure against a swept value) shown on an axis at least
  :data:`MIN_SPAN` of its size tall, so a small change looks small, and the change printed
  on the plot; a ripple plot zooms on the ripple on purpose and prints its size beside it;
- one palette (:data:`PALETTE`), a light grid, no top or right frame.

Each figure comes as PNG (for documents and screens) and SVG (for print), byte-for-byte
repeatable: no dates or software versions, a fixed SVG hash salt.

The helpers :func:`new_figure`, :func:`style_axes`, :func:`legend_outside`,
:func:`level_limits`, :func:`figure_bytes` and :func:`draw_histogram` are for every report;
the ``*_figure`` functions draw one design's waveforms.
"""

from __future__ import annotations

import io
import itertools
import math
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from functools import cache
from typing import TYPE_CHECKING, Any

import numpy as np

from simkit.analysis.metrics import one_period_mean
from simkit.design.sources import switch_on_words
from simkit.figures import FIGURES
from simkit.pipeline.results import DiodeResult
from simkit.units import eng

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: Our palette: deep blue for outputs, then brick, green, amber, plum, steel, brown, teal.
PALETTE: tuple[str, ...] = ("#1f3b73", "#b5452b", "#3f7f4f", "#d98c1f", "#7a3b69", "#4b6e8f", "#9c6b30",
                            "#2a8a8a")
INK = "#1d232b"
MUTED = "#5b6570"
GRID = "#e1e6ec"
#: A raw waveform under its one-period mean, and the shading of key-down intervals.
RAW = "#9fb2c8"
SHADE = "#eef1f6"


#: The least height of a level plot's y-axis, as a share of the largest value's size: a change
#: of 0.05 % then fills a hundredth of the axis, a change of 5 % all of it (our house style).
MIN_SPAN = 0.05
#: A ripple smaller than this share of its mean is plotted as the change from the mean.
SMALL_RIPPLE = 1e-3
#: Traces closer than this share of the plot's largest value everywhere are drawn as one (about a
#: line's width on a 3 in tall panel).
SAME_TRACE = 0.005

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

#: A quantity in words for a unit, when a figure has no short name.
UNIT_WORDS: dict[str, str] = {"V": "voltage", "A": "current", "W": "power", "s": "time", "h": "time",
                              "VA": "apparent power", "Hz": "frequency", "%": "percent", "dB": "ratio",
                              "F": "capacitance", "H": "inductance", "Ω": "resistance"}
#: Units shown without an SI prefix.
NO_PREFIX = ("", "%", "dB", "h", "°", "A²s", "dBV", "dBuV", "dBµV")


def figure_label(key: str, unit: str) -> str:
    """A figure's name in words for an axis (without its unit): ``vout_dc_v`` -> ``output voltage``."""
    fig = FIGURES.get(key)
    return (fig.words if fig is not None and fig.words else "") or UNIT_WORDS.get(unit) or key


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


def new_figure(rows: int = 1, height: float = 3.4, width: float = 8.0, sharex: bool = False,
               ratios: Sequence[float] | None = None) -> tuple[Any, list[Any]]:
    """A figure of ``rows`` axes stacked, in the house style (call inside :func:`house_style`)."""
    plt, _ = _mpl()
    kw = {"height_ratios": list(ratios)} if ratios else {}
    fig, axes = plt.subplots(rows, 1, figsize=(width, height), sharex=sharex, layout="constrained", squeeze=False,
                             gridspec_kw=kw)
    return fig, [a for a in axes[:, 0]]


def prefix_of(size: float, unit: str) -> tuple[float, str]:
    """The SI prefix (scale and symbol) numbers of about ``size`` read best in: 0.02 s -> ms."""
    if unit in NO_PREFIX or not math.isfinite(size) or size <= 0:
        return 1.0, ""
    for scale, symbol in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"),
                          (1e-12, "p")):
        if size >= scale * 0.9995:
            return scale, symbol
    return 1e-12, "p"


@cache
def _unit_formatter() -> type:
    """A tick formatter that picks one SI prefix for the axis and writes it into the axis label."""
    from matplotlib.ticker import Formatter

    class UnitFormatter(Formatter):  # type: ignore[misc]
        def __init__(self, quantity: str, unit: str, significant: int | None = None) -> None:
            self.quantity = quantity
            self.unit = unit
            self.significant = significant
            self.scale = 1.0
            self.decimals = 0

        def set_locs(self, locs: Any) -> None:
            super().set_locs(locs)
            lo, hi = self.axis.get_view_interval()
            size = max(abs(lo), abs(hi))
            inside = [abs(float(x)) for x in locs if lo - 1e-12 <= x <= hi + 1e-12 and x != 0]
            if self.axis.get_scale() == "log" and inside:  # decades apart: the prefix of the middle one
                size = math.exp(sum(math.log(x) for x in inside) / len(inside))
            self.scale, symbol = prefix_of(size, self.unit)
            shown = sorted(float(x) / self.scale for x in locs if lo - 1e-12 <= x <= hi + 1e-12)
            gaps = [b - a for a, b in itertools.pairwise(shown) if b > a]
            step = min(gaps, default=max((abs(x) for x in shown), default=1.0) or 1.0)
            # The fewest decimals that write every tick exactly (2.5 is not "2"; 555.98302 is not 555.983).
            self.decimals = next((d for d in range(10) if all(abs(round(x, d) - x) <= 1e-3 * step for x in shown)), 9)
            unit = f"{symbol}{self.unit}"
            self.axis.set_label_text(f"{self.quantity} ({unit})" if unit else self.quantity)

        def __call__(self, x: float, pos: Any = None) -> str:
            if self.significant:
                text = f"{x / self.scale:.{self.significant}g}"
                return text.rstrip("0").rstrip(".") if "." in text and "e" not in text else text
            text = f"{x / self.scale:.{self.decimals}f}"
            return "0" if text.strip("-0.") == "" else text

    return UnitFormatter


def unit_axis(axis: Any, quantity: str, unit: str, significant: int | None = None) -> None:
    """Label an axis ``quantity (unit)`` with the SI prefix its ticks are written in.

    Ticks show the fewest decimals that write every one exactly, or ``significant`` digits each
    (for ticks at values that are not round, such as the points of a logarithmic sweep).
    """
    axis.set_major_formatter(_unit_formatter()(quantity, unit, significant))
    axis.set_label_text(f"{quantity} ({unit})" if unit else quantity)


def style_axes(ax: Any, title: str, xlabel: str, xunit: str, ylabel: str, yunit: str, logx: bool = False) -> None:
    """Title and axis labels in words, each axis's unit (with the prefix of its ticks) in brackets.

    ``xlabel``/``ylabel`` name the quantity ("output voltage"); ``xunit``/``yunit`` its SI unit.
    """
    ax.set_title(title)
    if logx:
        ax.set_xscale("log")
    if xlabel or xunit:
        unit_axis(ax.xaxis, xlabel or UNIT_WORDS.get(xunit, ""), xunit)
    if ylabel or yunit:
        unit_axis(ax.yaxis, ylabel or UNIT_WORDS.get(yunit, ""), yunit)


def legend_outside(ax: Any, handles: Sequence[Any] | None = None, labels: Sequence[str] | None = None,
                   title: str | None = None) -> Any:
    """The legend at the right of the plotting area, outside it: it never covers a curve."""
    args = (list(handles), list(labels)) if handles is not None and labels is not None else ()
    return ax.legend(*args, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0, title=title,
                     alignment="left")


def level_limits(ax: Any, values: Sequence[float] | np.ndarray, headroom: float = 0.0,
                 min_span: float = MIN_SPAN) -> tuple[float, float]:
    """Y-limits around ``values`` at least ``min_span`` of their size tall (centred on them), with
    ``headroom`` (a share of the span) above for a note; returns the data's (low, high)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if not v.size:
        return math.nan, math.nan
    lo, hi = float(np.min(v)), float(np.max(v))
    size = max(abs(lo), abs(hi))
    span = max(hi - lo, min_span * size, 1e-12)
    mid = (lo + hi) / 2
    bottom, top = mid - 0.55 * span, mid + 0.55 * span
    ax.set_ylim(bottom, top + headroom * (top - bottom))
    return lo, hi


def percent(p: float) -> str:
    """A share for people: ``0.05 %``, ``3.4 %``, ``under 0.001 %`` (never ``2.5e-05 %``)."""
    if not math.isfinite(p):
        return "n/a"
    if abs(p) < 0.001:
        return "under 0.001 %" if p else "0 %"
    return f"{float(f'{p:.2g}'):g} %"


def change_text(lo: float, hi: float, unit: str, what: str = "change") -> str:
    """``change 150 mV (0.05 % of 300 V)``: a level's spread in its unit and as a share of its size."""
    size = max(abs(lo), abs(hi))
    share = f" ({percent(100 * (hi - lo) / size)} of {eng(size, unit)})" if size > 0 else ""
    return f"{what} {eng(hi - lo, unit)}{share}"


def note(ax: Any, text: str, where: str = "upper right") -> None:
    """A short note inside the plotting area, in a corner kept free of data (see ``headroom``)."""
    x, ha = (0.995, "right") if where.endswith("right") else (0.005, "left")
    ax.text(x, 0.97, text, transform=ax.transAxes, ha=ha, va="top", color=INK, fontsize=8.5,
            bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": GRID})


def coincident(traces: Sequence[np.ndarray], share: float = SAME_TRACE) -> list[list[int]]:
    """Groups of traces (indices) that coincide: every sample within ``share`` of the largest
    magnitude of all of them from the group's first trace."""
    scale = max((float(np.max(np.abs(t))) for t in traces if len(t)), default=0.0)
    groups: list[list[int]] = []
    for k, t in enumerate(traces):
        for g in groups:
            if float(np.max(np.abs(t - traces[g[0]]))) <= share * scale:
                g.append(k)
                break
        else:
            groups.append([k])
    return groups


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


def draw_histogram(ax: Any, values: np.ndarray, bins: int, marks: Sequence[tuple[str, float]], xlabel: str,
                   xunit: str) -> None:
    """A histogram on an x-axis at least :data:`MIN_SPAN` of the values' size wide, the spread printed."""
    v = values[np.isfinite(values)]
    ax.hist(v, bins=bins, color=PALETTE[5], edgecolor="white", linewidth=0.6)
    for k, (label, x) in enumerate(marks):
        ax.axvline(x, color=PALETTE[(k + 1) % len(PALETTE)], lw=1.3, ls="--", label=f"{label}: {eng(x, xunit)}")
    unit_axis(ax.xaxis, xlabel, xunit)
    unit_axis(ax.yaxis, "runs", "")
    if v.size:
        lo, hi = float(np.min(v)), float(np.max(v))
        size = max(abs(lo), abs(hi))
        span = max(hi - lo, MIN_SPAN * size, 1e-12)
        mid = (lo + hi) / 2
        ax.set_xlim(mid - 0.55 * span, mid + 0.55 * span)
        spread = change_text(lo, hi, xunit, "lowest to highest:").replace(": ", ":\n", 1)
        if marks:  # the spread heads the legend, outside the bars and the marks
            legend_outside(ax, title=spread)
        else:
            ax.set_ylim(0, ax.get_ylim()[1] * 1.3)
            note(ax, spread.replace("\n", " "), "upper left")
    elif marks:
        legend_outside(ax)


# -- one design's waveforms ---------------------------------------------------------------------


def _steady(result: RunResult) -> tuple[np.ndarray, np.ndarray, float]:
    """Selection of the steady-state measurement window, time from its start, and its start (s)."""
    w = result.steady.final.waves
    t0, _t1 = result.window
    sel = w.time >= t0 - 1e-12
    return sel, w.time[sel] - t0, t0



def _freq(result: RunResult) -> str:
    return eng(1.0 / result.circuit.period, "Hz")


def _node_parts(result: RunResult, node: str) -> list[str]:
    """User parts across a node to ground (capacitors, loads, bleeder), to name it in titles."""
    c = result.circuit
    names = [x.name for x in c.capacitors if x.is_part and x.plus == node and x.minus == "0"]
    names += [r.name for r in c.resistors if r.role == "bleeder" and r.a == node and r.b == "0"]
    names += [ld.name for ld in c.loads if ld.node == node]
    reg = getattr(result.design, "regulator", None)
    if reg is not None and reg.kind == "shunt" and node == c.output:
        names.insert(0, "DZ" if reg.zener is not None else "GLOW")
    return names


def _where(result: RunResult, node: str) -> str:
    parts = _node_parts(result, node)
    across = f", across {', '.join(parts[:-1])} and {parts[-1]}" if len(parts) > 1 else \
        (f", across {parts[0]}" if parts else "")
    return f"node {node}{across}"


def _window_label(result: RunResult) -> str:
    n = result.periods
    last = "the last period" if n == 1 else f"the last {n} periods"
    return f"time within {last} of the steady state ({_freq(result)} source)"


def output_steady_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Output voltage over the last periods in steady state (and the rectifier node when apart).

    These panels zoom on the ripple on purpose; the note says how big it is against the mean.
    """
    c = result.circuit
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    nodes = [c.output] if c.rectified == c.output else [c.output, c.rectified]
    with house_style():
        fig, axes = new_figure(len(nodes), 3.2 * len(nodes), sharex=True)
        for k, (ax, node) in enumerate(zip(axes, nodes, strict=True)):
            v = w.v(node)[sel]
            mean = float(np.mean(v)) if node != c.output else result.metrics["vout_dc_v"]
            lo, hi = float(np.min(v)), float(np.max(v))
            what = "Output voltage" if node == c.output else "Rectifier output voltage"
            # A ripple under a thousandth of the level is shown as the change from the mean: ticks
            # of 555.98302 V read worse than ticks of 20 µV.
            offset = mean if hi - lo < SMALL_RIPPLE * abs(mean) else 0.0
            ax.plot(t, v - offset, color=PALETTE[0 if k == 0 else 5])
            ax.axhline(mean - offset, color=MUTED, lw=0.9, ls="--")
            span = max(hi - lo, 1e-9 * max(abs(hi), 1.0))
            ax.set_ylim(lo - offset - 0.08 * span, hi - offset + 0.42 * span)  # headroom for the note
            share = f" ({percent(100 * (hi - lo) / abs(mean))} of the mean)" if mean else ""
            note(ax, f"mean {eng(mean, 'V')} (dashed); ripple {eng(hi - lo, 'V')} peak to peak{share}; "
                     "the axis zooms on the ripple")
            quantity = what.lower() if not offset else f"{what.lower()} minus its mean {eng(mean, 'V')}"
            style_axes(ax, f"{what} in steady state ({_where(result, node)})", "", "", quantity, "V")
        unit_axis(axes[-1].xaxis, _window_label(result), "s")
        return figure_bytes(fig)


def _diode_where(result: RunResult, k: int) -> str:
    d = result.circuit.diodes[k]
    return f"{d.anode} → {d.cathode}"


def _group_name(result: RunResult, group: Sequence[int]) -> str:
    return " = ".join(result.circuit.diodes[k].name for k in group)


def _figures_of(result: RunResult, group: Sequence[int], keys: Sequence[tuple[str, str]]) -> str:
    """``peak 722.5 mA, mean 50.32 mA``: per-part figures of a group, one value when they agree as shown."""
    out = []
    for key, word in keys:
        diodes = [result.part(result.circuit.diodes[k].name, DiodeResult) for k in group]
        shown = list(dict.fromkeys(eng(getattr(d, key), "A") for d in diodes))
        out.append(f"{word} {' and '.join(shown)}")
    return ", ".join(out)


def diode_currents_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Rectifier diode current pulses in steady state, one panel per diode (diodes carrying the same
    current share a panel, named together: ``D1 = D4``), all on one scale."""
    c = result.circuit
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    currents = [w.i(d.sense)[sel] for d in c.diodes]
    groups = coincident(currents)
    top = max(float(np.max(i)) for i in currents)
    low = min(0.0, min(float(np.min(i)) for i in currents))
    n = len(groups)
    with house_style():
        fig, axes = new_figure(n, max(2.6, 1.55 * n + 0.9), sharex=True)
        for k, (ax, group) in enumerate(zip(axes, groups, strict=True)):
            ax.plot(t, currents[group[0]], color=PALETTE[1 + k % (len(PALETTE) - 1)])
            ax.set_ylim(low - 0.05 * (top - low), top * 1.25 if top > 0 else 1.0)
            note(ax, _figures_of(result, group, (("peak_a", "peak"), ("avg_a", "mean"))))
            where = " and ".join(f"{c.diodes[j].name} {_diode_where(result, j)}" for j in group) \
                if len(group) > 1 else _diode_where(result, group[0])
            same = ": the same current" if len(group) > 1 else ""
            style_axes(ax, f"{_group_name(result, group)} ({where}){same}", "", "", "diode current", "A")
        fig.suptitle("Rectifier diode currents in steady state, anode to cathode", x=0.01, ha="left",
                     fontsize=10.5, fontweight="bold", color=INK)
        unit_axis(axes[-1].xaxis, _window_label(result), "s")
        return figure_bytes(fig)


def _switch_on(result: RunResult, phase: float) -> str:
    """The switch-on instant in words: degrees, and for a square or modified sine where in the wave."""
    words = switch_on_words(result.design.source, phase)
    return words if result.design.source.inverter is not None and result.design.source.inverter.waveform != "sine" \
        else f"{phase:g}°"


def switch_on_voltage_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Output (and rectifier node) voltage from switch-on with every capacitor empty."""
    c = result.circuit
    s = result.start.waves
    phase = result.design.simulation.switch_on_phase
    with house_style():
        fig, (ax,) = new_figure(1, 3.6)
        ax.plot(s.time, s.v(c.output), color=PALETTE[0], label=f"output\n({_where(result, c.output)})")
        if c.rectified != c.output:
            ax.plot(s.time, s.v(c.rectified), color=PALETTE[5], lw=1.0,
                    label=f"rectifier output\n(node {c.rectified})")
        steady = result.metrics["vout_dc_v"]
        ax.axhline(steady, color=MUTED, lw=0.9, ls="--", label=f"steady-state mean\noutput {eng(steady, 'V')}")
        peak_v = float(np.max(s.v(c.output)))
        k = int(np.argmax(s.v(c.output)))
        where = float(s.time[k]) / float(s.time[-1])  # keep the note inside the plotting area
        ax.annotate(f"highest {eng(peak_v, 'V')}", (float(s.time[k]), peak_v), xytext=(0, -14 if where > 0.66 else 8),
                    textcoords="offset points", ha="right" if where > 0.66 else "left" if where < 0.2 else "center",
                    fontsize=8.0, color=INK)
        everything = [s.v(c.output)] + ([s.v(c.rectified)] if c.rectified != c.output else [])
        top = max(float(np.max(v)) for v in everything)
        ax.set_ylim(bottom=min(0.0, float(np.min(s.v(c.output)))), top=max(top, steady) * 1.15)
        style_axes(ax, f"Switch-on: output voltage, capacitors empty, source from {_switch_on(result, phase)}",
                   f"time after switch-on ({_freq(result)} source)", "s", "voltage to the return", "V")
        legend_outside(ax)
        return figure_bytes(fig)


def switch_on_current_figure(result: RunResult) -> tuple[bytes, bytes]:
    """Diode currents from switch-on (the surge), over the first periods; diodes carrying the same
    current drawn once and named together."""
    c = result.circuit
    s = result.start.waves
    T = c.period
    span = min(float(s.time[-1]), 6 * T)
    sel = s.time <= span + 1e-12
    phase = result.design.simulation.switch_on_phase
    currents = [s.i(d.sense)[sel] for d in c.diodes]
    groups = coincident(currents)
    with house_style():
        fig, (ax,) = new_figure(1, 3.6)
        for k, group in enumerate(groups):
            where = ", ".join(_diode_where(result, j) for j in group)
            ax.plot(s.time[sel], currents[group[0]], color=PALETTE[1 + k % (len(PALETTE) - 1)], lw=1.1,
                    label=f"{_group_name(result, group)}\n({where})")
        worst = max(range(len(c.diodes)), key=lambda j: float(np.max(currents[j])))
        i_w = currents[worst]
        k = int(np.argmax(i_w))
        name = _group_name(result, next(g for g in groups if worst in g))
        ax.annotate(f"{name}: peak {eng(float(i_w[k]), 'A')}", (float(s.time[sel][k]), float(i_w[k])),
                    xytext=(10, -4), textcoords="offset points", ha="left", va="top", fontsize=8.0, color=INK)
        ax.set_ylim(top=float(np.max(i_w)) * 1.15)
        style_axes(ax, f"Switch-on surge: diode currents, anode to cathode, source from {_switch_on(result, phase)}",
                   f"time after switch-on, first {round(span / T)} periods", "s", "diode current", "A")
        legend_outside(ax)
        return figure_bytes(fig)


def _load_senses(result: RunResult, circuit: Any = None) -> list[tuple[str, str]]:
    """(load name, its 0 V sense source) for every load of the circuit."""
    c = circuit if circuit is not None else result.circuit
    return [(r.name, r.sense) for r in getattr(c, "loads", [])]


def run_timeline_figure(result: RunResult, w: Any, what: str) -> tuple[bytes, bytes]:
    """Output voltage and load currents over a whole run's waveforms ``w`` (stepped loads, warm-ups)."""
    c = result.circuit
    loads = _load_senses(result)
    rows = 2 if loads else 1
    with house_style():
        fig, axes = new_figure(rows, 2.9 * rows + 0.4, sharex=True)
        t = w.time - w.time[0]
        axes[0].plot(t, w.v(c.output), color=PALETTE[0])
        style_axes(axes[0], f"{what}: output voltage ({_where(result, c.output)})", "", "", "output voltage", "V")
        if loads:
            for k, (name, sense) in enumerate(loads):
                axes[1].plot(t, w.i(sense), color=PALETTE[1 + k % (len(PALETTE) - 1)], label=name)
            style_axes(axes[1], f"{what}: current into each load", "", "", "load current", "A")
            legend_outside(axes[1])
        start = "time after switch-on" if w is result.start.waves else "time from the start of the run"
        unit_axis(axes[-1].xaxis, start, "s")
        return figure_bytes(fig)


# -- keyed loads ---------------------------------------------------------------------------------


def envelope(t: np.ndarray, v: np.ndarray, bins: int = 2500) -> tuple[np.ndarray, np.ndarray]:
    """A long trace thinned for drawing: the lowest and highest sample of each of ``bins`` time
    slices, in time order, so the drawn band is the trace's own (every peak and trough kept)."""
    if len(t) <= 2 * bins:
        return t, v
    edges = np.linspace(t[0], t[-1], bins + 1)
    idx = np.clip(np.searchsorted(t, edges[1:-1]), 1, len(t) - 1)
    keep = []
    for a, b in zip(np.concatenate([[0], idx]), np.concatenate([idx, [len(t)]]), strict=True):
        if b <= a:
            continue
        lo = a + int(np.argmin(v[a:b]))
        hi = a + int(np.argmax(v[a:b]))
        keep += sorted({lo, hi})
    k = np.asarray(keep)
    return t[k], v[k]


def key_down_intervals(t: np.ndarray, i: np.ndarray) -> list[tuple[float, float]]:
    """Where a keyed load's current is above half-way between its key-up and key-down levels."""
    lo, hi = float(np.min(i)), float(np.max(i))
    if hi - lo <= 1e-12 * max(abs(hi), 1.0):
        return []
    down = i > (lo + hi) / 2
    edges = np.flatnonzero(np.diff(down.astype(int)))
    starts = [t[0]] if down[0] else []
    ends = []
    for e in edges:
        (starts if not down[e] else ends).append(float(t[e + 1]))
    if down[-1]:
        ends.append(float(t[-1]))
    return list(zip(starts, ends, strict=False))


def _settle_band(result: RunResult) -> float:
    """The keyed load's settle band (the share of the step recovery_time_s counts as settled)."""
    ld = next((x for x in result.design.loads if x.kind == "keyed"), None)
    return float(getattr(ld, "settle_band", 0.02))


def keyed_figure(result: RunResult) -> tuple[bytes, bytes]:
    """The output while the load is keyed: over one whole keying cycle, the raw output (its band is
    the ripple) under its one-period mean, key-down shaded; then the longest key-down and its edges
    close up, with the load current below.

    Reads ``result.keyed``: ``run.waves`` (and ``run.offset``), ``window`` (absolute times of the
    cycle shown) and ``circuit``.
    """
    keyed = result.keyed if result.keyed is not None else result.extra.get("keyed")
    run = keyed.run
    w = run.waves
    circuit = getattr(keyed, "circuit", None) or result.circuit
    T = result.circuit.period
    offset = float(getattr(run, "offset", 0.0) or 0.0)
    c0, c1 = keyed.window
    # Times from the start of the cycle shown; the run may reach before and after it (steady keying
    # repeats, so a key-down cut by the cycle's start is whole there).
    t_run = w.time + offset - c0
    v_run = w.v(circuit.output)
    sel = (t_run >= -1e-12) & (t_run <= c1 - c0 + 1e-12)
    t, v = t_run[sel], v_run[sel]
    grid = np.linspace(0.0, c1 - c0, 3000)

    def period_mean(at: np.ndarray) -> np.ndarray:
        """The one-period mean the keyed figures use (from the run's running integral when it has one)."""
        if hasattr(keyed, "period_mean") and getattr(keyed, "areas", None):
            return keyed.period_mean(circuit.output.lower(), at + c0, T)
        return one_period_mean(t_run, v_run, T, at)

    mean = period_mean(grid)
    senses = _load_senses(result, circuit)
    keyed_index = next((k for k, ld in enumerate(result.design.loads) if ld.kind == "keyed"), 0)
    ref = next((r for r in circuit.loads if r.index == keyed_index), None)
    key_sense = ref.sense if ref is not None else (senses[0][1] if senses else None)
    downs = key_down_intervals(t_run, w.i(key_sense)) if key_sense else []
    whole = [(a, b) for a, b in downs if a > t_run[0] + 1e-9 and b < t_run[-1] - 1e-9]
    m = result.metrics
    with house_style():
        fig, axes = new_figure(3, 8.4, ratios=(1.0, 1.0, 0.6))
        ax = axes[0]
        tt, vv = envelope(t, v)
        ax.plot(tt, vv, color=RAW, lw=0.6, label="output, as simulated\n(the band is the ripple)")
        ax.plot(grid, mean, color=PALETTE[0], lw=1.8, label="one-period mean")
        shown = [(max(a, 0.0), min(b, c1 - c0)) for a, b in downs if b > 0.0 and a < c1 - c0]
        for k, (a, b) in enumerate(shown):
            ax.axvspan(a, b, color=SHADE, lw=0, label="key down" if k == 0 else None, zorder=0)
        lo, hi = level_limits(ax, v, headroom=0.3)
        parts = [f"{word} {eng(m[key], 'V')}" for key, word in (("vout_keydown_v", "key-down mean"),
                                                                  ("vout_keyup_v", "key-up mean")) if key in m]
        if "sag_v" in m:
            parts.append(f"sag {eng(m['sag_v'], 'V')}" + (f" ({percent(m['sag_pct'])})" if "sag_pct" in m else ""))
        note(ax, "; ".join(parts) if parts else change_text(lo, hi, "V"))
        style_axes(ax, f"Keyed load: output voltage over one keying cycle ({_where(result, circuit.output)})",
                   "time from the start of the keying cycle", "s", "output voltage", "V")
        ax.set_xlim(0.0, c1 - c0)
        legend_outside(ax)
        # The longest key-down, with room before and after for both edges; time from its leading edge.
        ax = axes[1]
        if whole:
            a, b = max(whole, key=lambda iv: iv[1] - iv[0])
            margin = max(0.25 * (b - a), 3 * T)
            z0, z1 = max(float(t_run[0]), a - margin), min(float(t_run[-1]), b + margin)
        else:
            a = b = 0.0
            z0, z1 = 0.0, min(c1 - c0, 20 * T)
        zs = (t_run >= z0) & (t_run <= z1)
        tz = t_run[zs] - a
        zgrid = np.linspace(z0, z1, 1500)
        ax.plot(*envelope(tz, v_run[zs]), color=RAW, lw=0.8, label="output, as simulated")
        ax.plot(zgrid - a, period_mean(zgrid), color=PALETTE[0], lw=1.8, label="one-period mean")
        if whole:
            ax.axvspan(0.0, b - a, color=SHADE, lw=0, label="key down", zorder=0)
            for edge in (0.0, b - a):
                ax.axvline(edge, color=MUTED, lw=0.8, ls="--")
        level_limits(ax, v_run[zs], headroom=0.3)
        if whole:
            recovery = m.get("recovery_time_s", math.nan)
            band = _settle_band(result)
            note(ax, f"longest key-down: {eng(b - a, 's')}"
                 + (f"; recovery (one-period mean within {percent(100 * band)} of the step): {eng(recovery, 's')}"
                    if math.isfinite(recovery) else "; the one-period mean does not settle before key-up"))
        when = "time from the key-down edge" if whole else "time from the start of the keying cycle"
        style_axes(ax, "Close-up: the longest key-down and its edges", when, "s", "output voltage", "V")
        ax.set_xlim(z0 - a, z1 - a)
        legend_outside(ax)
        ax = axes[2]
        for k, (name, sense) in enumerate(senses):
            ax.plot(*envelope(tz, w.i(sense)[zs]), color=PALETTE[1 + k % (len(PALETTE) - 1)], label=name)
        if whole:
            ax.axvspan(0.0, b - a, color=SHADE, lw=0, zorder=0)
        ax.set_xlim(z0 - a, z1 - a)
        style_axes(ax, "Close-up: current into each load", when, "s", "load current", "A")
        legend_outside(ax)
        return figure_bytes(fig)


# -- the overview of `run --out` and `demo` -------------------------------------------------------


def run_figure_bytes(result: RunResult, fmt: str = "png") -> bytes:
    """One overview figure (``waveforms.png`` of ``run --out`` and ``demo``): output voltage and
    diode currents over the last periods in steady state, then the same two from switch-on."""
    c = result.circuit
    T = c.period
    w = result.steady.final.waves
    sel, t, _t0 = _steady(result)
    s = result.start.waves
    design = result.design
    phase = design.simulation.switch_on_phase
    with house_style() as plt:
        fig, axes = new_figure(4, 11.0)
        ax = axes[0]
        v = w.v(c.output)[sel]
        ax.plot(t, v, color=PALETTE[0], lw=1.6, label="output")
        ax.axhline(result.metrics["vout_dc_v"], color=MUTED, lw=0.9, ls="--", label="its mean")
        lo, hi = float(np.min(v)), float(np.max(v))
        span = max(hi - lo, 1e-9 * max(abs(hi), 1.0))
        ax.set_ylim(lo - 0.08 * span, hi + 0.42 * span)
        note(ax, f"mean {eng(result.metrics['vout_dc_v'], 'V')}; ripple {eng(hi - lo, 'V')} peak to peak; "
                 "the axis zooms on the ripple")
        style_axes(ax, f"Output voltage in steady state ({_where(result, c.output)})", "time", "s",
                   "output voltage", "V")
        legend_outside(ax)

        ax = axes[1]
        currents = [w.i(d.sense)[sel] for d in c.diodes]
        for k, group in enumerate(coincident(currents)):
            ax.plot(t, currents[group[0]], lw=1.0, color=PALETTE[1 + k % (len(PALETTE) - 1)],
                    label=_group_name(result, group))
        style_axes(ax, "Rectifier diode currents in steady state, anode to cathode", "time", "s", "diode current",
                   "A")
        legend_outside(ax)

        ax = axes[2]
        ax.plot(s.time, s.v(c.output), color=PALETTE[0], lw=1.4, label="output")
        ax.axhline(result.metrics["vout_dc_v"], color=MUTED, lw=0.9, ls="--", label="steady-state mean")
        style_axes(ax, f"Switch-on from empty capacitors at {_switch_on(result, phase)}: output voltage",
                   "time after switch-on", "s", "output voltage", "V")
        legend_outside(ax)

        ax = axes[3]
        span = min(float(s.time[-1]), 6 * T)
        ss = s.time <= span + 1e-12
        surge = [s.i(d.sense)[ss] for d in c.diodes]
        for k, group in enumerate(coincident(surge)):
            ax.plot(s.time[ss], surge[group[0]], lw=1.0, color=PALETTE[1 + k % (len(PALETTE) - 1)],
                    label=_group_name(result, group))
        style_axes(ax, f"Switch-on: diode currents over the first {round(span / T)} periods",
                   "time after switch-on", "s", "diode current", "A")
        legend_outside(ax)
        fig.suptitle(design.title, x=0.01, ha="left", fontsize=11, fontweight="bold", color=INK)
        try:
            return save_figure(fig, fmt)
        finally:
            plt.close(fig)


# -- hum and hash ---------------------------------------------------------------------------------

#: Levels more than this far below a node's largest harmonic are not drawn (numerical dust), dB.
SPECTRUM_RANGE = 60.0


def _spectrum_panel(ax: Any, spectra: dict[str, Sequence[Any]], names: dict[str, str], unit: str,
                    level: Any) -> None:
    """Bars of ``level(h)`` (dB) per harmonic and node, grouped at each harmonic on a log frequency axis."""
    n = len(spectra)
    tops = [level(h) for hs in spectra.values() for h in hs]
    top = max(tops)
    # Each node shows its own harmonics down to SPECTRUM_RANGE below its largest: a quiet output's
    # hum stays visible beside a loud reservoir.
    own = {node: max(level(h) for h in hs) - SPECTRUM_RANGE for node, hs in spectra.items()}
    floor = 10.0 * math.floor(min(own.values()) / 10.0)
    half = 0.018  # half the group's width, in decades: groups of the 9th and 10th harmonics stay apart
    width = 2 * half / max(n, 1)
    for j, (node, hs) in enumerate(spectra.items()):
        f = np.array([h.frequency_hz for h in hs])
        lv = np.array([level(h) for h in hs])
        left = f * 10 ** (-half + j * width)
        right = left * 10 ** (0.85 * width)
        shown = lv > max(own[node], floor)
        best = max(hs, key=lambda h: h.rms)
        ax.bar(left[shown], (lv - floor)[shown], width=(right - left)[shown], bottom=floor, align="edge",
               color=PALETTE[j % len(PALETTE)], label=f"{names.get(node, node)}\nlargest {level(best):.1f} {unit} "
               f"at {eng(best.frequency_hz, 'Hz')}")
    lo = min(h.frequency_hz for hs in spectra.values() for h in hs)
    hi = max(h.frequency_hz for hs in spectra.values() for h in hs)
    ax.set_xlim(lo * 10 ** (-2 * half), hi * 10 ** (2 * half))
    ax.set_ylim(floor, top + 0.15 * (top - floor))
    first = list(next(iter(spectra.values())))
    ticks = [h.frequency_hz for k, h in enumerate(first, 1) if k in (1, 2, 3, 4, 6, 10) or k == len(first)]
    ax.set_xticks(ticks)
    ax.xaxis.set_minor_locator(_null_locator())
    legend_outside(ax)


def _null_locator() -> Any:
    from matplotlib.ticker import NullLocator

    return NullLocator()


def hum_spectrum_figure(result: RunResult) -> tuple[bytes, bytes]:
    """The hum: the first ten harmonics of the source frequency at the rectifier's output, every filter node
    and the output, as bars in dBV on a log frequency axis; at key-down and of the battery current below
    when the design has them."""
    from simkit.analysis.spectrum import dbua

    panels: list[tuple[str, dict[str, Sequence[Any]], str, Any]] = []
    names = {n: _where(result, n) for n in result.ripple_harmonics}
    panels.append(("Hum: harmonics of the ripple in steady state, at each filter node",
                   result.ripple_harmonics, "dBV", lambda h: h.dbv))
    if result.keydown_harmonics:
        panels.append(("Hum at key-down: the last whole period of the longest key-down", result.keydown_harmonics,
                       "dBV", lambda h: h.dbv))
    if result.battery_harmonics:
        panels.append(("Battery current: harmonics of the source frequency (what the battery leads carry)",
                       {"battery": result.battery_harmonics}, "dBuA", lambda h: dbua(h.rms)))
        names["battery"] = "battery current"
    with house_style():
        fig, axes = new_figure(len(panels), 3.3 * len(panels) + 0.3)
        for ax, (title, spectra, unit, level) in zip(axes, panels, strict=True):
            shown = "dBµA" if unit == "dBuA" else unit
            words = "hum level" if unit == "dBV" else "current level"
            style_axes(ax, title, "", "", words, shown, logx=True)
            _spectrum_panel(ax, spectra, names, shown, level)
            unit_axis(ax.xaxis, f"frequency ({_freq(result)} source and its harmonics, log scale)", "Hz",
                      significant=3)
        return figure_bytes(fig)


def ringing_figure(result: RunResult) -> tuple[bytes, bytes]:
    """The high-frequency analysis: the reverse voltage of the diode with the strongest ring around its turn-off,
    and the output's content above the hash band over the measured period."""
    from simkit.analysis.spectrum import above
    h = result.hash
    hf = h.hf
    w = hf.run.waves
    a, b = hf.window
    name = max(h.rings, key=lambda k: h.rings[k].amplitude_v)
    ring = h.rings[name]
    d = next(x for x in hf.circuit.diodes if x.name == name)
    vrev = w.v(d.cathode) - w.v(d.anode)
    f = ring.frequency_hz if ring.rings else hf.ring_estimate_hz
    T = hf.circuit.period
    t0 = ring.turn_off_s
    span = min(12.0 / f, T / 8) if f > 0 else T / 20
    sel = (w.time >= t0 - 0.1 * span) & (w.time <= t0 + span)
    band = result.design.simulation.hash_band
    n = int(min(1 << 21, max(8192, 2 * (b - a) / hf.step)))
    grid, hash_wave = above(w.time, w.v(hf.circuit.output), a, b, band, n)
    part = result.part(name, DiodeResult)
    with house_style():
        fig, axes = new_figure(2, 6.6)
        ax = axes[0]
        ax.plot(w.time[sel] - t0, vrev[sel], color=PALETTE[1], lw=1.1, label=f"{name} reverse voltage")
        top = float(np.max(vrev[sel]))
        if top > 0.5 * part.piv_v:  # the ring reaches towards the PIV: show it
            ax.axhline(part.piv_v, color=MUTED, lw=0.9, ls="--", label=f"settled PIV {eng(part.piv_v, 'V')}")
            top = max(top, part.piv_v)
        what = (f"ring {eng(ring.frequency_hz, 'Hz')}" + (f", decays to 1/e in {eng(ring.decay_s, 's')}"
                                                          if math.isfinite(ring.decay_s) else "")
                if ring.rings else "no ring above a thousandth of the PIV")
        note(ax, f"{what}; settled PIV {eng(part.piv_v, 'V')}, highest with the ringing "
                 f"{eng(part.piv_v + (part.ring_peak_v or 0.0), 'V')}", "upper left")
        low = float(np.min(vrev[sel]))
        ax.set_ylim(low - 0.05 * (top - low), top + 0.35 * (top - low) + 1e-9)
        style_axes(ax, f"Turn-off of {name} ({d.anode} → {d.cathode}), with its reverse recovery and junction "
                   "capacitance", "time from the turn-off", "s", "reverse voltage", "V")
        legend_outside(ax)
        ax = axes[1]
        ax.plot(grid - a, hash_wave, color=PALETTE[0], lw=0.8, label=f"output above {eng(band, 'Hz')}")
        note(ax, f"RMS {eng(h.hash_rms_v, 'V')} ({result.metrics['hash_dbuv']:.1f} dBµV)", "upper left")
        span_v = float(np.max(np.abs(hash_wave))) or 1e-12
        ax.set_ylim(-1.1 * span_v, 1.5 * span_v)
        style_axes(ax, f"Hash: the output's content above {eng(band, 'Hz')} over one period (node "
                   f"{hf.circuit.output})",
                   f"time within the measured period ({_freq(result)} source)", "s", "hash voltage", "V")
        legend_outside(ax)
        return figure_bytes(fig)
