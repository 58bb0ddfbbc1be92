"""Rows of a sweep or spread as result files: ``<kind>.csv`` and ``<kind>.json``, rebuilt from the journal.

Columns, in order: ``point``; the varied (or drawn) values, named by their PATH, in SI units;
every figure, named by its key (in the order of the figures table, then any further keys); with ``--check``, the
point's overall verdict ``check`` and one ``check:PART RULE`` column per rule (pass, marginal,
fail); ``warnings``; ``error``.
A row whose point failed has empty figure cells and the reason in ``error``.
"""

from __future__ import annotations

import csv
import io
import json
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from simkit import __version__
from simkit.figures import FIGURES

#: Prefix of the per-rule verdict columns (``check:D1 reverse voltage``).
VERDICT_PREFIX = "check:"


def figure_columns(entries: Iterable[Mapping[str, Any]]) -> list[str]:
    """Figure keys of the rows: the figures table's order first, then any further keys in name order."""
    seen: set[str] = set()
    for e in entries:
        seen.update((e.get("metrics") or {}).keys())
    if not seen:
        return list(FIGURES)
    return [k for k in FIGURES if k in seen] + sorted(seen - set(FIGURES))


def verdict_columns(entries: Iterable[Mapping[str, Any]]) -> list[str]:
    """``check`` and one column per rule, when any row was checked (``--check``)."""
    seen: dict[str, None] = {}
    checked = False
    for e in entries:
        checked = checked or bool(e.get("check"))
        for k in (e.get("verdicts") or {}):
            seen.setdefault(k, None)
    return ["check", *(VERDICT_PREFIX + k for k in seen)] if checked or seen else []


def cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ""
    return str(v)


def one_line(text: str | None, limit: int = 400) -> str:
    """An error as a CSV cell: one line, not too long (the JSON keeps the whole text)."""
    if not text:
        return ""
    flat = " / ".join(s.strip() for s in text.strip().splitlines() if s.strip())
    return flat if len(flat) <= limit else flat[: limit - 3] + "..."


def flat_rows(inputs: Sequence[str], entries: Sequence[Mapping[str, Any]],
              no_figure: Any = None) -> list[dict[str, Any]]:
    """One flat dict per row, keys in column order: ``point``, the inputs, every figure (``no_figure``
    where a row has none), the verdict columns, ``warnings`` (a list) and ``error``."""
    figs = figure_columns(entries)
    verdicts = verdict_columns(entries)
    rows = []
    for e in entries:
        values = e.get("values") or {}
        metrics = e.get("metrics") or {}
        given = e.get("verdicts") or {}
        row: dict[str, Any] = {"point": e["point"]}
        row.update({p: values.get(p) for p in inputs})
        row.update({k: no_figure if metrics.get(k) is None else metrics[k] for k in figs})
        row.update({k: e.get("check") if k == "check" else given.get(k[len(VERDICT_PREFIX):]) for k in verdicts})
        row["warnings"] = list(e.get("warnings") or [])
        row["error"] = e.get("error")
        rows.append(row)
    return rows


def csv_text(inputs: Sequence[str], entries: Sequence[Mapping[str, Any]]) -> str:
    """The CSV of finished rows, in point order."""
    columns = ["point", *inputs, *figure_columns(entries), *verdict_columns(entries), "warnings", "error"]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for row in flat_rows(inputs, entries):
        # Warnings and error (always the last two columns) become one line each: a CSV cell.
        w.writerow([*(cell(row[k]) for k in columns[:-2]), one_line("; ".join(row["warnings"])),
                    one_line(row["error"])])
    return buf.getvalue()


def json_document(kind: str, header: Mapping[str, Any], inputs: Sequence[str], entries: Sequence[Mapping[str, Any]],
                  total: int, extra: Mapping[str, Any] | None = None) -> str:
    """The JSON result: what the run is, its rows (whole error texts), and ``extra`` (a spread's summary)."""
    failed = sum(1 for e in entries if e.get("error"))
    rows = [{"point": e["point"], "values": e.get("values") or {}, "metrics": e.get("metrics") or {},
             **({"check": e.get("check"), "verdicts": e.get("verdicts") or {}} if e.get("check") else {}),
             "warnings": e.get("warnings") or [], "error": e.get("error"), "seconds": e.get("seconds")}
            for e in entries]
    doc: dict[str, Any] = {
        "simkit": __version__,
        "kind": kind,
        **header,
        "inputs": list(inputs),
        "columns": ["point", *inputs, *figure_columns(entries), *verdict_columns(entries), "warnings", "error"],
        "points": total,
        "finished": len(entries),
        "failed": failed,
        "complete": len(entries) == total,
        **(dict(extra) if extra else {}),
        "rows": rows,
    }
    return json.dumps(doc, indent=1, allow_nan=False) + "\n"
