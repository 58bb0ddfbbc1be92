"""Plots a builder reads at a glance: axis labels in words with units, legends outside the data,
coinciding traces drawn once and named together, small changes shown small, keyed runs as a
one-period mean with a close-up of the longest key-down.

The figures are caught before they are written (``figure_bytes``/``save_figure`` replaced) and
read as matplotlib drew them.  Where a check rests on physics the source is named beside it; the
house-style rules themselves (5 % least span, 0.5 % coincidence) are ours (derived here).
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from simkit.report import plots
from simkit.sweep import plot as sweep_plot
from simkit.sweep.specs import parse_vary

EXAMPLES = Path(__file__).resolve().parents[1] / "simkit" / "examples"

#: An axis label in words with a unit in brackets, the unit carrying at most one SI prefix.
LABEL = re.compile(r"^[a-z][A-Za-z0-9 ,.:()\-]*[A-Za-z)] \((G|M|k|m|µ|n|p)?(V|A|s|W|VA|Hz|F|H|Ω)\)$")
#: Words of the simulator, not of the builder, that an axis label must not show.
INTERNAL = ("node 0", "to node", "_v", "_a", "vout")


@pytest.fixture
def caught(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[Any]]:
    """Figures the plot functions make, kept open instead of written."""
    figures: list[Any] = []
    monkeypatch.setattr(plots, "figure_bytes", lambda fig, tight=False: (figures.append(fig), (b"", b""))[1])
    monkeypatch.setattr(plots, "save_figure", lambda fig, fmt, tight=False: (figures.append(fig), b"")[1])
    yield figures
    import matplotlib.pyplot as plt

    for fig in figures:
        plt.close(fig)


def drawn(fig: Any) -> Any:
    """Lay the figure out as it is written (the axis labels take their prefixes then)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not hasattr(fig.canvas, "get_renderer"):  # closed by the plot function: give it a canvas again
        FigureCanvasAgg(fig)
    with plots.house_style():
        fig.canvas.draw()
    return fig


def labelled_axes(fig: Any) -> list[Any]:
    return [ax for ax in fig.axes if ax.get_ylabel()]


def check_house_style(fig: Any) -> None:
    """Every axis label in words with a unit; every legend outside its plotting area."""
    renderer = fig.canvas.get_renderer()
    for ax in labelled_axes(fig):
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            if not label:
                continue
            assert LABEL.match(label) or label in ("runs",), label
            assert not any(word in label for word in INTERNAL), label
        legend = ax.get_legend()
        if legend is not None:
            box, area = legend.get_window_extent(renderer), ax.get_window_extent(renderer)
            assert box.x0 >= area.x1 - 0.5, (ax.get_title(loc="left"), box, area)


# -- pure helpers -----------------------------------------------------------------------------------


def test_prefixes_follow_the_size_of_the_numbers() -> None:
    assert plots.prefix_of(0.02, "s") == (1e-3, "m")
    assert plots.prefix_of(387.0, "V") == (1.0, "")
    assert plots.prefix_of(1500.0, "V") == (1e3, "k")
    assert plots.prefix_of(4.7e-5, "F") == (1e-6, "µ")
    assert plots.prefix_of(12.0, "%") == (1.0, "")  # no prefix on a share


def test_ticks_are_written_exactly_with_the_prefix_in_the_label(caught: list[Any]) -> None:
    with plots.house_style():
        fig, (ax,) = plots.new_figure(1)
        ax.plot([0.0, 0.02], [0.0, 0.7])
        plots.style_axes(ax, "t", "time", "s", "diode current", "A")
        ax.set_xticks([0.0, 0.0025, 0.005, 0.0075, 0.01])
        fig.canvas.draw()
        assert ax.get_xlabel() == "time (ms)" and ax.get_ylabel() == "diode current (mA)"
        assert [t.get_text() for t in ax.get_xticklabels()] == ["0", "2.5", "5.0", "7.5", "10.0"]
    import matplotlib.pyplot as plt

    plt.close(fig)


def test_coincident_traces_are_grouped_and_different_ones_not() -> None:
    t = np.linspace(0.0, 0.02, 2001)
    pulse = np.maximum(np.sin(2 * np.pi * 50 * t), 0.0)
    other = np.maximum(-np.sin(2 * np.pi * 50 * t), 0.0)
    almost = pulse * (1 + 0.002)  # within half a percent of the peak: drawn as one
    apart = pulse * 1.02  # 2 % apart: a line's width or more, drawn on its own
    assert plots.coincident([pulse, other, almost, apart]) == [[0, 2], [1], [3]]


def test_one_period_mean_of_a_sine_on_a_level_is_the_level() -> None:
    # The mean of a sine over a whole period is zero (calculus); the trapezoidal rule on 400 steps
    # a period leaves far less than 1e-6 of the amplitude.
    T = 0.02
    t = np.linspace(0.0, 10 * T, 4001)
    v = 300.0 + 20.0 * np.sin(2 * np.pi * t / T)
    at = np.linspace(T, 9 * T, 50)
    assert np.max(np.abs(plots.one_period_mean(t, v, T, at) - 300.0)) < 1e-6 * 20.0
    # Where a period would reach past the data there is no mean.
    assert np.isnan(plots.one_period_mean(t, v, T, np.array([0.001, 10 * T - 0.001]))).all()


def test_the_envelope_keeps_every_peak_and_trough() -> None:
    t = np.linspace(0.0, 17.0, 400_001)
    v = 600.0 + 3.0 * np.sin(2 * np.pi * 50 * t) + 20.0 * (np.sin(2 * np.pi * 0.5 * t) > 0)
    te, ve = plots.envelope(t, v, bins=1000)
    assert len(te) <= 2000 and np.all(np.diff(te) >= 0)
    assert ve.max() == v.max() and ve.min() == v.min()


def test_key_down_intervals_are_found_at_half_way() -> None:
    t = np.linspace(0.0, 1.0, 10_001)
    i = np.where(((t > 0.1) & (t < 0.3)) | ((t > 0.5) & (t < 0.55)), 0.11, 0.015)
    found = plots.key_down_intervals(t, i)
    assert len(found) == 2
    for (a, b), (ea, eb) in zip(found, [(0.1, 0.3), (0.5, 0.55)], strict=True):
        assert abs(a - ea) <= 2e-4 and abs(b - eb) <= 2e-4


def test_axis_label_of_a_design_key_has_words_and_a_unit() -> None:
    assert sweep_plot.axis_label("filter.0.c") == "filter.0.c: capacitance (F)"
    assert sweep_plot.axis_label("source.vrms") == "source.vrms: open-circuit RMS voltage (V)"
    # the words come from the design vocabulary: a multiplier's stage capacitor, the transformer's regulation
    assert sweep_plot.axis_label("rectifier.capacitance") == "rectifier.capacitance: each stage capacitor (F)"
    assert sweep_plot.axis_label("source.regulation") == "source.regulation: rise of the secondary voltage from " \
        "full load to no load"
    assert sweep_plot.split_label(sweep_plot.axis_label("filter.1.l")) == ("filter.1.l: inductance", "H")
    assert sweep_plot.axis_label("load.kind") == "load.kind"  # no unit known: the key alone


# -- sweep and spread plots (no simulation: the rows as a sweep writes them) ------------------------


def rows(path: str, xs: list[float], ys: list[float]) -> list[dict[str, Any]]:
    return [{"point": k, "values": {path: x}, "metrics": {"vout_dc_v": y}}
            for k, (x, y) in enumerate(zip(xs, ys, strict=True))]


def test_a_small_change_looks_small_and_is_printed(caught: list[Any]) -> None:
    """0.15 V over 300 V must not fill the axis: it takes a hundredth of it at most."""
    spec = parse_vary("bleeder.r=50k:500k:4")
    xs = [float(v) for v in spec.values]
    sweep_plot.sweep_figure_bytes(rows(spec.path, xs, [300.0, 300.05, 300.1, 300.15]), [spec], ["vout_dc_v"],
                                  False, "flat")
    fig = drawn(caught[-1])
    ax = labelled_axes(fig)[0]
    lo, hi = ax.get_ylim()
    assert 0.15 / (hi - lo) <= 0.01
    assert hi - lo >= plots.MIN_SPAN * 300.15
    notes = [t.get_text() for t in ax.texts]
    assert any("150 mV" in n and "0.05 %" in n for n in notes), notes
    assert ax.get_xlabel() == "bleeder.r: bleeder resistance (kΩ)" and ax.get_ylabel() == "output voltage (V)"
    check_house_style(fig)


def test_a_large_change_still_fills_the_axis(caught: list[Any]) -> None:
    spec = parse_vary("filter.0.c=10u:1m:5log")
    xs = [float(v) for v in spec.values]
    sweep_plot.sweep_figure_bytes(rows(spec.path, xs, [150.0, 200.0, 250.0, 280.0, 300.0]), [spec], ["vout_dc_v"],
                                  False, "steep")
    fig = drawn(caught[-1])
    ax = labelled_axes(fig)[0]
    lo, hi = ax.get_ylim()
    assert 150.0 / (hi - lo) > 0.6  # all of the axis but the room kept for the note
    assert ax.get_xscale() == "log" and ax.get_xlabel() == "filter.0.c: capacitance (µF)"
    assert [t.get_text() for t in ax.get_xticklabels()] == ["10", "31.62", "100", "316.2", "1000"]
    check_house_style(fig)


def test_lines_of_a_second_key_are_named_outside_the_data(caught: list[Any]) -> None:
    a = parse_vary("filter.0.c=22u,47u,100u")
    b = parse_vary("filter.1.l=2,5")
    entries = []
    for k, (c, lv) in enumerate((c, lv) for lv in (2, 5) for c in (22e-6, 47e-6, 100e-6)):
        entries.append({"point": k, "values": {a.path: c, b.path: lv}, "metrics": {"vout_dc_v": 380 + c * 1e5 + lv}})
    sweep_plot.sweep_figure_bytes(entries, [a, b], ["vout_dc_v"], False, "grid")
    fig = drawn(caught[-1])
    ax = labelled_axes(fig)[0]
    legend = ax.get_legend()
    assert legend.get_title().get_text() == "filter.1.l: inductance (H)"
    assert [t.get_text() for t in legend.get_texts()] == ["2 H", "5 H"]
    check_house_style(fig)


def test_a_spread_histogram_prints_its_spread_and_keeps_marks_outside(caught: list[Any]) -> None:
    values = list(300.0 + np.linspace(-0.05, 0.05, 40))
    sweep_plot.histogram_bytes(values, "vout_dc_v", [("1 %", 299.95), ("50 %", 300.0), ("99 %", 300.05)])
    fig = drawn(caught[-1])
    ax = fig.axes[0]
    lo, hi = ax.get_xlim()
    assert hi - lo >= plots.MIN_SPAN * 300.05  # a 0.1 V spread on 300 V looks narrow
    assert "100 mV" in ax.get_legend().get_title().get_text()
    assert ax.get_xlabel() == "output voltage (V)" and ax.get_ylabel() == "runs"
    check_house_style(fig)


# -- one design's figures (simulated) -------------------------------------------------------------


@pytest.fixture(scope="module")
def bridge() -> Any:
    from simkit.design.loader import load_design
    from simkit.pipeline import simulate

    return simulate(load_design(EXAMPLES / "bench_amp_bridge_clc.toml"))


@pytest.mark.ngspice
def test_a_bridge_draws_each_diode_pair_once_named_together(bridge: Any, caught: list[Any]) -> None:
    """In a bridge the two diodes of each conducting path are in series, so they carry one current
    (Kirchhoff's current law; the bridge's paths: Horowitz and Hill, The Art of Electronics, 3rd ed.,
    section 1.6.2, from memory): D1 with D4 and D2 with D3 in simkit's numbering."""
    plots.diode_currents_figure(bridge)
    fig = drawn(caught[-1])
    titles = [ax.get_title(loc="left") for ax in labelled_axes(fig)]
    assert len(titles) == 2
    assert titles[0].startswith("D1 = D4") and titles[1].startswith("D2 = D3")
    check_house_style(fig)
    plots.switch_on_current_figure(bridge)
    fig = drawn(caught[-1])
    names = [t.get_text().splitlines()[0] for t in fig.axes[0].get_legend().get_texts()]
    assert names == ["D1 = D4", "D2 = D3"]
    check_house_style(fig)


@pytest.mark.ngspice
def test_every_design_figure_is_in_the_house_style(bridge: Any, caught: list[Any]) -> None:
    for draw in (plots.output_steady_figure, plots.diode_currents_figure, plots.switch_on_voltage_figure,
                 plots.switch_on_current_figure):
        draw(bridge)
        check_house_style(drawn(caught[-1]))
    plots.run_figure_bytes(bridge)
    fig = drawn(caught[-1])
    check_house_style(fig)
    assert [ax.get_ylabel() for ax in labelled_axes(fig)] == ["output voltage (V)", "diode current (mA)",
                                                              "output voltage (V)", "diode current (A)"]
    # The ripple panel zooms on purpose and says so, with the ripple against the mean.
    plots.output_steady_figure(bridge)
    notes = [t.get_text() for ax in drawn(caught[-1]).axes for t in ax.texts]
    assert all("zooms on the ripple" in n and "% of the mean" in n for n in notes) and notes


KEYED_SLOW = "portable_cw_inverter_doubler.toml"


@pytest.mark.ngspice
def test_a_long_keying_cycle_shows_its_mean_and_the_longest_key_down(tmp_path: Path, caught: list[Any]) -> None:
    """A Morse text of more than 12 s: the one-period mean is drawn over the raw trace, and the
    close-up shows the longest key-down whole, with time before and after it for both edges."""
    from simkit.design.loader import load_design
    from simkit.pipeline import simulate

    text = (EXAMPLES / KEYED_SLOW).read_text("utf-8").replace('morse = "TEST"', 'morse = "CQ CQ DE TEST TEST K"')
    text = text.replace("wpm = 25", "wpm = 15")
    path = tmp_path / "slow.toml"
    path.write_text(text, "utf-8")
    result = simulate(load_design(path))
    assert result.keyed is not None and result.keyed.cycle > 10.0
    plots.keyed_figure(result)
    fig = drawn(caught[-1])
    check_house_style(fig)
    whole, close, current = labelled_axes(fig)
    labels = [line.get_label() for line in whole.get_lines()]
    assert "one-period mean" in labels and any(lab.startswith("output, as simulated") for lab in labels)
    mean = next(line for line in whole.get_lines() if line.get_label() == "one-period mean").get_ydata()
    mean = np.asarray(mean, dtype=float)
    ok = np.isfinite(mean)
    # Between the key-down and key-up means of the pipeline, within the ripple's half.
    m = result.metrics
    assert m["vout_keydown_v"] - 5 <= np.min(mean[ok]) and np.max(mean[ok]) <= m["vout_keyup_v"] + 5
    assert whole.get_xlim()[1] == pytest.approx(result.keyed.cycle, rel=1e-9)
    # The close-up: time from the key-down edge, the whole key-down and both edges in view.
    lo, hi = close.get_xlim()
    assert close.get_xlabel() == "time from the key-down edge (ms)"
    key_down = [p for p in close.patches]
    assert key_down, "the key-down interval is shaded"
    x0, x1 = key_down[0].get_x(), key_down[0].get_x() + key_down[0].get_width()
    assert x0 == 0.0 and lo < x0 and x1 < hi
    assert current.get_ylabel() == "load current (mA)"
    # A change of a few percent fills the axis; it is not squeezed by the least span.
    ylo, yhi = whole.get_ylim()
    assert (m["vout_keyup_v"] - m["vout_keydown_v"]) / (yhi - ylo) > 0.4
