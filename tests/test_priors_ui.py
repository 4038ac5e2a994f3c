"""Learned priors in the terminal UI's workspace (faultfind/tui/bench.py) and `faultfind ui`.

Outside reference: the booster pump panel as drawn (field_cases/, formats.md
semantics): with the contactor coil at 0 V the fuse F1 and the interlocks S1..S3
are in series, so the reading cannot tell them apart (Kirchhoff's current law:
an open anywhere in a series path stops the current) and only the priors can
order them.  Bad priors files: exit 2 naming file and line (cli.md).
"""

from __future__ import annotations

from faultfind.cli.main import main
from faultfind.logbook import Logbook
from faultfind.learned_priors import from_logbook
from faultfind.tui.bench import Bench

CIRCUIT = "field_cases/booster_pump_panel/circuit.toml"


def test_the_workspace_diagnoses_and_advises_with_the_learned_priors(tmp_path):
    with Logbook(tmp_path / "lb.sqlite") as book:
        for _ in range(15):
            s = book.start_session(CIRCUIT, unit="BP-2")
            book.close_session(s.id, [("F1", "open")])
        learned = from_logbook(book, "all").table
        bench = Bench.start(book, CIRCUIT, unit="BP-2", priors=learned)
        bench.add("V RUN 0.0001")
        stored = bench.diagnose()
        assert stored.document["priors"] == {"source": "logbook lb.sqlite, all sessions",
                                             "outcomes": 15}
        assert stored.document["hypotheses"][0]["faults"][0]["ref"] == "F1"
        plain = Bench.resume(book, bench.session_id)
        assert plain.diagnose().document["hypotheses"][0]["faults"][0]["ref"].startswith("S")
        bench.power = "off"          # advice worked out again for the declared state
        assert bench.suggestions() and all(s["power"] in ("on", "off") for s in bench.suggestions())


def test_ui_refuses_a_bad_priors_file_before_opening(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("record,kind,mode,parts,count\nformat,,,,1\nfault,fuse,short,,1\n", encoding="utf-8")
    assert main(["ui", CIRCUIT, "--priors", str(bad), "--logbook", str(tmp_path / "l.sqlite")]) == 2
    err = capsys.readouterr().err
    assert f"{bad}:3" in err and "short" in err
    assert main(["ui", CIRCUIT, "--scope", "tag:", "--logbook", str(tmp_path / "l.sqlite")]) == 2
    assert "--scope" in capsys.readouterr().err


def test_the_work_order_report_names_learned_priors(tmp_path):
    from faultfind.report import html_report, markdown_report

    with Logbook(tmp_path / "lb.sqlite") as book:
        for _ in range(3):
            s = book.start_session(CIRCUIT, unit="BP-2")
            book.close_session(s.id, [("F1", "open")])
        learned = from_logbook(book, "all").table
        plain = Bench.start(book, CIRCUIT, unit="BP-2")
        plain.add("V RUN 0.0001")
        plain.diagnose()
        bench = Bench.start(book, CIRCUIT, unit="BP-2", priors=learned)
        bench.add("V RUN 0.0001")
        bench.diagnose()
        words = "Fault priors learned from logbook lb.sqlite, all sessions (3 closed session(s))"
        assert words in markdown_report(book.get_session(bench.session_id))
        assert words in html_report(book.get_session(bench.session_id))
        assert "Fault priors" not in markdown_report(book.get_session(plain.session_id))

