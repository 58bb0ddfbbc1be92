"""Run SPICE decks in ngspice's shared library through PySpice; the only module importing PySpice.

One engine per process (threads sharing a libngspice crash, ENGINE-NOTES).  After every
run the circuit and its plots are removed so hundreds of runs do not grow the process.
ngspice's own messages are captured and handed back with any failure.
"""

from __future__ import annotations

import logging
import os
import re
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from simkit.errors import EngineMissingError, SimulationError

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
)


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

    def vdiff(self, a: str, b: str) -> np.ndarray:
        return self.v(a) - self.v(b)


class Engine:
    """A libngspice instance: load a deck, run it, copy the vectors out, clean up."""

    def __init__(self) -> None:
        logging.getLogger("PySpice").setLevel(logging.CRITICAL)
        _prefer_versioned_library()
        try:
            from PySpice.Spice.NgSpice.Shared import NgSpiceShared
        except Exception as exc:  # pragma: no cover - depends on the installation
            raise EngineMissingError(
                f"PySpice could not be imported ({exc})",
                hint="run `make setup`, or pip install PySpice",
            ) from None
        try:
            self._ng = NgSpiceShared.new_instance()
        except (OSError, Exception) as exc:  # cffi raises OSError when the library is missing
            raise EngineMissingError(
                f"the ngspice shared library could not be loaded ({exc})",
                hint="install ngspice and libngspice (Debian/Ubuntu: apt-get install ngspice "
                "libngspice0 libngspice0-dev), or set NGSPICE_LIBRARY_PATH to libngspice's path",
            ) from None
        self._lib = self._ng._ngspice_shared
        self.runs = 0

    def _command(self, text: str) -> int:
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
        """
        ng = self._ng
        ng.clear_output()
        self.runs += 1
        try:
            try:
                ng.load_circuit(deck)
            except Exception:
                raise SimulationError("ngspice could not read the deck", deck=deck,
                                      log=self._messages()) from None
            rc = self._command("run")
            log = self._messages()
            bad = [p.pattern for p in _FATAL_PATTERNS if p.search(log)]
            names = ng.plot_names
            plot = names[0] if names else ""
            if rc != 0 or not plot.startswith("tran"):
                raise SimulationError("ngspice did not complete the transient run", deck=deck, log=log)
            data = self._copy_vectors(plot, save)
            t = data.pop("time", None)
            if t is None or len(t) < 2:
                raise SimulationError("ngspice returned no time points", deck=deck, log=log)
            if t[-1] < tstop * (1 - 1e-5) or bad:
                reached = float(t[-1])
                raise SimulationError(
                    f"the transient run stopped at {reached:.6g} s of {tstop:.6g} s", deck=deck, log=log
                )
            return Waveforms(time=t, vectors=data, log=log)
        finally:
            self._cleanup()

    def _copy_vectors(self, plot: str, save: Iterable[str] | None) -> dict[str, np.ndarray]:
        from PySpice.Spice.NgSpice.Shared import ffi

        lib = self._lib
        wanted = None if save is None else {s.lower() for s in save} | {"time"}
        out: dict[str, np.ndarray] = {}
        all_vecs = lib.ngSpice_AllVecs(plot.encode("utf8"))
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

    def _cleanup(self) -> None:
        # Order matters: breakpoints survive remcirc unless deleted first (ENGINE-NOTES trap 6).
        self._command("delete all")
        self._command("destroy all")
        self._command("remcirc")
        if self.runs % 50 == 0:
            from PySpice.Spice.NgSpice.Shared import ffi

            self._lib.ngSpice_Command(ffi.NULL)  # free ngspice's command history


def _prefer_versioned_library() -> None:
    """Debian ships the unversioned libngspice.so only in -dev; fall back to .so.0."""
    if os.environ.get("NGSPICE_LIBRARY_PATH"):
        return
    import ctypes.util

    if ctypes.util.find_library("ngspice"):
        for d in ("/usr/lib/x86_64-linux-gnu", "/usr/lib/aarch64-linux-gnu", "/usr/lib", "/usr/lib64",
                  "/usr/local/lib"):
            if os.path.exists(os.path.join(d, "libngspice.so")):
                return
        for d in ("/usr/lib/x86_64-linux-gnu", "/usr/lib/aarch64-linux-gnu", "/usr/lib", "/usr/lib64"):
            cand = os.path.join(d, "libngspice.so.0")
            if os.path.exists(cand):
                os.environ["NGSPICE_LIBRARY_PATH"] = cand
                return


_ENGINE: Engine | None = None


def get_engine() -> Engine:
    """The process's engine, created on first use."""
    global _ENGINE
    if _ENGINE is None:
        _ENGINE = Engine()
    return _ENGINE
