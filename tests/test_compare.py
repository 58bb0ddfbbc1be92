"""``simkit compare``: designs side by side, checked against ``simkit run`` and ``simkit check`` of each
design and against the ripple's dependence on the reservoir (rect-2)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from tests.conftest import EXAMPLES
from tests.test_api import cli_json
from tests.test_cli import call

AMP = EXAMPLES / "bench_amp_bridge_clc.toml"  # invented example: bridge into C-L-C, resistor load


@pytest.fixture
def two(tmp_path: Path) -> tuple[Path, Path]:
    a = tmp_path / "a.toml"
    b = tmp_path / "b.toml"
    text = AMP.read_text()
    a.write_text(text)
    assert 'c = "33u"' in text  # the reservoir (the first [[filter]])
    b.write_text(text.replace('c = "33u"', 'c = "100u"', 1))
    return a, b


@pytest.mark.ngspice
def test_json_holds_each_designs_run_and_check(two: tuple[Path, Path], capsys: pytest.CaptureFixture[str]) -> None:
    a, b = two
    code, out, err = call(["compare", str(a), str(b), "--json"], capsys)
    assert code == 0, err
    doc = json.loads(out)
    assert set(doc) == {"simkit", "designs", "differences"}
    assert [d["file"] for d in doc["designs"]] == [str(a), str(b)]
    for entry, path in zip(doc["designs"], (a, b), strict=True):
        run = cli_json("run", str(path))  # each column is exactly simkit run of that file
        assert entry["figures"] == run["metrics"] and entry["warnings"] == run["warnings"]
        summary = cli_json("check", str(path))["summary"]
        assert entry["verdicts"] == {k: summary[k] for k in ("pass", "marginal", "fail", "result")}
    fa, fb = (d["figures"] for d in doc["designs"])
    assert set(doc["differences"]) == set(fa) | set(fb)
    for key, diffs in doc["differences"].items():
        if fa.get(key) is None or fb.get(key) is None:
            assert diffs[1] is None
        else:  # each design's figure minus the first's
            assert diffs == [0.0, fb[key] - fa[key]]
    # rect-2: the ripple goes as 1/C of the reservoir (the choke passes a fixed share of it):
    # 33 uF -> 100 uF leaves 0.33 of it.
    assert fb["ripple_pp_v"] / fa["ripple_pp_v"] == pytest.approx(0.33, rel=0.02)


@pytest.mark.ngspice
def test_text_variants_and_report(two: tuple[Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    a, b = two
    out_dir = tmp_path / "side"
    code, out, err = call(["compare", str(a), "--variant", "filter.0.c=100u", "--no-check", "--report",
                           str(out_dir)], capsys)
    assert code == 0, err
    assert "[1] a.toml:" in out and "[2] a.toml with filter.0.c=100u:" in out
    header = next(line for line in out.splitlines() if line.strip().startswith("figure"))
    assert re.search(r"\[1\]\s+\[2\]\s+\[2\] − \[1\]$", header)
    row = next(line for line in out.splitlines() if line.strip().startswith("ripple_pp_v"))
    assert re.search(r"−\S+ mV \(−67 %\)$", row), row  # 1 - 33/100 of the ripple (rect-2)
    assert "HIGH VOLTAGE" in out and "checks (as simkit check)" not in out
    # The variant is the second file: the same figures, to the last digit.
    code, out2, _ = call(["compare", str(a), str(b), "--json", "--no-check"], capsys)
    variant = json.loads(call(["compare", str(a), "--variant", "filter.0.c=100u", "--json", "--no-check"],
                              capsys)[1])
    assert variant["designs"][1]["figures"] == json.loads(out2)["designs"][1]["figures"]
    assert variant["designs"][1]["set"] == ["filter.0.c=100u"]
    for name in ("report.md", "report.html", "compare.json", "output-steady.png", "switch-on.png",
                 "output-steady.svg", "switch-on.svg"):
        assert (out_dir / name).stat().st_size > 0, name
    html = (out_dir / "report.html").read_text()
    assert "High-voltage cautions" in html and "a.toml with filter.0.c=100u" in html
    # The shipped example says it is one (example = true): the report says so too, from that key alone.
    assert "Invented examples" in (out_dir / "report.md").read_text()
    for p in (a, b):
        p.write_text(p.read_text().replace("example = true", "example = false"))
    code, _, err = call(["compare", str(a), str(b), "--no-check", "--report", str(tmp_path / "side2")], capsys)
    assert code == 0, err
    assert "Invented examples" not in (tmp_path / "side2" / "report.md").read_text()  # though titled "Invented"
    assert json.loads((out_dir / "compare.json").read_text())["designs"][1]["label"] == "a.toml with filter.0.c=100u"


def test_usage_errors_are_exit_2(two: tuple[Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    a, b = two
    for args, words in ((["compare", str(a)], "two designs"),
                        (["compare", str(a), str(b), "--variant", "load.r=3k"], "exactly one design"),
                        (["compare", str(a), "--variant", "nonsense"], "PATH=VALUE"),
                        (["compare", str(a), "--variant", "filter.0.c=-1u"], "filter.0.c"),
                        (["compare", str(a), str(tmp_path / "missing.toml")], "no such file")):
        code, out, err = call(args, capsys)
        assert code == 2 and words in err and out == "", (args, err)
        assert len(err.strip().splitlines()) == 1
