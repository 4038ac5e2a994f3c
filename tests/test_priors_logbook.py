"""Learning priors from the logbook: session tags, scopes, `faultfind log priors`, the flags.

Outside references: the mix of each circuit is counted here straight from the
TOML file with tomllib (not through faultfind's circuit reader); the learned
shares are checked against scipy.stats.dirichlet's posterior mean
(Dirichlet-multinomial, Gelman et al., BDA3 section 3.4, from memory); SQLite's
own foreign-key cascade is relied on for deleted sessions (sqlite.org,
"SQLite Foreign Key Support", from memory).
"""

from __future__ import annotations

import json
import tomllib
from collections import Counter

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from faultfind.cli.main import main
from faultfind.engine.prior_update import MODE_STRENGTH, mix_key
from faultfind.engine.priors import MODE_SHARES
from faultfind.errors import InputError
from faultfind.io.logbook import Logbook
from faultfind.io.outcome_counts import count_outcomes, parse_scope
from faultfind.io.session_tags import add_tags, all_tags, remove_tags, tags_of
from faultfind.learned_priors import from_logbook

BOOSTER = "field_cases/booster_pump_panel"
BARRIER = "field_cases/car_park_barrier_logic_supply"
CAN_FAIL = {"resistor", "capacitor", "inductor", "fuse", "switch", "voltage-source", "current-source"}


def _mix(case):
    with open(f"{case}/circuit.toml", "rb") as fh:
        parts = tomllib.load(fh)["part"]
    return dict(Counter(p["kind"] for p in parts if p["kind"] in CAN_FAIL))


def _close(book, case, faults, *, tag=None, purpose="repair"):
    s = book.start_session(f"{case}/circuit.toml", unit="U1", purpose=purpose)
    if tag:
        add_tags(book, s.id, [tag])
    book.close_session(s.id, faults)
    return s.id


@pytest.fixture
def book(tmp_path):
    b = Logbook(tmp_path / "lb.sqlite")
    yield b
    b.close()


def test_tags_add_remove_ignore_case_and_outlive_closing(book):
    sid = _close(book, BOOSTER, [("F1", "open")], tag="North-Pumps")
    assert tags_of(book, sid) == ["North-Pumps"]
    assert add_tags(book, sid, ["north-pumps", "BP panels"]) == ["BP panels", "North-Pumps"]
    assert all_tags(book) == {"BP panels": 1, "North-Pumps": 1}
    assert remove_tags(book, sid, ["bp PANELS"]) == ["North-Pumps"]
    with pytest.raises(InputError, match="no tag"):
        remove_tags(book, sid, ["south"])
    for bad in ("", "  ", "two\nlines", "x" * 81):
        with pytest.raises(InputError):
            add_tags(book, sid, [bad])
    with pytest.raises(InputError, match="no session 99"):
        add_tags(book, 99, ["x"])
    book.delete_session(sid)          # the tags go with the session (foreign-key cascade)
    assert all_tags(book) == {}


def test_counts_follow_the_scope(book, tmp_path):
    _close(book, BOOSTER, [("F1", "open")], tag="north")
    _close(book, BOOSTER, [("S2", "drift"), ("F1", None)], tag="north")
    _close(book, BOOSTER, [], tag="north")
    _close(book, BARRIER, [("F1", "open")], tag="south")
    _close(book, BARRIER, [("S3", "open")], purpose="commissioning")    # not a repair: left out
    book.start_session(f"{BOOSTER}/circuit.toml", unit="U2")            # open: left out
    north = count_outcomes(book, parse_scope("tag:NORTH")).counts
    assert (north.sessions, north.no_fault, north.fault_count) == (3, 1, 3)
    assert north.faults == {("fuse", "open"): 1, ("switch", "drift"): 1, ("fuse", None): 1}
    assert north.mixes == {mix_key(_mix(BOOSTER)): 3}
    every = count_outcomes(book, parse_scope("all")).counts
    assert every.sessions == 4 and every.mixes[mix_key(_mix(BARRIER))] == 1
    one = count_outcomes(book, parse_scope(f"circuit:{BARRIER}/circuit.toml")).counts
    assert (one.sessions, one.faults) == (1, {("fuse", "open"): 1})
    edited = tmp_path / "edited.toml"
    edited.write_text(open(f"{BARRIER}/circuit.toml", encoding="utf-8").read() + "\n# edited\n",
                      encoding="utf-8")
    assert count_outcomes(book, parse_scope(f"circuit:{edited}")).counts.sessions == 0


@pytest.mark.parametrize("text, words", [
    ("tags:x", "'all'"), ("tag:", "must not be empty"), ("circuit:", "name the circuit file"),
    ("everything", "'all'"),
])
def test_bad_scopes(text, words):
    with pytest.raises(InputError, match=words):
        parse_scope(text)


def test_learned_shares_are_the_dirichlet_mean_of_the_logged_outcomes(book):
    for _ in range(6):
        _close(book, BOOSTER, [("F1", "drift")])
    _close(book, BOOSTER, [("F1", "open")])
    learned = from_logbook(book, "all")
    fuse = next(r for r in learned.kinds if r.kind == "fuse")
    alpha = MODE_STRENGTH * np.array([MODE_SHARES["fuse"]["open"], MODE_SHARES["fuse"]["drift"]]) + [1, 6]
    got = {m.mode: m.learned for m in fuse.modes}
    assert_allclose([got["open"], got["drift"]], stats.dirichlet(alpha).mean(), rtol=1e-12)
    assert learned.table.label == "logbook lb.sqlite, all sessions"
    assert learned.table.outcomes == 7


def _run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_commands_end_to_end(tmp_path, capsys):
    lb = str(tmp_path / "site.sqlite")
    with Logbook(lb) as b:
        for i in range(12):
            _close(b, BOOSTER, [("F1", "open")] if i % 3 else [("S1", "open")])
        sid = _close(b, BOOSTER, [])
    code, out, err = _run(capsys, "log", "tag", str(sid), "north", "--logbook", lb)
    assert code == 0 and "north" in out
    code, out, _ = _run(capsys, "log", "tag", "last", "--remove", "north", "--logbook", lb, "--json")
    assert code == 0 and json.loads(out) == {"session": sid, "tags": []}
    code, out, _ = _run(capsys, "log", "priors", "--logbook", lb)
    assert code == 0 and "fuse" in out and "handbook" in out and "13 closed repair session(s)" in out
    counts = tmp_path / "site.csv"
    code, out, _ = _run(capsys, "log", "priors", "--logbook", lb, "--json", "--export", str(counts))
    doc = json.loads(out)
    assert code == 0 and doc["sessions"] == 13 and doc["no_fault"] == 1
    fuse = next(k for k in doc["kinds"] if k["kind"] == "fuse")
    assert fuse["found"] == 8 and fuse["weight"] > fuse["handbook_weight"]
    # a second team's file, merged by adding
    code, _, _ = _run(capsys, "log", "merge-priors", str(counts), str(counts), "-o",
                      str(tmp_path / "both.csv"))
    assert code == 0
    code, out, _ = _run(capsys, "log", "priors", "--priors", str(tmp_path / "both.csv"), "--json")
    assert json.loads(out)["sessions"] == 26
    # diagnose with each source of priors; the report says which
    args = ["diagnose", f"{BOOSTER}/circuit.toml", f"{BOOSTER}/readings.csv"]
    code, out, _ = _run(capsys, *args, "--json")
    assert json.loads(out)["priors"] == {"source": "handbook", "outcomes": 0}
    code, out, _ = _run(capsys, *args, "--json", "--scope", "all", "--logbook", lb)
    assert code == 0 and json.loads(out)["priors"] == {
        "source": "logbook site.sqlite, all sessions", "outcomes": 13}
    code, out, _ = _run(capsys, *args, "--priors", str(counts))
    assert code == 0 and "Priors: learned from file site.csv (13 closed session(s))" in out
    code, out, _ = _run(capsys, "suggest", f"{BOOSTER}/circuit.toml", "--json", "--priors", str(counts))
    assert code == 0 and json.loads(out)["priors"]["outcomes"] == 13
    code, _, err = _run(capsys, *args, "--priors", str(counts), "--scope", "all")
    assert code == 2 and "not both" in err
    code, _, err = _run(capsys, *args, "--scope", "all", "--logbook", str(tmp_path / "none.sqlite"))
    assert code == 2 and "none.sqlite" in err


def test_learned_priors_move_the_ranking_where_readings_cannot_decide(tmp_path):
    # the coil reads 0 V: a blown fuse and an open interlock switch explain it
    # equally (series parts); the handbook's weights favour the switches, a site
    # whose fuses blow every time favours the fuse
    from faultfind.diagnose import diagnose
    from faultfind.io.circuit_file import load_circuit
    from faultfind.io.readings_file import parse_readings

    c = load_circuit(f"{BOOSTER}/circuit.toml")
    rd = parse_readings("quantity,plus,value\nvoltage,RUN,0.0001\n", "r.csv", c)
    hand = diagnose(c, rd, advise=False)
    assert hand.hypotheses[0].faults[0].ref.startswith("S")
    with Logbook(tmp_path / "lb.sqlite") as b:
        for _ in range(20):
            _close(b, BOOSTER, [("F1", "open")])
        learned = from_logbook(b, "all").table
    site = diagnose(c, rd, advise=False, priors=learned)
    assert site.hypotheses[0].faults[0].ref == "F1"
    assert site.priors is learned
