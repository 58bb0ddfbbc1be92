"""``sweep --report`` and ``spread --report``: the results as a document (report.md and report.html).

Built with :class:`simkit.report.document.Document` like every simkit report, so it carries the
high-voltage cautions; written into the same folder as the CSV and JSON it summarizes.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from simkit.figures import FIGURES
from simkit.report.outputs import OutputDir
from simkit.sweep.plot import value_text
from simkit.sweep.specs import VarySpec
from simkit.sweep.table import one_line

#: Figures shown in the report's tables and, unless --plot chose others, its plot.
KEY_FIGURES = ("vout_dc_v", "ripple_pp_v", "diode_peak_a", "surge_peak_a", "cap_peak_v")
#: Rows shown in the report (all of them are in the CSV).
MAX_ROWS = 100
SWEEP_IMAGE = "sweep-figures"
SPREAD_IMAGES = ("spread-vout_dc_v", "spread-ripple_pp_v")
REPORT_FILES = ("report.md", "report.html")


def sweep_report_files() -> list[str]:
    return [*REPORT_FILES, f"{SWEEP_IMAGE}.png", f"{SWEEP_IMAGE}.svg"]


def spread_report_files() -> list[str]:
    return [*REPORT_FILES, *(f"{n}.{ext}" for n in SPREAD_IMAGES for ext in ("png", "svg"))]


def _show(key: str, v: Any) -> str:
    from simkit.report.text import show

    if v is None or v == "":
        return ""
    return show(key, v) if isinstance(v, float) else str(v)


def _design_text(design_file: str | Path) -> str | None:
    from simkit.design.loader import read_design_text
    from simkit.errors import DesignError

    try:
        return read_design_text(design_file)
    except DesignError:
        return None


def _check_section(doc: Any, entries: Sequence[Mapping[str, Any]], what: str) -> None:
    checked = [e for e in entries if e.get("check")]
    if not checked:
        return
    doc.heading("Verdicts")
    counts = {k: sum(1 for e in checked if e["check"] == k) for k in ("pass", "marginal", "fail")}
    doc.paragraph(f"Every {what} was checked as `simkit check` checks one design (each part against its rating "
                  f"at the corner where it binds): {counts['pass']} pass every rule, {counts['marginal']} are "
                  f"marginal somewhere, {counts['fail']} fail at least one rule.")
    fails: dict[str, int] = {}
    marg: dict[str, int] = {}
    for e in checked:
        for rule, v in (e.get("verdicts") or {}).items():
            fails[rule] = fails.get(rule, 0) + (v == "fail")
            marg[rule] = marg.get(rule, 0) + (v == "marginal")
    rows = [[rule, str(fails[rule]), str(marg[rule])] for rule in sorted(fails, key=lambda r: (-fails[r], -marg[r]))
            if fails[rule] or marg[rule]]
    if rows:
        doc.table(["part and rule", f"{what}s failing", f"{what}s marginal"], rows, align="lrr")


def write_sweep_report(out: OutputDir, entries: Sequence[Mapping[str, Any]], specs: Sequence[VarySpec],
                       figures: Sequence[str], paired: bool, title: str, design_file: str | Path,
                       overrides: Sequence[str], total: int) -> list[str]:
    """Build and write the sweep's report; returns the names written."""
    from simkit.report.document import Document
    from simkit.sweep.plot import sweep_figure_bytes

    failed = [e for e in entries if e.get("error")]
    doc = Document(title, subtitle=f"Sweep by simkit of {Path(design_file).name}: {total} points")
    doc.heading("Summary")
    shape = "paired point by point (--zip)" if paired else ("a grid of every combination" if len(specs) > 1
                                                              else "one value at a time")
    doc.paragraph(f"{len(entries)} of {total} points finished, {len(failed)} of them failed; the values are "
                  f"{shape}. Every row, with every figure, is in `sweep.csv` (and `sweep.json`) beside this "
                  "report.")
    if overrides:
        doc.paragraph("Every point starts from the design file with " + ", ".join(f"`--set {o}`" for o in overrides)
                      + ".")
    doc.heading("What was varied")
    rows = []
    for s in specs:
        vals = [value_text(s.path, v) for v in _si(s.values)]
        shown = ", ".join(vals if len(vals) <= 12 else [*vals[:6], "...", *vals[-3:]])
        rows.append([s.path, s.text, {"list": "list", "linear": "equal steps", "log": "equal ratios"}[s.kind],
                     str(len(vals)), shown])
    doc.table(["key", "--vary", "steps", "count", "values"], rows, align="lllrl")
    figs = list(figures) or [f for f in KEY_FIGURES[:2]]
    doc.heading(f"Figures against {specs[0].path}")
    png = sweep_figure_bytes(entries, specs, figs, paired, title, "png")
    svg = sweep_figure_bytes(entries, specs, figs, paired, title, "svg")
    doc.image(SWEEP_IMAGE, png, svg, f"{', '.join(figs)} against {specs[0].path}"
              + ("" if paired or len(specs) < 2 else f", one line per value of {specs[1].path}"))
    doc.heading("Points")
    inputs = [s.path for s in specs]
    has_check = any(e.get("check") for e in entries)
    headers = ["point", *inputs, *KEY_FIGURES, *(["check"] if has_check else []), "error"]
    table_rows = []
    for e in list(entries)[:MAX_ROWS]:
        values = e.get("values") or {}
        metrics = e.get("metrics") or {}
        table_rows.append([str(e["point"]), *(value_text(p, values.get(p)) for p in inputs),
                           *(_show(k, metrics.get(k)) for k in KEY_FIGURES),
                           *([str(e.get("check") or "")] if has_check else []), one_line(e.get("error"), 80)])
    if len(entries) > MAX_ROWS:
        doc.paragraph(f"The first {MAX_ROWS} of {len(entries)} rows; all of them are in `sweep.csv`.")
    doc.table(headers, table_rows, align="r" + "r" * len(inputs) + "r" * len(KEY_FIGURES)
              + ("c" if has_check else "") + "l")
    if failed:
        doc.heading("Failed points")
        doc.bullets([f"point {e['point']}: {one_line(e.get('error'), 300)}" for e in failed[:30]], markup=False)
    _check_section(doc, entries, "point")
    doc.cautions()
    text = _design_text(design_file)
    if text is not None:
        doc.heading("Appendix: the design file")
        doc.code(text, "toml")
    return doc.write(out)


def _si(values: Sequence[Any]) -> list[Any]:
    from simkit.sweep.specs import si_value

    return [si_value(v) for v in values]


def write_spread_report(out: OutputDir, entries: Sequence[Mapping[str, Any]], summary: Mapping[str, Any],
                        header: Mapping[str, Any], title: str, design_file: str | Path, total: int) -> list[str]:
    """Build and write the spread's report; returns the names written."""
    from simkit.report.document import Document
    from simkit.sweep.plot import histogram_bytes

    ok = [e for e in entries if not e.get("error")]
    doc = Document(title, subtitle=f"Spread by simkit of {Path(design_file).name}: {total} runs, seed "
                                   f"{header['seed']}")
    doc.heading("Summary")
    dist = header["distribution"]
    how = ("evenly within plus or minus its tolerance" if dist == "uniform" else
           "from a normal distribution whose standard deviation is a third of its tolerance")
    doc.paragraph(f"{len(entries)} of {total} runs finished, {len(entries) - len(ok)} failed. Each run draws every "
                  f"toleranced value {how}; run k draws from its own stream seeded by (seed, k), so the same seed "
                  "gives the same runs. Every run is a row of `spread.csv` beside this report.")
    for note in header.get("notes") or []:
        doc.note(note, kind="caution")
    doc.heading("What was drawn")
    doc.table(["key", "nominal", "tolerance", "from"],
              [[t["path"], value_text(t["path"], t["nominal"]), f"±{t['tolerance'] * 100:g} %", t["from"]]
               for t in header["tolerances"]], align="lrrl")
    doc.heading("Figures over the runs")
    figs = summary.get("figures", {})
    doc.paragraph("Percentiles interpolate linearly between runs; with few runs the 1 % and 99 % points are little "
                  "more than the extremes. The worst cases are the lowest and highest values seen, with the run "
                  "(its `point` in the CSV) that gave them.")
    rows = [[k, _show(k, s["p1"]), _show(k, s["p50"]), _show(k, s["p99"]), f"{_show(k, s['min'])} ({s['min_run']})",
             f"{_show(k, s['max'])} ({s['max_run']})"] for k, s in figs.items() if k in FIGURES]
    doc.table(["figure", "1 %", "50 %", "99 %", "lowest (run)", "highest (run)"], rows, align="lrrrrr")
    for name in SPREAD_IMAGES:
        key = name.removeprefix("spread-")
        vals = [e["metrics"][key] for e in ok if isinstance((e.get("metrics") or {}).get(key), (int, float))]
        if not vals or key not in figs:
            continue
        marks = [("1 %", figs[key]["p1"]), ("50 %", figs[key]["p50"]), ("99 %", figs[key]["p99"])]
        doc.image(name, histogram_bytes(vals, key, marks, "png"), histogram_bytes(vals, key, marks, "svg"),
                  f"{key} over the {len(vals)} runs that finished, with the 1, 50 and 99 % points")
    if "pass_fraction" in summary:
        doc.paragraph(f"**{summary['pass_fraction']:.1%}** of the {summary['checked_runs']} checked runs pass every "
                      f"rule; {summary['no_fail_fraction']:.1%} fail none.")
    _check_section(doc, entries, "run")
    doc.cautions()
    text = _design_text(design_file)
    if text is not None:
        doc.heading("Appendix: the design file")
        doc.code(text, "toml")
    return doc.write(out)
