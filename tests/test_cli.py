"""The command line against cli.md: exit codes, messages, output documents.

cli.md fixes: exit 0 done, 2 bad input with a message on stderr naming the
file, the line or part and what is wrong (never a Python traceback), 1 an
internal error; ``expect --at`` gives exactly the file's readings in row order;
``--json`` prints one JSON document with the keys it lists.  formats.md lists
the errors a circuit file must get, each naming the file and the part or key.

The CLI runs in-process through :func:`faultfind.cli.main.main` (which returns
the exit status; argparse's own usage errors leave through ``SystemExit``,
whose code is the status), plus real ``python -m faultfind`` subprocesses to
prove no traceback reaches stderr.  Expected readings of the good circuit are
checked against Ohm's law and the divider rule (any circuit-analysis text).

The circuit is invented: a car-wash bay's mist-pump interlock.
"""

from __future__ import annotations

import copy
import json
import subprocess
import sys
from pathlib import Path

import pytest

from faultfind.cli.main import main
from faultfind.model import KINDS

ROOT = Path(__file__).resolve().parent.parent
TOP = {"format": 1, "title": "Car wash bay 2: mist pump interlock", "ground": "0V"}
BASE = [
    {"ref": "PS1", "kind": "voltage-source", "nodes": ["+24V", "0V"], "value": "24 V",
     "tolerance": "2%"},
    {"ref": "F1", "kind": "fuse", "nodes": ["+24V", "F"]},
    {"ref": "R1", "kind": "resistor", "nodes": ["F", "SENSE"], "value": "4k7", "tolerance": "1%"},
    {"ref": "R2", "kind": "resistor", "nodes": ["SENSE", "0V"], "value": "2k2", "tolerance": "1%"},
    {"ref": "C1", "kind": "capacitor", "nodes": ["SENSE", "0V"], "value": "100n"},
]
HEADER = "quantity,mode,plus,minus,part,setup,value,label\n"
GOOD_READINGS = HEADER + "voltage,dc,+24V,,,,24.02,TP1\nvoltage,dc,SENSE,,,,7.64,TP2\n"


def render(parts, top=None) -> str:
    """A circuit file.  JSON strings, numbers and arrays are valid TOML values
    (TOML 1.0.0: basic strings share JSON's escapes)."""
    top = TOP if top is None else top
    out = [f"{k} = {json.dumps(v)}" for k, v in top.items()]
    for p in parts:
        out += ["", "[[part]]"] + [f"{k} = {json.dumps(v)}" for k, v in p.items()]
    return "\n".join(out) + "\n"


def changed(ref, **kw):
    """BASE with part ``ref`` changed (None removes a key)."""
    parts = copy.deepcopy(BASE)
    for p in parts:
        if p["ref"] == ref:
            for k, v in kw.items():
                if v is None:
                    p.pop(k, None)
                else:
                    p[k] = v
    return parts


def run(capsys, *argv):
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:     # argparse usage errors
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def assert_bad_input(code, out, err, path, *names):
    """cli.md: exit 2, one message on stderr naming the file and the part/key, no traceback."""
    assert code == 2, (code, err)
    assert "Traceback" not in err and "Traceback" not in out
    assert out == ""
    assert err.count("faultfind: error:") == 1, err
    assert str(path) in err, err
    for name in names:
        assert name in err, (name, err)


@pytest.fixture
def good(tmp_path):
    path = tmp_path / "mist_pump.toml"
    path.write_text(render(BASE), encoding="utf-8")
    return path


@pytest.fixture
def readings(tmp_path):
    path = tmp_path / "bay2.csv"
    path.write_text(GOOD_READINGS, encoding="utf-8")
    return path


# ------------------------------------------------------------------- check

def test_check_good_file(good, capsys):
    code, out, err = run(capsys, "check", good)
    assert code == 0 and err == ""
    for name in ("+24V", "F", "SENSE", "0V", "PS1", "F1", "R1", "R2", "C1"):
        assert name in out
    assert str(good) in out


def test_check_json(good, capsys):
    code, out, err = run(capsys, "check", good, "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["parts"] == 5 and set(doc["nodes"]) == {"0V", "+24V", "F", "SENSE"}


# Every circuit-file error of formats.md: (name, file text, words the message must hold).
def _syntax_error():
    """R1's value with its closing quote missing (TOML 1.0.0: a basic string
    must close on its line); the message names that line."""
    text = render(BASE).replace('value = "4k7"', 'value = "4k7')
    line = text.splitlines().index('value = "4k7') + 1
    return text, ["TOML", f":{line}:"]


CIRCUIT_ERRORS = [
    ("toml-syntax", *_syntax_error()),
    ("unknown-part-key", render(changed("R1", colour="red")), ["R1", "colour"]),
    ("unknown-top-key", render(BASE, dict(TOP, voltage=3)), ["voltage"]),
    ("missing-value", render(changed("R2", value=None)), ["R2", "value"]),
    ("missing-ground", render(BASE, {"format": 1, "title": "bay 2"}), ["ground"]),
    ("unknown-kind", render(changed("R2", kind="triode")), ["R2", "kind", "triode"]),
    ("duplicate-ref", render(BASE + [dict(BASE[2])]), ["R1", "ref"]),
    ("node-count", render(changed("R2", nodes=["SENSE"])), ["R2", "nodes"]),
    ("bad-value", render(changed("R2", value="2q2x")), ["R2", "value", "2q2x"]),
    ("wrong-unit", render(changed("R2", value="2.2 mH")), ["R2", "value"]),
    ("zero-value", render(changed("R2", value="0")), ["R2", "value"]),
    ("negative-value", render(changed("R2", value=-2200)), ["R2", "value"]),
    ("floating-node", render(BASE + [
        {"ref": "C2", "kind": "capacitor", "nodes": ["SENSE", "X"], "value": "1u"},
        {"ref": "R3", "kind": "resistor", "nodes": ["X", "Y"], "value": "1k"}]),
     ["X", "floating"]),
    ("source-loop", render(BASE + [
        {"ref": "PS2", "kind": "voltage-source", "nodes": ["+24V", "0V"], "value": "24 V"}]),
     ["PS2", "PS1"]),
    ("ac-without-frequency", render(BASE + [
        {"ref": "TX1", "kind": "voltage-source", "nodes": ["AC", "0V"], "value": "24 V",
         "waveform": "ac"},
        {"ref": "R5", "kind": "resistor", "nodes": ["AC", "0V"], "value": "1k"}]),
     ["TX1", "frequency"]),
]


@pytest.mark.parametrize("name,text,words", CIRCUIT_ERRORS, ids=[c[0] for c in CIRCUIT_ERRORS])
def test_check_circuit_errors(tmp_path, capsys, name, text, words):
    path = tmp_path / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    code, out, err = run(capsys, "check", path)
    assert_bad_input(code, out, err, path, *words)


@pytest.mark.parametrize("name,text,words", CIRCUIT_ERRORS[:4],
                         ids=[c[0] for c in CIRCUIT_ERRORS[:4]])
def test_expect_and_diagnose_report_circuit_errors_too(tmp_path, capsys, readings, name, text,
                                                       words):
    path = tmp_path / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    assert_bad_input(*run(capsys, "expect", path), path, *words)
    assert_bad_input(*run(capsys, "diagnose", path, readings), path, *words)


# ----------------------------------------------------------- readings files

READINGS_ERRORS = [
    ("unknown-column", "quantity,mode,plus,colour,value\nvoltage,dc,SENSE,red,7.0\n",
     [":1", "colour"]),
    ("bad-value", HEADER + "voltage,dc,+24V,,,,24.0,\nvoltage,dc,SENSE,,,,7.x V,\n",
     [":3", "value", "7.x V"]),
    ("unknown-node", HEADER + "voltage,dc,+24V,,,,24.0,\nvoltage,dc,SENS,,,,7.0,\n",
     [":3", "SENS"]),
    ("unknown-part", HEADER + "current,dc,,,R9,,1 mA,\n", [":2", "R9"]),
    ("wrong-unit", HEADER + "voltage,dc,SENSE,,,,7 mA,\n", [":2", "value"]),
    ("unknown-quantity", HEADER + "volts,dc,SENSE,,,,7,\n", [":2", "quantity"]),
    ("unknown-meter", "quantity,plus,value,meter\nvoltage,SENSE,7,bench\n", [":2", "bench"]),
    ("empty-value", HEADER + "voltage,dc,SENSE,,,,,\n", [":2", "value"]),
    ("ac-on-dc-circuit", HEADER + "voltage,ac,SENSE,,,,1.0,\n", [":2", "mode"]),
    ("empty-file", "", []),
    ("negative-resistance", HEADER + "resistance,,,,R2,,-5,\n", [":2", "value"]),
]


@pytest.mark.parametrize("name,text,words", READINGS_ERRORS, ids=[c[0] for c in READINGS_ERRORS])
def test_diagnose_readings_errors(tmp_path, capsys, good, name, text, words):
    path = tmp_path / f"{name}.csv"
    path.write_text(text, encoding="utf-8")
    code, out, err = run(capsys, "diagnose", good, path)
    assert_bad_input(code, out, err, path, *words)


def test_readings_not_utf8(tmp_path, capsys, good):
    path = tmp_path / "binary.csv"
    path.write_bytes(b"\xff\xfe\x00quantity")
    assert_bad_input(*run(capsys, "diagnose", good, path), path, "UTF-8")


@pytest.mark.parametrize("value", ["OL", "-OL", "1e300 V"])
def test_absurd_voltage_display_is_not_an_internal_error(tmp_path, capsys, good, value):
    """An over-range display on a live node of a 24 V board (formats.md allows
    ``OL`` in any row) cannot be explained by the circuit, but it is input, not
    a crash: the verdict is given (inconsistent, with what to re-check) or the
    row is refused with exit 2 -- never cli.md's exit 1 internal error."""
    path = tmp_path / "ol.csv"
    path.write_text(HEADER + f"voltage,dc,+24V,,,,24.0,\nvoltage,dc,SENSE,,,,{value},\n",
                    encoding="utf-8")
    code, out, err = run(capsys, "diagnose", good, path, "--json")
    assert "Traceback" not in err and "internal error" not in err, err
    assert code in (0, 2), (code, err)
    if code == 0:
        doc = json.loads(out)
        assert doc["verdict"] == "inconsistent" and doc["recheck"]
    else:
        assert str(path) in err and ":3" in err


# ------------------------------------------------------------- meter files

METER_ERRORS = [
    ("syntax", "[meter.bench\ncounts = 60000\n", ["TOML"]),
    ("unknown-key", '[meter.bench]\ncounts = 60000\nimpedance = "10M"\n', ["bench", "impedance"]),
    ("bad-value", '[meter.bench]\ninput_resistance = "ten meg"\n',
     ["input_resistance", "ten meg"]),
    ("bad-counts", "[meter.bench]\ncounts = -5\n", ["counts"]),
    ("bad-accuracy", '[meter.bench]\ndc_voltage = "abc"\n', ["dc_voltage"]),
]


@pytest.mark.parametrize("name,text,words", METER_ERRORS, ids=[c[0] for c in METER_ERRORS])
def test_meter_file_errors(tmp_path, capsys, good, readings, name, text, words):
    path = tmp_path / f"{name}_meters.toml"
    path.write_text(text, encoding="utf-8")
    assert_bad_input(*run(capsys, "diagnose", good, readings, "--meters", path), path, *words)
    assert_bad_input(*run(capsys, "expect", good, "--meters", path), path, *words)


def test_meter_file_used_by_name(tmp_path, capsys, good):
    """A profile from --meters named in the meter column: its 1 Mohm input
    loads SENSE (a ~1.5 kohm source, R1 || R2) by ~0.15 %, ten times the
    default meter's 10 Mohm (Thevenin equivalent and divider rule)."""
    meters = tmp_path / "meters.toml"
    meters.write_text('[meter.old_analog]\ninput_resistance = "1M"\n', encoding="utf-8")
    rows = tmp_path / "rows.csv"
    rows.write_text("quantity,plus,meter\nvoltage,SENSE,\nvoltage,SENSE,old_analog\n",
                    encoding="utf-8")
    code, out, err = run(capsys, "expect", good, "--at", rows, "--meters", meters, "--json")
    assert code == 0, err
    e = [r["expected"] for r in json.loads(out)["readings"]]
    r1 = 4700 + KINDS["fuse"].default_value       # R1 and the fuse in series
    rth = 1.0 / (1 / r1 + 1 / 2200)               # Thevenin resistance at SENSE
    vth = 24.0 * 2200 / (r1 + 2200)
    assert e[0] == pytest.approx(vth * 10e6 / (10e6 + rth), rel=1e-9)
    assert e[1] == pytest.approx(vth * 1e6 / (1e6 + rth), rel=1e-9)


# ------------------------------------------------------------ missing files

def test_missing_files(tmp_path, capsys, good, readings):
    nope = tmp_path / "nope.toml"
    nope_csv = tmp_path / "nope.csv"
    assert_bad_input(*run(capsys, "check", nope), nope)
    assert_bad_input(*run(capsys, "expect", nope), nope)
    assert_bad_input(*run(capsys, "diagnose", nope, readings), nope)
    assert_bad_input(*run(capsys, "diagnose", good, nope_csv), nope_csv)
    assert_bad_input(*run(capsys, "expect", good, "--at", nope_csv), nope_csv)
    assert_bad_input(*run(capsys, "diagnose", good, readings, "--meters", nope), nope)
    assert_bad_input(*run(capsys, "check", tmp_path), tmp_path)      # a directory


def test_usage_errors_exit_2(capsys, good, readings):
    for argv in (["diagnose", good], ["diagnose", good, readings, "--top", "abc"],
                 ["no-such-command"], ["check"]):
        code, out, err = run(capsys, *argv)
        assert code == 2, argv
        assert "Traceback" not in err


@pytest.mark.parametrize("k", ["0", "-3"])
def test_top_must_be_positive(capsys, good, readings, k):
    code, out, err = run(capsys, "diagnose", good, readings, "--top", k)
    assert code == 2 and "--top" in err and "Traceback" not in err


# ------------------------------------------------------------------ expect

AT_ROWS = [
    # quantity, mode, plus, minus, part, setup, frequency, label
    ("current", "dc", "", "", "R1", "", "", "loop current"),
    ("resistance", "", "", "", "R2", "in-circuit", "", "R2 in circuit"),
    ("voltage", "dc", "SENSE", "", "", "", "", "TP2"),
    ("resistance", "", "", "", "C1", "lifted", "", "C1 lifted"),
    ("voltage", "dc", "+24V", "SENSE", "", "", "", "across R1 and F1"),
    ("voltage", "dc", "+24V", "", "", "", "", "TP1"),
]


def write_at(tmp_path):
    path = tmp_path / "at.csv"
    lines = ["quantity,mode,plus,minus,part,setup,frequency,label,value"]
    lines += [",".join(r) + "," for r in AT_ROWS]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_expect_at_gives_exactly_the_rows_in_order(tmp_path, capsys, good):
    path = write_at(tmp_path)
    code, out, err = run(capsys, "expect", good, "--at", path, "--json")
    assert code == 0, err
    got = json.loads(out)["readings"]
    assert len(got) == len(AT_ROWS)
    for g, (q, mode, plus, minus, part, setup, _f, _l) in zip(got, AT_ROWS):
        assert g["quantity"] == q
        assert g["part"] == (part or None)
        assert g["plus"] == (plus or None)
        if q == "voltage":
            assert g["minus"] == (minus or "0V")        # formats.md: minus defaults to ground
        if q == "resistance":
            assert g["setup"] == setup
    e = {r[7]: x for r, x in zip(AT_ROWS, got)}
    f1 = KINDS["fuse"].default_value   # fuse default cold resistance (faultfind.model.KINDS)
    # Ohm's law with the 1 ohm shunt in series: 24 V / (4k7 + 2k2 + F1 + 1).
    assert e["loop current"]["expected"] == pytest.approx(24 / (6900 + f1 + 1), rel=1e-9)
    assert e["loop current"]["unit"] == "A"
    # Power off, PS1 open: R1 and F1 end at the open supply, so R2 alone.
    assert e["R2 in circuit"]["expected"] == pytest.approx(2200, rel=1e-9)
    # A lifted capacitor on an ohmmeter: open, OL: expected/low/high null (cli.md).
    assert e["C1 lifted"]["expected"] is None and e["C1 lifted"]["low"] is None
    # Divider with the 10 Mohm meter across R2.
    r2m = 1 / (1 / 2200 + 1 / 10e6)
    assert e["TP2"]["expected"] == pytest.approx(24 * r2m / (4700 + f1 + r2m), rel=1e-9)
    assert e["TP1"]["expected"] == pytest.approx(24.0, rel=1e-12)
    # Band: 1 % parts and a 2 % supply: the healthy band holds the nominal.
    for x in got:
        if x["expected"] is not None:
            assert x["low"] <= x["expected"] <= x["high"]


def test_expect_at_text_table_in_row_order(tmp_path, capsys, good):
    path = write_at(tmp_path)
    code, out, err = run(capsys, "expect", good, "--at", path)
    assert code == 0, err
    positions = [out.find(r[7]) for r in AT_ROWS]
    assert all(p >= 0 for p in positions), out
    assert positions == sorted(positions)


def test_expect_without_at_covers_the_circuit(capsys, good):
    """cli.md: every node's voltage, every part's current, the in-circuit
    resistance across every two-terminal passive part."""
    code, out, err = run(capsys, "expect", good, "--json")
    assert code == 0
    rows = json.loads(out)["readings"]
    volts = {r["plus"] for r in rows if r["quantity"] == "voltage"}
    amps = {r["part"] for r in rows if r["quantity"] == "current"}
    ohms = {r["part"] for r in rows if r["quantity"] == "resistance"}
    assert volts == {"+24V", "F", "SENSE"}
    assert amps == {"PS1", "F1", "R1", "R2", "C1"}
    assert ohms == {"F1", "R1", "R2", "C1"}


# ---------------------------------------------------------------- diagnose

REQUIRED = {"verdict", "hypotheses", "estimates", "ambiguity_groups", "suggestions"}
EXTRAS = {"explanations", "unseen", "recheck", "notes", "priors"}


def test_diagnose_json_document(capsys, good, readings):
    code, out, err = run(capsys, "diagnose", good, readings, "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert REQUIRED <= set(doc) <= REQUIRED | EXTRAS, set(doc)
    assert doc["verdict"] in ("fault", "no-fault", "inconsistent")
    assert doc["hypotheses"]
    for h in doc["hypotheses"]:
        assert set(h) == {"faults", "probability", "chi2", "readings"}
        assert h["readings"] == 2
        for f in h["faults"]:
            assert set(f) == {"ref", "mode", "value"}
    assert sum(h["probability"] for h in doc["hypotheses"]) == pytest.approx(1.0, abs=1e-9)
    for ref, e in doc["estimates"].items():
        assert set(e) == {"nominal", "value", "low", "high"}
    assert isinstance(doc["ambiguity_groups"], list) and isinstance(doc["suggestions"], list)


def test_diagnose_top_limits_the_list(capsys, good, readings):
    code, out, err = run(capsys, "diagnose", good, readings, "--json", "--top", "2")
    assert code == 0
    assert len(json.loads(out)["hypotheses"]) <= 2


def test_diagnose_text_report(tmp_path, capsys, good):
    """An open R2 (SENSE rises to the supply through R1, Ohm's law) reads as a fault."""
    path = tmp_path / "open.csv"
    path.write_text(HEADER + "voltage,dc,+24V,,,,24.0,TP1\nvoltage,dc,SENSE,,,,23.99,TP2\n",
                    encoding="utf-8")
    code, out, err = run(capsys, "diagnose", good, path)
    assert code == 0, err
    assert "R2 open" in out
    assert "FAULT" in out


# -------------------------------------------------------------- subprocess

def _python_m(*args, cwd):
    return subprocess.run([sys.executable, "-m", "faultfind", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=120)


def test_subprocess_bad_input_has_no_traceback(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(render(changed("R2", value="2q2x")), encoding="utf-8")
    p = _python_m("check", bad, cwd=tmp_path)
    assert p.returncode == 2
    assert "Traceback" not in p.stderr
    assert str(bad) in p.stderr and "R2" in p.stderr
    assert p.stdout == ""


def test_subprocess_good_run(tmp_path, good, readings):
    p = _python_m("diagnose", good, readings, "--json", cwd=tmp_path)
    assert p.returncode == 0, p.stderr
    assert "Traceback" not in p.stderr
    assert json.loads(p.stdout)["verdict"] in ("fault", "no-fault", "inconsistent")
