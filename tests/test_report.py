"""``simkit report``: every section, every picture it references, repeatable files, and the HTML
opened in a real headless Chromium (installed by scripts/ensure-chromium.sh from `make test`)."""

from __future__ import annotations

import base64
import hashlib
import io
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from simkit.cli import main
from simkit.report.design_report import IMAGES, OPTIONAL_IMAGES, SECTIONS, report_files
from tests.conftest import EXAMPLES

EXAMPLE = EXAMPLES / "bench_amp_bridge_clc.toml"


def run_report(out: Path, capsys: pytest.CaptureFixture[str], *extra: str) -> None:
    with pytest.raises(SystemExit) as info:
        main(["report", str(EXAMPLE), "--out", str(out), *extra])
    _, err = capsys.readouterr()
    assert int(info.value.code or 0) == 0, err


@pytest.fixture(scope="module")
def report_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("report") / "bench"
    with pytest.raises(SystemExit) as info:
        main(["report", str(EXAMPLE), "--out", str(out)])
    assert int(info.value.code or 0) == 0
    return out


def valid_png(data: bytes) -> tuple[int, int]:
    from PIL import Image

    with Image.open(io.BytesIO(data)) as im:
        im.verify()
    with Image.open(io.BytesIO(data)) as im:
        im.load()
        return im.size


def svg_size(data: bytes) -> tuple[float, float]:
    root = ET.fromstring(data)
    assert root.tag.endswith("svg")
    return float(root.get("width", "0").rstrip("pt")), float(root.get("height", "0").rstrip("pt"))


@pytest.mark.ngspice
def test_report_has_every_file_and_section(report_dir: Path) -> None:
    for name in report_files():
        assert (report_dir / name).is_file(), name
    md = (report_dir / "report.md").read_text("utf-8")
    html = (report_dir / "report.html").read_text("utf-8")
    assert md.startswith("# Invented example: 50 Hz bench amplifier, bridge into CLC\n")
    assert "**Invented example.**" in md and "<strong>Invented example.</strong>" in html
    for section in SECTIONS:
        assert f"\n## {section}\n" in md, section
        assert f">{section}</h2>" in html, section
    # Inputs in engineering notation, figures and parts in tables, the deck as an appendix.
    assert "| source.vrms | 300 V |" in md and "| filter.1.l | 5 H |" in md and "| filter.0.esr | 500 mΩ |" in md
    assert "| `vout_dc_v` |" in md and "| RLOAD |" in md
    assert "\n```spice\n* simkit deck:" in md and ".meas tran vout_dc_v AVG v(out)" in md
    assert (report_dir / "deck.cir").read_text("utf-8") in md
    for word in ("Stored charge", "Bleeders", "Insulation", "Fusing", "One hand rule", "local electrical codes"):
        assert word in md and word in html
    # The library diode has ratings, so `simkit report` runs the checks: verdicts and a fuse.
    assert "\n## Verdicts\n" in md and "| D1 | reverse voltage |" in md and "Suggested fuse:" in md
    # The schematic section says what is left out of the drawing.
    assert "`RTAC1`" in md and "`VD1`" in md


@pytest.mark.ngspice
def test_every_picture_the_report_references_exists_and_is_valid(report_dir: Path) -> None:
    md = (report_dir / "report.md").read_text("utf-8")
    linked = re.findall(r"\]\(([^)#]+)\)", md)
    assert linked, "no pictures linked"
    for name in linked:
        data = (report_dir / name).read_bytes()
        if name.endswith(".png"):
            w, h = valid_png(data)
            assert w >= 600 and h >= 200, (name, w, h)
        elif name.endswith(".svg"):
            assert min(svg_size(data)) > 50, name
        else:
            assert name == "deck.cir", name
    stems = {n.rsplit(".", 1)[0] for n in linked if n.endswith(".png")}
    assert stems == set(IMAGES) - set(OPTIONAL_IMAGES)
    html = (report_dir / "report.html").read_text("utf-8")
    embedded = re.findall(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)" alt="[^"]*" data-file="([^"]+)"', html)
    assert len(embedded) == len(stems)
    for data, name in embedded:
        assert base64.b64decode(data) == (report_dir / name).read_bytes(), name
    # No network: nothing in the page points outside the folder.
    assert not re.search(r'(src|href)="(https?:)?//', html) and "@import" not in html and "url(" not in html


@pytest.mark.ngspice
def test_running_it_twice_gives_the_same_files(report_dir: Path, tmp_path: Path,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    def digests(folder: Path) -> dict[str, str]:
        return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}

    first = digests(report_dir)
    again = tmp_path / "again"
    shutil.copytree(report_dir, again)  # with its manifest: the second run replaces simkit's own files
    run_report(again, capsys)
    assert digests(again) == first


def chromium() -> str:
    for name in (os.environ.get("SIMKIT_CHROMIUM", ""), "chromium", "chromium-browser", "google-chrome"):
        if name and shutil.which(name):
            return str(shutil.which(name))
    raise AssertionError("no chromium: `make test` installs it with scripts/ensure-chromium.sh")


def browse(page: Path, profile: Path, *args: str) -> subprocess.CompletedProcess[str]:
    cmd = [chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--disable-extensions", "--hide-scrollbars", f"--user-data-dir={profile}", *args, page.as_uri()]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120, check=False)


# Put first in <head>: records every failed resource and script error, then on load writes what
# it saw into <body data-check="...">, which --dump-dom prints.
PROBE = """<script>
window.__errors = [];
window.addEventListener('error', function (e) {
  var t = e.target || {};
  window.__errors.push((t.tagName || 'script') + ':' + (t.src || t.href || e.message));
}, true);
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var bad = imgs.filter(function (i) { return !(i.complete && i.naturalWidth > 0 && i.naturalHeight > 0); });
  document.body.setAttribute('data-check', 'images=' + imgs.length + ';broken=' + bad.length +
    ';errors=' + window.__errors.length + ';detail=' + window.__errors.concat(bad.map(function (i) {
      return 'img:' + i.getAttribute('data-file'); })).join('|'));
});
</script>"""


@pytest.mark.ngspice
def test_html_opens_in_chromium_with_every_image_loaded(report_dir: Path, tmp_path: Path) -> None:
    html = (report_dir / "report.html").read_text("utf-8")
    probe = tmp_path / "site"
    shutil.copytree(report_dir, probe)
    (probe / "probed.html").write_text(html.replace("<head>", "<head>\n" + PROBE, 1), "utf-8")
    run = browse(probe / "probed.html", tmp_path / "profile1", "--virtual-time-budget=5000", "--dump-dom")
    assert run.returncode == 0, run.stderr[-2000:]
    m = re.search(r'data-check="images=(\d+);broken=(\d+);errors=(\d+);detail=([^"]*)"', run.stdout)
    assert m, run.stdout[-1000:] + run.stderr[-2000:]
    images, broken, errors, detail = int(m[1]), int(m[2]), int(m[3]), m[4]
    assert images == len(IMAGES) - len(OPTIONAL_IMAGES)  # this design has no keyed load, no steps
    assert broken == 0 and errors == 0, detail

    # The page as a reader sees it: a screenshot of the report itself, unchanged.
    shot = tmp_path / "report-screenshot.png"
    run = browse(report_dir / "report.html", tmp_path / "profile2", "--window-size=1100,2400",
                 f"--screenshot={shot}")
    assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
    from PIL import Image, ImageStat

    assert valid_png(shot.read_bytes()) == (1100, 2400)
    with Image.open(shot) as im:
        stat = ImageStat.Stat(im.convert("L"))
    assert stat.stddev[0] > 20  # text, tables and the schematic, not a blank page


@pytest.mark.ngspice
def test_probe_catches_a_broken_picture(report_dir: Path, tmp_path: Path) -> None:
    """The browser check can fail: a page with one picture missing is reported."""
    html = (report_dir / "report.html").read_text("utf-8")
    broken = re.sub(r'src="data:image/png;base64,[^"]+"', 'src="missing.png"', html, count=1)
    page = tmp_path / "broken.html"
    page.write_text(broken.replace("<head>", "<head>\n" + PROBE, 1), "utf-8")
    run = browse(page, tmp_path / "profile", "--virtual-time-budget=5000", "--dump-dom")
    m = re.search(r'data-check="images=(\d+);broken=(\d+);errors=(\d+)', run.stdout)
    assert m and int(m[2]) == 1 and int(m[3]) >= 1, run.stdout[-500:]


KEYED_WARMUP = """\
title = "Test: keyed load with heater warm-up"
[source]
vrms = "300"
frequency = "50"
resistance = "20"
[rectifier]
topology = "bridge"
diode = "1N4007"
[[filter]]
c = "47u"
[[filter]]
r = "100"
[[filter]]
c = "47u"
[[load]]
kind = "keyed"
down = { i = "120m" }
up = { i = "10m" }
rate = "4"
duty = "50%"
warmup = "0.3"
[bleeder]
r = "100k"
"""


@pytest.mark.ngspice
def test_sections_appear_when_their_data_exists(tmp_path: Path) -> None:
    """A keyed load with a warm-up adds the keyed and start-up plots; verdicts passed as checks add their table."""
    from dataclasses import replace

    from simkit.checks import CheckReport, Verdict
    from simkit.checks.corners import nominal_corners
    from simkit.checks.rules import Findings
    from simkit.design.loader import load_design
    from simkit.pipeline import simulate
    from simkit.report.design_report import build_report
    from tests.conftest import write_design

    result = simulate(load_design(write_design(tmp_path, KEYED_WARMUP)))
    # A policy limit: no part rating to show beside it.
    verdict = Verdict("D1", "piv_v", 450.0, 1000.0, "V", "mains +10%", "pass", 0.55, limit_kind="policy")

    def checks(v: Verdict) -> CheckReport:
        return CheckReport(result.design, nominal_corners(result), Findings([v]), {})

    doc = build_report(result, checks=checks(verdict))
    md = doc.markdown()
    for heading in ("## Verdicts", "### Keyed load", "### Start-up timeline"):
        assert f"\n{heading}\n" in md, heading
    assert "| D1 | piv\\_v | 450 V |   | 1 kV | +55 % | pass | mains +10% |" in md  # no rating given: blank
    failed = replace(verdict, verdict="fail", basis="VRRM 1000 V (datasheet)", rating=1250.0, limit_kind="rating")
    assert failed.exceeds == "derating"
    md = build_report(result, checks=checks(failed)).markdown()
    assert "| 1.25 kV | 1 kV | +55 % | **FAIL** (above derating) | mains +10% | \\[1\\] |" in md
    assert "- \\[1\\] VRRM 1000 V (datasheet)" in md
    assert {"keyed.png", "keyed.svg", "start-up.png", "start-up.svg"} <= set(doc.files())
    assert "| BLOAD | " in md  # the keyed load in the parts table
    assert "**Invented example.**" not in md  # only designs that say so are labelled invented


def test_verdict_rows_are_worded_as_simkit_check_words_them() -> None:
    """The report's verdict cells come from the check text: a time that never comes, a ratio, a missing part."""
    from simkit.checks import Verdict
    from simkit.report.design_report import _verdict_row

    never = Verdict("C1", "discharge below 60 V", float("inf"), 5.0, "s", "switch-off", "fail", -1.0,
                    basis="safety", limit_kind="policy")
    bases: list[str] = []
    assert _verdict_row(never, bases) == ["C1", "discharge below 60 V", "never", "", "5 s", "never",
                                          "**FAIL** (beyond limit)", "switch-off", "[1]"] and bases == ["safety"]
    hot = Verdict("R1", "dissipation", 3.0, 0.5, "W", "heavy load", "fail", -1.0, rating=1.0)
    assert _verdict_row(hot, bases)[2:7] == ["3 W", "1 W", "500 mW", "x6", "**FAIL** (above rating)"]
    missing = Verdict("C1, C2", "balancing resistors", 2.0, 0.0, "missing", "the design", "fail", None,
                      limit_kind="policy")
    assert _verdict_row(missing, bases)[2:6] == ["2 missing", "", "none", ""]
