"""Tests of faultfind.io.logbook: the measurement logbook's library API."""

import hashlib
import os
import shutil
import sqlite3
import stat
import subprocess
import threading
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

from faultfind.errors import CircuitError, InputError, LogbookError, MeterError, ReadingsError
from faultfind.io import migrations as mig
from faultfind.io.logbook import (ENV_VAR, SAFETY_CAUTION, default_logbook_path, format_time,
                                  parse_time, resolve_logbook_path)
from faultfind.io.readings_file import load_readings, parse_readings
from faultfind.logbook import Logbook

ROOT = Path(__file__).resolve().parent.parent
BOOSTER = ROOT / "field_cases" / "booster_pump_panel"
KILN = ROOT / "field_cases" / "kiln_contactor_snubber"

# An invented irrigation valve driver: 24 V supply, fuse, series resistor, valve coil.
VALVE = """\
format = 1
title = "Greenhouse bay 2 irrigation valve driver"
ground = "GND"

[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["V24", "GND"]
value = "24 V"
tolerance = "5%"

[[part]]
ref = "F1"
kind = "fuse"
nodes = ["V24", "VF"]

[[part]]
ref = "R1"
kind = "resistor"
nodes = ["VF", "COIL"]
value = "22"
tolerance = "5%"

[[part]]
ref = "L1"
kind = "inductor"
nodes = ["COIL", "GND"]
value = "0.1 H"
resistance = "30"
"""

BENCH_METERS = """\
[meter.bench]
counts = 60000
dc_voltage = "0.05% + 2"
"""


@pytest.fixture
def book(tmp_path):
    with Logbook(tmp_path / "book.sqlite") as b:
        yield b


@pytest.fixture
def valve(tmp_path):
    p = tmp_path / "valve.toml"
    p.write_text(VALVE, encoding="utf-8")
    return p


def _raw(path):
    return sqlite3.connect(str(path), isolation_level=None)


# -- where the logbook lives ---------------------------------------------------------------


def test_default_path_linux_follows_xdg_base_directory_spec(tmp_path):
    # XDG Base Directory Specification 0.8: $XDG_DATA_HOME, default $HOME/.local/share,
    # and a relative $XDG_DATA_HOME is invalid and must be ignored.
    home = tmp_path / "home"
    assert default_logbook_path({}, "linux", home) == home / ".local/share/faultfind/logbook.sqlite"
    assert default_logbook_path({"XDG_DATA_HOME": "/data/x"}, "linux", home) == \
        Path("/data/x/faultfind/logbook.sqlite")
    assert default_logbook_path({"XDG_DATA_HOME": "rel/dir"}, "linux", home) == \
        home / ".local/share/faultfind/logbook.sqlite"
    assert default_logbook_path({"XDG_DATA_HOME": ""}, "linux", home) == \
        home / ".local/share/faultfind/logbook.sqlite"


def test_default_path_macos_and_windows(tmp_path):
    # Apple's per-user application data folder is ~/Library/Application Support; Windows'
    # per-user local application data is %LOCALAPPDATA%, by default ~\AppData\Local (from
    # memory: both platforms' file system guides).
    home = tmp_path / "h"
    assert default_logbook_path({}, "darwin", home) == \
        home / "Library" / "Application Support" / "faultfind" / "logbook.sqlite"
    assert default_logbook_path({"LOCALAPPDATA": "C:/Users/al/AppData/Local"}, "win32", home) \
        == Path("C:/Users/al/AppData/Local/faultfind/logbook.sqlite")
    assert default_logbook_path({}, "win32", home) == \
        home / "AppData" / "Local" / "faultfind" / "logbook.sqlite"


def test_environment_variable_and_explicit_path_win(tmp_path, monkeypatch):
    # cli.md: --logbook PATH, else FAULTFIND_LOGBOOK, chooses the file.
    env = {ENV_VAR: str(tmp_path / "env.sqlite"), "XDG_DATA_HOME": "/elsewhere"}
    assert default_logbook_path(env, "linux") == tmp_path / "env.sqlite"
    monkeypatch.setenv(ENV_VAR, str(tmp_path / "env.sqlite"))
    assert resolve_logbook_path() == tmp_path / "env.sqlite"
    assert resolve_logbook_path(tmp_path / "cli.sqlite") == tmp_path / "cli.sqlite"
    with pytest.raises(LogbookError, match="file name"):
        resolve_logbook_path("")


def test_new_logbook_file_is_private_and_set_up_as_documented(tmp_path):
    path = tmp_path / "sub" / "dir" / "book.sqlite"
    with Logbook(path) as b:
        assert b.schema_version == mig.LATEST_VERSION
        c = b._conn
        # sqlite.org/pragma.html: journal_mode reports "wal"; synchronous FULL is 2;
        # foreign_keys 1 when enforced; secure_delete 1 when on.
        assert c.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert c.execute("PRAGMA synchronous").fetchone()[0] == 2
        assert c.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert c.execute("PRAGMA secure_delete").fetchone()[0] == 1
    if os.name == "posix":
        # Names of people inside: readable by the owner only (POSIX mode bits).
        assert stat.S_IMODE(path.stat().st_mode) == 0o600
        assert stat.S_IMODE(path.parent.stat().st_mode) == 0o700
    head = path.read_bytes()[:100]
    # SQLite file format (sqlite.org/fileformat.html, section 1.3): the header string at 0,
    # user_version big-endian at offset 60, application_id at offset 68.
    assert head[:16] == b"SQLite format 3\x00"
    assert int.from_bytes(head[60:64], "big") == mig.LATEST_VERSION
    assert head[68:72] == b"FfLb"


def test_missing_logbook_without_create_is_an_error_and_not_created(tmp_path):
    path = tmp_path / "none.sqlite"
    with pytest.raises(LogbookError, match="no logbook here yet") as e:
        Logbook(path, create=False)
    assert e.value.file == str(path)
    assert not path.exists()


def test_a_folder_is_not_a_logbook(tmp_path):
    with pytest.raises(LogbookError, match="folder"):
        Logbook(tmp_path)


# -- sessions ------------------------------------------------------------------------------


def test_start_session_stores_circuit_text_and_its_sha256(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2", technician="A. Rivera",
                           location="Plant room 2", purpose="repair")
    assert s.id == 1 and s.is_open and s.reading_count == 0
    assert s.circuit_text == (BOOSTER / "circuit.toml").read_text(encoding="utf-8")
    # The hash is that of the file as GNU coreutils' sha256sum computes it.
    if shutil.which("sha256sum"):
        out = subprocess.run(["sha256sum", str(BOOSTER / "circuit.toml")], capture_output=True,
                             text=True, check=True).stdout.split()[0]
        assert s.circuit_sha256 == out
    else:  # FIPS 180-4 SHA-256 as Python's hashlib implements it
        assert s.circuit_sha256 == hashlib.sha256(
            (BOOSTER / "circuit.toml").read_bytes()).hexdigest()
    assert s.circuit_title == "Booster pump panel BP-2: 24 V DC control circuit"
    assert s.circuit().part("F1").kind == "fuse"
    assert s.caution_acknowledged_at is None


def test_start_session_refuses_bad_fields_and_bad_circuits(book, tmp_path):
    with pytest.raises(InputError) as e:
        book.start_session(BOOSTER / "circuit.toml", unit="  ")
    assert e.value.key == "unit"
    with pytest.raises(InputError) as e:
        book.start_session(BOOSTER / "circuit.toml", unit="BP-2", purpose="fun")
    assert e.value.key == "purpose"
    with pytest.raises(InputError) as e:
        book.start_session(BOOSTER / "circuit.toml", unit="BP-2", technician="A\nB")
    assert e.value.key == "technician"
    with pytest.raises(CircuitError) as e:
        book.start_session(tmp_path / "nope.toml", unit="BP-2")
    assert e.value.file == str(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text(VALVE.replace('value = "22"', 'value = "22 V"'), encoding="utf-8")
    with pytest.raises(CircuitError) as e:
        book.start_session(bad, unit="BP-2")
    assert e.value.part == "R1"
    assert book.list_sessions() == []  # nothing was created


def test_caution_acknowledgement_recorded_once(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    before = datetime.now(timezone.utc) - timedelta(seconds=1)
    at = book.acknowledge_caution(s.id)
    assert before <= datetime.fromisoformat(at) <= datetime.now(timezone.utc)
    assert book.acknowledge_caution(s.id) == at  # the first acknowledgement stands
    assert book.get_session(s.id).caution_acknowledged_at == at
    s2 = book.start_session(BOOSTER / "circuit.toml", unit="BP-2", caution_acknowledged=True)
    assert s2.caution_acknowledged_at is not None


def test_caution_text_names_the_safety_points():
    # The points the trade's safety rules require a caution to make (IEC 61010-1 for the
    # measurement categories; lock-out and verify-dead as common practice (no source)).
    text = SAFETY_CAUTION.lower()
    for words in ("live work", "cat ii, iii or iv", "iec 61010-1", "lock out",
                  "verify dead", "discharge", "decision aid", "local codes", "licensed practice"):
        assert words in " ".join(text.split()), words


# -- readings ------------------------------------------------------------------------------


def test_add_reading_keeps_the_display_as_entered_and_resolves_ground(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    lr = book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.91 V", label="TP1")
    assert lr.seq == 1
    r = lr.reading
    assert r.raw == "23.91 V" and r.value == pytest.approx(23.91) and r.minus == "0V"
    lr2 = book.add_reading(s.id, {"quantity": "resistance", "part": "K1", "setup": "lifted",
                                  "value": "0k1806"})
    # IEC 60062 RKM code: 0k1806 is 0.1806 kΩ = 180.6 Ω.
    assert lr2.seq == 2 and lr2.reading.raw == "0k1806"
    assert lr2.reading.value == pytest.approx(180.6)
    lr3 = book.add_reading(s.id, quantity="resistance", part="F1", value="OL")
    assert lr3.reading.value is None and lr3.reading.overrange == 1
    back = book.get_session(s.id).readings
    assert [x.reading for x in back] == [lr.reading, lr2.reading, lr3.reading]
    assert [x.origin for x in back] == ["entered"] * 3


def test_add_reading_from_a_reading_object(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    rd = parse_readings("quantity,part,value\ncurrent,H1,2.45 mA\n")[0]
    lr = book.add_reading(s.id, rd, origin="ui")
    assert lr.reading.part == "H1" and lr.reading.value == pytest.approx(2.45e-3)
    assert lr.origin == "ui"


@pytest.mark.parametrize("fields, key", [
    (dict(quantity="voltage", plus="NOWHERE", value="1"), "plus"),
    (dict(quantity="voltage", plus="+24V", value="twelve"), "value"),
    (dict(quantity="resistance", part="F1", value="-3"), "value"),  # negative ohms
    (dict(quantity="current", part="R99", value="1 mA"), "part"),
    (dict(quantity="voltage", mode="ac", plus="+24V", value="1"), "mode"),  # no AC source
    (dict(quantity="voltage", plus="+24V"), "value"),
    (dict(quantity="voltage", plus="+24V", value="1", meter="bench"), "meter"),
    (dict(quantity="volts", plus="+24V", value="1"), "quantity"),
])
def test_bad_reading_names_the_field_and_stores_nothing(book, fields, key):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    with pytest.raises(ReadingsError) as e:
        book.add_reading(s.id, **fields)
    assert e.value.key == key
    assert "nothing was stored" in str(e.value)
    assert isinstance(e.value, ValueError)
    assert book.get_session(s.id).readings == ()


def test_unknown_reading_field_and_missing_session(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    with pytest.raises(ReadingsError) as e:
        book.add_reading(s.id, quantity="voltage", plus="+24V", value="1", colour="red")
    assert e.value.key == "colour"
    with pytest.raises(LogbookError) as e:
        book.add_reading(99, quantity="voltage", plus="+24V", value="1")
    assert e.value.key == "session" and "no session 99" in str(e.value)
    with pytest.raises(LogbookError):
        book.add_reading("1", quantity="voltage", plus="+24V", value="1")


def test_meter_profiles_are_stored_with_the_session(book, valve, tmp_path):
    meters = tmp_path / "meters.toml"
    meters.write_text(BENCH_METERS, encoding="utf-8")
    s = book.start_session(valve, unit="GH-2", meters=meters)
    lr = book.add_reading(s.id, quantity="voltage", plus="V24", value="24.01", meter="bench")
    assert lr.reading.meter == "bench"
    meters.unlink()  # the stored text is what counts from now on
    assert book.get_session(s.id).meters()["bench"].counts == 60000
    bad = tmp_path / "bad_meters.toml"
    bad.write_text("[meter.x]\ncounts = -5\n", encoding="utf-8")
    with pytest.raises(MeterError):
        book.start_session(valve, unit="GH-2", meters=bad)


def test_import_is_all_or_nothing_and_records_where_each_row_came_from(book, tmp_path):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    got = book.import_readings(s.id, BOOSTER / "readings.csv")
    expected = load_readings(BOOSTER / "readings.csv")
    assert [g.reading.raw for g in got] == [e.raw for e in expected]
    assert [g.seq for g in got] == list(range(1, len(expected) + 1))
    assert got[0].origin == "import readings.csv line 2"
    bad = tmp_path / "bad.csv"
    bad.write_text("quantity,plus,value\nvoltage,+24V,23.9\nvoltage,NOWHERE,1\n",
                   encoding="utf-8")
    with pytest.raises(ReadingsError) as e:
        book.import_readings(s.id, bad)
    assert e.value.line == 3 and e.value.file == str(bad)
    assert len(book.get_session(s.id).readings) == len(expected)  # the good row did not land


def test_strike_out_keeps_the_reading_and_readings_are_never_changed(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.add_reading(s.id, quantity="voltage", plus="+24V", value="2.391")
    book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.91")
    lr = book.strike_reading(s.id, 1, "decimal point misread")
    assert lr.struck and lr.struck_reason == "decimal point misread"
    got = book.get_session(s.id)
    assert len(got.readings) == 2 and got.reading_count == 1
    assert [r.raw for r in got.live_readings()] == ["23.91"]
    with pytest.raises(LogbookError, match="already"):
        book.strike_reading(s.id, 1, "again")
    with pytest.raises(InputError) as e:
        book.strike_reading(s.id, 2, " ")
    assert e.value.key == "reason"
    with pytest.raises(LogbookError):
        book.strike_reading(s.id, 7, "no such")
    # Even SQL from outside faultfind cannot change a stored reading (trigger).
    with pytest.raises(sqlite3.IntegrityError, match="never changed"):
        book._conn.execute("UPDATE readings SET value = 1.0 WHERE seq = 2")


def test_diagnosis_is_stored_as_the_diagnose_json_document(book):
    # The field case's answer key (field_cases/booster_pump_panel/fault.toml, an invented
    # scenario): the control fuse F1 is open.
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.import_readings(s.id, BOOSTER / "readings.csv")
    d = book.store_diagnosis(s.id, top=3)
    assert d.verdict == "fault" and d.reading_count == 8 and d.last_seq == 8
    top = d.document["hypotheses"][0]
    assert top["faults"] == [{"ref": "F1", "mode": "open", "value": None}]
    assert sum(h["probability"] for h in d.document["hypotheses"]) == pytest.approx(1.0)
    assert len(d.document["hypotheses"]) <= 3
    got = book.get_session(s.id)
    assert got.latest_diagnosis.document == d.document and got.latest_verdict == "fault"
    with pytest.raises(InputError) as e:
        book.store_diagnosis(s.id, top=0)
    assert e.value.key == "top"


def test_struck_readings_do_not_count_in_a_diagnosis(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.import_readings(s.id, BOOSTER / "readings.csv")
    book.strike_reading(s.id, 2, "probe slipped")
    d = book.store_diagnosis(s.id)
    assert d.reading_count == 7 and d.document["hypotheses"][0]["readings"] == 7


def test_close_session_validates_the_outcome_and_makes_it_read_only(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.add_reading(s.id, quantity="resistance", part="F1", value="OL")
    with pytest.raises(InputError) as e:
        book.close_session(s.id, ["F9:open"])
    assert e.value.part == "F9"
    # formats.md kinds table: a fuse's fault modes are open and drift only.
    with pytest.raises(InputError, match="not a fault mode"):
        book.close_session(s.id, [("F1", "short")])
    with pytest.raises(InputError, match="twice"):
        book.close_session(s.id, ["F1:open", "F1"])
    closed = book.close_session(s.id, ["F1:open", ("S1", None)], confirmed_by="OL out of holder",
                                action="replaced F1, 1 A T", notes="spare from van stock")
    assert not closed.is_open
    assert closed.outcome.faults == (("F1", "open"), ("S1", None))
    assert closed.outcome.action == "replaced F1, 1 A T"
    for write in (lambda: book.add_reading(s.id, quantity="resistance", part="F1", value="1"),
                  lambda: book.store_diagnosis(s.id),
                  lambda: book.strike_reading(s.id, 1, "x"),
                  lambda: book.close_session(s.id, []),
                  lambda: book.acknowledge_caution(s.id)):
        with pytest.raises(LogbookError, match="closed"):
            write()


def test_no_fault_found_outcome(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2", purpose="commissioning")
    closed = book.close_session(s.id, [], notes="all readings in band")
    assert closed.outcome.faults == () and closed.outcome.to_json()["fault_found"] is False


def test_list_filters_and_history(book, valve):
    t0 = datetime(2026, 3, 2, 9, 0, tzinfo=timezone.utc)
    a = book.start_session(BOOSTER / "circuit.toml", unit="BP-2", technician="A. Rivera",
                           started_at=t0)
    b = book.start_session(valve, unit="GH-2", technician="J. Okafor",
                           started_at=t0 + timedelta(days=3))
    c = book.start_session(BOOSTER / "circuit.toml", unit="bp-2", technician="J. Okafor",
                           started_at=t0 + timedelta(days=10))
    assert [s.id for s in book.list_sessions()] == [a.id, b.id, c.id]
    assert [s.id for s in book.list_sessions(unit="BP-2")] == [a.id, c.id]
    assert [s.id for s in book.list_sessions(technician="j. okafor")] == [b.id, c.id]
    assert [s.id for s in book.list_sessions(since="2026-03-04")] == [b.id, c.id]
    assert [s.id for s in book.list_sessions(until=t0 + timedelta(days=3))] == [a.id, b.id]
    assert [s.id for s in book.list_sessions(since=t0 + timedelta(days=1),
                                             until=t0 + timedelta(days=5))] == [b.id]
    book.close_session(a.id, ["F1:open"])
    assert [s.id for s in book.list_sessions(open_only=True)] == [b.id, c.id]
    hist = book.history("BP-2")
    assert [s.id for s in hist] == [a.id, c.id]
    assert hist[0].outcome.faults == (("F1", "open"),) and hist[1].outcome is None
    assert book.latest_session_id() == c.id
    with pytest.raises(InputError) as e:
        book.list_sessions(since="last tuesday")
    assert e.value.key == "since"


def test_times_are_stored_in_utc_and_sort(book):
    # ISO 8601 with a UTC offset; a date alone is local midnight (or end of day for until).
    assert parse_time("2026-03-04T10:00:00+02:00") == "2026-03-04T08:00:00.000+00:00"
    start = datetime.fromisoformat(parse_time("2026-03-04"))
    end = datetime.fromisoformat(parse_time("2026-03-04", end_of_day=True))
    assert timedelta(hours=23, minutes=59) < end - start < timedelta(hours=24)
    assert format_time("2026-03-04T08:00:00.000+00:00") == \
        datetime(2026, 3, 4, 8, tzinfo=timezone.utc).astimezone().strftime("%Y-%m-%d %H:%M")


def test_export_round_trip_gives_the_same_readings(book, tmp_path):
    # RFC 4180 CSV written by pandas, read back by the readings file loader.
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.import_readings(s.id, BOOSTER / "readings.csv")
    book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.9", label='say "hi", ok')
    book.strike_reading(s.id, 3, "wrong point")
    out = tmp_path / "out.csv"
    n = book.export_readings(s.id, out)
    live = book.get_session(s.id).live_readings()
    assert n == len(live) == 8
    back = load_readings(out, book.get_session(s.id).circuit())
    assert [r.__class__(**{**r.__dict__, "line": None}) for r in back] == live
    n_all = book.export_readings(s.id, tmp_path / "all.csv", include_struck=True)
    assert n_all == 9


def test_delete_session_leaves_no_trace_in_the_files(tmp_path):
    path = tmp_path / "p.sqlite"
    with Logbook(path) as b:
        keep = b.start_session(BOOSTER / "circuit.toml", unit="KEEP-1", technician="Kept Name")
        gone = b.start_session(BOOSTER / "circuit.toml", unit="SECRET-UNIT-77",
                               technician="Zyxwv Qponm", location="Hidden Street 9")
        b.import_readings(gone.id, BOOSTER / "readings.csv")
        b.add_reading(gone.id, quantity="voltage", plus="+24V", value="23.9",
                      label="label-ZQZQZQ")
        b.store_diagnosis(gone.id)
        b.close_session(gone.id, ["F1:open"], notes="notes-PRIVATE-ABC")
        with _raw(path) as other:  # push everything into the main file first
            other.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
        words = (b"Zyxwv", b"SECRET-UNIT", b"ZQZQZQ", b"PRIVATE-ABC", b"Hidden Street")

        def found():
            data = b"".join(p.read_bytes() for p in tmp_path.glob("p.sqlite*"))
            return [w for w in words if w in data]

        assert found() == list(words)
        summary = b.delete_session(gone.id)
        assert summary.unit == "SECRET-UNIT-77"
        assert found() == []
        assert [s.id for s in b.list_sessions()] == [keep.id]
        with pytest.raises(LogbookError):
            b.get_session(gone.id)
        left = b._conn.execute("SELECT count(*) FROM readings").fetchone()[0]
        assert left == 0  # foreign keys cascade the readings away too
    assert b"Kept Name" in path.read_bytes()


def test_check_reports_no_problems_on_a_healthy_logbook(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    book.import_readings(s.id, BOOSTER / "readings.csv")
    assert book.check() == []


def test_a_closed_logbook_refuses_use(tmp_path):
    b = Logbook(tmp_path / "x.sqlite")
    b.close()
    b.close()  # idempotent
    with pytest.raises(LogbookError, match="closed"):
        b.list_sessions()


def test_threads_share_one_logbook(book):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    errors = []

    def work(k):
        try:
            for i in range(5):
                book.add_reading(s.id, quantity="voltage", plus="+24V", value=f"23.{k}{i}")
        except Exception as exc:  # noqa: BLE001 - collected for the assertion
            errors.append(exc)

    threads = [threading.Thread(target=work, args=(k,)) for k in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    seqs = [r.seq for r in book.get_session(s.id).readings]
    assert sorted(seqs) == list(range(1, 21))


def test_ac_case_end_to_end(book):
    # field_cases/kiln_contactor_snubber (invented scenario, answer key in its fault.toml):
    # the snubber capacitor C1 drifted from 100 nF to 22 nF.
    s = book.start_session(KILN / "circuit.toml", unit="KILN-1")
    book.import_readings(s.id, KILN / "readings.csv")
    got = book.get_session(s.id)
    assert any(r.reading.mode == "ac" for r in got.readings)
    d = book.store_diagnosis(s.id)
    assert d.verdict == "fault"
    best = d.document["hypotheses"][0]["faults"]
    assert [(f["ref"], f["mode"]) for f in best] == [("C1", "drift")]
    assert best[0]["value"] == pytest.approx(22e-9, rel=0.25)


def test_power_steps_are_logged_and_reported(tmp_path):
    """Isolating and re-energizing are steps of the session: logged with their
    time and shown in the work-order report (issue: every step is logged)."""
    from faultfind import report as rep
    from faultfind.io.logbook import Logbook
    from faultfind.io.circuit_file import load_circuit
    from faultfind.errors import LogbookError
    case = Path(__file__).resolve().parents[1] / "field_cases" / "booster_pump_panel" / "circuit.toml"
    with Logbook(tmp_path / "lb.sqlite") as book:
        s = book.start_session(load_circuit(case), unit="BP-2", circuit_text=case.read_text())
        book.add_event(s.id, "isolated", "locked out at Q1")
        book.add_event(s.id, "energized")
        with pytest.raises(LogbookError, match="event kind"):
            book.add_event(s.id, "exploded")
        kinds = [e["kind"] for e in book.events(s.id)]
        assert kinds == ["isolated", "energized"]
        md = rep.markdown_report(book.get_session(s.id))
        assert "Circuit isolated" in md and "Circuit energized" in md
