"""Spread draws without a simulator: which values vary, the distributions, seeds, summaries.

The distributions are checked against textbook statistics: a uniform draw on [-t, t] has standard
deviation t/sqrt(3); the "normal" setting is defined (docs/reference.md, [spread]) as the
tolerance being 3 standard deviations, so about 99.73 % of draws fall inside it (the normal
distribution's three-sigma rule).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from simkit.design.loader import parse_toml_text
from simkit.errors import UsageError
from simkit.sweep.spread import Tolerance, draw, summarize, tolerances
from tests.conftest import BRIDGE_TOML

TOLERANCED = BRIDGE_TOML.replace('resistance = "25"', 'resistance = "25"\nmains_tolerance = "10%"').replace(
    'c = "100u"\nesr = "0.2"', 'c = "100u"\nesr = "0.2"\ntolerance = "20%"').replace(
    'r = "5k"', 'r = "5k"\ntolerance = "5%"').replace('r = "220k"', 'r = "220k"\ntolerance = "10%"')


def test_tolerances_found_by_path() -> None:
    tols, notes = tolerances(parse_toml_text(TOLERANCED), "t.toml")
    got = {t.path: (t.nominal, t.tolerance, t.key) for t in tols}
    assert got == {
        "source.vrms": (250.0, 0.10, "source.mains_tolerance"),
        "filter.0.c": (pytest.approx(100e-6), 0.20, "filter.0.tolerance"),
        "load.r": (5000.0, 0.05, "load.tolerance"),
        "bleeder.r": (220e3, 0.10, "bleeder.tolerance"),
    }
    assert notes == []


def test_uniform_draws_fill_the_tolerance_band() -> None:
    tols = [Tolerance("filter.0.c", 100e-6, 0.2, "filter.0.tolerance")]
    f = np.array([draw(tols, 11, k, "uniform")["filter.0.c"] / 100e-6 - 1 for k in range(4000)])
    assert f.min() >= -0.2 and f.max() <= 0.2
    assert f.min() < -0.19 and f.max() > 0.19
    # uniform on [-t, t]: standard deviation t/sqrt(3) (4000 draws: within about 3 %)
    assert np.std(f) == pytest.approx(0.2 / math.sqrt(3), rel=0.04)


def test_normal_draws_have_the_tolerance_as_three_sigma() -> None:
    tols = [Tolerance("load.r", 5000.0, 0.06, "load.tolerance")]
    n = 40000
    f = np.array([draw(tols, 5, k, "normal")["load.r"] / 5000.0 - 1 for k in range(n)])
    # sigma = tolerance / 3; the sample standard deviation of n normal draws has a relative standard
    # error of 1/sqrt(2n) = 0.35 %, so 2 % is more than five of them.
    assert np.std(f) == pytest.approx(0.02, rel=0.02)
    # The share within 1, 2 and 3 sigma is 68.27 %, 95.45 % and 99.73 % for a normal distribution; each
    # observed share has the binomial standard error sqrt(p (1 - p) / n), and must lie within five of them.
    for k, p in ((1, 0.682689), (2, 0.954500), (3, 0.997300)):
        share = float(np.mean(np.abs(f) <= k * 0.02))
        assert abs(share - p) <= 5 * math.sqrt(p * (1 - p) / n), (k, share)


def test_same_seed_same_draws_other_seed_other_draws() -> None:
    tols, _ = tolerances(parse_toml_text(TOLERANCED), "t.toml")
    a = [draw(tols, 7, k, "uniform") for k in range(5)]
    assert a == [draw(tols, 7, k, "uniform") for k in range(5)]
    assert a != [draw(tols, 8, k, "uniform") for k in range(5)]
    # run k's draw does not depend on how many runs there are or in which order they are made
    assert draw(tols, 7, 3, "uniform") == a[3]
    assert len({tuple(d.values()) for d in a}) == 5


def test_summary_percentiles_and_extremes() -> None:
    vals = [3.0, 1.0, 4.0, 1.5, 9.0, 2.6]
    entries = [{"point": k, "metrics": {"ripple_pp_v": v}, "error": None} for k, v in enumerate(vals)]
    entries.append({"point": 6, "metrics": {}, "error": "did not converge"})
    s = summarize(entries)
    r = s["figures"]["ripple_pp_v"]
    # numpy.percentile (linear interpolation) is the reference for the 1/50/99 % points
    assert r["p1"] == pytest.approx(np.percentile(vals, 1)) and r["p99"] == pytest.approx(np.percentile(vals, 99))
    assert r["p50"] == pytest.approx(2.8)
    assert (r["min"], r["min_run"], r["max"], r["max_run"]) == (1.0, 1, 9.0, 4)
    assert s["runs_ok"] == 6 and s["runs_failed"] == 1 and "pass_fraction" not in s
    # --check: the share of runs that pass every rule (docs/reference.md), and the rules that fail most
    verdicts = ["pass", "marginal", "fail", "pass", "pass", "fail"]
    for e, v in zip(entries, verdicts, strict=False):
        e["check"] = v
        e["verdicts"] = {"D1 reverse voltage": "pass", "C1 discharge below 60 V": v}
    s = summarize(entries)
    assert s["checked_runs"] == 6
    assert s["pass_fraction"] == pytest.approx(3 / 6) and s["no_fail_fraction"] == pytest.approx(4 / 6)
    assert s["fails_by_rule"] == {"C1 discharge below 60 V": 2}


def test_spread_without_tolerances_is_bad_input(tmp_path: object) -> None:
    from pathlib import Path

    from simkit.sweep.runner import RunOptions
    from simkit.sweep.spread import run_spread

    p = Path(str(tmp_path)) / "d.toml"
    p.write_text(BRIDGE_TOML, "utf-8")
    with pytest.raises(UsageError, match="no tolerance"):
        run_spread(p, 3, 0, RunOptions(out=Path(str(tmp_path)) / "o", progress=False))
