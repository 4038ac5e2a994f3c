"""Tests of ``faultfind drill``: scripted drills on standard input, JSON, exit codes (cli.md),
the logbook summary, and one real subprocess.

Outside references beside each check: cli.md (exit status 0/2, one JSON document on stdout
with --json), Ohm's law for what the booster panel reads with its fuse blown, the field
case's answer key, and the drill rules of the issue ("Drill mode") that docs/drill.md records.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

from faultfind.cli.main import main
from faultfind.io.logbook import ENV_VAR, SAFETY_CAUTION, Logbook

ROOT = Path(__file__).resolve().parent.parent
CIRCUIT = str(ROOT / "field_cases" / "booster_pump_panel" / "circuit.toml")
SOLVED = "ack\nread V +24V\nread V 24V-F\nverdict F1 open\n"


@pytest.fixture
def book_path(tmp_path, monkeypatch):
    path = tmp_path / "book.sqlite"
    monkeypatch.setenv(ENV_VAR, str(path))
    return path


def run(capsys, monkeypatch, stdin, *argv):
    monkeypatch.setattr(sys, "stdin", io.StringIO(stdin))
    try:
        code = main(["drill", *map(str, argv)])
    except SystemExit as exc:  # argparse's usage errors
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def drill_json(capsys, monkeypatch, stdin, *argv):
    code, out, err = run(capsys, monkeypatch, stdin, "run", CIRCUIT, "--apprentice", "Sam Okafor",
                         *argv, "--json")
    assert code == 0, err
    return json.loads(out), err  # cli.md: one JSON document and nothing else on stdout


def test_a_scripted_drill_solved_correctly_scores_full_marks(book_path, capsys, monkeypatch):
    doc, err = drill_json(capsys, monkeypatch, SOLVED, "--seed", 5, "--fault", "F1:open")
    assert SAFETY_CAUTION in err  # the caution comes first (on stderr with --json)
    assert [s["command"] for s in doc["transcript"]] == SOLVED.split("\n")[:-1]
    dead = doc["transcript"][2]["reading"]
    # Ohm's law: with F1 open nothing feeds 24V-F, so the meter shows (nearly) 0 V
    assert dead["unit"] == "V" and abs(dead["value"]) < 1e-3
    r = doc["result"]
    # the issue: correct verdict, no safety errors, effort within advice + 2: full marks
    assert r["correct"] and r["score"]["total"] == 100 and r["safety_errors"] == 0
    assert r["effort"] <= r["advice"]["effort"] + 2
    assert r["fault"] == {"ref": "F1", "mode": "open", "value": None}
    assert 2 in r["explanation"]["pointing"]
    assert doc["logbook"]["drill"] == 1 and Path(doc["logbook"]["path"]) == book_path


def test_a_wrong_verdict_is_scored_and_explained_in_text(book_path, capsys, monkeypatch):
    code, out, err = run(capsys, monkeypatch, SOLVED.replace("F1 open", "H1 open"), "run",
                         CIRCUIT, "--apprentice", "Sam", "--seed", 5, "--fault", "F1:open")
    assert code == 0, err
    assert out.startswith(SAFETY_CAUTION)  # cli.md / the issue: the caution screen first
    assert "> read V 24V-F" in out  # piped input is echoed: the output reads as a transcript
    # docs/drill.md: a wrong part earns neither correctness nor effort points: 15 for safety
    assert "Score 15/100" in out and "Wrong: the hidden fault was F1 open" in out
    assert "Against your verdict: #2 V 24V-F" in out  # Ohm's law: H1 open leaves 24V-F at 24 V
    assert "Soonest:" in out and "Recorded as drill 1 for Sam" in out


def test_a_live_resistance_request_is_refused(book_path, capsys, monkeypatch):
    script = "read V +24V\nack\nread R F1\nisolate\nread R F1\nverdict F1 open\n"
    doc, _ = drill_json(capsys, monkeypatch, script, "--seed", 5, "--fault", "F1:open")
    kinds = [(s["command"], s["kind"], s["safety_error"]) for s in doc["transcript"]]
    # the issue: a reading before the caution, and an ohmmeter on the live board, are
    # refused and counted as safety errors; after isolating, the fuse reads OL (answer key)
    assert kinds[0] == ("read V +24V", "refused", True)
    assert kinds[2] == ("read R F1", "refused", True)
    assert doc["transcript"][4]["reading"]["display"] == "OL"
    assert doc["safety_errors"] == 2 and doc["result"]["score"]["safety"] == 0


def test_the_same_seed_gives_the_same_drill(book_path, capsys, monkeypatch):
    script = "ack\nread V +24V\nread V 24V-F\nread V GUARD\nread I H1\nquit\n"
    a, _ = drill_json(capsys, monkeypatch, script, "--seed", 31, "--no-log")
    b, _ = drill_json(capsys, monkeypatch, script, "--seed", 31, "--no-log")
    c, _ = drill_json(capsys, monkeypatch, "ack\nverdict none\n", "--seed", 31, "--no-log")
    # the issue: the same seed gives the same drill: the same displays, the same fault
    assert [s["message"] for s in a["transcript"]] == [s["message"] for s in b["transcript"]]
    assert a["drill"]["seed"] == 31 and not a["scored"] and a["result"] is None
    d, _ = drill_json(capsys, monkeypatch, "ack\nverdict none\n", "--seed", 31, "--no-log")
    assert c["result"]["fault"] == d["result"]["fault"] and c["result"]["fault"] is not None
    assert not book_path.exists()  # --no-log (and an unscored drill) writes nothing


def test_results_land_in_the_logbook_and_the_summary_shows_them(book_path, capsys,
                                                                 monkeypatch):
    drill_json(capsys, monkeypatch, SOLVED, "--seed", 5, "--fault", "F1:open")
    drill_json(capsys, monkeypatch, SOLVED.replace("ack\n", "ack\nread R F1\n")
               .replace("F1 open", "S1 open"), "--seed", 6, "--fault", "F1:open")
    with Logbook(book_path) as book:
        assert [r.correct for r in book.list_drills("Sam Okafor")] == [True, False]
    code, out, err = run(capsys, monkeypatch, "", "summary", "--apprentice", "sam okafor",
                         "--json")
    s = json.loads(out)["apprentices"][0]
    # one right, one wrong; one safety error (the live ohmmeter request); 2 readings each
    assert (s["drills"], s["correct"], s["accuracy"], s["safety_errors"]) == (2, 1, 0.5, 1)
    assert s["mean_readings"] == 2.0 and [r["score"] for r in s["records"]][0] == 100
    code, out, err = run(capsys, monkeypatch, "", "summary", "--apprentice", "Sam Okafor")
    assert code == 0 and "Drills of Sam Okafor: 2, 1 right (50 %)" in out
    assert "F1 open" in out and "S1 open (wrong)" in out and "week" in out
    code, out, err = run(capsys, monkeypatch, "", "summary")
    assert code == 0 and "Drills of Sam Okafor: 2" in out


def test_an_apprentices_drills_can_be_deleted(book_path, capsys, monkeypatch):
    drill_json(capsys, monkeypatch, SOLVED, "--seed", 5, "--fault", "F1:open")
    code, out, err = run(capsys, monkeypatch, "", "delete", "--apprentice", "SAM OKAFOR")
    # like faultfind log delete (docs/logbook.md): nothing goes without --yes (status 2)
    assert code == 2 and "--yes" in err and "1 drill(s)" in err
    code, out, err = run(capsys, monkeypatch, "", "delete", "--apprentice", "SAM OKAFOR",
                         "--yes", "--json")
    assert code == 0 and json.loads(out)["deleted"] == 1
    with Logbook(book_path) as book:
        assert book.list_drills() == [] and book.check() == []


def test_summary_without_a_logbook(tmp_path, capsys, monkeypatch):
    code, out, err = run(capsys, monkeypatch, "", "summary", "--logbook", tmp_path / "no.sqlite")
    assert code == 0 and "No drills recorded yet." in out
    assert not (tmp_path / "no.sqlite").exists()


def test_bad_commands_are_answered_unless_strict(book_path, capsys, monkeypatch, tmp_path):
    script = "ack\nbogus\nread V NOPE\nread V 24V-F\nverdict F1 open\n"
    doc, _ = drill_json(capsys, monkeypatch, script, "--seed", 5, "--fault", "F1:open")
    # docs/drill.md: a command not understood is answered and the drill goes on
    assert [s["kind"] for s in doc["transcript"]][1:3] == ["error", "error"]
    assert "NOPE" in doc["transcript"][2]["message"] and doc["result"]["correct"]
    code, out, err = run(capsys, monkeypatch, script, "run", CIRCUIT, "--apprentice", "Sam",
                         "--seed", 5, "--strict")
    # cli.md: bad input exits 2 with a message naming the place; --strict makes it so here
    assert code == 2 and "line 2" in err and "bogus" in err and "Traceback" not in err
    commands = tmp_path / "class.txt"
    commands.write_text("# class drill 1\n\n" + script, encoding="utf-8")
    code, out, err = run(capsys, monkeypatch, "", "run", CIRCUIT, "--apprentice", "Sam",
                         "--seed", 5, "--strict", "--commands", commands, "--no-log")
    assert code == 2 and f"{commands}:4" in err


@pytest.mark.parametrize("argv, needle", [
    (["run", "nope.toml", "--apprentice", "Sam"], "nope.toml"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--fault", "F9:open"], "--fault"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--fault", "F1:short"], "fault mode"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--seed", "-3"], "--seed"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--seed", "x"], "--seed"),
    (["run", CIRCUIT, "--apprentice", " "], "--apprentice"),
    (["run", CIRCUIT], "--apprentice"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--commands", "missing.txt"], "missing.txt"),
    (["run", CIRCUIT, "--apprentice", "Sam", "--meters", "missing.toml"], "missing.toml"),
])
def test_bad_input_exits_2_naming_what_is_wrong(book_path, capsys, monkeypatch, argv, needle):
    code, out, err = run(capsys, monkeypatch, SOLVED, *argv)
    # cli.md: status 2, a message naming what is wrong, never a traceback
    assert code == 2 and needle in err and "Traceback" not in err
    assert out == "" and not book_path.exists()  # the drill never started: nothing recorded


def test_commands_file_and_acknowledged_caution(book_path, capsys, monkeypatch, tmp_path):
    commands = tmp_path / "class.txt"
    commands.write_text("read V 24V-F\nverdict F1 open\nread V +24V\n", encoding="utf-8")
    code, out, err = run(capsys, monkeypatch, "", "run", CIRCUIT, "--apprentice", "Sam",
                         "--seed", 5, "--fault", "F1:open", "--caution-acknowledged",
                         "--commands", commands, "--json")
    doc = json.loads(out)
    assert code == 0 and doc["caution_acknowledged"] and doc["result"]["correct"]
    assert doc["transcript"][0]["command"] == "--caution-acknowledged"
    assert "1 command(s) after the end of the drill were ignored" in err


def test_a_real_subprocess_run(tmp_path):
    env = {"PATH": "/usr/bin:/bin", ENV_VAR: str(tmp_path / "book.sqlite"), "HOME": str(tmp_path)}
    p = subprocess.run([sys.executable, "-m", "faultfind", "drill", "run", CIRCUIT,
                        "--apprentice", "Sam", "--seed", "5", "--fault", "F1:open", "--json"],
                       input=SOLVED, capture_output=True, text=True, timeout=120, cwd=tmp_path,
                       env=env)
    # cli.md: status 0, one JSON document on stdout, the caution on stderr, no traceback
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["result"]["score"]["total"] == 100 and "Traceback" not in p.stderr
    assert SAFETY_CAUTION.splitlines()[0] in p.stderr
    p = subprocess.run([sys.executable, "-m", "faultfind", "drill", "summary", "--apprentice",
                        "Sam"], capture_output=True, text=True, timeout=120, cwd=tmp_path, env=env)
    assert p.returncode == 0 and "Drills of Sam: 1, 1 right (100 %)" in p.stdout
