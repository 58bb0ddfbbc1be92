"""``simkit demo``: run the shipped example designs (invented for demonstration) end to end."""

from __future__ import annotations

import json
from collections.abc import Callable
from importlib import resources
from pathlib import Path

from simkit.design.loader import load_design
from simkit.pipeline import simulate
from simkit.report.outputs import OutputDir
from simkit.report.text import CAUTIONS, show

#: The figures the demo prints for each design.
SUMMARY = ("vout_dc_v", "ripple_pp_v", "iout_dc_a", "diode_peak_a", "diode_piv_v", "surge_peak_a",
           "cap_peak_v", "source_va", "settle_time_s")

RESULTS_README = """\
# results/

Written by `simkit demo` (and `make demo`); regenerate rather than edit.  Every example
design here is invented for demonstration, not a measured build.

One folder per shipped example design:

| file | what it is |
|---|---|
| `design.toml` | the example design file, as shipped inside the package |
| `result.json` | `simkit run --json` output: inputs, figures (`metrics`), per-part figures, warnings |
| `deck.cir` | the steady-state SPICE deck (`simkit netlist`), runnable with `ngspice -b deck.cir` |
| `waveforms.png` | output voltage and diode currents over the last periods, and the switch-on surge |

`.simkit-manifest.json` lists the files simkit wrote, so it never overwrites anything else.
"""


def example_files() -> list[Path]:
    """The example designs shipped inside the package, in name order."""
    root = resources.files("simkit") / "examples"
    return sorted(Path(str(p)) for p in root.iterdir() if str(p).endswith(".toml"))


def run_demo(out: Path, force: bool = False, echo: Callable[[str], None] = print) -> list[dict]:
    files = example_files()
    top = OutputDir(out, force=force)
    names = ["README.md"]
    folders = {f: OutputDir(out / f.stem, force=force) for f in files}
    top.check(names)
    for folder in folders.values():
        folder.check(["design.toml", "result.json", "deck.cir", "waveforms.png"])
    from simkit.report.plots import run_figure_bytes

    docs = []
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
        echo(f"{design.title}\n  -> {folder.path}/")
        for key in SUMMARY:
            echo(f"     {key:<16} {show(key, result.metrics[key]):>12}")
        for w in result.warnings:
            echo(f"     warning: {w}")
        docs.append(doc)
    echo("")
    echo(CAUTIONS)
    return docs
