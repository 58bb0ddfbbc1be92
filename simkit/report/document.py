"""A report as a list of blocks, written as Markdown and as one self-contained HTML page.

:class:`Document` is the common layer of every report simkit writes (``simkit report``,
``sweep --report``, ``spread --report``): build it block by block, then :meth:`Document.write`
puts ``report.md``, ``report.html`` and the image files into an
:class:`~simkit.report.outputs.OutputDir`.

- ``report.md`` links its images beside it (``NAME.png``) and the SVG for print.
- ``report.html`` needs nothing else: its stylesheet is inline and its pictures are
  embedded as ``data:`` URIs, so it opens from a mail attachment or a USB stick without
  network; it links the PNG and SVG files beside it too.
- Output is byte-for-byte repeatable: no dates, no random ids; anchors come from the
  headings.
- Every report carries the high-voltage cautions: :meth:`Document.write` adds the
  cautions section when the author did not call :meth:`Document.cautions`.

Example
-------
>>> doc = Document("Invented example: bench supply")
>>> doc.heading("Inputs")
'inputs'
>>> doc.table(["key", "value"], [["source.vrms", "250 V"]], align="lr")
>>> doc.cautions()
>>> "source.vrms" in doc.markdown()
True
"""

from __future__ import annotations

import base64
import html
import re
from collections.abc import Sequence
from dataclasses import dataclass, field

from simkit import __version__
from simkit.report.outputs import OutputDir
from simkit.safety import CAUTION_POINTS

#: The file names every document writes besides its images.
MARKDOWN = "report.md"
HTML = "report.html"

_NAME = re.compile(r"^[a-z0-9][a-z0-9_-]{0,63}$")
# Inline markup in trusted text: `code` and **bold**; nothing else is interpreted.
_INLINE = re.compile(r"(`[^`\n]+`|\*\*[^*\n]+\*\*)")


@dataclass(frozen=True)
class Heading:
    text: str
    level: int
    anchor: str


@dataclass(frozen=True)
class Paragraph:
    text: str
    markup: bool


@dataclass(frozen=True)
class Bullets:
    items: tuple[str, ...]
    markup: bool


@dataclass(frozen=True)
class Table:
    headers: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    align: str  # one of "l", "r", "c" per column
    markup: bool


@dataclass(frozen=True)
class Image:
    name: str  # file stem: NAME.png and NAME.svg
    png: bytes
    svg: bytes | None
    caption: str
    number: int
    wide: bool = False  # may use more than the text width on a wide screen (schematics)


@dataclass(frozen=True)
class Code:
    text: str
    lang: str


@dataclass(frozen=True)
class Note:
    """A framed remark (the caution banner, an invented-example label)."""

    text: str
    kind: str  # "caution" or "info"


Block = Heading | Paragraph | Bullets | Table | Image | Code | Note


@dataclass
class Document:
    """A report built block by block, written as ``report.md`` plus ``report.html``.

    Parameters
    ----------
    title : str
        The document's title (plain text, e.g. the design's title).
    subtitle : str
        One line under the title (plain text), e.g. what kind of report this is.
    """

    title: str
    subtitle: str = ""
    blocks: list[Block] = field(default_factory=list, init=False)
    _anchors: set[str] = field(default_factory=set, init=False, repr=False)
    _images: int = field(default=0, init=False, repr=False)
    _has_cautions: bool = field(default=False, init=False, repr=False)
    _attachments: dict[str, bytes] = field(default_factory=dict, init=False, repr=False)

    # -- building ---------------------------------------------------------------------------

    def heading(self, text: str, level: int = 2) -> str:
        """Add a heading (level 2 = section, 3 = sub-section); returns its HTML anchor."""
        if level not in (2, 3, 4):
            raise ValueError("heading level must be 2, 3 or 4 (the title is level 1)")
        anchor = self._anchor(text)
        self.blocks.append(Heading(text, level, anchor))
        return anchor

    def paragraph(self, text: str, markup: bool = True) -> None:
        """Add a paragraph.  With ``markup``, `code` and **bold** are honoured; pass
        ``markup=False`` for text that comes from a user (a design's title or note)."""
        self.blocks.append(Paragraph(text, markup))

    def bullets(self, items: Sequence[str], markup: bool = True) -> None:
        """Add a bulleted list."""
        self.blocks.append(Bullets(tuple(items), markup))

    def note(self, text: str, kind: str = "info") -> None:
        """Add a framed remark: ``kind`` is "info" or "caution"."""
        if kind not in ("info", "caution"):
            raise ValueError("kind must be 'info' or 'caution'")
        self.blocks.append(Note(text, kind))

    def table(self, headers: Sequence[str], rows: Sequence[Sequence[str]], align: str | None = None,
              markup: bool = False) -> None:
        """Add a table of strings.

        Parameters
        ----------
        headers : sequence of str
        rows : sequence of sequences of str
            Each row as many cells as ``headers``; format numbers first (``units.eng``).
        align : str, optional
            One letter per column, ``l``, ``r`` or ``c``; default all left.
        markup : bool
            Honour `code` and **bold** in cells (default off: cells are shown as they are).
        """
        n = len(headers)
        al = align or "l" * n
        if len(al) != n or set(al) - set("lrc"):
            raise ValueError(f"align needs one of l, r, c per column ({n} columns), got {al!r}")
        out_rows = []
        for k, row in enumerate(rows):
            if len(row) != n:
                raise ValueError(f"table row {k} has {len(row)} cells, the headers {n}")
            out_rows.append(tuple(str(c) for c in row))
        self.blocks.append(Table(tuple(headers), tuple(out_rows), al, markup))

    def image(self, name: str, png_bytes: bytes, svg_bytes: bytes | None, caption: str, wide: bool = False) -> str:
        """Add a figure: written as ``NAME.png`` (and ``NAME.svg`` for print) beside the report.

        Parameters
        ----------
        name : str
            File stem: lower-case letters, digits, ``-`` and ``_``; stable, so other documents
            can link to the files.
        png_bytes, svg_bytes : bytes
            The picture in both formats (``svg_bytes`` may be None).
        caption : str
            What the figure shows and where (plain text).
        wide : bool
            In the HTML, let the picture grow past the text width on a wide screen (for wide
            drawings such as a schematic).

        Returns
        -------
        str
            The PNG's file name.
        """
        if not _NAME.match(name):
            raise ValueError(f"image name {name!r}: use lower-case letters, digits, - and _")
        if any(isinstance(b, Image) and b.name == name for b in self.blocks):
            raise ValueError(f"image name {name!r} used twice")
        if not png_bytes.startswith(b"\x89PNG\r\n\x1a\n"):
            raise ValueError(f"image {name!r}: png_bytes is not a PNG file")
        self._images += 1
        self.blocks.append(Image(name, png_bytes, svg_bytes, caption, self._images, wide))
        return f"{name}.png"

    def code(self, text: str, lang: str = "") -> None:
        """Add a block of literal text (a deck, a design file)."""
        self.blocks.append(Code(text.rstrip("\n"), lang))

    def attach(self, name: str, data: bytes | str) -> None:
        """Write another file beside the report (e.g. ``deck.cir``, ``sweep.csv``) under the same
        guard; link to it in the text with its name."""
        if "/" in name or "\\" in name or name in (MARKDOWN, HTML) or name.startswith("."):
            raise ValueError(f"attachment name {name!r}: a plain file name other than the report's own")
        self._attachments[name] = data.encode("utf-8") if isinstance(data, str) else data

    def cautions(self, level: int = 2) -> None:
        """Add the high-voltage cautions section (added at the end by :meth:`write` if never called)."""
        self.heading("High-voltage cautions", level)
        self.bullets(CAUTION_POINTS, markup=False)
        self._has_cautions = True

    # -- output -----------------------------------------------------------------------------

    def files(self) -> list[str]:
        """The relative names :meth:`write` writes, in order."""
        names = [MARKDOWN, HTML]
        for b in self.blocks:
            if isinstance(b, Image):
                names.append(f"{b.name}.png")
                if b.svg is not None:
                    names.append(f"{b.name}.svg")
        names += list(self._attachments)
        return names

    def write(self, out: OutputDir) -> list[str]:
        """Write the report and its images; refuses (exit 2) before writing anything if a file
        in the way was not written by simkit.  Returns the names written."""
        if not self._has_cautions:
            self.cautions()
        names = self.files()
        out.check(names)
        for b in self.blocks:
            if isinstance(b, Image):
                out.write(f"{b.name}.png", b.png)
                if b.svg is not None:
                    out.write(f"{b.name}.svg", b.svg)
        for name, data in self._attachments.items():
            out.write(name, data)
        out.write(MARKDOWN, self.markdown())
        out.write(HTML, self.html())
        return names

    def markdown(self) -> str:
        """The report as GitHub-flavoured Markdown (images beside it)."""
        lines: list[str] = [f"# {_md_text(self.title)}", ""]
        if self.subtitle:
            lines += [_md_line(_md_text(self.subtitle)), ""]
        lines += [f"> **HIGH VOLTAGE.** {_md_text(_BANNER)}", ""]
        toc = self._toc()
        if toc:
            lines.append("Contents: " + " · ".join(f"[{_md_text(h.text)}](#{h.anchor})" for h in toc))
            lines.append("")
        for b in self.blocks:
            lines += _md_block(b)
            lines.append("")
        lines.append(f"---\nWritten by simkit {__version__}.")
        return "\n".join(lines) + "\n"

    def html(self) -> str:
        """The report as one HTML page with inline style and embedded pictures."""
        parts: list[str] = [
            "<!DOCTYPE html>",
            '<html lang="en">',
            "<head>",
            '<meta charset="utf-8">',
            '<meta name="viewport" content="width=device-width, initial-scale=1">',
            f"<title>{_h(self.title)}</title>",
            f"<style>{_CSS}</style>",
            "</head>",
            "<body>",
            "<main>",
            f"<h1>{_h(self.title)}</h1>",
        ]
        if self.subtitle:
            parts.append(f'<p class="subtitle">{_h(self.subtitle)}</p>')
        parts.append(f'<p class="note caution"><strong>HIGH VOLTAGE.</strong> {_h(_BANNER)}</p>')
        toc = self._toc()
        if toc:
            items = "".join(f'<li><a href="#{h.anchor}">{_h(h.text)}</a></li>' for h in toc)
            parts.append(f'<nav class="toc"><span>Contents</span><ol>{items}</ol></nav>')
        for b in self.blocks:
            parts.append(_html_block(b))
        parts += [f'<footer>Written by simkit {_h(__version__)}.</footer>', "</main>", "</body>", "</html>"]
        return "\n".join(parts) + "\n"

    # -- helpers ----------------------------------------------------------------------------

    def _anchor(self, text: str) -> str:
        base = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-") or "section"
        anchor = base
        k = 2
        while anchor in self._anchors:
            anchor = f"{base}-{k}"
            k += 1
        self._anchors.add(anchor)
        return anchor

    def _toc(self) -> list[Heading]:
        return [b for b in self.blocks if isinstance(b, Heading) and b.level == 2]


_BANNER = ("Lethal voltages and stored charge. This report is a simulation, not a safety check; "
           "read the cautions at the end before building, and follow your local electrical codes.")


# -- Markdown ------------------------------------------------------------------------------


def _md_text(text: str) -> str:
    """Plain text for Markdown: nothing in it can become markup.

    ``&`` ``<`` ``>`` become entities (no HTML, no autolinks); the characters that make emphasis,
    links, images, code, tables, headings and strike-through are escaped with a backslash; web
    and mail addresses cannot turn into links (GitHub's extended autolinks); line breaks become
    spaces (a new line could start a heading, a list, a fence or a table row).  Other punctuation
    stays as it is, so the file still reads well as text.
    """
    text = re.sub(r"[\r\n\v\f\x85\u2028\u2029]+", " ", text)
    text = re.sub(r"([\\`*_\[\]|#!~])", r"\\\1", text)
    text = text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    text = text.replace("://", ":\\/\\/").replace("@", "\\@")
    return re.sub(r"(?i)\b(www)\.", r"\1\\.", text)


def _md_line(text: str) -> str:
    """Markdown text that starts a line (a paragraph, a list item, a quoted note): besides the
    escapes already made, what would start a list, a quote, a thematic break, a heading underline
    or an indented code block at the start of a line is made plain."""
    text = text.lstrip(" \t")
    if re.match(r"[-+=]", text):
        return "\\" + text
    return re.sub(r"^([0-9]{1,9})([.)])", r"\1\\\2", text)


def _md_inline(text: str, markup: bool) -> str:
    if not markup:
        return _md_text(text)
    out = []
    for piece in _INLINE.split(text):
        if not piece:
            continue
        if piece.startswith("`") and piece.endswith("`"):
            out.append(piece.replace("|", "\\|"))
        elif piece.startswith("**") and piece.endswith("**"):
            out.append(f"**{_md_text(piece[2:-2])}**")
        else:
            out.append(_md_text(piece))
    return "".join(out)


def _md_block(b: Block) -> list[str]:
    if isinstance(b, Heading):
        return [f"{'#' * b.level} {_md_text(b.text)}"]
    if isinstance(b, Paragraph):
        return [_md_line(_md_inline(b.text, b.markup))]
    if isinstance(b, Bullets):
        return [f"- {_md_line(_md_inline(item, b.markup))}" for item in b.items]
    if isinstance(b, Note):
        body = _md_inline(b.text, True)
        return [f"> **Caution.** {body}" if b.kind == "caution" else f"> {_md_line(body)}"]
    if isinstance(b, Table):
        sep = {"l": ":---", "r": "---:", "c": ":---:"}
        lines = ["| " + " | ".join(_md_text(h) for h in b.headers) + " |",
                 "|" + "|".join(sep[a] for a in b.align) + "|"]
        for row in b.rows:
            lines.append("| " + " | ".join(_md_inline(c, b.markup) or " " for c in row) + " |")
        return lines
    if isinstance(b, Image):
        links = f"[PNG]({b.name}.png)" + (f" · [SVG for print]({b.name}.svg)" if b.svg is not None else "")
        return [f"![{_md_text(b.caption)}]({b.name}.png)", "",
                f"*Figure {b.number}: {_md_text(b.caption)}* ({links})"]
    if isinstance(b, Code):
        # The fence is longer than any run of backticks in the text, so no line of it can close the
        # block early (CommonMark: a closing fence is at least as long as the opening one).
        longest = max((len(run) for run in re.findall(r"`+", b.text)), default=0)
        fence = "`" * max(3, longest + 1)
        lang = re.sub(r"[^A-Za-z0-9_+-]", "", b.lang)
        return [f"{fence}{lang}", b.text, fence]
    raise TypeError(type(b).__name__)  # pragma: no cover


# -- HTML ----------------------------------------------------------------------------------


def _h(text: str) -> str:
    return html.escape(text, quote=True)


def _html_inline(text: str, markup: bool) -> str:
    if not markup:
        return _h(text)
    out = []
    for piece in _INLINE.split(text):
        if not piece:
            continue
        if piece.startswith("`") and piece.endswith("`"):
            out.append(f"<code>{_h(piece[1:-1])}</code>")
        elif piece.startswith("**") and piece.endswith("**"):
            out.append(f"<strong>{_h(piece[2:-2])}</strong>")
        else:
            out.append(_h(piece))
    return "".join(out)


def _keep(cell: str, align: str) -> str:
    """Short number cells keep number and unit on one line ("13.81 A" never breaks)."""
    return cell.replace(" ", "\u00a0") if align == "r" and len(cell) <= 16 else cell


def _html_block(b: Block) -> str:
    if isinstance(b, Heading):
        return f'<h{b.level} id="{b.anchor}">{_h(b.text)}</h{b.level}>'
    if isinstance(b, Paragraph):
        return f"<p>{_html_inline(b.text, b.markup)}</p>"
    if isinstance(b, Bullets):
        return "<ul>" + "".join(f"<li>{_html_inline(i, b.markup)}</li>" for i in b.items) + "</ul>"
    if isinstance(b, Note):
        lead = "<strong>Caution.</strong> " if b.kind == "caution" else ""
        return f'<p class="note {b.kind}">{lead}{_html_inline(b.text, True)}</p>'
    if isinstance(b, Table):
        cls = {"l": "", "r": ' class="num"', "c": ' class="mid"'}
        head = "".join(f"<th{cls[a]}>{_h(h)}</th>" for h, a in zip(b.headers, b.align, strict=True))
        body = "".join(
            "<tr>" + "".join(f"<td{cls[a]}>{_keep(_html_inline(c, b.markup), a)}</td>"
                             for c, a in zip(row, b.align, strict=True)) + "</tr>"
            for row in b.rows
        )
        return f'<div class="tablewrap"><table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>'
    if isinstance(b, Image):
        data = base64.b64encode(b.png).decode("ascii")
        links = f'<a href="{b.name}.png">PNG</a>'
        if b.svg is not None:
            links += f' · <a href="{b.name}.svg">SVG for print</a>'
        cls = ' class="wide"' if b.wide else ""
        return (f'<figure id="fig-{b.name}"{cls}><img src="data:image/png;base64,{data}" alt="{_h(b.caption)}" '
                f'data-file="{b.name}.png">'
                f"<figcaption>Figure {b.number}: {_h(b.caption)} <span class=\"files\">({links})</span>"
                "</figcaption></figure>")
    if isinstance(b, Code):
        cls = f' class="language-{_h(b.lang)}"' if b.lang else ""
        return f"<pre><code{cls}>{_h(b.text)}</code></pre>"
    raise TypeError(type(b).__name__)  # pragma: no cover


# Our own sober style: dark ink on white, one accent blue for links and rules, amber for
# cautions.  System fonts only (no network).
_CSS = """
:root { --ink: #1d232b; --muted: #5b6570; --rule: #c9d1da; --accent: #1f3b73; --warn: #8a4b00;
        --warnbg: #fff4e0; --band: #f3f5f8; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff;
       font: 16px/1.5 system-ui, -apple-system, "Segoe UI", "DejaVu Sans", sans-serif; }
main { max-width: 960px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 1.7em; line-height: 1.25; margin: 0.2em 0 0.3em; }
h2 { font-size: 1.3em; margin: 1.8em 0 0.5em; padding-bottom: 0.2em; border-bottom: 2px solid var(--accent); }
h3 { font-size: 1.1em; margin: 1.4em 0 0.4em; }
.subtitle { color: var(--muted); margin-top: 0; }
a { color: var(--accent); }
.note { padding: 0.6em 0.9em; border-left: 5px solid var(--accent); background: var(--band); }
.note.caution { border-left-color: var(--warn); background: var(--warnbg); }
.toc { font-size: 0.95em; margin: 1em 0; }
.toc span { font-weight: 600; }
.toc ol { margin: 0.2em 0 0; padding-left: 1.6em; columns: 2; }
.tablewrap { overflow-x: auto; margin: 0.6em 0 1em; }
table { border-collapse: collapse; font-size: 0.93em; }
th, td { padding: 0.3em 0.75em; border-bottom: 1px solid var(--rule); vertical-align: top; text-align: left; }
th { background: var(--band); border-bottom: 2px solid var(--rule); }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.mid, th.mid { text-align: center; }
tbody tr:nth-child(even) td { background: #fafbfc; }
code { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 0.92em; }
pre { background: var(--band); border: 1px solid var(--rule); padding: 0.8em; overflow-x: auto;
      font-size: 0.82em; line-height: 1.35; }
figure { margin: 1.2em 0 1.6em; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--rule); }
figure.wide img { width: min(1500px, 96vw); max-width: none; position: relative; left: 50%;
                  transform: translateX(-50%); }
figcaption { color: var(--muted); font-size: 0.92em; margin-top: 0.4em; }
footer { margin-top: 3em; color: var(--muted); font-size: 0.85em; border-top: 1px solid var(--rule);
         padding-top: 0.6em; }
@media print {
  main { max-width: none; padding: 0; }
  h2 { break-after: avoid; }
  figure, table { break-inside: avoid; }
  .files, .toc { display: none; }
  pre { white-space: pre-wrap; }
  figure.wide img { width: 100%; left: 0; transform: none; }
}
"""
