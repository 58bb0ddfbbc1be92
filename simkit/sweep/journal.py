"""The journal of a sweep or spread: what the run is, then one line per finished point.

``DIR/<kind>.journal`` is JSON lines.  The first line is the run's identity (the design file's
SHA-256, the ``--vary``/``--set`` options or the seed, simkit's version); every later line is one
finished point, appended and ``fsync``-ed before the next point is counted as done, so a power cut
loses at most the points in flight.  A line torn by a crash mid-write is cut off when the journal
is opened again.  The CSV and JSON results are always rebuilt from the journal.

One simkit at a time writes a journal: an exclusive lock on the file refuses a second one.
"""

from __future__ import annotations

import json
import os
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from simkit.errors import OutputError, UsageError
from simkit.report.outputs import keep_from_children, os_problem, read_regular, refuse_non_file, write_atomic

try:
    import fcntl
except ImportError:  # pragma: no cover - not on Windows
    fcntl = None  # type: ignore[assignment]

FORMAT = "simkit-journal-1"


@dataclass
class Opened:
    """A journal opened for appending, with what it already holds."""

    path: Path
    identity: dict[str, Any]
    entries: dict[int, dict[str, Any]] = field(default_factory=dict)  # point -> last entry
    resumed: bool = False
    repaired_bytes: int = 0  # bytes of a torn last line that were cut off
    _fh: Any = None

    def append(self, entry: dict[str, Any]) -> None:
        """Write one point and make it durable before returning."""
        line = json.dumps(entry, separators=(",", ":"), allow_nan=False) + "\n"
        self._fh.write(line.encode("utf-8"))
        self._fh.flush()
        os.fsync(self._fh.fileno())
        self.entries[int(entry["point"])] = entry

    def close(self) -> None:
        if self._fh is not None:
            keep_from_children(self._fh.fileno(), False)
            self._fh.close()
            self._fh = None


def describe_difference(old: dict[str, Any], new: dict[str, Any]) -> str:
    keys = [k for k in sorted(set(old) | set(new)) if old.get(k) != new.get(k)]
    names = {"design_sha256": "the design file's content", "simkit": "simkit's version", "vary": "the --vary options",
             "zip": "--zip", "set": "the --set options", "seed": "the seed", "runs": "the number of runs",
             "kind": "the kind of run", "check": "--check"}
    return ", ".join(names.get(k, k) for k in keys) or "nothing"


def open_journal(path: Path, identity: dict[str, Any], force: bool) -> Opened:
    """Open (resume) or start the journal at ``path``.

    A journal with the same identity is resumed.  One of another run, or a file that is not a
    simkit journal, is refused with exit 2 unless ``force``, which starts afresh.
    """
    path.parent.mkdir(parents=True, exist_ok=True)
    ident = {"format": FORMAT, **identity}
    if refuse_non_file(path) is not None:  # a link or special file is refused, --force included
        opened = _read(path)
        if opened is None:
            if not force:
                raise UsageError(f"{path}: exists and is not a simkit journal; choose another --out folder, "
                                 "move it away, or pass --force")
        elif opened.identity != ident:
            if not force:
                what = describe_difference(opened.identity, ident)
                raise UsageError(
                    f"{path.parent} holds the results of another {opened.identity.get('kind', 'run')} "
                    f"(different: {what}); choose another --out folder, or pass --force to replace them"
                )
        else:
            return _open_append(opened)
    return _start(path, ident)


def _read(path: Path) -> Opened | None:
    raw = read_regular(path, sys.maxsize) or b""
    end = raw.rfind(b"\n") + 1  # everything after the last newline is a torn line
    lines = raw[:end].splitlines()
    if not lines:
        return None
    try:
        ident = json.loads(lines[0])
    except ValueError:
        return None
    if not isinstance(ident, dict) or ident.get("format") != FORMAT:
        return None
    entries: dict[int, dict[str, Any]] = {}
    for line in lines[1:]:
        try:
            e = json.loads(line)
        except ValueError:  # cannot happen after fsync'd appends; never let it stop a resume
            continue
        if isinstance(e, dict) and isinstance(e.get("point"), int):
            entries[e["point"]] = e
    return Opened(path, ident, entries, resumed=True, repaired_bytes=len(raw) - end)


def _lock(fh: Any, path: Path) -> None:
    if fcntl is None:  # pragma: no cover
        return
    try:
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        fh.close()
        raise UsageError(f"{path}: another simkit is writing this folder right now; wait for it or choose "
                         "another --out folder") from None
    keep_from_children(fh.fileno())  # a forked worker must not hold the journal after the parent


def _open_append(opened: Opened) -> Opened:
    fh = _open_nofollow(opened.path, os.O_RDWR)  # kept open (and locked) for the whole run
    _lock(fh, opened.path)
    if opened.repaired_bytes:
        size = fh.seek(0, os.SEEK_END)
        fh.truncate(size - opened.repaired_bytes)
        fh.flush()
        os.fsync(fh.fileno())
    fh.seek(0, os.SEEK_END)
    opened._fh = fh
    return opened


def _start(path: Path, ident: dict[str, Any]) -> Opened:
    # A new file with just the header is renamed over whatever was there (never written through a
    # link), then opened for appending without following links.
    old = None
    if refuse_non_file(path) is not None:  # a journal being replaced must not be in use
        old = _open_nofollow(path, os.O_RDWR)
        _lock(old, path)
    try:
        write_atomic(path, json.dumps(ident, separators=(",", ":")) + "\n")
        fh = _open_nofollow(path, os.O_RDWR | os.O_APPEND)  # kept open (and locked) for the whole run
        _lock(fh, path)
    finally:
        if old is not None:
            keep_from_children(old.fileno(), False)
            old.close()
    fh.seek(0, os.SEEK_END)
    return Opened(path, ident, {}, resumed=False, _fh=fh)


def _open_nofollow(path: Path, flags: int) -> Any:
    try:
        fd = os.open(path, flags | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise OutputError(f"{path}: cannot open the journal: {os_problem(exc)}") from None
    return os.fdopen(fd, "r+b")
