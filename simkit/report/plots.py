"""Waveform plots of a run; the only module that imports matplotlib.

Axes carry units in engineering notation; titles say what is shown and where (node, part).
Files are byte-for-byte repeatable (no dates or software versions embedded).
"""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from simkit.pipeline import RunResult

#: Our own colours: output in deep blue, diodes in warm tones, the switch-on in slate.
COLOURS = {
    "out": "#1f3b73",
    "rect": "#6f8fbf",
    "diodes": ("#b5452b", "#d98c1f", "#7a3b69", "#3f7f4f", "#9c6b30", "#4b6e8f"),
    "start": "#3c4650",
}


def _mpl():  # type: ignore[no-untyped-def]
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import EngFormatter

    plt.rcParams["svg.hashsalt"] = "simkit"
    return plt, EngFormatter


def run_figure_bytes(result: RunResult, fmt: str = "png") -> bytes:
    """Output voltage and diode currents over the last periods, and the switch-on surge."""
    plt, Eng = _mpl()
    design = result.design
    c = result.circuit
    T = c.period
    w = result.steady.final.waves
    t0, t1 = result.window
    sel = w.time >= t0 - 1e-12
    t = w.time[sel] - t0
    fig, axes = plt.subplots(3, 1, figsize=(8.0, 9.0), constrained_layout=True)
    ax = axes[0]
    ax.plot(t, w.v(c.output)[sel], color=COLOURS["out"], lw=1.6, label=f"output (node {c.output}, left axis)")
    handles, labels = ax.get_legend_handles_labels()
    if c.rectified != c.output:
        # The rectifier node swings far more than the output: give it its own axis.
        axr = ax.twinx()
        axr.plot(t, w.v(c.rectified)[sel], color=COLOURS["rect"], lw=1.0, ls="--",
                 label=f"rectifier output (node {c.rectified}, right axis)")
        axr.yaxis.set_major_formatter(Eng(unit="V"))
        axr.set_ylabel("rectifier output")
        h2, l2 = axr.get_legend_handles_labels()
        handles, labels = handles + h2, labels + l2
    ax.set_title(f"Output voltage in steady state, last {round((t1 - t0) / T)} periods")
    ax.set_ylabel("output voltage")
    ax.legend(handles, labels, loc="upper right", fontsize=8)

    ax = axes[1]
    for k, d in enumerate(c.diodes):
        ax.plot(t, w.i(d.sense)[sel], lw=1.0, color=COLOURS["diodes"][k % 6], label=d.name)
    ax.set_title("Rectifier diode currents in steady state")
    ax.set_ylabel("current")
    ax.legend(loc="upper right", fontsize=8, ncol=min(4, max(1, len(c.diodes))))

    s = result.start.waves
    ax = axes[2]
    phase = design.simulation.switch_on_phase
    for k, d in enumerate(c.diodes):
        ax.plot(s.time, s.i(d.sense), lw=1.0, color=COLOURS["diodes"][k % 6], label=f"{d.name} current")
    ax.set_title(f"Switch-on from empty capacitors at {phase:g}° of the source")
    ax.set_ylabel("current")
    ax2 = ax.twinx()
    ax2.plot(s.time, s.v(c.output), color=COLOURS["start"], lw=1.4, label="output voltage")
    ax2.set_ylabel("output voltage")
    ax2.yaxis.set_major_formatter(Eng(unit="V"))
    lines = ax.get_legend_handles_labels()
    lines2 = ax2.get_legend_handles_labels()
    ax.legend(lines[0] + lines2[0], lines[1] + lines2[1], loc="upper right", fontsize=8)
    span = float(s.time[-1])
    ax.set_xlim(0, min(span, max(6 * T, span)))

    for a, unit in zip(axes, ("V", "A", "A"), strict=True):
        a.xaxis.set_major_formatter(Eng(unit="s"))
        a.yaxis.set_major_formatter(Eng(unit=unit))
        a.set_xlabel("time")
        a.grid(True, color="#d8d8d8", lw=0.6)
    fig.suptitle(design.title, fontsize=11)
    buf = io.BytesIO()
    meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    fig.savefig(buf, format=fmt, dpi=110, metadata=meta)
    plt.close(fig)
    return buf.getvalue()
