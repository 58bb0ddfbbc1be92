"""The Python API for notebooks and scripts: load a design, run it, check it, sweep it, compare designs.

Five functions, each the counterpart of a command, and the objects they return::

    load(path_or_toml_text, set={...})   -> Design      (simkit run's reading and --set)
    run(design, mains="nominal")          -> Result      (simkit run --json)
    check(design)                         -> Verdicts    (simkit check --json)
    sweep(design, vary={...}, jobs=1)     -> Sweep       (simkit sweep)
    compare(design, design, ...)          -> Comparison  (simkit compare)

``import simkit`` costs almost nothing: the package exposes these names lazily and this module
loads the simulator only when a design is run.  Errors are the command line's: a
:class:`simkit.errors.DesignError` names the file, the key and the problem (exit 2 there), a
:class:`simkit.errors.SimulationError` says why ngspice could not finish (exit 3 there).

Example
-------
>>> import simkit
>>> design = simkit.load(simkit.example("bench_amp_bridge_clc"), set={"load.r": "4k"})
>>> result = simkit.run(design)
>>> 350 < result.figures["vout_dc_v"] < 420          # volts, as run --json says
True
>>> time, value = result.waveform("out")             # the output over the last period
>>> bool(abs(result.waveform("out").mean() - result.figures["vout_dc_v"]) < 1e-9)
True

HIGH VOLTAGE: these supplies can kill; the figures are a simulation, not a guarantee that a built
supply is safe (see :data:`simkit.safety.CAUTIONS`).
"""

from __future__ import annotations

import base64
import html
import json
import math
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

from simkit.design import model
from simkit.design.loader import apply_overrides, design_from_dict, parse_toml_text, read_design_text
from simkit.errors import UsageError
from simkit.figures import FIGURES
from simkit.progress import Callback as Progress  # (what, simulated time done, time to do or None)
from simkit.safety import CAUTION_POINTS

if TYPE_CHECKING:
    from simkit.checks import CheckReport
    from simkit.pipeline import RunResult
    from simkit.pipeline.probes import Waveform
    from simkit.sidebyside import Comparison

__all__ = ["Design", "Result", "Sweep", "Verdicts", "check", "compare", "example", "load", "run", "sweep"]

#: Figures a notebook table of a sweep shows first (every figure is in ``rows`` and the CSV).
SWEEP_SHOWN = ("vout_dc_v", "ripple_pp_v", "iout_dc_a", "diode_peak_a", "diode_piv_v", "surge_peak_a")

#: A progress callback: (what is running, simulated time done, simulated time to do or None), in s.


def example(name: str) -> Path:
    """The path of a design shipped with simkit (invented for demonstration), by its file name.

    >>> example("bench_amp_bridge_clc").name
    'bench_amp_bridge_clc.toml'
    """
    root = Path(str(resources.files("simkit") / "examples"))
    stem = name.removesuffix(".toml")
    path = root / f"{stem}.toml"
    if not path.is_file():
        have = ", ".join(sorted(p.stem for p in root.glob("*.toml")))
        raise UsageError(f"no example called {name!r}; the examples are: {have}")
    return path


# -- designs ---------------------------------------------------------------------------------------


def _toml_literal(value: Any) -> str:
    """A Python value as ``--set`` reads it: numbers and booleans as TOML, lists and tables inline,
    strings as written (``"220u"`` stays engineering text, ``"3"`` becomes the number 3, as on the command line)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        if isinstance(value, float) and not math.isfinite(value):
            return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
        return repr(value)
    if isinstance(value, str):
        return value
    if isinstance(value, Mapping):
        return "{" + ", ".join(f"{json.dumps(str(k))} = {_inline(v)}" for k, v in value.items()) + "}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_inline(v) for v in value) + "]"
    raise UsageError(f"set: a value of type {type(value).__name__} cannot go into a design file "
                     "(give a number, a string, a bool, a list or a dict)")


def _inline(value: Any) -> str:
    """A value inside a TOML list or inline table: strings quoted."""
    return json.dumps(value) if isinstance(value, str) else _toml_literal(value)


def overrides_of(changes: Mapping[str, Any] | None) -> tuple[str, ...]:
    """``{"filter.0.c": "100u"}`` as the ``PATH=VALUE`` strings of ``--set``."""
    if not changes:
        return ()
    if not isinstance(changes, Mapping):
        raise UsageError("set: give a dict of PATH: VALUE, e.g. {\"filter.0.c\": \"100u\"}")
    return tuple(f"{path}={_toml_literal(value)}" for path, value in changes.items())


@dataclass(frozen=True)
class Design:
    """A design read and checked, as ``simkit run`` reads it (every value SI in :attr:`model`).

    Attributes
    ----------
    model : simkit.design.model.Design
        The validated design: ``design.model.filters[0].c`` is the first capacitor in farads.
        Its sections are also reachable directly: ``design.source``, ``design.filters``.
    data : dict
        The design file's tables with the overrides applied (what sweeps change).
    text : str
        The design file as written.
    origin : str
        The file it came from, or ``"<text>"``.
    overrides : tuple of str
        The ``PATH=VALUE`` changes made on top of the file.
    """

    model: model.Design
    data: dict[str, Any] = field(repr=False)
    text: str = field(repr=False)
    origin: str = "<text>"
    overrides: tuple[str, ...] = ()

    @property
    def title(self) -> str:
        return self.model.title

    @property
    def path(self) -> Path | None:
        """The design file, or None for a design given as text."""
        return None if self.origin.startswith("<") else Path(self.origin)

    def with_set(self, set: Mapping[str, Any]) -> Design:
        """The same design with more values changed (``--set`` on top of the ones already made).

        >>> d = load(example("bench_amp_bridge_clc"))
        >>> d.with_set({"filter.0.c": "100u"}).model.filters[0].c
        0.0001
        """
        return _build(self.text, self.origin, self._base_data(), (*self.overrides, *overrides_of(set)))

    def _base_data(self) -> dict[str, Any]:
        return parse_toml_text(self.text, self.origin)

    def __getattr__(self, name: str) -> Any:
        # Only reached for names the wrapper lacks: the model's sections (source, rectifier, filters, ...).
        if name.startswith("_") or name in ("model", "data", "text", "origin", "overrides"):
            raise AttributeError(name)
        return getattr(self.model, name)

    def __repr__(self) -> str:
        changes = f", set {list(self.overrides)}" if self.overrides else ""
        return f"<simkit Design {self.title!r} from {self.origin}{changes}>"


def _build(text: str, origin: str, data: dict[str, Any], overrides: Sequence[str]) -> Design:
    changed = apply_overrides(data, list(overrides), origin)
    return Design(design_from_dict(changed, origin=origin), changed, text, origin, tuple(overrides))


def load(path_or_text: str | Path, set: Mapping[str, Any] | None = None) -> Design:
    """Read a design file (or TOML text) and apply changes, as ``simkit run DESIGN --set ...`` does.

    Parameters
    ----------
    path_or_text : str or Path
        The design file, or the TOML itself: a ``str`` holding a line break or an ``=`` is read
        as TOML text (a library file it names is then found from the current folder).
    set : dict, optional
        ``{"filter.0.c": "100u", "load.r": 3300}``: dotted paths as ``--set`` spells them, list
        positions from 0.  Strings are read as on the command line (engineering notation such as
        ``"100u"``; TOML when valid); numbers, booleans, lists and dicts go in as they are.

    Returns
    -------
    Design

    Raises
    ------
    simkit.errors.DesignError
        The file cannot be read, or a key or value is wrong: the message names the file, the key
        and what was expected.

    Examples
    --------
    >>> d = load('''
    ... title = "A bridge into one capacitor (invented)"
    ... [source]
    ... vrms = "250"
    ... frequency = "50"
    ... resistance = "20"
    ... [rectifier]
    ... topology = "bridge"
    ... diode = "1N4007"
    ... [[filter]]
    ... c = "100u"
    ... [load]
    ... kind = "resistor"
    ... r = "5k"
    ... ''', set={"load.r": "4.7k"})
    >>> d.model.loads[0].r
    4700.0
    """
    if isinstance(path_or_text, Path) or ("\n" not in path_or_text and "=" not in path_or_text):
        origin = str(path_or_text)
        text = read_design_text(path_or_text)
    else:
        origin = "<text>"
        text = path_or_text.removeprefix("\ufeff")
    return _build(text, origin, parse_toml_text(text, origin), overrides_of(set))


def _design(design: Design | str | Path) -> Design:
    return design if isinstance(design, Design) else load(design)


# -- one run ---------------------------------------------------------------------------------------


def run(design: Design | str | Path, mains: str = "nominal", progress: Progress | None = None) -> Result:
    """Simulate a design: steady state, switch-on, and whatever runs its loads and regulator need.

    Parameters
    ----------
    design : Design, str or Path
        From :func:`load` (a path is loaded first).
    mains : {"nominal", "high", "low"}
        The source EMF times 1 +- ``source.mains_tolerance``, as ``simkit run --mains``.
    progress : callable, optional
        Called as ``progress(what, done, total)`` while simulating (``what`` names the run:
        "steady state", "switch-on"; ``done`` and ``total`` are simulated seconds, ``total``
        None when open-ended).

    Returns
    -------
    Result
        The same figures as ``simkit run --json`` gives for the same design.
    """
    from simkit.pipeline import simulate

    d = _design(design)
    vscale = d.model.mains_scale(mains)
    result = simulate(d.model, vscale=vscale, progress=progress)
    if vscale != 1.0:
        result.warnings.insert(0, f"simulated at {mains} mains: the source EMF x {vscale:g}")
    return Result(d, result, mains)


def _png_tag(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<img src="data:image/png;base64,{data}" alt="{html.escape(alt)}" style="max-width:100%">'


def _caution_html() -> str:
    return f'<p style="font-size:smaller"><b>High voltage.</b> {html.escape(CAUTION_POINTS[0])}</p>'


class Result:
    """One design simulated.

    Attributes
    ----------
    design : Design
    figures : dict of str to float
        Every figure, by the names of ``run --json``'s ``metrics`` (NaN where that says null).
    parts : dict of str to PartResult
        Per part, typed: ``result.parts["D1"].piv_v``, ``result.parts["C1"].ripple_rms_a``.
    warnings : list of str
    run_result : simkit.pipeline.RunResult
        Everything behind it (circuit, runs, waveforms), for code that needs more.
    """

    def __init__(self, design: Design, run_result: RunResult, mains: str = "nominal") -> None:
        self.design = design
        self.run_result = run_result
        self.mains = mains

    @property
    def figures(self) -> dict[str, float]:
        return dict(self.run_result.metrics)

    @property
    def parts(self) -> dict[str, Any]:
        return dict(self.run_result.parts)

    @property
    def warnings(self) -> list[str]:
        return list(self.run_result.warnings)

    @property
    def deck(self) -> str:
        """The steady-state SPICE deck, as ``simkit netlist`` prints it."""
        return self.run_result.deck

    def waveform(self, name: str, run: str = "steady") -> Waveform:
        """A node's voltage, a part's current or voltage, over the steady-state window or the switch-on run.

        Parameters
        ----------
        name : str
            A node (``"out"``, ``"rect"``), a part's current (``"D1"``, ``"C1"``, ``"i(L1)"``) or the
            voltage across a part (``"v(C1)"``); :meth:`waveform_names` lists them with their
            direction.
        run : {"steady", "switch-on"}
            ``"steady"``: the measurement window of the periodic steady state (the samples every
            steady-state figure is computed from; time from the window's start).  ``"switch-on"``:
            from switch-on with every capacitor empty (time after switch-on).

        Returns
        -------
        Waveform
            Unpacks as ``time, value`` (numpy arrays, s and V or A); also carries ``unit``,
            ``meaning`` and ``mean()``.

        Raises
        ------
        simkit.pipeline.probes.ProbeError
            No such node or part; the message lists every valid name.
        """
        return self.run_result.waveform(name, run)

    def waveform_names(self) -> dict[str, str]:
        """Every name :meth:`waveform` takes, with what it measures (nodes first, then parts)."""
        from simkit.pipeline.probes import probe_list

        return {p.name: f"{p.meaning} ({p.unit})" for p in probe_list(self.run_result.circuit)}

    def to_json(self) -> dict[str, Any]:
        """The document ``simkit run --json`` prints."""
        return self.run_result.to_json()

    @cached_property
    def _overview_png(self) -> bytes:
        from simkit.report.plots import run_figure_bytes

        return run_figure_bytes(self.run_result, "png")

    def _repr_html_(self) -> str:
        from simkit.report.text import show

        rows = "".join(f"<tr><td><code>{html.escape(k)}</code></td><td style=\"text-align:right\">"
                       f"{html.escape(show(k, v))}</td><td>{html.escape(FIGURES[k].meaning if k in FIGURES else '')}"
                       "</td></tr>" for k, v in self.run_result.metrics.items())
        warn = "".join(f"<li>{html.escape(w)}</li>" for w in self.warnings)
        where = self.design.origin + (f" at {self.mains} mains" if self.mains != "nominal" else "")
        return (f'<div class="simkit-result"><h4>{html.escape(self.design.title)}</h4><p>{html.escape(where)}'
                "</p><table><thead><tr><th>figure</th><th>value</th><th>meaning</th></tr></thead>"
                f"<tbody>{rows}</tbody></table>"
                + (f"<p>Warnings:</p><ul>{warn}</ul>" if warn else "")
                + _png_tag(self._overview_png, "output and diode currents in steady state and from switch-on")
                + _caution_html() + "</div>")

    def __repr__(self) -> str:
        m = self.run_result.metrics
        return (f"<simkit Result {self.design.title!r}: vout_dc_v={m.get('vout_dc_v', math.nan):.6g}, "
                f"ripple_pp_v={m.get('ripple_pp_v', math.nan):.4g}, {len(self.warnings)} warnings>")


# -- checks ----------------------------------------------------------------------------------------


def check(design: Design | str | Path) -> Verdicts:
    """Check every part against its ratings at the corners that bind, as ``simkit check`` does.

    Returns
    -------
    Verdicts
        ``verdicts.result`` is "pass", "marginal" or "fail"; ``verdicts.rows`` are the verdicts
        of ``simkit check --json``.
    """
    from simkit.checks import check_design

    d = _design(design)
    return Verdicts(d, check_design(d.model))


class Verdicts:
    """The verdicts of :func:`check`: iterate for the rows (dicts, as ``check --json``)."""

    def __init__(self, design: Design, report: CheckReport) -> None:
        self.design = design
        self.report = report

    @property
    def rows(self) -> list[dict[str, Any]]:
        return [v.to_json() for v in self.report.verdicts]

    @property
    def counts(self) -> dict[str, int]:
        """How many verdicts are pass, marginal and fail."""
        s = self.report.summary()
        return {k: int(s[k]) for k in ("pass", "marginal", "fail")}

    @property
    def result(self) -> str:
        """The worst verdict: "pass", "marginal" or "fail"."""
        return str(self.report.summary()["result"])

    @property
    def failed(self) -> bool:
        """True when any verdict is fail (``simkit check`` exits 1)."""
        return self.report.failed

    @property
    def fuse(self) -> dict[str, Any]:
        """The suggested fuse (rating, type, where, why)."""
        return dict(self.report.fuse)

    def to_json(self) -> dict[str, Any]:
        """The document ``simkit check --json`` prints."""
        return self.report.to_json()

    def __iter__(self) -> Iterator[dict[str, Any]]:
        return iter(self.rows)

    def __len__(self) -> int:
        return len(self.report.verdicts)

    def _repr_html_(self) -> str:
        from simkit.report.check_text import value_text

        def cell(v: dict[str, Any], key: str) -> str:  # as `simkit check` prints it
            x = v.get(key)
            if isinstance(x, bool) or not (x is None or isinstance(x, (int, float))):
                return html.escape(str(x))
            return html.escape(value_text(None if x is None else float(x), str(v.get("unit") or "")))

        rows = "".join(
            f"<tr><td>{html.escape(str(v['part']))}</td><td>{html.escape(str(v['rule']))}</td>"
            f"<td style=\"text-align:right\">{cell(v, 'value')}</td><td style=\"text-align:right\">{cell(v, 'limit')}"
            f"</td><td><b>{html.escape(str(v['verdict']))}</b></td><td>{html.escape(str(v.get('corner') or ''))}</td>"
            "</tr>" for v in self.rows)
        c = self.counts
        return (f'<div class="simkit-verdicts"><h4>{html.escape(self.design.title)}: {html.escape(self.result)}</h4>'
                f"<p>{c['pass']} pass, {c['marginal']} marginal, {c['fail']} fail</p><table><thead><tr><th>part</th>"
                "<th>rule</th><th>value</th><th>limit</th><th>verdict</th><th>corner</th></tr></thead>"
                f"<tbody>{rows}</tbody></table>{_caution_html()}</div>")

    def __repr__(self) -> str:
        c = self.counts
        return (f"<simkit Verdicts {self.design.title!r}: {self.result} ({c['pass']} pass, {c['marginal']} marginal, "
                f"{c['fail']} fail)>")


# -- sweeps ----------------------------------------------------------------------------------------


def _vary_spec(path: str, values: Any) -> Any:
    from simkit.sweep.specs import VarySpec, parse_spec

    if isinstance(values, str):
        return parse_spec(values, path)
    if not isinstance(values, (list, tuple)) or not values:
        raise UsageError(f"vary {path}: give a list of values or a SPEC string (\"22u,47u\", \"10u:1m:9log\")")
    items: list[Any] = []
    for v in values:
        if isinstance(v, (bool, int, float)):
            if isinstance(v, float) and not math.isfinite(v):
                raise UsageError(f"vary {path}: {v!r} is not a finite number")
            items.append(v)
        elif isinstance(v, str) and v.strip() and not any(ch in v for ch in ",:"):
            items.append(parse_spec(v, path).values[0])  # read as --set reads it
        elif isinstance(v, str):
            items.append(v)
        else:
            raise UsageError(f"vary {path}: {v!r} is not a number or a string")
    return VarySpec(path, ",".join(str(v) for v in values), "list", tuple(items))


def sweep(design: Design | str | Path, vary: Mapping[str, Any], jobs: int = 1, zip: bool = False,
          check: bool = False, timeout: float | None = 600.0) -> Sweep:
    """Simulate a design over a grid of values, as ``simkit sweep`` does (without its files).

    Parameters
    ----------
    design : Design, str or Path
    vary : dict
        ``{"filter.0.c": ["22u", "47u", "100u"]}`` or a SPEC string as ``--vary`` takes it
        (``"22u,47u"``, ``"10u:1m:5log"``); several paths make a grid.
    jobs : int
        1 (default): every point in this process, each starting from its neighbour's steady
        state.  More: that many worker processes (in a script, call this under
        ``if __name__ == "__main__":``, as Python's process pools need).
    zip : bool
        Pair the lists point by point instead of making a grid (``--zip``).
    check : bool
        Also check every point (``--check``): a ``check`` column and one per rule.
    timeout : float or None
        Seconds one point may take in a worker process (``jobs`` > 1).

    Returns
    -------
    Sweep
        One row per point, in point order; a point that fails has its reason in ``error``.
    """
    from simkit.sweep.runner import entry, outcomes
    from simkit.sweep.specs import build_points, combine
    from simkit.sweep.worker import evaluate_safely, simulate_and_check, simulate_point

    d = _design(design)
    if not isinstance(vary, Mapping) or not vary:
        raise UsageError("vary: give a dict of PATH: values, e.g. {\"filter.0.c\": [\"22u\", \"47u\"]}")
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise UsageError(f"jobs={jobs!r}: a whole number, at least 1")
    specs = [_vary_spec(p, v) for p, v in vary.items()]
    points = build_points(d.data, d.origin, specs, combine(specs, zip))
    evaluate = simulate_and_check if check else simulate_point
    by_index = {p.index: p for p in points}
    rows: dict[int, dict[str, Any]] = {p.index: entry(p, {"error": p.error}, 0) for p in points if p.design is None}
    tasks = [(p.index, p.design) for p in points if p.design is not None]
    if jobs == 1 or len(tasks) < 2:
        for index, payload in tasks:
            rows[index] = entry(by_index[index], evaluate_safely(evaluate, payload), 1)
    else:
        stream = outcomes(tasks, evaluate, jobs=jobs, timeout=timeout)
        try:
            for outcome in stream:
                rows[outcome.point] = entry(by_index[outcome.point], outcome.result, outcome.attempts)
        finally:
            stream.close()  # stops the workers when interrupted
    entries = [rows[p.index] for p in points]
    return Sweep(d, [s.path for s in specs], entries)


class Sweep:
    """The points of :func:`sweep`: ``rows`` (one flat dict per point), ``to_csv()``, ``to_dataframe()``."""

    def __init__(self, design: Design, inputs: list[str], entries: list[dict[str, Any]]) -> None:
        self.design = design
        self.inputs = inputs
        self.entries = entries

    @property
    def rows(self) -> list[dict[str, Any]]:
        """One dict per point: ``point``, the varied paths (SI), every figure, the verdicts with
        ``check=True``, ``warnings`` (a list) and ``error`` (None when the point ran)."""
        from simkit.sweep.table import flat_rows

        return flat_rows(self.inputs, self.entries, no_figure=math.nan)

    @property
    def failed(self) -> list[dict[str, Any]]:
        """The rows whose point could not be simulated."""
        return [r for r in self.rows if r["error"]]

    def to_csv(self, path: str | Path | None = None, force: bool = False) -> str:
        """The rows as CSV, with the columns of ``simkit sweep``'s ``sweep.csv``.

        With ``path``, also writes the file (atomically; an existing file is kept unless
        ``force``).  Returns the text.
        """
        from simkit.sweep.table import csv_text

        text = csv_text(self.inputs, self.entries)
        if path is not None:
            from simkit.report.outputs import PendingFile

            with PendingFile(path, force=force) as target:
                target.commit(text)
        return text

    def to_dataframe(self) -> Any:
        """The rows as a pandas DataFrame (pandas is optional: install it to use this)."""
        try:
            import pandas as pd
        except ImportError:
            raise ImportError("Sweep.to_dataframe needs pandas, which simkit does not install; "
                              "`pip install pandas`, or use Sweep.rows or Sweep.to_csv()") from None
        return pd.DataFrame(self.rows)

    def __len__(self) -> int:
        return len(self.entries)

    def __iter__(self) -> Iterator[dict[str, Any]]:
        return iter(self.rows)

    def _repr_html_(self) -> str:
        from simkit.report.text import show

        rows = self.rows
        figs = [k for k in SWEEP_SHOWN if any(k in r for r in rows)]
        head = "".join(f"<th>{html.escape(c)}</th>" for c in ["point", *self.inputs, *figs, "error"])
        body = "".join(
            "<tr>" + f"<td>{r['point']}</td>"
            + "".join(f"<td>{html.escape(str(r[p]))}</td>" for p in self.inputs)
            + "".join(f"<td style=\"text-align:right\">{html.escape(show(k, r.get(k, math.nan)))}</td>" for k in figs)
            + f"<td>{html.escape(str(r['error'] or ''))}</td></tr>" for r in rows)
        return (f'<div class="simkit-sweep"><h4>{html.escape(self.design.title)}: {len(rows)} points</h4>'
                f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
                "<p>Every figure is in <code>.rows</code> and <code>.to_csv()</code>.</p></div>")

    def __repr__(self) -> str:
        return f"<simkit Sweep {self.design.title!r}: {len(self.entries)} points over {', '.join(self.inputs)}>"


# -- side by side ----------------------------------------------------------------------------------


def compare(*designs: Design | str | Path, check: bool = True, labels: Sequence[str] | None = None) -> Comparison:
    """Run several designs (or variants of one, from :meth:`Design.with_set`) and put them side by side.

    Returns
    -------
    simkit.sidebyside.Comparison
        ``figures`` per design, ``differences`` from the first, verdict counts with ``check``;
        ``to_json()`` is ``simkit compare --json``.
    """
    from simkit.sidebyside import compare_designs

    loaded = [_design(d) for d in designs]
    return compare_designs(loaded, labels=labels, check=check)
