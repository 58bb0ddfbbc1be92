"""The command line as a user meets it: outputs, files, exit codes (docs/reference.md, Commands)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from simkit.cli import main
from simkit.design.loader import load_design
from tests.conftest import BRIDGE_TOML, write_design

SPEC_FIGURES = {"vout_dc_v", "ripple_pp_v", "ripple_rms_v", "iout_dc_a", "diode_peak_a", "diode_avg_a",
                "diode_rms_a", "diode_piv_v", "surge_peak_a", "cap_peak_v", "reservoir_ripple_a",
                "source_rms_a", "source_va", "settle_time_s"}


def call(args: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    with pytest.raises(SystemExit) as info:
        main(args)
    out, err = capsys.readouterr()
    return int(info.value.code or 0), out, err


@pytest.mark.ngspice
def test_run_json_is_one_document_with_every_figure(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    code, out, err = call(["run", str(p), "--json"], capsys)
    assert code == 0, err
    doc = json.loads(out)  # exactly one JSON document: json.loads refuses trailing text
    assert set(doc) == {"simkit", "design", "inputs", "metrics", "parts", "warnings", "ripple_harmonics"}
    assert SPEC_FIGURES <= set(doc["metrics"])
    # The hum spectrum: ten harmonics of the 50 Hz source at every filter node and the output.
    hum = doc["ripple_harmonics"]
    assert set(hum) == {"rect", "out"}
    assert [h["frequency_hz"] for h in hum["out"]] == [50.0 * k for k in range(1, 11)]
    assert all(set(h) == {"frequency_hz", "rms_v", "dbv"} for h in hum["out"])
    assert all(isinstance(v, float) for v in doc["metrics"].values())
    assert {"D1", "D2", "D3", "D4", "C1", "C2", "V1", "RLOAD", "RBLEED", "R1"} <= set(doc["parts"])
    assert doc["design"] == "Test: bridge into CRC"
    assert doc["inputs"]["source"]["vrms"] == 250.0


@pytest.mark.ngspice
def test_set_overrides_a_value(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    code, out, _ = call(["run", str(p), "--json", "--set", "load.r=2.5k", "--set", "filter.0.c=220u"], capsys)
    assert code == 0
    doc = json.loads(out)
    assert doc["inputs"]["load"][0]["r"] == 2500.0  # inputs use the design file's keys (--set paths)
    assert doc["inputs"]["filter"][0]["c"] == pytest.approx(220e-6)
    # The run used the new load: Ohm's law for the means, I = V / 2.5 k (measured within 4e-13).
    assert doc["metrics"]["iout_dc_a"] == pytest.approx(doc["metrics"]["vout_dc_v"] / 2500.0, rel=1e-9)


@pytest.mark.ngspice
def test_run_table_and_out_folder(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    out_dir = tmp_path / "res"
    code, out, err = call(["run", str(p), "--out", str(out_dir)], capsys)
    assert code == 0, err
    assert "vout_dc_v" in out and "mean output voltage" in out
    for name in ("result.json", "deck.cir", "waveforms.png"):
        assert (out_dir / name).stat().st_size > 0
    assert (out_dir / "waveforms.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # Running again replaces simkit's own files ...
    code, _, _ = call(["run", str(p), "--out", str(out_dir)], capsys)
    assert code == 0
    # ... but never a file the user changed.
    (out_dir / "deck.cir").write_text("my notes\n")
    code, _, err = call(["run", str(p), "--out", str(out_dir)], capsys)
    assert code == 2
    assert "refusing to overwrite" in err and "deck.cir" in err
    assert (out_dir / "deck.cir").read_text() == "my notes\n"


@pytest.mark.ngspice
def test_netlist_to_file_keeps_existing_files(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    p = write_design(tmp_path, BRIDGE_TOML)
    target = tmp_path / "mine.cir"
    target.write_text("keep me\n")
    code, _, err = call(["netlist", str(p), "-o", str(target)], capsys)
    assert code == 2 and "exists" in err
    assert target.read_text() == "keep me\n"
    code, out, _ = call(["netlist", str(p)], capsys)
    assert code == 0
    assert out.startswith("* simkit deck:") and out.rstrip().endswith(".end")
    assert ".meas tran vout_dc_v AVG v(out)" in out and ".meas tran ripple_pp_v PP v(out)" in out
    # "-o -" is standard output, as usual, not a file named "-".
    code, out2, _ = call(["netlist", str(p), "-o", "-"], capsys)
    assert code == 0 and out2 == out
    assert not (tmp_path / "-").exists() and not Path("-").exists()


def test_simulation_failure_exits_3_with_advice(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    from simkit import pipeline
    from simkit.errors import SimulationError

    def broken(design, engine=None, vscale=1.0):  # type: ignore[no-untyped-def]
        raise SimulationError("ngspice could not complete the simulation", log="Error: timestep too small",
                              hint="give the winding a series resistance")

    monkeypatch.setattr(pipeline, "simulate", broken)
    p = write_design(tmp_path, BRIDGE_TOML)
    code, out, err = call(["run", str(p)], capsys)
    assert code == 3
    assert "timestep too small" in err and "What to try" in err
    assert "Traceback" not in err and out == ""


@pytest.mark.ngspice
def test_demo_writes_every_example(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out_dir = tmp_path / "results"
    code, out, err = call(["demo", "--out", str(out_dir)], capsys)
    assert code == 0, err
    folders = sorted(p for p in out_dir.iterdir() if p.is_dir())
    assert len(folders) >= 3
    for f in folders:
        doc = json.loads((f / "result.json").read_text())
        assert doc["design"].startswith("Invented example")
        assert SPEC_FIGURES <= set(doc["metrics"])
        assert (f / "deck.cir").read_text().startswith("* simkit deck:")
        assert (f / "waveforms.png").read_bytes()[:4] == b"\x89PNG"
    assert "HIGH VOLTAGE" in out and "one hand" in out.lower()
    assert (out_dir / "README.md").exists()


def test_parts_lists_the_library(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = call(["parts"], capsys)
    assert code == 0
    for name in ("1N4007", "UF4007", "1N5408", "1N4937"):
        assert name in out
    code, out, _ = call(["parts", "1n4007"], capsys)
    assert code == 0 and "1000 V" in out and "88503" in out
    code, _, err = call(["parts", "1N4008"], capsys)
    assert code == 2 and "did you mean" in err


@pytest.mark.parametrize("topology", ["half-wave", "centre-tap", "bridge", "doubler", "cascade"])
def test_new_writes_a_valid_design_and_never_overwrites(topology: str, tmp_path: Path,
                                                        capsys: pytest.CaptureFixture[str]) -> None:
    p = tmp_path / "d.toml"
    code, _, _ = call(["new", str(p), "--topology", topology], capsys)
    assert code == 0
    assert load_design(p).rectifier.topology == topology
    before = p.read_text()
    code, _, err = call(["new", str(p)], capsys)
    assert code == 2 and "never overwrites" in err
    assert p.read_text() == before


def test_new_templates_explain_every_key_in_the_reference_words() -> None:
    # Every value line carries the key's description from the design vocabulary (the reference's words);
    # a key the vocabulary does not know would come out bare.
    from simkit.design.model import TOPOLOGIES, Design
    from simkit.design.vocab import key_at
    from simkit.templates import template

    for topology in TOPOLOGIES:
        table = ""
        for line in template(topology).splitlines():
            if line.startswith("["):
                table = line.strip("[]")
            elif "=" in line and not line.startswith(("#", "title")):
                k = line.split("=")[0].strip()
                spec = key_at(Design, table if k == "kind" else f"{table}.{k}")
                assert spec is not None and line.endswith("# " + spec.doc), (topology, line)


def test_unknown_command_and_option_exit_2(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = call(["simulate"], capsys)
    assert code == 2 and "No such command" in err
    code, _, err = call(["run", "--frobnicate"], capsys)
    assert code == 2 and "frobnicate" in err


@pytest.mark.ngspice
def test_mains_corner_scales_the_source(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # A bridge diode's reverse voltage is the reservoir's, Vpk less a diode drop (derived here): +10 % mains
    # gives +10 % and a little more, 0.1 V_F/Vpk = 0.025 % (measured 0.021 %).
    p = write_design(tmp_path, BRIDGE_TOML.replace('resistance = "25"', 'resistance = "25"\nmains_tolerance = "10%"'))
    _, out, _ = call(["run", str(p), "--json"], capsys)
    _, high, err = call(["run", str(p), "--json", "--mains", "high"], capsys)
    nominal, corner = json.loads(out)["metrics"], json.loads(high)["metrics"]
    assert corner["diode_piv_v"] / nominal["diode_piv_v"] == pytest.approx(1.1, rel=1e-3)
    assert "high mains" in err
    q = write_design(tmp_path, BRIDGE_TOML, "plain.toml")
    code, _, err = call(["run", str(q), "--mains", "low"], capsys)
    assert code == 2 and "source.mains_tolerance" in err
