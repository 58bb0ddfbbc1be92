"""Reading design and parts files, and editing their dictionary with ``--set`` (no design knowledge here).

A design file is read only when it is a regular file of at most :data:`MAX_DESIGN_BYTES`; its
TOML may nest at most :data:`MAX_DEPTH` levels.  Every failure becomes one
:class:`~simkit.errors.DesignError` naming the file.
"""

from __future__ import annotations

import copy
import os
import stat
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from simkit.errors import DesignError

#: Design and parts files larger than this are refused (a design is a few kilobytes).
MAX_DESIGN_BYTES = 1_000_000
#: Tables and lists nested deeper than this are not a design (the deepest real one has 4 levels).
MAX_DEPTH = 32


def read_toml(path: str | Path) -> dict[str, Any]:
    """Read a TOML file into a dictionary, turning every failure into a DesignError."""
    return parse_toml_text(read_design_text(path), str(path))


def read_design_text(path: str | Path) -> str:
    """The text of a design (or parts) file, read safely (see :func:`read_design_bytes`)."""
    name = str(path)
    raw = read_design_bytes(path)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise DesignError(f"not UTF-8 text (bad byte on line {line})", file=name) from None
    # Some editors start UTF-8 files with a byte-order mark; TOML itself does not allow one.
    return text.removeprefix("\ufeff")


def read_design_bytes(path: str | Path) -> bytes:
    """The bytes of a design (or parts) file, read safely.

    Only a regular file of at most :data:`MAX_DESIGN_BYTES` is read: a FIFO, a device such as
    ``/dev/zero`` or a folder is refused before anything is read (the file is opened without
    blocking, then looked at), so nothing can hang simkit or fill its memory.
    """
    name = str(path)
    if not name:
        raise DesignError("the path is empty; give the name of a TOML design file", file="''")
    if not name.isprintable():
        raise DesignError("the file name holds a line break or control character; rename the file", file=name)
    try:
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise DesignError("no such file", file=name) from None
    except IsADirectoryError:
        raise DesignError("is a folder, expected a TOML design file", file=name) from None
    except OSError as exc:
        raise DesignError(f"cannot read the file: {exc.strerror or exc}", file=name) from None
    try:
        st = os.fstat(fd)
        if stat.S_ISDIR(st.st_mode):
            raise DesignError("is a folder, expected a TOML design file", file=name)
        if not stat.S_ISREG(st.st_mode):
            what = "a FIFO (named pipe)" if stat.S_ISFIFO(st.st_mode) else \
                "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else "not a regular file"
            raise DesignError(f"is {what}; a design file must be a regular file", file=name)
        if st.st_size > MAX_DESIGN_BYTES:
            raise DesignError(f"is {st.st_size} bytes; a design file may hold at most {MAX_DESIGN_BYTES} bytes",
                              file=name)
        chunks: list[bytes] = []
        size = 0
        while size <= MAX_DESIGN_BYTES:
            block = os.read(fd, 65536)
            if not block:
                break
            chunks.append(block)
            size += len(block)
        if size > MAX_DESIGN_BYTES:  # it grew while being read
            raise DesignError(f"holds more than {MAX_DESIGN_BYTES} bytes, more than a design file may", file=name)
        return b"".join(chunks)
    except OSError as exc:
        raise DesignError(f"cannot read the file: {exc.strerror or exc}", file=name) from None
    finally:
        os.close(fd)


def parse_toml_text(text: str, name: str = "<design>") -> dict[str, Any]:
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"TOML syntax error: {exc}", file=name) from None
    except RecursionError:  # tomllib recurses once per level of nested arrays or tables
        raise DesignError("TOML nested too deeply to be a design file", file=name) from None
    except ValueError as exc:  # e.g. a whole number of thousands of digits (Python's conversion limit)
        what = "a whole number has too many digits" if "digits" in str(exc) else "a value cannot be read"
        raise DesignError(f"TOML value out of range: {what}", file=name) from None
    if _depth(doc) > MAX_DEPTH:
        raise DesignError(f"TOML nested too deeply to be a design file (more than {MAX_DEPTH} levels of tables "
                          "or lists)", file=name)
    return doc


def _depth(value: Any) -> int:
    """How deeply tables and lists nest (without recursion: the input may be hostile)."""
    deepest = 0
    stack = [(value, 1)]
    while stack:
        node, level = stack.pop()
        deepest = max(deepest, level)
        if level > MAX_DEPTH:
            break
        children = node.values() if isinstance(node, dict) else node if isinstance(node, list) else ()
        stack.extend((child, level + 1) for child in children if isinstance(child, (dict, list)))
    return deepest


def apply_overrides(data: dict[str, Any], overrides: Sequence[str], file: str) -> dict[str, Any]:
    """Return a copy of ``data`` with each ``PATH=VALUE`` override applied.

    PATH is dotted (``filter.0.c``); list positions count from 0.  VALUE is read as a TOML
    value when it is one (``3``, ``true``, ``"x"``), else as a plain string (``220u``).
    """
    out = copy.deepcopy(data)
    if overrides and isinstance(out.get("filter"), dict):
        out["filter"] = [out["filter"]]  # a lone [filter] table counts as one section, as in _filters
    for item in overrides:
        if "=" not in item:
            raise DesignError(f"--set {item!r}: expected PATH=VALUE, e.g. filter.0.c=220u", file=file)
        path, _, text = item.partition("=")
        path = path.strip()
        value = override_value(text.strip())
        parts = path.split(".")
        if not path or any(not p for p in parts):
            raise DesignError(f"--set {item!r}: empty part in the path", file=file)
        if len(parts) > MAX_DEPTH:
            raise DesignError(f"--set {path}: a path of {len(parts)} parts is deeper than any design key", file=file)
        _set_path(out, parts, value, file, path)
    if overrides and _depth(out) > MAX_DEPTH:
        raise DesignError(f"--set: the value nests tables or lists more than {MAX_DEPTH} levels deep", file=file)
    return out


def override_value(text: str) -> Any:
    """A ``--set`` value: TOML when it is one valid TOML value, else the text itself."""
    try:
        doc = tomllib.loads(f"v = {text}")
    except (ValueError, RecursionError):  # not TOML (or a number of thousands of digits): plain text
        return text
    # "250\nx = 1" parses as two keys; taking v alone would silently drop the rest.
    return doc["v"] if list(doc) == ["v"] else text


def _set_path(root: Any, parts: list[str], value: Any, file: str, path: str) -> None:
    node = root
    for i, part in enumerate(parts):
        last = i == len(parts) - 1
        where = ".".join(parts[: i + 1])
        if isinstance(node, list):
            if not part.isdigit():
                raise DesignError(f"--set {path}: {where!r} needs a list position (0, 1, ...)", file=file)
            idx = int(part)
            if idx >= len(node):
                raise DesignError(
                    f"--set {path}: position {idx} is past the end (the file has {len(node)})",
                    file=file,
                )
            if last:
                node[idx] = value
            else:
                node = node[idx]
        elif isinstance(node, dict):
            if part.isdigit():
                parent = repr(".".join(parts[:i])) if i else "the top level"
                raise DesignError(f"--set {path}: {parent} is a table, not a list; it has no position {part}",
                                  file=file)
            if last:
                node[part] = value
            else:
                if part not in node:
                    if parts[i + 1].isdigit():
                        raise DesignError(
                            f"--set {path}: position {parts[i + 1]} is past the end (the file has no {where!r} "
                            "sections)",
                            file=file,
                        )
                    node[part] = {}
                node = node[part]
        else:
            raise DesignError(f"--set {path}: {'.'.join(parts[:i])!r} holds a value, not a table", file=file)
