"""What the supply feeds: five kinds of ``[load]`` (a tagged union chosen by ``kind``), and their variants.

Every kind hangs at the output, or after filter section ``at``; may wait for its heaters
(``warmup``); may vary within a tolerance for ``simkit spread``.  A keyed load switches between
two states with a keying pattern (a rate and duty, or Morse text at a speed); a stepped load
follows a list of currents in time.  The lighter and heavier variants the checks simulate
(:func:`lighten`, :func:`heavy`) are made here, from what each kind can do.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

from simkit.design.morse import DOT_AT_1_WPM, keying_elements, morse_problem
from simkit.design.vocab import Reader, key, read_section, show
from simkit.units import UnitError, parse_value


@dataclass(frozen=True, kw_only=True)
class LoadBase:
    """What every kind of load has."""

    kind: ClassVar[str]
    tolerance: float | None = key("tolerance", "%", "tolerance of r or i, for `simkit spread`", None, shown="none")
    warmup: float | None = key("warmup", "s", "the load draws nothing until this time after switch-on (heaters "
                               "warming), then rises to full over a fifth of it", None, shown="0", minimum=0,
                               maximum=600)
    at: int | None = key("at", "int", "hang the load after filter section N (counted from 0) instead of at the "
                         "output", None, shown="the output", minimum=0)
    name: str = "LOAD"  # element name in the deck (LOAD, LOAD1, ...): set by the reader


@dataclass(frozen=True, kw_only=True)
class ResistorLoad(LoadBase):
    kind: ClassVar[str] = "resistor"
    r: float = key("r", "ohm", "load resistance", required=True, need='kind "resistor" needs r, e.g. r = "5k"',
                   above=0, maximum=1e12)


@dataclass(frozen=True, kw_only=True)
class CurrentLoad(LoadBase):
    """A constant current; it fades out below 5 V so an empty supply is not driven negative."""

    kind: ClassVar[str] = "current"
    i: float = key("i", "A", "load current; it fades out below 5 V so an empty supply is not driven negative",
                   required=True, need='kind "current" needs i, e.g. i = "100m"', above=0, maximum=1e3)


@dataclass(frozen=True)
class Point:
    """A tube's operating point: ``point = { v = "250", i = "60m" }``."""

    v: float = key("v", "V", "plate voltage at the operating point", required=True,
                   need="the plate voltage at the operating point", above=0, maximum=100e3)
    i: float = key("i", "A", "current at the operating point", required=True,
                   need="the current at the operating point", above=0, maximum=1e3)


def _read_point(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> Point:
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected a table {{ v = "250", i = "60m" }}, got {show(raw)}')
    return read_section(rd, Point, raw, path)


@dataclass(frozen=True, kw_only=True)
class TubeLoad(LoadBase):
    """A tube circuit through one operating point: i = P v^1.5 (Child-Langmuir) with P from the point."""

    kind: ClassVar[str] = "tube"
    point: Point = key("point", "table", 'one operating point { v = "250", i = "60m" }; the load follows '
                       "i = P v^1.5 through it", required=True,
                       need='kind "tube" needs its operating point, e.g. point = { v = "250", i = "60m" }',
                       reader=_read_point, of=(Point,))

    @property
    def tube_v(self) -> float:
        return self.point.v

    @property
    def tube_i(self) -> float:
        return self.point.i

    @property
    def perveance(self) -> float:
        """Child-Langmuir perveance of the load, A/V^1.5, from its operating point."""
        return self.point.i / self.point.v**1.5


@dataclass(frozen=True)
class KeyState:
    """What a keyed load draws in one key state: a current or a resistance."""

    i: float | None = key("i", "A", "current", None, minimum=0, maximum=1e3)
    r: float | None = key("r", "ohm", "resistance", None, above=0, maximum=1e12)


def _read_state(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> KeyState:
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected {{ i = "80m" }} or {{ r = "3k" }}, got {show(raw)}')
    rd.check_keys(raw, {"i": None, "r": None}, path, required=False)
    if len(raw) != 1:
        raise rd.fail(path, 'expected exactly one of i or r, e.g. { i = "80m" }')
    return read_section(rd, KeyState, raw, path)


@dataclass(frozen=True, kw_only=True)
class KeyedLoad(LoadBase):
    """A transmitter's load, switched by its key: at a rate and duty, or sending Morse text at a speed."""

    kind: ClassVar[str] = "keyed"
    down: KeyState = key("down", "table", 'key-down load, { i = "80m" } or { r = "3k" }', required=True,
                         need='kind "keyed" needs down = { i = "..." } or { r = "..." }', reader=_read_state,
                         of=(KeyState,))
    up: KeyState = key("up", "table", 'key-up load, { i = "5m" } or { r = "50k" }', required=True,
                       need='kind "keyed" needs up = { i = "..." } or { r = "..." }', reader=_read_state,
                       of=(KeyState,))
    rate: float | None = key("rate", "Hz", "keying rate (with duty)", None, above=0, maximum=1e3)
    duty: float | None = key("duty", "%", "key-down share of each keying cycle", None, shown="50%", percent_max=1.0)
    morse: str | None = key("morse", "str", "text sent in Morse code, repeated (instead of rate)", None)
    wpm: float | None = key("wpm", "", "Morse speed, words per minute (PARIS: a dot lasts 1.2/wpm s)", None,
                            above=0, maximum=100)
    rise: float = key("rise", "s", "time the load takes to rise at key-down", 5e-3, shown="5m", minimum=0,
                      maximum=10)
    fall: float = key("fall", "s", "time the load takes to fall at key-up", 5e-3, shown="5m", minimum=0, maximum=10)
    pushing: float | None = key("pushing_hz_per_v", "", "frequency pushing of an oscillator fed from this node, "
                                "Hz/V (gives chirp_hz)", None, minimum=-1e9, maximum=1e9)
    settle_band: float = key("settle_band", "%", "recovery_time_s: the output counts as recovered once its "
                             "one-period mean stays within this share of the key-down step", 0.02, shown="2%",
                             percent_max=0.5, label="settle band")

    @classmethod
    def refuse(cls, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if "morse" in t:
            if "rate" in t or "duty" in t:
                raise rd.fail(f"{path}.rate" if "rate" in t else f"{path}.duty",
                              "give rate and duty, or morse and wpm, not both")
            text = rd.text(t, "morse", path, "")
            problem = morse_problem(text)
            if problem:
                raise rd.fail(f"{path}.morse", problem)
            rd.need(t, "wpm", path, "the Morse speed in words per minute, e.g. wpm = 20")
        else:
            rd.refuse(t, ("wpm",), path, "wpm is the speed of morse text; without morse, give rate and duty")
            rd.need(t, "rate", path, "the keying rate in Hz (with duty), or morse text and wpm")

    def rules(self, rd: Reader, t: Mapping[str, Any], path: str) -> None:
        if self.settle_band <= 0:
            raise rd.fail(f"{path}.settle_band", "must be above 0%")
        if self.morse is not None:
            assert self.wpm is not None
            unit = DOT_AT_1_WPM / self.wpm
            if self.rise > unit / 2 or self.fall > unit / 2:
                raise rd.fail(f"{path}.rise", f"rise and fall must stay under half a dot ({unit / 2:.3g} s at "
                              f"{self.wpm:g} wpm)")
            return
        assert self.rate is not None
        duty = self.key_duty_share
        if not 0 < duty < 1:
            raise rd.fail(f"{path}.duty", f"must be between 0% and 100% (exclusive), got {duty * 100:g}%")
        if self.rise + self.fall > min(duty, 1 - duty) / self.rate:
            raise rd.fail(f"{path}.rise", "rise and fall are longer than the key-down or key-up time")

    @property
    def key_duty_share(self) -> float:
        """The duty as given (50 % by default), rate keying."""
        return 0.5 if self.duty is None else self.duty

    def elements(self) -> tuple[list[tuple[float, float]], float]:
        """Key-down spans of one keying cycle, s: ``([(start, length), ...], cycle)``."""
        if self.morse is not None:
            assert self.wpm is not None
            return keying_elements(self.morse, self.wpm)
        assert self.rate is not None
        cycle = 1.0 / self.rate
        return [(0.0, self.key_duty_share * cycle)], cycle

    def duty_share(self) -> float:
        """Share of time key-down, rise and fall counted half (the duty-weighted mean load): each element
        ramps up over ``rise`` from its start and down over ``fall`` after its end."""
        elements, cycle = self.elements()
        rise, fall = max(self.rise, 1e-6), max(self.fall, 1e-6)
        return sum(length - rise / 2 + fall / 2 for _, length in elements) / cycle


def _read_steps(rd: Reader, raw: Any, path: str,
                table: Mapping[str, Any] | None = None) -> tuple[tuple[float, float], ...]:
    if not isinstance(raw, list) or not raw:
        raise rd.fail(path, 'expected a list of [time, current] pairs, e.g. [[0, "10m"], ["30", "90m"]]')
    out: list[tuple[float, float]] = []
    for k, pair in enumerate(raw):
        if isinstance(pair, dict):
            rd.check_keys(pair, {"t": None, "i": None}, f"{path}.{k}", required=False)
            if set(pair) != {"t", "i"}:
                raise rd.fail(f"{path}.{k}", "expected { t = ..., i = ... }")
            pair = [pair["t"], pair["i"]]
        if not isinstance(pair, list) or len(pair) != 2:
            raise rd.fail(f"{path}.{k}", f'expected [time, current], e.g. ["30", "90m"], got {show(pair)}')
        try:
            tk = parse_value(pair[0], "s")
            ik = parse_value(pair[1], "A")
        except UnitError as exc:
            raise rd.fail(f"{path}.{k}", str(exc)) from None
        if tk < 0 or tk > 3600 or ik < 0 or ik > 1e3:
            raise rd.fail(f"{path}.{k}", "time must be 0..3600 s and current 0..1000 A")
        if out and tk <= out[-1][0]:
            raise rd.fail(f"{path}.{k}", "times must increase")
        out.append((tk, ik))
    return tuple(out)


@dataclass(frozen=True, kw_only=True)
class StepsLoad(LoadBase):
    """An amplifier stepping between idle and full power: a current that follows a list in time."""

    kind: ClassVar[str] = "steps"
    steps: tuple[tuple[float, float], ...] = key(
        "steps", "list", '[[time, current], ...] from switch-on, e.g. [[0, "10m"], ["30", "90m"]]', required=True,
        need='kind "steps" needs steps = [[time, current], ...], e.g. [[0, "10m"], ["30", "90m"]]',
        reader=_read_steps)


Load = ResistorLoad | CurrentLoad | TubeLoad | KeyedLoad | StepsLoad
LOAD_KINDS: tuple[type, ...] = (ResistorLoad, CurrentLoad, TubeLoad, KeyedLoad, StepsLoad)


def load_foreign(name: str, chosen: type, owner: type | None) -> str:
    """The message for a key of another kind of load."""
    other = owner.kind if owner is not None else "another kind"  # type: ignore[attr-defined]
    return f'belongs to kind "{other}", not "{chosen.kind}"'  # type: ignore[attr-defined]


# --- variants the checks simulate -------------------------------------------------------------------


def fixed(ld: LoadBase, state: KeyState) -> Load:
    """One key state of a keyed load as a fixed load (resistor or current), with the same placement."""
    common = {"tolerance": ld.tolerance, "warmup": ld.warmup, "at": ld.at, "name": ld.name}
    if state.r is not None:
        return ResistorLoad(r=state.r, **common)
    return CurrentLoad(i=state.i or 0.0, **common)


def lighten(ld: Load) -> Load:
    """The lightest the load gets: a keyed load key-up, a stepped load at its lightest step."""
    if isinstance(ld, KeyedLoad):
        return fixed(ld, ld.up)
    if isinstance(ld, StepsLoad):
        common = {"tolerance": ld.tolerance, "warmup": ld.warmup, "at": ld.at, "name": ld.name}
        return CurrentLoad(i=min(i for _, i in ld.steps) or 1e-9, **common)
    return ld


def heavy(ld: Load) -> Load:
    """The heaviest the load gets: a keyed load key-down, a stepped load at its heaviest step."""
    if isinstance(ld, KeyedLoad):
        return fixed(ld, ld.down)
    if isinstance(ld, StepsLoad):
        common = {"tolerance": ld.tolerance, "warmup": ld.warmup, "at": ld.at, "name": ld.name}
        return CurrentLoad(i=max(i for _, i in ld.steps), **common)
    return ld


def varies(ld: Load) -> bool:
    """Does the load have lighter and heavier states (so light and heavy corners differ)?"""
    return isinstance(ld, KeyedLoad | StepsLoad)

