"""One rule for writing a predicted reading: what the meter would show.

A value smaller than half the meter's finest resolution is displayed as zero
(a digital meter rounds to its last digit: common practice (no source); the
resolution rule itself is formats.md section 3).  The default handheld's
finest DC voltage step is 0.1 mV, so a prediction of 44.1 nV reads 0.

The board is invented: a pump relay's sense divider with a 1 Ω shunt fed
through 10 MΩ (2.4 µV across the shunt, far below any handheld's 0.1 mV).
"""
from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from faultfind.cli.main import main
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.shown import reading_text, shows_zero

ROOT = Path(__file__).resolve().parent.parent
CIRCUIT = """format = 1
title = "pump relay sense divider"
ground = "0"
[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["v", "0"]
value = "24"
[[part]]
ref = "R1"
kind = "resistor"
nodes = ["v", "s"]
value = "10k"
[[part]]
ref = "R2"
kind = "resistor"
nodes = ["s", "0"]
value = "4k7"
[[part]]
ref = "R3"
kind = "resistor"
nodes = ["v", "t"]
value = "10M"
[[part]]
ref = "R4"
kind = "resistor"
nodes = ["t", "0"]
value = "1"
"""


@pytest.mark.parametrize("value, quantity, text", [
    (44.1e-9, "voltage", "0 V"),          # far below 0.1 mV
    (-40e-6, "voltage", "0 V"),           # below half of 0.1 mV, either sign
    (60e-6, "voltage", "60 µV"),          # above half a step: the display shows 0.1 mV
    (38.2e-3, "voltage", "38.2 mV"),
    (0.04, "resistance", "0 Ω"),          # 0.1 Ω steps
    (2.4e-6, "current", "2.4 µA"),        # 0.1 µA steps
    (3e-8, "current", "0 A"),
    (4e-4, "diode-test", "0 V"),          # 1 mV steps
])
def test_below_half_the_finest_step_is_written_as_zero(value, quantity, text):
    unit = {"voltage": "V", "current": "A", "resistance": "Ω", "diode-test": "V"}[quantity]
    assert reading_text(value, unit, DEFAULT_METER, quantity) == text


def test_a_finer_meter_keeps_what_it_can_show():
    bench = dataclasses.replace(DEFAULT_METER, voltage_resolution=1e-6)
    assert reading_text(40e-6, "V", bench, "voltage") == "40 µV"
    assert shows_zero(40e-6, DEFAULT_METER, "voltage")
    assert not shows_zero(40e-6, bench, "voltage")


def test_without_a_meter_only_a_numerical_zero_is_zeroed():
    assert reading_text(44.1e-9, "V") == "44.1 nV"
    assert reading_text(3e-12, "V") == "0 V"
    assert reading_text(float("inf"), "Ω") == "OL"
    assert reading_text(None, "V") == "OL"


def test_expect_writes_a_microvolt_node_as_the_meter_shows_it(tmp_path, capsys):
    path = tmp_path / "c.toml"
    path.write_text(CIRCUIT)
    assert main(["expect", str(path)]) == 0
    out = capsys.readouterr().out
    row = next(line for line in out.splitlines() if "V dc t-0" in line)
    assert "µV" not in row and " 0 V" in row
    assert main(["expect", str(path), "--json"]) == 0   # the document keeps the exact value
    doc = json.loads(capsys.readouterr().out)
    t = next(r for r in doc["readings"] if r["quantity"] == "voltage" and r["plus"] == "t")
    # divider rule (any circuit-analysis text): 24 V * 1 Ω / (10 MΩ + 1 Ω); the meter's
    # 10 MΩ across 1 Ω changes it by 1e-7
    assert_allclose(t["expected"], 24.0 * 1.0 / (10e6 + 1.0), rtol=1e-6)


def test_a_finding_quotes_no_value_finer_than_the_meter(capsys):
    # the relay driver with Q1's base-emitter junction open: the coil's predicted voltage
    # is nanovolts of leakage, which the handheld shows as 0 (it was quoted as "9.57 nV")
    case = ROOT / "field_cases" / "irrigation_valve_relay_driver"
    assert main(["diagnose", str(case / "circuit.toml"), str(case / "readings.csv")]) == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if "for:" in x and "K1 coil" in x)
    assert line.endswith("(predicts 0 V)")
    assert not any(u in out for u in (" nV", " pV", " nA", " pA"))
