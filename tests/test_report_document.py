"""The document layer and the schematic, without a simulator: Markdown and HTML output, escaping,
repeatable bytes, the file guard, and one symbol per part for every topology."""

from __future__ import annotations

import io
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from simkit.design.loader import load_design
from simkit.errors import UsageError
from simkit.netlist.build import build_circuit
from simkit.report.document import CAUTION_POINTS, Document
from simkit.report.outputs import OutputDir
from simkit.report.schematic import draw_schematic, user_parts
from tests.conftest import EXAMPLES, write_design


def tiny_png() -> bytes:
    from simkit.report.plots import figure_bytes, house_style, new_figure

    with house_style():
        fig, (ax,) = new_figure(1, 1.0, 1.0)
        ax.plot([0, 1], [0, 1])
        return figure_bytes(fig)[0]


def sample() -> Document:
    doc = Document("Invented example: <b>bold</b> & co", subtitle="a test")
    doc.heading("Summary")
    doc.paragraph("Output `vout_dc_v` is **300 V**.")
    doc.paragraph("user text with `ticks` and <script>alert(1)</script>", markup=False)
    doc.table(["key", "value"], [["source.vrms", "250 V"], ["a|b", "1 kΩ"]], align="lr")
    doc.image("pic", tiny_png(), b"<svg xmlns='http://www.w3.org/2000/svg'/>", "a picture")
    doc.code("V1 a 0 SIN(0 1 50)\n", "spice")
    return doc


def test_markdown_and_html_carry_every_block_and_escape_text() -> None:
    doc = sample()
    md, html = doc.markdown(), doc.html()
    assert md.startswith("# Invented example: &lt;b&gt;bold&lt;/b&gt; &amp; co\n")
    assert "| source.vrms | 250 V |" in md and "a\\|b" in md
    assert "![a picture](pic.png)" in md and "[SVG for print](pic.svg)" in md
    assert "```spice\nV1 a 0 SIN(0 1 50)\n```" in md
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert "<code>vout_dc_v</code>" in html and "<strong>300 V</strong>" in html
    assert 'src="data:image/png;base64,' in html
    assert "http://" not in html.replace("http://www.w3.org", "") and "https://" not in html
    # The caution section is added when the author did not: every report carries it.
    out = doc.files()
    assert out[:2] == ["report.md", "report.html"] and "pic.png" in out and "pic.svg" in out


def test_cautions_are_always_written(tmp_path: Path) -> None:
    doc = Document("plain")
    doc.paragraph("nothing else")
    doc.write(OutputDir(tmp_path))
    md = (tmp_path / "report.md").read_text("utf-8")
    html = (tmp_path / "report.html").read_text("utf-8")
    assert "## High-voltage cautions" in md and 'id="high-voltage-cautions"' in html
    for point in CAUTION_POINTS:
        assert point in md
    for word in ("Stored charge", "Bleeders", "Insulation", "Fusing", "One hand rule", "local electrical codes",
                 "licensed"):
        assert word in md


def test_write_is_repeatable_and_guarded(tmp_path: Path) -> None:
    names = sample().write(OutputDir(tmp_path / "a"))
    sample().write(OutputDir(tmp_path / "b"))
    for n in names:
        assert (tmp_path / "a" / n).read_bytes() == (tmp_path / "b" / n).read_bytes(), n
    sample().write(OutputDir(tmp_path / "a"))  # simkit's own files may be replaced
    (tmp_path / "c").mkdir()
    (tmp_path / "c" / "report.md").write_text("my notes", "utf-8")
    with pytest.raises(UsageError):
        sample().write(OutputDir(tmp_path / "c"))
    assert (tmp_path / "c" / "report.md").read_text("utf-8") == "my notes"
    assert not (tmp_path / "c" / "pic.png").exists()  # refused before writing anything


def test_bad_names_and_tables_are_refused() -> None:
    doc = Document("x")
    with pytest.raises(ValueError):
        doc.image("../evil", tiny_png(), None, "c")
    with pytest.raises(ValueError):
        doc.image("ok", b"not a png", None, "c")
    with pytest.raises(ValueError):
        doc.table(["a", "b"], [["1"]])
    with pytest.raises(ValueError):
        doc.attach("report.html", "x")


TEMPLATE = """\
title = "Test {name}"
[source]
vrms = "250"
frequency = "50"
resistance = "25"
inductance = "{lw}"
[rectifier]
topology = "{topology}"
diode = "1N4007"
{rect}
{filters}
[load]
kind = "{load}"
{load_value}
[bleeder]
r = "220k"
"""

CASES = {
    "half-wave-c-l-c-r-c": ("half-wave", "", "5m", ["c = \"100u\"", "l = \"10\"\ndcr = \"100\"", "c = \"47u\"",
                                                  "r = \"2.2k\"", "c = \"22u\""], "resistor"),
    "centre-tap-l-c": ("centre-tap", "", "0", ["l = \"10\"", "c = \"40u\"\nesr = \"0.5\""], "resistor"),
    "bridge-none": ("bridge", "", "10m", [], "current"),
    "doubler-r-c": ("doubler", "capacitance = \"220u\"", "0", ["r = \"47\"", "c = \"100u\""], "current"),
    "cascade-3-r-c": ("cascade", "stages = 3\ncapacitance = \"10u\"", "0", ["r = \"1k\"", "c = \"4.7u\""],
                      "resistor"),
    "cascade-1-none": ("cascade", "stages = 1\ncapacitance = \"10u\"", "0", [], "resistor"),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_schematic_draws_one_symbol_per_part(tmp_path: Path, name: str) -> None:
    topology, rect, lw, filters, load = CASES[name]
    text = TEMPLATE.format(name=name, topology=topology, rect=rect, lw=lw, load=load,
                           filters="\n".join(f"[[filter]]\n{f}" for f in filters),
                           load_value='r = "10k"' if load == "resistor" else 'i = "30m"')
    design = load_design(write_design(tmp_path, text))
    circuit = build_circuit(design)
    sch = draw_schematic(design, circuit)
    wanted = user_parts(circuit)
    assert sorted(sch.drawn) == sorted(wanted)  # each part exactly once
    assert len(set(sch.drawn)) == len(sch.drawn) and not sch.not_drawn
    # Helpers added for the numerics are not parts: never drawn.
    assert not [n for n in sch.drawn if n.startswith(("RT", "VD", "VC", "VLOAD"))]
    assert sch.png.startswith(b"\x89PNG\r\n\x1a\n")
    ET.fromstring(sch.svg)  # well-formed SVG (its text is drawn as outlines, so it prints without our fonts)
    # Every symbol is labelled with its name and a value in engineering notation.
    for part, label in sch.labels.items():
        assert label.splitlines()[0] == part
        assert any(ch.isdigit() for ch in label) or part.startswith("D"), label
    from PIL import Image

    with Image.open(io.BytesIO(sch.png)) as im:
        assert im.size[0] > 600 and im.size[1] > 200


def test_schematic_of_an_example_is_repeatable() -> None:
    design = load_design(EXAMPLES / "bench_amp_bridge_clc.toml")
    a = draw_schematic(design, build_circuit(design))
    b = draw_schematic(design, build_circuit(design))
    assert a.png == b.png and a.svg == b.svg
    assert {"V1", "RW1", "D1", "D2", "D3", "D4", "C1", "L1", "C2", "RLOAD", "RBLEED"} == set(a.drawn)
    # Values as the example file gives them, in engineering notation (ESR and DCR in the labels).
    assert a.labels["C1"] == "C1\n33 µF\nESR 500 mΩ"
    assert a.labels["L1"] == "L1\n5 H\nDCR 120 Ω"
    assert a.labels["V1"] == "V1\n300 V rms\n50 Hz"
    assert a.labels["RLOAD"] == "RLOAD\nload\n4 kΩ" and a.labels["RBLEED"] == "RBLEED\nbleeder\n33 kΩ"
    assert a.labels["D1"] == "D1\n1N4007"


def test_report_modules_load_no_matplotlib() -> None:
    """Pictures import matplotlib (and schemdraw) only when drawn: the CLI starts fast."""
    import subprocess
    import sys

    code = ("import sys, simkit.cli, simkit.demo, simkit.report.design_report, simkit.report.schematic, "
            "simkit.report.document, simkit.report.plots; "
            "print(sorted({m.split('.')[0] for m in sys.modules} & {'matplotlib', 'schemdraw'}))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr
