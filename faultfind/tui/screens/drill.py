"""The drill screen: an apprentice runs one drill (docs/drill.md) in the terminal UI.

Reached with ``faultfind ui CIRCUIT --drill --apprentice NAME [--seed N]``,
only after the safety caution is acknowledged (the acknowledgement is the
drill's ``ack``).  The status line gives the power state of the simulated
board in words and a symbol, the apprentice and the seed; the log holds each
command and the drill's answer; the input line takes the same commands as
``faultfind drill run`` (``read V TP1``, ``isolate``, ``energize``, ``hint``,
``verdict R7 open``, ``help``).  Commands run in a thread worker, one after
the other in the order typed.  After the verdict the score and the
explanation are shown and the result is recorded in the app's logbook; then
``q`` (or ``ctrl+q``) quits.
"""

from __future__ import annotations

import threading
from collections import deque

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Input, Static

__all__ = ["DrillScreen", "STEP_MARKS"]

#: Step kind -> the mark before its answer in the log (the words carry the meaning too).
STEP_MARKS = {"refused": "✗", "error": "?", "verdict": "■", "reading": "·", "power": "⏻",
              "hint": "➜"}


class DrillScreen(Screen):
    """One drill for one apprentice.

    Parameters
    ----------
    circuit : str
        Circuit file of the drill (recorded in the logbook under this name).
    apprentice : str
        Who does the drill.
    seed : int, optional
        Repeatable drill (default: a new one, shown on the status line).
    fault : str, optional
        The trainer's fault, ``"F1:open"`` (default: drawn at random).

    Attributes
    ----------
    drill : faultfind.drill.Drill or None
        Set once the board is drawn (in a worker).
    record : faultfind.io.logbook.DrillRecord or None
        The logbook record, once the verdict is recorded.
    """

    CSS_PATH = "drill.tcss"
    AUTO_FOCUS = "#drill-input"
    BINDINGS = [
        Binding("q", "leave", "quit", tooltip="quit (after the drill is over)"),
        Binding("escape", "focus_input", "type", show=False, tooltip="back to the input line"),
    ]

    def __init__(self, circuit: str, apprentice: str, *, seed=None, fault=None) -> None:
        super().__init__(id="drill")
        self.circuit_path = circuit
        self.apprentice = apprentice
        self.seed = seed
        self.fault = fault
        self.drill = None
        self.record = None
        self._cmd_queue: deque = deque()
        self._cmd_lock = threading.Lock()
        self._cmd_running = False

    def compose(self) -> ComposeResult:
        yield Static(id="drill-status", markup=False)
        with VerticalScroll(id="drill-log"):
            yield Static("Drawing the board …", classes="drill-note", markup=False)
        yield Input(placeholder="command: read V TP1 · isolate · energize · hint · "
                                "verdict R7 open · help", id="drill-input", disabled=True)
        yield Footer()

    def on_mount(self) -> None:
        self._show_status()
        self._start()

    # -- the drill -----------------------------------------------------------------------

    @work(thread=True, exclusive=True, group="drill-start")
    def _start(self) -> None:
        from faultfind.drill import Drill
        from faultfind.io.circuit_file import load_circuit
        from faultfind.io.meters_file import load_meters

        app = self.app
        try:
            meters_path = getattr(app, "meters_path", None)
            meters = load_meters(meters_path) if meters_path else None
            drill = Drill(load_circuit(self.circuit_path), self.apprentice, seed=self.seed,
                          fault=self.fault, meters=meters, priors=getattr(app, "priors", None))
            if getattr(app, "acknowledged_at", None):  # the caution screen was the 'ack'
                ack = drill.acknowledge(command="ack (safety caution screen)")
            else:
                ack = None
        except Exception as exc:  # noqa: BLE001 - shown on screen, nothing started
            app.call_from_thread(self._say, f"✗ the drill cannot start: {exc}", "bad")
            return
        app.call_from_thread(self._started, drill, ack)

    def _started(self, drill, ack) -> None:
        self.drill = drill
        log = self.query_one("#drill-log")
        log.remove_children()
        title = drill.circuit.title or self.circuit_path
        source = "set by the trainer" if drill.fault_source == "trainer" else "drawn at random"
        self._say(f"Drill for {drill.apprentice} on: {title}\nSeed {drill.seed} (the same seed "
                  f"gives the same drill); hidden fault {source}. The board is energized, as "
                  "the unit was found. Type help for the commands.")
        for note in drill.notes:
            self._say(f"Note for the trainer: {note}", "muted")
        if ack is not None:
            self._show_step(ack)
        else:
            self._say("The safety caution is not acknowledged: type ack first.", "bad")
        entry = self.query_one("#drill-input", Input)
        entry.disabled = False
        entry.focus()
        self._show_status()

    @on(Input.Submitted, "#drill-input")
    def _submitted(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        event.input.value = ""
        if not text or self.drill is None or self.drill.finished:
            return
        with self._cmd_lock:
            self._cmd_queue.append(text)
            start = not self._cmd_running
            self._cmd_running = True
        if start:
            self._run_commands()

    @work(thread=True, group="drill-command")
    def _run_commands(self) -> None:
        """Run the typed commands in order; record the result after a verdict."""
        app, drill = self.app, self.drill
        while True:
            with self._cmd_lock:
                if not self._cmd_queue:
                    self._cmd_running = False
                    return
                text = self._cmd_queue.popleft()
            if drill.finished:
                continue
            step = drill.command(text)
            app.call_from_thread(self._show_step, step)
            if drill.result is not None:
                app.call_from_thread(self._show_result)
                self._record()
            elif drill.finished:  # quit: stopped without a verdict, not scored
                app.call_from_thread(self._finish)
                app.call_from_thread(self._say, "Not scored, not recorded. q: quit", "muted")

    def _record(self) -> None:
        """Save the scored drill in the app's logbook (worker thread)."""
        app = self.app
        try:
            book = app.open_logbook(create=True)
            record = book.record_drill(**self.drill.record_fields(self.circuit_path))
        except Exception as exc:  # noqa: BLE001 - shown; the drill itself is over
            app.call_from_thread(self._say, f"✗ not recorded in the logbook: {exc}", "bad")
            return
        self.record = record
        app.call_from_thread(self._say, f"✓ Recorded as drill {record.id} for "
                             f"{record.apprentice} in {book.path}. q: quit", "good")

    # -- showing it ----------------------------------------------------------------------

    def _say(self, text: str, kind: str = "muted") -> None:
        log = self.query_one("#drill-log", VerticalScroll)
        log.mount(Static(text, classes=f"drill-note {kind}", markup=False))
        log.scroll_end(animate=False)

    def _show_step(self, step) -> None:
        log = self.query_one("#drill-log", VerticalScroll)
        mark = STEP_MARKS.get(step.kind, " ")
        kind = "bad" if step.kind in ("refused", "error") or step.safety_error else ""
        log.mount(Static(f"> {step.command}", classes="drill-command", markup=False))
        body = "\n  ".join(step.message.splitlines())
        log.mount(Static(f"{mark} {body}", classes=f"drill-answer {kind}".strip(),
                         markup=False))
        log.scroll_end(animate=False)
        self._show_status()

    def _show_result(self) -> None:
        d = self.drill
        r = d.result
        lines = [f"The hidden fault: {r.fault.describe(d.circuit)}",
                 f"Your verdict:     {r.verdict.describe(d.circuit)}",
                 f"Score {r.score.total}/100"]
        lines += [f"  {line}" for line in r.score.lines]
        lines.append("What it tells:")
        lines += [f"  {line}" for line in r.explanation.verdict]
        if r.explanation.readings:
            lines.append("Your readings:")
            lines += [f"  [{n.category}] {n.text}" for n in r.explanation.readings]
        lines += [f"  {r.explanation.settle}", f"  {r.explanation.advice}"]
        log = self.query_one("#drill-log", VerticalScroll)
        log.mount(Static("\n".join(lines), id="drill-result", markup=False))
        log.scroll_end(animate=False)
        self._finish()

    def _finish(self) -> None:
        entry = self.query_one("#drill-input", Input)
        entry.disabled = True
        self.query_one("#drill-log").focus()
        self._show_status()
        self.refresh_bindings()

    def _show_status(self) -> None:
        from ..bench import POWER_WORDS

        status = self.query_one("#drill-status", Static)
        d = self.drill
        seed = self.seed if d is None else d.seed
        who = f"{self.apprentice} · seed {'new' if seed is None else seed}"
        if d is None:
            status.update(f" … starting · {who}")
            return
        sym, words = POWER_WORDS[d.power]
        if d.result is not None:
            state = f"■ OVER · score {d.result.score.total}/100"
        elif d.finished:
            state = "■ OVER · not scored"
        else:
            state = f"{len(d.readings)} rdg · safety errors {d.safety_errors} · hints {d.hints}"
        status.update(f" {sym} {words} │ {who} │ {state}")
        status.set_class(d.power == "on", "live")
        status.set_class(d.power == "off", "isolated")

    # -- actions -------------------------------------------------------------------------

    def check_action(self, action: str, parameters) -> bool | None:
        if action == "leave":  # q types a letter while the drill runs
            return self.drill is not None and self.drill.finished or None
        return True

    def action_leave(self) -> None:
        self.app.action_quit()

    def action_focus_input(self) -> None:
        entry = self.query_one("#drill-input", Input)
        if not entry.disabled:
            entry.focus()
