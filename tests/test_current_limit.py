"""The optional ``current_limit`` key of a voltage source (docs/circuit-files.md).

formats.md section 1 leaves the key to the project: a supply's rated output
current, in amperes, above 0, on voltage sources only.  Bad values are an
input error naming the file, the line, the part and the key (exit 2 from the
CLI).  The circuit is invented: a wash-down pump's 24 V control supply.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from faultfind.cli.main import main
from faultfind.errors import CircuitError, InputError
from faultfind.io.circuit_file import load_circuit, parse_circuit

ROOT = Path(__file__).resolve().parent.parent

HEAD = """format = 1
title = "Wash-down pump: 24 V control supply"
ground = "0V"

[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["+24V", "0V"]
value = "24 V"
"""
TAIL = """
[[part]]
ref = "R1"
kind = "resistor"
nodes = ["+24V", "0V"]
value = "1k"
"""


def circuit_text(extra: str = "", tail_extra: str = "") -> str:
    return HEAD + extra + TAIL + tail_extra


@pytest.mark.parametrize("written, amps", [
    ('"2.5 A"', 2.5), ("2.5", 2.5), ('"2500m"', 2.5), ('"500 mA"', 0.5), ('"1.5A"', 1.5)])
def test_current_limit_read_in_amperes(written, amps):
    # SI prefixes with or without the unit, as for every value of the file.
    circuit = parse_circuit(circuit_text(f"current_limit = {written}\n"), "pump.toml")
    assert_allclose(circuit.part("PS1").current_limit, amps, rtol=1e-12)


def test_current_limit_absent_is_none():
    circuit = parse_circuit(circuit_text(), "pump.toml")
    assert circuit.part("PS1").current_limit is None


@pytest.mark.parametrize("written, words", [
    ('"0"', "above 0 A"), ('"-1 A"', "above 0 A"), ('"2.5 V"', "unit 'V'"),
    ('"lots"', "cannot read"), ("true", "must be a number"), ("nan", "finite"),
    ("inf", "finite")])
def test_bad_current_limit_names_file_line_part_key(written, words):
    with pytest.raises(CircuitError) as info:
        parse_circuit(circuit_text(f"current_limit = {written}\n"), "pump.toml")
    err = info.value
    assert isinstance(err, InputError) and isinstance(err, ValueError)
    text = str(err)
    assert text.startswith("pump.toml:5: part PS1: key 'current_limit':"), text
    assert words in text


def test_current_limit_only_on_voltage_sources():
    with pytest.raises(CircuitError) as info:
        parse_circuit(circuit_text(tail_extra='current_limit = "1 A"\n'), "pump.toml")
    text = str(info.value)
    assert "part R1" in text and "does not apply to a resistor" in text
    assert "voltage sources" in text


def test_cli_check_bad_current_limit_exit_2(tmp_path, capsys):
    path = tmp_path / "pump.toml"
    path.write_text(circuit_text('current_limit = "-2 A"\n'), encoding="utf-8")
    code = main(["check", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert "Traceback" not in err
    assert str(path) in err and "PS1" in err and "current_limit" in err


def test_booster_panel_supply_is_limited_to_its_nameplate():
    # The scenario's supply is a 24 V 2.5 A DIN-rail unit (its label).
    circuit = load_circuit(ROOT / "field_cases" / "booster_pump_panel" / "circuit.toml")
    ps1 = circuit.part("PS1")
    assert "2.5 A" in ps1.label
    assert_allclose(ps1.current_limit, 2.5, rtol=1e-12)
