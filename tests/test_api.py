"""The Python API (simkit.load, run, check, sweep, compare): the same numbers as the commands, its
documented examples, the notebook script in docs/, and its displays.

What the API computes is the pipeline's (tested against the reference solver and closed forms
elsewhere); here the checks are that it gives exactly what the command line gives, and physics
where a new path computes something (a sweep's trend against rect-2).
"""

from __future__ import annotations

import base64
import doctest
import html.parser
import json
import math
import runpy
import subprocess
import sys
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import simkit
import simkit.api
from simkit.errors import DesignError, UsageError
from tests.conftest import EXAMPLES, ROOT

AMP = EXAMPLES / "bench_amp_bridge_clc.toml"  # invented example: bridge into C-L-C
REGULATED = EXAMPLES / "portable_cw_regulated.toml"  # invented example: inverter, doubler, series regulator


def cli_json(*args: str) -> dict[str, Any]:
    """A command's --json output, from a separate process (nothing shared with this one)."""
    out = subprocess.run([sys.executable, "-m", "simkit.cli", *args, "--json"], capture_output=True, text=True,
                         timeout=600, check=False)
    assert out.returncode in (0, 1), out.stderr
    return json.loads(out.stdout)


def same_number(a: Any, b: Any) -> bool:
    """Equal to the last digit; JSON's null is the API's NaN."""
    if b is None:
        return isinstance(a, float) and math.isnan(a)
    return a == b


@cache
def amp_result() -> simkit.Result:
    return simkit.run(simkit.load(AMP))


# -- the same numbers as the command line ------------------------------------------------------------


@pytest.mark.ngspice
@pytest.mark.parametrize(("path", "sets", "mains"), [(AMP, {}, "nominal"), (AMP, {"load.r": "3.3k"}, "high"),
                                                     (REGULATED, {}, "nominal")], ids=["amp", "amp-set-high", "reg"])
def test_figures_equal_run_json_exactly(path: Path, sets: dict[str, str], mains: str) -> None:
    result = simkit.run(simkit.load(path, set=sets), mains=mains)
    args = ["run", str(path), *[f"--set={k}={v}" for k, v in sets.items()], "--mains", mains]
    doc = cli_json(*args)
    assert set(result.figures) == set(doc["metrics"])
    unequal = [k for k, v in doc["metrics"].items() if not same_number(result.figures[k], v)]
    assert not unequal, [(k, result.figures[k], doc["metrics"][k]) for k in unequal]
    assert {k: v.to_json() for k, v in result.parts.items()} == doc["parts"]
    assert result.warnings == doc["warnings"]
    assert json.loads(json.dumps(result.to_json())) == doc  # the whole document, inputs included


@pytest.mark.ngspice
def test_check_counts_equal_check_json() -> None:
    verdicts = simkit.check(simkit.load(AMP))
    doc = cli_json("check", str(AMP))
    assert verdicts.rows == doc["verdicts"] and len(verdicts) == len(doc["verdicts"])
    summary = doc["summary"]
    assert verdicts.counts == {k: summary[k] for k in ("pass", "marginal", "fail")}
    assert verdicts.result == summary["result"] and verdicts.failed == (summary["fail"] > 0)
    assert json.loads(json.dumps(verdicts.to_json())) == doc
    # The notebook table shows each value as `simkit check` prints it (no "mA²s" for an I²t, whose
    # prefixes mislead; "never" for a time that never comes).
    from simkit.report.check_text import value_text

    shown = verdicts._repr_html_()
    for v in verdicts.rows:
        if isinstance(v["value"], float):
            assert html.escape(value_text(v["value"], v["unit"] or "")) in shown, v
    assert "mA²s" not in shown and "inf s" not in shown


# -- loading -------------------------------------------------------------------------------------------


def test_text_and_file_and_python_values_load_the_same_design() -> None:
    from simkit.design.loader import design_to_inputs, load_design

    text = AMP.read_text()
    by_file = simkit.load(AMP, set={"filter.0.c": "100u", "load.r": "3.3k"})
    by_text = simkit.load(text, set={"filter.0.c": 100e-6, "load.r": 3300})
    by_cli = load_design(AMP, ["filter.0.c=100u", "load.r=3.3k"])
    assert design_to_inputs(by_file.model) == design_to_inputs(by_cli) == design_to_inputs(by_text.model)
    assert by_file.origin == str(AMP) and by_text.origin == "<text>" and by_text.path is None
    assert by_file.filters[0].c == pytest.approx(100e-6)  # the model's sections, reached directly
    again = by_file.with_set({"filter.0.c": "220u"})
    assert again.model.filters[0].c == pytest.approx(220e-6) and again.model.loads[0].r == 3300.0
    assert again.overrides == ("filter.0.c=100u", "load.r=3.3k", "filter.0.c=220u")
    assert simkit.load(AMP, set={"bleeder.r": 1e5, "simulation.reltol": 2e-5}).model.bleeder.r == 1e5


def test_bad_designs_name_the_file_and_the_key(tmp_path: Path) -> None:
    with pytest.raises(DesignError, match="no such file"):
        simkit.load(tmp_path / "missing.toml")
    with pytest.raises(DesignError) as info:
        simkit.load(AMP, set={"filter.0.c": "-1u"})
    assert info.value.key == "filter.0.c" and info.value.file == str(AMP)
    with pytest.raises(DesignError) as info:
        simkit.load(AMP.read_text().replace('r = "4k"', 'r = "4k"\nwhat = 1'))
    assert info.value.file == "<text>" and "what" in str(info.value)
    with pytest.raises(UsageError, match="cannot go into a design file"):
        simkit.load(AMP, set={"load.r": object()})
    with pytest.raises(UsageError, match="nominal, high or low"):
        simkit.run(simkit.load(AMP), mains="sideways")
    with pytest.raises(UsageError, match="bench_amp_bridge_clc"):
        simkit.example("no_such_example")


# -- waveforms and displays ----------------------------------------------------------------------------


@pytest.mark.ngspice
def test_a_waveforms_mean_over_the_last_period_is_vout_dc_v() -> None:
    from scipy.integrate import trapezoid

    r = amp_result()
    time, value = r.waveform("out")
    assert time[-1] - time[0] == pytest.approx(1 / 50, rel=1e-12)  # one period of the 50 Hz source
    assert trapezoid(value, time) / (time[-1] - time[0]) == pytest.approx(r.figures["vout_dc_v"], rel=1e-12)
    names = r.waveform_names()
    assert list(names)[:3] == ["w1p", "ac2", "ac1"] and "v(C1)" in names and "(A)" in names["D1"]


class _Parser(html.parser.HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.images: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        if tag == "img":
            self.images.append(dict(attrs)["src"] or "")

    def handle_data(self, data: str) -> None:
        self.text.append(data)


@pytest.mark.ngspice
def test_jupyter_display_has_the_figures_table_and_an_inline_plot() -> None:
    r = amp_result()
    p = _Parser()
    p.feed(r._repr_html_())
    text = "".join(p.text)
    from simkit.report.text import show

    shown = show("vout_dc_v", r.figures["vout_dc_v"])  # as the terminal table writes it
    assert "table" in p.tags and "vout_dc_v" in text and shown in text and "These supplies can kill" in text
    (src,) = p.images
    png = base64.b64decode(src.removeprefix("data:image/png;base64,"))
    assert png.startswith(b"\x89PNG\r\n\x1a\n") and len(png) > 10_000


@pytest.mark.ngspice
def test_display_escapes_the_designs_text() -> None:
    hostile = AMP.read_text().replace('title = "Invented', 'title = "<script>alert(1)</script> Invented')
    r = simkit.run(simkit.load(hostile))
    shown = r._repr_html_()
    assert "<script>" not in shown and "&lt;script&gt;alert(1)&lt;/script&gt;" in shown


# -- sweeps --------------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_sweep_rows_csv_and_the_ripple_trend(tmp_path: Path) -> None:
    d = simkit.load(AMP)
    s = simkit.sweep(d, vary={"filter.0.c": ["22u", "47u", "100u"]})
    assert [r["filter.0.c"] for r in s.rows] == pytest.approx([22e-6, 47e-6, 100e-6])
    ripple = [r["ripple_pp_v"] for r in s.rows]
    # rect-2: a capacitor input's ripple goes as 1/C, and the choke section after it passes a fixed
    # share of it, so the output ripple goes as 1/C1 too: 100/22 = 4.55 (agreement measured 0.1 %).
    assert ripple[0] / ripple[2] == pytest.approx(100 / 22, rel=0.02)
    assert all(r["error"] is None for r in s.rows) and len(s) == 3
    # Each point agrees with a stand-alone run within the steady state's settling (0.2 %: a sweep's
    # points start from their neighbour's state).
    alone = simkit.run(d.with_set({"filter.0.c": "100u"})).figures
    assert s.rows[2]["vout_dc_v"] == pytest.approx(alone["vout_dc_v"], rel=2e-3)
    assert s.rows[2]["ripple_pp_v"] == pytest.approx(alone["ripple_pp_v"], rel=2e-3)
    # The CSV has sweep.csv's columns, and writing it never replaces a file unasked.
    text = s.to_csv(tmp_path / "s.csv")
    header = text.splitlines()[0].split(",")
    assert header[:3] == ["point", "filter.0.c", "vout_dc_v"] and header[-2:] == ["warnings", "error"]
    assert (tmp_path / "s.csv").read_text() == text
    with pytest.raises(UsageError, match="exists"):
        s.to_csv(tmp_path / "s.csv")
    try:
        import pandas  # noqa: F401
    except ImportError:
        with pytest.raises(ImportError, match="pip install pandas"):
            s.to_dataframe()
    else:
        frame = s.to_dataframe()
        assert list(frame["filter.0.c"]) == pytest.approx([22e-6, 47e-6, 100e-6])


@pytest.mark.ngspice
def test_sweep_on_worker_processes_gives_the_same_rows_as_in_process() -> None:
    d = simkit.load(AMP)
    here = simkit.sweep(d, vary={"load.r": "3k,6k"}, zip=False)
    there = simkit.sweep(d, vary={"load.r": "3k,6k"}, jobs=2)
    for a, b in zip(here.rows, there.rows, strict=True):
        assert a["load.r"] == b["load.r"] and a["error"] is None and b["error"] is None
        assert a["vout_dc_v"] == pytest.approx(b["vout_dc_v"], rel=2e-3)


@pytest.mark.ngspice
def test_a_point_that_is_not_a_design_is_an_error_row() -> None:
    s = simkit.sweep(simkit.load(AMP), vary={"load.r": ["4k", "-1k"]})
    assert s.rows[0]["error"] is None and "load.r" in s.rows[1]["error"]
    assert math.isnan(s.rows[1]["vout_dc_v"]) and s.failed == [s.rows[1]]
    with pytest.raises(UsageError, match="no_such"):
        simkit.sweep(simkit.load(AMP), vary={"no_such.key": ["1", "2"]})


@pytest.mark.parametrize("jobs", [1, 2])
def test_sweep_rows_are_the_sweep_commands_rows(monkeypatch: pytest.MonkeyPatch, jobs: int) -> None:
    # Without a simulator: the stand-in of tests/sweep_helpers.py (vout_dc_v = sqrt(2) x vrms; 555 fails).
    # In this process and on workers, the entries are the journal's and the CSV is sweep.csv's.
    from simkit.sweep import table, worker
    from tests.sweep_helpers import DESIGN, fake_point

    monkeypatch.setattr(worker, "simulate_point", fake_point)
    s = simkit.sweep(simkit.load(DESIGN), vary={"source.vrms": [100, 555, 200], "load.r": ["5k", "-1k"]}, jobs=jobs)
    assert [e["point"] for e in s.entries] == list(range(6))
    assert {e["attempts"] for e in s.entries if "load.r" in (e["error"] or "")} == {0}  # never simulated
    assert all(e["attempts"] == 1 for e in s.entries if not e["error"] or "stand-in" in e["error"])
    by = {(r["source.vrms"], r["load.r"]): r for r in s.rows}
    assert by[(200.0, 5000.0)]["vout_dc_v"] == pytest.approx(math.sqrt(2) * 200, rel=1e-12)
    assert by[(555.0, 5000.0)]["error"] and math.isnan(by[(555.0, 5000.0)]["vout_dc_v"])
    assert "load.r" in by[(100.0, -1000.0)]["error"] and by[(100.0, -1000.0)]["warnings"] == []
    assert list(s.rows[0])[:3] == ["point", "source.vrms", "load.r"] and list(s.rows[0])[-2:] == ["warnings", "error"]
    assert s.to_csv() == table.csv_text(s.inputs, s.entries)


# -- side by side --------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_compare_variants_of_one_design() -> None:
    d = simkit.load(AMP)
    side = simkit.compare(d, d.with_set({"filter.0.c": "100u"}), check=False)
    a, b = (e.result.metrics for e in side.entries)
    assert side.differences()["ripple_pp_v"] == [0.0, b["ripple_pp_v"] - a["ripple_pp_v"]]
    assert side.to_json()["designs"][1]["set"] == ["filter.0.c=100u"]


# -- the documentation runs -----------------------------------------------------------------------------


@pytest.mark.ngspice
def test_the_docstring_examples_run() -> None:
    failed, attempted = doctest.testmod(simkit.api, optionflags=doctest.ELLIPSIS)
    assert attempted >= 8 and failed == 0


@pytest.mark.ngspice
def test_the_notebook_script_in_docs_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.chdir(tmp_path)
    runpy.run_path(str(ROOT / "docs" / "explore.py"), run_name="__main__")
    out = capsys.readouterr().out
    assert "mean of v(out) over the last period" in out and "check:" in out
    assert (tmp_path / "explore-output.png").read_bytes().startswith(b"\x89PNG")
    rows = (tmp_path / "explore-sweep.csv").read_text().splitlines()
    assert rows[0].startswith("point,filter.0.c,") and len(rows) == 4
    assert np.isfinite([float(r.split(",")[2]) for r in rows[1:]]).all()


def test_the_api_names_stay_functions_after_the_subpackages_load() -> None:
    import types

    from simkit.sweep.specs import parse_spec  # loads the simkit.sweep subpackage

    assert parse_spec("1,2").values == (1, 2)
    assert isinstance(sys.modules["simkit.sweep"], types.ModuleType)
    assert simkit.sweep is simkit.api.sweep and simkit.compare is simkit.api.compare
    assert simkit.run is simkit.api.run and simkit.Result is simkit.api.Result
    with pytest.raises(AttributeError):
        simkit.no_such_name  # noqa: B018
