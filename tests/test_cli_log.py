"""Tests of ``faultfind log``: subcommands, JSON documents, exit codes (cli.md)."""

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from faultfind.cli.log import parse_compact
from faultfind.cli.main import main
from faultfind.errors import InputError
from faultfind.io.circuit_file import load_circuit
from faultfind.io.logbook import ENV_VAR, SAFETY_CAUTION, Logbook
from faultfind.io.readings_file import load_readings, parse_readings

ROOT = Path(__file__).resolve().parent.parent
BOOSTER = ROOT / "field_cases" / "booster_pump_panel"
CIRCUIT = str(BOOSTER / "circuit.toml")


@pytest.fixture
def book_path(tmp_path, monkeypatch):
    path = tmp_path / "book.sqlite"
    monkeypatch.setenv(ENV_VAR, str(path))
    return path


def run(capsys, *argv):
    code = main(["log", *map(str, argv)])
    out, err = capsys.readouterr()
    return code, out, err


def run_json(capsys, *argv):
    code, out, err = run(capsys, *argv, "--json")
    assert code == 0, err
    return json.loads(out)  # one JSON document and nothing else on stdout


def started(capsys, *extra):
    return run_json(capsys, "start", CIRCUIT, "--unit", "BP-2", *extra)["session"]["id"]


def count(path):
    with Logbook(path) as b:
        return sum(len(b.get_session(s.id).readings) for s in b.list_sessions())


def test_start_prints_the_caution_and_says_when_not_acknowledged(book_path, capsys):
    code, out, err = run(capsys, "start", CIRCUIT, "--unit", "BP-2", "--technician", "A. Rivera")
    assert code == 0
    assert SAFETY_CAUTION in out
    assert "NOT acknowledged" in out and "faultfind log caution 1 --caution-acknowledged" in out
    with Logbook(book_path) as b:
        assert b.get_session(1).caution_acknowledged_at is None
    code, out, err = run(capsys, "caution", "1", "--caution-acknowledged")
    assert code == 0 and "acknowledged at" in out
    with Logbook(book_path) as b:
        assert b.get_session(1).caution_acknowledged_at is not None


def test_start_json_with_acknowledgement(book_path, capsys):
    code, out, err = run(capsys, "start", CIRCUIT, "--unit", "BP-2", "--purpose", "training",
                         "--caution-acknowledged", "--json")
    doc = json.loads(out)
    assert code == 0 and SAFETY_CAUTION in err  # the caution goes to stderr with --json
    assert doc["session"]["purpose"] == "training"
    assert doc["session"]["caution_acknowledged_at"] is not None
    assert doc["logbook"] == str(book_path) and doc["caution"] == SAFETY_CAUTION


def test_logbook_option_overrides_the_environment(book_path, tmp_path, capsys):
    other = tmp_path / "other.sqlite"
    run_json(capsys, "start", CIRCUIT, "--unit", "BP-2", "--logbook", other)
    assert other.exists() and not book_path.exists()
    doc = run_json(capsys, "path")
    assert doc == {"logbook": str(book_path), "exists": False, "chosen_by": ENV_VAR,
                   "default": doc["default"]}
    assert run_json(capsys, "path", "--logbook", other)["chosen_by"] == "--logbook"


@pytest.mark.parametrize("tokens, fields", [
    (["V", "+24V", "23.91"], dict(quantity="voltage", mode="dc", plus="+24V", minus="",
                                  value="23.91")),
    (["vac", "+24V,24V-F", "1.2", "V"], dict(quantity="voltage", mode="ac", plus="+24V",
                                             minus="24V-F", value="1.2 V")),
    (["I", "H1", "2.45mA"], dict(quantity="current", mode="dc", part="H1", value="2.45mA")),
    (["R", "F1", "OL"], dict(quantity="resistance", setup="in-circuit", part="F1", value="OL")),
    (["Rlifted", "K1", "0k18"], dict(quantity="resistance", setup="lifted", part="K1",
                                     value="0k18")),
    (["R", "GUARD,0V", "1k2"], dict(quantity="resistance", setup="in-circuit", plus="GUARD",
                                    minus="0V", value="1k2")),
])
def test_compact_form(tokens, fields):
    assert parse_compact(tokens, load_circuit(CIRCUIT)) == fields


@pytest.mark.parametrize("row", [
    dict(quantity="voltage", mode="dc", plus="24V-F", minus="GUARD", part=None, setup=None),
    dict(quantity="voltage", mode="ac", plus="RUN", minus="0V", part=None, setup=None),
    dict(quantity="current", mode="dc", plus=None, minus=None, part="H1", setup=None),
    dict(quantity="resistance", mode=None, plus=None, minus=None, part="K1", setup="lifted"),
    dict(quantity="resistance", mode=None, plus="GUARD", minus="0V", part=None,
         setup="in-circuit"),
])
def test_compact_of_a_suggestion_reads_back(row):
    # What "log diagnose" prints for a suggestion is a command that logs that very reading.
    from faultfind.cli.log import compact_of
    fields = parse_compact(compact_of(row).split() + ["1"], load_circuit(CIRCUIT))
    for key in ("quantity", "part", "plus", "minus"):
        assert (fields.get(key) or None) == row[key], key
    assert fields.get("mode", None) == row["mode"] or row["quantity"] == "resistance"
    assert fields.get("setup") == row["setup"]


def test_compact_form_errors():
    c = load_circuit(CIRCUIT)
    for tokens in (["V", "+24V"], ["W", "+24V", "1"], ["R", "NOPE", "1"]):
        with pytest.raises(InputError) as e:
            parse_compact(tokens, c)
        assert e.value.key == "READING"


def test_add_reports_the_band_right_after_storing(book_path, capsys):
    sid = started(capsys)
    code, out, err = run(capsys, "add", sid, "V", "24V-F", "0", "--label", "TP2")
    assert code == 0
    first, second = out.splitlines()[:2]
    assert first == f"Stored reading 1 of session {sid}: V dc 24V-F to 0V = 0"
    # A healthy unit has the full supply after the fuse (field case README): 0 V is below.
    assert "▼ below band" in second
    doc = run_json(capsys, "add", sid, "--quantity", "resistance", "--part", "F1", "--value", "OL")
    r = doc["reading"]
    assert (r["seq"], r["raw"], r["overrange"], r["value"], r["status"]) == (2, "OL", 1, None,
                                                                             "high")
    assert r["expected"] == pytest.approx(0.15, rel=0.05)  # F1 R15 in its holder, power off
    code, out, err = run(capsys, "add", "last", "--json", "I", "H1", "--", "-OL")
    assert code == 0 and json.loads(out)["reading"]["overrange"] == -1


@pytest.mark.parametrize("argv, words", [
    (["V", "NOWHERE", "1"], ["NOWHERE", "not in the circuit"]),
    (["V", "+24V", "abc"], ["cannot read value"]),
    (["R", "F1", "-5"], ["negative resistance"]),
    (["X", "F1", "1"], ["unknown kind"]),
    (["V", "+24V", "1", "--part", "F1"], ["not both"]),
    ([], ["no reading given"]),
    (["--quantity", "voltage", "--plus", "+24V"], ["no value"]),
    (["--quantity", "voltage", "--plus", "+24V", "--value", "1", "--meter", "bench"],
     ["unknown meter"]),
])
def test_bad_add_exits_2_naming_the_problem_and_stores_nothing(book_path, capsys, argv, words):
    sid = started(capsys)
    before = count(book_path)
    code, out, err = run(capsys, "add", sid, *argv)
    assert code == 2 and out == ""
    assert err.startswith("faultfind: error:") and "Traceback" not in err
    for w in words:
        assert w in err
    assert count(book_path) == before


def test_bad_session_arguments_exit_2(book_path, capsys):
    started(capsys)
    for argv in (["add", "7", "V", "+24V", "1"], ["show", "x"], ["show", "0"],
                 ["strike", "1", "5", "--reason", "r"], ["close", "1"],
                 ["close", "1", "--fault", "F1:open", "--no-fault"],
                 ["close", "1", "--fault", "Q9:open"], ["list", "--since", "yesterday"],
                 ["report", "1", "-o", "r.pdf"], ["import", "1", "/no/such.csv"],
                 ["start", "/no/such.toml", "--unit", "X"]):
        code, out, err = run(capsys, *argv)
        assert code == 2, (argv, err)
        assert "faultfind: error:" in err and "Traceback" not in err


def test_last_in_an_empty_logbook(book_path, capsys):
    Logbook(book_path).close()
    code, out, err = run(capsys, "show", "last")
    assert code == 2 and "no sessions" in err


def test_a_whole_job_end_to_end(book_path, tmp_path, capsys):
    sid = started(capsys, "--technician", "A. Rivera", "--location", "Plant room 2")
    doc = run_json(capsys, "import", sid, BOOSTER / "readings.csv")
    assert [r["seq"] for r in doc["readings"]] == list(range(1, 9))
    run_json(capsys, "strike", sid, 1, "--reason", "meter on the wrong range")
    diag = run_json(capsys, "diagnose", sid, "--top", "3")["diagnosis"]
    # Answer key of the field case (fault.toml): F1 open.
    assert diag["verdict"] == "fault"
    assert diag["diagnosis"]["hypotheses"][0]["faults"][0] == {"ref": "F1", "mode": "open",
                                                                "value": None}
    assert diag["reading_count"] == 7
    code, out, err = run(capsys, "show", sid)
    assert code == 0 and "F1 open" in out and "struck out" in out
    shown = run_json(capsys, "show", sid)["session"]
    assert len(shown["readings"]) == 8 and shown["readings"][0]["struck_reason"]
    assert {r["status"] for r in shown["readings"]} <= {"in", "edge", "high", "low", "struck"}
    closed = run_json(capsys, "close", sid, "--fault", "F1:open", "--confirmed-by",
                      "OL out of holder", "--action", "replaced F1 1 A T")["session"]
    assert closed["outcome"]["faults"] == [{"ref": "F1", "mode": "open"}]
    code, out, err = run(capsys, "add", sid, "V", "+24V", "24")
    assert code == 2 and "closed" in err
    # Export: a readings file that reads back to the stored readings (round trip).
    out_csv = tmp_path / "out.csv"
    out_toml = tmp_path / "circuit.toml"
    doc = run_json(capsys, "export", sid, "-o", out_csv, "--circuit", out_toml)
    assert doc["rows"] == 7
    assert out_toml.read_text(encoding="utf-8") == Path(CIRCUIT).read_text(encoding="utf-8")
    back = load_readings(out_csv, load_circuit(out_toml))
    original = load_readings(BOOSTER / "readings.csv", load_circuit(CIRCUIT))[1:]
    assert [(r.quantity, r.plus, r.part, r.raw, r.value, r.overrange, r.label) for r in back] == \
        [(r.quantity, r.plus, r.part, r.raw, r.value, r.overrange, r.label) for r in original]
    code, out, err = run(capsys, "export", sid)  # to stdout, parsed as RFC 4180 CSV
    assert code == 0
    assert len(list(csv.DictReader(io.StringIO(out)))) == 7
    assert len(parse_readings(out)) == 7
    # Reports.
    code, out, err = run(capsys, "report", sid)
    assert code == 0 and out.startswith("# Work order report: BP-2")
    doc = run_json(capsys, "report", sid, "-o", tmp_path / "r.html")
    assert doc["format"] == "html" and (tmp_path / "r.html").exists()
    assert run_json(capsys, "report", sid, "--format", "html")["text"].startswith("<!DOCTYPE")
    # Lists and history.
    rows = run_json(capsys, "list", "--unit", "bp-2")["sessions"]
    assert [r["id"] for r in rows] == [sid] and rows[0]["latest_verdict"] == "fault"
    code, out, err = run(capsys, "history", "BP-2")
    assert code == 0 and "F1 open" in out and "replaced F1 1 A T" in out
    assert run_json(capsys, "list", "--technician", "nobody")["sessions"] == []
    assert run_json(capsys, "verify")["ok"] is True


def test_history_flags_a_changed_circuit(book_path, tmp_path, capsys):
    started(capsys)
    changed = tmp_path / "circuit.toml"
    changed.write_text(Path(CIRCUIT).read_text(encoding="utf-8").replace('"470"', '"390"', 1),
                       encoding="utf-8")
    run_json(capsys, "start", changed, "--unit", "BP-2")
    code, out, err = run(capsys, "history", "BP-2")
    assert "differs from the previous session" in out


def test_list_and_history_without_a_logbook_create_nothing(book_path, capsys):
    assert run_json(capsys, "list") == {"sessions": []}
    code, out, err = run(capsys, "history", "BP-2")
    assert code == 0 and "No sessions" in out
    assert not book_path.exists()


def test_delete_needs_yes(book_path, capsys):
    sid = started(capsys, "--technician", "A. Rivera")
    code, out, err = run(capsys, "delete", sid)
    assert code == 2 and "--yes" in err and "A. Rivera" in err
    assert len(run_json(capsys, "list")["sessions"]) == 1
    doc = run_json(capsys, "delete", sid, "--yes")
    assert doc["deleted"]["id"] == sid
    assert run_json(capsys, "list")["sessions"] == []


def test_log_without_a_subcommand_prints_help(capsys):
    assert main(["log"]) == 0
    out = capsys.readouterr().out
    for name in ("start", "add", "import", "diagnose", "close", "show", "list", "history",
                 "export", "report", "delete"):
        assert name in out
    with pytest.raises(SystemExit) as e:
        main(["log", "nonsense"])
    assert e.value.code == 2


def test_every_subcommand_takes_json_and_logbook(capsys):
    for name in ("start", "caution", "add", "import", "strike", "diagnose", "close", "show",
                 "list", "history", "export", "report", "delete", "path", "verify"):
        with pytest.raises(SystemExit):
            main(["log", name, "--help"])
        out = capsys.readouterr().out
        assert "--json" in out and "--logbook PATH" in out, name


def test_options_may_sit_between_session_and_reading(book_path, capsys):
    sid = started(capsys)
    code, out, err = run(capsys, "add", sid, "--label", "TP1 PSU", "V", "+24V", "23.91", "V")
    assert code == 0
    with Logbook(book_path) as b:
        r = b.get_session(sid).readings[0].reading
    assert (r.label, r.raw, r.plus) == ("TP1 PSU", "23.91 V", "+24V")


def test_add_still_acknowledges_when_the_band_cannot_be_computed(book_path, capsys, monkeypatch):
    from faultfind.cli.log import sessions as log_cmd
    from faultfind.errors import SolveError

    def broken(*args):
        raise SolveError("singular on purpose")

    sid = started(capsys)
    monkeypatch.setattr(log_cmd, "assess", broken)
    doc = run_json(capsys, "add", sid, "V", "+24V", "23.9")
    assert doc["reading"]["seq"] == 1 and "singular on purpose" in doc["reading"]["note"]
    assert count(book_path) == 1


def test_installed_command_in_a_subprocess(tmp_path):
    env = dict(os.environ, **{ENV_VAR: str(tmp_path / "b.sqlite")})
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")

    def cli(*argv):
        return subprocess.run([sys.executable, "-m", "faultfind", "log", *map(str, argv)],
                              capture_output=True, text=True, env=env, timeout=120)

    p = cli("start", CIRCUIT, "--unit", "BP-2", "--json")
    assert p.returncode == 0 and json.loads(p.stdout)["session"]["id"] == 1
    p = cli("add", "1", "R", "F1", "OL")
    assert p.returncode == 0 and p.stdout.startswith("Stored reading 1 of session 1")
    p = cli("add", "1", "R", "F1", "-5")
    assert p.returncode == 2 and "Traceback" not in p.stderr


def test_show_and_list_carry_the_tags(book_path, capsys):
    first, second = started(capsys), started(capsys)
    assert run(capsys, "tag", first, "North-Pumps", "site:Harbour")[0] == 0
    code, out, _ = run(capsys, "show", first)
    assert code == 0 and "  tags: North-Pumps, site:Harbour\n" in out
    code, out, _ = run(capsys, "show", second)
    assert code == 0 and "tags:" not in out            # no line for an untagged session
    assert run_json(capsys, "show", first)["session"]["tags"] == ["North-Pumps", "site:Harbour"]
    assert run_json(capsys, "show", second)["session"]["tags"] == []
    listed = run_json(capsys, "list")["sessions"]
    assert [(s["id"], s["tags"]) for s in listed] == [(first, ["North-Pumps", "site:Harbour"]),
                                                      (second, [])]
    code, out, _ = run(capsys, "list")
    header, _rule, *rows = out.splitlines()[:4]
    assert header.split()[-1] == "tags"
    assert rows[0].rstrip().endswith("North-Pumps, site:Harbour") and rows[1].rstrip().endswith("—")
    # the filter ignores case, like the tags themselves
    assert [s["id"] for s in run_json(capsys, "list", "--tag", "north-pumps")["sessions"]] == [first]
    code, out, _ = run(capsys, "list", "--tag", "south")
    assert code == 0 and out == "No sessions match.\n"
    code, _, err = run(capsys, "list", "--tag", "  ")
    assert code == 2 and "a tag must not be empty" in err
