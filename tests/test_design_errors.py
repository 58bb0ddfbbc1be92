"""Every mistake a user can make in a design file: exit code 2, one message, no traceback.

The message names the file, the key (dotted, as ``--set`` spells it) and what was expected
(docs/reference.md).  The simulator is replaced by a trap in every test here: each mistake
must be caught while the design is read, before anything is simulated, so these tests
need no ngspice and run in well under a second each.
"""

from __future__ import annotations

import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

import simkit.cli
from simkit.design.loader import design_from_dict, load_design, parse_toml_text
from simkit.errors import DesignError
from tests.conftest import BRIDGE_TOML, ROOT

# --- designs the mistakes are made in ------------------------------------------------------

CHOKE_TOML = """\
title = "Test: centre-tap, choke input"
[source]
kind = "sine"
vrms = "350"
frequency = "60"
resistance = "60"
[rectifier]
topology = "centre-tap"
diode = "UF4007"
[[filter]]
l = "10"
dcr = "150"
[[filter]]
c = "40u"
esr = "0.5"
[load]
kind = "resistor"
r = "3.3k"
"""

DOUBLER_TOML = """\
title = "Test: doubler"
[source]
vrms = "120"
frequency = "60"
resistance = "4"
[rectifier]
topology = "doubler"
diode = "1N5408"
capacitance = "220u"
[load]
kind = "current"
i = "60m"
"""

CASCADE_TOML = """\
title = "Test: cascade"
[source]
vrms = "500"
frequency = "50"
resistance = "100"
[rectifier]
topology = "cascade"
stages = 3
capacitance = "1u"
[load]
kind = "resistor"
r = "1Meg"
"""

INLINE_DIODE_TOML = BRIDGE_TOML.replace(
    'diode = "1N4007"', 'diode = { is = "2.5n", n = 1.75, rs = "40m", bv = "1000" }'
)


def edit(base: str, old: str, new: str) -> str:
    """``base`` with the one occurrence of ``old`` replaced (fails if the text moved)."""
    assert base.count(old) == 1, f"{old!r} should occur once in the base design"
    return base.replace(old, new)


def cut(base: str, old: str) -> str:
    return edit(base, old, "")


# --- how a command is run --------------------------------------------------------------------


@dataclass
class Outcome:
    code: int | str | None
    out: str
    err: str


def _no_simulation(design: object, vscale: float = 1.0) -> object:
    raise AssertionError("the simulator was reached: a design mistake must be caught before any run")


@pytest.fixture
def simkit_cmd(capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch):  # type: ignore[no-untyped-def]
    """Run ``simkit ARGS`` through the console entry point, where exit codes are mapped."""
    monkeypatch.setattr(simkit.cli, "_simulate", _no_simulation)
    monkeypatch.delenv("SIMKIT_DEBUG", raising=False)

    def run(*args: str) -> Outcome:
        capsys.readouterr()
        with pytest.raises(SystemExit) as info:
            simkit.cli.main(list(args))
        captured = capsys.readouterr()
        return Outcome(info.value.code, captured.out, captured.err)

    return run


def assert_user_error(res: Outcome, file: str, *phrases: str, key: str | None = None) -> None:
    """Exit 2, nothing on stdout, one message on stderr naming file, key and what was expected."""
    assert res.code == 2, f"exit code {res.code}, stderr: {res.err!r}"
    assert "Traceback" not in res.err
    assert "internal error" not in res.err
    assert res.out == "", "a refused design must print no deck"
    message = res.err.strip()
    assert message.count("\n") == 0, f"expected one message line, got {res.err!r}"
    assert message.startswith("simkit: error: ")
    assert file in message
    if key is not None:
        assert f"{key}:" in message or f"{key!r}" in message, f"key {key!r} not named in {message!r}"
    for phrase in phrases:
        assert phrase in message, f"{phrase!r} not in {message!r}"


@dataclass(frozen=True)
class Mistake:
    id: str
    text: str
    key: str | None
    phrases: tuple[str, ...]
    sets: tuple[str, ...] = ()


def m(id: str, text: str, key: str | None, *phrases: str, sets: tuple[str, ...] = ()) -> Mistake:
    return Mistake(id, text, key, phrases, sets)


B = BRIDGE_TOML

MISTAKES: list[Mistake] = [
    # -- TOML syntax: the message gives the line -----------------------------------------------
    m("syntax-unclosed-string", edit(B, 'vrms = "250"', 'vrms = "250'), None, "TOML syntax error", "line 4"),
    m("syntax-missing-equals", edit(B, 'r = "5k"', 'r "5k"'), None, "TOML syntax error", "line 19"),
    m("syntax-unclosed-header", edit(B, "[load]", "[load"), None, "TOML syntax error", "line 17"),
    m("syntax-duplicate-key", edit(B, 'vrms = "250"', 'vrms = "250"\nvrms = "240"'), None, "line 5"),
    m("syntax-bare-word", edit(B, 'vrms = "250"', "vrms = 250V"), None, "TOML syntax error", "line 4"),
    m("nested-too-deep", "x = " + "[" * 3000 + "]" * 3000 + "\n" + B, None, "nested too deeply"),
    # -- unknown keys at every level, with a suggestion -----------------------------------------
    m("unknown-top", "titel = 'x'\n" + B, "titel", "unknown key", "did you mean 'title'?"),
    m("unknown-section", edit(B, "[bleeder]", "[bleder]"), "bleder", "did you mean 'bleeder'?"),
    m("unknown-section-case", edit(B, "[source]", "[Source]"), "Source", "did you mean 'source'?"),
    m("unknown-filters", B.replace("[[filter]]", "[[filters]]"), "filters", "did you mean 'filter'?"),
    m("unknown-source", edit(B, 'vrms = "250"', 'vrm = "250"'), "source.vrm", "did you mean 'vrms'?"),
    m("unknown-source-2", edit(B, 'frequency = "50"', 'frequncy = "50"'), "source.frequncy",
      "did you mean 'frequency'?"),
    m("unknown-rectifier", edit(B, "topology =", "topolgy ="), "rectifier.topolgy", "did you mean 'topology'?"),
    m("unknown-diode-param", edit(INLINE_DIODE_TOML, 'is = "2.5n"', 'iss = "2.5n"'), "rectifier.diode.iss",
      "did you mean 'is'?"),
    m("unknown-filter-0", edit(B, 'esr = "0.2"', 'esrr = "0.2"'), "filter.0.esrr", "did you mean 'esr'?"),
    m("unknown-filter-1", edit(CHOKE_TOML, 'dcr = "150"', 'dcr_ohm = "150"'), "filter.0.dcr_ohm",
      "did you mean 'dcr'?"),
    m("unknown-filter-2", edit(B, 'c = "47u"', 'c = "47u"\ncap = "1u"'), "filter.2.cap", "unknown key"),
    m("unknown-load", edit(B, 'kind = "resistor"', 'kindd = "resistor"'), "load.kindd", "did you mean 'kind'?"),
    m("unknown-bleeder", edit(B, 'r = "220k"', 'resistance = "220k"'), "bleeder.resistance", "valid keys: r"),
    m("unknown-bleeder-typo", edit(B, 'r = "220k"', 'rr = "220k"'), "bleeder.rr", "did you mean 'r'?"),
    m("unknown-note", "notes = 'x'\n" + B, "notes", "did you mean 'note'?"),
    m("unknown-simulation", B + "[simulation]\nswitch_on_phse = 90\n", "simulation.switch_on_phse",
      "did you mean 'switch_on_phase'?"),
    m("unknown-key-with-escape", '"a\\u001b[2Jb" = 1\n' + B, "'a\\x1b[2Jb'", "unknown key"),
    # -- missing keys and sections ----------------------------------------------------------------
    m("empty-file", "", "source", "missing section [source]"),
    m("no-source", "[rectifier]\ntopology = 'bridge'\n", "source", "missing section [source]"),
    m("no-rectifier", B.split("[rectifier]")[0], "rectifier", "missing section [rectifier]"),
    m("no-vrms", cut(B, 'vrms = "250"\n'), "source.vrms", "missing key", "RMS voltage"),
    m("no-frequency", cut(B, 'frequency = "50"\n'), "source.frequency", "missing key", "frequency"),
    m("no-resistance", cut(B, 'resistance = "25"\n'), "source.resistance", "missing key", "series resistance"),
    m("no-topology", cut(B, 'topology = "bridge"\n'), "rectifier.topology", "missing key", '"bridge"'),
    m("no-load-kind", cut(B, 'kind = "resistor"\n'), "load.kind", "missing key", '"resistor"'),
    m("no-load-r", cut(B, 'r = "5k"\n'), "load.r", "missing key", 'kind "resistor" needs r'),
    m("no-load-i", edit(B, 'kind = "resistor"\nr = "5k"', 'kind = "current"'), "load.i", "missing key",
      'kind "current" needs i'),
    m("no-bleeder-r", cut(B, 'r = "220k"\n'), "bleeder.r", "missing key", "bleeder resistance"),
    m("no-diode-is", edit(INLINE_DIODE_TOML, 'is = "2.5n", ', ""), "rectifier.diode.is", "missing key",
      "saturation current"),
    # -- wrong types ----------------------------------------------------------------------------
    m("value-for-table", edit(B, '[source]\nkind = "sine"\nvrms = "250"\nfrequency = "50"\nresistance = "25"\n',
                              'source = "250"\n'), "source", "expected a table [source], got text"),
    m("list-for-table", edit(B, "[bleeder]", "[[bleeder]]"), "bleeder", "expected a table [bleeder], got a list"),
    m("table-for-value", edit(B, 'vrms = "250"', "vrms = { v = 250 }"), "source.vrms",
      "got a table, expected a voltage"),
    m("list-for-value", edit(B, 'vrms = "250"', "vrms = [250]"), "source.vrms", "got a list, expected a voltage"),
    m("text-for-number", edit(B, 'vrms = "250"', 'vrms = "two hundred fifty"'), "source.vrms",
      "is not a number", "expected a voltage"),
    m("bool-for-number", edit(B, 'c = "47u"', "c = true"), "filter.2.c", "true/false", "expected a capacitance"),
    m("date-for-number", edit(B, 'vrms = "250"', "vrms = 1979-05-27"), "source.vrms", "expected a voltage"),
    m("text-for-filter-list", 'filter = "100u"\n' + CASCADE_TOML, "filter", "expected [[filter]] sections, got text"),
    m("number-in-filter-list", "filter = [1, 2]\n" + CASCADE_TOML, "filter.0",
      "expected a [[filter]] table, got a number"),
    m("number-for-title", edit(B, 'title = "Test: bridge into CRC"', "title = 5"), "title",
      "expected text in quotes"),
    m("number-for-note", "note = 3\n" + B, "note", "expected text in quotes"),
    m("number-for-topology", edit(B, 'topology = "bridge"', "topology = 2"), "rectifier.topology",
      "expected one of", '"bridge"'),
    m("number-for-kind", edit(B, 'kind = "sine"', "kind = 1"), "source.kind", 'expected one of "sine"'),
    m("number-for-diode", edit(B, 'diode = "1N4007"', "diode = 4007"), "rectifier.diode",
      'expected a part name such as "1N4007" or an inline table'),
    m("text-for-stages", edit(CASCADE_TOML, "stages = 3", 'stages = "three"'), "rectifier.stages",
      "expected a whole number"),
    m("fraction-for-stages", edit(CASCADE_TOML, "stages = 3", "stages = 2.5"), "rectifier.stages",
      "expected a whole number"),
    m("text-for-steps", B + '[simulation]\nsteps_per_period = "lots"\n', "simulation.steps_per_period",
      "expected a whole number"),
    m("value-for-simulation", "simulation = 1\n" + B, "simulation", "expected a table [simulation]"),
    # -- bad units or suffixes -----------------------------------------------------------------
    m("inductance-as-capacitance", edit(B, 'c = "100u"', 'c = "100uH"'), "filter.0.c",
      "is an inductance (H), expected a capacitance"),
    m("voltage-as-frequency", edit(B, 'frequency = "50"', 'frequency = "50V"'), "source.frequency",
      "is a voltage (V), expected a frequency"),
    m("farad-as-resistance", edit(B, 'r = "5k"', 'r = "5kF"'), "load.r", "expected a resistance"),
    m("unknown-suffix", edit(B, 'vrms = "250"', 'vrms = "250x"'), "source.vrms", "unknown suffix 'x'",
      "expected a voltage"),
    m("double-prefix", edit(B, 'r = "1k"', 'r = "1kk"'), "filter.1.r", "unknown suffix", "expected a resistance"),
    m("bad-percent", edit(B, 'resistance = "25"', 'resistance = "25"\nmains_tolerance = "ten%"'),
      "source.mains_tolerance", 'is not a percentage such as "10%"'),
    m("line-break-in-value", edit(B, 'vrms = "250"', 'vrms = "250\\n"'), "source.vrms",
      "line break or control character"),
    m("huge-integer", edit(B, 'vrms = "250"', "vrms = " + "9" * 400), "source.vrms", "too large"),
    m("nan", edit(B, 'vrms = "250"', "vrms = nan"), "source.vrms", "not a finite number"),
    m("inf", edit(B, 'vrms = "250"', "vrms = inf"), "source.vrms", "not a finite number"),
    m("nan-percent", edit(B, 'resistance = "25"', 'resistance = "25"\nmains_tolerance = nan'),
      "source.mains_tolerance", "percentage"),
    # -- non-physical values --------------------------------------------------------------------
    m("zero-c", edit(B, 'c = "100u"', 'c = "0"'), "filter.0.c", "must be positive"),
    m("negative-c", edit(B, 'c = "47u"', 'c = "-47u"'), "filter.2.c", "must be positive"),
    m("huge-c", edit(B, 'c = "47u"', 'c = "47"'), "filter.2.c", "must be at most 10"),
    m("zero-r", edit(B, 'r = "1k"', "r = 0"), "filter.1.r", "must be positive"),
    m("zero-l", edit(CHOKE_TOML, 'l = "10"', 'l = "0"'), "filter.0.l", "must be positive"),
    m("negative-l", edit(CHOKE_TOML, 'l = "10"', 'l = "-10H"'), "filter.0.l", "must be positive"),
    m("zero-f", edit(B, 'frequency = "50"', "frequency = 0"), "source.frequency", "must be positive"),
    m("negative-f", edit(B, 'frequency = "50"', 'frequency = "-50Hz"'), "source.frequency", "must be positive"),
    m("zero-vrms", edit(B, 'vrms = "250"', 'vrms = "0"'), "source.vrms", "must be positive"),
    m("negative-vrms", edit(B, 'vrms = "250"', "vrms = -250"), "source.vrms", "must be positive"),
    m("negative-esr", edit(B, 'esr = "0.2"', 'esr = "-0.2"'), "filter.0.esr", "must be zero or more"),
    m("negative-dcr", edit(CHOKE_TOML, 'dcr = "150"', "dcr = -150"), "filter.0.dcr", "must be zero or more"),
    m("negative-resistance", edit(B, 'resistance = "25"', 'resistance = "-25"'), "source.resistance",
      "must be zero or more"),
    m("negative-inductance", edit(B, 'resistance = "25"', 'resistance = "25"\ninductance = "-1m"'),
      "source.inductance", "must be zero or more"),
    m("zero-load-r", edit(B, 'r = "5k"', 'r = "0"'), "load.r", "must be positive"),
    m("negative-load-i", edit(DOUBLER_TOML, 'i = "60m"', 'i = "-60m"'), "load.i", "must be positive"),
    m("zero-bleeder", edit(B, 'r = "220k"', "r = 0"), "bleeder.r", "must be positive"),
    m("zero-stage-c", edit(DOUBLER_TOML, 'capacitance = "220u"', 'capacitance = "0u"'), "rectifier.capacitance",
      "must be positive"),
    m("zero-diode-is", edit(INLINE_DIODE_TOML, 'is = "2.5n"', "is = 0"), "rectifier.diode.is", "must be positive"),
    m("tolerance-too-wide", edit(B, 'resistance = "25"', 'resistance = "25"\nmains_tolerance = "60%"'),
      "source.mains_tolerance", "between 0% and 50%"),
    m("steps-too-few", B + "[simulation]\nsteps_per_period = 3\n", "simulation.steps_per_period",
      "must be between 50 and"),
    # -- impossible combinations ----------------------------------------------------------------
    m("stages-on-bridge", edit(B, 'topology = "bridge"', 'topology = "bridge"\nstages = 2'), "rectifier.stages",
      'applies to topology "cascade" only'),
    m("cascade-zero-stages", edit(CASCADE_TOML, "stages = 3", "stages = 0"), "rectifier.stages",
      "must be between 1 and 20, got 0"),
    m("cascade-negative-stages", edit(CASCADE_TOML, "stages = 3", "stages = -2"), "rectifier.stages",
      "must be between 1 and 20"),
    m("capacitance-on-bridge", edit(B, 'topology = "bridge"', 'topology = "bridge"\ncapacitance = "100u"'),
      "rectifier.capacitance", "applies to doubler and cascade only"),
    m("doubler-without-capacitance", cut(DOUBLER_TOML, 'capacitance = "220u"\n'), "rectifier.capacitance",
      "missing key", "a doubler needs its stage capacitance"),
    m("cascade-without-capacitance", cut(CASCADE_TOML, 'capacitance = "1u"\n'), "rectifier.capacitance",
      "missing key", "a cascade needs its stage capacitance"),
    m("ends-in-resistor", B.split('[[filter]]\nc = "47u"')[0], "filter.1",
      "the filter ends in a series resistor with nothing after it", "add a [load], a [bleeder] or a final c"),
    m("ends-in-choke", CHOKE_TOML.split('[[filter]]\nc = "40u"')[0], "filter.0",
      "the filter ends in a series choke with nothing after it"),
    m("nothing-to-feed", B.split("[[filter]]")[0], "filter", "nothing to feed"),
    m("section-c-and-l", edit(B, 'r = "1k"', 'c = "1u"\nl = "1"'), "filter.1",
      "exactly one of c, l or r; got c and l"),
    m("section-none", edit(B, 'r = "1k"', ""), "filter.1", "exactly one of c, l or r; got none"),
    m("section-esr-only", edit(B, 'r = "1k"', 'esr = "1"'), "filter.1", "exactly one of c, l or r; got none"),
    m("esr-on-l", edit(CHOKE_TOML, 'dcr = "150"', 'dcr = "150"\nesr = "1"'), "filter.0.esr",
      "esr belongs to a c section"),
    m("dcr-on-c", edit(B, 'esr = "0.2"', 'dcr = "0.2"'), "filter.0.dcr", "dcr belongs to an l section"),
    m("i-on-resistor-load", edit(B, 'r = "5k"', 'r = "5k"\ni = "10m"'), "load.i", 'belongs to kind "current"'),
    m("r-on-current-load", edit(DOUBLER_TOML, 'i = "60m"', 'i = "60m"\nr = "5k"'), "load.r",
      'belongs to kind "resistor"'),
    # -- unknown names --------------------------------------------------------------------------
    m("diode-typo", edit(B, 'diode = "1N4007"', 'diode = "1N4O07"'), "rectifier.diode",
      "is not in the part library", "did you mean '1N4007'?"),
    m("diode-unknown", edit(B, 'diode = "1N4007"', 'diode = "BY255X"'), "rectifier.diode",
      "is not in the part library", "simkit parts"),
    m("topology-typo", edit(B, 'topology = "bridge"', 'topology = "brige"'), "rectifier.topology",
      "is not one of", "did you mean 'bridge'?"),
    m("topology-unknown", edit(B, 'topology = "bridge"', 'topology = "tripler"'), "rectifier.topology",
      'is not one of "half-wave", "centre-tap", "bridge", "doubler", "cascade"'),
    m("source-kind-unknown", edit(B, 'kind = "sine"', 'kind = "square"'), "source.kind", 'is not one of "sine"'),
    m("load-kind-unknown", edit(B, 'kind = "resistor"', 'kind = "resistr"'), "load.kind",
      "did you mean 'resistor'?"),
    m("title-two-lines", edit(B, 'title = "Test: bridge into CRC"', 'title = "one\\ntwo"'), "title",
      "must be one line of text"),
    m("title-too-long", edit(B, 'title = "Test: bridge into CRC"', f'title = "{"x" * 300}"'), "title",
      "keep it under 200"),
    # -- bad --set ------------------------------------------------------------------------------
    m("set-past-the-end", B, "filter.5.c", "position 5 is past the end", "the file has 3", sets=("filter.5.c=1u",)),
    m("set-into-absent-list", DOUBLER_TOML, "filter.0.c", "position 0 is past the end", sets=("filter.0.c=1u",)),
    m("set-value-as-table", B, "source.vrms.x", "'source.vrms' holds a value, not a table",
      sets=("source.vrms.x=1",)),
    m("set-no-equals", B, None, "expected PATH=VALUE", "filter.0.c=220u", sets=("filter.0.c",)),
    m("set-empty-path", B, None, "empty part in the path", sets=("=5",)),
    m("set-double-dot", B, None, "empty part in the path", sets=("filter..c=1u",)),
    m("set-name-for-position", B, "filter.x.c", "needs a list position", sets=("filter.x.c=1u",)),
    m("set-position-in-table", B, "source.0", "'source' is a table, not a list", sets=("source.0=1",)),
    m("set-position-at-top", B, None, "the top level is a table, not a list", sets=("0=1",)),
    m("set-negative-position", B, "filter.-1.c", "needs a list position", sets=("filter.-1.c=1u",)),
    m("set-unknown-key", B, "filter.1.rr", "did you mean 'r'?", sets=("filter.1.rr=1k",)),
    m("set-bad-unit", B, "filter.0.c", "is an inductance (H), expected a capacitance", sets=("filter.0.c=220uH",)),
    m("set-non-physical", B, "source.vrms", "must be positive", sets=("source.vrms=-1",)),
    m("set-empty-value", B, "filter.2.c", "empty value", sets=("filter.2.c=",)),
    m("set-table-replaced", B, "filter.0", "expected a [[filter]] table, got a number", sets=("filter.0=5",)),
    m("set-stages-on-bridge", B, "rectifier.stages", 'applies to topology "cascade" only',
      sets=("rectifier.stages=2",)),
    m("set-second-of-two-bad", B, "load.r", "must be positive", sets=("filter.0.c=220u", "load.r=0")),
    # -- strings of diodes, the example flag -------------------------------------------------------
    m("series-zero", edit(B, 'diode = "1N4007"', 'diode = "1N4007"\nseries = 0'), "rectifier.series",
      "must be between 1 and 50"),
    m("sharing-without-string", edit(B, 'diode = "1N4007"', 'diode = "1N4007"\nsharing = "470k"'),
      "rectifier.sharing", "set series = 2 or more"),
    m("sharing-rating-without-sharing", edit(B, 'diode = "1N4007"', 'diode = "1N4007"\nseries = 2\n'
                                             'sharing_rating = { w = "1" }'), "rectifier.sharing_rating",
      "needs sharing"),
    m("series-of-tubes", edit(B, 'diode = "1N4007"', 'diode = "5U4GB"\nseries = 2'), "rectifier.series",
      "for silicon diodes"),
    m("example-not-bool", edit(B, 'title = "Test: bridge into CRC"', 'title = "Test: bridge into CRC"\n'
                               'example = "yes"'), "example", "expected true or false"),
]


@pytest.mark.parametrize("mistake", MISTAKES, ids=[x.id for x in MISTAKES])
@pytest.mark.parametrize("command", ["netlist", "run"])
def test_design_mistake(mistake: Mistake, command: str, tmp_path: Path, simkit_cmd) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "supply.toml"
    path.write_text(mistake.text, "utf-8")
    args = [command, str(path)]
    for s in mistake.sets:
        args += ["--set", s]
    res = simkit_cmd(*args)
    assert_user_error(res, str(path), *mistake.phrases, key=mistake.key)


def test_mistake_ids_are_unique() -> None:
    ids = [x.id for x in MISTAKES]
    assert len(ids) == len(set(ids))


def test_the_base_designs_are_valid() -> None:
    # The mistakes above are made in designs that are otherwise right, so each message
    # is about the one mistake and nothing else.
    for text in (BRIDGE_TOML, CHOKE_TOML, DOUBLER_TOML, CASCADE_TOML, INLINE_DIODE_TOML):
        design_from_dict(parse_toml_text(text))


def test_valid_overrides_are_applied(tmp_path: Path) -> None:
    path = tmp_path / "supply.toml"
    path.write_text(BRIDGE_TOML, "utf-8")
    d = load_design(path, ["filter.0.c=220u", "source.vrms=300", "rectifier.diode=UF4007", "bleeder.r=1Meg"])
    assert d.filters[0].value == 220e-6
    assert d.source.vrms == 300.0
    assert d.rectifier.diode.name == "UF4007"
    assert d.bleeder is not None and d.bleeder.r == 1e6


def test_set_into_a_lone_filter_table(tmp_path: Path) -> None:
    # A single [filter] table is read as one section; --set filter.0 must reach it too.
    path = tmp_path / "supply.toml"
    path.write_text(CASCADE_TOML.replace("[load]", '[filter]\nc = "1u"\n[load]'), "utf-8")
    d = load_design(path, ["filter.0.c=2u"])
    assert [f.value for f in d.filters] == [2e-6]


# --- files that are not design files --------------------------------------------------------


def test_missing_file(tmp_path: Path, simkit_cmd) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "no-such-design.toml"
    res = simkit_cmd("netlist", str(path))
    assert_user_error(res, str(path), "no such file")


def test_folder_instead_of_file(tmp_path: Path, simkit_cmd) -> None:  # type: ignore[no-untyped-def]
    folder = tmp_path / "designs"
    folder.mkdir()
    for command in ("netlist", "run"):
        res = simkit_cmd(command, str(folder))
        assert_user_error(res, str(folder), "is a folder, expected a TOML design file")


def test_folder_instead_of_file_in_the_loader(tmp_path: Path) -> None:
    with pytest.raises(DesignError) as info:
        load_design(tmp_path)
    assert info.value.file == str(tmp_path)
    assert "is a folder, expected a TOML design file" in str(info.value)


def test_not_utf8(tmp_path: Path, simkit_cmd) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "latin1.toml"
    text = BRIDGE_TOML.replace('title = "Test: bridge into CRC"', 'title = "Netzteil 250 V"\nnote = "für Röhren"')
    path.write_bytes(text.encode("latin-1"))
    res = simkit_cmd("netlist", str(path))
    assert_user_error(res, str(path), "not UTF-8 text", "line 2")


def test_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    # Windows editors often save UTF-8 with a byte-order mark; that is no mistake of the user's.
    path = tmp_path / "bom.toml"
    path.write_bytes("\ufeff".encode() + BRIDGE_TOML.encode())
    assert load_design(path).title == "Test: bridge into CRC"


def test_path_through_a_file(tmp_path: Path, simkit_cmd) -> None:  # type: ignore[no-untyped-def]
    # Neither missing nor a folder: the operating system refuses to read it (as root too).
    blocker = tmp_path / "plain.toml"
    blocker.write_text(BRIDGE_TOML, "utf-8")
    path = blocker / "inner.toml"
    res = simkit_cmd("netlist", str(path))
    assert_user_error(res, str(path), "cannot read the file")


def test_design_error_carries_file_and_key(tmp_path: Path) -> None:
    path = tmp_path / "supply.toml"
    path.write_text(edit(CHOKE_TOML, 'dcr = "150"', 'dcr = "-1"'), "utf-8")
    with pytest.raises(DesignError) as info:
        load_design(path)
    assert info.value.file == str(path)
    assert info.value.key == "filter.0.dcr"
    assert info.value.exit_code == 2


# --- the real command line ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "sets", "phrase"),
    [
        (edit(B, 'vrms = "250"', 'vrms = "250'), (), "line 4"),
        (edit(B, 'c = "100u"', 'c = "100uH"'), (), "filter.0.c: "),
        (B, ("filter.7.c=1u",), "filter.7.c: position 7 is past the end"),
    ],
)
def test_console_process(text: str, sets: tuple[str, ...], phrase: str, tmp_path: Path) -> None:
    """The same through a fresh interpreter, where any uncaught exception would print a traceback."""
    path = tmp_path / "supply.toml"
    path.write_text(text, "utf-8")
    args = [sys.executable, "-m", "simkit.cli", "netlist", str(path)]
    for s in sets:
        args += ["--set", s]
    proc = subprocess.run(args, capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert proc.returncode == 2, proc.stderr
    assert proc.stdout == ""
    assert "Traceback" not in proc.stderr
    assert str(path) in proc.stderr
    assert phrase in proc.stderr
    assert proc.stderr.strip().count("\n") == 0
