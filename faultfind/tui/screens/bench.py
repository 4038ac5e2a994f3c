"""The bench workspace: the next reading, the findings, the readings, the parts, the entry.

Designed for a person with a meter in one hand: single keys, the next
reading always on screen with its power state in words and a symbol, and
Enter to store a reading.  A reading is committed to the logbook (in a
worker thread) before it is shown as taken; the diagnosis and the advice then
run again in a worker, with progress in the status line, so the screen never
freezes.  At 80x24 the findings, readings, parts and checks are tabs (keys
1-4); from 112 columns the findings stay beside them.
"""

from __future__ import annotations

import itertools
import threading
import time

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.screen import Screen
from textual.widgets import Footer, Input, Static, TabbedContent, TabPane

from ..widgets.checks import ChecksView
from ..widgets.entry import ReadingEntry
from ..widgets.findings import FindingsView
from ..widgets.next_reading import NextReading
from ..widgets.status import StatusLine, stage_words
from ..widgets.tables import PartsTable, ReadingsTable
from ..widgets.text import BAND_WORDS, hypothesis_label, short_label, tag

__all__ = ["BenchScreen", "DiagnosisProgress", "WIDE", "PROGRESS_EVERY"]

#: Terminal width from which the findings stay beside the tabs.
WIDE = 112

#: Seconds between two status-line updates of the same diagnosis stage (the
#: screening of a large circuit reports after every chunk of parts).
PROGRESS_EVERY = 0.1


class DiagnosisProgress(Message):
    """A stage of the diagnosis running in the worker, posted from its thread.

    Parameters
    ----------
    order : int
        Place among the status-line updates (a later one wins over an earlier
        one handled late).
    stage : str
    done, total : int or None
        As :func:`faultfind.diagnose.diagnose`'s ``progress`` calls.
    """

    def __init__(self, order: int, stage: str, done=None, total=None) -> None:
        super().__init__()
        self.order = order
        self.stage = stage
        self.done = done
        self.total = total


class BenchScreen(Screen):
    """The workspace of one session.

    Parameters
    ----------
    bench : faultfind.tui.bench.Bench
    """

    CSS_PATH = "bench.tcss"
    BINDINGS = [
        Binding("n,slash", "new_reading", "reading", tooltip="type a reading in the entry"),
        Binding("t,space", "take_next", "next",
                tooltip="take the NEXT READING: the entry opens with its probe points "
                        "filled in; type the display, Enter"),
        Binding("o,ctrl+o", "power", "power",
                tooltip="say the circuit is isolated, or live again (resistance readings "
                        "need it isolated; voltage and current readings need it live)"),
        Binding("c", "close_out", "close",
                tooltip="close out: what was found, how it was confirmed, what was done"),
        Binding("x", "export", "report",
                tooltip="export the work-order report (HTML with a chart, or Markdown)"),
        Binding("h", "history", "history", tooltip="earlier sessions of this unit"),
        Binding("e", "edit_circuit", "edit circuit", show=False,
                tooltip="edit the session's circuit; the readings taken are diagnosed again "
                        "on the new version"),
        Binding("f1,question_mark", "help", "help", tooltip="this help"),
        Binding("k", "strike", "strike out", show=False,
                tooltip="strike out the reading selected in tab 2 (it is kept, with a "
                        "reason, and no longer counts)"),
        Binding("1", "view('findings')", "findings", show=False,
                tooltip="findings: ranked faults with probabilities, and why"),
        Binding("2", "view('readings')", "readings", show=False,
                tooltip="readings taken, each against its healthy band"),
        Binding("3", "view('parts')", "parts", show=False,
                tooltip="parts: nominal, tolerance, live estimate"),
        Binding("4", "view('checks')", "checks", show=False,
                tooltip="checks: parts the readings cannot tell apart, what to re-check"),
        Binding("escape", "leave_entry", "leave", show=False, tooltip="leave the entry"),
        Binding("f5", "rediagnose", "diagnose", show=False, tooltip="diagnose again"),
        Binding("ctrl+n", "new_session", "new session", show=False,
                tooltip="start another session (back to the opening screen)"),
    ]
    #: Keys of the reading entry, for help.
    HELP_EXTRA = (("Tab", "in the entry: complete a kind, node or part name"),
                  ("Enter", "in the entry: store the reading (logbook first)"))

    def __init__(self, bench) -> None:
        super().__init__(id="bench")
        self.bench = bench
        self._analysis_gen = 0
        self._pending_diagnosis = False
        self._analysis_lock = threading.Lock()
        self._status_order = itertools.count(1)  # numbers the status-line updates
        self._status_shown = 0  # number of the update on show
        self._committing = False
        self.working = False

    # -- layout --------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        with Horizontal(id="work"):
            with Vertical(id="main"):
                yield NextReading(id="next")
                yield Static(id="alert")
                with TabbedContent(id="views", initial="findings"):
                    with TabPane("1 Findings", id="findings"):
                        yield FindingsView(id="findings-view")
                    with TabPane("2 Readings", id="readings"):
                        yield ReadingsTable(id="readings-table")
                    with TabPane("3 Parts", id="parts"):
                        yield PartsTable(id="parts-table")
                    with TabPane("4 Checks", id="checks"):
                        yield ChecksView(id="checks-view")
            with Vertical(id="side"):
                yield Static("FINDINGS", id="side-title")
                yield FindingsView(id="side-findings")
        yield ReadingEntry(self.bench, id="entry")
        yield Footer()

    def on_mount(self) -> None:
        self.show_all()
        self._arrange(self.app.size.width)
        b = self.bench
        if b.stored is not None and b.readings() and not self._needs_diagnosis():
            b.suggested = list(b.stored.document.get("suggestions", []))
            b.suggested_power = b.implied_power()
        self.analyse(diagnose=self._needs_diagnosis())

    def on_resize(self, event) -> None:
        self._arrange(event.size.width)

    def _arrange(self, width: int) -> None:
        wide = width >= WIDE
        self.set_class(wide, "wide")
        tabs = self.query_one("#views", TabbedContent)
        if wide:
            if tabs.active == "findings":
                tabs.active = "readings"
            tabs.hide_tab("findings")
        else:
            tabs.show_tab("findings")

    # -- showing the state ---------------------------------------------------------------

    def _doc(self):
        b = self.bench
        return None if b.stored is None or not b.readings() else b.stored.document

    def show_all(self) -> None:
        """Redraw every panel from the bench's state."""
        self.show_status()
        self.show_readings()
        self.show_findings()
        self.show_next()

    def show_status(self) -> None:
        b = self.bench
        status = self.query_one(StatusLine)
        status.show_power(b.power)
        doc = self._doc()
        if doc and doc.get("hypotheses"):
            h = doc["hypotheses"][0]
            status.show_session(b, doc["verdict"], short_label(b.circuit, h["faults"]),
                                h["probability"])
        else:
            status.show_session(b, doc["verdict"] if doc else None)

    def show_readings(self, assessed=None) -> None:
        """Redraw the readings table (``assessed``: worked out already, in a worker)."""
        if assessed is None:
            assessed = self.bench.assessed()
        self.query_one("#readings-table", ReadingsTable).show(assessed)

    def show_findings(self) -> None:
        b = self.bench
        doc = self._doc()
        n = len(b.readings())
        note = self._circuit_note() if doc else ""
        for view in self.query(FindingsView):
            view.show(doc, b.circuit, n, circuit_note=note)
        self.query_one("#parts-table", PartsTable).show(b.circuit, doc)
        self.query_one("#checks-view", ChecksView).show(doc)
        alert = self.query_one("#alert", Static)
        if doc and doc.get("verdict") == "inconsistent":
            alert.update(tag("warn", "⚠ INCONSISTENT READINGS") + ": no explanation fits. "
                         "What to re-check: tab 4.")
            alert.display = True
        else:
            alert.display = False
        self.show_status()

    def _circuit_note(self) -> str:
        """Which circuit version the findings were worked out on, and whether it changed."""
        from faultfind.io.circuit_versions import version_label

        used, changed = self.bench.stored_circuit()
        label = used.short if used is not None else version_label(None, None)
        doc = self._doc()
        priors = (doc or {}).get("priors") or {}
        if priors.get("source", "handbook") != "handbook":
            # learned priors order the findings: say whose (docs/priors.md)
            label += (f" with priors from {priors['source']} "
                      f"({priors.get('outcomes', 0)} outcomes)")
        if not changed:
            return tag("muted", f"diagnosed on circuit {label}")
        now = self.bench.circuit_version()
        return tag("warn", f"⚠ diagnosed on circuit {label}; the circuit changed since "
                           f"(now {now.short}): diagnosing again")

    def show_next(self) -> None:
        b = self.bench
        doc = self._doc()
        best = None
        if doc and doc.get("hypotheses"):
            best = hypothesis_label(b.circuit, doc["hypotheses"][0]["faults"])
        sugg = b.suggested if b.suggested_power == b.power else []
        self.query_one("#next", NextReading).show(
            sugg, b.power, verdict=doc.get("verdict") if doc else None, best=best,
            is_open=b.is_open, working=self.working)

    # -- diagnosis and advice in a worker ------------------------------------------------

    def _needs_diagnosis(self) -> bool:
        b = self.bench
        live = b.readings()
        if not live:
            return False
        s = b.stored
        last = max(lr.seq for lr in b.session.readings)
        return (s is None or s.last_seq < last or s.reading_count != len(live)
                or getattr(s, "circuit_sha256", None) != b.session.circuit_sha256)

    def analyse(self, *, diagnose: bool = True) -> None:
        """Run the diagnosis (when ``diagnose``) and the advice again, in a worker.

        Analyses run one at a time; one that a newer request overtakes before it
        starts leaves the work to the newer one, and a diagnosis asked for is never
        dropped (``_pending_diagnosis``)."""
        self._analysis_gen += 1
        self.working = True
        b = self.bench
        if diagnose:
            self._pending_diagnosis = True
        self._analysis(self._analysis_gen)

    @work(thread=True, group="analysis")
    def _analysis(self, gen: int) -> None:
        app = self.app
        b = self.bench
        with self._analysis_lock:
            if gen != self._analysis_gen or not b.is_open:
                app.call_from_thread(self._analysis_done, gen)
                return
            try:
                if self._pending_diagnosis:
                    self._pending_diagnosis = False
                    if b.readings():
                        app.call_from_thread(self._busy, gen, next(self._status_order), 1,
                                             "ranking fault hypotheses")
                        b.diagnose(progress=self._reporter())
                    else:  # every reading struck out: back to the advice before readings
                        b.suggested_power = None
                    app.call_from_thread(self._diagnosed)
                if gen == self._analysis_gen:
                    app.call_from_thread(self._busy, gen, next(self._status_order), 2,
                                         "choosing the next reading")
                    b.suggestions()
            except Exception as exc:  # noqa: BLE001 - shown in the findings, not raised
                app.call_from_thread(self._analysis_failed, gen, exc)
            app.call_from_thread(self._analysis_done, gen)

    def _reporter(self):
        """The diagnosis's ``progress`` callback, for the worker's thread.

        It posts a :class:`DiagnosisProgress` and returns at once: it runs while
        the logbook is locked for the diagnosis, so waiting for the UI thread
        (``call_from_thread``) could deadlock with a UI action that writes to the
        logbook meanwhile.  A new stage is always posted; further reports of the
        same stage at most every :data:`PROGRESS_EVERY` seconds.
        """
        last = {"stage": None, "at": 0.0}

        def report(stage, done=None, total=None) -> None:
            now = time.monotonic()
            if stage == last["stage"] and now - last["at"] < PROGRESS_EVERY:
                return
            last["stage"], last["at"] = stage, now
            self.post_message(DiagnosisProgress(next(self._status_order), stage, done, total))

        return report

    def _newer(self, order: int) -> bool:
        """True (and noted) when status update ``order`` is not older than the one shown."""
        if order < self._status_shown:
            return False
        self._status_shown = order
        return True

    def _busy(self, gen: int, order: int, step: int, text: str) -> None:
        if gen == self._analysis_gen and self._newer(order):
            self.query_one(StatusLine).busy(step, text)

    @on(DiagnosisProgress)
    def _diagnosis_progress(self, message: DiagnosisProgress) -> None:
        message.stop()
        if not self.working or not self._newer(message.order):
            return  # the analysis is over, or a later update is on show already
        text, fraction = stage_words(message.stage, message.done, message.total)
        self.query_one(StatusLine).busy(1, text, fraction)

    def _idle(self) -> None:
        self._newer(next(self._status_order))  # progress still in the queue is stale now
        self.query_one(StatusLine).idle()

    def _diagnosed(self) -> None:
        self.show_findings()  # bench.stored is always the newest diagnosis

    def _analysis_failed(self, gen: int, exc: Exception) -> None:
        if gen != self._analysis_gen or not self.bench.is_open:
            return
        text = tag("bad", f"✗ the diagnosis failed: {exc}")
        for view in self.query(FindingsView):
            view.fail(text)

    def _analysis_done(self, gen: int) -> None:
        if gen != self._analysis_gen:
            return
        self.working = False
        self._idle()
        self.show_status()
        self.show_next()

    # -- entering readings ---------------------------------------------------------------

    @property
    def entry(self) -> ReadingEntry:
        return self.query_one("#entry", ReadingEntry)

    def action_new_reading(self) -> None:
        if self._closed_say():
            return
        self.entry.open("")

    def action_take_next(self) -> None:
        from faultfind.model import Reading

        from ..entry import entry_text

        if self._closed_say():
            return
        b = self.bench
        sugg = b.suggested if b.suggested_power == b.power else []
        if not sugg:
            self.entry.open("")
            self.entry.say(tag("muted", "No suggestion now: type any reading."))
            return
        s = sugg[0]
        rd = Reading(s["quantity"], s["mode"], s["plus"], s["minus"], part=s["part"],
                     setup=s["setup"], frequency=s["frequency"], label=s.get("label") or "")
        text, cursor = entry_text(rd, b.circuit.ground)
        self.entry.open(text, cursor)

    def action_leave_entry(self) -> None:
        self.entry.leave()

    def on_key(self, event) -> None:
        """Open the entry at once on n or t, and put keys typed before it had the focus
        into it.  A key event goes to the widget focused when it arrives and reaches the
        screen before the app runs the bindings, so keys typed quickly after n would
        otherwise be lost or taken as commands.  A printable key that reaches the screen
        was not taken by the entry (the entry stops those it takes)."""
        entry = self.entry
        inp = entry.input
        if inp.disabled:
            return
        if not entry.has_class("open"):
            if isinstance(self.app.focused, Input):
                return
            if event.key in ("n", "slash"):
                self.action_new_reading()
            elif event.key in ("t", "space"):
                self.action_take_next()
            else:
                return
        elif event.is_printable and event.character:
            inp.insert_text_at_cursor(event.character)
        elif inp.has_focus:
            return
        elif event.key == "backspace":
            inp.action_delete_left()
        elif event.key == "enter":
            self.post_message(ReadingEntry.Commit(inp.value))
        else:
            return
        event.stop()
        event.prevent_default()

    @on(ReadingEntry.Commit)
    def _commit(self, message: ReadingEntry.Commit) -> None:
        if self._committing or self._closed_say():
            return
        self._committing = True
        self.entry.say(tag("muted", "… storing in the logbook"))
        self._commit_worker(message.text)

    @work(thread=True, group="commit")
    def _commit_worker(self, text: str) -> None:
        try:
            logged = self.bench.add(text)
        except Exception as exc:  # noqa: BLE001 - bad input or a logbook problem: shown
            self.app.call_from_thread(self._commit_failed, exc)
            return
        try:
            assessed = self.bench.assessed()
        except Exception:  # noqa: BLE001 - the reading is stored; the table catches up
            assessed = None
        self.app.call_from_thread(self._committed, logged, assessed)

    def _commit_failed(self, exc: Exception) -> None:
        self._committing = False
        self.entry.sticky = self.entry.input.value
        msg = getattr(exc, "message", None) or str(exc)
        key = getattr(exc, "key", None)
        if key == "power":
            self.entry.say(tag("bad", f"⊘ {msg}") + tag("muted", " · nothing was stored"))
        else:
            prefix = f"{key}: " if key and key != "entry" and not msg.startswith(key) else ""
            self.entry.say(tag("bad", f"✗ {prefix}{msg}") + tag("muted", " · nothing stored"))
        self.entry.input.focus()

    def _committed(self, logged, assessed) -> None:
        self._committing = False
        a = next((x for x in assessed or () if x.logged.seq == logged.seq), None)
        self.show_readings(assessed)
        self.entry.input.value = ""
        self.entry.leave()
        from faultfind.io.report import describe_reading

        said = f"✓ stored #{logged.seq}: {describe_reading(logged.reading)} = {logged.reading.raw}"
        status = ""
        if a is not None:
            sym, words, kind = BAND_WORDS[a.status]
            status = " · " + tag(kind, f"{sym} {words}")
        self.entry.say(tag("ok", said) + status + tag("muted", " · in the logbook"))
        self.analyse(diagnose=True)

    # -- power state ---------------------------------------------------------------------

    def action_power(self) -> None:
        from .power import PowerScreen

        if self._closed_say():
            return
        self.app.push_screen(PowerScreen(self.bench.power), self._power_set)

    def _power_set(self, state: str | None) -> None:
        if state is None or state == self.bench.power:
            return
        self.bench.set_power(state)
        self.show_status()
        self.show_next()
        text = self.entry.input.value
        if text.strip():
            self.entry.update_preview(text, force=True)
        self.analyse(diagnose=False)

    # -- close-out, export, history, strike ----------------------------------------------

    def _closed_say(self) -> bool:
        if self.bench.is_open:
            return False
        self.notify("This session is closed: ctrl+n starts another.", severity="warning")
        return True

    def action_close_out(self) -> None:
        from .closeout import CloseoutScreen

        if self._closed_say():
            return
        doc = self._doc()
        self.app.push_screen(CloseoutScreen(self.bench, doc), self._after_closeout)

    def _after_closeout(self, done) -> None:
        if not done:
            return
        self._analysis_gen += 1  # any analysis still running is for an open session: drop it
        self.working = False
        self._idle()
        self.entry.input.value = ""
        self.entry.input.disabled = True
        self.entry.leave()
        self.show_all()
        self.refresh_bindings()
        self.action_export()

    def action_export(self) -> None:
        from .export import ExportScreen

        self.app.push_screen(ExportScreen(self.bench, self.app.export_dir), self._exported)

    def _exported(self, result) -> None:
        if result:
            self.entry.say(tag("ok", f"✓ {result}"))

    def action_history(self) -> None:
        from .history import HistoryScreen

        self.app.push_screen(HistoryScreen(self.bench))

    def action_strike(self) -> None:
        from .strike import StrikeScreen

        if self._closed_say():
            return
        tabs = self.query_one("#views", TabbedContent)
        table = self.query_one("#readings-table", ReadingsTable)
        seq = table.selected_seq()
        if tabs.active != "readings" or seq is None:
            self.notify("Open the readings (2), select a reading, then press k.")
            return
        lr = next(r for r in self.bench.session.readings if r.seq == seq)
        if lr.struck:
            self.notify(f"Reading {seq} is struck out already.")
            return
        self.app.push_screen(StrikeScreen(self.bench, lr), self._struck)

    def _struck(self, done) -> None:
        if done:
            self.show_readings()
            self.analyse(diagnose=True)

    # -- small things --------------------------------------------------------------------

    _OPEN_ONLY = ("new_reading", "take_next", "power", "close_out", "strike", "rediagnose",
                  "edit_circuit")

    def check_action(self, action: str, parameters) -> bool | None:
        """A closed session's keys for readings and close-out leave the footer."""
        if action in self._OPEN_ONLY and not self.bench.is_open:
            return False
        return True

    def action_view(self, name: str) -> None:
        tabs = self.query_one("#views", TabbedContent)
        if name == "findings" and self.has_class("wide"):
            return
        tabs.active = name

    def action_rediagnose(self) -> None:
        if not self._closed_say():
            self.analyse(diagnose=True)

    def action_help(self) -> None:
        from .help import HelpScreen

        self.app.push_screen(HelpScreen(self))

    def action_edit_circuit(self) -> None:
        from .editor import EditorScreen, session_draft

        if self._closed_say():
            return
        before = self.bench.session.circuit_sha256
        self.app.push_screen(EditorScreen(session_draft(self.bench), apply=self._apply_circuit,
                                          where=f"session {self.bench.session_id}"),
                             lambda _: self._circuit_edited(before))

    def _apply_circuit(self, text: str, path: str | None = None) -> None:
        """The editor's save, in its worker: the circuit's next version, never while a
        diagnosis of the old one is being stored; ``path``: the file it was also saved to."""
        with self._analysis_lock:
            self.bench.revise_circuit(text, name=path)

    def _circuit_edited(self, before: str) -> None:
        if self.bench.session.circuit_sha256 == before:
            return
        self.entry.input.suggester.circuit = self.bench.circuit
        self.show_all()
        self.analyse(diagnose=True)

    def action_new_session(self) -> None:
        self.app.show_opening()  # through the app: opening.py imports this module
