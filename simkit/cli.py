"""The command line: parse, call the pipeline, print.  Exit codes as docs/reference.md, "Exit codes"."""

from __future__ import annotations

import contextlib
import json
import math
import os
import sys
from pathlib import Path
from typing import Any

import click

from simkit import __version__
from simkit.design.model import TOPOLOGIES
from simkit.errors import SimkitError, UsageError, shown
from simkit.stock import SERIES_NAMES

SET_HELP = "Override one design value, e.g. --set filter.0.c=220u (repeatable)."


def _load(design: str, overrides: tuple[str, ...]):  # type: ignore[no-untyped-def]
    from simkit.design.loader import load_design

    return load_design(design, overrides)


def _simulate(design, vscale: float = 1.0):  # type: ignore[no-untyped-def]
    from simkit.pipeline import simulate

    return simulate(design, vscale=vscale)


def _simulate_with(design, vscale: float, hash_: bool | None):  # type: ignore[no-untyped-def]
    """``_simulate``, with the high-frequency analysis forced on or off when ``--hash``/``--no-hash`` says so."""
    if hash_ is None:  # as the design says
        return _simulate(design, vscale)
    from simkit.pipeline import simulate

    return simulate(design, vscale=vscale, hash=hash_)


HASH_HELP = ("With the high-frequency analysis (diode turn-off, ringing, hash at the output), or without it; "
             "by default as [simulation] hash says, or when the design has a snubber or an ultrafast diode fed "
             "through leakage inductance.")


def _battery_corner(design: Any, battery: str) -> Any:
    """The design with its battery at ``--battery low|high`` (the corners of `simkit check`)."""
    if battery == "nominal":
        return design
    from dataclasses import replace

    from simkit.errors import DesignError

    if design.battery is None:
        raise DesignError(f"--battery {battery} needs a [battery] section (an inverter fed from a battery)",
                          file=design.origin, key="battery")
    return replace(design, battery=design.battery.at(battery))


def _progress(quiet: bool, as_json: bool = False) -> Any:
    """The status line on stderr for runs over about two seconds (not with --quiet or --json, nor off a terminal)."""
    from simkit.progress import terminal

    return terminal(sys.stderr, enabled=not quiet and not as_json)


QUIET_HELP = "Show no progress line (it shows only on a terminal, for runs over about two seconds)."


def _warn(result: Any) -> None:
    for w in result.warnings:
        click.echo(f"simkit: warning: {w}", err=True)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="simkit")
@click.pass_context
def cli(ctx: click.Context) -> None:
    """simkit: predict what a tube equipment's high-voltage supply will do, before building it.

    A design file (TOML) describes the winding, rectifier, filter and load; simkit writes
    the SPICE deck, runs ngspice, and reports output voltage, ripple, diode and capacitor
    stress, and the switch-on surge.  See docs/reference.md for every key and figure.
    """
    from simkit.report.outputs import set_command

    set_command(f"simkit {ctx.invoked_subcommand or ''}".strip())


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Also write result.json, "
              "deck.cir and waveforms.png into this folder.")
@click.option("--force", is_flag=True, help="With --out: replace files simkit did not write.")
@click.option("--mains", type=click.Choice(["nominal", "high", "low"]), default="nominal", show_default=True,
              help="Simulate the supply at +- source.mains_tolerance.")
@click.option("--probe", "probes", multiple=True, metavar="NAME", help="With --out: also write this waveform as "
              "probe-NAME.csv and .png: a node (out), a part's current (D1) or voltage (v(C1)); repeatable. "
              "`simkit netlist DESIGN --nodes` lists the names.")
@click.option("--hash/--no-hash", "hash_", default=None, help=HASH_HELP)
@click.option("--battery", type=click.Choice(["nominal", "high", "low"]), default="nominal", show_default=True,
              help="Simulate an inverter's battery at battery.low or battery.high (the corners of check).")
@click.option("--quiet", is_flag=True, help=QUIET_HELP)
def run(design: str, overrides: tuple[str, ...], as_json: bool, out_dir: str | None, force: bool,
        mains: str, probes: tuple[str, ...], hash_: bool | None, battery: str, quiet: bool) -> None:
    """Simulate a design and print its figures."""
    from simkit.report.outputs import OutputDir
    from simkit.report.text import run_table

    d = _battery_corner(_load(design, overrides), battery)
    vscale = d.mains_scale(mains)
    probe_files = _probe_plan(d, probes, out_dir)
    with contextlib.ExitStack() as stack:
        out = None
        if out_dir:  # opened (created, locked, proved writable) before the simulation
            out = stack.enter_context(OutputDir(out_dir, force=force))
            out.check(["result.json", "deck.cir", "waveforms.png", *probe_files])
        with _progress(quiet, as_json):
            result = _simulate_with(d, vscale, hash_)
        if vscale != 1.0:
            result.warnings.insert(0, f"simulated at {mains} mains: the source EMF x {vscale:g}")
        if battery != "nominal":
            result.warnings.insert(0, f"simulated with the battery {battery}: {d.battery.voltage:g} V")
        _warn(result)
        doc = result.to_json()
        if as_json:
            click.echo(json.dumps(doc, indent=2))
        else:
            click.echo(run_table(result), nl=False)
            _nominal_verdict(result)
        if out is not None:
            from simkit.report.plots import run_figure_bytes

            out.write("result.json", json.dumps(doc, indent=2) + "\n")
            out.write("deck.cir", result.deck)
            out.write("waveforms.png", run_figure_bytes(result))
            click.echo(f"simkit: wrote result.json, deck.cir and waveforms.png in {out.path}", err=True)
            _write_probes(result, probes, out)


def _probe_plan(design: Any, probes: tuple[str, ...], out_dir: str | None) -> list[str]:
    """The files ``run --probe`` writes, every name checked before the simulation (exit 2 listing the valid ones)."""
    if not probes:
        return []
    if not out_dir:
        raise UsageError("--probe writes files: give --out DIR as well")
    from simkit.report.probes import planned_files

    return planned_files(design, probes)


def _write_probes(result: Any, probes: tuple[str, ...], out: Any) -> None:
    if probes:
        from simkit.report.probes import write_probes

        names = write_probes(result, probes, out)
        click.echo(f"simkit: wrote {', '.join(names)} in {out.path}", err=True)


def _nominal_verdict(result: Any) -> None:
    """``run``'s closing line: the ratings exceeded at nominal conditions (no extra simulation)."""
    from simkit.checks import nominal_check
    from simkit.report.check_text import nominal_line

    click.echo("")
    click.echo(nominal_line(nominal_check(result)), nl=False)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("-o", "output", type=click.Path(dir_okay=False), help="Write the deck to this file "
              "instead of stdout (an existing file is kept unless --force; - is stdout).")
@click.option("--force", is_flag=True, help="With -o: replace an existing file.")
@click.option("--nodes", is_flag=True, help="Instead of the deck: what each node of the deck is, what connects "
              "there, and the part names --probe takes (nothing is simulated).")
def netlist(design: str, overrides: tuple[str, ...], output: str | None, force: bool, nodes: bool) -> None:
    """Print the SPICE deck of the steady-state run, with .meas lines for ngspice -b."""
    from simkit.report.outputs import PendingFile

    if output == "-":  # the usual name for standard output, not a file called "-"
        output = None
    d = _load(design, overrides)
    if nodes:
        _node_map(d, output, force)
        return
    with contextlib.ExitStack() as stack:
        # The file is checked and reserved before the simulation: a folder that cannot be written
        # fails now, not after it.
        target = stack.enter_context(PendingFile(output, force=force)) if output else None
        result = _simulate(d)
        _warn(result)
        deck = result.deck
        if target is not None:
            target.commit(deck)
            click.echo(f"simkit: wrote {output}", err=True)
        else:
            click.echo(deck, nl=False)


def _node_map(design: Any, output: str | None, force: bool) -> None:
    """``netlist --nodes``: the node map of the design's deck, on stdout or into ``-o FILE``."""
    from simkit.netlist.build import build_circuit
    from simkit.pipeline.probes import node_map_text
    from simkit.report.outputs import PendingFile

    text = node_map_text(build_circuit(design))
    if output:
        with PendingFile(output, force=force) as target:
            target.commit(text)
        click.echo(f"simkit: wrote {output}", err=True)
    else:
        click.echo(text, nl=False)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
@click.option("--fix", "fix_only", is_flag=True, help="Print only the --set options that fix every fail and "
              "marginal verdict, ready to paste after `simkit check DESIGN` (then check again).")
@click.option("--quiet", is_flag=True, help=QUIET_HELP)
def check(design: str, overrides: tuple[str, ...], as_json: bool, fix_only: bool, quiet: bool) -> None:
    """Check every part against its ratings at the worst corners, and the discharge after switch-off;
    each fail and marginal verdict says what to fit (stock values, as --set options).

    Exit status 1 when any verdict is fail, so scripts can gate on it.
    """
    from simkit.checks import check_design
    from simkit.report import check_text

    if as_json and fix_only:
        raise UsageError("give --json or --fix, not both (the JSON has the fixes: summary.fix)")
    d = _load(design, overrides)
    with _progress(quiet, as_json):
        rep = check_design(d)
    if as_json:
        click.echo(json.dumps(rep.to_json(), indent=2))
    elif fix_only:
        click.echo(check_text.fix_only(rep), nl=False)
        s = rep.summary()
        click.echo(f"simkit: {len(rep.fixes)} settings fix {s['fail']} fail and {s['marginal']} marginal verdicts; "
                   "apply them and check again" if rep.fixes else "simkit: nothing to fix", err=True)
    else:
        click.echo(check_text.report_text(rep, check_text.command_line(design, overrides, rep)), nl=False)
    if rep.failed:
        raise click.exceptions.Exit(1)


@cli.command()
@click.option("--out", "out_dir", default="results", show_default=True, type=click.Path(file_okay=False),
              help="Folder for the results (one sub-folder per example).")
@click.option("--force", is_flag=True, help="Replace files simkit did not write.")
def demo(out_dir: str, force: bool) -> None:
    """Run the built-in example designs (invented for demonstration) and write their results."""
    from simkit.demo import run_demo

    run_demo(Path(out_dir), force=force, echo=click.echo)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Folder for the report "
              "(default: DESIGN's name with -report, e.g. amp-report/).")
@click.option("--force", is_flag=True, help="Replace files simkit did not write.")
@click.option("--hash/--no-hash", "hash_", default=None, help=HASH_HELP)
@click.option("--quiet", is_flag=True, help=QUIET_HELP)
def report(design: str, overrides: tuple[str, ...], out_dir: str | None, force: bool, hash_: bool | None,
           quiet: bool) -> None:
    """Write a report for documents: report.md, a self-contained report.html, the schematic,
    the verdicts of the stress checks, the plots (PNG and SVG) and the deck."""
    from simkit.checks import run_checks
    from simkit.design.loader import read_design_text
    from simkit.report.design_report import default_out_dir, write_report
    from simkit.report.outputs import OutputDir

    d = _load(design, overrides)
    text = read_design_text(design)  # the file as written, for the appendix (read once, safely)
    with OutputDir(out_dir or default_out_dir(design), force=force) as out:
        out.check(["report.md", "report.html"])
        with _progress(quiet):
            from simkit import progress

            with progress.stage("the design"):
                result = _simulate_with(d, 1.0, hash_)
            with progress.stage("stress checks"):
                checks, check_error = run_checks(d)
        _warn(result)
        if check_error:
            click.echo(f"simkit: warning: the stress checks could not be completed: {check_error}", err=True)
        names = write_report(result, out, text, Path(design).name, overrides, checks, check_error)
        images = sum(1 for n in names if n.endswith(".png"))
        click.echo(f"simkit: wrote report.md, report.html, {images} figures (PNG and SVG) and deck.cir in "
                   f"{out.path}", err=True)
        click.echo(str(out.path / "report.html"))


@cli.command("hash")
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
def hash_command(design: str, overrides: tuple[str, ...], as_json: bool) -> None:
    """Diode turn-off ringing and hash: the design with its diodes' real recovery and capacitance, a
    snubber across each diode worked out for it, and the figures with that snubber."""
    from simkit.pipeline.hash_study import hash_study
    from simkit.report.hash_text import hash_text

    d = _load(design, overrides)
    study = hash_study(d)
    if as_json:
        click.echo(json.dumps(study.to_json(), indent=2))
    else:
        click.echo(hash_text(study), nl=False)


@cli.command()
@click.argument("name", required=False)
def parts(name: str | None) -> None:
    """List the built-in part library, or show one part with its ratings and sources."""
    from simkit.parts.catalogue import describe, listing

    click.echo(describe(name) if name else listing(), nl=False)


@cli.command()
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--topology", type=click.Choice(TOPOLOGIES),
              default="bridge", show_default=True)
def new(file: str, topology: str) -> None:
    """Write a starting design file (never over an existing file)."""
    from simkit.report.outputs import PendingFile
    from simkit.templates import template

    with PendingFile(file, exclusive=True) as target:
        target.commit(template(topology))
    click.echo(f"simkit: wrote {file} ({topology}); edit it, then: simkit run {file}", err=True)


def _many_options(f: Any) -> Any:
    """Options shared by sweep and spread: workers, output folder, resume."""
    f = click.option("--force", is_flag=True, help="Replace results in --out that simkit did not write, or that "
                     "belong to another sweep or spread.")(f)
    f = click.option("--retry-failed", is_flag=True, help="When resuming, simulate again the points that failed.")(f)
    f = click.option("--timeout", type=click.FloatRange(min=1.0), default=600.0, show_default=True,
                     metavar="SECONDS", help="Stop a point that takes longer and record it as failed "
                     "(local workers).")(f)
    f = click.option("--scheduler", metavar="ADDRESS", help="Run the points on the Dask distributed cluster "
                     "whose scheduler is at ADDRESS (tcp://HOST:PORT) instead of local processes.")(f)
    f = click.option("--jobs", type=click.IntRange(min=1), metavar="N", help="Worker processes, each with its own "
                     "ngspice (default: the number of cores).")(f)
    f = click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)(f)
    return f


def _many_opts(out: str, jobs: int | None, scheduler: str | None, timeout: float, force: bool,
               retry_failed: bool) -> Any:
    from simkit.sweep.runner import RunOptions

    if scheduler and jobs:
        raise UsageError("--jobs is for local workers; with --scheduler the cluster's workers run the points")
    if math.isnan(timeout):  # click's range check lets nan through (every comparison with it is false)
        raise UsageError("--timeout nan: give a number of seconds, at least 1 (inf: no limit)")
    if scheduler:
        from simkit.sweep.cluster import check_address

        check_address(scheduler)
    return RunOptions(out=Path(out), jobs=jobs, scheduler=scheduler, timeout=timeout, force=force,
                      retry_failed=retry_failed)


def _many_summary(report: Any, what: str) -> None:
    failed = f", {report.failed} failed" if report.failed else ""
    from_journal = report.finished - report.computed
    kept = f" ({from_journal} from the earlier run)" if report.resumed and from_journal else ""
    click.echo(f"{report.kind}: {report.finished} of {report.total} {what} done{failed}{kept} in "
               f"{report.seconds:.1f} s; results in {report.out}")
    checked = [e["check"] for e in report.entries if e.get("check")]
    if checked:
        click.echo("check: " + ", ".join(f"{checked.count(k)} {k}" for k in ("pass", "marginal", "fail")))
    for p in report.files:
        click.echo(f"  {p}")


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--vary", "varies", multiple=True, required=True, metavar="PATH=SPEC",
              help="A design value and its values: a list 22u,47u,100u, a range START:STOP:COUNT, or log steps "
              "START:STOP:COUNTlog (e.g. 10u:1m:9log).  Several --vary make a grid.")
@click.option("--zip", "paired", is_flag=True, help="Pair the --vary lists point by point (same length) "
              "instead of making a grid.")
@click.option("--plot", "plot_figs", metavar="FIGURE[,FIGURE...]", multiple=True, help="Write sweep.png: these "
              "figures against the first --vary, one line per value of the second (repeat --plot, or separate "
              "them with commas).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Folder for sweep.csv, sweep.json and "
              "the journal (default: DESIGN's name + '-sweep').")
@click.option("--check", "check", is_flag=True, help="Also check every point as `simkit check` does and add its "
              "verdicts to the rows (more simulations per point).")
@click.option("--report", "report", is_flag=True, help="Also write report.md and report.html into --out.")
@_many_options
def sweep(design: str, varies: tuple[str, ...], paired: bool, plot_figs: tuple[str, ...], out_dir: str | None,
          check: bool, report: bool, overrides: tuple[str, ...], jobs: int | None, scheduler: str | None,
          timeout: float, retry_failed: bool, force: bool) -> None:
    """Simulate a design over a grid of values; interrupted runs resume where they stopped."""
    from simkit.sweep.runner import plot_list, run_sweep

    out = out_dir or f"{Path(design).stem}-sweep"
    opts = _many_opts(out, jobs, scheduler, timeout, force, retry_failed)
    done = run_sweep(design, varies, opts, paired=paired, overrides=overrides, plot=plot_list(",".join(plot_figs)),
                     check=check, report=report)
    _many_summary(done, "points")


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--runs", type=click.IntRange(min=1), required=True, metavar="N", help="Number of Monte Carlo runs.")
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True, metavar="S",
              help="Seed of the draws: the same seed gives the same values and results.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Folder for spread.csv, spread.json and "
              "the journal (default: DESIGN's name + '-spread').")
@click.option("--check", "check", is_flag=True, help="Also check every run as `simkit check` does; the summary "
              "gives the share of runs that pass every rule.")
@click.option("--report", "report", is_flag=True, help="Also write report.md and report.html into --out.")
@_many_options
def spread(design: str, runs: int, seed: int, out_dir: str | None, check: bool, report: bool,
           overrides: tuple[str, ...], jobs: int | None, scheduler: str | None, timeout: float, retry_failed: bool,
           force: bool) -> None:
    """Draw part values within the design file's tolerances and simulate each draw."""
    from simkit.sweep.spread import run_spread, summary_table

    out = out_dir or f"{Path(design).stem}-spread"
    opts = _many_opts(out, jobs, scheduler, timeout, force, retry_failed)
    done = run_spread(design, runs, seed, opts, overrides=overrides, check=check, report=report)
    _many_summary(done, "runs")
    click.echo(summary_table(done), nl=False)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--vary", "vary", required=True, metavar="PATH=LOW:HIGH",
              help="The value to size and the range to search, e.g. filter.0.c=10u:1m.")
@click.option("--target", "target", required=True, metavar="FIGURE<=VALUE",
              help='What the figure must meet: "ripple_pp_v<=2", "vout_dc_v>=300" or "vout_dc_v=320".')
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
@click.option("--stock", "stock_series", type=click.Choice(SERIES_NAMES, case_sensitive=False),
              help="Also give the stock value of this E series (IEC 60063) that meets the target, and its "
              "neighbour that misses it.")
def size(design: str, vary: str, target: str, overrides: tuple[str, ...], as_json: bool,
         stock_series: str | None) -> None:
    """Find the value of one design parameter that meets a target figure."""
    from simkit.sweep.size import run_size, summary_text

    result = run_size(design, vary, target, overrides=overrides,
                      stock_series=stock_series.upper() if stock_series else None)
    if as_json:
        click.echo(json.dumps(result.to_json(), indent=2))
    else:
        click.echo(summary_text(result), nl=False)


@cli.command()
@click.argument("designs", nargs=-1, type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP + " Applies to every design.")
@click.option("--variant", "variants", multiple=True, metavar="PATH=VALUE[;PATH=VALUE]",
              help="With one design: a column with these changes (repeatable; several changes joined by ';').")
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
@click.option("--report", "report_dir", type=click.Path(file_okay=False), help="Also write report.md, report.html, "
              "compare.json and the plots on shared axes into this folder.")
@click.option("--no-check", "no_check", is_flag=True, help="Skip the stress checks (faster; no verdict counts).")
@click.option("--force", is_flag=True, help="With --report: replace files simkit did not write.")
def compare(designs: tuple[str, ...], overrides: tuple[str, ...], variants: tuple[str, ...], as_json: bool,
            report_dir: str | None, no_check: bool, force: bool) -> None:
    """Simulate several designs (or variants of one) and show their figures side by side.

    The first design is the reference: each change is another design's figure minus the first's.
    """
    from simkit.report.compare import REPORT_FILES, compare_text, write_report
    from simkit.report.outputs import OutputDir
    from simkit.sidebyside import compare_files

    with contextlib.ExitStack() as stack:
        out = None
        if report_dir:  # created, locked and checked before anything is simulated
            out = stack.enter_context(OutputDir(report_dir, force=force))
            out.check(list(REPORT_FILES))
        done = compare_files(designs, overrides, variants, check=not no_check,
                             echo=lambda text: click.echo(text, err=True))
        for e in done.entries:
            if e.check_error:
                click.echo(f"simkit: warning: {e.label}: the stress checks could not be completed: {e.check_error}",
                           err=True)
        if as_json:
            click.echo(json.dumps(done.to_json(), indent=2))
        else:
            click.echo(compare_text(done), nl=False)
        if out is not None:
            names = write_report(done, out)
            click.echo(f"simkit: wrote {', '.join(names)} in {out.path}", err=True)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--port", type=click.IntRange(min=0, max=65535), default=8470, show_default=True,
              help="Port on 127.0.0.1 (this computer only); 0 picks a free one.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Folder for the report, inside the "
              "design's folder (default: DESIGN's name with -watch, beside it).")
@click.option("--force", is_flag=True, help="Replace files simkit did not write in that folder.")
def watch(design: str, overrides: tuple[str, ...], port: int, out_dir: str | None, force: bool) -> None:
    """Serve the design's report on this computer and run it again whenever the file is saved.

    Open the address it prints in a browser: the page follows each run (stage, elapsed time,
    figures, checks, report) and shows an error in the file while keeping the last good result.
    Ctrl-C stops it.
    """
    from simkit.watch import watch as serve

    serve(design, overrides, port=port, out=out_dir, force=force, echo=lambda t: click.echo(t, err=True),
          announce=click.echo)


def _clipped(text: str, limit: int = 600) -> str:
    """Each line of a message at most ``limit`` characters (user text can be very long)."""
    return "\n".join(shown(line, limit) for line in text.splitlines())


def main(argv: list[str] | None = None) -> None:
    """Console entry point: maps every error to its exit code, never a traceback for user errors."""
    try:
        code = cli.main(args=argv, prog_name="simkit", standalone_mode=False)
        if isinstance(code, int) and code:
            sys.exit(code)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except click.ClickException as exc:
        exc.show()
        sys.exit(2 if isinstance(exc, click.UsageError) else exc.exit_code)
    except click.exceptions.Abort:
        click.echo("simkit: interrupted", err=True)
        sys.exit(130)
    except SimkitError as exc:
        click.echo(f"simkit: error: {_clipped(str(exc))}", err=True)
        sys.exit(exc.exit_code)
    except KeyboardInterrupt:
        click.echo("simkit: interrupted", err=True)
        sys.exit(130)
    except BrokenPipeError:
        sys.exit(0)
    except OSError as exc:  # the machine's fault (a full disk, a read-only folder), not a bug: exit 2
        where = f"{shown(str(exc.filename))}: " if exc.filename else ""
        click.echo(f"simkit: error: {where}{exc.strerror or exc}", err=True)
        sys.exit(2)
    except Exception as exc:  # a bug of ours, not the user's mistake
        if os.environ.get("SIMKIT_DEBUG"):
            raise
        click.echo(f"simkit: internal error: {type(exc).__name__}: {exc}\n"
                   "This is a bug in simkit; run again with SIMKIT_DEBUG=1 for the traceback.", err=True)
        sys.exit(3)
    sys.exit(0)


if __name__ == "__main__":  # pragma: no cover
    main()
