"""--vary parsing, ranges, grids and pairs, and how points become designs or error rows (no simulator).

Reference for the steps: numpy's own ``linspace`` and ``geomspace`` (independent of simkit), and
docs/reference.md for the --vary syntax (``22u,47u,100u``, ``START:STOP:COUNT``, ``10u:1m:9log``).
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest

from simkit.design.loader import parse_toml_text
from simkit.errors import UsageError
from simkit.sweep.specs import build_points, combine, log_steps, parse_spec, parse_vary, si_value
from tests.conftest import BRIDGE_TOML


def test_list_spec_keeps_items_as_set_reads_them() -> None:
    spec = parse_vary("filter.0.c=22u,47u,100u")
    assert spec.path == "filter.0.c" and spec.kind == "list"
    assert spec.values == ("22u", "47u", "100u")
    # SI in result files: 22u is 22e-6 (the SI prefix micro, docs/reference.md)
    assert [si_value(v) for v in spec.values] == pytest.approx([22e-6, 47e-6, 100e-6], rel=1e-15)
    assert parse_vary("rectifier.diode=1N4007,UF4007").values == ("1N4007", "UF4007")
    assert parse_vary("rectifier.stages=1,2,3").values == (1, 2, 3)


def test_linear_range_matches_numpy_linspace() -> None:
    spec = parse_spec("100:1k:10")
    assert spec.kind == "linear"
    # numpy.linspace(100, 1000, 10): the independent reference for equal steps
    assert np.allclose(spec.values, np.linspace(100.0, 1000.0, 10), rtol=1e-15, atol=0)
    assert spec.values[0] == 100.0 and spec.values[-1] == 1000.0
    assert parse_spec("5:5:1").values == (5.0,)


def test_log_range_steps_are_exact() -> None:
    spec = parse_spec("10u:1m:9log")
    assert spec.kind == "log" and len(spec.values) == 9
    # numpy.geomspace(1e-5, 1e-3, 9): the independent reference for log steps
    assert np.allclose(spec.values, np.geomspace(1e-5, 1e-3, 9), rtol=1e-14, atol=0)
    # ends exactly as given, and every ratio the same: 10**(2/8) (two decades in 8 steps)
    assert spec.values[0] == 1e-5 and spec.values[-1] == 1e-3
    ratios = [b / a for a, b in itertools.pairwise(spec.values)]
    assert max(abs(r / 10 ** 0.25 - 1) for r in ratios) < 1e-14
    # a decade point inside the range (100u) comes out as the float nearest 1e-4, not 9.99...e-5
    assert spec.values[4] == 1e-4
    assert parse_spec("1m:10u:3LOG").values == (1e-3, 1e-4, 1e-5)
    assert parse_spec("10uF:1mF:9log").values == spec.values  # units are allowed, as in design files
    assert log_steps(-1.0, -100.0, 3) == [-1.0, -10.0, -100.0]


@pytest.mark.parametrize("bad", ["", "1:2", "1:2:3:4", "1:2:x", "1:2:0", "0:1:3log", "-1:1:3log", "1u:2q:3",
                                 "22u,,47u", "1:2:3lin"])
def test_bad_specs_are_usage_errors(bad: str) -> None:
    with pytest.raises(UsageError):
        parse_vary(f"filter.0.c={bad}")


@pytest.mark.parametrize("bad", ["filter.0.c", "=1,2", "filter..c=1,2", "filter.0.c =", "a b=1"])
def test_bad_vary_options(bad: str) -> None:
    with pytest.raises(UsageError):
        parse_vary(bad)


def test_grid_and_zip() -> None:
    a, b = parse_vary("filter.0.c=1u,2u,3u"), parse_vary("load.r=1k,2k")
    grid = combine([a, b], paired=False)
    assert len(grid) == 6  # every pair: 3 x 2
    assert {(g["filter.0.c"], g["load.r"]) for g in grid} == {(c, r) for c in a.values for r in b.values}
    c = parse_vary("load.r=1k,2k,3k")
    pairs = combine([a, c], paired=True)
    assert [(p["filter.0.c"], p["load.r"]) for p in pairs] == [("1u", "1k"), ("2u", "2k"), ("3u", "3k")]
    with pytest.raises(UsageError, match="same count"):
        combine([a, b], paired=True)
    with pytest.raises(UsageError, match="twice"):
        combine([a, a], paired=False)
    with pytest.raises(UsageError, match="more than"):
        combine([parse_spec("1:2:1000", "x"), parse_spec("1:2:1000", "y")], paired=False)


def _points(varies: list[str]) -> list:  # type: ignore[type-arg]
    data = parse_toml_text(BRIDGE_TOML, "bridge.toml")
    specs = [parse_vary(v) for v in varies]
    return build_points(data, "bridge.toml", specs, combine(specs, False))


def test_points_are_designs_or_error_rows() -> None:
    pts = _points(["filter.0.c=-10u:100u:3", "load.r=2k,5k"])
    assert len(pts) == 6
    bad = [p for p in pts if p.design is None]
    assert len(bad) == 2 and all(p.values["filter.0.c"] == -10e-6 for p in bad)
    assert all("filter.0.c" in (p.error or "") and "positive" in (p.error or "") for p in bad)
    good = [p for p in pts if p.design is not None]
    assert {round(p.design.filters[0].value * 1e6, 9) for p in good} == {45.0, 100.0}


@pytest.mark.parametrize("path", ["filter.0.cc=1u,2u", "lod.r=1k,2k", "filter.7.c=1u,2u", "load.r.x=1,2",
                                  "source.vrms.0=1,2"])
def test_unknown_paths_stop_before_anything_runs(path: str) -> None:
    with pytest.raises(UsageError, match="--vary"):
        _points([path])


def test_all_points_invalid_is_bad_input() -> None:
    with pytest.raises(UsageError, match="no point"):
        _points(["filter.0.c=-1u,-2u"])


def test_cli_refuses_an_unknown_path_without_writing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from simkit.cli import main

    design = tmp_path / "d.toml"
    design.write_text(BRIDGE_TOML, "utf-8")
    out = tmp_path / "out"
    with pytest.raises(SystemExit) as info:
        main(["sweep", str(design), "--vary", "filter.0.cc=1u,2u", "--out", str(out)])
    assert info.value.code == 2  # bad input is exit 2 (docs/reference.md, exit codes)
    assert "filter.0.cc" in capsys.readouterr().err
    assert not out.exists()
