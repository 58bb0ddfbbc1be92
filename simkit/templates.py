"""Starting design files for ``simkit new``: values per topology, comments from the design vocabulary.

Each line's comment is the key's own description (:mod:`simkit.design.vocab`), so a template never
says something the reference does not.
"""

from __future__ import annotations

from typing import Any

from simkit.design.model import TOPOLOGIES, Design
from simkit.design.vocab import key_at

#: The winding of every template: a small mains transformer, written as its open-circuit EMF.
_SOURCE = {"kind": "sine", "vrms": "250", "frequency": "50", "resistance": "40", "inductance": "0",
           "mains_tolerance": "10%"}

#: Per topology: the source values that differ from _SOURCE, the rectifier table, the filter sections.
_BODY: dict[str, tuple[dict[str, Any], dict[str, Any], list[dict[str, Any]]]] = {
    "half-wave": ({}, {"topology": "half-wave", "diode": "1N4007"}, [{"c": "100u", "esr": "0.3"}]),
    "centre-tap": ({}, {"topology": "centre-tap", "diode": "1N4007"},
                   [{"c": "47u", "esr": "0.3"}, {"r": "1k"}, {"c": "47u"}]),
    "bridge": ({"resistance": "25"}, {"topology": "bridge", "diode": "1N4007"},
               [{"c": "100u", "esr": "0.3"}, {"l": "5", "dcr": "100"}, {"c": "47u"}]),
    "doubler": ({"vrms": "120", "resistance": "5"},
                {"topology": "doubler", "diode": "1N4007", "capacitance": "220u"}, []),
    "cascade": ({"vrms": "120", "resistance": "5"},
                {"topology": "cascade", "stages": 2, "diode": "1N4007", "capacitance": "47u"}, []),
}

_LOAD = {"kind": "resistor", "r": "5k"}
_BLEEDER = {"r": "100k"}


def _value(v: Any) -> str:
    return str(v).lower() if isinstance(v, bool) else (str(v) if isinstance(v, int) else f'"{v}"')


def _lines(path: str, table: dict[str, Any]) -> list[str]:
    """``key = value  # what it is`` for each key of a table, aligned."""
    body = [f"{k} = {_value(v)}" for k, v in table.items()]
    width = max(len(b) for b in body) + 2
    out = []
    for (k, _), b in zip(table.items(), body, strict=True):
        spec = key_at(Design, path if k == "kind" else f"{path}.{k}")  # a kind line: what the table is
        doc = spec.doc if spec is not None else ""
        out.append(f"{b:<{width}}# {doc}" if doc else b)
    return out


def template(topology: str) -> str:
    """A complete, valid design file for one rectifier topology (one of TOPOLOGIES)."""
    if topology not in TOPOLOGIES:
        raise ValueError(f"no template for topology {topology!r}; one of {', '.join(TOPOLOGIES)}")
    source_changes, rectifier, filters = _BODY[topology]
    parts = [f"# A starting {topology} design written by `simkit new`: edit the values, then `simkit run` it.",
             "# docs/reference.md lists every key; each comment here is that key's description there.",
             f'title = "New {topology} supply"', "", "[source]",
             *_lines("source", {**_SOURCE, **source_changes}), "", "[rectifier]",
             *_lines("rectifier", rectifier)]
    for section in filters:
        parts += ["", "[[filter]]", *_lines("filter", section)]
    parts += ["", "[load]", *_lines("load", _LOAD), "", "[bleeder]", *_lines("bleeder", _BLEEDER)]
    return "\n".join(parts) + "\n"
