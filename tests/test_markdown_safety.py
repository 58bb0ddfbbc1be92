"""Markdown output escapes user text (issue 14): no renderer can see markup or HTML in it.

report.md is checked as a CommonMark renderer with GitHub tables shows it, with markdown-it-py (an
independent implementation of the CommonMark specification, a test dependency only).  Both tests
failed before the fix (the commit says how that was checked).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from tests.conftest import BRIDGE_TOML, write_design
from tests.robust_helpers import call


def _render(md: str) -> str:
    """report.md as a CommonMark renderer with GitHub tables shows it (markdown-it-py, an
    independent implementation of the CommonMark specification)."""
    from markdown_it import MarkdownIt

    return MarkdownIt("commonmark", {"html": True}).enable("table").enable("strikethrough").render(md)


HOSTILE = "<img src=x onerror=alert(1)>"


def test_user_text_never_becomes_markup_in_markdown() -> None:
    from simkit.report.document import Document

    doc = Document(f"Title {HOSTILE} **bold** [link](http://example.com)", subtitle="- not a list")
    doc.heading(f"# {HOSTILE}")
    doc.paragraph(f"1. not a list\n\n    not code\n---\n{HOSTILE} ~~struck~~ www.example.com me@example.com",
                  markup=False)
    doc.bullets([f"+ {HOSTILE}", "=== not an underline"], markup=False)
    doc.table(["key", HOSTILE], [[f"| {HOSTILE} |", "`code` *em*"]])
    doc.note(f"- {HOSTILE}", kind="info")
    doc.code(f"note = '''\n````\n{HOSTILE}\n````\n'''", "toml")
    html = _render(doc.markdown())
    # The only tags are the ones simkit's own Markdown makes.
    tags = set(re.findall(r"<([a-z0-9]+)", html))
    assert tags <= {"h1", "h2", "h3", "p", "blockquote", "strong", "ul", "li", "table", "thead", "tbody", "tr",
                    "th", "td", "pre", "code", "hr", "em", "a"}, tags
    assert all(href.startswith("#") for href in re.findall(r'<a href="([^"]*)"', html))  # the contents line only
    assert "<img" not in html and "<del" not in html and "<ol" not in html
    # The design text stays one code block, payload inside it (as text).
    blocks = re.findall(r"<pre><code[^>]*>(.*?)</code></pre>", html, re.S)
    assert len(blocks) == 1 and "&lt;img src=x onerror=alert(1)&gt;" in blocks[0]
    # Nothing outside the code block mentions the payload unescaped.
    assert "onerror=alert(1)>" not in html


@pytest.mark.ngspice
def test_a_note_with_a_fence_cannot_open_html_in_report_md(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    text = BRIDGE_TOML.replace('title = "Test: bridge into CRC"',
                               f"title = \"Test: bridge into CRC\"\nnote = '''\n````\n{HOSTILE}\n````\n'''")
    p = write_design(tmp_path, text)
    code, _, err = call(["report", str(p), "--out", str(tmp_path / "rep")], capsys)
    assert code == 0, err
    html = _render((tmp_path / "rep" / "report.md").read_text("utf-8"))
    assert "<img src=x" not in html and "<img src=\"x\"" not in html
    blocks = re.findall(r"<pre><code[^>]*>(.*?)</code></pre>", html, re.S)
    assert any("onerror" in b for b in blocks)
