"""Tests of faultfind.io.circuit_versions: a session's circuit edited while it is open,
and the circuit version stored with each diagnosis (logbook migration 0006)."""

import hashlib
import sqlite3
from pathlib import Path

import pytest

from faultfind.errors import CircuitError, LogbookError
from faultfind.io import migrations as mig
from faultfind.io.circuit_versions import (circuit_sha256, circuit_versions, current_version,
                                           diagnosis_circuit, revise_circuit, version_label)
from faultfind.logbook import Logbook

ROOT = Path(__file__).resolve().parent.parent
BOOSTER = ROOT / "field_cases" / "booster_pump_panel"
TEXT = (BOOSTER / "circuit.toml").read_text(encoding="utf-8")
# The same panel with a 12 V supply drawn instead of 24 V (an invented correction).
TEXT_12V = TEXT.replace('value = "24 V"', 'value = "12 V"', 1)


@pytest.fixture
def book(tmp_path):
    with Logbook(tmp_path / "book.sqlite") as b:
        yield b


def _session(book, readings=(("+24V", "23.91 V"), ("24V-F", "0 V"))):
    s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
    for plus, value in readings:
        book.add_reading(s.id, quantity="voltage", plus=plus, value=value)
    return s


def test_hash_is_sha256_of_the_utf8_text():
    # the hash is SHA-256 as hashlib computes it (FIPS 180-4), of the text's UTF-8 bytes
    assert circuit_sha256("ab·c") == hashlib.sha256("ab·c".encode("utf-8")).hexdigest()
    assert circuit_sha256(TEXT) == hashlib.sha256(TEXT.encode("utf-8")).hexdigest()
    with pytest.raises(TypeError):
        circuit_sha256(b"bytes")


def test_a_new_session_is_version_1_and_its_diagnosis_records_it(book):
    s = _session(book)
    versions = circuit_versions(book, s.id)
    assert [v.version for v in versions] == [1]
    assert versions[0].text == TEXT and versions[0].sha256 == s.circuit_sha256
    assert versions[0].reason == "session started"
    stored = book.store_diagnosis(s.id)
    assert (stored.circuit_version, stored.circuit_sha256) == (1, circuit_sha256(TEXT))
    again = book.get_session(s.id).latest_diagnosis
    assert (again.circuit_version, again.circuit_sha256) == (1, circuit_sha256(TEXT))
    assert again.to_json()["circuit_version"] == 1
    assert diagnosis_circuit(book, s.id, again) == (versions[0], False)


def test_revising_keeps_the_old_version_and_its_diagnosis(book):
    s = _session(book)
    first = book.store_diagnosis(s.id)
    v2 = revise_circuit(book, s.id, TEXT_12V)
    assert v2.version == 2 and v2.sha256 == circuit_sha256(TEXT_12V)
    s2 = book.get_session(s.id)
    assert s2.circuit_text == TEXT_12V and s2.circuit_sha256 == v2.sha256
    assert s2.circuit().part("PS1").value == 12.0
    assert [r.reading.raw for r in s2.readings] == ["23.91 V", "0 V"]   # readings untouched
    assert any("version 2" in e["text"] for e in s2.events)
    # the old diagnosis is still the one made on version 1, and says the circuit changed
    old = s2.diagnoses[0]
    assert old.document == first.document and old.circuit_version == 1
    used, changed = diagnosis_circuit(book, s.id, old)
    assert used.version == 1 and used.text == TEXT and changed
    new = book.store_diagnosis(s.id)
    assert (new.circuit_version, new.circuit_sha256) == (2, v2.sha256)
    assert diagnosis_circuit(book, s.id, new) == (current_version(book, s.id), False)
    assert version_label(2, v2.sha256) == f"v2 · {v2.sha256[:8]}"


def test_the_same_text_again_is_no_new_version(book):
    s = _session(book)
    assert revise_circuit(book, s.id, TEXT).version == 1
    assert revise_circuit(book, s.id, TEXT_12V).version == 2
    assert revise_circuit(book, s.id, TEXT_12V).version == 2
    assert revise_circuit(book, s.id, TEXT).version == 3   # back to the first text: a new step
    assert [v.sha256 for v in circuit_versions(book, s.id)] == [
        circuit_sha256(TEXT), circuit_sha256(TEXT_12V), circuit_sha256(TEXT)]


def test_an_edit_that_drops_a_node_a_reading_uses_is_refused(book):
    s = _session(book)
    bad = TEXT.replace('"24V-F"', '"F-OUT"')
    with pytest.raises(CircuitError, match=r"reading #2 .*24V-F"):
        revise_circuit(book, s.id, bad)
    assert [v.version for v in circuit_versions(book, s.id)] == [1]   # nothing changed
    assert book.get_session(s.id).circuit_text == TEXT
    book.strike_reading(s.id, 2, "wrong test point")   # struck-out readings need not fit
    assert revise_circuit(book, s.id, bad).version == 2


def test_an_invalid_circuit_or_a_closed_session_is_refused(book):
    s = _session(book)
    with pytest.raises(CircuitError, match="duplicate ref 'F1'"):
        revise_circuit(book, s.id, TEXT.replace('ref = "H1"', 'ref = "F1"'))
    book.close_session(s.id, [("F1", "open")])
    with pytest.raises(LogbookError, match="closed"):
        revise_circuit(book, s.id, TEXT_12V)
    with pytest.raises(LogbookError, match="no session 99"):
        circuit_versions(book, 99)


def test_a_stored_version_is_never_changed(book):
    s = _session(book)
    with pytest.raises(sqlite3.IntegrityError, match="never changed"):
        with book._write() as c:
            c.execute("UPDATE circuit_versions SET text = 'x' WHERE session_id = ?", (s.id,))


def test_a_diagnosis_records_the_circuit_it_ran_on_not_a_later_one(book):
    # the circuit is revised while a diagnosis of the old one runs (from its progress call)
    s = _session(book)
    revised = []

    def progress(stage, done=None, total=None):
        if not revised:
            revised.append(revise_circuit(book, s.id, TEXT_12V))

    stored = book.store_diagnosis(s.id, progress=progress)
    assert revised and revised[0].version == 2
    assert (stored.circuit_version, stored.circuit_sha256) == (1, circuit_sha256(TEXT))
    assert diagnosis_circuit(book, s.id, stored)[1]   # changed since


def test_migration_0006_fills_version_1_and_the_old_diagnoses(tmp_path):
    path = tmp_path / "old.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    mig.migrate(conn, target=5)
    conn.execute(
        "INSERT INTO sessions (unit, purpose, started_at, circuit_name, circuit_title, "
        "circuit_text, circuit_sha256) VALUES ('BP-2', 'repair', "
        "'2025-01-02T03:04:05.000+00:00', 'circuit.toml', 'Booster', ?, ?)",
        (TEXT, circuit_sha256(TEXT)))
    conn.execute("INSERT INTO diagnoses (session_id, created_at, reading_count, last_seq, "
                 "verdict, version, document) VALUES (1, '2025-01-02T03:05:00.000+00:00', 0, 0, "
                 "'no-fault', '0.1', '{\"verdict\": \"no-fault\"}')")
    conn.close()
    with Logbook(path) as book:
        assert "0006_circuit_versions" in book.upgraded
        (v1,) = circuit_versions(book, 1)
        assert (v1.version, v1.text, v1.sha256) == (1, TEXT, circuit_sha256(TEXT))
        assert v1.created_at == "2025-01-02T03:04:05.000+00:00"
        d = book.get_session(1).diagnoses[0]
        assert (d.circuit_version, d.circuit_sha256) == (1, circuit_sha256(TEXT))


def test_show_and_report_say_an_old_diagnosis_was_made_on_another_circuit(book, capsys):
    from faultfind.cli.main import main
    from faultfind.report import markdown_report

    s = _session(book)
    book.store_diagnosis(s.id)
    assert main(["log", "show", str(s.id), "--logbook", str(book.path)]) == 0
    out = capsys.readouterr().out
    assert f"made on circuit version 1 ({circuit_sha256(TEXT)[:8]})" in out
    assert "changed since" not in out
    assert "changed since" not in markdown_report(book.get_session(s.id))
    v2 = revise_circuit(book, s.id, TEXT_12V)
    assert main(["log", "show", str(s.id), "--logbook", str(book.path)]) == 0
    out = capsys.readouterr().out
    assert "made on circuit version 1" in out and "the circuit changed since" in out
    report = markdown_report(book.get_session(s.id))
    assert (f"made on circuit version 1 ({circuit_sha256(TEXT)[:8]}); the session's circuit "
            f"changed since (now {v2.sha256[:8]})") in report


def test_saved_under_a_new_file_name_the_session_names_that_file(book, tmp_path):
    s = _session(book)
    before = book.get_session(s.id).circuit_name
    target = str(tmp_path / "booster-12V.toml")
    v2 = revise_circuit(book, s.id, TEXT_12V, name=target)
    s2 = book.get_session(s.id)
    assert s2.circuit_name == target != before
    assert v2.reason.endswith(f"saved as {target}")
    # the same text saved under yet another name: no new version, but the name follows
    other = str(tmp_path / "copy.toml")
    assert revise_circuit(book, s.id, TEXT_12V, name=other).version == 2
    s3 = book.get_session(s.id)
    assert s3.circuit_name == other
    assert any(e["text"] == f"circuit saved as {other} (unchanged)" for e in s3.events)
    # without a name the name stays
    revise_circuit(book, s.id, TEXT)
    assert book.get_session(s.id).circuit_name == other
    for bad in ("", "  ", "a\nb", 3):
        with pytest.raises(LogbookError, match="name must be"):
            revise_circuit(book, s.id, TEXT_12V, name=bad)
