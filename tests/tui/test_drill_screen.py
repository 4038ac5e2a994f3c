"""The drill screen of the terminal UI (docs/drill.md, docs/ui.md), at 80x24.

Scenarios run through the Pilot with a logbook under tmp_path.  The scripted
drill uses the bundled booster pump panel with a trainer-set fault (F1 open):
its 24 V supply fuse.  A blown (open) fuse leaves nothing downstream of it,
so the node after the fuse reads about 0 V to the 0 V rail while the supply
reads its 24 V (common practice (no source): a fuse is proven by a voltage
reading on its load side, live, before anything else).
"""

from __future__ import annotations

from .conftest import BOOSTER, acknowledge, make_app, run, settle, text_of

SIZE = (80, 24)


def drill_app(tmp_path, **drill):
    opts = {"apprentice": "Sam Okafor", "seed": 14, "fault": "F1:open"}
    opts.update(drill)
    return make_app(tmp_path, drill=opts)


async def type_command(pilot, text):
    await pilot.press(*text, "enter")
    await settle(pilot)


def log_text(app) -> str:
    return text_of(app.screen.query_one("#drill-log"))


def status_text(app) -> str:
    return text_of(app.screen.query_one("#drill-status"))


def test_caution_first_then_drill_only_after_a_y(tmp_path):
    from faultfind.tui.screens.caution import CautionScreen
    from faultfind.tui.screens.drill import DrillScreen

    async def scenario():
        app = drill_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await settle(pilot)
            assert isinstance(app.screen, CautionScreen)
            # Enter, y alone, or a then another key: no acknowledgement (the caution's rule).
            await pilot.press("enter", "y", "a", "x", "y")
            await settle(pilot)
            assert isinstance(app.screen, CautionScreen)
            assert not app.screen_stack or not any(isinstance(s, DrillScreen)
                                                   for s in app.screen_stack)
            await acknowledge(pilot)
            assert isinstance(app.screen, DrillScreen), app.screen
            d = app.screen.drill
            assert d is not None and d.acknowledged  # the caution screen was the drill's ack
            assert d.seed == 14 and d.fault_source == "trainer"
            status = status_text(app)
            # the power state in words and a symbol, the apprentice, the seed
            assert "LIVE" in status and "↯" in status, status
            assert "Sam Okafor" in status and "seed 14" in status, status
            assert "acknowledged" in log_text(app).lower()
        # no drill was finished: nothing recorded
        from faultfind.io.logbook import Logbook

        path = tmp_path / "logbook.sqlite"
        if path.exists():
            with Logbook(path, create=False) as book:
                assert book.list_drills() == []

    run(scenario)


def test_scripted_drill_full_score_and_recorded(tmp_path):
    from faultfind.drill import POINTS
    from faultfind.io.logbook import Logbook

    async def scenario():
        app = drill_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await settle(pilot)
            await acknowledge(pilot)
            await type_command(pilot, "read V 24V-F")
            log = log_text(app)
            assert "> read V 24V-F" in log
            # the fuse is open: its load side reads about 0 V (see the module docstring)
            assert "#1 V 24V-F = " in log
            shown = log.split("#1 V 24V-F = ")[1].split()
            from faultfind.units import parse_value

            assert abs(parse_value(shown[0] + shown[1].replace("V", ""))) < 1.0, shown
            await type_command(pilot, "verdict F1 open")
            d = app.screen.drill
            assert d.finished and d.result is not None
            full = sum(POINTS.values())
            assert full == 100  # docs/drill.md "Scoring": correctness 60, effort 25, safety 15
            assert d.result.score.total == full
            log = log_text(app)
            assert "Score 100/100" in log
            assert "The hidden fault: F1 open" in log
            for line in d.result.score.lines + tuple(d.result.explanation.verdict):
                assert line in log
            assert "OVER" in status_text(app) and "100/100" in status_text(app)
            assert "Recorded as drill" in log
            assert app.screen.query_one("#drill-input").disabled
            await pilot.press("q")  # q quits once the drill is over
            await settle(pilot)
        assert app.return_code == 0
        with Logbook(tmp_path / "logbook.sqlite", create=False) as book:
            records = book.list_drills("Sam Okafor")
        assert len(records) == 1
        r = records[0]
        assert r.score == 100 and r.correct and r.seed == 14 and r.safety_errors == 0
        assert r.fault[:2] == ("F1", "open") and r.verdict[:2] == ("F1", "open")
        assert r.circuit_name == str(BOOSTER / "circuit.toml")

    run(scenario)


def test_live_resistance_refused_and_counted(tmp_path):
    async def scenario():
        app = drill_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await settle(pilot)
            await acknowledge(pilot)
            # an ohmmeter on a live circuit: refused (common practice (no source);
            # docs/safety.md "Isolate": isolate before resistance readings)
            await type_command(pilot, "read R F1")
            d = app.screen.drill
            assert d.safety_errors == 1 and d.readings == []
            log = log_text(app)
            assert "REFUSED: the board is live" in log and "Safety error 1" in log
            assert "✗ REFUSED" in log  # a mark, not colour alone
            assert "safety errors 1" in status_text(app)
            # q while the drill runs is a letter in the input, not quit
            await pilot.press("q")
            await settle(pilot)
            assert app.is_running and app.screen.query_one("#drill-input").value == "q"
            await pilot.press("backspace")
            await type_command(pilot, "isolate")
            status = status_text(app)
            assert "ISOLATED" in status and "⊘" in status and "LIVE" not in status
            await type_command(pilot, "read R F1")
            assert len(d.readings) == 1 and d.safety_errors == 1
            await type_command(pilot, "verdict F1 open")
            assert d.result.safety_errors == 1
            # docs/drill.md "Scoring": 10 safety points off per safety error
            assert d.result.score.safety == 15 - 10
            await pilot.press("ctrl+q")
            await settle(pilot)
        from faultfind.io.logbook import Logbook

        with Logbook(tmp_path / "logbook.sqlite", create=False) as book:
            (r,) = book.list_drills("Sam Okafor")
        assert r.safety_errors == 1 and r.score < 100

    run(scenario)


def test_cli_drill_options_checked_before_the_ui(tmp_path):
    """``faultfind ui`` checks the drill options first: exit status 2 and a message
    naming the option (/work/shared/spec/cli.md: status 2 for bad input)."""
    import subprocess
    import sys

    circuit = str(BOOSTER / "circuit.toml")
    env_log = ["--logbook", str(tmp_path / "logbook.sqlite")]
    cases = [([circuit, "--drill"], "--apprentice"),
             ([circuit, "--seed", "3"], "--seed"),
             ([circuit, "--drill", "--apprentice", "Sam", "--seed", "-1"], "--seed"),
             ([circuit, "--drill", "--apprentice", "Sam", "--fault", "X9:open"], "X9"),
             (["--drill", "--apprentice", "Sam"], "--drill")]
    for argv, named in cases:
        p = subprocess.run([sys.executable, "-m", "faultfind", "ui", *argv, *env_log],
                           capture_output=True, text=True, stdin=subprocess.DEVNULL,
                           timeout=60)
        assert p.returncode == 2, (argv, p.stderr)
        assert named in p.stderr and "Traceback" not in p.stderr, (argv, p.stderr)
    assert not (tmp_path / "logbook.sqlite").exists()
