"""Read a TOML design file, apply --set overrides, validate, and build a :class:`Design`.

Every user mistake becomes one :class:`~simkit.errors.DesignError` naming the file, the
key (as a dotted path, the same spelling ``--set`` uses) and what was expected.
"""

from __future__ import annotations

import copy
import difflib
import math
import sys
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from simkit.design import schema
from simkit.design.model import (
    TOPOLOGIES,
    Bleeder,
    Design,
    DiodeModel,
    DiodeRatings,
    FilterSection,
    Load,
    Rectifier,
    SimulationOptions,
    Source,
    SpreadOptions,
)
from simkit.errors import DesignError
from simkit.parts import diodes
from simkit.units import UnitError, parse_percent, parse_value

MAX_TITLE = 200


# --- entry points ----------------------------------------------------------------------


def load_design(path: str | Path, overrides: Sequence[str] = ()) -> Design:
    """Load and validate a design file.

    Parameters
    ----------
    path : str or Path
        The TOML design file.
    overrides : sequence of str
        ``PATH=VALUE`` strings as given to ``--set``.
    """
    data = read_toml(path)
    data = apply_overrides(data, overrides, str(path))
    return design_from_dict(data, origin=str(path))


def read_toml(path: str | Path) -> dict[str, Any]:
    """Read a TOML file into a dictionary, turning every failure into a DesignError."""
    p = Path(path)
    name = str(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise DesignError("no such file", file=name) from None
    except IsADirectoryError:
        raise DesignError("is a folder, expected a TOML design file", file=name) from None
    except OSError as exc:
        raise DesignError(f"cannot read the file: {exc.strerror}", file=name) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise DesignError(f"not UTF-8 text (bad byte on line {line})", file=name) from None
    # Some editors start UTF-8 files with a byte-order mark; TOML itself does not allow one.
    return parse_toml_text(text.removeprefix("\ufeff"), name)


def parse_toml_text(text: str, name: str = "<design>") -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"TOML syntax error: {exc}", file=name) from None
    except RecursionError:  # tomllib recurses once per level of nested arrays or tables
        raise DesignError("TOML nested too deeply to be a design file", file=name) from None


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
        value = _override_value(text.strip())
        parts = path.split(".")
        if not path or any(not p for p in parts):
            raise DesignError(f"--set {item!r}: empty part in the path", file=file)
        _set_path(out, parts, value, file, path)
    return out


def _override_value(text: str) -> Any:
    try:
        doc = tomllib.loads(f"v = {text}")
    except tomllib.TOMLDecodeError:
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


# --- validation ------------------------------------------------------------------------


class _Reader:
    """Helpers that read one key and say precisely what is wrong with it."""

    def __init__(self, file: str) -> None:
        self.file = file

    def fail(self, key: str, problem: str) -> DesignError:
        return DesignError(problem, file=self.file, key=key or None)

    def table(self, parent: Mapping[str, Any], key: str, path: str, required: bool) -> dict[str, Any] | None:
        if key not in parent:
            if required:
                raise self.fail(path, f"missing section [{path}]")
            return None
        value = parent[key]
        if not isinstance(value, dict):
            raise self.fail(path, f"expected a table [{path}], got {_kind(value)}")
        return value

    def check_keys(self, table: Mapping[str, Any], allowed: Mapping[str, schema.Key], path: str) -> None:
        for key in table:
            if key not in allowed:
                shown = key if key.isprintable() else repr(key)  # a quoted TOML key may hold anything
                full = f"{path}.{shown}" if path else shown
                near = difflib.get_close_matches(key, list(allowed), n=1, cutoff=0.6)
                hint = f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(allowed)}"
                raise self.fail(full, f"unknown key{hint}")
        for key, spec in allowed.items():
            if spec.required and key not in table:
                full = f"{path}.{key}" if path else key
                what = f"section [{full}]" if spec.unit == "table" else "key"
                raise self.fail(full, f"missing {what} ({spec.doc})")

    def value(
        self,
        table: Mapping[str, Any],
        key: str,
        path: str,
        unit: str,
        *,
        default: float | None = None,
        minimum: float | None = None,
        above: float | None = None,
        maximum: float | None = None,
        what: str = "",
    ) -> float | None:
        full = f"{path}.{key}" if path else key
        if key not in table:
            return default
        try:
            v = parse_value(table[key], unit)
        except UnitError as exc:
            raise self.fail(full, str(exc)) from None
        if above is not None and not v > above:
            word = "positive" if above == 0 else f"above {above:g}"
            raise self.fail(full, f"must be {word}{what}, got {v:g}")
        if minimum is not None and v < minimum:
            word = "zero or more" if minimum == 0 else f"at least {minimum:g}"
            raise self.fail(full, f"must be {word}{what}, got {v:g}")
        if maximum is not None and v > maximum:
            raise self.fail(full, f"must be at most {maximum:g}{what}, got {v:g}")
        return v

    def percent(self, table: Mapping[str, Any], key: str, path: str, maximum: float = 0.5) -> float | None:
        """A tolerance such as "10%" as a fraction in [0, maximum)."""
        full = f"{path}.{key}" if path else key
        if key not in table:
            return None
        try:
            v = parse_percent(table[key])
        except UnitError as exc:
            raise self.fail(full, str(exc)) from None
        if not 0 <= v < maximum:
            raise self.fail(full, f"must be between 0% and {maximum * 100:g}%, got {v * 100:g}%")
        return v

    def integer(self, table: Mapping[str, Any], key: str, path: str, default: int, minimum: int,
                maximum: int) -> int:
        full = f"{path}.{key}" if path else key
        if key not in table:
            return default
        v = table[key]
        if isinstance(v, bool) or not isinstance(v, int):
            if isinstance(v, float) and v.is_integer():
                v = int(v)
            elif isinstance(v, str) and v.strip().isdigit():
                v = int(v.strip())
            else:
                raise self.fail(full, f"expected a whole number, got {_show(v)}")
        if v < minimum or v > maximum:
            raise self.fail(full, f"must be between {minimum} and {maximum}, got {v}")
        return int(v)

    def choice(self, table: Mapping[str, Any], key: str, path: str, choices: Sequence[str],
               default: str | None = None) -> str:
        full = f"{path}.{key}" if path else key
        if key not in table:
            if default is None:
                raise self.fail(full, f"missing key; one of {_list(choices)}")
            return default
        v = table[key]
        if not isinstance(v, str):
            raise self.fail(full, f"expected one of {_list(choices)}, got {_show(v)}")
        norm = v.strip().lower().replace("_", "-")
        aliases = {"center-tap": "centre-tap", "halfwave": "half-wave", "full-wave-bridge": "bridge"}
        norm = aliases.get(norm, norm)
        if norm not in choices:
            near = difflib.get_close_matches(norm, list(choices), n=1, cutoff=0.5)
            hint = f"; did you mean {near[0]!r}?" if near else ""
            raise self.fail(full, f"{_show(v)} is not one of {_list(choices)}{hint}")
        return norm

    def text(self, table: Mapping[str, Any], key: str, path: str, default: str) -> str:
        full = f"{path}.{key}" if path else key
        if key not in table:
            return default
        v = table[key]
        if not isinstance(v, str):
            raise self.fail(full, f"expected text in quotes, got {_show(v)}")
        return v


def _kind(v: Any) -> str:
    return {dict: "a table", list: "a list", str: "text", bool: "true/false", int: "a number",
            float: "a number"}.get(type(v), type(v).__name__)


def _show(v: Any) -> str:
    text = repr(v)
    return text if len(text) <= 60 else text[:57] + "..."


def _list(choices: Sequence[str]) -> str:
    return ", ".join(f'"{c}"' for c in choices)


def design_from_dict(data: Mapping[str, Any], origin: str = "<design>") -> Design:
    """Validate a design dictionary (as read from TOML) and build the :class:`Design`."""
    rd = _Reader(origin)
    if not isinstance(data, Mapping):
        raise rd.fail("", "expected a TOML document")
    rd.check_keys(data, schema.TOP, "")

    title = rd.text(data, "title", "", Path(origin).stem or "design")
    if "\n" in title or "\r" in title or any(ord(c) < 32 or ord(c) == 127 for c in title):
        raise rd.fail("title", "must be one line of text (no line breaks or control characters)")
    if len(title) > MAX_TITLE:
        raise rd.fail("title", f"is {len(title)} characters long; keep it under {MAX_TITLE}")
    note = rd.text(data, "note", "", "")

    source = _source(rd, data)
    rectifier = _rectifier(rd, data)
    filters = _filters(rd, data)
    load = _load(rd, data)
    bleeder = _bleeder(rd, data)
    sim = _simulation(rd, data)
    spread = _spread(rd, data)

    # Combinations that cannot be built.
    if rectifier.topology in ("half-wave", "centre-tap", "bridge") and not filters and load is None \
            and bleeder is None:
        raise rd.fail(
            "filter",
            f"a {rectifier.topology} rectifier with no filter, no load and no bleeder has "
            "nothing to feed; add a [[filter]] c = ... reservoir or a [load]",
        )
    if filters and filters[-1].kind in ("l", "r") and load is None and bleeder is None:
        n = len(filters) - 1
        raise rd.fail(
            f"filter.{n}",
            f"the filter ends in a series {'choke' if filters[-1].kind == 'l' else 'resistor'} "
            "with nothing after it; add a [load], a [bleeder] or a final c section",
        )
    return Design(
        title=title,
        source=source,
        rectifier=rectifier,
        filters=tuple(filters),
        load=load,
        bleeder=bleeder,
        simulation=sim,
        spread=spread,
        note=note,
        origin=origin,
    )


def _source(rd: _Reader, data: Mapping[str, Any]) -> Source:
    t = rd.table(data, "source", "source", required=True)
    assert t is not None
    rd.check_keys(t, schema.SOURCE, "source")
    kind = rd.choice(t, "kind", "source", ("sine",), default="sine")
    vrms = rd.value(t, "vrms", "source", "V", above=0, maximum=200e3)
    freq = rd.value(t, "frequency", "source", "Hz", above=0, maximum=100e3)
    res = rd.value(t, "resistance", "source", "ohm", minimum=0, maximum=1e9)
    ind = rd.value(t, "inductance", "source", "H", default=0.0, minimum=0, maximum=1e3)
    tol = rd.percent(t, "mains_tolerance", "source")
    assert vrms is not None and freq is not None and res is not None and ind is not None
    return Source(kind="sine", vrms=vrms, frequency=freq, resistance=res, inductance=ind,
                  mains_tolerance=tol) if kind == "sine" else _unreachable()


def _unreachable() -> Source:  # pragma: no cover - choice() already refused anything else
    raise AssertionError


def _rectifier(rd: _Reader, data: Mapping[str, Any]) -> Rectifier:
    t = rd.table(data, "rectifier", "rectifier", required=True)
    assert t is not None
    rd.check_keys(t, schema.RECTIFIER, "rectifier")
    topology = rd.choice(t, "topology", "rectifier", TOPOLOGIES)
    diode = _diode(rd, t.get("diode", "1N4007"))
    stages = 1
    if "stages" in t:
        if topology != "cascade":
            raise rd.fail("rectifier.stages", f"applies to topology \"cascade\" only, not \"{topology}\"")
        stages = rd.integer(t, "stages", "rectifier", default=1, minimum=1, maximum=20)
    cap = None
    if topology in ("doubler", "cascade"):
        if "capacitance" not in t:
            raise rd.fail("rectifier.capacitance",
                          f'missing key: a {topology} needs its stage capacitance, e.g. "100u"')
        cap = rd.value(t, "capacitance", "rectifier", "F", above=0, maximum=10.0)
    elif "capacitance" in t:
        raise rd.fail(
            "rectifier.capacitance",
            f"applies to doubler and cascade only; for a {topology}, put the reservoir in "
            '[[filter]] c = "..."',
        )
    cap_tol = rd.percent(t, "capacitance_tolerance", "rectifier")
    if cap_tol is not None and cap is None:
        raise rd.fail("rectifier.capacitance_tolerance", "needs capacitance (doubler and cascade only)")
    return Rectifier(topology=topology, diode=diode, stages=stages, capacitance=cap,  # type: ignore[arg-type]
                     capacitance_tolerance=cap_tol)


def _diode(rd: _Reader, spec: Any) -> DiodeModel:
    key = "rectifier.diode"
    if isinstance(spec, str):
        part = diodes.lookup(spec)
        if part is None:
            near = difflib.get_close_matches(spec.strip().upper(), list(diodes.DIODES), n=1, cutoff=0.5)
            hint = f"; did you mean {diodes.DIODES[near[0]].name!r}?" if near else ""
            raise rd.fail(key, f"{_show(spec)} is not in the part library (see `simkit parts`){hint}")
        return part.model()
    if not isinstance(spec, dict):
        raise rd.fail(key, f'expected a part name such as "1N4007" or an inline table, got {_show(spec)}')
    rd.check_keys(spec, schema.DIODE_INLINE, key)
    is_ = rd.value(spec, "is", key, "A", above=0, maximum=1.0)
    n = rd.value(spec, "n", key, "", default=1.0, minimum=0.01, maximum=10.0)
    rs = rd.value(spec, "rs", key, "ohm", default=0.0, minimum=0, maximum=1e6)
    bv = rd.value(spec, "bv", key, "V", above=0)
    tt = rd.value(spec, "tt", key, "s", default=0.0, minimum=0, maximum=1e-3)
    cjo = rd.value(spec, "cjo", key, "F", default=0.0, minimum=0, maximum=1e-6)
    ratings = DiodeRatings(
        vrrm=rd.value(spec, "vrrm", key, "V", above=0),
        ifav=rd.value(spec, "ifav", key, "A", above=0),
        ifsm=rd.value(spec, "ifsm", key, "A", above=0),
    )
    assert is_ is not None and n is not None and rs is not None and tt is not None and cjo is not None
    return DiodeModel(name="inline", is_=is_, n=n, rs=rs, bv=bv, tt=tt, cjo=cjo, ratings=ratings,
                      source="given in the design file")


def _filters(rd: _Reader, data: Mapping[str, Any]) -> list[FilterSection]:
    if "filter" not in data:
        return []
    raw = data["filter"]
    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list):
        raise rd.fail("filter", f"expected [[filter]] sections, got {_kind(raw)}")
    out: list[FilterSection] = []
    for i, sec in enumerate(raw):
        path = f"filter.{i}"
        if not isinstance(sec, dict):
            raise rd.fail(path, f"expected a [[filter]] table, got {_kind(sec)}")
        rd.check_keys(sec, schema.FILTER, path)
        kinds = [k for k in ("c", "l", "r") if k in sec]
        if len(kinds) != 1:
            got = " and ".join(kinds) if kinds else "none"
            raise rd.fail(path, f"each section needs exactly one of c, l or r; got {got}")
        kind = kinds[0]
        if "esr" in sec and kind != "c":
            raise rd.fail(f"{path}.esr", "esr belongs to a c section")
        if "dcr" in sec and kind != "l":
            raise rd.fail(f"{path}.dcr", "dcr belongs to an l section")
        unit = {"c": "F", "l": "H", "r": "ohm"}[kind]
        limit = {"c": 10.0, "l": 1e4, "r": 1e12}[kind]
        value = rd.value(sec, kind, path, unit, above=0, maximum=limit)
        esr = rd.value(sec, "esr", path, "ohm", default=0.0, minimum=0, maximum=1e6)
        dcr = rd.value(sec, "dcr", path, "ohm", default=0.0, minimum=0, maximum=1e9)
        assert value is not None and esr is not None and dcr is not None
        tol = rd.percent(sec, "tolerance", path)
        out.append(FilterSection(kind=kind, value=value, esr=esr, dcr=dcr, tolerance=tol))  # type: ignore[arg-type]
    return out


def _load(rd: _Reader, data: Mapping[str, Any]) -> Load | None:
    t = rd.table(data, "load", "load", required=False)
    if t is None:
        return None
    rd.check_keys(t, schema.LOAD, "load")
    kind = rd.choice(t, "kind", "load", ("resistor", "current"))
    if kind == "resistor":
        if "i" in t:
            raise rd.fail("load.i", 'belongs to kind "current"; a resistor load takes r')
        if "r" not in t:
            raise rd.fail("load.r", 'missing key: kind "resistor" needs r, e.g. r = "5k"')
        return Load(kind="resistor", r=rd.value(t, "r", "load", "ohm", above=0, maximum=1e12),
                    tolerance=rd.percent(t, "tolerance", "load"))
    if "r" in t:
        raise rd.fail("load.r", 'belongs to kind "resistor"; a current load takes i')
    if "i" not in t:
        raise rd.fail("load.i", 'missing key: kind "current" needs i, e.g. i = "100m"')
    return Load(kind="current", i=rd.value(t, "i", "load", "A", above=0, maximum=1e3),
                tolerance=rd.percent(t, "tolerance", "load"))


def _bleeder(rd: _Reader, data: Mapping[str, Any]) -> Bleeder | None:
    t = rd.table(data, "bleeder", "bleeder", required=False)
    if t is None:
        return None
    rd.check_keys(t, schema.BLEEDER, "bleeder")
    r = rd.value(t, "r", "bleeder", "ohm", above=0, maximum=1e12)
    assert r is not None
    return Bleeder(r=r, tolerance=rd.percent(t, "tolerance", "bleeder"))


def _spread(rd: _Reader, data: Mapping[str, Any]) -> SpreadOptions:
    t = rd.table(data, "spread", "spread", required=False)
    if t is None:
        return SpreadOptions()
    rd.check_keys(t, schema.SPREAD, "spread")
    dist = rd.choice(t, "distribution", "spread", ("uniform", "normal"), default="uniform")
    return SpreadOptions(distribution=dist)  # type: ignore[arg-type]


def _simulation(rd: _Reader, data: Mapping[str, Any]) -> SimulationOptions:
    t = rd.table(data, "simulation", "simulation", required=False)
    if t is None:
        return SimulationOptions()
    rd.check_keys(t, schema.SIMULATION, "simulation")
    d = SimulationOptions()
    phase = rd.value(t, "switch_on_phase", "simulation", "", default=d.switch_on_phase,
                     minimum=-360, maximum=360)
    steps = rd.integer(t, "steps_per_period", "simulation", d.steps_per_period, 50, 100000)
    tol = rd.value(t, "settle_tolerance", "simulation", "", default=d.settle_tolerance,
                   above=0, maximum=0.1)
    max_t = rd.value(t, "max_settle_time", "simulation", "s", above=0, maximum=3600)
    on_t = rd.value(t, "switch_on_time", "simulation", "s", above=0, maximum=3600)
    reltol = rd.value(t, "reltol", "simulation", "", default=d.reltol, minimum=1e-8, maximum=1e-2)
    assert phase is not None and tol is not None and reltol is not None
    if not math.isfinite(phase):
        raise rd.fail("simulation.switch_on_phase", "must be a finite angle in degrees")
    return SimulationOptions(switch_on_phase=phase, steps_per_period=steps, settle_tolerance=tol,
                             max_settle_time=max_t, switch_on_time=on_t, reltol=reltol)


def design_to_inputs(design: Design) -> dict[str, Any]:
    """The resolved design as plain JSON-ready data (SI floats), for ``inputs`` in results."""
    from dataclasses import asdict

    d = asdict(design)
    d.pop("origin", None)
    diode = d["rectifier"]["diode"]
    diode["is"] = diode.pop("is_")
    return d
