"""The sweep plot (chosen figures against the first varied value, one line per value of the
others) and the spread histogram, in the house style of :mod:`simkit.report.plots`.

matplotlib comes through :mod:`simkit.report.plots` (the one module that imports it), so the files
are as repeatable as the other plots.  A failed point leaves a gap in its line.  A figure's axis
is at least :data:`simkit.report.plots.MIN_SPAN` of its size tall and the change along the sweep
is printed on the panel, so a flat result looks flat.

:func:`axis_label` is the one place a sweep plot names a design key.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from simkit.design.model import Design
from simkit.design.vocab import QUANTITY_UNITS, key_at
from simkit.figures import FIGURES
from simkit.sweep.specs import VarySpec, si_value
from simkit.units import eng

#: At most this many lines (values of the other varied keys) in one panel.
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


def axis_label(path: str) -> str:
    """The label of an axis (or legend) that shows the design key ``path``: the key, what it is in
    words and its unit in brackets, ``filter.0.c`` -> ``filter.0.c: capacitance (F)``.

    Plots put the SI prefix of their ticks into the brackets.  Words and unit come from the design
    vocabulary (:attr:`simkit.design.vocab.Key.words`).
    """
    k = key_at(Design, path)
    words = k.words if k is not None else ""
    unit = unit_of_path(path)
    text = f"{path}: {words}" if words else path
    return f"{text} ({unit})" if unit else text


def split_label(label: str) -> tuple[str, str]:
    """``"filter.0.c: capacitance (F)"`` -> (``"filter.0.c: capacitance"``, ``"F"``); no brackets: no unit."""
    found = re.fullmatch(r"(.*\S)\s*\(([^()]*)\)", label.strip())
    return (found.group(1), found.group(2)) if found else (label, "")


def _numeric(v: Any) -> float | None:
    if isinstance(v, bool):
        return None
    if isinstance(v, (int, float)):
        return float(v)
    return None


def value_text(path: str, v: Any) -> str:
    """A varied value with its unit (``22 µF``); anything not a number as it is."""
    x = _numeric(v)
    return eng(x, unit_of_path(path)) if x is not None else str(v)


def sweep_figure_bytes(entries: Sequence[Mapping[str, Any]], specs: Sequence[VarySpec], figures: Sequence[str],
                       paired: bool, title: str, fmt: str = "png") -> bytes:
    """One panel per figure; x is the first --vary, lines are the values of the rest (or one line for --zip)."""
    from simkit.report import plots

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
    x_words, x_unit = split_label(axis_label(first.path))
    with plots.house_style() as plt:
        fig, axes = plots.new_figure(len(figures), 3.2 * len(figures) + 0.6)
        for ax, figure in zip(axes, figures, strict=True):
            unit, meaning = FIGURES[figure].unit, FIGURES[figure].meaning
            ys_all: list[float] = []
            changes: list[tuple[float, float]] = []
            for k, key in enumerate(keys):
                pts: list[tuple[float, float]] = []
                for e in groups[key]:
                    xv = (e.get("values") or {}).get(first.path)
                    x = _numeric(xv) if numeric_x else (xs_all.index(xv) if xv in xs_all else None)
                    if x is None:
                        continue
                    y = (e.get("metrics") or {}).get(figure)
                    pts.append((x, float(y) if isinstance(y, (int, float)) else math.nan))
                pts.sort()
                ys = [p[1] for p in pts if math.isfinite(p[1])]
                ys_all += ys
                if ys:
                    changes.append((min(ys), max(ys)))
                label = ", ".join(value_text(s.path, v) for s, v in zip(others, key, strict=True)) or None
                ax.plot([p[0] for p in pts], [p[1] for p in pts], marker="o", ms=3.5, lw=1.4,
                        color=plots.PALETTE[k % len(plots.PALETTE)], label=label)
            ax.set_title(f"{meaning[:1].upper()}{meaning[1:]} ({figure})")
            plots.unit_axis(ax.yaxis, plots.figure_label(figure, unit), unit)
            if ys_all:
                plots.level_limits(ax, ys_all, headroom=0.3)
                lo, hi = max(changes, key=lambda c: c[1] - c[0])
                plots.note(ax, plots.change_text(lo, hi, unit, "change over the sweep" if len(changes) == 1
                                                 else "largest change along a line"))
            if numeric_x:
                if first.log and all((_numeric(v) or 0) > 0 for v in xs_all):
                    from matplotlib.ticker import NullFormatter

                    # Ticks at the swept values themselves (every k-th when there are many).
                    ax.set_xscale("log")
                    step = max(1, math.ceil(len(xs_all) / 8))
                    ax.set_xticks([float(v) for v in xs_all[::step]])  # type: ignore[arg-type]
                    ax.xaxis.set_minor_formatter(NullFormatter())
                    plots.unit_axis(ax.xaxis, x_words, x_unit, significant=4)
                else:
                    plots.unit_axis(ax.xaxis, x_words, x_unit)
            else:
                ax.set_xticks(range(len(xs_all)), [str(v) for v in xs_all])
                ax.set_xlabel(x_words)
            ax.grid(True, which="both")
            if others and keys:
                plots.legend_outside(ax, title="\n".join(axis_label(s.path) for s in others))
        fig.suptitle(f"Sweep of {title}", x=0.01, ha="left", fontsize=11, fontweight="bold", color=plots.INK)
        try:
            return plots.save_figure(fig, fmt)
        finally:
            plt.close(fig)


def histogram_bytes(values: Sequence[float], figure: str, marks: Sequence[tuple[str, float]] = (),
                    fmt: str = "png") -> bytes:
    """A histogram of one figure over the runs of a spread, with labelled vertical marks (percentiles)."""
    from simkit.report import plots

    unit, meaning = (FIGURES[figure].unit, FIGURES[figure].meaning) if figure in FIGURES else ("", figure)
    with plots.house_style() as plt:
        fig, (ax,) = plots.new_figure(1, 3.4)
        bins = max(5, min(40, int(math.sqrt(len(values))) + 1))
        plots.draw_histogram(ax, np.asarray(values, dtype=float), bins, marks, plots.figure_label(figure, unit), unit)
        ax.set_title(f"{meaning[:1].upper()}{meaning[1:]} ({figure}), over {len(values)} runs")
        try:
            return plots.save_figure(fig, fmt)
        finally:
            plt.close(fig)
