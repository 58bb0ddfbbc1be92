"""Fuzzing the contract (issue 14): random mutations of the shipped designs and random --set values.

A seeded generator (repeatable: the same seed gives the same cases, and a failure names its case)
mutates the example designs shipped in simkit/examples/ as text (lines dropped, doubled, swapped,
cut; values replaced by hostile ones; junk, deep nesting, bad bytes) and through --set, and feeds
them to the loader and to the command line.  Whatever comes in, the exit-code contract
(docs/reference.md, Exit codes) holds: exit 0, 1, 2 or 3; an error is one line starting
"simkit: error:", never a traceback; and nothing is written outside the output folder.

Most cases stop before the simulator (the loader alone, or the command line with the simulation
replaced by a stand-in); a few dozen valid mutations run end to end through ngspice.
"""

from __future__ import annotations

import json
import os
import random
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from simkit.cli import main
from simkit.errors import SimkitError, SimulationError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "simkit" / "examples").glob("*.toml"))
SEED = 14

#: Values a user (or an attacker) might type: edge numbers, wrong kinds, hostile text.
HOSTILE_VALUES = [
    '""', '"0"', '"-1"', "0", "-1", "1e309", "-1e309", "nan", "inf", "-inf", '"nan"', '"inf"', '"1e-300"', "1e-300",
    '"1f"', '"1e999"', '"1Meg"', '"1M"', '"4k7"', '"4R7"', '"100uF"', '"10uH"', '"5kΩ"', '"5k\u2126"', '"abc"',
    '"1 2"', '"10%"', '"200%"', "true", "false", "[]", "[1, 2]", "{}", '{ a = 1 }', '"\\n.control"',
    '"x\\u0000y"', '"' + "k" * 5000 + '"', "9" * 4000, '"' + "9" * 5000 + '"', "[" * 40 + "]" * 40,
    '"1N4007"', '"5U4GB"', '"bridge"', '"cascade"', '"doubler"', '"half-wave"', '"centre-tap"', '"resistor"',
    '"current"', '"keyed"', '"sine"', '"transformer"', '"inverter"', '"series"', '"shunt"', "3", "20", "21",
    "100000", "0.5", '"250"', '"50"', '"100u"', '"47u"', '"5k"', '"10"', '"ΩΩ"', '"\\u202e"',
]

#: --set values as typed on the command line (TOML when valid, text otherwise).
SET_VALUES = [v.strip('"') for v in HOSTILE_VALUES] + ["", "=", "a=b", "[", "{", "'", '"unterminated', "1_000",
                                                        "0x10", "1e3", "+5", "2k2", "47µ", "47μ", "1k\n.control"]


def _paths(data: Any, prefix: str = "") -> Iterator[str]:
    """Every dotted PATH of a design dictionary, as --set spells it."""
    if isinstance(data, dict):
        for k, v in data.items():
            yield from _paths(v, f"{prefix}{k}.")
    elif isinstance(data, list):
        for i, v in enumerate(data):
            yield from _paths(v, f"{prefix}{i}.")
    else:
        yield prefix[:-1]


def _mutate_text(rng: random.Random, text: str) -> str | bytes:
    lines = text.splitlines()
    for _ in range(rng.randint(1, 3)):
        op = rng.randrange(12)
        i = rng.randrange(len(lines)) if lines else 0
        if op == 0 and lines:
            del lines[i]
        elif op == 1 and lines:
            lines.insert(i, lines[i])
        elif op == 2 and len(lines) > 1:
            j = rng.randrange(len(lines))
            lines[i], lines[j] = lines[j], lines[i]
        elif op in (3, 4, 5) and lines and "=" in lines[i]:
            key = lines[i].split("=", 1)[0]
            lines[i] = f"{key}= {rng.choice(HOSTILE_VALUES)}"
        elif op == 6:
            lines.insert(i, rng.choice(["[source]", "[[filter]]", "[load]", "[[load]]", "[rectifier]", "[bleeder]",
                                        "[simulation]", "[regulator]", "[checks]", "[spread]", "[battery]",
                                        "library = \"parts.toml\"", "[a." + "b." * 60 + "c]", "x = 1", "= 1",
                                        "[", "]]", "'''", '"""', "\t", "title = 5", "note = '''\n````\n<b>x</b>"]))
        elif op == 7 and lines:
            lines[i] = lines[i][: rng.randrange(len(lines[i]) + 1)]
        elif op == 8:
            cut = "\n".join(lines)
            return cut[: rng.randrange(len(cut) + 1)]
        elif op == 9:
            return ("\n".join(lines)).encode("utf-8") + bytes(rng.randrange(256) for _ in range(rng.randint(1, 8)))
        elif op == 10:
            lines.insert(i, f"k{rng.randrange(1000)} = {rng.choice(HOSTILE_VALUES)}")
        elif op == 11 and lines:
            lines[i] = lines[i].replace('"', "", 1)
    return "\n".join(lines) + "\n"


def _cases(rng: random.Random, n: int) -> Iterator[tuple[str, str | bytes, list[str]]]:
    """(label, design file content, --set options), n of them."""
    bases = [(p.name, p.read_text("utf-8")) for p in EXAMPLES]
    parsed = {name: tomllib.loads(text) for name, text in bases}
    for k in range(n):
        name, text = bases[k % len(bases)]
        paths = [*_paths(parsed[name]), "filter.9.c", "nosuch.key", "load.0.r", "rectifier.stages.x", "0",
                 "title.x", "a..b", ".x", "x.", "filter.-1.c", "source"]
        content: str | bytes = text if rng.random() < 0.35 else _mutate_text(rng, text)
        sets = [f"{rng.choice(paths)}={rng.choice(SET_VALUES)}" for _ in range(rng.choice([0, 0, 1, 1, 2, 3]))]
        if rng.random() < 0.05:
            sets.append(rng.choice(["noequals", "=5", " =5", "filter.0.c", "a.b.c.d.e.f=1"]))
        yield f"case {k} ({name})", content, sets


def _short(sets: list[str]) -> str:
    """The --set options of a case for a failure message (some are thousands of characters)."""
    text = repr(sets)
    return text if len(text) <= 300 else text[:200] + " ... " + text[-80:]


def _tree(root: Path, skip: Path) -> set[str]:
    """Every file and folder under root, except those under ``skip`` (the output folder)."""
    found = set()
    for dirpath, dirnames, filenames in os.walk(root):
        d = Path(dirpath)
        if d == skip or skip in d.parents:
            dirnames[:] = []
            continue
        found |= {str(d / n) for n in filenames + dirnames if d / n != skip}
    return found


def _check_contract(label: str, code: int, out: str, err: str) -> None:
    assert code in (0, 1, 2, 3), f"{label}: exit {code}\n{err}"
    assert "Traceback" not in err and "internal error" not in err, f"{label}:\n{err}"
    if code in (2, 3):
        errors = [line for line in err.splitlines() if line.startswith("simkit: error:")]
        assert len(errors) == 1, f"{label}:\n{err}"
        if code == 2:
            lines = [line for line in err.strip().splitlines() if line]
            assert lines == errors, f"{label}: an exit-2 message must be one line:\n{err}"
            assert len(errors[0]) < 1500, f"{label}: message of {len(errors[0])} characters"


def test_the_loader_takes_thousands_of_mutations_without_a_surprise(tmp_path: Path) -> None:
    """Loader only: a Design or a DesignError (exit 2), nothing else, for 5000 mutated designs."""
    from simkit.design.loader import load_design

    rng = random.Random(SEED)
    p = tmp_path / "design.toml"
    outcomes = {"ok": 0, "refused": 0}
    for label, content, sets in _cases(rng, 5000):
        p.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        try:
            load_design(p, sets)
            outcomes["ok"] += 1
        except SimkitError as exc:
            assert exc.exit_code == 2, f"{label} {_short(sets)}: {exc}"
            text = str(exc)
            assert "\n" not in text and len(text) < 1500, f"{label} {_short(sets)}: {text[:300]}"
            outcomes["refused"] += 1
    # Both outcomes are well represented: the fuzzer reaches past the parser.
    assert outcomes["ok"] > 300 and outcomes["refused"] > 1000, outcomes


def test_the_command_line_keeps_its_contract_for_every_mutation(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """The command line, simulation replaced by a stand-in: exit codes, one-line messages, no file
    outside --out, for 2500 mutated designs and --set values."""
    import simkit.cli

    def stand_in(design: Any, vscale: float = 1.0) -> Any:
        raise SimulationError("stand-in: the simulation is not run in this test")

    monkeypatch.setattr(simkit.cli, "_simulate", stand_in)
    rng = random.Random(SEED + 1)
    work = tmp_path / "work"
    work.mkdir()
    design = work / "design.toml"
    out = work / "out"
    reached = 0
    for label, content, sets in _cases(rng, 2500):
        design.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        before = _tree(tmp_path, out)
        command = rng.choice([["run", str(design), "--json", "--out", str(out)], ["netlist", str(design)],
                              ["run", str(design)]])
        args = command + [a for s in sets for a in ("--set", s)]
        with pytest.raises(SystemExit) as info:
            main(args)
        o, e = capsys.readouterr()
        code = int(info.value.code or 0)
        _check_contract(f"{label} {args[:1]} {_short(sets)}", code, o, e)
        reached += "stand-in" in e
        assert _tree(tmp_path, out) == before, f"{label}: files appeared outside the output folder"
        leftovers = [n for n in os.listdir(out)] if out.exists() else []
        assert leftovers == [], f"{label}: {leftovers} left in --out by a command that wrote nothing"
    assert reached > 200, reached  # many mutations are valid designs that got as far as the simulation


@pytest.mark.ngspice
def test_valid_mutations_run_end_to_end(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Two dozen valid mutations (values scaled by random factors) simulated for real."""
    from simkit.design.loader import load_design

    rng = random.Random(SEED + 2)
    fast = [p for p in EXAMPLES if p.stem in ("bench_amp_bridge_clc", "portable_tx_doubler",
                                              "receiver_centretap_choke")]
    numeric = {"filter.0.c", "filter.1.l", "filter.2.c", "load.r", "load.i", "source.resistance", "bleeder.r",
               "rectifier.capacitance", "source.vrms"}
    runs = 0
    for k in range(24):
        base = fast[k % len(fast)]
        data = tomllib.loads(base.read_text("utf-8"))
        paths = [p for p in _paths(data) if p in numeric]
        sets = []
        for path in rng.sample(paths, min(len(paths), rng.randint(1, 3))):
            node: Any = data
            for part in path.split("."):
                node = node[int(part)] if isinstance(node, list) else node[part]
            from simkit.units import parse_value

            value = parse_value(node) * rng.choice([0.3, 0.5, 0.8, 1.25, 2.0, 3.0])
            sets.append(f"{path}={value!r}")
        try:
            load_design(base, sets)
        except SimkitError:
            continue  # out of range after scaling: covered by the tests above
        out = tmp_path / f"out{k}"
        before = _tree(tmp_path, out)
        with pytest.raises(SystemExit) as info:
            main(["run", str(base), "--json", "--out", str(out), *[a for s in sets for a in ("--set", s)]])
        o, e = capsys.readouterr()
        code = int(info.value.code or 0)
        _check_contract(f"run {k} {base.name} {sets}", code, o, e)
        assert code in (0, 3), e
        if code == 0:
            doc = json.loads(o)
            assert doc["metrics"]["vout_dc_v"] > 0
            assert sorted(os.listdir(out)) == [".simkit-manifest.json", "deck.cir", "result.json", "waveforms.png"]
        assert _tree(tmp_path, out) == before
        runs += 1
    assert runs >= 15, runs
