"""Time what hum and hash add to `simkit run`: the hum figures on every run, the high-frequency analysis when asked.

For every design (by default the example designs shipped inside the package, plus two invented
half-wave supplies with 10 mH of leakage inductance: one with a 1 nF / 10 ohm snubber across
the diode, one with an ultrafast diode and simkit's own snubber across the winding):

- ``simulate(design, hash=False)``: the run every user gets by default (hum included);
- the hum alone (``noise.attach_hum`` on that result): what the default run pays for the
  spectrum;
- ``simulate(design, hash=True)``: the same with the high-frequency analysis, and its time
  points.

Each case runs several times, the cases taking turns, and the best time is reported (other
processes on the machine make every time noisier).  The engine is warmed up once first.

Run:  python bench/bench_hash.py [--repeat 3] [DESIGN.toml ...]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from _common import loadavg  # bench/ is on the path: the scripts run as files

from simkit.design.loader import load_design
from simkit.engine.ngspice import get_engine
from simkit.pipeline import simulate
from simkit.pipeline.noise import attach_hum

EXAMPLES = Path(__file__).resolve().parents[1] / "simkit" / "examples"

INVENTED = {
    "half-wave, 10 mH, 1 nF / 10 ohm across the diode": ('diode = "1N4007"\nsnubber = { c = "1n", r = "10" }'),
    "half-wave, 10 mH, UF4007, simkit's winding snubber": 'diode = "UF4007"',
}

TEMPLATE = """\
title = "Invented for the benchmark: {name}"
[source]
kind = "sine"
vrms = "300"
frequency = "50"
resistance = "20"
inductance = "10m"
[rectifier]
topology = "half-wave"
{diode}
[[filter]]
c = "47u"
[load]
kind = "resistor"
r = "5k"
"""


def best(fn, repeat: int) -> tuple[float, object]:  # type: ignore[no-untyped-def]
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("designs", nargs="*")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="simkit-bench-hash-") as tmp:
        paths = [Path(p) for p in args.designs] or sorted(EXAMPLES.glob("*.toml"))
        if not args.designs:
            for k, (name, diode) in enumerate(INVENTED.items()):
                p = Path(tmp) / f"invented{k}.toml"
                p.write_text(TEMPLATE.format(name=name, diode=diode))
                paths.append(p)
        measure(paths, args.repeat)


def measure(paths: list[Path], repeat: int) -> None:
    """Time each design's run without and with the high-frequency analysis, and the hum figures alone."""
    get_engine()
    simulate(load_design(str(paths[0]), ()), hash=False)  # warm up
    print(f"load average {loadavg()}; best of {repeat}")
    print(f"{'design':58s} {'default':>9s} {'hum':>8s} {'with hash':>10s} {'hf points':>10s}")
    for p in paths:
        d = load_design(str(p), ())
        t_plain, r = best(lambda d=d: simulate(d, hash=False), repeat)
        t_hum, _ = best(lambda r=r: attach_hum(r), repeat * 10)
        t_hash, rh = best(lambda d=d: simulate(d, hash=True), repeat)
        pts = len(rh.hash.hf.run.waves.time) if rh.hash is not None else 0
        print(f"{d.title[:58]:58s} {t_plain:8.3f}s {1e3 * t_hum:6.2f}ms {t_hash:9.3f}s {pts:10d}")


if __name__ == "__main__":
    main()
