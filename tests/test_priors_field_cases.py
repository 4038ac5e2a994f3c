"""Every bundled field case with a simulated outcome history: the commands end to end.

A logbook gets a simulated history (faultfind.learned_priors.simulate_history)
of a site whose fuses fail ten times as often as the handbook says, on every
field case; then on every case ``faultfind log priors --scope circuit:FILE``
counts that case's sessions, and ``faultfind diagnose --scope tag:site`` still
names the planted fault of the case's answer key (fault.toml, the reference:
field_cases/README.md) -- the readings decide there, the priors only order what
they cannot tell apart -- and says which priors it used.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest

from faultfind.cli.main import main
from faultfind.io.logbook import Logbook
from faultfind.learned_priors import simulate_history, site_table

ROOT = Path(__file__).resolve().parent.parent
CASES = sorted(p.parent for p in (ROOT / "field_cases").glob("*/fault.toml"))
PER_CASE = 4


@pytest.fixture(scope="module")
def logbook(tmp_path_factory):
    path = tmp_path_factory.mktemp("history") / "site.sqlite"
    with Logbook(path) as book:
        site = site_table({"fuse": 10.0})
        for i, case in enumerate(CASES):
            simulate_history(book, case / "circuit.toml", site, PER_CASE, [3, i], tag="site")
    return str(path)


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.mark.parametrize("folder", CASES, ids=[c.name for c in CASES])
def test_case_end_to_end_with_learned_priors(folder, logbook, capsys):
    code, out, err = _run(capsys, "log", "priors", "--logbook", logbook, "--json",
                          "--scope", f"circuit:{folder / 'circuit.toml'}")
    assert code == 0, err
    assert json.loads(out)["sessions"] == PER_CASE
    code, out, err = _run(capsys, "diagnose", folder / "circuit.toml", folder / "readings.csv",
                          "--json", "--scope", "tag:site", "--logbook", logbook)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["priors"] == {"source": "logbook site.sqlite, sessions tagged 'site'",
                             "outcomes": PER_CASE * len(CASES)}
    planted = tomllib.loads((folder / "fault.toml").read_text(encoding="utf-8")).get("fault", [])
    top = doc["hypotheses"][0]["faults"]
    if not planted:
        assert doc["verdict"] == "no-fault"
        return
    true = planted[0]
    if true["mode"] != "drift":
        assert [(f["ref"], f["mode"]) for f in top] == [(true["ref"], true["mode"])], top
    else:   # the right part drifted, or one the readings cannot tell from it
        assert top[0]["mode"] == "drift"
        assert top[0]["ref"] == true["ref"] or any(
            {top[0]["ref"], true["ref"]} <= set(g) for g in doc["ambiguity_groups"])
