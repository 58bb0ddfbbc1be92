"""Time `simkit watch` from a save of the design file to the new figure on the page, in headless Chromium.

Starts ``simkit watch`` on a copy of an example design (by default the shipped bench amplifier,
invented), opens its page in headless Chromium (driven over the DevTools pipe by tests/cdp.py),
then saves the file with a different load resistance N times and reports, for each save, the
seconds until the page's ``vout_dc_v`` changed, and until the page showed the new report.

Run:  python bench/bench_watch.py [--saves 5] [--json FILE] [DESIGN.toml]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from tests.cdp import Browser  # noqa: E402

VALUE = ("(function(){var td=document.querySelector('tr[data-figure=\"vout_dc_v\"] td.value');"
         "return td ? td.getAttribute('data-value') : null;})()")
REPORT = "document.getElementById('report').getAttribute('src')"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("design", nargs="?", default=str(ROOT / "simkit" / "examples" / "bench_amp_bridge_clc.toml"))
    ap.add_argument("--saves", type=int, default=5)
    ap.add_argument("--json", dest="json_out")
    args = ap.parse_args()
    text = Path(args.design).read_text()
    if 'r = "4k"' not in text:
        raise SystemExit("the design needs a line r = \"4k\" (the load) for the edits")
    with tempfile.TemporaryDirectory() as tmp:
        design = Path(tmp) / "design.toml"
        design.write_text(text)
        proc = subprocess.Popen([sys.executable, "-m", "simkit.cli", "watch", str(design), "--port", "0"],
                                stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
        try:
            assert proc.stdout is not None
            url = proc.stdout.readline().strip()
            with Browser(Path(tmp) / "profile") as browser:
                page = browser.open(url)
                page.wait_for(VALUE, 120)
                page.wait_for(REPORT, 120)
                figure, report = [], []
                for k in range(args.saves):
                    before = page.evaluate(VALUE)
                    t0 = time.perf_counter()
                    design.write_text(text.replace('r = "4k"', f'r = "{4 + (k % 2) + 0.1 * (k + 1):g}k"'))
                    page.wait_for(f"{VALUE} !== {json.dumps(before)}", 120, every=0.02)
                    figure.append(time.perf_counter() - t0)
                    page.wait_for(f"{REPORT} === 'files/report.html?run={k + 2}'", 120, every=0.02)
                    report.append(time.perf_counter() - t0)
        finally:
            proc.terminate()
            proc.wait(30)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"simkit watch, {args.saves} saves of {Path(args.design).name} (load average {load:.2f}):")
    print(f"  save -> new figure on the page: median {statistics.median(figure):.2f} s, "
          f"worst {max(figure):.2f} s")
    print(f"  save -> new report on the page: median {statistics.median(report):.2f} s, "
          f"worst {max(report):.2f} s")
    if args.json_out:
        Path(args.json_out).write_text(json.dumps({"figure_s": figure, "report_s": report, "load": load}, indent=1))


if __name__ == "__main__":
    main()
