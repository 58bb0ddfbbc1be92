"""``simkit spread``: Monte Carlo runs with part values drawn within the design file's tolerances.

Which values are drawn, each named by the PATH that ``--set`` would use:

| tolerance key | value drawn |
|---|---|
| ``source.mains_tolerance`` | ``source.vrms`` (kind sine or inverter), ``source.primary_vrms`` (kind transformer) |
| ``rectifier.capacitance_tolerance`` | ``rectifier.capacitance`` |
| ``filter.N.tolerance`` | the section's ``c``, ``l`` or ``r`` |
| ``load.tolerance`` (or ``load.N.tolerance``) | the load's ``r`` or ``i`` |
| ``bleeder.tolerance`` | ``bleeder.r`` |

``[spread] distribution = "uniform"`` draws each factor evenly within +-tolerance; ``"normal"``
draws it from a normal distribution whose standard deviation is a third of the tolerance (the
tolerance is 3 sigma, so about 0.3 % of the parts fall outside it, as with real parts).

Run k draws from its own random stream, seeded by ``(seed, k)``: the same seed gives the same
values and so the same results, whatever the number of workers, the order the runs finish in, or
how often the run was interrupted and resumed.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from simkit.design.loader import apply_overrides, design_from_dict, read_toml
from simkit.errors import DesignError, UsageError
from simkit.figures import FIGURES
from simkit.report.outputs import OutputDir
from simkit.sweep.runner import RunOptions, RunReport, design_digest, execute, with_check
from simkit.sweep.specs import MAX_POINTS, Point, override_text
from simkit.units import UnitError, parse_percent, parse_value

#: Percentiles reported for every figure.
PERCENTILES = (1.0, 50.0, 99.0)
_FILTER_UNITS = {"c": "F", "l": "H", "r": "ohm"}


@dataclass(frozen=True)
class Tolerance:
    """One value that a spread draws."""

    path: str  # the value's PATH, e.g. "filter.0.c"
    nominal: float  # SI
    tolerance: float  # fraction, +-
    key: str  # the tolerance's own PATH, e.g. "filter.0.tolerance"


def tolerances(data: Mapping[str, Any], origin: str) -> tuple[list[Tolerance], list[str]]:
    """Every toleranced value of a (valid) design dictionary, and notes on tolerances not drawn."""
    found: list[Tolerance] = []
    notes: list[str] = []

    def add(table: Mapping[str, Any], tol_key: str, value_key: str, unit: str, prefix: str) -> None:
        if tol_key not in table or value_key not in table:
            return
        try:
            tol = parse_percent(table[tol_key])
            nominal = parse_value(table[value_key], unit)
        except UnitError as exc:
            raise DesignError(str(exc), file=origin, key=f"{prefix}.{tol_key}") from None
        if tol > 0:
            found.append(Tolerance(f"{prefix}.{value_key}", nominal, tol, f"{prefix}.{tol_key}"))

    source = data.get("source")
    if isinstance(source, Mapping) and "mains_tolerance" in source:
        key = "primary_vrms" if source.get("kind") == "transformer" else "vrms"
        add(source, "mains_tolerance", key, "V", "source")
    rect = data.get("rectifier")
    if isinstance(rect, Mapping):
        add(rect, "capacitance_tolerance", "capacitance", "F", "rectifier")
    filters = data.get("filter")
    if isinstance(filters, Mapping):
        filters = [filters]
    if isinstance(filters, list):
        for i, sec in enumerate(filters):
            if isinstance(sec, Mapping):
                for kind, unit in _FILTER_UNITS.items():
                    add(sec, "tolerance", kind, unit, f"filter.{i}")
    loads = data.get("load")
    load_tables = [("load", loads)] if isinstance(loads, Mapping) else \
        [(f"load.{i}", t) for i, t in enumerate(loads)] if isinstance(loads, list) else []
    for prefix, t in load_tables:
        if not isinstance(t, Mapping) or "tolerance" not in t:
            continue
        if "r" in t:
            add(t, "tolerance", "r", "ohm", prefix)
        elif "i" in t:
            add(t, "tolerance", "i", "A", prefix)
        else:
            notes.append(f"{prefix}.tolerance: a load of kind {t.get('kind')!r} has no r or i to draw; not varied")
    bleeder = data.get("bleeder")
    if isinstance(bleeder, Mapping):
        add(bleeder, "tolerance", "r", "ohm", "bleeder")
    return found, notes


def draw(tols: Sequence[Tolerance], seed: int, run: int, distribution: str) -> dict[str, float]:
    """The values of run ``run``: each nominal times (1 + its drawn deviation)."""
    rng = np.random.default_rng(np.random.SeedSequence([seed, run]))
    n = len(tols)
    tol = np.array([t.tolerance for t in tols], dtype=float)
    if distribution == "normal":
        dev = rng.standard_normal(n) * tol / 3.0  # the tolerance is 3 standard deviations
    else:
        dev = rng.uniform(-1.0, 1.0, n) * tol
    return {t.path: float(t.nominal * (1.0 + d)) for t, d in zip(tols, dev, strict=True)}


def summarize(entries: Sequence[Mapping[str, Any]]) -> dict[str, Any]:
    """Percentiles, mean, spread and extremes (with their run) of every figure over the runs that finished."""
    from simkit.sweep.table import figure_columns

    ok = [e for e in entries if not e.get("error")]
    figures: dict[str, Any] = {}
    for key in figure_columns(ok):
        pairs = [(e["point"], e["metrics"][key]) for e in ok
                 if isinstance((e.get("metrics") or {}).get(key), (int, float))]
        if not pairs:
            continue
        runs = [p for p, _ in pairs]
        vals = np.array([v for _, v in pairs], dtype=float)
        lo, hi = int(np.argmin(vals)), int(np.argmax(vals))
        pct = np.percentile(vals, PERCENTILES)
        figures[key] = {
            **{f"p{int(q)}": float(v) for q, v in zip(PERCENTILES, pct, strict=True)},
            "mean": float(np.mean(vals)),
            "std": float(np.std(vals, ddof=1)) if len(vals) > 1 else 0.0,
            "min": float(vals[lo]), "min_run": runs[lo],
            "max": float(vals[hi]), "max_run": runs[hi],
        }
    summary: dict[str, Any] = {"runs_ok": len(ok), "runs_failed": len(entries) - len(ok), "figures": figures}
    judged = [e for e in ok if e.get("check")]
    if judged:  # --check: the share of runs that pass every rule (and that fail none)
        summary["checked_runs"] = len(judged)
        summary["pass_fraction"] = sum(1 for e in judged if e["check"] == "pass") / len(judged)
        summary["no_fail_fraction"] = sum(1 for e in judged if e["check"] != "fail") / len(judged)
        rules: dict[str, int] = {}
        for e in judged:
            for rule, verdict in (e.get("verdicts") or {}).items():
                rules[rule] = rules.get(rule, 0) + (verdict == "fail")
        summary["fails_by_rule"] = {k: v for k, v in sorted(rules.items(), key=lambda kv: -kv[1]) if v}
    return summary


def run_spread(design_file: str | Path, runs: int, seed: int, opts: RunOptions,
               overrides: Sequence[str] = (), check: bool = False, report: bool = False) -> RunReport:
    """``simkit spread``: ``runs`` designs drawn within the tolerances, simulated, summarized.

    Parameters
    ----------
    design_file : str or Path
        The TOML design file; its tolerance keys say what varies, ``[spread]`` how.
    runs : int
        Number of Monte Carlo runs.
    seed : int
        Seed of the draws (the same seed, the same results).
    opts : RunOptions
        Output folder, workers, timeout, force.
    overrides : sequence of str
        ``--set PATH=VALUE`` applied before drawing.
    check : bool
        ``--check``: also run ``simkit check`` on every draw; the summary gives the share that passes.
    report : bool
        ``--report``: also write report.md and report.html (with histograms) into the folder.
    """
    if runs < 1:
        raise UsageError("--runs must be at least 1")
    if runs > MAX_POINTS:  # as for a sweep grid: almost certainly a typing mistake (and days of work)
        raise UsageError(f"--runs {runs}: more than simkit runs in one spread ({MAX_POINTS})")
    origin = str(design_file)
    data = apply_overrides(read_toml(design_file), overrides, origin)
    base = design_from_dict(data, origin=origin)
    tols, notes = tolerances(data, origin)
    if not tols:
        raise UsageError(f"{origin}: no tolerance to draw from; give tolerance = \"10%\" in a [[filter]] section, "
                         "[load] or [bleeder], capacitance_tolerance in [rectifier], or mains_tolerance in [source]")
    distribution = base.spread.distribution
    points: list[Point] = []
    for k in range(runs):
        values = draw(tols, seed, k, distribution)
        try:
            tree = apply_overrides(data, [f"{p}={override_text(v)}" for p, v in values.items()], origin)
            points.append(Point(k, dict(values), design_from_dict(tree, origin=origin)))
        except DesignError as exc:  # a drawn value out of range (a far tail of a normal draw)
            points.append(Point(k, dict(values), None, str(exc)))
    digest = design_digest(design_file)
    identity = {"design_sha256": digest, "set": list(overrides), "seed": seed, "runs": runs, "check": check}
    header = {"design": base.title, "design_file": origin, "design_sha256": digest, "set": list(overrides),
              "seed": seed, "distribution": distribution,
              "tolerances": [{"path": t.path, "nominal": t.nominal, "tolerance": t.tolerance, "from": t.key}
                             for t in tols],
              "notes": notes, "check": check}

    def finish(out: OutputDir, entries: list[dict[str, Any]]) -> dict[str, Any]:
        summary = summarize(entries)
        if report:
            from simkit.sweep.report import write_spread_report

            write_spread_report(out, entries, summary, header, base.title, design_file, runs)
        return {"summary": summary}

    from simkit.sweep.report import spread_report_files

    return execute("spread", header, identity, [t.path for t in tols], points, with_check(opts, check, "spread"),
                   spread_report_files() if report else (), finish)


def summary_table(report: RunReport) -> str:
    """The spread's percentiles and extremes as text (for stdout)."""
    from simkit.report.text import show

    summary = report.extra.get("summary", {})
    figs = summary.get("figures", {})
    lines = [f"  {'figure':<20} {'1 %':>11} {'50 %':>11} {'99 %':>11} {'lowest (run)':>19} {'highest (run)':>19}"]
    for key, s in figs.items():
        if key not in FIGURES:
            continue
        lo = f"{show(key, s['min'])} ({s['min_run']})"
        hi = f"{show(key, s['max'])} ({s['max_run']})"
        lines.append(f"  {key:<20} {show(key, s['p1']):>11} {show(key, s['p50']):>11} {show(key, s['p99']):>11} "
                     f"{lo:>19} {hi:>19}")
    if "pass_fraction" in summary:
        lines.append(f"  runs passing every rule: {summary['pass_fraction']:.1%} of {summary['checked_runs']}; "
                     f"runs with no fail: {summary['no_fail_fraction']:.1%}")
        for rule, n in list(summary["fails_by_rule"].items())[:8]:
            lines.append(f"    {rule}: fails in {n} runs")
    return "\n".join(lines) + "\n"
