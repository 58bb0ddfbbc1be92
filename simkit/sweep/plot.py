"""The sweep plot: chosen figures against the first varied value, one line per value of the others.

matplotlib comes through :mod:`simkit.report.plots` (the one module that imports it), so the file
is as repeatable as the other plots.  A failed point leaves a gap in its line.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import Any

from simkit.design.model import Design
from simkit.design.vocab import QUANTITY_UNITS, key_at
from simkit.figures import FIGURES
from simkit.sweep.specs import VarySpec, si_value
from simkit.units import eng

#: Our own line colours for the second varied value, cycled.
LINE_COLOURS = ("#1f3b73", "#b5452b", "#3f7f4f", "#d98c1f", "#7a3b69", "#4b6e8f", "#9c6b30", "#3c4650")
MAX_LINES = 12


#: How a key's unit is written beside a number (the vocabulary's names where they differ).
_SHOWN_UNITS = {"ohm": "Ω", "deg": "°"}


def unit_of_path(path: str) -> str:
    """The unit of a design key, from the design vocabulary (``filter.0.c`` -> ``F``); empty when the
    key is not a quantity (a count, a name) or not known."""
    k = key_at(Design, path)
    if k is None or k.unit not in QUANTITY_UNITS:
        return ""
    return _SHOWN_UNITS.get(k.unit, k.unit)


def _numeric(v: Any) -> float | None:
    if isinstance(v, bool):
        return None
    if isinstance(v, (int, float)):
        return float(v)
    return None


def _label(path: str, v: Any) -> str:
    x = _numeric(v)
    return f"{path} = {eng(x, unit_of_path(path)) if x is not None else v}"


def sweep_figure_bytes(entries: Sequence[Mapping[str, Any]], specs: Sequence[VarySpec], figures: Sequence[str],
                       paired: bool, title: str, fmt: str = "png") -> bytes:
    """One panel per figure; x is the first --vary, lines are the values of the rest (or one line for --zip)."""
    from simkit.report.plots import _mpl

    plt, Eng = _mpl()
    first = specs[0]
    xs_all = [si_value(v) for v in first.values]
    numeric_x = all(_numeric(v) is not None for v in xs_all)
    others = [] if paired else list(specs[1:])
    # Group rows by the values of the other varied paths.
    groups: dict[tuple[Any, ...], list[Mapping[str, Any]]] = {}
    for e in entries:
        key = tuple((e.get("values") or {}).get(s.path) for s in others)
        groups.setdefault(key, []).append(e)
    keys = list(groups)[:MAX_LINES]
    fig, axes = plt.subplots(len(figures), 1, figsize=(8.0, 3.2 * len(figures) + 0.6), constrained_layout=True,
                             squeeze=False)
    for ax, figure in zip(axes[:, 0], figures, strict=True):
        unit = FIGURES[figure].unit
        for k, key in enumerate(keys):
            rows = groups[key]
            pts: list[tuple[float, float]] = []
            for e in rows:
                xv = (e.get("values") or {}).get(first.path)
                x = _numeric(xv) if numeric_x else (xs_all.index(xv) if xv in xs_all else None)
                if x is None:
                    continue
                y = (e.get("metrics") or {}).get(figure)
                pts.append((x, float(y) if isinstance(y, (int, float)) else math.nan))
            pts.sort()
            label = ", ".join(_label(s.path, v) for s, v in zip(others, key, strict=True)) or None
            ax.plot([p[0] for p in pts], [p[1] for p in pts], marker="o", ms=3.5, lw=1.4,
                    color=LINE_COLOURS[k % len(LINE_COLOURS)], label=label)
        ax.set_title(f"{figure}: {FIGURES[figure].meaning}", fontsize=10)
        ax.yaxis.set_major_formatter(Eng(unit=unit if unit != "VA" else "VA"))
        if numeric_x:
            xunit = unit_of_path(first.path)
            if first.log and all((_numeric(v) or 0) > 0 for v in xs_all):
                # Ticks at the swept values themselves (every k-th when there are many), in engineering notation.
                from matplotlib.ticker import NullFormatter

                ax.set_xscale("log")
                step = max(1, math.ceil(len(xs_all) / 8))
                ticks = [float(v) for v in xs_all[::step]]  # type: ignore[arg-type]
                ax.set_xticks(ticks, [eng(t, xunit) for t in ticks])
                ax.xaxis.set_minor_formatter(NullFormatter())
            else:
                ax.xaxis.set_major_formatter(Eng(unit=xunit))
        else:
            ax.set_xticks(range(len(xs_all)), [str(v) for v in xs_all])
        ax.set_xlabel(first.path)
        ax.grid(True, which="both", alpha=0.3)
        if others and keys:
            ax.legend(fontsize=8, loc="best")
    fig.suptitle(f"Sweep of {title}", fontsize=11)
    buf = io.BytesIO()
    meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    with plt.rc_context({"svg.hashsalt": "simkit"}):
        fig.savefig(buf, format=fmt, dpi=110, metadata=meta)
    plt.close(fig)
    return buf.getvalue()


def histogram_bytes(values: Sequence[float], figure: str, marks: Sequence[tuple[str, float]] = (),
                    fmt: str = "png") -> bytes:
    """A histogram of one figure over the runs of a spread, with labelled vertical marks (percentiles)."""
    from simkit.report.plots import _mpl

    plt, Eng = _mpl()
    unit = (FIGURES[figure].unit if figure in FIGURES else "")
    fig, ax = plt.subplots(1, 1, figsize=(8.0, 3.2), constrained_layout=True)
    bins = max(5, min(40, int(math.sqrt(len(values))) + 1))
    ax.hist(list(values), bins=bins, color=LINE_COLOURS[5], edgecolor="white", linewidth=0.6)
    for k, (label, x) in enumerate(marks):
        ax.axvline(x, color=LINE_COLOURS[(k + 1) % len(LINE_COLOURS)], lw=1.3, ls="--", label=label)
    ax.xaxis.set_major_formatter(Eng(unit=unit))
    ax.set_xlabel(figure)
    ax.set_ylabel("runs")
    meaning = FIGURES[figure].meaning if figure in FIGURES else figure
    ax.set_title(f"{figure}: {meaning}, over {len(values)} runs", fontsize=10)
    ax.grid(True, alpha=0.3)
    if marks:
        ax.legend(fontsize=8, loc="best")
    buf = io.BytesIO()
    meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    with plt.rc_context({"svg.hashsalt": "simkit"}):
        fig.savefig(buf, format=fmt, dpi=110, metadata=meta)
    plt.close(fig)
    return buf.getvalue()
