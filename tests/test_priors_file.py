"""Outcome-counts files (faultfind/io/priors_file.py, docs/priors.md).

Outside reference: Python's csv module reads every file written (a plain CSV
file, RFC 4180 style); the merge rule "add the counts of equal rows" is checked
against a sum done in this file.  Bad files: exit status 2 naming the file and
line (cli.md).
"""

from __future__ import annotations

import csv
import io

import pytest

from faultfind.cli.main import main
from faultfind.engine.prior_update import OutcomeCounts, mix_key
from faultfind.errors import PriorsError
from faultfind.io.priors_file import (COLUMNS, counts_text, merge_counts, parse_counts,
                                      read_counts, write_counts)

BOOSTER = "field_cases/booster_pump_panel"
MIX = {"fuse": 1, "inductor": 2, "resistor": 2, "switch": 3, "voltage-source": 1}


def _counts():
    c = OutcomeCounts()
    for _ in range(4):
        c.add_session(MIX, [("fuse", "open")])
    c.add_session(MIX, [("switch", None), ("fuse", "drift")])
    c.add_session({"fuse": 2, "resistor": 9}, [("resistor", "drift")])
    c.add_session(MIX, [])
    return c


def test_written_file_reads_back_and_is_plain_csv(tmp_path):
    c = _counts()
    path = tmp_path / "site.csv"
    write_counts(c, path, comment="from a test")
    got = read_counts(path)
    assert (got.sessions, got.no_fault) == (7, 1)
    assert got.faults == c.faults and got.mixes == c.mixes
    rows = [r for r in csv.reader(io.StringIO(path.read_text(encoding="utf-8")))
            if r and not r[0].startswith("#")]
    assert tuple(rows[0]) == COLUMNS
    assert all(len(r) == len(COLUMNS) for r in rows)
    assert ["fault", "switch", "", "", "1"] in rows       # mode not known: empty


def test_concatenated_files_are_the_sum(tmp_path):
    a, b = _counts(), OutcomeCounts()
    b.add_session(MIX, [("fuse", "open")])
    b.add_session({"capacitor": 3}, [("capacitor", "short")])
    ta, tb = counts_text(a), counts_text(b)
    body_b = "\n".join(line for line in tb.splitlines()[2:])     # rows only, no header
    both = parse_counts(ta + body_b + "\n", "both.csv")
    want_faults = dict(a.faults)
    for k, v in b.faults.items():
        want_faults[k] = want_faults.get(k, 0) + v
    assert both.faults == want_faults
    assert both.sessions == a.sessions + b.sessions
    assert both.mixes[mix_key(MIX)] == a.mixes[mix_key(MIX)] + 1
    (tmp_path / "a.csv").write_text(ta, encoding="utf-8")
    (tmp_path / "b.csv").write_text(tb, encoding="utf-8")
    merged = merge_counts([tmp_path / "a.csv", tmp_path / "b.csv"])
    assert merged.faults == both.faults and merged.mixes == both.mixes


HEAD = "record,kind,mode,parts,count\nformat,,,,1\n"
GOOD_TAIL = "sessions,,,,2\nno-fault,,,,1\nfault,fuse,open,,1\nmix,,,fuse:1 resistor:2,1\n"


@pytest.mark.parametrize("text, line, words", [
    ("", 1, "header"),
    ("record,kind,mode,count\n", 1, "column 'parts' missing"),
    ("record,kind,mode,parts,count,extra\n", 1, "unknown column 'extra'"),
    ("record,kind,mode,parts,count\nsessions,,,,1\n", 1, "no format row"),
    (HEAD + "format,,,,2\n", 3, "format 2"),
    (HEAD + "sessions,,,,x\n", 3, "not a whole number"),
    (HEAD + "sessions,,,,-1\n", 3, "not a whole number"),
    (HEAD + "sessions,,,,1.5\n", 3, "not a whole number"),
    (HEAD + "session,,,,1\n", 3, "unknown record"),
    (HEAD + "sessions,fuse,,,1\n", 3, "leaves kind empty"),
    (HEAD + "sessions,,,1\n", 3, "4 fields"),
    (HEAD + "sessions,,,,1\nfault,valve,open,,1\n", 4, "unknown kind 'valve'"),
    (HEAD + "sessions,,,,1\nfault,opamp,,,1\n", 4, "no fault modes"),
    (HEAD + "sessions,,,,1\nfault,fuse,short,,1\n", 4, "'short' is not a fault mode of a fuse"),
    (HEAD + "sessions,,,,1\nmix,,,fuse=1,1\n", 4, "KIND:NUMBER"),
    (HEAD + "sessions,,,,1\nmix,,,fuse:1 fuse:2,1\n", 4, "named twice"),
    (HEAD + "sessions,,,,1\nmix,,,fuse:0,1\n", 4, "at least 1"),
    (HEAD + "sessions,,,,1\nmix,,,,1\n", 4, "needs its parts"),
    (HEAD + "sessions,,,,1\nno-fault,,,,2\n", 4, "more than the 1 sessions"),
    (HEAD + "sessions,,,,3\nfault,fuse,open,,2\nmix,,,fuse:1,1\n", 5, "fault rows count 2"),
    (HEAD + "sessions,,,,3\nfault,fuse,open,,1\nmix,,,resistor:1,1\n", 4, "no mix row has a fuse"),
])
def test_bad_files_name_the_line(tmp_path, capsys, text, line, words):
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(PriorsError) as err:
        read_counts(path)
    assert err.value.line == line and words in str(err.value), str(err.value)
    # the commands: exit 2, one message naming file and line, no traceback
    code = main(["diagnose", f"{BOOSTER}/circuit.toml", f"{BOOSTER}/readings.csv",
                 "--priors", str(path)])
    out = capsys.readouterr()
    assert code == 2
    assert f"{path}:{line}" in out.err and "Traceback" not in out.err
    assert out.out == ""


def test_good_tail_is_accepted_and_comments_skipped():
    got = parse_counts("# a comment\n\n" + HEAD + "  # indented comment\n" + GOOD_TAIL)
    assert got.sessions == 2 and got.faults == {("fuse", "open"): 1}


def test_missing_and_non_utf8_files(tmp_path, capsys):
    assert main(["log", "priors", "--priors", str(tmp_path / "none.csv")]) == 2
    assert "none.csv" in capsys.readouterr().err
    bad = tmp_path / "latin.csv"
    bad.write_bytes(HEAD.encode() + b"sessions,,,,1\n# caf\xe9\n")
    assert main(["log", "priors", "--priors", str(bad)]) == 2
    assert f"{bad}:4" in capsys.readouterr().err
