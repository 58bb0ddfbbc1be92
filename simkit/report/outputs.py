"""Write result files without ever losing something the user made.

A folder simkit writes into keeps a manifest (``.simkit-manifest.json``) of the files it
wrote and their SHA-256.  A file may be replaced only when simkit wrote it and nobody has
changed it since; anything else in the way stops the command with exit 2, before any file
is written.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

from simkit.errors import UsageError

MANIFEST = ".simkit-manifest.json"


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


class OutputDir:
    """A folder simkit writes result files into, guarded by its manifest."""

    def __init__(self, path: str | Path, force: bool = False) -> None:
        self.path = Path(path)
        self.force = force
        self._manifest: dict[str, str] = {}
        mf = self.path / MANIFEST
        if mf.exists():
            try:
                self._manifest = dict(json.loads(mf.read_text("utf-8")))
            except (ValueError, OSError):
                self._manifest = {}
        if self.path.exists() and not self.path.is_dir():
            raise UsageError(f"{self.path}: exists and is not a folder")

    def check(self, names: list[str]) -> None:
        """Refuse (exit 2) if writing these relative names would replace a file simkit did not
        write, or one changed since simkit wrote it."""
        if self.force:
            return
        blocked = []
        for name in names:
            p = self.path / name
            if not p.exists():
                continue
            known = self._manifest.get(name)
            if known is None or not p.is_file() or _digest(p.read_bytes()) != known:
                blocked.append(str(p))
        if blocked:
            listing = "\n  ".join(blocked[:10])
            raise UsageError(
                "refusing to overwrite files simkit did not write (or that were changed since):\n  "
                f"{listing}\nchoose another --out folder, move them away, or pass --force"
            )

    def write(self, name: str, data: bytes | str) -> Path:
        raw = data.encode("utf-8") if isinstance(data, str) else data
        p = self.path / name
        p.parent.mkdir(parents=True, exist_ok=True)
        tmp = p.with_name(p.name + ".tmp-simkit")
        tmp.write_bytes(raw)
        os.replace(tmp, p)
        self._manifest[name] = _digest(raw)
        self._save()
        return p

    def _save(self) -> None:
        self.path.mkdir(parents=True, exist_ok=True)
        data = json.dumps(dict(sorted(self._manifest.items())), indent=1) + "\n"
        tmp = self.path / (MANIFEST + ".tmp")
        tmp.write_text(data, "utf-8")
        os.replace(tmp, self.path / MANIFEST)
