"""The repository stands alone: everything a reader is pointed to is in it.

Checks, over every file git tracks (results/ left out: `simkit demo` writes it from the
package, whose own files are checked here):

- no file refers to the project's internal notes, which are not part of the repository
  (the note files on specifications, references, engine measurements and style);
- every link or path to a docs/ page, and every other repository path a file names, exists,
  and every anchor into a docs/ page is one the page defines;
- every source id (``rect-4``, ``safe-2``, ...) a file cites is an entry of docs/sources.md;
- no file cites a forum, blog, slide deck or aggregator page as a source, and every source
  of the built-in part library names a maker's sheet and says "read" or "from memory".

NOTE (issue 11): this module was committed while other parts of issue 11 were still open.
Until they are merged, the tests that scan the whole repository fail for files outside the
sources and docs work (tests/ citations, and modules being restructured); that failure is
intended, and each message lists the offending files and lines.
"""

from __future__ import annotations

import re
import subprocess
import unicodedata
from pathlib import Path

import pytest

from simkit.parts import catalogue, diodes, regulators, tubes

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"

#: The internal notes (references, engine measurements, style, specification), spelled in pieces so
#: that this file does not match itself.  The specification's name is also an ordinary word of the
#: command line (``--vary PATH=SPEC``), so only its file name and "... section N" count.
_NOTES = re.compile(
    r"\b" + "REFER" + r"ENCES\b"
    + r"|" + "ENGINE" + r"[-_ ]NOTES"
    + r"|\b" + "STY" + r"LE\.md\b"
    + r"|\b" + "SP" + r"EC(?:\.md\b|\s+(?:section|order)\b|\s*§)"
)

#: Forum, blog, slide and aggregator sources found cited in the past; none may come back.
BANNED_SOURCES = (
    "tubeofile", "monoandstereo", "social.076", "076.moe", "slideplayer", "ee-diary", "padho",
    "elreamanding", "scribd", "sdev.dk", "pe2bz", "philpem", "teck-bytes", "petra-toroid",
    "philmore", "test-and-measurement-world", "usermanual.wiki", "fdocuments", "datasheet.live",
    "datasheet.directory", "dtsheet", "pdf.support", "woaifanyi", "classcycles", "angui.org",
    "mail-archive", "cmph-safety", "voltagemultipliers.com", "safaribooksonline", "vias.org",
    "ece 442 slides",
)

#: Ids of docs/sources.md entries as code and tests cite them.
_SOURCE_ID = re.compile(r"\b(?:rect|filt|mult|diode|tube|reg|supply|safe|morse|num)-\d+\b")

#: A repository path named in a file: a top-level folder of ours, then a file name with an extension.
_REPO_PATH = re.compile(
    r"(?<![\w/.-])((?:docs|tests|simkit|bench|scripts|netlists)/[\w./-]*?\.(?:md|py|toml|sh|cir))"
    r"(#[\w-]+)?(?![\w/-])"
)

#: A relative Markdown link: [text](target) with no scheme.
_MD_LINK = re.compile(r"\]\((?![a-z]+:)([^)\s#]*)(#[^)\s]*)?\)")


def _tracked_files() -> list[Path]:
    """Every text file git tracks, except the generated results/ folder."""
    try:
        out = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True).stdout
    except (OSError, subprocess.CalledProcessError):
        pytest.fail("tests/test_standalone.py needs a git checkout (git ls-files) to know the repository's files")
    files = []
    for name in out.decode().split("\0"):
        if not name or name.startswith("results/"):
            continue
        path = ROOT / name
        if not path.is_file():
            continue  # deleted in the work tree, not yet committed
        data = path.read_bytes()
        if b"\0" in data:
            continue  # binary
        try:
            data.decode("utf-8")
        except UnicodeDecodeError:
            continue
        files.append(path)
    return files


def _lines(path: Path) -> list[tuple[int, str]]:
    return list(enumerate(path.read_text(encoding="utf-8").splitlines(), start=1))


def _slug(heading: str) -> str:
    """The anchor a Markdown renderer (GitHub style) gives a heading."""
    text = unicodedata.normalize("NFC", heading.strip().lower())
    text = "".join(ch for ch in text if ch.isalnum() or ch in " -_")
    return text.replace(" ", "-")


def _anchors(page: Path) -> set[str]:
    """Anchors a Markdown page defines: explicit ``<a id>`` tags and heading slugs."""
    text = page.read_text(encoding="utf-8")
    found = set(re.findall(r'<a id="([^"]+)"', text))
    seen: dict[str, int] = {}
    in_code = False
    for line in text.splitlines():
        if line.startswith("```"):
            in_code = not in_code
            continue
        m = re.match(r"#{1,6}\s+(.*)", line)
        if m and not in_code:
            slug = _slug(m.group(1))
            n = seen.get(slug, 0)
            found.add(slug if n == 0 else f"{slug}-{n}")
            seen[slug] = n + 1
    return found


def _report(problems: list[str]) -> str:
    return f"{len(problems)} problem(s):\n" + "\n".join(problems)


def test_no_file_refers_to_the_internal_notes() -> None:
    problems = [f"{path.relative_to(ROOT)}:{n}: {line.strip()[:120]}"
                for path in _tracked_files() for n, line in _lines(path) if _NOTES.search(line)]
    assert not problems, ("files refer to notes that are not in the repository; cite docs/sources.md, "
                          "docs/engine-notes.md, docs/reference.md or the primary source instead. "
                          + _report(problems))


def test_every_named_repository_path_and_docs_anchor_exists() -> None:
    problems: list[str] = []
    anchors: dict[Path, set[str]] = {}

    def check(where: str, target: Path, anchor: str | None) -> None:
        if not target.exists():
            problems.append(f"{where}: {target.relative_to(ROOT)} does not exist")
        elif anchor and target.suffix == ".md":
            known = anchors.setdefault(target, _anchors(target))
            if anchor.lstrip("#") not in known:
                problems.append(f"{where}: {target.relative_to(ROOT)} has no anchor {anchor}")

    for path in _tracked_files():
        rel = path.relative_to(ROOT)
        for n, line in _lines(path):
            where = f"{rel}:{n}"
            for m in _REPO_PATH.finditer(line):
                name = m.group(1).rstrip(".")
                if "*" in name or "<" in name:
                    continue
                check(where, ROOT / name, m.group(2))
            if path.suffix == ".md":
                for m in _MD_LINK.finditer(line):
                    target = (path.parent / m.group(1)).resolve() if m.group(1) else path
                    if ROOT not in target.parents and target != ROOT:
                        problems.append(f"{where}: link {m.group(1)} leaves the repository")
                        continue
                    check(where, target, m.group(2))
    assert not problems, _report(problems)


def test_cited_source_ids_are_entries_of_the_sources_page() -> None:
    page = DOCS / "sources.md"
    assert page.is_file(), "docs/sources.md is missing"
    known = set(re.findall(r'<a id="([^"]+)"', page.read_text(encoding="utf-8")))
    for entry in known:
        assert f"### {entry}: " in page.read_text(encoding="utf-8"), f"anchor {entry} has no heading"
    problems = [f"{path.relative_to(ROOT)}:{n}: {sid}"
                for path in _tracked_files() for n, line in _lines(path)
                for sid in _SOURCE_ID.findall(line) if sid not in known]
    assert not problems, "ids cited but not in docs/sources.md. " + _report(problems)


def test_no_file_cites_a_forum_blog_slide_or_aggregator_page() -> None:
    problems = [f"{path.relative_to(ROOT)}:{n}: {bad}"
                for path in _tracked_files() if path != Path(__file__).resolve()
                for n, line in _lines(path) for bad in BANNED_SOURCES if bad in line.lower()]
    assert not problems, "cite the maker's sheet, book or standard instead. " + _report(problems)


def _library_sources() -> list[tuple[str, str]]:
    parts = [(p.name, p.source) for p in diodes.DIODES.values()]
    parts += [(t.name, t.source) for t in tubes.TUBES.values()]
    parts += [(g.name, g.source) for g in regulators.GLOW.values()]
    parts += [(m.name, m.source) for m in regulators.MOSFETS.values()]
    return parts


@pytest.mark.parametrize("name,source", _library_sources(), ids=[n for n, _ in _library_sources()])
def test_every_library_part_names_a_primary_source(name: str, source: str) -> None:
    assert source.strip(), f"{name}: no source"
    low = source.lower()
    assert not [b for b in BANNED_SOURCES if b in low], f"{name}: forum or aggregator source: {source}"
    assert "http" not in low and "www." not in low, f"{name}: a web address instead of the maker's sheet: {source}"
    assert not re.search(r"\[[SVMD]\]", source), f"{name}: say 'read' or 'from memory', not a bracket tag"
    assert "(read)" in low or "read in" in low or "from memory" in low, \
        f"{name}: the source must say whether it was read or is from memory: {source}"


def test_library_entries_point_to_existing_sources_page_entries() -> None:
    known = _anchors(DOCS / "sources.md")
    ids = {p.sources_id for p in diodes.DIODES.values()} | {catalogue.TUBES_ID, catalogue.GLOW_ID, catalogue.MOSFETS_ID}
    assert ids <= known, f"missing entries in docs/sources.md: {sorted(ids - known)}"
    assert catalogue.SOURCES_PAGE == "docs/sources.md"
