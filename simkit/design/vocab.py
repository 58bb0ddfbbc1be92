"""How the design model declares its file vocabulary, and the one reader that reads every section from it.

Every field of the design model that a design file sets carries a :class:`Key` in its
dataclass metadata (made with :func:`key`): the name in the file, the unit, what it means,
its default as a user would write it, its bounds or choices.  :func:`read_section` reads a
TOML table into a model class from those keys alone; a class adds only what no single key
can say, in two optional class methods beside its fields:

- ``refuse(rd, table, path)``: keys that must not be there together, before any value is read;
- ``rules(obj, rd, table, path)``: rules across fields, on the values read.

The same keys drive the user reference's tables (``simkit.docgen``), the templates of
``simkit new``, the report's inputs table and the sweep plots' axis labels, so a key is
declared once.  Every mistake becomes one :class:`~simkit.errors.DesignError` naming the
file, the key as ``--set`` spells it, and what was expected.
"""

from __future__ import annotations

import dataclasses
import difflib
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, ClassVar

from simkit.errors import DesignError
from simkit.units import UnitError, parse_percent, parse_value, type_name

#: A key's value when the file does not give it and it has no default: required, or None.
MISSING = dataclasses.MISSING

#: How each unit is named in the reference's tables.
UNIT_WORDS: dict[str, str] = {
    "V": "volts", "A": "amperes", "ohm": "ohms", "F": "farads", "H": "henries", "Hz": "hertz", "s": "seconds",
    "W": "watts", "Ah": "ampere-hours", "VA": "volt-amperes", "%": "percent", "deg": "degrees",
    "int": "whole number", "str": "text", "bool": "true/false", "list": "list", "table": "table",
    "array": "[[array]]", "diode": "name or table", "choice": "one of", "": "number",
}

#: Units a value is parsed in (the rest are read by type).
_NUMERIC = ("V", "A", "ohm", "F", "H", "Hz", "s", "W", "Ah", "", "deg")

#: Units that are physical quantities (shown beside numbers in labels and tables).
QUANTITY_UNITS = ("V", "A", "ohm", "F", "H", "Hz", "s", "W", "Ah", "VA", "deg")


@dataclass(frozen=True)
class Key:
    """One design-file key: everything the reader, the docs and the templates need to know."""

    name: str  # as written in the file and in --set paths
    unit: str  # a unit of simkit.units, or "%", "int", "bool", "str", "choice", "table", "list", ...
    doc: str
    required: bool = False
    need: str = ""  # what a "missing key" message explains
    shown: str | None = None  # the default as a user would write it (None: no default)
    minimum: float | None = None  # value >= minimum ("zero or more", "at least")
    above: float | None = None  # value > above ("positive", "above")
    maximum: float | None = None
    choices: tuple[str, ...] = ()
    percent_max: float = 0.5  # "%" keys: 0 <= value < percent_max
    what: str = ""  # appended to a bound message
    reader: Callable[[Reader, Any, str, Mapping[str, Any]], Any] | None = None  # values no unit parses:
    # (reader, value, dotted path, the table holding it)
    example: str = ""  # a value as a user would write it, for templates and messages
    text_default: Any = None  # a default that must be read like a value (a library part's name)
    of: tuple[type, ...] = ()  # a table's or list's model classes (the kinds of a tagged union)
    label: str = ""  # a few words for axes and legends when the doc's first clause is too long

    @property
    def words(self) -> str:
        """What the key is in a few words: ``label``, or the doc's first clause without a scope prefix
        (``"doubler and cascade: each stage capacitor"`` -> ``"each stage capacitor"``)."""
        if self.label:
            return self.label
        text = self.doc.split(";")[0].split(" (")[0].split(", e.g.")[0]
        return text.split(": ", 1)[1] if ": " in text else text


def key(name: str, unit: str, doc: str, default: Any = MISSING, **kw: Any) -> Any:
    """A model field that the design file sets: its :class:`Key` in the metadata.

    ``default`` is the field's value when the file leaves the key out (SI); ``shown`` (keyword)
    is how the reference writes that default.
    """
    k = Key(name, unit, doc, **kw)
    if default is MISSING:
        return dataclasses.field(metadata={"key": k})
    return dataclasses.field(default=default, metadata={"key": k})


def keys(cls: type) -> dict[str, tuple[str, Key]]:
    """The file keys of a model class, in declaration order: name -> (field name, Key)."""
    out: dict[str, tuple[str, Key]] = {}
    for f in dataclasses.fields(cls):
        k = f.metadata.get("key")
        if k is not None:
            out[k.name] = (f.name, k)
    return out





def show(v: Any) -> str:
    """A value as a message quotes it: never more than 60 characters."""
    text = repr(v)
    return text if len(text) <= 60 else text[:57] + "..."


def listing(choices: Sequence[str]) -> str:
    return ", ".join(f'"{c}"' for c in choices)


class Reader:
    """Reads keys and says precisely what is wrong with one: the file, the key, what was expected."""

    #: Spellings accepted for a choice, for what people write.
    ALIASES: ClassVar[dict[str, str]] = {"center-tap": "centre-tap", "halfwave": "half-wave",
                                         "full-wave-bridge": "bridge"}

    def __init__(self, file: str) -> None:
        self.file = file
        self.library: dict[str, Any] = {}  # the user's part library file, when the design names one
        self.library_file = ""
        #: Readers of value types the model names but cannot read itself (library parts): by unit.
        self.readers: dict[str, Callable[[Reader, Any, str, Mapping[str, Any]], Any]] = {}

    def fail(self, key: str, problem: str) -> DesignError:
        return DesignError(problem, file=self.file, key=key or None)

    # -- sections -------------------------------------------------------------------------------

    def table(self, parent: Mapping[str, Any], key: str, path: str, required: bool) -> dict[str, Any] | None:
        if key not in parent:
            if required:
                raise self.fail(path, f"missing section [{path}]")
            return None
        value = parent[key]
        if not isinstance(value, dict):
            raise self.fail(path, f"expected a table [{path}], got {type_name(value)}")
        return value

    def check_keys(self, table: Mapping[str, Any], allowed: Mapping[str, Any], path: str,
                   required: bool = True) -> None:
        """Unknown keys (with the nearest known one), then required ones missing."""
        for name in table:
            if name not in allowed:
                shown = name if name.isprintable() else repr(name)  # a quoted TOML key may hold anything
                full = f"{path}.{shown}" if path else shown
                near = difflib.get_close_matches(name, list(allowed), n=1, cutoff=0.6)
                hint = f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(allowed)}"
                raise self.fail(full, f"unknown key{hint}")
        if not required:
            return
        for name, spec in allowed.items():
            k = spec[1] if isinstance(spec, tuple) else spec
            if k.required and name not in table:
                full = f"{path}.{name}" if path else name
                if k.unit in ("table", "array"):
                    raise self.fail(full, f"missing section [{full}] ({k.doc})")
                raise self.fail(full, f"missing key: {k.need or k.doc}")

    # -- values ---------------------------------------------------------------------------------

    def value(self, table: Mapping[str, Any], name: str, path: str, unit: str, *, default: float | None = None,
              minimum: float | None = None, above: float | None = None, maximum: float | None = None,
              what: str = "") -> float | None:
        full = f"{path}.{name}" if path else name
        if name not in table:
            return default
        try:
            v = parse_value(table[name], unit)
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

    def percent(self, table: Mapping[str, Any], name: str, path: str, maximum: float = 0.5) -> float | None:
        """A tolerance such as "10%" as a fraction in [0, maximum)."""
        full = f"{path}.{name}" if path else name
        if name not in table:
            return None
        try:
            v = parse_percent(table[name])
        except UnitError as exc:
            raise self.fail(full, str(exc)) from None
        if not 0 <= v < maximum:
            raise self.fail(full, f"must be between 0% and {maximum * 100:g}%, got {v * 100:g}%")
        return v

    def integer(self, table: Mapping[str, Any], name: str, path: str, default: int, minimum: int,
                maximum: int) -> int:
        full = f"{path}.{name}" if path else name
        if name not in table:
            return default
        v = table[name]
        if isinstance(v, bool) or not isinstance(v, int):
            if isinstance(v, float) and v.is_integer():
                v = int(v)
            elif isinstance(v, str) and v.strip().isdigit():
                v = int(v.strip())
            else:
                raise self.fail(full, f"expected a whole number, got {show(v)}")
        if v < minimum or v > maximum:
            raise self.fail(full, f"must be between {minimum} and {maximum}, got {v}")
        return int(v)

    def choice(self, table: Mapping[str, Any], name: str, path: str, choices: Sequence[str],
               default: str | None = None) -> str:
        full = f"{path}.{name}" if path else name
        if name not in table:
            if default is None:
                raise self.fail(full, f"missing key; one of {listing(choices)}")
            return default
        v = table[name]
        if not isinstance(v, str):
            raise self.fail(full, f"expected one of {listing(choices)}, got {show(v)}")
        norm = v.strip().lower().replace("_", "-")
        norm = self.ALIASES.get(norm, norm)
        if norm not in choices:
            near = difflib.get_close_matches(norm, list(choices), n=1, cutoff=0.5)
            hint = f"; did you mean {near[0]!r}?" if near else ""
            raise self.fail(full, f"{show(v)} is not one of {listing(choices)}{hint}")
        return norm

    def boolean(self, table: Mapping[str, Any], name: str, path: str, default: bool) -> bool:
        full = f"{path}.{name}" if path else name
        if name not in table:
            return default
        v = table[name]
        if isinstance(v, str) and v.strip().lower() in ("true", "false"):
            return v.strip().lower() == "true"
        if not isinstance(v, bool):
            raise self.fail(full, f"expected true or false, got {show(v)}")
        return v

    def need(self, table: Mapping[str, Any], name: str, path: str, why: str) -> None:
        if name not in table:
            raise self.fail(f"{path}.{name}", f"missing key: {why}")

    def refuse(self, table: Mapping[str, Any], names: Sequence[str], path: str, why: str) -> None:
        for name in names:
            if name in table:
                raise self.fail(f"{path}.{name}", why)

    def text(self, table: Mapping[str, Any], name: str, path: str, default: str) -> str:
        full = f"{path}.{name}" if path else name
        if name not in table:
            return default
        v = table[name]
        if not isinstance(v, str):
            raise self.fail(full, f"expected text in quotes, got {show(v)}")
        return v

    def read(self, table: Mapping[str, Any], k: Key, path: str, default: Any = None) -> Any:
        """One key's value, read the way its Key says."""
        full = f"{path}.{k.name}" if path else k.name
        custom = k.reader or self.readers.get(k.unit)
        if custom is not None:
            return custom(self, table[k.name], full, table) if k.name in table else default
        if k.unit == "%":
            v = self.percent(table, k.name, path, maximum=k.percent_max)
            return default if v is None else v
        if k.unit == "int":
            lo = int(k.minimum) if k.minimum is not None else 0
            hi = int(k.maximum) if k.maximum is not None else 10**9
            return self.integer(table, k.name, path, default, lo, hi)
        if k.unit == "bool":
            return self.boolean(table, k.name, path, default)
        if k.unit == "choice":
            return self.choice(table, k.name, path, k.choices, default)
        if k.unit == "str":
            return self.text(table, k.name, path, default)
        if k.unit in _NUMERIC:
            unit = "" if k.unit == "deg" else k.unit
            return self.value(table, k.name, path, unit, default=default, minimum=k.minimum, above=k.above,
                              maximum=k.maximum, what=k.what)
        raise TypeError(f"no reader for the unit {k.unit!r} of {full}")  # pragma: no cover - a model bug


def fields_of(rd: Reader, cls: type, table: Mapping[str, Any], path: str) -> dict[str, Any]:
    """Every keyed field of ``cls`` read from ``table`` (absent ones take the field's default)."""
    out: dict[str, Any] = {}
    for f in dataclasses.fields(cls):
        k = f.metadata.get("key")
        if k is None:
            continue
        if k.name not in table:
            if k.required:
                raise rd.fail(f"{path}.{k.name}" if path else k.name, f"missing key: {k.need or k.doc}")
            if k.text_default is not None:
                out[f.name] = rd.read({k.name: k.text_default}, k, path)
            elif f.default is not MISSING:
                out[f.name] = f.default
            continue
        out[f.name] = rd.read(table, k, path, None if f.default is MISSING else f.default)
    return out


def read_section(rd: Reader, cls: type, table: Mapping[str, Any], path: str, **extra: Any) -> Any:
    """Read one table into ``cls``: unknown keys, the class's refusals, every key, the class's rules.

    ``extra`` are fields the file does not set (given by the context, e.g. a load's name).
    """
    rd.check_keys(table, keys(cls), path, required=False)
    return _build(rd, cls, table, path, extra)


def _build(rd: Reader, cls: type, table: Mapping[str, Any], path: str, extra: Mapping[str, Any]) -> Any:
    """The class's refusals on the raw table, every key read, the object made, the class's rules on it.

    ``extra`` fields the file does not give (a transformer's topology) go to the classes that have them.
    """
    refuse = getattr(cls, "refuse", None)
    if refuse is not None:
        refuse(rd, table, path)
    names = {f.name for f in dataclasses.fields(cls)}
    obj = cls(**fields_of(rd, cls, table, path), **{k: v for k, v in extra.items() if k in names})
    rules = getattr(cls, "rules", None)
    if rules is not None:
        rules(obj, rd, table, path)
    return obj


def kinds_keys(kinds: Sequence[type]) -> dict[str, tuple[str, Key]]:
    """The keys of every kind of a tagged union (a key name shared by kinds appears once)."""
    out: dict[str, tuple[str, Key]] = {}
    for cls in kinds:
        for name, spec in keys(cls).items():
            out.setdefault(name, spec)
    return out


def read_kind(rd: Reader, kinds: Sequence[type], table: Mapping[str, Any], path: str,
              foreign: Callable[[str, type, type | None], str], default: str | None = None,
              **extra: Any) -> Any:
    """Read a table that is one of several kinds, chosen by its ``kind`` key.

    ``foreign(key, chosen, owner)`` words the message for a key that belongs to another kind
    (``owner``, or None when several kinds have it).
    """
    allowed = {"kind": None, **kinds_keys(kinds)}
    rd.check_keys(table, allowed, path, required=False)
    names = tuple(c.kind for c in kinds)  # type: ignore[attr-defined]
    kind = rd.choice(table, "kind", path, names, default=default)
    cls = kinds[names.index(kind)]
    own = keys(cls)
    for name in table:
        if name != "kind" and name not in own:
            owners = [c for c in kinds if name in keys(c)]
            raise rd.fail(f"{path}.{name}", foreign(name, cls, owners[0] if len(owners) == 1 else None))
    return _build(rd, cls, table, path, extra)



def key_at(root: type, path: str) -> Key | None:
    """The Key a dotted path names (``filter.0.c``, ``load.down.i``, ``source.vrms``), from a root class.

    List positions are skipped; a tagged union is searched kind by kind.
    """
    classes: tuple[type, ...] = (root,)
    found: Key | None = None
    for part in path.split("."):
        if part.isdigit():
            continue
        found = None
        for cls in classes:
            spec = keys(cls).get(part)
            if spec is not None:
                found = spec[1]
                break
        if found is None:
            return None
        classes = found.of
    return found


def all_keys(root: type, prefix: str = "") -> Iterator[tuple[str, Key, type]]:
    """Every key below a root class as (dotted path, Key, the class declaring it), depth first; a union's
    kinds in turn (a key shared by kinds once)."""
    seen: set[str] = set()
    for f in dataclasses.fields(root):
        k = f.metadata.get("key")
        if k is None:
            continue
        path = f"{prefix}.{k.name}" if prefix else k.name
        if path in seen:
            continue
        seen.add(path)
        yield path, k, root
        for cls in k.of:
            for sub in all_keys(cls, path):
                if sub[0] not in seen:
                    seen.add(sub[0])
                    yield sub



def value_rows(obj: Any, prefix: str = "") -> Iterator[tuple[str, Any, Key]]:
    """Every value a design object holds, as (``--set`` path, value, Key), depth first.

    A table's kind comes first as ``PATH.kind``; lists give ``PATH.0``, ``PATH.1``...; values
    that are None or empty are left out; a value that is itself a described object without keys
    (a library part) is given whole (the caller shows its name).
    """
    for f in dataclasses.fields(obj):
        k = f.metadata.get("key")
        if k is None:
            continue
        v = getattr(obj, f.name)
        path = f"{prefix}.{k.name}" if prefix else k.name
        if v is None or v == () or v == "":
            continue
        items = list(enumerate(v)) if isinstance(v, tuple) and v and dataclasses.is_dataclass(v[0]) else None
        if items is not None:
            for i, item in items:
                yield from _object_rows(item, f"{path}.{i}", k)
        elif dataclasses.is_dataclass(v) and not isinstance(v, type):
            yield from _object_rows(v, path, k)
        else:
            yield path, v, k


def _object_rows(v: Any, path: str, k: Key) -> Iterator[tuple[str, Any, Key]]:
    kind = getattr(type(v), "kind", None)
    if isinstance(kind, str):
        yield f"{path}.kind", kind, Key("kind", "str", "which kind")
    if any(f.metadata.get("key") for f in dataclasses.fields(v)):
        yield from value_rows(v, path)
    else:
        yield path, v, k
