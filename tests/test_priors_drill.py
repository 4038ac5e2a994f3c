"""Drills with learned priors: the hidden fault is drawn from them, the ranking uses them.

Outside references: the binomial distribution (scipy.stats.binom) for how
often a part drawn with a given probability comes up; the booster pump panel
as drawn (field_cases/) for that probability -- kind weight times mode share
over the circuit's total, the rule of engine/priors.py (common practice, no
source) -- and Ohm's law for the dead coil (F1 open: nothing feeds 24V-F).
"""

from __future__ import annotations

import io
import json
import sys

from scipy import stats

from faultfind.cli.main import main
from faultfind.drill import Drill, draw_fault
from faultfind.engine.priors import HANDBOOK, Priors
from faultfind.io.circuit_file import load_circuit
from faultfind.io.logbook import ENV_VAR

CIRCUIT = "field_cases/booster_pump_panel/circuit.toml"


def _fuse_site():
    return Priors(dict(HANDBOOK.kind_weights, fuse=300.0), HANDBOOK.mode_shares, 0.2, "fuse site", 40)


def test_drawn_faults_follow_the_learned_priors():
    c = load_circuit(CIRCUIT)
    site = _fuse_site()
    n = 30
    got = sum(draw_fault(c, seed, priors=site).ref == "F1" for seed in range(n))
    # every fault of the panel shows on some reading (the drill's check), so the
    # fuse comes up with its prior share among the faults
    total = site.total(c.parts)
    p = sum(site.mass(c.part("F1"), m, total) for m in c.part("F1").fault_modes) / (1 - site.p_healthy)
    assert p > 0.9
    assert stats.binom(n, p).cdf(got) > 0.001       # not fewer than the share allows
    base = sum(draw_fault(c, seed).ref == "F1" for seed in range(n))
    assert got > base


def test_drill_ranks_with_the_learned_priors(tmp_path, monkeypatch, capsys):
    c = load_circuit(CIRCUIT)
    d = Drill(c, "Sam", seed=3, priors=_fuse_site())
    assert d.priors.label == "fuse site"
    # the trainer's fault, a learned-priors file, the whole drill from the command line
    counts = tmp_path / "site.csv"
    counts.write_text("record,kind,mode,parts,count\nformat,,,,1\nsessions,,,,30\n"
                      "fault,fuse,open,,30\n"
                      "mix,,,fuse:1 inductor:2 resistor:2 switch:3 voltage-source:1,30\n",
                      encoding="utf-8")
    monkeypatch.setenv(ENV_VAR, str(tmp_path / "book.sqlite"))
    monkeypatch.setattr(sys, "stdin", io.StringIO("ack\nread V RUN\nverdict F1 open\n"))
    code = main(["drill", "run", CIRCUIT, "--apprentice", "Sam", "--seed", "5", "--fault", "F1:open",
                 "--priors", str(counts), "--json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    doc = json.loads(out.out)
    assert "Priors: learned from file site.csv (30 closed session(s))" in out.err
    reading = doc["transcript"][1]["reading"]
    assert abs(reading["value"]) < 1e-3        # the dead coil
    assert doc["result"]["correct"]
