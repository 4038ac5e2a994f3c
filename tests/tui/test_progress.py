"""The diagnosis's progress in the bench's status line, and the logbook passing it on.

These tests check the UI's plumbing, not the diagnosis: no outside reference
is needed.  The stage names are those :func:`faultfind.diagnose.diagnose`
documents for its ``progress`` callback.  The readings are from the booster
pump panel (a field case of this project, field_cases/booster_pump_panel).
"""

from __future__ import annotations

import os
import subprocess
import sys
import threading

import pytest
from textual.widgets import ProgressBar

from faultfind.tui.widgets.status import STAGE_WORDS, StatusLine, stage_words

from .conftest import BOOSTER, ROOT, logbook_sessions, make_app, run, settle, text_of, \
    to_bench, type_reading

#: Stages diagnose() reports, in its order (its docstring).
STAGES = ["setting up", "ranking", "screening", "grouping", "advising", "estimating", "done"]


def _wrap_diagnose(monkeypatch, around):
    """Replace faultfind.diagnose.diagnose (the logbook imports it at each call) by one
    that lets ``around(progress, call_real)`` drive the UI's callback."""
    import faultfind.diagnose as fd

    real = fd.diagnose
    callbacks = []

    def wrapped(*args, progress=None, **kw):
        callbacks.append(progress)

        def call_real(prog=progress):
            return real(*args, progress=prog, **kw)

        if progress is None:
            return call_real()
        return around(progress, call_real)

    monkeypatch.setattr(fd, "diagnose", wrapped)
    return callbacks


async def _wait_for(pilot, check, seconds=20.0):
    """Pause until ``check()`` is true (never settle: a worker is held on purpose)."""
    for _ in range(int(seconds / 0.05)):
        if check():
            return True
        await pilot.pause(0.05)
    return check()


def test_screening_report_shows_in_the_status_line_then_it_goes_idle(tmp_path, monkeypatch):
    seen = threading.Event()
    held = []

    def around(progress, call_real):
        progress("screening", 64, 640)
        held.append(seen.wait(timeout=30))  # until the test has read the status line
        return call_real()

    callbacks = _wrap_diagnose(monkeypatch, around)

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            try:
                await to_bench(pilot)
                await pilot.press("n", *"V 24V-F 0")
                await settle(pilot, 1)
                await pilot.press("enter")
                busy = app.screen.query_one("#busy")
                bar = app.screen.query_one("#progress", ProgressBar)
                shown = await _wait_for(
                    pilot, lambda: "screening 64/640" in text_of(busy) and busy.display)
                assert shown, f"status line shows {text_of(busy)!r}"
                assert text_of(busy) == "⟳ ranking: screening 64/640 parts"
                # step 1 of 3 (the diagnosis), a tenth of the way into the screening
                assert bar.display and 1.0 < bar.progress < 2.0
                assert app.screen.working
            finally:
                seen.set()
            await settle(pilot)
            assert held == [True]
            assert not busy.display and not bar.display  # idle again
            assert not app.screen.working
            doc = app.screen.bench.stored.document
            assert doc["hypotheses"], "the real diagnosis ran after the held report"
    run(scenario)
    assert len(callbacks) == 1 and callable(callbacks[0])
    s = logbook_sessions(tmp_path)[0]
    assert s.latest_diagnosis is not None and s.latest_diagnosis.reading_count == 1


def test_status_follows_the_stages_in_order_and_is_not_flooded(tmp_path, monkeypatch):
    """640 screening reports in a tight loop: a handful reach the status line
    (PROGRESS_EVERY), every stage is shown in order, the bar never goes back."""
    applied = []  # (step, text, bar progress) as the status line shows them
    screening_shown = threading.Event()
    original_busy = StatusLine.busy

    def recording_busy(self, step, text, fraction=0.0):
        original_busy(self, step, text, fraction)
        applied.append((step, text, self.query_one("#progress", ProgressBar).progress))
        if text.startswith("ranking: screening"):
            screening_shown.set()

    monkeypatch.setattr(StatusLine, "busy", recording_busy)
    posted = []

    def around(progress, call_real):
        def forward(stage, done, total):
            posted.append(stage)
            progress(stage, done, total)
            if stage == "ranking":  # a large circuit's screening, reported part by part
                for i in range(1, 641):
                    posted.append("screening")
                    progress("screening", i, 640)
                # let the screen handle them before the diagnosis goes on
                screening_shown.wait(timeout=20)
        return call_real(forward)

    _wrap_diagnose(monkeypatch, around)

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            applied.clear()  # the advice before any reading
            await type_reading(pilot, "V 24V-F 0")
            assert not app.screen.query_one("#busy").display
            assert not app.screen.query_one("#progress").display
    run(scenario)

    assert posted.count("screening") == 640
    texts = [t for _, t, _ in applied]
    shown_screening = [t for t in texts if t.startswith("ranking: screening")]
    assert 1 <= len(shown_screening) <= 20, shown_screening  # throttled, not 640
    assert texts[0] == "ranking fault hypotheses" and applied[0][0] == 1
    assert texts[-1] == "choosing the next reading" and applied[-1][0] == 2
    first = texts.index(STAGE_WORDS["setting up"][0])
    assert first < texts.index(shown_screening[0])
    known = {w for w, _ in STAGE_WORDS.values()} | {"ranking fault hypotheses",
                                                    "choosing the next reading"}
    assert all(t in known or t.startswith("ranking: screening ") for t in texts), texts
    bar = [p for _, _, p in applied]
    assert bar == sorted(bar), bar  # never back
    assert all(1.0 <= p <= 2.0 for p in bar)


def test_stage_words():
    text, f = stage_words("screening", 128, 640)
    assert text == "ranking: screening 128/640 parts"
    assert STAGE_WORDS["ranking"][1] < f < STAGE_WORDS["grouping"][1]
    assert stage_words("screening", 640, 640)[1] == pytest.approx(STAGE_WORDS["grouping"][1])
    # more done than planned is shown as all of it; no counts or none to do: the words
    assert stage_words("screening", 700, 640)[0] == "ranking: screening 640/640 parts"
    assert stage_words("screening", None, None) == STAGE_WORDS["screening"]
    assert stage_words("screening", 0, 0) == STAGE_WORDS["screening"]
    # every stage diagnose() reports has words, in increasing order of the bar
    fractions = [stage_words(s)[1] for s in STAGES]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert stage_words("polishing") == ("diagnosing: polishing", None)


def test_bench_diagnose_refuses_a_progress_that_cannot_be_called(tmp_path):
    from faultfind.logbook import Logbook
    from faultfind.tui.bench import Bench

    with Logbook(tmp_path / "l.sqlite") as book:
        bench = Bench.start(book, BOOSTER / "circuit.toml", unit="BP-2")
        bench.add("V 24V-F 0")
        with pytest.raises(TypeError, match="progress"):
            bench.diagnose(progress="yes")
        got = []
        stored = bench.diagnose(progress=lambda *a: got.append(a[0]))
        assert stored.reading_count == 1 and got[-1] == "done"


def test_logbook_passes_progress_to_the_diagnosis(tmp_path):
    from faultfind.logbook import Logbook

    calls = []
    with Logbook(tmp_path / "l.sqlite") as book:
        s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
        book.import_readings(s.id, BOOSTER / "readings.csv")
        d = book.store_diagnosis(s.id, progress=lambda *a: calls.append(a))
        plain = book.store_diagnosis(s.id)
    stages = [c[0] for c in calls]
    assert "ranking" in stages and stages[-1] == "done" and stages.count("done") == 1
    assert stages.index("ranking") < stages.index("done")
    assert all(st in STAGES for st in stages), stages
    assert all(c[1] is None and c[2] is None for c in calls if c[0] != "screening")
    # the callback only watches: the same diagnosis as without it
    assert d.document["hypotheses"] == plain.document["hypotheses"]
    assert d.verdict == plain.verdict


# Run in a child process: a deadlock there is a timeout here, not a hung test run.
_POWER_DURING_DIAGNOSIS = r"""
import asyncio, sys, tempfile, threading, time
from pathlib import Path
sys.path.insert(0, sys.argv[1])
import faultfind.diagnose as fd
from conftest import make_app, settle, to_bench

real = fd.diagnose
inside, pressing = threading.Event(), threading.Event()

def wrapped(*a, progress=None, **kw):
    if progress is not None:  # the logbook is locked for the diagnosis from here on
        progress("screening", 1, 640)
        inside.set()
        pressing.wait(30)
        for i in range(2, 22):  # the UI thread now waits for the logbook (power change)
            time.sleep(0.05)
            progress("screening", i, 640)
    return real(*a, progress=progress, **kw)

fd.diagnose = wrapped

async def main():
    app = make_app(Path(tempfile.mkdtemp()))
    async with app.run_test(size=(80, 24)) as pilot:
        await to_bench(pilot)
        await pilot.press("n", *"V 24V-F 0")
        await settle(pilot, 1)
        await pilot.press("enter")
        for _ in range(400):
            if inside.is_set():
                break
            await pilot.pause(0.05)
        await pilot.press("o")
        await pilot.pause(0.2)
        pressing.set()
        await pilot.press("y")
        await settle(pilot)
        print("power", app.screen.bench.power, "diagnosed",
              app.screen.bench.stored.reading_count, "busy", app.screen.query_one("#busy").display)

asyncio.run(main())
"""


def test_marking_the_circuit_isolated_during_a_diagnosis_does_not_hang(tmp_path):
    """The progress callback runs while the logbook is locked for the diagnosis; the
    power dialog writes its event to the logbook from the UI thread.  A callback that
    waited for the UI thread would wait forever."""
    env = dict(os.environ, TMPDIR=str(tmp_path))
    try:
        done = subprocess.run([sys.executable, "-c", _POWER_DURING_DIAGNOSIS,
                               str(ROOT / "tests" / "tui")], cwd=ROOT, env=env,
                              capture_output=True, text=True, timeout=120)
    except subprocess.TimeoutExpired:
        pytest.fail("the UI hung: power change during a diagnosis (deadlock)")
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip().splitlines()[-1] == "power off diagnosed 1 busy False"
