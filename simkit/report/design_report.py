"""``simkit report``: one design's results as a document: schematic, inputs, figures, parts,
verdicts when ratings are checked, waveform plots, cautions, and the deck as an appendix.

Files (stable names, so build notes and articles can link to them): ``report.md``,
``report.html`` (self-contained), ``deck.cir``, and for each picture ``NAME.png`` and
``NAME.svg``: ``schematic``, ``output-steady``, ``diode-currents``, ``switch-on-voltage``,
``switch-on-surge``, ``hum-spectrum``; ``keyed`` when the design has a keyed load and the run
carries its keyed run, ``start-up`` when the design has heater warm-ups or load steps,
``turn-off-ringing`` when the run carries the high-frequency analysis.

Sections that depend on other capabilities appear when their data is there:

- verdicts: a :class:`simkit.checks.CheckReport` passed as ``checks`` (``simkit report``
  and ``simkit demo`` run the checks), worded as ``simkit check`` prints them;
- keyed behaviour: ``result.keyed`` (or ``result.extra["keyed"]``), a run with ``.waves``
  or ``.run.waves`` (engine Waveforms) of the keyed load over some key cycles;
- stepped loads and warm-ups: ``design.has_timeline``, plotted from the switch-on run.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from simkit.design.vocab import value_rows
from simkit.figures import FIGURES
from simkit.report.document import Document
from simkit.report.outputs import OutputDir
from simkit.report.text import show
from simkit.units import eng

if TYPE_CHECKING:
    from simkit.checks import CheckReport, Verdict
    from simkit.pipeline import RunResult

#: Picture file stems, in the order the report shows them.
IMAGES: tuple[str, ...] = ("schematic", "output-steady", "diode-currents", "switch-on-voltage", "switch-on-surge",
                           "keyed", "start-up", "hum-spectrum", "turn-off-ringing")
#: Pictures only some designs have (a keyed load; warm-ups or load steps; the high-frequency analysis).
OPTIONAL_IMAGES: tuple[str, ...] = ("keyed", "start-up", "turn-off-ringing")
#: Section headings every design report has (the verdict and keyed sections come on top when their data exists).
SECTIONS: tuple[str, ...] = ("Summary", "Schematic", "Inputs", "Figures", "Parts", "Waveforms", "Hum and hash",
                             "High-voltage cautions", "Appendix: the SPICE deck")

#: Helper elements simkit adds for the numerics, by name prefix: what they are.
HELPER_NOTES: tuple[tuple[str, str], ...] = (
    ("RT", "10 MΩ ties from floating winding terminals to the return"),
    ("VD", "0 V current senses of the diodes"),
    ("VC", "0 V current senses of the capacitors"),
    ("VLOAD", "0 V current sense of the load"),
    ("VPASS", "0 V current sense of the pass device"),
    ("VSHUNT", "0 V current sense of the shunt element"),
    ("SGLOW", "the glow tubes' strike model (drawn as GLOW)"),
    ("BGLOW", "the glow tubes' strike model (drawn as GLOW)"),
    ("RGLOW", "the glow tubes' strike model (drawn as GLOW)"),
    ("RGLC", "the glow tubes' strike model (drawn as GLOW)"),
    ("CGLC", "the glow tubes' strike model (drawn as GLOW)"),
    ("RESR", "capacitor ESR (shown in the capacitor's label)"),
    ("RDCR", "choke winding resistance (shown in the choke's label)"),
)

#: Column headings for per-part figures.
PART_HEADERS: dict[str, str] = {
    "value_f": "value", "value_h": "value", "value_ohm": "value", "vrms_v": "open-circuit RMS",
    "peak_a": "peak current", "avg_a": "mean current", "rms_a": "RMS current", "dc_a": "DC current",
    "piv_v": "peak reverse voltage", "surge_peak_a": "switch-on peak current", "surge_i2t_a2s": "switch-on I²t",
    "switch_on_piv_v": "switch-on reverse voltage", "peak_v": "peak voltage", "dc_v": "DC voltage",
    "ripple_pp_v": "ripple p-p", "ripple_rms_a": "ripple current (RMS)", "switch_on_peak_v": "switch-on peak voltage",
    "esr_dissipation_w": "ESR dissipation", "switch_on_peak_a": "switch-on peak current",
    "dcr_dissipation_w": "DCR dissipation", "dissipation_w": "dissipation", "apparent_power_va": "apparent power",
    "node": "at node",
}

#: Groups of the parts table: heading, and the roles that belong to it.
PART_GROUPS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("Winding", ("winding", "inverter output", "*output", "winding resistance", "winding leakage inductance",
                 "transformer winding", "heater winding")),
    ("Rectifier diodes", ("rectifier diode",)),
    ("Capacitors", ("stage capacitor", "reservoir capacitor", "filter capacitor")),
    ("Chokes and resistors", ("choke", "filter resistor")),
    ("Load and bleeder", ("load", "*load", "bleeder")),  # "*load": any role ending in " load"
)


def is_invented(result: RunResult) -> bool:
    """True when the design file says it is an invented example (``example = true``), never from its words."""
    return result.design.example


def report_files() -> list[str]:
    """The files every design report writes (``keyed`` only when there is a keyed run)."""
    names = ["report.md", "report.html", "deck.cir"]
    for stem in IMAGES:
        if stem in OPTIONAL_IMAGES:
            continue
        names += [f"{stem}.png", f"{stem}.svg"]
    return names


def build_report(result: RunResult, design_text: str | None = None, source_name: str = "",
                 overrides: tuple[str, ...] | list[str] = (), checks: CheckReport | None = None,
                 check_error: str = "") -> Document:
    """The report of one run as a :class:`Document` (nothing written yet).

    Parameters
    ----------
    result : RunResult
        From :func:`simkit.pipeline.simulate`.
    design_text : str, optional
        The design file as written, shown in an appendix.
    source_name : str
        The design file's name, for the subtitle.
    overrides : sequence of str
        ``--set`` overrides applied on top of the file (listed with it).
    checks : simkit.checks.CheckReport, optional
        The design's stress checks (:func:`simkit.checks.run_checks`): adds the Verdicts section.
    check_error : str
        Why the checks could not run, shown as a caution instead.
    """
    from simkit.report import plots
    from simkit.report.schematic import draw_schematic

    d = result.design
    c = result.circuit
    doc = Document(d.title, subtitle=f"Design report by simkit{' for ' + source_name if source_name else ''}: "
                                     f"{d.rectifier.topology} rectifier, {len(d.filters)} filter "
                                     f"section{'s' if len(d.filters) != 1 else ''}")
    if is_invented(result):
        doc.note("**Invented example.** This design is made up for demonstration; its part values are "
                 "plausible, not taken from a real build or measured.")

    doc.heading("Summary")
    verdict_first = _verdict_summary(checks, check_error)
    if verdict_first:
        doc.paragraph(verdict_first)
    doc.paragraph(_summary(result))
    if d.note:
        doc.paragraph(f"Note from the design file: {d.note}", markup=False)
    for w in result.warnings:
        doc.note(w, kind="caution")

    doc.heading("Schematic")
    sch = draw_schematic(d, c)
    doc.image("schematic", sch.png, sch.svg,
              f"Schematic of the design as simulated, from the winding (left) to the output terminals (right); "
              f"{len(sch.drawn)} parts", wide=True)
    doc.paragraph(_schematic_text(result, sch.drawn))
    helpers = _helpers_present(result)
    if helpers:
        doc.paragraph("Not drawn, because simkit adds them to the deck for the numerics and they are not parts to "
                      "buy: " + "; ".join(f"{desc} ({', '.join(f'`{n}`' for n in names)})"
                                          for desc, names in helpers) + ".")
    if sch.not_drawn:
        doc.note("This version of the schematic cannot draw: " + ", ".join(f"`{n}`" for n in sch.not_drawn)
                 + "; see the deck in the appendix.", kind="caution")

    doc.heading("Inputs")
    doc.paragraph("The design as simulated, every value resolved to SI and written in engineering notation; "
                  "keys as `--set` spells them.")
    doc.table(["key", "value", "meaning"], _input_rows(result), align="lll", markup=False)

    doc.heading("Figures")
    doc.paragraph(f"Steady-state figures over the last {result.periods} whole periods after the output "
                  "settled; switch-on figures from a separate run that starts with every capacitor empty.")
    doc.table(["figure", "value", "meaning"], _figure_rows(result), align="lrl", markup=True)

    doc.heading("Parts")
    doc.paragraph("Per part, in steady state unless the heading says switch-on. Names as in the schematic.")
    for title, headers, rows, align in _part_tables(result):
        doc.heading(title, 3)
        doc.table(headers, rows, align=align)

    if checks is not None and checks.verdicts:
        doc.heading("Verdicts")
        doc.paragraph("Each stress or safety rule checked against the part's rating at the corner where it binds "
                      "(as `simkit check` does): `pass`, `marginal` or `fail`; the margin is the headroom as a "
                      "share of the limit.")
        doc.paragraph("The rating is the part's own; the limit is that rating after the derating of `[checks]`. A "
                      "failure says whether the value is above the rating itself or only above the derating; a "
                      "value several times its limit shows the ratio (x3.2) instead of a margin.")
        bases: list[str] = []
        rows = [_verdict_row(v, bases) for v in checks.verdicts]
        doc.table(["part", "rule", "value", "rating", "limit", "margin", "verdict", "corner", "limit from"], rows,
                  align="llrrrrclc", markup=True)
        if bases:
            doc.paragraph("Where each limit comes from:")
            doc.bullets([f"[{k + 1}] {b}" for k, b in enumerate(bases)], markup=False)
        _check_summary(doc, checks)
    elif check_error:
        doc.note(f"The stress checks could not be completed: {check_error}", kind="caution")

    doc.heading("Waveforms")
    png, svg = plots.output_steady_figure(result)
    where = "output node and the rectifier node" if c.rectified != c.output else "output node"
    doc.image("output-steady", png, svg, f"Output voltage over the last {result.periods} periods in steady "
              f"state, at the {where}, with the mean dashed")
    png, svg = plots.diode_currents_figure(result)
    doc.image("diode-currents", png, svg, "Current pulses in each rectifier diode in steady state, anode to "
              "cathode, all on one scale")
    png, svg = plots.switch_on_voltage_figure(result)
    doc.image("switch-on-voltage", png, svg, "Output voltage after switch-on with every capacitor empty, against "
              "the steady-state mean")
    png, svg = plots.switch_on_current_figure(result)
    doc.image("switch-on-surge", png, svg, "Diode currents during the first periods after switch-on: the surge "
              "the diodes and the fuse must take")
    keyed = _extra(result, "keyed")
    keyed_waves = _waves_of(keyed)
    if keyed_waves is not None:
        doc.heading("Keyed load", 3)
        cycle = getattr(keyed, "cycle", None)
        doc.paragraph("The load keyed as the design says, after the keying settled"
                      + (f" (keying cycle {eng(cycle, 's')})" if cycle else "") + ": output voltage, and the "
                      "current each load draws. " + _keyed_note(result))
        png, svg = plots.keyed_figure(result) if getattr(keyed, "window", None) is not None else \
            plots.run_timeline_figure(result, keyed_waves, "Keyed load")
        doc.image("keyed", png, svg, "Output voltage while the load is keyed: over one keying cycle (the one-period "
                  "mean over the raw trace, key-down shaded), then the longest key-down and its edges close up")
    if getattr(d, "has_timeline", False):
        doc.heading("Start-up timeline", 3)
        doc.paragraph("From switch-on with every capacitor empty, with the heater warm-ups and load steps of the "
                      "design: output voltage, and the current each load draws. " + _steps_note(result))
        png, svg = plots.run_timeline_figure(result, result.start.waves, "Start-up")
        doc.image("start-up", png, svg, "Output voltage and load current from switch-on, with warm-ups and steps")

    from simkit.report.noise_section import add_section

    add_section(doc, result)

    doc.cautions()

    doc.heading("Appendix: the SPICE deck")
    deck = result.deck
    doc.paragraph("The steady-state deck as `simkit netlist` prints it (also in `deck.cir` beside this report): "
                  "runnable with `ngspice -b deck.cir`, its `.meas` lines print the figures above.")
    doc.attach("deck.cir", deck)
    doc.code(deck, "spice")
    if design_text is not None:
        doc.heading("Appendix: the design file")
        if overrides:
            doc.paragraph("As written in the file; the run above changed it with "
                          + ", ".join(f"`--set {o}`" for o in overrides) + " (the Inputs table shows the values used).")
        doc.code(design_text, "toml")
    return doc


def write_report(result: RunResult, out: OutputDir, design_text: str | None = None, source_name: str = "",
                 overrides: tuple[str, ...] | list[str] = (), checks: CheckReport | None = None,
                 check_error: str = "") -> list[str]:
    """Build and write the report of one run; returns the file names written."""
    return build_report(result, design_text, source_name, overrides, checks, check_error).write(out)


# -- pieces ----------------------------------------------------------------------------------



def _summary(result: RunResult) -> str:
    m = result.metrics
    d = result.design
    parts = [
        f"**Output** {eng(m['vout_dc_v'], 'V')} DC, {eng(m['ripple_pp_v'], 'V')} ripple peak to peak, "
        f"{eng(m['iout_dc_a'], 'A')} into the load.",
        f"**Diodes** up to {eng(m['diode_peak_a'], 'A')} peak and {eng(m['diode_avg_a'], 'A')} mean each, "
        f"{eng(m['diode_piv_v'], 'V')} peak reverse voltage; {eng(m['surge_peak_a'], 'A')} at switch-on.",
        f"**Capacitors** see up to {eng(m['cap_peak_v'], 'V')}, switch-on included.",
        f"**Winding** {eng(d.source.vrms, 'V')} RMS open circuit at {eng(d.source.frequency, 'Hz')}, delivering "
        f"{eng(m['source_rms_a'], 'A')} RMS ({eng(m['source_va'], 'VA')}).",
    ]
    return " ".join(parts)


def _schematic_text(result: RunResult, drawn: list[str]) -> str:
    """How to read the schematic, naming only what this one has."""
    src = result.design.source
    what = "the inverter's output" if getattr(src, "kind", "sine") == "inverter" else "the winding's open-circuit EMF"
    two = " (`V2` the second half, in antiphase)" if "V2" in drawn else ""
    parts = [f"`V1` is {what}{two}"]
    if "RW1" in drawn:
        parts.append("`RW1` its series resistance (`source.resistance`)")
    if "LW1" in drawn:
        parts.append("`LW1` its leakage inductance (`source.inductance`)")
    return ("Every part carries its name, as in the deck and the tables below, and its value. " + ", ".join(parts)
            + ". Capacitor ESR and choke DCR are part of their label; a capacitor's `+` marks the side that is "
            "higher in steady state. Small grey names are the deck's node names; node `0` is the return, the "
            "negative output.")


def _helpers_present(result: RunResult) -> list[tuple[str, list[str]]]:
    names = [e.name for e in result.circuit.elements]
    grouped: dict[str, list[str]] = {}
    for n in names:
        for prefix, desc in HELPER_NOTES:
            if n.startswith(prefix) and not (prefix == "VC" and n.startswith("VCC")):
                grouped.setdefault(desc, []).append(n)
                break
    return list(grouped.items())


#: How a unit is shown in the inputs table.
_SHOWN = {"V": "V", "A": "A", "ohm": "Ω", "F": "F", "H": "H", "Hz": "Hz", "s": "s", "W": "W", "Ah": "Ah"}


def _format(value: Any, unit: str) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        if unit in _SHOWN:
            return eng(float(value), _SHOWN[unit])
        if unit == "%":
            return f"{float(value) * 100:g} %"
        if unit == "deg":
            return f"{float(value):g}°"
        return f"{value:g}" if isinstance(value, float) else str(value)
    if isinstance(value, tuple):
        return ", ".join("/".join(_format(x, "") for x in v) if isinstance(v, tuple) else _format(v, "")
                         for v in value)
    name = getattr(value, "name", None)  # a library part: its name (its source is in the parts table)
    return str(name) if isinstance(name, str) else str(value)


def _input_rows(result: RunResult) -> list[list[str]]:
    """The design as (key, value, meaning) rows: keys exactly as ``--set`` spells them, values with units."""
    rows: list[list[str]] = []
    for path, value, k in value_rows(result.design):
        if path in ("title", "note"):
            continue
        unit = k.unit if k.unit not in ("table", "array", "list", "choice", "str", "int", "bool") else ""
        rows.append([path, _format(value, unit), k.doc])
    return rows


def _figure_rows(result: RunResult) -> list[list[str]]:
    rows = []
    for key, fig in FIGURES.items():
        meaning = fig.meaning
        if key in result.metrics:
            rows.append([f"`{key}`", show(key, result.metrics[key]), meaning])
    for key, value in result.metrics.items():
        if key not in FIGURES:
            rows.append([f"`{key}`", show(key, value), ""])
    return rows


def _part_tables(result: RunResult) -> list[tuple[str, list[str], list[list[str]], str]]:
    tables = []
    placed: set[str] = set()
    groups = [*list(PART_GROUPS), ("Other parts", ())]
    parts = {n: p.to_json() for n, p in result.parts.items()}  # the quantities each part has, as run --json
    for title, roles in groups:
        names = [n for n, f in parts.items() if n not in placed and (not roles or _role_in(f, roles))]
        if not names:
            continue
        placed.update(names)
        names.sort(key=lambda n: _role_rank(parts[n], roles))
        keys: list[str] = []
        for n in names:
            for k in parts[n]:
                if k != "role" and k not in keys:
                    keys.append(k)
        show_role = len({parts[n].get("role") for n in names}) > 1
        headers = ["part", *(["what"] if show_role else []), *[PART_HEADERS.get(k, k) for k in keys]]
        rows = []
        for n in names:
            f = parts[n]
            rows.append([n, *([str(f.get("role", ""))] if show_role else []), *[_cell(k, f.get(k)) for k in keys]])
        tables.append((title, headers, rows, ("ll" if show_role else "l") + "r" * len(keys)))
    return tables


def _role_in(figures: dict[str, Any], roles: tuple[str, ...]) -> bool:
    return _role_rank(figures, roles) < len(roles)


def _role_rank(figures: dict[str, Any], roles: tuple[str, ...]) -> int:
    """Position of a part's role in a group's roles (len(roles) when it is not there)."""
    role = str(figures.get("role", ""))
    for k, r in enumerate(roles):
        if role == r or (r.startswith("*") and role.endswith(" " + r[1:])):
            return k
    return len(roles)


def _cell(key: str, value: Any) -> str:
    if value is None:
        return "–"
    if isinstance(value, float) and not math.isfinite(value):
        return "n/a"
    return show(key, value)


def _extra(result: RunResult, name: str) -> Any:
    value = getattr(result, name, None)
    if value is None:
        value = result.extra.get(name) if isinstance(getattr(result, "extra", None), dict) else None
    return value


def _waves_of(run: Any) -> Any:
    """The Waveforms of a run-like object: ``.waves``, or ``.run.waves`` (a keyed run)."""
    if run is None:
        return None
    waves = getattr(run, "waves", None)
    if waves is None and getattr(run, "run", None) is not None:
        waves = getattr(run.run, "waves", None)
    return waves


def _figures_note(result: RunResult, keys: tuple[tuple[str, str], ...]) -> str:
    found = [f"{label} {show(k, result.metrics[k])}" for k, label in keys
             if isinstance(result.metrics.get(k), float) and math.isfinite(result.metrics[k])]
    return ("Figures: " + ", ".join(found) + ".") if found else ""


def _keyed_note(result: RunResult) -> str:
    return _figures_note(result, (("vout_keydown_v", "output key-down"), ("vout_keyup_v", "key-up"),
                                  ("sag_v", "sag"), ("chirp_hz", "chirp")))


def _steps_note(result: RunResult) -> str:
    return _figures_note(result, (("vout_keydown_v", "output at the heaviest step"),
                                  ("vout_keyup_v", "at the lightest"), ("sag_v", "sag"),
                                  ("recovery_time_s", "recovery to 2 %"), ("overshoot_v", "overshoot"),
                                  ("vout_warmup_v", "highest before the loads draw"),
                                  ("cap_peak_warmup_v", "highest capacitor voltage before they draw")))


def _verdict_row(v: Verdict, bases: list[str]) -> list[str]:
    """One verdict as table cells (with markup), worded as ``simkit check`` words it; its limit's source is
    numbered into ``bases``."""
    from simkit.report import check_text as ct

    shown = v.verdict if v.verdict == "pass" else f"**{v.verdict.upper()}**"
    over = ct.exceeds_text(v)
    if over:
        shown += f" ({over})"
    ref = ""
    if v.basis:
        if v.basis not in bases:
            bases.append(v.basis)
        ref = f"[{bases.index(v.basis) + 1}]"
    return [_plain(v.part), _plain(v.rule), ct.value_text(v.value, v.unit), ct.rating_text(v), ct.limit_text(v),
            ct.margin_text(v), shown, _plain(v.corner), ref]


def _plain(text: str) -> str:
    """Text for a table with markup on: no accidental `code` or **bold**."""
    return text.replace("`", "'").replace("**", "* *")


def _check_summary(doc: Document, checks: CheckReport) -> None:
    s = checks.summary()
    doc.paragraph(f"**{s['pass']} pass, {s['marginal']} marginal, {s['fail']} fail**: overall "
                  f"**{s['result']}**. Corners simulated: {'; '.join(str(c) for c in s.get('corners', []))}.")
    if s.get("not_checked"):
        doc.paragraph("Not checked, because the design gives no rating:")
        doc.bullets([str(x) for x in s["not_checked"]], markup=False)
    _fix_section(doc, checks)
    fz = s.get("fuse") or {}
    if fz.get("rating_a"):
        doc.paragraph(f"Suggested fuse: **{eng(fz['rating_a'], 'A')} {fz.get('type', '')}**, {fz.get('where', '')}: "
                      f"{fz.get('why', '')}; {fz.get('current', 'the current')} is {eng(fz.get('current_a', 0.0), 'A')}"
                      f"{' at ' + fz['corner'] if fz.get('corner') else ''}.")


def _fix_section(doc: Document, checks: CheckReport) -> None:
    """What to change, fix by fix (grouped as ``simkit check`` groups them), and every fix as one --set line."""
    from simkit.report.check_text import fix_groups

    groups = fix_groups(checks.verdicts)
    if not groups:
        return
    items = []
    for which, reason, sets in groups:
        given = ", ".join(f"--set {a}" for a in sets)
        items.append(f"{', '.join(which)}: {reason}" + (f"; set: {given}" if given else " (no design key to set)"))
    doc.paragraph("To fix (stock values; apply them all, then check again):")
    doc.bullets(items, markup=False)
    line = checks.fix_line
    if line:
        doc.paragraph("Every fix at once, as `simkit check` options:")
        doc.code(line, "sh")


def _verdict_summary(checks: CheckReport | None, check_error: str = "") -> str:
    """The Summary's first words: the overall verdict and the worst failures (or why there is none)."""
    from simkit.report.check_text import ratio_text, value_text

    if checks is None:
        return f"**Verdict: not checked** ({check_error})." if check_error else ""
    s = checks.summary()
    head = (f"**Verdict: {s['result'].upper()}** at the corners of `simkit check`: {s['fail']} fail, "
            f"{s['marginal']} marginal, {s['pass']} pass")
    if s.get("fails_above_rating"):
        head += f" ({s['fails_above_rating']} above the part's absolute rating)"
    worst = checks.worst(3)
    if worst:
        items = []
        for v in worst:
            ratio = ratio_text(v)
            if v.unit == "missing":
                how = "none fitted"
            elif v.exceeds == "rating" and v.rating is not None:
                how = f"rated {value_text(v.rating, v.unit)}"
            elif ratio:
                how = f"{ratio} its limit of {value_text(v.limit, v.unit)}"
            else:
                how = f"limit {value_text(v.limit, v.unit)}"
            items.append(f"{_plain(v.part)} {_plain(v.rule)} {value_text(v.value, v.unit)} ({how})")
        head += ". Worst: " + "; ".join(items)
    return head + "."


def default_out_dir(design_path: str) -> Path:
    """``simkit report amp.toml`` writes into ``amp-report/`` unless ``--out`` says otherwise."""
    return Path(f"{Path(design_path).stem}-report")
