"""Write result files without ever losing something the user made, and never through a link.

Every file simkit writes goes through :func:`write_atomic`: the bytes go to a new temporary file
beside the target, created with ``O_CREAT | O_EXCL | O_NOFOLLOW`` under a random name (so nothing
planted in the folder can be written through), flushed to the disk, then renamed over the target
(``os.replace`` replaces a directory entry and never follows a link).  A symbolic link, a folder
or a special file (FIFO, device) where a result should go is refused with exit 2 naming it,
``--force`` or not; a temporary is removed again when anything fails (a full disk, Ctrl-C).

A folder simkit writes into keeps a manifest (``.simkit-manifest.json``) of the files it wrote and
their SHA-256.  A file may be replaced only when simkit wrote it and nobody has changed it since
(or with ``--force``, which replaces regular files only); anything else in the way stops the
command with exit 2, before any file is written.

One command at a time writes into a folder: :class:`OutputDir` holds ``.simkit-lock`` in it (an
exclusive ``flock``) from the moment it is opened, which also proves the folder writable before
anything is simulated.  A second simkit gets exit 2 naming the holder's process id and command.
The kernel drops the lock of a process that dies, so a stale lock file is simply taken over; the
file is removed when the holder closes the folder.  The manifest is merged with the one on disk
each time it is saved, so entries of another command are never lost.
"""

from __future__ import annotations

import atexit
import errno
import hashlib
import json
import os
import secrets
import socket
import stat
import sys
import threading
from pathlib import Path
from typing import Any

from simkit.errors import OutputError, UsageError

try:
    import fcntl
except ImportError:  # pragma: no cover - not on Windows
    fcntl = None  # type: ignore[assignment]

MANIFEST = ".simkit-manifest.json"
LOCK = ".simkit-lock"
#: Every temporary simkit creates ends with this (NAME.RANDOM.tmp-simkit).
TMP_SUFFIX = ".tmp-simkit"
#: A manifest larger than this is not one of ours.
MAX_MANIFEST_BYTES = 16 * 1024 * 1024

_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_CLOEXEC = getattr(os, "O_CLOEXEC", 0)
_NONBLOCK = getattr(os, "O_NONBLOCK", 0)

#: What the lock file says about its holder (set by the command line: "simkit sweep").
_command = "simkit"


def set_command(text: str) -> None:
    """Name the running command in lock files (shown to a second writer)."""
    global _command
    _command = text


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def os_problem(exc: OSError) -> str:
    """An OSError as a few words for a one-line message ("No space left on device")."""
    return exc.strerror or type(exc).__name__


def _kind(mode: int) -> str:
    if stat.S_ISLNK(mode):
        return "a symbolic link"
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def refuse_non_file(path: Path) -> os.stat_result | None:
    """The lstat of ``path`` (None when it does not exist); exit 2 when it is anything but a
    regular file: simkit never writes through a link or over a folder or a special file."""
    try:
        st = os.lstat(path)
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise OutputError(f"{path}: cannot look at it: {os_problem(exc)}") from None
    if not stat.S_ISREG(st.st_mode):
        what = _kind(st.st_mode)
        raise OutputError(f"{path}: is {what}; simkit writes only regular files and never follows links "
                          "(--force included); remove it or choose another name")
    return st


def write_atomic(path: Path, data: bytes | str, exclusive: bool = False) -> None:
    """Write ``data`` to ``path`` through a new temporary in the same folder, then rename.

    Parameters
    ----------
    path : Path
        The target; a link, folder or special file there is refused (exit 2).
    data : bytes or str
        The content (str is written as UTF-8).
    exclusive : bool
        Never replace an existing file (``simkit new``): exit 2 when ``path`` exists.
    """
    raw = data.encode("utf-8") if isinstance(data, str) else data
    path = Path(path)
    st = refuse_non_file(path)
    if exclusive and st is not None:
        raise OutputError(f"{path}: exists; simkit never overwrites it")
    _place(_new_temporary(path), path, raw, exclusive)


def _place(tmp: Path, path: Path, raw: bytes, exclusive: bool) -> None:
    """Fill the temporary ``tmp``, then make it ``path`` (a new link when ``exclusive``, else a rename) and
    sync the folder; on any failure the temporary is removed."""
    try:
        _fill(tmp, raw)
        refuse_non_file(path)  # again: the folder may have changed while writing
        if exclusive:
            _link_new(tmp, path)
        else:
            os.replace(tmp, path)
    except OSError as exc:
        _remove(tmp)
        raise _write_error(path, exc) from None
    except BaseException:
        _remove(tmp)
        raise
    _sync_dir(path.parent)


def _new_temporary(path: Path) -> Path:
    """A new file beside ``path`` that nobody else can have prepared (random name, O_EXCL, no link)."""
    for _ in range(20):
        tmp = path.with_name(f"{path.name}.{secrets.token_hex(4)}{TMP_SUFFIX}")
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW | _CLOEXEC, 0o666)
        except FileExistsError:
            continue  # astronomically unlikely; a planted name is never written through
        except OSError as exc:
            raise _write_error(path, exc) from None
        os.close(fd)
        return tmp
    raise OutputError(f"{path.parent}: cannot create a temporary file there")  # pragma: no cover


def _fill(tmp: Path, raw: bytes) -> None:
    fd = os.open(tmp, os.O_WRONLY | os.O_TRUNC | _NOFOLLOW | _CLOEXEC)
    try:
        view = memoryview(raw)
        while view:
            n = os.write(fd, view)
            view = view[n:]
        os.fsync(fd)
    finally:
        os.close(fd)


def _link_new(tmp: Path, path: Path) -> None:
    """Put ``tmp`` at ``path`` only if nothing is there (a hard link fails on an existing name)."""
    try:
        os.link(tmp, path, follow_symlinks=False)
    except FileExistsError:
        raise OutputError(f"{path}: exists; simkit never overwrites it") from None
    except OSError as exc:
        if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EMLINK, errno.EXDEV):
            raise
        # A file system without hard links: check, then rename (a race here can only lose to a
        # file created in the last microseconds).
        if os.path.lexists(path):
            raise OutputError(f"{path}: exists; simkit never overwrites it") from None
        os.replace(tmp, path)
        return
    _remove(tmp)


def _remove(p: Path) -> None:
    try:
        os.unlink(p)
    except OSError:
        pass


def _write_error(path: Path, exc: OSError) -> OutputError:
    if isinstance(exc, FileNotFoundError) and not os.path.isdir(path.parent):
        return OutputError(f"{path}: the folder {path.parent} does not exist")
    if exc.errno == errno.ELOOP:
        return OutputError(f"{path}: is a symbolic link; simkit never writes through links")
    return OutputError(f"{path}: cannot write: {os_problem(exc)}")


def _sync_dir(folder: Path) -> None:
    """Make the new directory entry durable too (a renamed file can vanish in a power cut)."""
    try:
        fd = os.open(folder, os.O_RDONLY | _CLOEXEC)
    except OSError:  # pragma: no cover - e.g. Windows
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(fd)


def read_regular(path: Path, limit: int) -> bytes | None:
    """The bytes of a regular file simkit itself keeps (manifest, journal), never through a link,
    never blocking on a FIFO; None when it does not exist; exit 2 when it is something else."""
    try:
        fd = os.open(path, os.O_RDONLY | _NOFOLLOW | _NONBLOCK | _CLOEXEC)
    except FileNotFoundError:
        return None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise OutputError(f"{path}: is a symbolic link; simkit never follows links in its output "
                              "folders; remove it") from None
        raise OutputError(f"{path}: cannot read: {os_problem(exc)}") from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise OutputError(f"{path}: is {_kind(st.st_mode)}, not a file simkit wrote; remove it")
        if st.st_size > limit:
            raise OutputError(f"{path}: is larger than simkit writes ({st.st_size} bytes); move it away")
        chunks = []
        while True:
            block = os.read(fd, 1 << 20)
            if not block:
                break
            chunks.append(block)
            if sum(len(c) for c in chunks) > limit:
                raise OutputError(f"{path}: is larger than simkit writes; move it away")
        return b"".join(chunks)
    except OSError as exc:
        raise OutputError(f"{path}: cannot read: {os_problem(exc)}") from None
    finally:
        os.close(fd)


class PendingFile:
    """One file the user named (``netlist -o``, ``new``), checked and reserved before the work.

    Its temporary is created at once, so a read-only, missing or immutable folder stops the
    command (exit 2) before anything is simulated; :meth:`commit` writes and renames it into
    place, :meth:`discard` (or leaving a ``with`` block by an exception) removes it.
    """

    def __init__(self, path: str | Path, force: bool = False, exclusive: bool = False) -> None:
        self.path = Path(path)
        self.force = force
        self.exclusive = exclusive
        st = refuse_non_file(self.path)
        if st is not None:
            if exclusive:
                raise OutputError(f"{self.path}: exists; simkit new never overwrites a file")
            if not force:
                raise OutputError(f"{self.path}: exists; choose another name or pass --force")
        self._tmp: Path | None = _new_temporary(self.path)

    def commit(self, data: bytes | str) -> None:
        raw = data.encode("utf-8") if isinstance(data, str) else data
        tmp = self._tmp
        assert tmp is not None, "commit() once"
        self._tmp = None
        _place(tmp, self.path, raw, self.exclusive)

    def discard(self) -> None:
        if self._tmp is not None:
            _remove(self._tmp)
            self._tmp = None

    def __enter__(self) -> PendingFile:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.discard()


# --- one writer per folder ------------------------------------------------------------------------


class _FolderLock:
    """The flock on ``FOLDER/.simkit-lock``, shared by every OutputDir of this process on that folder."""

    def __init__(self, key: tuple[int, int], path: Path, fd: int) -> None:
        self.key = key
        self.path = path
        self.fd = fd
        self.users = 0


_HELD: dict[tuple[int, int], _FolderLock] = {}
_HELD_GUARD = threading.Lock()


#: Descriptors a forked child must not keep: the folder locks, and what other modules add
#: (a sweep's journal, see :func:`keep_from_children`).
_LOCK_FDS: set[int] = set()


def keep_from_children(fd: int, keep: bool = True) -> None:
    """Mark a descriptor whose lock a forked child (a sweep worker) must not hold, or unmark it."""
    if keep:
        _LOCK_FDS.add(fd)
    else:
        _LOCK_FDS.discard(fd)


def _detach_locks_in_child() -> None:
    """In a forked child: point the copies of the parent's locked descriptors at /dev/null.

    An flock belongs to the open file, which a fork shares: a worker keeping the copy would hold
    the parent's folder and journal after the parent died.  Giving the copy another file (dup2)
    drops the child's reference without releasing the parent's lock (flock(2): it goes when every
    descriptor of the open file is closed, or on LOCK_UN) and leaves any file object on it valid.
    """
    global _HELD_GUARD
    _HELD_GUARD = threading.Lock()  # the parent forks with no other thread, but never inherit a held one
    _HELD.clear()
    if not _LOCK_FDS:
        return
    null = os.open(os.devnull, os.O_RDWR | _CLOEXEC)
    try:
        for fd in _LOCK_FDS:
            try:
                os.dup2(null, fd, inheritable=False)
            except OSError:
                pass
    finally:
        os.close(null)
    _LOCK_FDS.clear()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_detach_locks_in_child)


def _lock_folder(folder: Path) -> _FolderLock | None:
    if fcntl is None:  # pragma: no cover
        return None
    try:
        st = os.stat(folder)
    except OSError as exc:
        raise OutputError(f"{folder}: cannot open the folder: {os_problem(exc)}") from None
    key = (st.st_dev, st.st_ino)
    with _HELD_GUARD:
        held = _HELD.get(key)
        if held is None:
            held = _take(folder, key)
            _HELD[key] = held
        held.users += 1
        return held


def _take(folder: Path, key: tuple[int, int]) -> _FolderLock:
    path = folder / LOCK
    for _ in range(10):
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT | _NOFOLLOW | _NONBLOCK | _CLOEXEC, 0o644)
        except OSError as exc:
            if exc.errno == errno.ELOOP:
                raise OutputError(f"{path}: is a symbolic link; remove it (simkit never follows links in its "
                                  "output folders)") from None
            raise OutputError(f"{folder}: cannot write into this folder: {os_problem(exc)}") from None
        try:
            mine = os.fstat(fd)
            if not stat.S_ISREG(mine.st_mode):
                raise OutputError(f"{path}: is {_kind(mine.st_mode)}, not simkit's lock file; remove it")
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                raise OutputError(f"{folder}: {_holder(fd)} is writing into this folder right now; wait for it "
                                  "to finish or choose another folder") from None
            try:
                now = os.lstat(path)
            except FileNotFoundError:
                now = None
            if now is None or (now.st_dev, now.st_ino) != (mine.st_dev, mine.st_ino):
                os.close(fd)  # the holder removed the file as we opened it: take the new one
                continue
            info = f"pid {os.getpid()}\nhost {socket.gethostname()}\ncommand {_command}\n".encode()
            try:
                os.ftruncate(fd, 0)
                os.pwrite(fd, info, 0)
            except OSError as exc:  # e.g. a full disk: better to know now than after the simulation
                os.close(fd)
                raise OutputError(f"{folder}: cannot write into this folder: {os_problem(exc)}") from None
            _register_exit()
            keep_from_children(fd)
            return _FolderLock(key, path, fd)
        except BaseException:
            try:
                os.close(fd)
            except OSError:
                pass
            raise
    raise OutputError(f"{folder}: the lock file keeps changing; is another simkit starting there?")


def _holder(fd: int) -> str:
    """Who holds the lock, from what it wrote into the file."""
    try:
        text = os.pread(fd, 4096, 0).decode("utf-8", "replace")
    except OSError:
        text = ""
    fields = dict(line.split(" ", 1) for line in text.splitlines() if " " in line)
    pid, cmd, host = fields.get("pid", "").strip(), fields.get("command", "").strip(), fields.get("host", "").strip()
    if not pid.isdigit():
        return "another simkit"
    where = f" on {host[:64]}" if host and host != socket.gethostname() else ""
    return f"another simkit (process {pid}{where}, `{cmd[:80] or 'simkit'}`)"


def _unlock(lock: _FolderLock) -> None:
    with _HELD_GUARD:
        lock.users -= 1
        if lock.users > 0:
            return
        _HELD.pop(lock.key, None)
        _release(lock)


def _release(lock: _FolderLock) -> None:
    # Remove the file while still holding the lock (a waiting opener then sees a new file), then close.
    try:
        now = os.lstat(lock.path)
        mine = os.fstat(lock.fd)
        if (now.st_dev, now.st_ino) == (mine.st_dev, mine.st_ino):
            os.unlink(lock.path)
    except OSError:
        pass
    keep_from_children(lock.fd, False)
    try:
        os.close(lock.fd)
    except OSError:
        pass


_EXIT_REGISTERED = False


def _register_exit() -> None:
    global _EXIT_REGISTERED
    if not _EXIT_REGISTERED:
        atexit.register(_release_all)
        _EXIT_REGISTERED = True


def _release_all() -> None:
    with _HELD_GUARD:
        for lock in list(_HELD.values()):
            _release(lock)
        _HELD.clear()


def held_locks() -> list[Path]:
    """The lock files this process holds (for tests)."""
    with _HELD_GUARD:
        return [lock.path for lock in _HELD.values()]


class OutputDir:
    """A folder simkit writes result files into: locked, guarded by its manifest.

    Opening it creates the folder (exit 2 when that, or writing there, is impossible) and takes
    the folder's lock; :meth:`close` (or the end of a ``with`` block, or of the process) releases
    it and removes folders it created that stayed empty.
    """

    def __init__(self, path: str | Path, force: bool = False) -> None:
        self.path = Path(path)
        self.force = force
        self._written: dict[str, str] = {}
        self._created: list[Path] = []
        self._lock: _FolderLock | None = None
        if os.path.lexists(self.path) and not self.path.is_dir():
            raise UsageError(f"{self.path}: exists and is not a folder")
        self._make_folder()
        self._lock = _lock_folder(self.path)
        try:
            self._manifest = self._read_manifest()
        except BaseException:
            self.close()
            raise

    def _make_folder(self) -> None:
        missing = []
        p = self.path
        while not os.path.isdir(p):
            if os.path.lexists(p):
                raise OutputError(f"{p}: exists and is not a folder")
            missing.append(p)
            if p.parent == p:
                break
            p = p.parent
        for folder in reversed(missing):
            try:
                os.mkdir(folder)
            except FileExistsError:
                if not os.path.isdir(folder):
                    raise OutputError(f"{folder}: exists and is not a folder") from None
                continue
            except OSError as exc:
                raise OutputError(f"{folder}: cannot create the folder: {os_problem(exc)}") from None
            self._created.append(folder)

    def _read_manifest(self) -> dict[str, str]:
        raw = read_regular(self.path / MANIFEST, MAX_MANIFEST_BYTES)
        if raw is None:
            return {}
        try:
            data = json.loads(raw.decode("utf-8"))
        except (ValueError, UnicodeDecodeError):
            return {}
        if not isinstance(data, dict):
            return {}
        return {k: v for k, v in data.items() if isinstance(k, str) and isinstance(v, str)}

    def subfolder(self, name: str) -> OutputDir:
        """A folder simkit makes inside this one (``demo``): never a link planted there."""
        _plain_name(name)
        p = self.path / name
        if os.path.islink(p):
            raise OutputError(f"{p}: is a symbolic link; simkit never writes through links (--force included); "
                              "remove it or choose another --out folder")
        return OutputDir(p, force=self.force)

    def check(self, names: list[str]) -> None:
        """Refuse (exit 2) if writing these relative names would replace a file simkit did not
        write, or one changed since simkit wrote it, or anything but a regular file."""
        blocked = []
        for name in names:
            _plain_name(name)
            p = self.path / name
            st = refuse_non_file(p)
            if st is None or self.force:
                continue
            known = self._manifest.get(name)
            if known is None or _digest(_read_file(p)) != known:
                blocked.append(str(p))
        if blocked:
            listing = "\n  ".join(blocked[:10])
            raise UsageError(
                "refusing to overwrite files simkit did not write (or that were changed since):\n  "
                f"{listing}\nchoose another --out folder, move them away, or pass --force"
            )

    def write(self, name: str, data: bytes | str) -> Path:
        """Write one file (atomically, never through a link) and record it in the manifest."""
        _plain_name(name)
        raw = data.encode("utf-8") if isinstance(data, str) else data
        p = self.path / name
        write_atomic(p, raw)
        digest = _digest(raw)
        self._manifest[name] = digest
        self._written[name] = digest
        self._save()
        return p

    def _save(self) -> None:
        # Merge with the manifest on disk: another command's entries are kept.
        try:
            merged = self._read_manifest()
        except OutputError:
            merged = {}
        merged.update(self._written)
        self._manifest.update(merged)
        data = json.dumps(dict(sorted(merged.items())), indent=1) + "\n"
        write_atomic(self.path / MANIFEST, data)

    def close(self) -> None:
        """Release the folder's lock; remove the folders this opened that are still empty."""
        lock, self._lock = self._lock, None
        if lock is not None:
            _unlock(lock)
        for folder in sorted(self._created, key=lambda p: len(p.parts), reverse=True):
            try:
                os.rmdir(folder)  # only when empty
            except OSError:
                break
        self._created = []

    def __enter__(self) -> OutputDir:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


def _plain_name(name: str) -> None:
    if not name or "/" in name or "\\" in name or name in (".", "..") or "\0" in name:
        raise ValueError(f"output name {name!r}: a plain file name")


def _read_file(p: Path) -> bytes:
    data = read_regular(p, sys.maxsize)
    return b"" if data is None else data
