"""Read a TOML design file, apply --set overrides, validate, and build a :class:`Design`.

Every user mistake becomes one :class:`~simkit.errors.DesignError` naming the file, the
key (as a dotted path, the same spelling ``--set`` uses) and what was expected.
"""

from __future__ import annotations

import copy
import difflib
import math
import os
import stat
import sys
from collections.abc import Mapping, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from simkit.design import schema
from simkit.design.model import (
    TOPOLOGIES,
    Battery,
    Bleeder,
    CheckPolicy,
    Design,
    DiodeModel,
    DiodeRatings,
    FilterSection,
    GlowSpec,
    Inverter,
    Keying,
    KeyState,
    Load,
    PartRating,
    PassDevice,
    Rectifier,
    Regulator,
    SimulationOptions,
    Source,
    SpreadOptions,
    Transformer,
    TubeRatings,
    VacuumDiode,
    Zener,
)
from simkit.errors import DesignError
from simkit.parts import diodes, regulators, tubes
from simkit.units import UnitError, parse_percent, parse_value

MAX_TITLE = 200
#: Design and parts files larger than this are refused (a design is a few kilobytes).
MAX_DESIGN_BYTES = 1_000_000
#: Tables and lists nested deeper than this are not a design (the deepest real one has 4 levels).
MAX_DEPTH = 32
# Lower bounds that refuse absurd designs, whose figures would be denormal noise (issue 14):
#: Source EMF, V RMS: below a volt a rectifier diode hardly conducts.
MIN_EMF = 1.0
#: Capacitors, F: below 10 pF a part is smaller than the wiring's own capacitance.
MIN_CAPACITANCE = 10e-12
#: Vacuum-diode perveance, A/V^1.5: thousands of times below the library's rectifier tubes.
MIN_PERVEANCE = 1e-7


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
        value = _override_value(text.strip())
        parts = path.split(".")
        if not path or any(not p for p in parts):
            raise DesignError(f"--set {item!r}: empty part in the path", file=file)
        if len(parts) > MAX_DEPTH:
            raise DesignError(f"--set {path}: a path of {len(parts)} parts is deeper than any design key", file=file)
        _set_path(out, parts, value, file, path)
    if overrides and _depth(out) > MAX_DEPTH:
        raise DesignError(f"--set: the value nests tables or lists more than {MAX_DEPTH} levels deep", file=file)
    return out


def _override_value(text: str) -> Any:
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


# --- validation ------------------------------------------------------------------------


class _Reader:
    """Helpers that read one key and say precisely what is wrong with it."""

    def __init__(self, file: str) -> None:
        self.file = file
        self.library: dict[str, Any] = {}  # the user's part library file, when the design names one
        self.library_file = ""

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

    def boolean(self, table: Mapping[str, Any], key: str, path: str, default: bool) -> bool:
        full = f"{path}.{key}" if path else key
        if key not in table:
            return default
        v = table[key]
        if isinstance(v, str) and v.strip().lower() in ("true", "false"):
            return v.strip().lower() == "true"
        if not isinstance(v, bool):
            raise self.fail(full, f"expected true or false, got {_show(v)}")
        return v

    def need(self, table: Mapping[str, Any], key: str, path: str, why: str) -> None:
        if key not in table:
            raise self.fail(f"{path}.{key}", f"missing key: {why}")

    def refuse(self, table: Mapping[str, Any], keys: Sequence[str], path: str, why: str) -> None:
        for key in keys:
            if key in table:
                raise self.fail(f"{path}.{key}", why)

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
    if "library" in data:
        _load_library(rd, rd.text(data, "library", "", ""))

    rectifier = _rectifier(rd, data)
    source = _source(rd, data, rectifier.topology)
    battery = _battery(rd, data, source)
    filters = _filters(rd, data)
    loads = _loads(rd, data, len(filters))
    bleeder = _bleeder(rd, data)
    sim = _simulation(rd, data)
    spread = _spread(rd, data)
    checks = _checks(rd, data)
    regulator = _regulator(rd, data)

    # Combinations that cannot be built.
    if rectifier.topology in ("half-wave", "centre-tap", "bridge") and not filters and not loads \
            and bleeder is None:
        raise rd.fail(
            "filter",
            f"a {rectifier.topology} rectifier with no filter, no load and no bleeder has "
            "nothing to feed; add a [[filter]] c = ... reservoir or a [load]",
        )
    if filters and filters[-1].kind in ("l", "r") and not any(ld.at is None for ld in loads) and bleeder is None:
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
        loads=loads,
        bleeder=bleeder,
        battery=battery,
        simulation=sim,
        spread=spread,
        checks=checks,
        regulator=regulator,
        note=note,
        origin=origin,
    )


_SINE_KEYS = ("vrms", "resistance", "inductance")
_TRANSFORMER_KEYS = ("primary_vrms", "secondary_vrms", "regulation", "primary_resistance",
                     "secondary_resistance", "leakage_inductance", "centre_tap")
_INVERTER_KEYS = ("waveform", "peak", "output_resistance", "rated_power", "efficiency", "idle_power",
                  "efficiency_table", "regulated", "response_time", "edge_time")


def _source(rd: _Reader, data: Mapping[str, Any], topology: str) -> Source:
    t = rd.table(data, "source", "source", required=True)
    assert t is not None
    rd.check_keys(t, schema.SOURCE, "source")
    kind = rd.choice(t, "kind", "source", ("sine", "transformer", "inverter"), default="sine")
    freq = rd.value(t, "frequency", "source", "Hz", above=0, maximum=100e3)
    tol = rd.percent(t, "mains_tolerance", "source")
    assert freq is not None
    if kind == "sine":
        rd.refuse(t, _TRANSFORMER_KEYS + _INVERTER_KEYS, "source", 'belongs to another source kind; '
                  'this is kind "sine" (set kind = "transformer" or "inverter")')
        rd.need(t, "vrms", "source", "the open-circuit RMS voltage of the winding, e.g. \"250\"")
        rd.need(t, "resistance", "source", "the series resistance of the winding, e.g. \"25\"")
        vrms = rd.value(t, "vrms", "source", "V", above=0, minimum=MIN_EMF, maximum=200e3)
        res = rd.value(t, "resistance", "source", "ohm", minimum=0, maximum=1e9)
        ind = rd.value(t, "inductance", "source", "H", default=0.0, minimum=0, maximum=1e3)
        assert vrms is not None and res is not None and ind is not None
        rated = rd.value(t, "rated_current", "source", "A", above=0, maximum=1e3)
        return Source(kind="sine", vrms=vrms, frequency=freq, resistance=res, inductance=ind, mains_tolerance=tol,
                      rated_current=rated)
    if kind == "transformer":
        return _transformer(rd, t, freq, tol, topology)
    return _inverter(rd, t, freq, tol)


def _transformer(rd: _Reader, t: Mapping[str, Any], freq: float, tol: float | None, topology: str) -> Source:
    """Open-circuit EMF and series resistance from a nameplate (see docs/reference.md).

    With regulation r (no-load rise over full-load voltage): V_oc = V_fl (1 + r) and the series
    resistance of the whole secondary R = (V_oc - V_fl) / I_rated, treating the drop at the rated
    resistive load as resistive.  With measured winding resistances Rp and Rs: the turns ratio n
    solves V_fl = n V_p - I_rated (Rs + n^2 Rp), R = Rs + n^2 Rp (the primary referred to the
    secondary), V_oc = n V_p.
    """
    path = "source"
    rd.refuse(t, _SINE_KEYS + _INVERTER_KEYS, path, 'belongs to another source kind; this is kind "transformer"')
    for key, why in (("primary_vrms", 'the rated primary voltage, e.g. "230"'),
                     ("secondary_vrms", 'the rated secondary voltage, e.g. "600"'),
                     ("rated_current", 'the rated secondary current, e.g. "150m"')):
        rd.need(t, key, path, why)
    vp = rd.value(t, "primary_vrms", path, "V", above=0, minimum=MIN_EMF, maximum=100e3)
    vs = rd.value(t, "secondary_vrms", path, "V", above=0, minimum=MIN_EMF, maximum=200e3)
    ir = rd.value(t, "rated_current", path, "A", above=0, maximum=1e3)
    leak = rd.value(t, "leakage_inductance", path, "H", default=0.0, minimum=0, maximum=1e3)
    ct = rd.boolean(t, "centre_tap", path, False)
    assert vp is not None and vs is not None and ir is not None and leak is not None
    has_reg = "regulation" in t
    has_res = "primary_resistance" in t or "secondary_resistance" in t
    if has_reg == has_res:
        raise rd.fail(f"{path}.regulation", "give either regulation (e.g. \"8%\") or both primary_resistance "
                      "and secondary_resistance" + ("" if not has_reg else ", not both"))
    reg = rp = rs_ = None
    if has_reg:
        reg = rd.percent(t, "regulation", path, maximum=1.0)
        assert reg is not None
        voc = vs * (1 + reg)
        rser = (voc - vs) / ir
        n = voc / vp
    else:
        rd.need(t, "primary_resistance", path, "with secondary_resistance, the measured primary resistance")
        rd.need(t, "secondary_resistance", path, "with primary_resistance, the measured secondary resistance")
        rp = rd.value(t, "primary_resistance", path, "ohm", minimum=0, maximum=1e6)
        rs_ = rd.value(t, "secondary_resistance", path, "ohm", minimum=0, maximum=1e6)
        assert rp is not None and rs_ is not None
        # rp*ir*n^2 - vp*n + (vs + ir*rs) = 0, the smaller (physical) root.
        a, b, c = rp * ir, -vp, vs + ir * rs_
        if a == 0:
            n = c / vp
        else:
            disc = b * b - 4 * a * c
            if disc < 0:
                raise rd.fail(f"{path}.primary_resistance", "with these winding resistances the transformer "
                              f"cannot deliver {vs:g} V at {ir:g} A from {vp:g} V; check the values")
            n = (-b - math.sqrt(disc)) / (2 * a)
        voc = n * vp
        rser = rs_ + n * n * rp
    if topology == "centre-tap":
        if not ct:
            raise rd.fail(f"{path}.centre_tap", "topology centre-tap needs a centre-tapped secondary: set "
                          "centre_tap = true (secondary_vrms is then the whole winding, e.g. 600 for 300-0-300)")
        # Each half: half the EMF; half the secondary resistance plus the primary referred to one half.
        # With only a regulation figure, the copper is taken as split evenly between primary and
        # secondary (common practice).
        r_sec = rs_ if rs_ is not None else rser / 2
        r_pri_ref = rser - r_sec
        per_half_r = r_sec / 2 + r_pri_ref / 4
        emf, res, ind = voc / 2, per_half_r, leak / 4
    else:
        emf, res, ind = voc, rser, leak
    tr = Transformer(primary_vrms=vp, secondary_vrms=vs, rated_current=ir, centre_tap=ct, regulation=reg,
                     primary_resistance=rp, secondary_resistance=rs_, turns_ratio=n, open_circuit_vrms=voc,
                     series_resistance=rser)
    return Source(kind="transformer", vrms=emf, frequency=freq, resistance=res, inductance=ind,
                  mains_tolerance=tol, transformer=tr, rated_current=ir)


def _inverter(rd: _Reader, t: Mapping[str, Any], freq: float, tol: float | None) -> Source:
    path = "source"
    rd.refuse(t, ("resistance", *_TRANSFORMER_KEYS), path,
              'belongs to another source kind; an inverter has output_resistance')
    rd.need(t, "vrms", path, 'the inverter\'s nominal output RMS voltage, e.g. "230"')
    rd.need(t, "rated_power", path, 'the inverter\'s rated output power, e.g. "150"')
    wave = rd.choice(t, "waveform", path, ("sine", "modified-sine", "square"), default="sine")
    vrms = rd.value(t, "vrms", path, "V", above=0, minimum=MIN_EMF, maximum=100e3)
    rout = rd.value(t, "output_resistance", path, "ohm", default=0.0, minimum=0, maximum=1e6)
    ind = rd.value(t, "inductance", path, "H", default=0.0, minimum=0, maximum=1e3)
    prated = rd.value(t, "rated_power", path, "W", above=0, maximum=1e6)
    idle = rd.value(t, "idle_power", path, "W", default=0.0, minimum=0, maximum=1e5)
    assert vrms is not None and rout is not None and ind is not None and prated is not None and idle is not None
    peak = math.sqrt(2) * vrms
    duty = 1.0
    if wave == "square":
        rd.refuse(t, ("peak",), path, "applies to waveform modified-sine only")
        peak, duty = vrms, 1.0
    elif wave == "modified-sine":
        peak = rd.value(t, "peak", path, "V", default=math.sqrt(2) * vrms, above=0, maximum=200e3) or peak
        if peak < vrms:
            raise rd.fail(f"{path}.peak", f"must be at least vrms ({vrms:g} V): a three-level wave of peak "
                          f"{peak:g} V cannot reach that RMS")
        duty = (vrms / peak) ** 2  # RMS of a three-level wave = peak * sqrt(on fraction)
    else:
        rd.refuse(t, ("peak",), path, "applies to waveform modified-sine only")
    eff = None
    table: tuple[tuple[float, float], ...] = ()
    if "efficiency" in t and "efficiency_table" in t:
        raise rd.fail(f"{path}.efficiency_table", "give efficiency or efficiency_table, not both")
    if "efficiency_table" in t:
        table = _eff_table(rd, t["efficiency_table"], f"{path}.efficiency_table")
    else:
        rd.need(t, "efficiency", path, 'the efficiency at rated power, e.g. "85%" (or an efficiency_table)')
        eff = rd.percent(t, "efficiency", path, maximum=1.0 + 1e-12)
        assert eff is not None
        if not 0 < eff <= 1:
            raise rd.fail(f"{path}.efficiency", f"must be above 0% and at most 100%, got {eff * 100:g}%")
        if prated / eff - prated < idle:
            raise rd.fail(f"{path}.idle_power", f"the idle power ({idle:g} W) exceeds the whole loss at rated "
                          f"power ({prated / eff - prated:.3g} W from the efficiency)")
    regulated = rd.boolean(t, "regulated", path, False)
    T = 1.0 / freq
    resp = rd.value(t, "response_time", path, "s", default=2 * T, above=0, maximum=100)
    edge = rd.value(t, "edge_time", path, "s", default=T / 500, above=0, maximum=T / 8)
    assert resp is not None and edge is not None
    inv = Inverter(waveform=wave, peak=peak, duty=duty, rated_power=prated, efficiency=eff,  # type: ignore[arg-type]
                   idle_power=idle, efficiency_table=table, regulated=regulated, response_time=resp,
                   edge_time=edge)
    return Source(kind="inverter", vrms=vrms, frequency=freq, resistance=rout, inductance=ind,
                  mains_tolerance=tol, inverter=inv)


def _eff_table(rd: _Reader, raw: Any, key: str) -> tuple[tuple[float, float], ...]:
    if not isinstance(raw, list) or len(raw) < 2:
        raise rd.fail(key, "expected a list of at least two [fraction of rated power, efficiency] pairs, "
                      'e.g. [[0.1, "70%"], [1.0, "88%"]]')
    out = []
    for k, pair in enumerate(raw):
        if not isinstance(pair, list) or len(pair) != 2:
            raise rd.fail(f"{key}.{k}", f"expected [fraction, efficiency], got {_show(pair)}")
        try:
            frac = parse_value(pair[0], "")
            eff = parse_percent(pair[1])
        except UnitError as exc:
            raise rd.fail(f"{key}.{k}", str(exc)) from None
        if not 0 <= frac <= 2 or not 0 < eff <= 1:
            raise rd.fail(f"{key}.{k}", "fraction must be 0..2 and efficiency above 0% and at most 100%")
        if out and frac <= out[-1][0]:
            raise rd.fail(f"{key}.{k}", "fractions must increase")
        out.append((frac, eff))
    return tuple(out)


def _battery(rd: _Reader, data: Mapping[str, Any], source: Source) -> Battery | None:
    t = rd.table(data, "battery", "battery", required=False)
    if t is None:
        return None
    if source.kind != "inverter":
        raise rd.fail("battery", 'a battery feeds an inverter: set [source] kind = "inverter"')
    rd.check_keys(t, schema.BATTERY, "battery")
    v = rd.value(t, "voltage", "battery", "V", above=0, maximum=10e3)
    r = rd.value(t, "internal_resistance", "battery", "ohm", default=0.0, minimum=0, maximum=1e3)
    cap = rd.value(t, "capacity", "battery", "Ah", above=0, maximum=1e6)
    use = rd.percent(t, "usable_fraction", "battery", maximum=1.0 + 1e-12)
    assert v is not None and r is not None and cap is not None
    if use is not None and use <= 0:
        raise rd.fail("battery.usable_fraction", "must be above 0%")
    return Battery(voltage=v, internal_resistance=r, capacity=cap, usable_fraction=1.0 if use is None else use)


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
        cap = rd.value(t, "capacitance", "rectifier", "F", above=0, minimum=MIN_CAPACITANCE, maximum=10.0)
    elif "capacitance" in t:
        raise rd.fail(
            "rectifier.capacitance",
            f"applies to doubler and cascade only; for a {topology}, put the reservoir in "
            '[[filter]] c = "..."',
        )
    cap_tol = rd.percent(t, "capacitance_tolerance", "rectifier")
    if cap is None:
        rd.refuse(t, ("capacitance_tolerance", "capacitor_esr", "capacitor_rating", "balancing", "balancing_rating"),
                  "rectifier", "belongs to the stage capacitors of a doubler or cascade")
    esr = rd.value(t, "capacitor_esr", "rectifier", "ohm", default=0.0, minimum=0, maximum=1e6)
    crating = _rating(rd, t, "capacitor_rating", "rectifier", "c")
    bal = rd.value(t, "balancing", "rectifier", "ohm", above=0, maximum=1e12)
    brating = _rating(rd, t, "balancing_rating", "rectifier", "r")
    if brating is not None and bal is None:
        raise rd.fail("rectifier.balancing_rating", "needs balancing (the resistance across each stage capacitor)")
    assert esr is not None
    return Rectifier(topology=topology, diode=diode, stages=stages, capacitance=cap,  # type: ignore[arg-type]
                     capacitance_tolerance=cap_tol, capacitor_rating=crating, capacitor_esr=esr, balancing=bal,
                     balancing_rating=brating)


_RATING_KEYS = {
    "c": {"v": schema.Key("V", "rated voltage"), "ripple": schema.Key("A", "ripple-current rating (RMS)"),
          "ripple_frequency": schema.Key("Hz", "frequency of the ripple rating")},
    "l": {"i": schema.Key("A", "rated DC current")},
    "r": {"w": schema.Key("W", "power rating")},
}


def _rating(rd: _Reader, t: Mapping[str, Any], key: str, path: str, kind: str) -> PartRating | None:
    if key not in t:
        return None
    raw = t[key]
    full = f"{path}.{key}"
    if not isinstance(raw, dict):
        example = {"c": '{ v = "450", ripple = "1.2" }', "l": '{ i = "150m" }', "r": '{ w = "2" }'}[kind]
        raise rd.fail(full, f"expected a table such as {example}, got {_show(raw)}")
    rd.check_keys(raw, _RATING_KEYS[kind], full)
    units = {"v": "V", "ripple": "A", "ripple_frequency": "Hz", "i": "A", "w": "W"}
    vals = {k: rd.value(raw, k, full, units[k], above=0, maximum=1e6) for k in raw}
    return PartRating(**vals)  # type: ignore[arg-type]


def _diode(rd: _Reader, spec: Any, key: str = "rectifier.diode") -> DiodeModel:
    if isinstance(spec, str) and spec in rd.library.get("diodes", {}):
        user = rd.library["diodes"][spec]
        outer = rd.file
        rd.file = rd.library_file
        try:
            model = _diode(rd, user if isinstance(user, dict) else None, f"diodes.{spec}")
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
        raise rd.fail(key, f"{_show(spec)} is not in the part library (see `simkit parts`){hint}")
    if not isinstance(spec, dict):
        raise rd.fail(key, f'expected a part name such as "1N4007" or an inline table, got {_show(spec)}')
    rd.check_keys(spec, schema.DIODE_INLINE, key)
    kind = rd.choice(spec, "kind", key, ("silicon", "vacuum"), default="silicon")
    if kind == "vacuum":
        rd.refuse(spec, ("is", "n", "rs", "bv", "tt", "cjo", "vrrm", "ifav", "ifsm", "i2t"), key,
                  "belongs to a silicon diode; a vacuum plate takes perveance (and warmup, piv, peak_current)")
        rd.need(spec, "perveance", key, 'the plate perveance in A/V^1.5, e.g. "1m" (i = P v^1.5)')
        perv = rd.value(spec, "perveance", key, "", above=0, minimum=MIN_PERVEANCE, maximum=1.0)
        warm = rd.value(spec, "warmup", key, "s", default=0.0, minimum=0, maximum=600)
        assert perv is not None and warm is not None
        ratings = TubeRatings(piv=rd.value(spec, "piv", key, "V", above=0),
                              peak_current=rd.value(spec, "peak_current", key, "A", above=0),
                              dc_current=rd.value(spec, "dc_current", key, "A", above=0),
                              max_input_capacitance=rd.value(spec, "max_capacitance", key, "F", above=0),
                              min_plate_resistance=rd.value(spec, "min_resistance", key, "ohm", minimum=0))
        vac = VacuumDiode(perveance=perv, warmup_start=warm / 2, warmup_full=warm, ratings=ratings)
        return DiodeModel(name="inline vacuum", is_=0.0, n=1.0, rs=0.0, source="given in the design file",
                          vacuum=vac)
    rd.refuse(spec, ("perveance", "warmup", "piv", "peak_current", "dc_current", "max_capacitance", "min_resistance"),
              key,
              'belongs to a vacuum plate; set kind = "vacuum"')
    rd.need(spec, "is", key, 'the saturation current, e.g. "5n"')
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
        i2t=rd.value(spec, "i2t", key, "", above=0),
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
        value = rd.value(sec, kind, path, unit, above=0, minimum=MIN_CAPACITANCE if kind == "c" else None,
                         maximum=limit)
        esr = rd.value(sec, "esr", path, "ohm", default=0.0, minimum=0, maximum=1e6)
        dcr = rd.value(sec, "dcr", path, "ohm", default=0.0, minimum=0, maximum=1e9)
        assert value is not None and esr is not None and dcr is not None
        tol = rd.percent(sec, "tolerance", path)
        rating = _rating(rd, sec, "rating", path, kind)
        if "part" in sec:
            if rating is not None:
                raise rd.fail(f"{path}.part", "give part or rating, not both")
            section = {"c": "capacitors", "l": "chokes", "r": "resistors"}[kind]
            rating, extra = _library_part(rd, sec, path, section)
            if kind == "c" and "esr" not in sec and "esr" in extra:
                esr = extra["esr"]
            if kind == "l" and "dcr" not in sec and "dcr" in extra:
                dcr = extra["dcr"]
        out.append(FilterSection(kind=kind, value=value, esr=esr, dcr=dcr, tolerance=tol,  # type: ignore[arg-type]
                                 rating=rating))
    return out


def _loads(rd: _Reader, data: Mapping[str, Any], n_filters: int) -> tuple[Load, ...]:
    if "load" not in data:
        return ()
    raw = data["load"]
    if isinstance(raw, dict):
        return (_load(rd, raw, "load", n_filters, ""),)
    if not isinstance(raw, list):
        raise rd.fail("load", f"expected a [load] table or [[load]] tables, got {_kind(raw)}")
    if not raw:
        return ()
    out = []
    for k, t in enumerate(raw):
        if not isinstance(t, dict):
            raise rd.fail(f"load.{k}", f"expected a [[load]] table, got {_kind(t)}")
        out.append(_load(rd, t, f"load.{k}", n_filters, str(k + 1) if len(raw) > 1 else ""))
    return tuple(out)


_LOAD_KEYS = {
    "resistor": ("r",),
    "current": ("i",),
    "tube": ("point",),
    "keyed": ("down", "up", "rate", "duty", "morse", "wpm", "rise", "fall", "pushing_hz_per_v"),
    "steps": ("steps",),
}


def _load(rd: _Reader, t: Mapping[str, Any], path: str, n_filters: int, suffix: str) -> Load:
    rd.check_keys(t, schema.LOAD, path)
    kind = rd.choice(t, "kind", path, tuple(_LOAD_KEYS))
    for other, keys in _LOAD_KEYS.items():
        if other != kind:
            for key in keys:
                if key in t and key not in _LOAD_KEYS[kind]:
                    raise rd.fail(f"{path}.{key}", f'belongs to kind "{other}", not "{kind}"')
    tol = rd.percent(t, "tolerance", path)
    warm = rd.value(t, "warmup", path, "s", minimum=0, maximum=600)
    at = None
    if "at" in t:
        if n_filters == 0:
            raise rd.fail(f"{path}.at", "there is no filter section to hang the load after")
        at = rd.integer(t, "at", path, default=0, minimum=0, maximum=n_filters - 1)
    common = {"tolerance": tol, "warmup": warm or None, "at": at, "name": f"LOAD{suffix}"}
    if kind == "resistor":
        rd.need(t, "r", path, 'kind "resistor" needs r, e.g. r = "5k"')
        return Load(kind="resistor", r=rd.value(t, "r", path, "ohm", above=0, maximum=1e12), **common)
    if kind == "current":
        rd.need(t, "i", path, 'kind "current" needs i, e.g. i = "100m"')
        return Load(kind="current", i=rd.value(t, "i", path, "A", above=0, maximum=1e3), **common)
    if kind == "tube":
        rd.need(t, "point", path, 'kind "tube" needs its operating point, e.g. point = { v = "250", i = "60m" }')
        pt = t["point"]
        if not isinstance(pt, dict):
            raise rd.fail(f"{path}.point", f'expected a table {{ v = "250", i = "60m" }}, got {_show(pt)}')
        allowed = {"v": schema.Key("V", "plate voltage at the operating point", required=True),
                   "i": schema.Key("A", "current at the operating point", required=True)}
        rd.check_keys(pt, allowed, f"{path}.point")
        v = rd.value(pt, "v", f"{path}.point", "V", above=0, maximum=100e3)
        i = rd.value(pt, "i", f"{path}.point", "A", above=0, maximum=1e3)
        return Load(kind="tube", tube_v=v, tube_i=i, **common)
    if kind == "steps":
        rd.need(t, "steps", path, 'kind "steps" needs steps = [[time, current], ...], e.g. [[0, "10m"], ["30", "90m"]]')
        return Load(kind="steps", steps=_steps(rd, t["steps"], f"{path}.steps"), **common)
    # keyed
    for key in ("down", "up"):
        rd.need(t, key, path, f'kind "keyed" needs {key} = {{ i = "..." }} or {{ r = "..." }}')
    down = _key_state(rd, t["down"], f"{path}.down")
    up = _key_state(rd, t["up"], f"{path}.up")
    rise = rd.value(t, "rise", path, "s", default=5e-3, minimum=0, maximum=10)
    fall = rd.value(t, "fall", path, "s", default=5e-3, minimum=0, maximum=10)
    assert rise is not None and fall is not None
    if "morse" in t:
        if "rate" in t or "duty" in t:
            raise rd.fail(f"{path}.rate" if "rate" in t else f"{path}.duty",
                          "give rate and duty, or morse and wpm, not both")
        text = rd.text(t, "morse", path, "")
        from simkit.netlist.drives import morse_problem

        problem = morse_problem(text)
        if problem:
            raise rd.fail(f"{path}.morse", problem)
        rd.need(t, "wpm", path, "the Morse speed in words per minute, e.g. wpm = 20")
        wpm = rd.value(t, "wpm", path, "", above=0, maximum=100)
        assert wpm is not None
        unit = 1.2 / wpm
        if rise > unit / 2 or fall > unit / 2:
            raise rd.fail(f"{path}.rise", f"rise and fall must stay under half a dot ({unit / 2:.3g} s at {wpm:g} wpm)")
        keying = Keying(morse=text, wpm=wpm, rise=rise, fall=fall)
    else:
        rd.need(t, "rate", path, "the keying rate in Hz (with duty), or morse text and wpm")
        rate = rd.value(t, "rate", path, "Hz", above=0, maximum=1e3)
        duty = rd.percent(t, "duty", path, maximum=1.0)
        duty = 0.5 if duty is None else duty
        assert rate is not None
        if not 0 < duty < 1:
            raise rd.fail(f"{path}.duty", f"must be between 0% and 100% (exclusive), got {duty * 100:g}%")
        if rise + fall > min(duty, 1 - duty) / rate:
            raise rd.fail(f"{path}.rise", "rise and fall are longer than the key-down or key-up time")
        keying = Keying(rate=rate, duty=duty, rise=rise, fall=fall)
    push = rd.value(t, "pushing_hz_per_v", path, "", minimum=-1e9, maximum=1e9)
    return Load(kind="keyed", down=down, up=up, keying=keying, pushing=push, **common)


def _key_state(rd: _Reader, raw: Any, path: str) -> KeyState:
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected {{ i = "80m" }} or {{ r = "3k" }}, got {_show(raw)}')
    allowed = {"i": schema.Key("A", "current"), "r": schema.Key("ohm", "resistance")}
    rd.check_keys(raw, allowed, path)
    if len(raw) != 1:
        raise rd.fail(path, 'expected exactly one of i or r, e.g. { i = "80m" }')
    if "i" in raw:
        return KeyState(i=rd.value(raw, "i", path, "A", minimum=0, maximum=1e3))
    return KeyState(r=rd.value(raw, "r", path, "ohm", above=0, maximum=1e12))


def _steps(rd: _Reader, raw: Any, path: str) -> tuple[tuple[float, float], ...]:
    if not isinstance(raw, list) or not raw:
        raise rd.fail(path, 'expected a list of [time, current] pairs, e.g. [[0, "10m"], ["30", "90m"]]')
    out: list[tuple[float, float]] = []
    for k, pair in enumerate(raw):
        if isinstance(pair, dict):
            allowed = {"t": schema.Key("s", "time"), "i": schema.Key("A", "current")}
            rd.check_keys(pair, allowed, f"{path}.{k}")
            if set(pair) != {"t", "i"}:
                raise rd.fail(f"{path}.{k}", "expected { t = ..., i = ... }")
            pair = [pair["t"], pair["i"]]
        if not isinstance(pair, list) or len(pair) != 2:
            raise rd.fail(f"{path}.{k}", f'expected [time, current], e.g. ["30", "90m"], got {_show(pair)}')
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


def _bleeder(rd: _Reader, data: Mapping[str, Any]) -> Bleeder | None:
    t = rd.table(data, "bleeder", "bleeder", required=False)
    if t is None:
        return None
    rd.check_keys(t, schema.BLEEDER, "bleeder")
    r = rd.value(t, "r", "bleeder", "ohm", above=0, maximum=1e12)
    assert r is not None
    rating = _rating(rd, t, "rating", "bleeder", "r")
    if "part" in t:
        if rating is not None:
            raise rd.fail("bleeder.part", "give part or rating, not both")
        rating, _ = _library_part(rd, t, "bleeder", "resistors")
    return Bleeder(r=r, tolerance=rd.percent(t, "tolerance", "bleeder"), rating=rating)


def _load_library(rd: _Reader, name: str) -> None:
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
    lib_rd = _Reader(str(path))
    allowed = {"diodes": schema.Key("table", "diodes by name"), **{k: schema.Key("table", k) for k in schema.LIBRARY}}
    lib_rd.check_keys(data, allowed, "")
    for section, value in data.items():
        if not isinstance(value, dict) or not all(isinstance(v, dict) for v in value.values()):
            raise lib_rd.fail(section, f"expected [{section}.NAME] tables")
    rd.library = data
    rd.library_file = str(path)


def _library_part(rd: _Reader, t: Mapping[str, Any], path: str, section: str) -> tuple[PartRating, dict[str, float]]:
    name = t["part"]
    if not isinstance(name, str) or name not in rd.library.get(section, {}):
        have = ", ".join(rd.library.get(section, {})) or "none"
        where = f"the library file {rd.library_file}" if rd.library_file else "no library file (set library = ...)"
        raise rd.fail(f"{path}.part", f"{_show(name)} is not among the {section} of {where} (have: {have})")
    entry = rd.library[section][name]
    lib_rd = _Reader(rd.library_file)
    lib_rd.check_keys(entry, schema.LIBRARY[section], f"{section}.{name}")
    units = {"v": "V", "ripple": "A", "ripple_frequency": "Hz", "esr": "ohm", "i": "A", "dcr": "ohm", "w": "W"}
    vals = {k: lib_rd.value(entry, k, f"{section}.{name}", units[k], minimum=0, maximum=1e6) for k in entry}
    extra = {k: v for k, v in vals.items() if k in ("esr", "dcr") and v is not None}
    rating = PartRating(**{k: v for k, v in vals.items() if k not in ("esr", "dcr")},  # type: ignore[arg-type]
                        source=f"{name} in {rd.library_file}")
    return rating, extra


def _regulator(rd: _Reader, data: Mapping[str, Any]) -> Regulator | None:
    t = rd.table(data, "regulator", "regulator", required=False)
    if t is None:
        return None
    path = "regulator"
    rd.check_keys(t, schema.REGULATOR, path)
    kind = rd.choice(t, "kind", path, ("shunt", "series"))
    if kind == "shunt":
        rd.refuse(t, ("reference", "reference_current", "filter_r", "filter_c", "gate_resistor", "gate_zener",
                      "device", "headroom"), path, 'belongs to kind "series"')
        rd.need(t, "resistance", path, 'the dropping resistor, e.g. resistance = "4.7k"')
        res = rd.value(t, "resistance", path, "ohm", above=0, maximum=1e9)
        rr = _rating(rd, t, "resistor_rating", path, "r")
        if ("zener" in t) == ("tube" in t):
            raise rd.fail(f"{path}.zener", 'a shunt regulator needs either zener = { voltage = ... } or tube = "OD3"')
        if "tube" in t:
            name = rd.text(t, "tube", path, "")
            part = regulators.glow(name)
            if part is None:
                near = difflib.get_close_matches(name.upper(), list(regulators.GLOW), n=1, cutoff=0.4)
                hint = f"; did you mean {near[0]!r}?" if near else f"; the library has {', '.join(regulators.GLOW)}"
                raise rd.fail(f"{path}.tube", f"{_show(name)} is not a glow tube of the library{hint}")
            count = rd.integer(t, "count", path, default=1, minimum=1, maximum=10)
            g = GlowSpec(part.name, count, part.maintaining, part.striking, part.extinction, part.i_min,
                         part.i_max, part.resistance, part.source)
            return Regulator(kind="shunt", resistance=res, resistor_rating=rr, glow=g)
        rd.refuse(t, ("count",), path, "count of glow tubes; a zener string says count inside zener = { ... }")
        zen = _zener(rd, t["zener"], f"{path}.zener")
        return Regulator(kind="shunt", resistance=res, resistor_rating=rr, zener=zen)
    rd.refuse(t, ("resistance", "resistor_rating", "tube", "count"), path, 'belongs to kind "shunt"')
    if "reference" not in t and "zener" not in t:
        raise rd.fail(f"{path}.reference", 'missing key: the reference voltage, e.g. reference = "250"')
    if "zener" in t:
        z = _zener(rd, t["zener"], f"{path}.zener")
        if "reference" in t:
            raise rd.fail(f"{path}.reference", "give reference or zener = { ... }, not both")
        ref = z.voltage * z.count
    else:
        ref = rd.value(t, "reference", path, "V", above=0, maximum=100e3)
        assert ref is not None
        n = max(1, math.ceil(ref / 200.0))  # a string of zeners of up to 200 V each
        z = Zener(voltage=ref / n, count=n, resistance=ref / n / 20.0)
    dev = _device(rd, t.get("device", "IRF840"), f"{path}.device")

    def v(key: str, unit: str, default: float, lo: float, hi: float) -> float:
        out = rd.value(t, key, path, unit, default=default, above=lo, maximum=hi)
        assert out is not None
        return out

    return Regulator(kind="series", zener=z, reference=ref, device=dev,
                     reference_current=v("reference_current", "A", 2e-3, 0, 1.0),
                     filter_r=v("filter_r", "ohm", 100e3, 0, 1e9), filter_c=v("filter_c", "F", 1e-6, 0, 1.0),
                     gate_resistor=v("gate_resistor", "ohm", 1e3, 0, 1e7),
                     gate_zener=v("gate_zener", "V", 15.0, 0, 100),
                     headroom=v("headroom", "V", 5.0, 0, 1e3))


def _zener(rd: _Reader, raw: Any, path: str) -> Zener:
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected {{ voltage = "75", count = 2 }}, got {_show(raw)}')
    allowed = {"voltage": schema.Key("V", "each zener", required=True), "count": schema.Key("int", "in series"),
               "resistance": schema.Key("ohm", "dynamic resistance each"), "power": schema.Key("W", "rating each")}
    rd.check_keys(raw, allowed, path)
    vz = rd.value(raw, "voltage", path, "V", above=0, maximum=1000)
    count = rd.integer(raw, "count", path, default=1, minimum=1, maximum=50)
    assert vz is not None
    rz = rd.value(raw, "resistance", path, "ohm", default=max(vz / 20.0, 1.0), above=0, maximum=1e5)
    pw = rd.value(raw, "power", path, "W", above=0, maximum=1e3)
    assert rz is not None
    return Zener(voltage=vz, count=count, resistance=rz, power=pw)


def _device(rd: _Reader, raw: Any, path: str) -> PassDevice:
    if isinstance(raw, str):
        m = regulators.mosfet(raw)
        if m is None:
            raise rd.fail(path, f"{_show(raw)} is not a MOSFET of the library ({', '.join(regulators.MOSFETS)}); "
                          'or give it inline: { vto = "3.5", kp = "2.5" }')
        return PassDevice(m.name, m.vto, m.kp, m.vdss, m.id_max, m.pd, m.source)
    if not isinstance(raw, dict):
        raise rd.fail(path, f'expected a library name or {{ vto = "3.5", kp = "2.5" }}, got {_show(raw)}')
    allowed = {"vto": schema.Key("V", "threshold", required=True), "kp": schema.Key("", "A/V^2", required=True),
               "vdss": schema.Key("V", "rating"), "id": schema.Key("A", "rating"), "pd": schema.Key("W", "rating")}
    rd.check_keys(raw, allowed, path)
    vto = rd.value(raw, "vto", path, "V", above=0, maximum=20)
    kp = rd.value(raw, "kp", path, "", above=0, maximum=1e3)
    assert vto is not None and kp is not None
    return PassDevice("inline", vto, kp, rd.value(raw, "vdss", path, "V", above=0),
                      rd.value(raw, "id", path, "A", above=0), rd.value(raw, "pd", path, "W", above=0),
                      "given in the design file")


def _checks(rd: _Reader, data: Mapping[str, Any]) -> CheckPolicy:
    t = rd.table(data, "checks", "checks", required=False)
    if t is None:
        return CheckPolicy()
    rd.check_keys(t, schema.CHECKS, "checks")
    d = CheckPolicy()

    def share(key: str, default: float) -> float:
        v = rd.percent(t, key, "checks", maximum=1.0 + 1e-12)
        if v is not None and v <= 0:
            raise rd.fail(f"checks.{key}", "must be above 0%")
        return default if v is None else v

    sv = rd.value(t, "safe_voltage", "checks", "V", default=d.safe_voltage, above=0, maximum=1e5)
    st = rd.value(t, "safe_time", "checks", "s", default=d.safe_time, above=0, maximum=3600)
    assert sv is not None and st is not None
    return CheckPolicy(diode_voltage=share("diode_voltage", d.diode_voltage),
                       capacitor_voltage=share("capacitor_voltage", d.capacitor_voltage),
                       resistor_power=share("resistor_power", d.resistor_power),
                       marginal=share("marginal", d.marginal),
                       safe_voltage=sv, safe_time=st)


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
    steps = rd.integer(t, "steps_per_period", "simulation", 0, 50, 100000) if "steps_per_period" in t else None
    tol = rd.value(t, "settle_tolerance", "simulation", "", default=d.settle_tolerance,
                   above=0, maximum=0.1)
    max_t = rd.value(t, "max_settle_time", "simulation", "s", above=0, maximum=3600)
    on_t = rd.value(t, "switch_on_time", "simulation", "s", above=0, maximum=3600)
    reltol = rd.value(t, "reltol", "simulation", "", default=d.reltol, minimum=1e-8, maximum=1e-2)
    max_points = rd.value(t, "max_points", "simulation", "", default=d.max_points, minimum=1e4, maximum=1e10)
    assert phase is not None and tol is not None and reltol is not None and max_points is not None
    if not math.isfinite(phase):
        raise rd.fail("simulation.switch_on_phase", "must be a finite angle in degrees")
    return SimulationOptions(switch_on_phase=phase, steps_per_period=steps, settle_tolerance=tol,
                             max_settle_time=max_t, switch_on_time=on_t, reltol=reltol,
                             max_points=max_points)


def design_to_inputs(design: Design) -> dict[str, Any]:
    """The resolved design as plain JSON-ready data (SI floats), for ``inputs`` in results."""
    from dataclasses import asdict

    d = asdict(design)
    d.pop("origin", None)
    diode = d["rectifier"]["diode"]
    diode["is"] = diode.pop("is_")
    return d
