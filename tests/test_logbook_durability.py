"""The logbook never loses a reading: killed writers, concurrent writers, migrations,
newer, corrupt, foreign and locked files.

Facts relied on (sqlite.org documentation, from memory): a transaction committed in
WAL mode survives the process being killed; ``BEGIN IMMEDIATE`` takes the write
lock at once and waits for it up to the busy timeout; ``PRAGMA user_version`` and
``application_id`` live in the file header at offsets 60 and 68 (big-endian).
"""

import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from faultfind.cli.main import main
from faultfind.errors import LogbookError
from faultfind.io import migrations as mig
from faultfind.io.circuit_versions import circuit_versions
from faultfind.io.logbook import Logbook
from faultfind.io.session_tags import tags_of

ROOT = Path(__file__).resolve().parent.parent
BOOSTER = ROOT / "field_cases" / "booster_pump_panel"

WRITER = textwrap.dedent("""\
    import sys
    from faultfind.io.logbook import Logbook
    path, sid, tag, n = sys.argv[1], int(sys.argv[2]), sys.argv[3], int(sys.argv[4])
    go = sys.argv[5] if len(sys.argv) > 5 else None
    if go:
        import os, time
        while not os.path.exists(go):
            time.sleep(0.005)
    with Logbook(path) as book:
        for i in range(1, n + 1):
            raw = f"{20 + i / 1000:.3f} V"
            lr = book.add_reading(sid, quantity="voltage", plus="+24V", value=raw,
                                  label=f"{tag}{i}")
            print(f"ack {lr.seq} {tag}{i} {raw}", flush=True)
    """)

IMPORTER = textwrap.dedent("""\
    import sys
    from faultfind.io.logbook import Logbook
    path, sid, csv_path = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    with Logbook(path) as book:
        k = 0
        while True:
            k += 1
            got = book.import_readings(sid, csv_path)
            print(f"ack {k} {len(got)}", flush=True)
    """)


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def _session(path, unit="BP-2"):
    with Logbook(path) as book:
        return book.start_session(BOOSTER / "circuit.toml", unit=unit).id


def _stored(path, sid):
    with Logbook(path) as book:
        return book.get_session(sid).readings


def _files(path):
    return {p.name: p.read_bytes() for p in Path(path).parent.glob(Path(path).name + "*")}


# -- killed writers ------------------------------------------------------------------------


def test_sigkill_mid_session_loses_no_acknowledged_reading(tmp_path):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    script = tmp_path / "writer.py"
    script.write_text(WRITER, encoding="utf-8")
    proc = subprocess.Popen([sys.executable, str(script), str(path), str(sid), "w", "100000"],
                            stdout=subprocess.PIPE, text=True, env=_env())
    acks = []
    deadline = time.monotonic() + 120
    while len(acks) < 40 and time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line:
            break
        acks.append(line.split())
    os.kill(proc.pid, signal.SIGKILL)
    acks += [line.split() for line in proc.stdout.read().splitlines() if line.startswith("ack")]
    proc.wait()
    assert proc.returncode == -signal.SIGKILL
    assert len(acks) >= 40
    stored = {r.seq: r for r in _stored(path, sid)}
    for _, seq, label, number, unit in acks:
        r = stored[int(seq)]
        assert r.reading.label == label and r.reading.raw == f"{number} {unit}"
    # The file is sound and the session goes on where it stopped.
    with Logbook(path) as book:
        assert book.check() == []
        nxt = book.add_reading(sid, quantity="voltage", plus="+24V", value="24")
        assert nxt.seq == max(stored) + 1


def test_sigkill_during_an_import_keeps_it_whole_or_not_at_all(tmp_path):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    rows = ["voltage,+24V,23.9,r%d" % i for i in range(300)]
    csv_path = tmp_path / "big.csv"
    csv_path.write_text("quantity,plus,value,label\n" + "\n".join(rows) + "\n", encoding="utf-8")
    script = tmp_path / "importer.py"
    script.write_text(IMPORTER, encoding="utf-8")
    proc = subprocess.Popen([sys.executable, str(script), str(path), str(sid), str(csv_path)],
                            stdout=subprocess.PIPE, text=True, env=_env())
    acks = 0
    while acks < 3:
        line = proc.stdout.readline()
        assert line, "the importer stopped early"
        acks += 1
    time.sleep(0.05)  # likely in the middle of the next import
    os.kill(proc.pid, signal.SIGKILL)
    acks += sum(1 for line in proc.stdout.read().splitlines() if line.startswith("ack"))
    proc.wait()
    n = len(_stored(path, sid))
    assert n % 300 == 0 and n >= 300 * acks


# -- concurrent writers --------------------------------------------------------------------


def test_two_processes_adding_at_once_both_land(tmp_path):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    script = tmp_path / "writer.py"
    script.write_text(WRITER, encoding="utf-8")
    go = tmp_path / "go"
    procs = [subprocess.Popen([sys.executable, str(script), str(path), str(sid), tag, "40",
                               str(go)], stdout=subprocess.PIPE, text=True, env=_env())
             for tag in ("a", "b")]
    time.sleep(0.5)
    go.write_text("go")
    outs = [p.communicate(timeout=180)[0] for p in procs]
    assert [p.returncode for p in procs] == [0, 0]
    acked = {line.split()[2] for out in outs for line in out.splitlines()}
    stored = _stored(path, sid)
    assert len(stored) == 80 == len(acked)
    assert {r.reading.label for r in stored} == acked
    assert sorted(r.seq for r in stored) == list(range(1, 81))


def test_cli_adds_from_several_processes_at_once(tmp_path):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    procs = [subprocess.Popen([sys.executable, "-m", "faultfind", "log", "add", str(sid), "V",
                               "+24V", f"23.{k}", "--label", f"p{k}", "--logbook", str(path)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                              env=_env()) for k in range(4)]
    results = [p.communicate(timeout=180) for p in procs]
    assert [p.returncode for p in procs] == [0] * 4, results
    assert sorted(r.reading.label for r in _stored(path, sid)) == ["p0", "p1", "p2", "p3"]


def test_two_processes_creating_a_new_logbook_at_once(tmp_path):
    path = tmp_path / "new.sqlite"
    code = ("import sys; from faultfind.io.logbook import Logbook; "
            "b = Logbook(sys.argv[1]); print(len(b.upgraded)); b.close()")
    procs = [subprocess.Popen([sys.executable, "-c", code, str(path)], stdout=subprocess.PIPE,
                              text=True, env=_env()) for _ in range(3)]
    outs = [p.communicate(timeout=120)[0] for p in procs]
    assert [p.returncode for p in procs] == [0] * 3
    with sqlite3.connect(path) as c:
        names = [r[0] for r in c.execute("SELECT name FROM migrations ORDER BY version")]
    assert names == [m.name for m in mig.MIGRATIONS]  # each migration applied exactly once
    assert sum(int(o) for o in outs) == len(mig.MIGRATIONS)


# -- migrations ----------------------------------------------------------------------------


def _fill(conn, version):
    """Data as a faultfind at schema ``version`` would have written it."""
    circuit = (BOOSTER / "circuit.toml").read_text(encoding="utf-8")
    if version >= 1:
        conn.execute(
            "INSERT INTO sessions (unit, technician, purpose, started_at, circuit_name, "
            "circuit_title, circuit_text, circuit_sha256) VALUES (?,?,?,?,?,?,?,?)",
            ("BP-2", "A. Rivera", "repair", "2025-01-02T03:04:05.000+00:00", "circuit.toml",
             "Booster", circuit, "0" * 64))
        conn.execute(
            "INSERT INTO readings (session_id, seq, taken_at, quantity, mode, plus, minus, "
            "label, raw, value, overrange, origin) VALUES "
            "(1, 1, '2025-01-02T03:05:00.000+00:00', 'voltage', 'dc', '+24V', '0V', 'TP1', "
            "'23.91 V', 23.91, 0, 'entered')")
        conn.execute(
            "INSERT INTO readings (session_id, seq, taken_at, quantity, part, setup, raw, "
            "overrange, origin) VALUES (1, 2, '2025-01-02T03:06:00.000+00:00', 'resistance', "
            "'F1', 'in-circuit', 'OL', 1, 'entered')")
        conn.execute("INSERT INTO diagnoses (session_id, created_at, reading_count, last_seq, "
                     "verdict, version, document) VALUES (1, '2025-01-02T03:07:00.000+00:00', "
                     "2, 2, 'fault', '0.1', '{\"verdict\": \"fault\"}')")
        conn.execute("INSERT INTO outcomes (session_id, recorded_at, action) VALUES "
                     "(1, '2025-01-02T04:00:00.000+00:00', 'replaced F1')")
        conn.execute("INSERT INTO outcome_faults VALUES (1, 'F1', 'open')")
        conn.execute("UPDATE sessions SET ended_at = '2025-01-02T04:00:00.000+00:00'")
    if version >= 5:
        conn.execute("INSERT INTO session_tags (session_id, tag) VALUES (1, 'north-pumps')")


def _schema(path):
    with sqlite3.connect(path) as c:
        return sorted((t, n, " ".join(s.split())) for t, n, s in c.execute(
            "SELECT type, name, sql FROM sqlite_master WHERE sql IS NOT NULL"))


def test_migrations_are_numbered_in_order_with_unique_names():
    assert [m.version for m in mig.MIGRATIONS] == list(range(1, len(mig.MIGRATIONS) + 1))
    assert len({m.name for m in mig.MIGRATIONS}) == len(mig.MIGRATIONS)
    assert all(m.name.startswith(f"{m.version:04d}_") for m in mig.MIGRATIONS)
    assert mig.LATEST_VERSION == mig.MIGRATIONS[-1].version


@pytest.mark.parametrize("version", range(0, mig.LATEST_VERSION))
def test_migration_from_every_earlier_version(tmp_path, version):
    path = tmp_path / "old.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    mig.migrate(conn, target=version)
    conn.execute("BEGIN")
    _fill(conn, version)
    conn.execute("COMMIT")
    before = list(conn.iterdump())  # SQL text of every table and row
    conn.close()
    with Logbook(path) as book:
        assert book.upgraded == [m.name for m in mig.MIGRATIONS[version:]]
        assert book.schema_version == mig.LATEST_VERSION
        if version >= 1:
            s = book.get_session(1)
            assert [r.reading.raw for r in s.readings] == ["23.91 V", "OL"]
            assert s.readings[1].reading.overrange == 1 and not s.readings[0].struck
            assert s.outcome.faults == (("F1", "open"),) and s.outcome.action == "replaced F1"
            assert s.technician == "A. Rivera"
            assert tags_of(book, 1) == (["north-pumps"] if version >= 5 else [])
            assert s.diagnoses[0].verdict == "fault"
            if version < 6:  # 0006: diagnoses from before it ran on the session's one circuit
                assert (s.diagnoses[0].circuit_version, s.diagnoses[0].circuit_sha256) == \
                    (1, "0" * 64)
                (v1,) = circuit_versions(book, 1)
                assert (v1.version, v1.sha256, v1.text) == (1, "0" * 64, s.circuit_text)
            assert book.backup is not None
            with sqlite3.connect(book.backup) as old:  # the copy is the file as it was
                assert list(old.iterdump()) == before
                assert old.execute("PRAGMA user_version").fetchone()[0] == version
        else:
            assert book.backup is None
        assert book.check() == []
        names = [r[0] for r in book._conn.execute(
            "SELECT name FROM migrations ORDER BY version")]
        assert names == [m.name for m in mig.MIGRATIONS]
    fresh = tmp_path / "fresh.sqlite"
    Logbook(fresh).close()
    assert _schema(path) == _schema(fresh)  # upgraded == built new


def test_a_failing_migration_is_rolled_back_whole(tmp_path, monkeypatch):
    path = tmp_path / "book.sqlite"
    Logbook(path).close()
    bad = mig.Migration(mig.LATEST_VERSION + 1, f"{mig.LATEST_VERSION + 1:04d}_broken",
                        ("CREATE TABLE half_done (x)", "THIS IS NOT SQL"), "broken on purpose")
    monkeypatch.setattr(mig, "MIGRATIONS", mig.MIGRATIONS + (bad,))
    monkeypatch.setattr(mig, "LATEST_VERSION", bad.version)
    with pytest.raises(LogbookError, match="refused"):
        Logbook(path)
    monkeypatch.undo()
    with sqlite3.connect(path) as c:
        assert c.execute("PRAGMA user_version").fetchone()[0] == bad.version - 1
        assert c.execute("SELECT count(*) FROM sqlite_master WHERE name = 'half_done'"
                         ).fetchone()[0] == 0
        assert c.execute("SELECT count(*) FROM migrations").fetchone()[0] == bad.version - 1


def test_migrate_checks_its_arguments(tmp_path):
    conn = sqlite3.connect(tmp_path / "x.sqlite")  # default: not autocommit
    with pytest.raises(ValueError, match="autocommit"):
        mig.migrate(conn)
    conn = sqlite3.connect(tmp_path / "y.sqlite", isolation_level=None)
    with pytest.raises(ValueError, match="target"):
        mig.migrate(conn, target=mig.LATEST_VERSION + 1)
    with pytest.raises(TypeError):
        mig.migrate("not a connection")


# -- files faultfind must not touch --------------------------------------------------------


def _run_cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def _assert_refused_untouched(capsys, path, words):
    before = _files(path)
    for argv in (["log", "list"], ["log", "add", "1", "V", "+24V", "1"],
                 ["log", "start", str(BOOSTER / "circuit.toml"), "--unit", "X"],
                 ["log", "show", "1", "--json"]):
        code, out, err = _run_cli(capsys, *argv, "--logbook", str(path))
        assert code == 2, (argv, err)
        assert out == ""
        assert str(path) in err and "Traceback" not in err
        for w in words:
            assert w in err, (w, err)
    assert _files(path) == before


def test_newer_schema_is_refused_and_left_untouched(tmp_path, capsys):
    path = tmp_path / "book.sqlite"
    _session(path)
    with sqlite3.connect(path) as c:
        c.execute(f"PRAGMA user_version = {mig.LATEST_VERSION + 5}")
    with pytest.raises(LogbookError) as e:
        Logbook(path)
    assert str(mig.LATEST_VERSION + 5) in str(e.value) and "upgrade faultfind" in str(e.value)
    _assert_refused_untouched(capsys, path, ["newer faultfind", "upgrade faultfind",
                                             f"schema version {mig.LATEST_VERSION + 5}"])


def test_garbage_file_is_refused_and_left_untouched(tmp_path, capsys):
    path = tmp_path / "book.sqlite"
    path.write_bytes(os.urandom(8192))
    _assert_refused_untouched(capsys, path, ["not an SQLite database", "backup", "move it aside"])
    assert not (tmp_path / "book.sqlite-wal").exists()


def test_text_file_and_short_file_are_refused(tmp_path):
    for data in (b"quantity,plus,value\nvoltage,A,1\n" * 10, b"SQLite format 3\x00short"):
        path = tmp_path / "book.sqlite"
        path.write_bytes(data)
        with pytest.raises(LogbookError, match="not an SQLite database"):
            Logbook(path)
        assert path.read_bytes() == data


def test_damaged_database_is_refused_and_left_untouched(tmp_path, capsys):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    with Logbook(path) as b:
        b.import_readings(sid, BOOSTER / "readings.csv")
    data = bytearray(path.read_bytes())
    page = int.from_bytes(data[16:18], "big")  # page size, file format section 1.3.2
    data[100:page] = b"\xa5" * (page - 100)  # wreck the schema page after its header
    path.write_bytes(bytes(data))
    _assert_refused_untouched(capsys, path, ["cannot be read", "backup", "move it aside"])


def test_another_programs_database_is_refused(tmp_path, capsys):
    path = tmp_path / "other.sqlite"
    with sqlite3.connect(path) as c:
        c.execute("CREATE TABLE invoices (id INTEGER, total REAL)")
        c.execute("INSERT INTO invoices VALUES (1, 99.5)")
    _assert_refused_untouched(capsys, path, ["not a faultfind logbook", "untouched"])


def test_locked_logbook_gives_a_clear_error_and_writes_nothing(tmp_path, capsys, monkeypatch):
    path = tmp_path / "book.sqlite"
    sid = _session(path)
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")  # another program holds the write lock
    try:
        with Logbook(path, timeout=0.2) as book:
            t0 = time.monotonic()
            with pytest.raises(LogbookError) as e:
                book.add_reading(sid, quantity="voltage", plus="+24V", value="23.9")
            assert time.monotonic() - t0 >= 0.2
            assert "locked" in str(e.value) and "try again" in str(e.value)
            assert "nothing was written" in str(e.value)
        import faultfind.io.logbook as lb
        monkeypatch.setattr(lb, "DEFAULT_TIMEOUT", 0.2)
        code, out, err = _run_cli(capsys, "log", "add", str(sid), "V", "+24V", "23.9",
                                  "--logbook", str(path))
        assert code == 2 and "locked" in err and "Stored" not in out
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert _stored(path, sid) == ()


def test_0007_keeps_ids_strike_outs_and_the_trigger_and_takes_diode_tests(tmp_path):
    # 0007 rebuilds the readings table for diode-test readings (formats.md section 4):
    # every row copied, the AUTOINCREMENT mark kept (SQLite "AUTOINCREMENT": an id is
    # never reused), the keep-readings trigger made again.
    path = tmp_path / "v6.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    mig.migrate(conn, target=6)
    conn.execute("BEGIN")
    _fill(conn, 6)
    conn.execute("INSERT INTO readings (session_id, seq, taken_at, quantity, raw, origin) "
                 "VALUES (1, 3, '2025-01-02T03:06:30.000+00:00', 'voltage', '1', 'entered')")
    conn.execute("UPDATE readings SET struck_at = '2025-01-02T03:06:40.000+00:00', "
                 "struck_reason = 'wrong probe' WHERE seq = 3")
    conn.execute("DELETE FROM readings WHERE seq = 3")        # the highest id is gone
    conn.execute("UPDATE readings SET struck_reason = 'kept' WHERE seq = 2")
    conn.execute("COMMIT")
    mark = conn.execute("SELECT seq FROM sqlite_sequence WHERE name = 'readings'").fetchone()[0]
    with pytest.raises(sqlite3.IntegrityError):
        conn.execute("INSERT INTO readings (session_id, seq, taken_at, quantity, raw) VALUES "
                     "(1, 9, 'x', 'diode-test', '0.6')")
    rows = conn.execute("SELECT * FROM readings ORDER BY id").fetchall()
    conn.close()
    with Logbook(path) as book:
        assert book.upgraded == ["0007_diode_test_readings"]
        assert book._conn.execute("SELECT * FROM readings ORDER BY id").fetchall() == rows
        book._conn.execute("UPDATE sessions SET ended_at = NULL")
        got = book.add_reading(1, quantity="diode-test", part="F1", value="0.012")
        assert got.reading.quantity == "diode-test" and got.reading.value == 0.012
        new_id = book._conn.execute("SELECT max(id) FROM readings").fetchone()[0]
        assert new_id == mark + 1
        with pytest.raises(sqlite3.DatabaseError, match="never changed"):
            book._conn.execute("UPDATE readings SET raw = '1' WHERE seq = 1")
        assert book.check() == []
