"""``simkit demo``: run the shipped example designs (invented for demonstration) end to end."""

from __future__ import annotations

import contextlib
import json
from collections.abc import Callable
from importlib import resources
from pathlib import Path
from typing import Any

from simkit.checks import run_checks
from simkit.design.loader import load_design
from simkit.pipeline import simulate
from simkit.report.design_report import report_files, write_report
from simkit.report.outputs import OutputDir
from simkit.report.text import show
from simkit.safety import CAUTIONS

#: The figures the demo prints for each design.
SUMMARY = ("vout_dc_v", "ripple_pp_v", "iout_dc_a", "diode_peak_a", "diode_piv_v", "surge_peak_a",
           "cap_peak_v", "source_va", "settle_time_s")

RESULTS_README = """\
# results/

Written by `simkit demo` (and `make demo`); regenerate rather than edit.  Every example
design here is invented for demonstration, not a measured build.

One folder per shipped example design, named after its file in `simkit/examples/`:

```
results/
  README.md                        this file
  <example>/
    report.html                    the design report: open it in a browser (works offline)
    report.md                      the same report in Markdown, pictures beside it
    schematic.png  schematic.svg   the schematic drawn from the design
    output-steady.png/.svg         output voltage over the last periods in steady state
    diode-currents.png/.svg        current pulses in each rectifier diode
    switch-on-voltage.png/.svg     output voltage after switch-on, capacitors empty
    switch-on-surge.png/.svg       diode currents in the first periods after switch-on
    keyed.png/.svg                 a keyed load: the output over one keying cycle and the
                                   longest key-down close up (designs that key their load)
    deck.cir                       the steady-state SPICE deck (`simkit netlist`)
    design.toml                    the example design file, as shipped in the package
    result.json                    `simkit run --json`: inputs, figures, per-part figures, warnings
    waveforms.png                  one overview figure (as `simkit run --out` writes it)
```

| file | what it is |
|---|---|
| `report.html` | self-contained: style and pictures are inside the file; it links the PNG and SVG files too |
| `report.md` | for build notes and wikis: links `NAME.png` (and `NAME.svg` for print) beside it |
| `*.png` / `*.svg` | every picture in both formats: PNG for documents and screens, SVG for print |
| `deck.cir` | runnable as it is: `ngspice -b deck.cir` prints the figures as `.meas` results |
| `result.json` | the figures (docs/reference.md, Figures), keyed as `simkit run --json` prints them |

File names are fixed, so documents can link to them, and running `simkit demo` again
writes the same files.  The demo ends with one line per example: its `simkit check` verdict
(pass, marginal or fail, with how many rules gave each) and the path of its report.html.
`simkit report DESIGN --out DIR` writes the same report for your own design.  The examples'
decks are also kept as golden files in `netlists/` (`make netlists`), where a test checks
that they are current.

`.simkit-manifest.json` lists the files simkit wrote, so it never overwrites anything else.

HIGH VOLTAGE: these supplies can kill.  Every report ends with the cautions: stored
charge, bleeders, insulation, fusing, the one hand rule, and your local electrical codes.
"""


def example_files() -> list[Path]:
    """The example designs shipped inside the package, in name order."""
    root = resources.files("simkit") / "examples"
    return sorted(Path(str(p)) for p in root.iterdir() if str(p).endswith(".toml"))


def run_demo(out: Path, force: bool = False, echo: Callable[[str], None] = print) -> list[dict]:
    files = example_files()
    with contextlib.ExitStack() as stack:  # every folder locked (and proved writable) before the first run
        top = stack.enter_context(OutputDir(out, force=force))
        folders = {f: stack.enter_context(top.subfolder(f.stem)) for f in files}
        return _run_demo(files, top, folders, echo)


def _run_demo(files: list[Path], top: OutputDir, folders: dict[Path, OutputDir],
              echo: Callable[[str], None]) -> list[dict]:
    names = ["README.md"]
    top.check(names)
    for folder in folders.values():
        folder.check(["design.toml", "result.json", "deck.cir", "waveforms.png", *report_files()])
    from simkit.report.plots import run_figure_bytes

    docs = []
    endings = []
    top.write("README.md", RESULTS_README)
    for f in files:
        design = load_design(f)
        result = simulate(design)
        doc = result.to_json()
        folder = folders[f]
        folder.write("design.toml", f.read_text("utf-8"))
        folder.write("result.json", json.dumps(doc, indent=2) + "\n")
        folder.write("deck.cir", result.deck)
        folder.write("waveforms.png", run_figure_bytes(result))
        checks, check_error = run_checks(design)
        write_report(result, folder, f.read_text("utf-8"), f.name, checks=checks, check_error=check_error)
        echo(f"{design.title}\n  -> {folder.path}/")
        for key in SUMMARY:
            echo(f"     {key:<16} {show(key, result.metrics[key]):>12}")
        for w in result.warnings:
            echo(f"     warning: {w}")
        docs.append(doc)
        endings.append(verdict_line(design.title, checks, check_error, folder.path / "report.html"))
    echo("")
    echo(CAUTIONS)
    echo("")
    echo("Reports (the verdict is `simkit check`'s: every part against its rating at its worst corner):")
    for line in endings:
        echo(line)
    return docs


def verdict_line(title: str, checks: Any, check_error: str, report: Path) -> str:
    """``TITLE: fail (1 fail, 2 marginal, 14 pass) -> results/x/report.html``, or why it was not checked."""
    if checks is None:
        return f"  {title}: not checked ({check_error}) -> {report}"
    s = checks.summary()
    return f"  {title}: {s['result']} ({s['fail']} fail, {s['marginal']} marginal, {s['pass']} pass) -> {report}"
