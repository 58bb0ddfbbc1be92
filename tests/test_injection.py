"""Netlist safety: no text from a design file reaches the deck as it was written.

An ngspice deck can run shell commands (``.control`` ... ``shell`` ... ``.endc``) and read
files (``.include``, ``.lib``).  A design file may come from anywhere, so every string a
user can give -- in the file or through ``--set`` -- is fed hostile text here.  The
command must either refuse it (exit 2, naming the key) or turn it into a harmless
comment: the printed deck then has no line that starts a control block, includes a file
or runs a command, and a marker file that the hostile text tries to create never appears,
not even when the deck is run by the ngspice command line.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

import simkit.cli
from tests.conftest import BRIDGE_TOML, ROOT

# --- hostile text --------------------------------------------------------------------------


def hostile_values(marker: Path) -> list[str]:
    """Text that would run ``touch MARKER`` or read a file if it reached a deck verbatim."""
    m = str(marker)
    return [
        f"1k\n.control\nshell touch {m}\n.endc",
        f"1k\r\n.control\r\nshell touch {m}\r\n.endc",
        f"1k\r.control\rshell touch {m}\r.endc",
        f"\n.control\nshell touch {m}\n.endc\n",
        ".include /etc/passwd",
        "1k\n.include /etc/passwd",
        ".lib /etc/passwd all",
        f"*#shell touch {m}",
        f"#shell touch {m}",
        f"shell touch {m}",
        f"1k\u2028.control\u2028shell touch {m}\u2028.endc",  # Unicode line separator
        f"1k\x85.control\x85shell touch {m}\x85.endc",  # NEL
        f"1k\x0c.control\x0cshell touch {m}\x0c.endc",  # form feed
        "1k\x0b.include /etc/passwd",  # vertical tab
        "1k\x00.include /etc/passwd",
        f"1k $ x\n+ shell touch {m}",  # a continuation line
        f"1k; shell touch {m}",
        f"100u .control shell touch {m} .endc",
        f"{{shell touch {m}}}",
        f"`touch {m}`",
        f"$(touch {m})",
    ]


# A value with a line break must never be taken as one line of text.
LINE_BREAKS = ("\n", "\r", "\u2028", "\x85", "\x0c", "\x0b")


def toml_string(text: str) -> str:
    """``text`` as a TOML basic string (JSON's escapes are a subset of TOML's for these)."""
    return json.dumps(text, ensure_ascii=True)


# --- every string field of a design file ---------------------------------------------------

CHOKE_TOML = """\
title = "Test: centre-tap, choke input"
[source]
vrms = "350"
frequency = "60"
resistance = "60"
[rectifier]
topology = "centre-tap"
[[filter]]
l = "10"
dcr = "150"
[[filter]]
c = "40u"
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

INLINE = 'diode = "1N4007"'

TRANSFORMER_TOML = """\
title = "Test: transformer nameplate"
[source]
kind = "transformer"
primary_vrms = "230"
frequency = "50"
secondary_vrms = "600"
rated_current = "150m"
regulation = "8%"
centre_tap = true
leakage_inductance = "20m"
[rectifier]
topology = "centre-tap"
diode = { kind = "vacuum", perveance = "1m", warmup = "10", piv = "1400", peak_current = "0.5" }
[[filter]]
c = "40u"
[load]
kind = "tube"
point = { v = "300", i = "80m" }
warmup = "15"
"""

WINDINGS_TOML = """\
title = "Test: transformer resistances"
[source]
kind = "transformer"
primary_vrms = "230"
frequency = "50"
secondary_vrms = "300"
rated_current = "200m"
primary_resistance = "12"
secondary_resistance = "40"
[rectifier]
topology = "bridge"
[[filter]]
c = "100u"
[[filter]]
r = "470"
[[filter]]
c = "47u"
[load]
kind = "steps"
steps = [[0, "10m"], ["1", "60m"]]
at = 0
[bleeder]
r = "100k"
"""

INVERTER_TOML = """\
title = "Test: inverter and battery"
[source]
kind = "inverter"
waveform = "modified-sine"
vrms = "230"
peak = "320"
frequency = "50"
output_resistance = "8"
rated_power = "150"
efficiency = "85%"
idle_power = "6"
regulated = false
response_time = "40m"
edge_time = "40u"
[battery]
voltage = "12.6"
internal_resistance = "25m"
capacity = "7"
usable_fraction = "50%"
[rectifier]
topology = "doubler"
capacitance = "100u"
[load]
kind = "keyed"
down = { i = "100m" }
up = { r = "60k" }
rate = "5"
duty = "50%"
rise = "2m"
fall = "2m"
pushing_hz_per_v = "20"
"""

TABLE_TOML = INVERTER_TOML.replace('efficiency = "85%"\n', 'efficiency_table = [[0.1, "60%"], [1.0, "88%"]]\n').replace(
    'rate = "5"\nduty = "50%"\n', 'morse = "E"\nwpm = "20"\n')


DIODE_GOOD = {"is": "2.5n", "n": "1.75", "rs": "40m", "bv": "1000", "tt": "0", "cjo": "0", "vrrm": "1000",
              "ifav": "1", "ifsm": "30"}


def _inline_diode(key: str) -> tuple[str, str, str]:
    params = {"is": '"2.5n"', "n": "1.75", "rs": '"40m"', "bv": '"1000"'}
    params[key] = "{v}"
    body = ", ".join(f"{k} = {v}" for k, v in params.items())
    return INLINE, f"diode = {{ {body} }}", DIODE_GOOD[key]


@dataclass(frozen=True)
class Field:
    """Where a value goes: ``old`` in ``base`` is replaced by ``new`` with ``{v}`` filled in."""

    key: str
    base: str
    old: str
    new: str
    good: str  # a valid value, as text

    def design(self, value: str) -> str:
        assert self.base.count(self.old) == 1, self.key
        return self.base.replace(self.old, self.new.replace("{v}", toml_string(value)))


TITLE_LINE = 'title = "Test: bridge into CRC"'

#: A user part library the field table's designs may name (written beside each test design).
PARTS_TOML = '[resistors.R3W]\nw = "3"\n'

FIELDS: list[Field] = [
    Field("title", BRIDGE_TOML, TITLE_LINE, "title = {v}", "Test: bridge into CRC"),
    Field("note", BRIDGE_TOML, TITLE_LINE, TITLE_LINE + "\nnote = {v}", "built 1962"),
    Field("source.kind", BRIDGE_TOML, 'kind = "sine"', "kind = {v}", "sine"),
    Field("source.vrms", BRIDGE_TOML, 'vrms = "250"', "vrms = {v}", "250"),
    Field("source.frequency", BRIDGE_TOML, 'frequency = "50"', "frequency = {v}", "50"),
    Field("source.resistance", BRIDGE_TOML, 'resistance = "25"', "resistance = {v}", "25"),
    Field("source.inductance", BRIDGE_TOML, 'resistance = "25"', 'resistance = "25"\ninductance = {v}', "1m"),
    Field("source.mains_tolerance", BRIDGE_TOML, 'resistance = "25"', 'resistance = "25"\nmains_tolerance = {v}',
          "10%"),
    Field("rectifier.topology", BRIDGE_TOML, 'topology = "bridge"', "topology = {v}", "bridge"),
    Field("rectifier.diode", BRIDGE_TOML, INLINE, "diode = {v}", "1N4007"),
    *(Field(f"rectifier.diode.{k}", BRIDGE_TOML, *_inline_diode(k)) for k in DIODE_GOOD),
    Field("rectifier.capacitance", DOUBLER_TOML, 'capacitance = "220u"', "capacitance = {v}", "220u"),
    Field("rectifier.stages", CASCADE_TOML, "stages = 3", "stages = {v}", "3"),
    Field("rectifier.capacitance_tolerance", DOUBLER_TOML, 'capacitance = "220u"',
          'capacitance = "220u"\ncapacitance_tolerance = {v}', "20%"),
    Field("filter.0.tolerance", BRIDGE_TOML, 'esr = "0.2"', 'esr = "0.2"\ntolerance = {v}', "20%"),
    Field("filter.0.c", BRIDGE_TOML, 'c = "100u"', "c = {v}", "100u"),
    Field("filter.0.esr", BRIDGE_TOML, 'esr = "0.2"', "esr = {v}", "0.2"),
    Field("filter.1.r", BRIDGE_TOML, 'r = "1k"', "r = {v}", "1k"),
    Field("filter.2.c", BRIDGE_TOML, 'c = "47u"', "c = {v}", "47u"),
    Field("filter.0.l", CHOKE_TOML, 'l = "10"', "l = {v}", "10"),
    Field("filter.0.dcr", CHOKE_TOML, 'dcr = "150"', "dcr = {v}", "150"),
    Field("load.kind", BRIDGE_TOML, 'kind = "resistor"', "kind = {v}", "resistor"),
    Field("load.r", BRIDGE_TOML, 'r = "5k"', "r = {v}", "5k"),
    Field("load.i", DOUBLER_TOML, 'i = "60m"', "i = {v}", "60m"),
    Field("bleeder.r", BRIDGE_TOML, 'r = "220k"', "r = {v}", "220k"),
    Field("bleeder.tolerance", BRIDGE_TOML, 'r = "220k"', 'r = "220k"\ntolerance = {v}', "5%"),
    Field("load.tolerance", BRIDGE_TOML, 'r = "5k"', 'r = "5k"\ntolerance = {v}', "10%"),
    *(Field(f"source.{k}", TRANSFORMER_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("primary_vrms", '"230"'), ("secondary_vrms", '"600"'), ("rated_current", '"150m"'),
                   ("regulation", '"8%"'), ("centre_tap", "true"), ("leakage_inductance", '"20m"'))),
    *(Field(f"source.{k}", WINDINGS_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("primary_resistance", '"12"'), ("secondary_resistance", '"40"'))),
    *(Field(f"source.{k}", INVERTER_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("waveform", '"modified-sine"'), ("peak", '"320"'), ("output_resistance", '"8"'),
                   ("rated_power", '"150"'), ("efficiency", '"85%"'), ("idle_power", '"6"'), ("regulated", "false"),
                   ("response_time", '"40m"'), ("edge_time", '"40u"'))),
    *(Field(f"battery.{k}", INVERTER_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("voltage", '"12.6"'), ("internal_resistance", '"25m"'), ("capacity", '"7"'),
                   ("usable_fraction", '"50%"'))),
    *(Field(f"battery.{k}", INVERTER_TOML, 'usable_fraction = "50%"', f'usable_fraction = "50%"\n{k} = {{v}}', g)
      for k, g in (("chemistry", "lead-acid"), ("cells", "6"), ("low", "11.5"), ("high", "14.4"), ("peukert", "1.15"),
                   ("rated_hours", "20"))),
    Field("source.peak_power", INVERTER_TOML, 'edge_time = "40u"', 'edge_time = "40u"\npeak_power = {v}', "300"),
    Field("load.settle_band", INVERTER_TOML, 'fall = "2m"', 'fall = "2m"\nsettle_band = {v}', "2%"),
    *(Field(f"load.{k}", INVERTER_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("rate", '"5"'), ("duty", '"50%"'), ("rise", '"2m"'), ("fall", '"2m"'),
                   ("pushing_hz_per_v", '"20"'))),
    Field("load.wpm", TABLE_TOML, 'wpm = "20"', "wpm = {v}", "20"),
    Field("load.warmup", TRANSFORMER_TOML, 'warmup = "15"', "warmup = {v}", "15"),
    Field("load.point.v", TRANSFORMER_TOML, 'point = { v = "300", i = "80m" }', 'point = { v = {v}, i = "80m" }',
          "300"),
    Field("load.down.i", INVERTER_TOML, 'down = { i = "100m" }', "down = { i = {v} }", "100m"),
    Field("load.up.r", INVERTER_TOML, 'up = { r = "60k" }', "up = { r = {v} }", "60k"),
    Field("load.at", WINDINGS_TOML, "at = 0", "at = {v}", "0"),
    *(Field(f"rectifier.diode.{k}", TRANSFORMER_TOML, f"{k} = {{v}}".replace("{v}", g), f"{k} = {{v}}", g.strip('"'))
      for k, g in (("kind", '"vacuum"'), ("perveance", '"1m"'), ("warmup", '"10"'), ("piv", '"1400"'),
                   ("peak_current", '"0.5"'))),
    *(Field(f"checks.{k}", BRIDGE_TOML + "[checks]\n#\n", "#\n", f"{k} = {{v}}\n", good)
      for k, good in (("diode_voltage", "80%"), ("capacitor_voltage", "90%"), ("resistor_power", "50%"),
                      ("marginal", "10%"), ("safe_voltage", "60"), ("safe_time", "5"))),
    Field("source.rated_current", BRIDGE_TOML, 'resistance = "25"', 'resistance = "25"\nrated_current = {v}', "0.3"),
    Field("rectifier.capacitor_esr", DOUBLER_TOML, 'capacitance = "220u"', 'capacitance = "220u"\ncapacitor_esr = {v}',
          "0.1"),
    Field("rectifier.balancing", DOUBLER_TOML, 'capacitance = "220u"', 'capacitance = "220u"\nbalancing = {v}',
          "100k"),
    *(Field(f"rectifier.diode.{k}", TRANSFORMER_TOML, 'peak_current = "0.5" }', f'peak_current = "0.5", {k} = {{v}} }}',
            g) for k, g in (("dc_current", "0.2"), ("max_capacitance", "40u"), ("min_resistance", "50"))),
    Field("rectifier.diode.i2t", BRIDGE_TOML, INLINE, 'diode = { is = "5n", i2t = {v} }', "3.7"),
    Field("filter.0.rating.v", BRIDGE_TOML, 'esr = "0.2"', 'esr = "0.2"\nrating = { v = {v} }', "450"),
    Field("regulator.reference", BRIDGE_TOML + '[regulator]\nkind = "series"\n#\n', "#\n", "reference = {v}\n",
          "250"),
    *(Field(f"regulator.{k}", BRIDGE_TOML + '[regulator]\nkind = "series"\nreference = "250"\n#\n', "#\n",
            f"{k} = {{v}}\n", good)
      for k, good in (("reference_current", "2m"), ("filter_r", "100k"), ("filter_c", "1u"),
                      ("gate_resistor", "1k"), ("gate_zener", "15"), ("device", "IRF840"), ("headroom", "5"))),
    Field("regulator.tube", BRIDGE_TOML + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\n#\n', "#\n",
          "tube = {v}\n", "OD3"),
    Field("regulator.count", BRIDGE_TOML + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\ntube = "OD3"\n#\n',
          "#\n", "count = {v}\n", "1"),
    Field("regulator.kind", BRIDGE_TOML + '[regulator]\nkind = "series"\nreference = "250"\n', 'kind = "series"',
          "kind = {v}", "series"),
    Field("regulator.resistance", BRIDGE_TOML + '[regulator]\nkind = "shunt"\nresistance = "3.3k"\ntube = "OD3"\n',
          'resistance = "3.3k"\ntube', "resistance = {v}\ntube", "3.3k"),
    Field("library", BRIDGE_TOML, TITLE_LINE, TITLE_LINE + "\nlibrary = {v}", "parts.toml"),
    Field("example", BRIDGE_TOML, TITLE_LINE, TITLE_LINE + "\nexample = {v}", "true"),
    Field("rectifier.series", BRIDGE_TOML, INLINE, INLINE + "\nseries = {v}", "2"),
    Field("rectifier.sharing", BRIDGE_TOML, INLINE, INLINE + "\nseries = 2\nsharing = {v}", "470k"),
    Field("source.rated_va", TRANSFORMER_TOML, 'rated_current = "150m"', 'rated_current = "150m"\nrated_va = {v}',
          "100"),
    Field("bleeder.part", BRIDGE_TOML.replace(TITLE_LINE, TITLE_LINE + '\nlibrary = "parts.toml"'), 'r = "220k"',
          'r = "220k"\npart = {v}', "R3W"),
    Field("spread.distribution", BRIDGE_TOML + "[spread]\n#\n", "#\n", "distribution = {v}\n", "normal"),
    *(Field(f"simulation.{k}", BRIDGE_TOML + "[simulation]\n#\n", "#\n", f"{k} = {{v}}\n", good)
      for k, good in (("switch_on_phase", "90"), ("steps_per_period", "1000"), ("settle_tolerance", "1e-4"),
                      ("max_settle_time", "8"), ("switch_on_time", "200m"), ("reltol", "1e-4"),
                      ("max_points", "1e6"), ("hash", "false"), ("hash_band", "10k"))),
]

#: Free text: these may be accepted, and then must be harmless.
TEXT_FIELDS = ("title", "note")
VALUE_FIELDS = [f for f in FIELDS if f.key not in TEXT_FIELDS]
N_HOSTILE = len(hostile_values(Path("x")))


# --- running the command -------------------------------------------------------------------


@dataclass
class Outcome:
    code: int | str | None
    out: str
    err: str


def run_simkit(capsys: pytest.CaptureFixture[str], *args: str) -> Outcome:
    capsys.readouterr()
    with pytest.raises(SystemExit) as info:
        simkit.cli.main(list(args))
    captured = capsys.readouterr()
    return Outcome(info.value.code, captured.out, captured.err)


def _no_simulation(design: object, vscale: float = 1.0) -> object:
    raise AssertionError("the simulator was reached: the hostile value was accepted")


@pytest.fixture
def trapped(monkeypatch: pytest.MonkeyPatch) -> None:
    """Refused values never reach the simulator; an accepted one fails the test at once."""
    monkeypatch.setattr(simkit.cli, "_simulate", _no_simulation)
    monkeypatch.delenv("SIMKIT_DEBUG", raising=False)


def assert_refused(res: Outcome, key: str) -> None:
    assert res.code == 2, f"exit {res.code}: {res.err!r}"
    assert res.out == "", "nothing may be printed on stdout for a refused design"
    assert "Traceback" not in res.err
    lines = res.err.strip().splitlines()  # splitlines() breaks on \u2028, \x85, \x0c ... too
    assert len(lines) == 1, f"one message line expected, got {res.err!r}"
    assert key in lines[0]


# --- what a harmless deck looks like --------------------------------------------------------

#: Line starts that would make ngspice do more than simulate the circuit.
FORBIDDEN_STARTS = (".control", ".endc", ".include", ".inc", ".lib", "shell", "*#", "#")


def assert_deck_safe(deck: str, marker: Path) -> None:
    assert deck.endswith(".end\n")
    assert deck.isascii(), "the deck must be plain ASCII (no Unicode line separators)"
    assert all(ch == "\n" or 32 <= ord(ch) < 127 for ch in deck), "control character in the deck"
    lines = deck.split("\n")
    assert lines == [*deck.splitlines(), ""], "a character other than \\n breaks a line"
    assert lines[0].startswith("*"), "the first (title) line must be a comment"
    assert [ln.strip().lower() for ln in lines].count(".end") == 1
    for line in lines:
        low = line.strip().lower()
        assert not low.startswith(FORBIDDEN_STARTS), f"forbidden deck line {line!r}"
        if low.startswith("*"):
            continue
        assert "shell" not in low, f"'shell' outside a comment: {line!r}"
        assert "/etc/passwd" not in low, line
        assert str(marker).lower() not in low, line
        assert "touch" not in low, line
    assert not marker.exists()


def non_comment_lines(deck: str) -> list[str]:
    return [ln for ln in deck.splitlines() if not ln.startswith("*")]


# --- every value field refuses hostile text (no simulator needed) --------------------------


@pytest.mark.parametrize("channel", ["file", "set"])
@pytest.mark.parametrize("field", VALUE_FIELDS, ids=[f.key for f in VALUE_FIELDS])
def test_hostile_value_is_refused(
    field: Field, channel: str, tmp_path: Path, capsys: pytest.CaptureFixture[str], trapped: None
) -> None:
    marker = tmp_path / "PWNED"
    path = tmp_path / "supply.toml"
    (tmp_path / "parts.toml").write_text(PARTS_TOML)
    for value in hostile_values(marker):
        if channel == "file":
            path.write_text(field.design(value), "utf-8")
            res = run_simkit(capsys, "netlist", str(path))
        else:
            path.write_text(field.design(field.good), "utf-8")  # a valid design; --set brings the mistake
            res = run_simkit(capsys, "netlist", str(path), "--set", f"{field.key}={value}")
        try:
            assert_refused(res, field.key)
            assert str(path) in res.err
        except AssertionError as exc:
            raise AssertionError(f"hostile value {value!r}: {exc}") from None
        assert not marker.exists()


@pytest.mark.parametrize("value", ["1\nx = 2", '"1k"\n[bleeder]', "250 # fine\nshell = 1"])
def test_set_value_that_is_several_toml_lines_is_not_half_read(
    value: str, tmp_path: Path, capsys: pytest.CaptureFixture[str], trapped: None
) -> None:
    # Reading the first line as the value and dropping the rest would hide what the user typed.
    path = tmp_path / "supply.toml"
    path.write_text(BRIDGE_TOML, "utf-8")
    res = run_simkit(capsys, "netlist", str(path), "--set", f"filter.1.r={value}")
    assert_refused(res, "filter.1.r")


@pytest.mark.parametrize(
    "key",
    ["shell touch x", ".control", "a\nb", ".include /etc/passwd", "\u2028.endc"],
)
def test_hostile_key_names_are_refused(
    key: str, tmp_path: Path, capsys: pytest.CaptureFixture[str], trapped: None
) -> None:
    path = tmp_path / "supply.toml"
    for text in (f"{toml_string(key)} = 1\n" + BRIDGE_TOML, BRIDGE_TOML + f"{toml_string(key)} = 1\n"):
        path.write_text(text, "utf-8")
        res = run_simkit(capsys, "netlist", str(path))
        assert_refused(res, "unknown key")
    path.write_text(BRIDGE_TOML, "utf-8")
    res = run_simkit(capsys, "netlist", str(path), "--set", f"{key}=1")
    assert res.code == 2, res.err
    assert "Traceback" not in res.err
    assert res.out == ""


def test_field_table_designs_are_valid() -> None:
    # Each hostile value is the only thing wrong with its design.
    import os
    import tempfile

    from simkit.design.loader import design_from_dict, parse_toml_text

    with tempfile.TemporaryDirectory() as tmp:
        Path(tmp, "parts.toml").write_text(PARTS_TOML)
        here = os.getcwd()
        os.chdir(tmp)
        try:
            for field in FIELDS:
                design_from_dict(parse_toml_text(field.design(field.good)))
        finally:
            os.chdir(here)


def test_every_string_field_is_covered() -> None:
    # The field table follows the design vocabulary: a key added to the model without a line here fails.
    from simkit.design.model import Design
    from simkit.design.vocab import all_keys

    keys = {f.key for f in FIELDS}
    expected = set()
    for path, k, _cls in all_keys(Design):
        if k.unit in ("table", "array", "list") or path.startswith("filter"):
            continue  # containers: their values are covered one by one; filter sections below
        depth = path.count(".")
        if depth <= 1 or path.startswith("rectifier.diode."):  # a section's own keys and the inline diode's
            expected.add(path)
    expected |= {"filter.0.c", "filter.0.esr", "filter.0.l", "filter.0.dcr", "filter.1.r"}
    # Morse text is free text that never reaches a deck (it becomes key timings); its own test is in
    # tests/test_sources_loads.py.
    expected -= {"load.morse"}
    assert expected <= keys, sorted(expected - keys)


# --- free text: refused or harmless (needs ngspice: netlist prints a simulated deck) ---------


@pytest.fixture(scope="module")
def baseline_deck(tmp_path_factory: pytest.TempPathFactory) -> str:
    """The deck of the bridge design with its plain title, through the same command."""
    path = tmp_path_factory.mktemp("baseline") / "supply.toml"
    path.write_text(BRIDGE_TOML, "utf-8")
    proc = subprocess.run([sys.executable, "-m", "simkit.cli", "netlist", str(path)], capture_output=True,
                          text=True, cwd=ROOT, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout


# file: in the design file; set: --set KEY="..." (a TOML string, escapes and all);
# raw: --set KEY=... as typed, which the loader takes as plain text.
FREE_TEXT_CASES = [
    (key, index, channel)
    for key in TEXT_FIELDS
    for index in range(N_HOSTILE)
    for channel in ("file", "set", "raw")
    if not (key == "note" and channel == "raw")
]


@pytest.mark.ngspice
@pytest.mark.parametrize(("key", "index", "channel"), FREE_TEXT_CASES)
def test_hostile_free_text_is_refused_or_harmless(
    key: str,
    index: int,
    channel: str,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    baseline_deck: str,
) -> None:
    marker = tmp_path / "PWNED"
    value = hostile_values(marker)[index]
    field = next(f for f in FIELDS if f.key == key)
    path = tmp_path / "supply.toml"
    if channel == "file":
        path.write_text(field.design(value), "utf-8")
        res = run_simkit(capsys, "netlist", str(path))
    else:
        path.write_text(BRIDGE_TOML, "utf-8")
        given = toml_string(value) if channel == "set" else value
        res = run_simkit(capsys, "netlist", str(path), "--set", f"{key}={given}")
        if channel == "raw":
            value = value.strip()  # --set trims the text around the value

    has_control = any(ord(ch) < 32 or ord(ch) == 127 for ch in value)
    if key == "title" and has_control:
        assert_refused(res, "title")
        assert "one line" in res.err
    else:
        # The note is never written into a deck; a one-line title becomes a comment.
        assert res.code == 0, res.err
        assert "Traceback" not in res.err
        assert_deck_safe(res.out, marker)
        if any(b in value for b in LINE_BREAKS):
            assert value not in res.out
        assert non_comment_lines(res.out) == non_comment_lines(baseline_deck), "user text changed a deck line"
        if key == "note":
            assert res.out == baseline_deck, "the note must never be written into a deck"
    assert not marker.exists()


@pytest.mark.ngspice
@pytest.mark.parametrize(
    "stem",
    [".include etc-passwd", "*#shell touch PWNED", "#shell touch PWNED", ".control shell touch PWNED .endc"],
)
def test_file_name_as_title_is_harmless(stem: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Without a title the file name is shown in its place; it is user text too.
    path = tmp_path / f"{stem}.toml"
    path.write_text(BRIDGE_TOML.replace(TITLE_LINE + "\n", ""), "utf-8")
    res = run_simkit(capsys, "netlist", str(path))
    assert res.code == 0, res.err
    assert_deck_safe(res.out, tmp_path / "PWNED")


@pytest.mark.ngspice
@pytest.mark.parametrize("field", VALUE_FIELDS[:4], ids=[f.key for f in VALUE_FIELDS[:4]])
def test_value_fields_refuse_without_the_trap(
    field: Field, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The same as above through the untouched command, simulator and all.
    marker = tmp_path / "PWNED"
    path = tmp_path / "supply.toml"
    path.write_text(field.design(hostile_values(marker)[0]), "utf-8")
    res = run_simkit(capsys, "netlist", str(path))
    assert_refused(res, field.key)
    assert not marker.exists()


# --- the ngspice command line ---------------------------------------------------------------

# One line, so the loader accepts it as a title; the marker is relative to ngspice's folder.
HOSTILE_TITLE = (
    "x .control shell touch PWNED .endc *#shell touch PWNED #shell touch PWNED .include /etc/passwd "
    "$ ; + \\ {shell touch PWNED} `touch PWNED` $(touch PWNED)"
)
assert len(HOSTILE_TITLE) < 200


def _ngspice_batch(deck: Path, cwd: Path) -> subprocess.CompletedProcess[str]:
    exe = shutil.which("ngspice")
    assert exe is not None, "the ngspice command line is not installed"
    return subprocess.run([exe, "-b", str(deck)], capture_output=True, text=True, cwd=cwd, timeout=120)


@pytest.mark.ngspice
def test_ngspice_batch_run_of_a_hostile_title_deck(tmp_path: Path) -> None:
    marker = tmp_path / "PWNED"
    path = tmp_path / "supply.toml"
    path.write_text(BRIDGE_TOML.replace(TITLE_LINE, f"title = {toml_string(HOSTILE_TITLE)}"), "utf-8")
    deck_file = tmp_path / "deck.cir"
    proc = subprocess.run(
        [sys.executable, "-m", "simkit.cli", "netlist", str(path), "-o", str(deck_file)],
        capture_output=True, text=True, cwd=tmp_path, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    deck = deck_file.read_text("utf-8")
    assert_deck_safe(deck, marker)

    ran = _ngspice_batch(deck_file, tmp_path)
    assert ran.returncode == 0, ran.stdout + ran.stderr
    # ngspice really simulated the deck: it printed the measurements...
    assert "vout_dc_v" in ran.stdout
    assert "ripple_pp_v" in ran.stdout
    # ...and ran nothing else.
    assert not marker.exists()
    assert not any(p.name == "PWNED" for p in tmp_path.rglob("*"))


@pytest.mark.ngspice
def test_the_marker_would_catch_an_injected_control_block(tmp_path: Path) -> None:
    """Control case: the same deck with a hand-made control block does create the marker,
    so the test above would notice if user text ever became deck lines."""
    marker = tmp_path / "PWNED"
    path = tmp_path / "supply.toml"
    path.write_text(BRIDGE_TOML, "utf-8")
    deck_file = tmp_path / "deck.cir"
    proc = subprocess.run(
        [sys.executable, "-m", "simkit.cli", "netlist", str(path), "-o", str(deck_file)],
        capture_output=True, text=True, cwd=tmp_path, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    deck = deck_file.read_text("utf-8")
    evil = deck.replace("\n.end\n", f"\n.control\nshell touch {marker}\n.endc\n.end\n")
    assert evil != deck
    with pytest.raises(AssertionError):
        assert_deck_safe(evil, tmp_path / "other-marker")
    deck_file.write_text(evil, "utf-8")
    _ngspice_batch(deck_file, tmp_path)
    assert marker.exists()
