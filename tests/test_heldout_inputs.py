"""Defects found on held-out inputs (issue 13), each kept as a minimal file in
tests/heldout_inputs/ and run through the command line.

cli.md: exit 2 for bad input with one message on stderr naming the file and
line, never a traceback; exit 0 with a diagnosis otherwise.  The circuit
``pump_sense.toml`` is invented: PS1 12 V, R1 4k7 from the supply to A, R2 1k
from A to B, R3 2k2 from B to ground.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from faultfind.cli.main import main
from faultfind.engine.meter import resolution, spec_limit
from faultfind.errors import ReadingsError
from faultfind.io.circuit_file import load_circuit
from faultfind.io.meters_file import DEFAULT_METER, load_meters, meters_with_default
from faultfind.io.readings_file import load_readings, parse_readings, zero_allowance

HERE = Path(__file__).resolve().parent / "heldout_inputs"
CIRCUIT = HERE / "pump_sense.toml"
BENCH = HERE / "bench_meter.toml"


def run(capsys, *argv):
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:  # argparse usage errors
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def assert_exit_2(code, out, err, path, line, *words):
    """cli.md: exit 2, the file and line named on stderr, no traceback."""
    assert code == 2, (code, err)
    assert "Traceback" not in err and "internal error" not in err, err
    assert f"{path}:{line}:" in err, err
    for w in words:
        assert w in err, (w, err)


# -- item 1: a lifted reading between nodes, with no part ---------------------------------


@pytest.mark.parametrize("command", ["diagnose", "expect"])
def test_lifted_reading_without_part_is_exit_2(capsys, command):
    path = HERE / "lifted_without_part.csv"
    argv = [command, CIRCUIT, path] if command == "diagnose" else [command, CIRCUIT, "--at", path]
    code, out, err = run(capsys, *argv)
    # formats.md section 2: lifted means "the reading is the part alone", so it
    # needs the part; the message points at the one part between A and B.
    assert_exit_2(code, out, err, path, 2, "a lifted reading needs the part that was lifted",
                  "setup", "between A and B: R2")


def test_lifted_reading_without_part_needs_no_circuit_to_be_refused():
    with pytest.raises(ReadingsError) as info:
        parse_readings("quantity,plus,minus,setup,value\nresistance,A,B,lifted,4k7\n", "x.csv")
    assert (info.value.file, info.value.line, info.value.key) == ("x.csv", 2, "setup")
    assert "part that was lifted" in info.value.message and "between A and B" not in info.value.message


def test_lifted_reading_with_its_part_still_loads():
    got = parse_readings("quantity,part,setup,value\nresistance,R2,lifted,4k7\n", "x.csv",
                         load_circuit(CIRCUIT))
    assert (got[0].part, got[0].setup, got[0].value) == ("R2", "lifted", 4700.0)


# -- item 2: a short read with a nulled meter ----------------------------------------------


@pytest.mark.parametrize("name, value", [("nulled_short_m0p1.csv", -0.1),
                                         ("nulled_short_m100m.csv", -0.1),
                                         ("nulled_short_m200m.csv", -0.2)])
def test_short_read_with_nulled_handheld_is_diagnosed_short(capsys, name, value):
    path = HERE / name
    code, out, err = run(capsys, "diagnose", CIRCUIT, path, "--json")
    assert code == 0, err
    # The value is kept as displayed (SI Brochure: m = 1e-3), with the meter's
    # uncertainty at that display.
    rd = load_readings(path, load_circuit(CIRCUIT), meters_with_default())
    assert_allclose(rd[2].value, value, rtol=0, atol=1e-15)
    doc = json.loads(out)
    # With R2 shorted, A and B are one node: 12 V * 2k2 / (4k7 + 2k2) = 3.826 V
    # by the divider rule (Ohm's law), matching both 3.83 V readings; an
    # ohmmeter across a short reads 0 (within its accuracy).  Healthy, the
    # in-circuit reading would be 1k || 6k9 = 873 ohm.
    top = doc["hypotheses"][0]
    assert doc["verdict"] == "fault"
    assert top["faults"] == [{"ref": "R2", "mode": "short", "value": None}]
    assert top["probability"] > 0.9


def test_zero_allowance_is_the_spec_limit_plus_half_a_step():
    # Default profile: resistance +-(0.5 % + 2 counts), finest step 0.1 ohm
    # (docs/meter-model.md).  At -0.2 ohm: a = 0.001 + 0.2, r = 0.1.
    assert_allclose(zero_allowance(DEFAULT_METER, -0.2), 0.001 + 0.2 + 0.05, rtol=1e-8)
    assert_allclose(zero_allowance(DEFAULT_METER, -0.2),
                    spec_limit(DEFAULT_METER, "resistance", None, -0.2)
                    + resolution(DEFAULT_METER, "resistance", -0.2) / 2, rtol=1e-8)


@pytest.mark.parametrize("name, meters, line", [
    ("negative_at_handheld_limit.csv", None, None),  # -0.2: two counts below zero
    ("negative_beyond_handheld.csv", None, 2),       # -0.3: beyond 0.2515 ohm
    ("negative_inside_bench.csv", BENCH, None),       # -0.03 on +-(0.1 % + 3), 0.01 ohm step
    ("negative_beyond_bench.csv", BENCH, 2),         # -0.05: beyond 0.035 ohm
])
def test_negative_resistance_boundary(capsys, name, meters, line):
    """Both sides of the meter's accuracy about zero (the accuracy spec
    +-(% of reading + counts), formats.md section 3): within it the reading is
    used; beyond it the safety refusal stands."""
    path = HERE / name
    argv = ["diagnose", CIRCUIT, path, "--json"] + (["--meters", meters] if meters else [])
    code, out, err = run(capsys, *argv)
    if line is None:
        assert code == 0, err
        assert json.loads(out)["hypotheses"][0]["faults"][0]["ref"] == "R2"
    else:
        assert_exit_2(code, out, err, path, line, "still powered", "discharge",
                      "prove the circuit dead")


def test_bench_allowance_from_its_own_profile():
    bench = load_meters(BENCH)["bench"]
    # +-(0.1 % + 3 counts) at a 0.01 ohm step: a = 0.00005 + 0.03, r / 2 = 0.005
    assert_allclose(zero_allowance(bench, -0.05), 0.00005 + 0.03 + 0.005, rtol=1e-8)
    # the same -0.05 ohm is inside the handheld's allowance (0.25 ohm)
    assert parse_readings("quantity,part,value\nresistance,R2,-0.05\n")[0].value == -0.05


def test_minus_ol_on_resistance_is_still_refused():
    with pytest.raises(ReadingsError, match="still powered"):
        parse_readings("quantity,part,value\nresistance,R2,-OL\n")
