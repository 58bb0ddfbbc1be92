"""The command line: parse, call the pipeline, print.  Exit codes as SPEC.md section 1."""

from __future__ import annotations

import json
import os
import sys
from importlib import resources
from pathlib import Path
from typing import Any

import click

from simkit import __version__
from simkit.errors import SimkitError, UsageError

SET_HELP = "Override one design value, e.g. --set filter.0.c=220u (repeatable)."


def _load(design: str, overrides: tuple[str, ...]):  # type: ignore[no-untyped-def]
    from simkit.design.loader import load_design

    return load_design(design, overrides)


def _simulate(design):  # type: ignore[no-untyped-def]
    from simkit.pipeline import simulate

    return simulate(design)


def _warn(result: Any) -> None:
    for w in result.warnings:
        click.echo(f"simkit: warning: {w}", err=True)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="simkit")
def cli() -> None:
    """simkit: predict what a tube equipment's high-voltage supply will do, before building it.

    A design file (TOML) describes the winding, rectifier, filter and load; simkit writes
    the SPICE deck, runs ngspice, and reports output voltage, ripple, diode and capacitor
    stress, and the switch-on surge.  See docs/reference.md for every key and figure.
    """


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON document on stdout.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), help="Also write result.json, "
              "deck.cir and waveforms.png into this folder.")
@click.option("--force", is_flag=True, help="With --out: replace files simkit did not write.")
def run(design: str, overrides: tuple[str, ...], as_json: bool, out_dir: str | None, force: bool) -> None:
    """Simulate a design and print its figures."""
    from simkit.report.outputs import OutputDir
    from simkit.report.text import run_table

    d = _load(design, overrides)
    out = None
    if out_dir:
        out = OutputDir(out_dir, force=force)
        out.check(["result.json", "deck.cir", "waveforms.png"])
    result = _simulate(d)
    _warn(result)
    doc = result.to_json()
    if as_json:
        click.echo(json.dumps(doc, indent=2))
    else:
        click.echo(run_table(result), nl=False)
    if out is not None:
        from simkit.report.plots import run_figure_bytes

        out.write("result.json", json.dumps(doc, indent=2) + "\n")
        out.write("deck.cir", result.deck)
        out.write("waveforms.png", run_figure_bytes(result))
        click.echo(f"simkit: wrote result.json, deck.cir and waveforms.png in {out.path}", err=True)


@cli.command()
@click.argument("design", type=click.Path())
@click.option("--set", "overrides", multiple=True, metavar="PATH=VALUE", help=SET_HELP)
@click.option("-o", "output", type=click.Path(dir_okay=False), help="Write the deck to this file "
              "instead of stdout (an existing file is kept unless --force).")
@click.option("--force", is_flag=True, help="With -o: replace an existing file.")
def netlist(design: str, overrides: tuple[str, ...], output: str | None, force: bool) -> None:
    """Print the SPICE deck of the steady-state run, with .meas lines for ngspice -b."""
    d = _load(design, overrides)
    if output and Path(output).exists() and not force:
        raise UsageError(f"{output}: exists; choose another name or pass --force")
    result = _simulate(d)
    _warn(result)
    deck = result.deck
    if output:
        Path(output).write_text(deck, "utf-8")
        click.echo(f"simkit: wrote {output}", err=True)
    else:
        click.echo(deck, nl=False)


@cli.command()
@click.option("--out", "out_dir", default="results", show_default=True, type=click.Path(file_okay=False),
              help="Folder for the results (one sub-folder per example).")
@click.option("--force", is_flag=True, help="Replace files simkit did not write.")
def demo(out_dir: str, force: bool) -> None:
    """Run the built-in example designs (invented for demonstration) and write their results."""
    from simkit.demo import run_demo

    run_demo(Path(out_dir), force=force, echo=click.echo)


@cli.command()
@click.argument("name", required=False)
def parts(name: str | None) -> None:
    """List the built-in part library, or show one part with its ratings and sources."""
    from simkit.parts.catalogue import describe, listing

    click.echo(describe(name) if name else listing(), nl=False)


@cli.command()
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--topology", type=click.Choice(["half-wave", "centre-tap", "bridge", "doubler", "cascade"]),
              default="bridge", show_default=True)
def new(file: str, topology: str) -> None:
    """Write a starting design file (never over an existing file)."""
    from simkit.templates import template

    p = Path(file)
    if p.exists():
        raise UsageError(f"{file}: exists; simkit new never overwrites a file")
    p.write_text(template(topology), "utf-8")
    click.echo(f"simkit: wrote {file} ({topology}); edit it, then: simkit run {file}", err=True)


def examples_dir() -> Path:
    return Path(str(resources.files("simkit") / "examples"))


def main(argv: list[str] | None = None) -> None:
    """Console entry point: maps every error to its exit code, never a traceback for user errors."""
    try:
        cli.main(args=argv, prog_name="simkit", standalone_mode=False)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except click.ClickException as exc:
        exc.show()
        sys.exit(2 if isinstance(exc, click.UsageError) else exc.exit_code)
    except click.exceptions.Abort:
        click.echo("simkit: interrupted", err=True)
        sys.exit(130)
    except SimkitError as exc:
        click.echo(f"simkit: error: {exc}", err=True)
        sys.exit(exc.exit_code)
    except KeyboardInterrupt:
        click.echo("simkit: interrupted", err=True)
        sys.exit(130)
    except BrokenPipeError:
        sys.exit(0)
    except Exception as exc:  # a bug of ours, not the user's mistake
        if os.environ.get("SIMKIT_DEBUG"):
            raise
        click.echo(f"simkit: internal error: {type(exc).__name__}: {exc}\n"
                   "This is a bug in simkit; run again with SIMKIT_DEBUG=1 for the traceback.", err=True)
        sys.exit(3)
    sys.exit(0)


if __name__ == "__main__":  # pragma: no cover
    main()
