"""Golden decks of the shipped examples in netlists/: write them, or check they are current.

    python -m simkit.goldens write netlists     (what `make netlists` runs)
    python -m simkit.goldens check netlists    (exit 1 and a list when stale)

For each example two decks: ``NAME.cir``, the steady-state deck exactly as
``simkit netlist`` prints it, and ``NAME.switch-on.cir``, the switch-on run.  The
switch-on deck is pure generation and must match to the byte; the steady-state deck
carries initial conditions found by simulation: the state where the last chunk started,
which any path to the periodic state reaches only within the settle tolerance, so its
numbers are compared to a relative 2e-3 and all other text exactly.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from simkit.demo import example_files
from simkit.design.loader import load_design
from simkit.pipeline import simulate, switch_on_deck

_NUM = re.compile(r"^([-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?)(Meg|[fpnumkG])?$")
_SCALE = {None: 1.0, "f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "k": 1e3, "Meg": 1e6, "G": 1e9}


def golden_decks() -> dict[str, str]:
    decks: dict[str, str] = {}
    for f in example_files():
        result = simulate(load_design(f))
        decks[f"{f.stem}.cir"] = result.deck
        decks[f"{f.stem}.switch-on.cir"] = switch_on_deck(result)
    return decks


def _token_value(tok: str) -> float | None:
    body = tok.split("=", 1)[1] if "=" in tok else tok
    m = _NUM.match(body)
    if not m:
        return None
    return float(m.group(1)) * _SCALE[m.group(2)]


def _same_line(a: str, b: str, rel: float) -> bool:
    if a == b:
        return True
    ta, tb = a.split(), b.split()
    if len(ta) != len(tb):
        return False
    for x, y in zip(ta, tb, strict=True):
        if x == y:
            continue
        if x.split("=")[0] != y.split("=")[0] and "=" in x:
            return False
        vx, vy = _token_value(x), _token_value(y)
        if vx is None or vy is None:
            return False
        if abs(vx - vy) > rel * max(abs(vx), abs(vy), 1e-12):
            return False
    return True


def compare(expected: str, actual: str, exact: bool) -> str | None:
    """None when the decks agree, else a description of the first difference."""
    ea, aa = expected.splitlines(), actual.splitlines()
    if exact:
        if ea == aa:
            return None
    if len(ea) != len(aa):
        return f"{len(aa)} lines, golden has {len(ea)}"
    for k, (x, y) in enumerate(zip(ea, aa, strict=True), start=1):
        ok = (x == y) if exact else (_same_line(x, y, 2e-3) or (x.startswith("* ") and y.startswith("* ")))
        if not ok:
            return f"line {k}: golden {x!r}, now {y!r}"
    return None


def check(folder: Path) -> list[str]:
    problems = []
    decks = golden_decks()
    for name, text in decks.items():
        p = folder / name
        if not p.exists():
            problems.append(f"{p}: missing")
            continue
        diff = compare(p.read_text("utf-8"), text, exact=name.endswith(".switch-on.cir"))
        if diff:
            problems.append(f"{p}: stale ({diff})")
    for p in sorted(folder.glob("*.cir")):
        if p.name not in decks:
            problems.append(f"{p}: no longer made by any example")
    return problems


def write(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in golden_decks().items():
        (folder / name).write_text(text, "utf-8")
        print(f"wrote {folder / name}")


def main(argv: list[str]) -> int:
    if len(argv) != 2 or argv[0] not in ("write", "check"):
        print("usage: python -m simkit.goldens write|check FOLDER", file=sys.stderr)
        return 2
    folder = Path(argv[1])
    if argv[0] == "write":
        write(folder)
        return 0
    problems = check(folder)
    for p in problems:
        print(p, file=sys.stderr)
    if problems:
        print("regenerate with: make netlists", file=sys.stderr)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
