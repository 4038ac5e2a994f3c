"""The bundled field cases through the command line.

Each folder of ``field_cases/`` documents its true fault in ``fault.toml`` (the
answer key, field_cases/README.md) and in its README.  ``faultfind diagnose``
must name that fault first -- or, for a healthy unit, give the verdict
``no-fault`` -- and ``faultfind expect`` must print its table and its JSON
with exactly the keys cli.md fixes.  The CLI runs in-process through
:func:`faultfind.cli.main.main`.
"""

from __future__ import annotations

import csv
import json
import tomllib
from pathlib import Path

import pytest

from faultfind.cli.main import main
from faultfind.io.circuit_file import load_circuit
from faultfind.units import parse_value

ROOT = Path(__file__).resolve().parent.parent
CASES = sorted(p.parent for p in (ROOT / "field_cases").glob("*/fault.toml"))
IDS = [p.name for p in CASES]

#: Keys of each reading in ``expect --json`` (cli.md, `faultfind expect`).
EXPECT_KEYS = {"quantity", "mode", "plus", "minus", "part", "setup", "frequency", "unit",
               "expected", "low", "high"}


def run(capsys, argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def answer_key(folder: Path):
    doc = tomllib.loads((folder / "fault.toml").read_text(encoding="utf-8"))
    return doc.get("fault", [])


def test_every_case_is_here():
    """field_cases/README.md lists eleven cases, one of them healthy, three with semiconductors."""
    assert len(CASES) == 11
    semi = [c for c in CASES if load_circuit(c / "circuit.toml").is_nonlinear]
    assert {c.name for c in semi} == {"canopy_led_string_board", "greenhouse_sensor_zener_supply",
                                      "irrigation_valve_relay_driver"}
    for c in semi:   # each takes diode tests, power off (formats.md section 4)
        assert "diode-test" in (c / "readings.csv").read_text(encoding="utf-8")
    assert sum(1 for c in CASES if not answer_key(c)) == 1
    for c in CASES:
        assert (c / "circuit.toml").is_file() and (c / "readings.csv").is_file()


@pytest.mark.parametrize("folder", CASES, ids=IDS)
def test_diagnose_names_the_true_fault(folder, capsys):
    faults = answer_key(folder)
    code, out, err = run(capsys, ["diagnose", folder / "circuit.toml", folder / "readings.csv",
                                  "--json"])
    assert code == 0, err
    assert err == ""
    doc = json.loads(out)
    top = doc["hypotheses"][0]["faults"]
    if not faults:
        assert doc["verdict"] == "no-fault", doc["hypotheses"][:3]
        return
    assert doc["verdict"] == "fault", (doc["verdict"], doc["hypotheses"][:3])
    assert len(faults) == 1
    true = faults[0]
    # The README documents the same fault as the answer key.
    assert true["ref"] in (folder / "README.md").read_text(encoding="utf-8")
    if true["mode"] != "drift":
        assert [(f["ref"], f["mode"]) for f in top] == [(true["ref"], true["mode"])], top
        return
    # A drift: the right part drifted first, or the right part in the top one's
    # ambiguity group (the readings cannot tell them apart).
    assert len(top) == 1 and top[0]["mode"] == "drift", top
    if top[0]["ref"] == true["ref"]:
        part = load_circuit(folder / "circuit.toml").part(true["ref"])
        planted = parse_value(true["value"], part.info.unit)
        # The fitted value lands near the planted one (the readings were made
        # from it with parts inside tolerance): within 10 %, common practice
        # (no source) for telling a drifted part from a good one.
        assert top[0]["value"] == pytest.approx(planted, rel=0.10)
    else:
        together = [set(g) for g in doc["ambiguity_groups"]]
        assert any({top[0]["ref"], true["ref"]} <= g for g in together), (top, together)


@pytest.mark.parametrize("folder", CASES, ids=IDS)
def test_expect_prints_a_table(folder, capsys):
    code, out, err = run(capsys, ["expect", folder / "circuit.toml"])
    assert code == 0, err
    assert "Traceback" not in out + err
    lines = out.splitlines()
    header = [i for i, line in enumerate(lines) if "expected" in line and "reading" in line]
    assert header, out
    # A rule under the header, then at least one row.
    assert set(lines[header[0] + 1].replace(" ", "")) == {"-"}
    assert len(lines) > header[0] + 2


@pytest.mark.parametrize("folder", CASES, ids=IDS)
def test_expect_json_keys(folder, capsys):
    code, out, err = run(capsys, ["expect", folder / "circuit.toml", "--json"])
    assert code == 0, err
    doc = json.loads(out)
    assert set(doc) == {"readings"}
    assert doc["readings"]
    for r in doc["readings"]:
        assert set(r) == EXPECT_KEYS, set(r) ^ EXPECT_KEYS
        assert r["unit"] in ("V", "A", "Ω")
        if r["expected"] is None:
            # cli.md: no path between the probes -> expected, low and high null
            assert r["quantity"] in ("resistance", "diode-test") and r["low"] is None and r["high"] is None
        else:
            assert r["low"] <= r["expected"] <= r["high"], r


@pytest.mark.parametrize("folder", CASES, ids=IDS)
def test_expect_at_the_case_readings(folder, capsys):
    """``expect --at readings.csv``: exactly the file's rows, in its order."""
    code, out, err = run(capsys, ["expect", folder / "circuit.toml", "--at",
                                  folder / "readings.csv", "--json"])
    assert code == 0, err
    rows = json.loads(out)["readings"]
    with open(folder / "readings.csv", encoding="utf-8-sig", newline="") as fh:
        file_rows = [r for r in csv.DictReader(fh) if any((v or "").strip() for v in r.values())]
    assert len(rows) == len(file_rows)
    for got, want in zip(rows, file_rows):
        assert got["quantity"] == want["quantity"].strip().lower()
        for key in ("plus", "part"):
            if (want.get(key) or "").strip():
                assert got[key] == want[key].strip()
