"""Run SPICE decks in ngspice's shared library through PySpice; the only module importing PySpice.

One engine per process, used by one thread at a time: threads sharing a libngspice crash it, so
every call into ngspice holds a process-wide lock (a second thread waits for the first).  After
every run its plots are removed, and its circuit too unless the next run is the same circuit from
other initial conditions (then ngspice keeps it and the engine alters it: :meth:`Engine._run`), so
hundreds of runs do not grow the process.

Failures are read from ngspice's state, never from text that came from the design: the deck must
load, the run must create a new transient plot whose time reaches the stop time, and ngspice must
not have written an error line to its error stream (lines that merely repeat a line of the deck,
such as the title, do not count).  ngspice's own messages are handed back with any failure.

ngspice sources a start-up file ``.spiceinit`` from the current folder (or, when there is none,
from the home folder of the user in the password database) when the library is initialised, and
such a file can run shell commands.  The engine initialises ngspice inside a private, empty folder
of its own that holds an empty ``.spiceinit``, so neither the folder simkit was started from nor
the user's home folder can run anything; the installation's own ``spinit`` (code models) is read
as usual.

A long transient run goes to ngspice's background thread while the calling thread waits: Ctrl-C
then reaches Python at once, the run is halted (``bg_halt``) and cleaned up, and KeyboardInterrupt
goes on to the caller.  A short one (``SHORT_RUN_POINTS``) runs on the calling thread with Ctrl-C
held back until it returns, a fraction of a second.  ngspice's initialisation installs its own
SIGINT handler; the engine puts the previous one back.
"""

from __future__ import annotations

import contextlib
import ctypes
import logging
import os
import re
import shutil
import signal
import tempfile
import threading
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from simkit.errors import EngineMissingError, SimulationError

#: ngspice messages (on its error stream) that mean the run cannot be trusted.
_FATAL_PATTERNS = (
    re.compile(r"timestep too small", re.I),
    re.compile(r"singular matrix", re.I),
    re.compile(r"simulation\(s\) aborted", re.I),
    re.compile(r"circuit not parsed", re.I),
    re.compile(r"no such vector", re.I),
    re.compile(r"unknown (model|subckt|parameter)", re.I),
    re.compile(r"error on line", re.I),
    re.compile(r"could not find a valid modelname", re.I),
    re.compile(r"too few nodes", re.I),
    re.compile(r"doAnalyses:", re.I),
    re.compile(r"^\s*error\b", re.I),
)

#: A run expected to take fewer time points than this (about a tenth of a second) runs on the calling
#: thread with Ctrl-C held back until it returns; longer runs go to ngspice's background thread.
#: Handing a run to that thread costs about 0.3 ms, a tenth of a one-period span.
SHORT_RUN_POINTS = 20000

_TRAN = re.compile(r"^\.tran\s+(\S+)\s+(\S+)\s+(\S+)\s+(\S+)", re.I | re.M)
#: A capacitor or inductor line with its initial condition (as :mod:`simkit.netlist.circuit` writes it).
_STATE_IC = re.compile(r"^([CL]\S*)(\s.*?)\sIC=(\S+)(.*)$", re.I)

#: Seconds to wait for ngspice's background thread to report that it started.
_START_TIMEOUT = 30.0

#: Process-wide: one thread at a time inside ngspice (re-entrant for the engine's own nesting).
_LOCK = threading.RLock()


@dataclass
class Waveforms:
    """Vectors of one transient run, copied out of ngspice (names lower-case, as ngspice gives)."""

    time: np.ndarray  # s
    vectors: dict[str, np.ndarray] = field(default_factory=dict)
    log: str = ""

    def v(self, node: str) -> np.ndarray:
        """Node voltage to ground, V (node ``0`` gives zeros)."""
        node = node.lower()
        if node in ("0", "gnd"):
            return np.zeros_like(self.time)
        try:
            return self.vectors[node]
        except KeyError:
            raise KeyError(f"no node {node!r}; have {sorted(self.vectors)}") from None

    def i(self, source: str) -> np.ndarray:
        """Branch current of a voltage source or inductor, A (SPICE sign)."""
        name = f"{source.lower()}#branch"
        try:
            return self.vectors[name]
        except KeyError:
            raise KeyError(f"no branch {name!r}; have {sorted(self.vectors)}") from None


class Engine:
    """A libngspice instance: load a deck, run it, copy the vectors out, clean up.

    Every method holds the process-wide engine lock, so threads take turns.
    """

    def __init__(self) -> None:
        logging.getLogger("PySpice").setLevel(logging.CRITICAL)
        _prefer_versioned_library()
        try:
            from PySpice.Spice.NgSpice.Shared import NgSpiceShared, ffi
        except Exception as exc:  # pragma: no cover - depends on the installation
            raise EngineMissingError(
                f"PySpice could not be imported ({exc})",
                hint="run `make setup`, or pip install PySpice",
            ) from None
        self._ffi = ffi
        with _LOCK:
            try:
                with _sigint_held(), _sigint_kept(), _private_startup_folder():
                    self._ng = _shared_class(NgSpiceShared, ffi).new_instance()
            except (OSError, Exception) as exc:  # cffi raises OSError when the library is missing
                raise EngineMissingError(
                    f"the ngspice shared library could not be loaded ({exc})",
                    hint="install ngspice and libngspice (Debian/Ubuntu: apt-get install ngspice "
                    "libngspice0 libngspice0-dev), or set NGSPICE_LIBRARY_PATH to libngspice's path",
                ) from None
        self._lib = self._ng._ngspice_shared
        self.runs = 0
        self.reused = 0  # runs that altered the loaded circuit instead of loading a deck
        self.reuse = True  # False: load every deck afresh (the tests compare the two ways)
        #: The circuit ngspice holds between runs: its deck with every initial condition left out, and
        #: those initial conditions as written (see :meth:`_run`).
        self._loaded: tuple[str, dict[str, str]] | None = None

    def _command(self, text: str) -> int:
        with _sigint_held():
            return int(self._lib.ngSpice_Command(text.encode("ascii")))

    def _messages(self) -> str:
        return "\n".join([*self._ng._stdout, *self._ng._stderr])

    def run(self, deck: str, tstop: float, save: Iterable[str] | None = None) -> Waveforms:
        """Run a transient deck and return its vectors.

        Parameters
        ----------
        deck : str
            The complete deck (title line first, ``.end`` last).
        tstop : float
            The deck's stop time, s; a run that ends early is a failure.
        save : iterable of str, optional
            Vector names to copy out (default: all).

        Raises
        ------
        SimulationError
            When ngspice could not read the deck or complete the run.
        KeyboardInterrupt
            Ctrl-C during the run: ngspice is halted and cleaned up first.
        """
        with _LOCK:
            return self._run(deck, tstop, save)

    def _run(self, deck: str, tstop: float, save: Iterable[str] | None) -> Waveforms:
        """Load the deck (or alter the circuit already loaded, see below), run it, copy the vectors out.

        Consecutive spans of one analysis differ only in where they start: the initial conditions of
        the capacitors and inductors (and the step of the ``.tran``).  When a short run's deck is the
        loaded circuit's in every other line, the circuit stays loaded: ``alter NAME ic=VALUE`` sets the
        initial conditions that changed (the same text the deck holds, so the same numbers) and a
        ``tran`` command runs it, saving ngspice the parse and set-up of the deck (a tenth of a
        one-period span).  Any other deck, a long run or a failure loads afresh.
        """
        ng = self._ng
        ng.clear_output()
        self.runs += 1
        short = _expected_points(deck) <= SHORT_RUN_POINTS
        shape, ics, tran = _deck_shape(deck) if short and self.reuse else ("", {}, None)
        kept = False
        try:
            before = set(ng.plot_names)
            if tran is not None and self._alter(shape, ics):
                command = f"tran {tran}"
            else:
                self._release()
                if self._load(deck) != 0:
                    raise SimulationError("ngspice could not read the deck", deck=deck, log=self._messages())
                if tran is not None:
                    self._loaded = (shape, ics)
                command = "run"
            if short:
                with _sigint_held():
                    rc = self._command(command)
            else:
                rc = self._run_in_background()
            log = self._messages()
            errors = error_lines(ng._stderr, deck)
            names = ng.plot_names
            plot = names[0] if names else ""
            if rc != 0 or not plot.startswith("tran") or plot in before:
                raise SimulationError("ngspice did not complete the transient run", deck=deck, log=log)
            data = self._copy_vectors(plot, save)
            t = data.pop("time", None)
            if t is None or len(t) < 2 or not np.all(np.isfinite(t)):
                raise SimulationError("ngspice returned no time points", deck=deck, log=log)
            if t[-1] < tstop * (1 - 1e-5) or errors:
                reached = float(t[-1])
                raise SimulationError(
                    f"the transient run stopped at {reached:.6g} s of {tstop:.6g} s", deck=deck, log=log
                )
            kept = self._loaded is not None
            return Waveforms(time=t, vectors=data, log=log)
        finally:
            self._cleanup(keep_circuit=kept)

    def _alter(self, shape: str, ics: dict[str, str]) -> bool:
        """Make the loaded circuit the deck of ``shape`` with initial conditions ``ics``; False when it is
        another circuit (or ngspice objected), and the deck must be loaded."""
        if self._loaded is None or self._loaded[0] != shape:
            return False
        held = self._loaded[1]
        errors = len(self._ng._stderr)
        for name, value in ics.items():
            if held.get(name) != value:
                if self._command(f"alter {name} ic={value}") != 0 or len(self._ng._stderr) != errors:
                    return False
                held[name] = value
        self.reused += 1
        return True

    def _release(self) -> None:
        """Remove the circuit kept loaded between runs, if any."""
        if self._loaded is not None:
            self._loaded = None
            self._command("remcirc")  # _command holds Ctrl-C back itself

    def _load(self, deck: str) -> int:
        """Hand the deck to ngspice line by line (PySpice's own loader calls any output holding the
        word "error" a failure, and ngspice echoes the title: so it is not used)."""
        ffi = self._ffi
        lines = [line for line in deck.splitlines() if line] + [""]  # ngspice wants an empty last line
        keep = [ffi.new("char[]", line.encode("utf-8")) for line in lines]
        array = ffi.new("char *[]", [*keep, ffi.NULL])
        with _sigint_held():
            return int(self._lib.ngSpice_Circ(array))

    def _run_in_background(self) -> int:
        """``bg_run`` and wait in Python, so that Ctrl-C is seen at once; halt ngspice on any exception."""
        ng = self._ng
        ng.simkit_started.clear()
        ng.simkit_done.clear()
        rc = self._command("bg_run")
        if rc != 0:
            return rc
        try:
            waited = 0.0
            while not ng.simkit_done.wait(0.25):
                waited += 0.25
                if waited > _START_TIMEOUT and not ng.simkit_started.is_set():
                    raise SimulationError("ngspice's simulation thread did not start")
        except BaseException:
            self._command("bg_halt")
            raise
        # The thread has finished; bg_halt joins it (ngspice keeps it until asked).
        self._command("bg_halt")
        return 0

    def _copy_vectors(self, plot: str, save: Iterable[str] | None) -> dict[str, np.ndarray]:
        ffi = self._ffi
        lib = self._lib
        wanted = None if save is None else {s.lower() for s in save} | {"time"}
        out: dict[str, np.ndarray] = {}
        all_vecs = lib.ngSpice_AllVecs(plot.encode("utf8"))
        if all_vecs == ffi.NULL:
            return out
        i = 0
        while all_vecs[i] != ffi.NULL:
            name = ffi.string(all_vecs[i]).decode("utf8", "replace")
            i += 1
            if wanted is not None and name.lower() not in wanted:
                continue
            info = lib.ngGet_Vec_Info(f"{plot}.{name}".encode())
            if info == ffi.NULL or info.v_realdata == ffi.NULL:
                continue
            n = int(info.v_length)
            arr = np.frombuffer(ffi.buffer(info.v_realdata, n * 8), dtype=np.float64).copy()
            out[name.lower()] = arr
        return out

    def _cleanup(self, keep_circuit: bool = False) -> None:
        # Order matters: breakpoints survive remcirc unless deleted first (docs/engine-notes.md#cleanup).
        with _sigint_held():
            self._command("delete all")
            self._command("destroy all")
            if not keep_circuit:
                self._loaded = None
                self._command("remcirc")
            if self.runs % 50 == 0:
                self._lib.ngSpice_Command(self._ffi.NULL)  # free ngspice's command history


def _expected_points(deck: str) -> float:
    """Time points the deck's ``.tran`` line asks for at most (stop time over the maximum step)."""
    from simkit.units import UnitError, parse_value

    m = _TRAN.search(deck)
    if m is None:
        return float("inf")
    try:
        tstop, tmax = parse_value(m.group(2), "s"), parse_value(m.group(4), "s")
    except UnitError:
        return float("inf")
    return tstop / tmax if tmax > 0 else float("inf")


def _deck_shape(deck: str) -> tuple[str, dict[str, str], str | None]:
    """A deck without its initial conditions and its ``.tran`` line; the initial conditions of its
    capacitors and inductors (name: the value as written); the ``.tran`` line's arguments (None: none, or
    a deck whose circuit the engine does not keep: one with subcircuits or files of its own, where a
    name may not be the top-level element's or a file may change between runs)."""
    lines = []
    ics: dict[str, str] = {}
    tran = None
    for line in deck.splitlines():
        if line[:1] == "." and line.split(None, 1)[0].lower() in (".subckt", ".include", ".inc", ".lib"):
            return deck, {}, None
        if line[:1] in "CcLl":
            m = _STATE_IC.match(line)
            if m is not None:
                ics[m.group(1).lower()] = m.group(3)
                line = m.group(1) + m.group(2) + m.group(4)
        elif line[:5].lower() == ".tran":
            tran = line[5:].strip()
            continue
        lines.append(line)
    return "\n".join(lines), ics, tran


def error_lines(stderr: Iterable[str], deck: str) -> list[str]:
    """The lines of ngspice's error stream that report a failure, leaving out echoes of the deck.

    ngspice repeats deck lines in its messages (the title, a line it could not read); those are
    the user's text, not ngspice's verdict, so a line that is (a piece of) a deck line does not
    count, whatever words it holds.

    >>> error_lines(["* error amplifier", "Error: circuit not parsed."], "* Error amplifier\\nR1 a 0 1k\\n")
    ['Error: circuit not parsed.']
    """
    deck_lines: list[str] | None = None
    found = []
    for line in stderr:
        text = line.strip()
        if not text or not any(p.search(text) for p in _FATAL_PATTERNS):
            continue
        if deck_lines is None:
            deck_lines = [d for d in (_squash(line) for line in deck.splitlines()) if d]
        squashed = _squash(text)
        if any(squashed in d for d in deck_lines):
            continue  # an echo of the deck
        found.append(text)
    return found


def _squash(text: str) -> str:
    """Lower case without white space: ngspice re-spaces and lower-cases the lines it echoes."""
    return re.sub(r"\s+", "", text).lower()


def _shared_class(base: Any, ffi: Any) -> Any:
    """PySpice's NgSpiceShared with a background-thread callback that tells the engine when a
    ``bg_run`` starts and ends (PySpice's own returns nothing, which cffi reports as an error)."""

    class _Shared(base):  # type: ignore[misc, valid-type]
        def __init__(self, *args: Any, **kwargs: Any) -> None:
            self.simkit_started = threading.Event()
            self.simkit_done = threading.Event()
            super().__init__(*args, **kwargs)

        @staticmethod
        def _background_thread_running(exited: bool, ngspice_id: int, user_data: Any) -> int:
            self = ffi.from_handle(user_data)
            (self.simkit_done if exited else self.simkit_started).set()
            return 0

    return _Shared


@contextlib.contextmanager
def _private_startup_folder() -> Iterator[None]:
    """Work in a new private folder holding an empty ``.spiceinit`` while ngspice initialises.

    ngspice's shared library sources ``./.spiceinit``, or else ``~/.spiceinit`` from the password
    database (not $HOME), when it is initialised: an empty one in the current folder shadows both.
    """
    folder = tempfile.mkdtemp(prefix="simkit-ngspice-")
    back: int | None = None
    cwd: str | None = None
    try:
        with open(os.path.join(folder, ".spiceinit"), "x", encoding="ascii"):
            pass
        try:
            back = os.open(".", os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        except OSError:  # a current folder we may not read: remember its name instead
            with contextlib.suppress(OSError):
                cwd = os.getcwd()
        os.chdir(folder)
        try:
            yield
        finally:
            if back is not None:
                os.fchdir(back)
            elif cwd is not None:
                os.chdir(cwd)
    finally:
        if back is not None:
            os.close(back)
        shutil.rmtree(folder, ignore_errors=True)


@contextlib.contextmanager
def _sigint_kept() -> Iterator[None]:
    """Put back the SIGINT handler that ngspice's initialisation replaces with its own (which
    would swallow Ctrl-C for the rest of the process)."""
    saved = None
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        buf = ctypes.create_string_buffer(512)  # larger than any platform's struct sigaction
        if libc.sigaction(signal.SIGINT, None, buf) == 0:
            saved = (libc, buf)
    except (OSError, AttributeError):  # pragma: no cover - no C library to ask
        saved = None
    python_handler = signal.getsignal(signal.SIGINT)
    try:
        yield
    finally:
        if saved is not None:
            libc, buf = saved
            libc.sigaction(signal.SIGINT, buf, None)
        elif threading.current_thread() is threading.main_thread() and python_handler is not None:
            signal.signal(signal.SIGINT, python_handler)  # pragma: no cover


@contextlib.contextmanager
def _sigint_held() -> Iterator[None]:
    """Hold Ctrl-C back while ngspice runs Python callbacks on this thread: an interrupt raised
    inside a callback is lost (cffi can only print it).  It is delivered when the call returns."""
    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _prefer_versioned_library() -> None:
    """Debian ships the unversioned libngspice.so only in -dev; fall back to .so.0.

    Only the usual folders are looked at (``ctypes.util.find_library`` would run ``ldconfig -p``, a
    few milliseconds of every worker's start); anywhere else PySpice's own ``dlopen`` finds the
    unversioned library, or NGSPICE_LIBRARY_PATH names it.
    """
    if os.environ.get("NGSPICE_LIBRARY_PATH"):
        return
    folders = ("/usr/lib/x86_64-linux-gnu", "/usr/lib/aarch64-linux-gnu", "/usr/lib", "/usr/lib64", "/usr/local/lib")
    for d in folders:
        if os.path.exists(os.path.join(d, "libngspice.so")):
            return
    for d in folders:
        cand = os.path.join(d, "libngspice.so.0")
        if os.path.exists(cand):
            os.environ["NGSPICE_LIBRARY_PATH"] = cand
            return


_ENGINE: Engine | None = None


def get_engine() -> Engine:
    """The process's engine, created on first use (by one thread only)."""
    global _ENGINE
    with _LOCK:
        if _ENGINE is None:
            _ENGINE = Engine()
        return _ENGINE
