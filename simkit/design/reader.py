"""Build a :class:`~simkit.design.model.Design` from a design file's dictionary: every section read by the
one generic reader (:mod:`simkit.design.vocab`) from the keys the model declares, the library parts
looked up, and the rules that join sections checked.

This module sits above the part library (it looks parts up by name); the model below it does not
know the library.  Every user mistake becomes one DesignError naming the file, the key (as
``--set`` spells it) and what was expected.
"""

from __future__ import annotations

import dataclasses
import difflib
from collections.abc import Mapping
from dataclasses import asdict, dataclass, replace
from pathlib import Path
from typing import Any

from simkit.design.devices import DiodeModel, GlowSpec, PartRating, PassDevice, read_inline_diode
from simkit.design.files import read_toml
from simkit.design.loads import LOAD_KINDS, Load, load_foreign
from simkit.design.model import (
    REGULATOR_KINDS,
    Bleeder,
    CheckPolicy,
    Design,
    FilterSection,
    Rectifier,
    Regulator,
    SimulationOptions,
    SpreadOptions,
    regulator_foreign,
)
from simkit.design.sources import SOURCE_KINDS, Battery, InverterSource, Source, source_foreign
from simkit.design.vocab import Reader, key, keys, read_kind, read_section, show
from simkit.errors import DesignError
from simkit.parts import diodes, regulators, tubes
from simkit.units import type_name

MAX_TITLE = 200


# --- the user's own parts file --------------------------------------------------------------


@dataclass(frozen=True)
class LibraryCapacitor:
    """``[capacitors.NAME]`` of a parts file."""

    # The ratings are bounded as a design's own (devices.PartRating): a rating of 0 rates nothing.
    v: float | None = key("v", "V", "rated voltage", None, above=0, maximum=1e6)
    ripple: float | None = key("ripple", "A", "ripple-current rating (RMS)", None, above=0, maximum=1e6)
    ripple_frequency: float | None = key("ripple_frequency", "Hz", "frequency of the ripple rating", None, above=0,
                                         maximum=1e6)
    esr: float | None = key("esr", "ohm", "ESR", None, minimum=0, maximum=1e6)


@dataclass(frozen=True)
class LibraryChoke:
    """``[chokes.NAME]`` of a parts file."""

    i: float | None = key("i", "A", "rated DC current", None, above=0, maximum=1e6)
    dcr: float | None = key("dcr", "ohm", "winding resistance", None, minimum=0, maximum=1e6)


@dataclass(frozen=True)
class LibraryResistor:
    """``[resistors.NAME]`` of a parts file."""

    w: float | None = key("w", "W", "power rating", None, above=0, maximum=1e6)


#: Sections of a user parts file (``library = "parts.toml"``) besides ``[diodes.NAME]``.
LIBRARY: dict[str, type] = {"capacitors": LibraryCapacitor, "chokes": LibraryChoke, "resistors": LibraryResistor}


def _load_library(rd: Reader, name: str) -> None:
    """Read the user's part library named by the design's ``library`` key."""
    if not name.strip():
        raise rd.fail("library", "expected the path of a TOML parts file")
    if not name.isprintable():
        raise rd.fail("library", "must be a file name on one line (no line breaks or control characters)")
    base = Path(rd.file).parent if rd.file and not rd.file.startswith("<") else Path(".")
    path = base / name
    try:
        data = read_toml(path)
    except DesignError as exc:
        raise rd.fail("library", f"the parts file {path}: {exc.problem}") from None
    lib_rd = Reader(str(path))
    lib_rd.check_keys(data, {"diodes": None, **dict.fromkeys(LIBRARY)}, "", required=False)
    for section, value in data.items():
        if not isinstance(value, dict) or not all(isinstance(v, dict) for v in value.values()):
            raise lib_rd.fail(section, f"expected [{section}.NAME] tables")
    rd.library = data
    rd.library_file = str(path)


def _library_part(rd: Reader, name: Any, path: str, section: str) -> tuple[PartRating, dict[str, float]]:
    """The rating a parts-file entry gives, and its esr or dcr."""
    if not isinstance(name, str) or name not in rd.library.get(section, {}):
        have = ", ".join(rd.library.get(section, {})) or "none"
        where = f"the library file {rd.library_file}" if rd.library_file else "no library file (set library = ...)"
        raise rd.fail(f"{path}.part", f"{show(name)} is not among the {section} of {where} (have: {have})")
    entry = read_section(Reader(rd.library_file), LIBRARY[section], rd.library[section][name], f"{section}.{name}")
    vals = {k: v for k, v in asdict(entry).items() if v is not None}
    extra = {k: v for k, v in vals.items() if k in ("esr", "dcr")}
    rating = PartRating(**{k: v for k, v in vals.items() if k not in ("esr", "dcr")},
                        source=f"{name} in {rd.library_file}")
    return rating, extra


# --- values the model names but the library holds ---------------------------------------------------


def _read_diode(rd: Reader, spec: Any, path: str, table: Mapping[str, Any] | None = None) -> DiodeModel:
    """``diode = "NAME"`` (parts file, then the built-in library) or an inline table."""
    if isinstance(spec, str) and spec in rd.library.get("diodes", {}):
        user = rd.library["diodes"][spec]
        outer = rd.file
        rd.file = rd.library_file
        try:
            model = _read_diode(rd, user if isinstance(user, dict) else None, f"diodes.{spec}")
        finally:
            rd.file = outer
        return replace(model, name=spec, source=f"library file {rd.library_file}")
    if isinstance(spec, str):
        part = diodes.lookup(spec)
        if part is not None:
            return part.model()
        tube = tubes.lookup(spec)
        if tube is not None:
            return tube.model()
        known = list(diodes.DIODES) + list(tubes.TUBES)
        near = difflib.get_close_matches(spec.strip().upper(), known, n=1, cutoff=0.5)
        names = {**{k: v.name for k, v in diodes.DIODES.items()}, **{k: v.name for k, v in tubes.TUBES.items()}}
        hint = f"; did you mean {names[near[0]]!r}?" if near else ""
        raise rd.fail(path, f"{show(spec)} is not in the part library (see `simkit parts`){hint}")
    if not isinstance(spec, dict):
        raise rd.fail(path, f'expected a part name such as "1N4007" or an inline table, got {show(spec)}')
    return read_inline_diode(rd, spec, path)


def _read_glow(rd: Reader, name: Any, path: str, table: Mapping[str, Any] | None = None) -> GlowSpec:
    """``tube = "OD3"``: a glow tube of the library (one; ``count`` says how many in series)."""
    if not isinstance(name, str):
        raise rd.fail(path, f"expected text in quotes, got {show(name)}")
    part = regulators.glow(name)
    if part is None:
        near = difflib.get_close_matches(name.upper(), list(regulators.GLOW), n=1, cutoff=0.4)
        hint = f"; did you mean {near[0]!r}?" if near else f"; the library has {', '.join(regulators.GLOW)}"
        raise rd.fail(path, f"{show(name)} is not a glow tube of the library{hint}")
    return part.spec()


def _read_mosfet(rd: Reader, raw: Any, path: str, table: Mapping[str, Any] | None = None) -> PassDevice:
    """``device = "IRF840"`` or ``device = { vto = ..., kp = ... }``."""
    if isinstance(raw, str):
        m = regulators.mosfet(raw)
        if m is None:
            raise rd.fail(path, f"{show(raw)} is not a MOSFET of the library ({', '.join(regulators.MOSFETS)}); "
                          'or give it inline: { vto = "3.5", kp = "2.5" }')
        return m.device()
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected a library name or {{ vto = "3.5", kp = "2.5" }}, got {show(raw)}')
    return read_section(rd, PassDevice, raw, path)


# --- sections ----------------------------------------------------------------------------------------


def _with_part(rd: Reader, obj: Any, t: Mapping[str, Any], path: str, section: str) -> Any:
    """A filter section or bleeder with its parts-file entry applied (its rating, and its esr or dcr)."""
    if obj.part is None:
        return obj
    rating, extra = _library_part(rd, obj.part, path, section)
    changes: dict[str, Any] = {"rating": rating}
    for k in ("esr", "dcr"):
        if k in extra and k not in t and hasattr(obj, k):
            changes[k] = extra[k]
    return replace(obj, **changes)


def _filters(rd: Reader, data: Mapping[str, Any]) -> tuple[FilterSection, ...]:
    if "filter" not in data:
        return ()
    raw = data["filter"]
    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list):
        raise rd.fail("filter", f"expected [[filter]] sections, got {type_name(raw)}")
    out: list[FilterSection] = []
    for i, sec in enumerate(raw):
        path = f"filter.{i}"
        if not isinstance(sec, dict):
            raise rd.fail(path, f"expected a [[filter]] table, got {type_name(sec)}")
        section = read_section(rd, FilterSection, sec, path)
        kind = section.kind
        out.append(_with_part(rd, section, sec, path, {"c": "capacitors", "l": "chokes", "r": "resistors"}[kind]))
    return tuple(out)


def _loads(rd: Reader, data: Mapping[str, Any], n_filters: int) -> tuple[Load, ...]:
    if "load" not in data:
        return ()
    raw = data["load"]
    if isinstance(raw, dict):
        return (_load(rd, raw, "load", n_filters, ""),)
    if not isinstance(raw, list):
        raise rd.fail("load", f"expected a [load] table or [[load]] tables, got {type_name(raw)}")
    out = []
    for k, t in enumerate(raw):
        if not isinstance(t, dict):
            raise rd.fail(f"load.{k}", f"expected a [[load]] table, got {type_name(t)}")
        out.append(_load(rd, t, f"load.{k}", n_filters, str(k + 1) if len(raw) > 1 else ""))
    return tuple(out)


def _load(rd: Reader, t: Mapping[str, Any], path: str, n_filters: int, suffix: str) -> Load:
    if "at" in t:
        if n_filters == 0:
            raise rd.fail(f"{path}.at", "there is no filter section to hang the load after")
        rd.integer(t, "at", path, default=0, minimum=0, maximum=n_filters - 1)
    ld = read_kind(rd, LOAD_KINDS, t, path, load_foreign, name=f"LOAD{suffix}")
    return replace(ld, warmup=ld.warmup or None)


def _section(rd: Reader, data: Mapping[str, Any], name: str, cls: type, default: Any) -> Any:
    t = rd.table(data, name, name, required=False)
    return default if t is None else read_section(rd, cls, t, name)


def _source(rd: Reader, data: Mapping[str, Any], topology: str) -> Source:
    t = rd.table(data, "source", "source", required=True)
    assert t is not None
    # The kind as the reader takes it ("Transformer" too): the topology goes to the kinds that have one.
    return read_kind(rd, SOURCE_KINDS, t, "source", source_foreign, default="sine", topology=topology)


def _regulator(rd: Reader, data: Mapping[str, Any]) -> Regulator | None:
    t = rd.table(data, "regulator", "regulator", required=False)
    if t is None:
        return None
    return read_kind(rd, REGULATOR_KINDS, t, "regulator", regulator_foreign)



def design_from_dict(data: Mapping[str, Any], origin: str = "<design>") -> Design:
    """Validate a design dictionary (as read from TOML) and build the :class:`Design`."""
    rd = Reader(origin)
    rd.readers.update({"diode": _read_diode, "glowtube": _read_glow, "mosfet": _read_mosfet})
    if not isinstance(data, Mapping):
        raise rd.fail("", "expected a TOML document")
    rd.check_keys(data, keys(Design), "")

    title = rd.text(data, "title", "", Path(origin).stem or "design")
    if "\n" in title or "\r" in title or any(ord(c) < 32 or ord(c) == 127 for c in title):
        raise rd.fail("title", "must be one line of text (no line breaks or control characters)")
    if len(title) > MAX_TITLE:
        raise rd.fail("title", f"is {len(title)} characters long; keep it under {MAX_TITLE}")
    note = rd.text(data, "note", "", "")
    example = rd.boolean(data, "example", "", False)
    library = rd.text(data, "library", "", "")
    if "library" in data:
        _load_library(rd, library)

    rt = rd.table(data, "rectifier", "rectifier", required=True)
    assert rt is not None
    rectifier = read_section(rd, Rectifier, rt, "rectifier")
    source = _source(rd, data, rectifier.topology)
    battery = _section(rd, data, "battery", Battery, None)
    if battery is not None and not isinstance(source, InverterSource):
        raise rd.fail("battery", 'a battery feeds an inverter: set [source] kind = "inverter"')
    filters = _filters(rd, data)
    loads = _loads(rd, data, len(filters))
    bt = rd.table(data, "bleeder", "bleeder", required=False)
    bleeder = None if bt is None else _with_part(rd, read_section(rd, Bleeder, bt, "bleeder"), bt, "bleeder",
                                                 "resistors")
    sim = _section(rd, data, "simulation", SimulationOptions, SimulationOptions())
    spread = _section(rd, data, "spread", SpreadOptions, SpreadOptions())
    checks = _section(rd, data, "checks", CheckPolicy, CheckPolicy())
    regulator = _regulator(rd, data)

    # Combinations that cannot be built.
    if rectifier.topology in ("half-wave", "centre-tap", "bridge") and not filters and not loads \
            and bleeder is None:
        raise rd.fail("filter", f"a {rectifier.topology} rectifier with no filter, no load and no bleeder has "
                      "nothing to feed; add a [[filter]] c = ... reservoir or a [load]")
    if filters and filters[-1].kind in ("l", "r") and not any(ld.at is None for ld in loads) and bleeder is None:
        n = len(filters) - 1
        what = "choke" if filters[-1].kind == "l" else "resistor"
        raise rd.fail(f"filter.{n}", f"the filter ends in a series {what} "
                      "with nothing after it; add a [load], a [bleeder] or a final c section")
    return Design(title=title, source=source, rectifier=rectifier, filters=filters, loads=loads, bleeder=bleeder,
                  battery=battery, simulation=sim, spread=spread, checks=checks, regulator=regulator, note=note,
                  example=example, library=library, origin=origin)


def design_to_inputs(design: Design) -> dict[str, Any]:
    """The resolved design as plain JSON-ready data (SI floats), for ``inputs`` in results.

    Every section as its fields (a tagged union with its ``kind``), the source with the equivalent
    winding the circuit uses (``winding``: EMF, resistance, inductance per winding).
    """
    out = _plain(design)
    assert isinstance(out, dict)
    out.pop("origin", None)
    src = design.source
    out["source"]["winding"] = {"vrms": src.vrms, "resistance": src.resistance, "inductance": src.inductance}
    return out


def _plain(obj: Any) -> Any:
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        d: dict[str, Any] = {}
        kind = getattr(type(obj), "kind", None)
        if isinstance(kind, str):
            d["kind"] = kind
        for f in dataclasses.fields(obj):
            k = f.metadata.get("key")
            d[k.name if k is not None else f.name.rstrip("_")] = _plain(getattr(obj, f.name))
        return d
    if isinstance(obj, tuple | list):
        return [_plain(x) for x in obj]
    return obj
