"""``simkit demo`` ends with one line per example: its title, its check verdict with the counts,
and where its report is; the counts agree with the verdict table of that report."""

from __future__ import annotations

import re
from pathlib import Path
from types import SimpleNamespace

import pytest

from simkit.demo import verdict_line
from tests.robust_helpers import call

EXAMPLES = Path(__file__).resolve().parents[1] / "simkit" / "examples"


def test_a_verdict_line_names_the_result_the_counts_and_the_report() -> None:
    checks = SimpleNamespace(summary=lambda: {"pass": 14, "marginal": 2, "fail": 1, "result": "fail"})
    line = verdict_line("A supply", checks, "", Path("results/a/report.html"))
    assert line.strip() == "A supply: fail (1 fail, 2 marginal, 14 pass) -> results/a/report.html"
    line = verdict_line("A supply", None, "the mains corner did not converge", Path("r/report.html"))
    assert line.strip() == "A supply: not checked (the mains corner did not converge) -> r/report.html"


@pytest.mark.ngspice
def test_the_demo_ends_with_a_verdict_and_a_report_per_example(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                               monkeypatch: pytest.MonkeyPatch) -> None:
    import simkit.demo

    chosen = [EXAMPLES / "receiver_centretap_choke.toml", EXAMPLES / "bench_amp_bridge_clc.toml"]
    monkeypatch.setattr(simkit.demo, "example_files", lambda: sorted(chosen))
    out = tmp_path / "results"
    code, text, err = call(["demo", "--out", str(out)], capsys)
    assert code == 0, err
    last = text.rstrip("\n").splitlines()[-len(chosen):]
    for line, path in zip(last, sorted(chosen), strict=True):
        found = re.fullmatch(r"  (.+): (pass|marginal|fail) \((\d+) fail, (\d+) marginal, (\d+) pass\) -> (.+)", line)
        assert found, line
        title, result, fails, marginals, passes, report = found.groups()
        assert title == re.search(r'^title = "(.*)"$', path.read_text("utf-8"), re.M).group(1)
        assert Path(report) == out / path.stem / "report.html" and Path(report).is_file()
        # The counts are the report's own verdict table.
        lines = (Path(report).parent / "report.md").read_text("utf-8").splitlines()
        head = lines.index("| part | rule | value | rating | limit | margin | verdict | corner | limit from |")
        rows = []
        for row in lines[head + 2:]:
            if not row.startswith("|"):
                break
            rows.append(row)
        verdicts = [row.split("|")[7].strip().split(" (")[0] for row in rows]  # "**FAIL** (above rating)"
        assert rows and len(verdicts) == int(fails) + int(marginals) + int(passes)
        assert verdicts.count("**FAIL**") == int(fails) and verdicts.count("**MARGINAL**") == int(marginals)
        assert verdicts.count("pass") == int(passes)
        assert result == ("fail" if int(fails) else "marginal" if int(marginals) else "pass")
