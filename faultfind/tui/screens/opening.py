"""Opening work: pick a circuit (a file or a bundled field case), start or resume a session.

The list on the left holds the logbook's open sessions (resume one with
Enter) and the bundled field cases (Enter takes the case's circuit and moves
to the unit field).  The form under it names the circuit file, the unit, the
technician, the location and the purpose; Enter in any field starts the
session.  The logbook file is created only when a session starts.
"""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Horizontal
from textual.markup import escape
from textual.screen import Screen
from textual.widgets import Button, Footer, Input, OptionList, Select, Static
from textual.widgets.option_list import Option

from ..cases import find_cases

__all__ = ["OpeningScreen"]

_PURPOSES = ("repair", "commissioning", "training")


class OpeningScreen(Screen):
    """Choose the circuit and the session."""

    CSS_PATH = "opening.tcss"
    AUTO_FOCUS = None
    BINDINGS = [
        Binding("f1,question_mark", "help", "help", tooltip="this help"),
        Binding("ctrl+s", "start", "start session",
                tooltip="start the session (Enter in any field does too)"),
        Binding("ctrl+l", "focus_list", "list", show=False,
                tooltip="back to the list of sessions and field cases"),
        Binding("ctrl+n", "new_circuit", "new circuit",
                tooltip="draw a new circuit in the circuit editor"),
        Binding("f4", "edit_circuit", "edit circuit",
                tooltip="edit the circuit file named above in the circuit editor"),
    ]

    def __init__(self) -> None:
        super().__init__(id="opening")
        self.cases = {}
        self.sessions = {}

    def compose(self) -> ComposeResult:
        yield Static("faultfind · start or resume work", id="opening-title")
        with Horizontal(id="opening-top"):
            yield OptionList(id="choices")
            yield Static(id="about", markup=False)
        with Grid(id="form"):
            yield Static("circuit", classes="form-label")
            yield Input(placeholder="circuit file (TOML), or pick a field case above",
                        id="circuit", compact=True)
            yield Static("unit", classes="form-label")
            yield Input(placeholder="unit or asset tag, e.g. BP-2", id="unit", compact=True)
            yield Static("technician", classes="form-label")
            yield Input(placeholder="your name (optional)", id="technician", compact=True)
            yield Static("location", classes="form-label")
            yield Input(placeholder="site or panel (optional)", id="location", compact=True)
            yield Static("purpose", classes="form-label")
            yield Select([(p, p) for p in _PURPOSES], value="repair", allow_blank=False,
                         id="purpose", compact=True)
        with Horizontal(id="opening-actions"):
            yield Button("Start session ↵", id="start", variant="primary", compact=True)
            yield Static(id="opening-message")
        yield Footer()

    def on_mount(self) -> None:
        app = self.app
        self.cases = {c.name: c for c in find_cases(app.cases_dir)}
        if app.circuit_path:
            self.query_one("#circuit", Input).value = app.circuit_path
        self._fill_list()
        self._load_sessions()
        if app.circuit_path:
            self.query_one("#unit", Input).focus()
        else:
            self.query_one("#choices", OptionList).focus()

    # -- the list ------------------------------------------------------------------------

    def _fill_list(self) -> None:
        ol = self.query_one("#choices", OptionList)
        ol.clear_options()
        if self.sessions:
            ol.add_option(Option("OPEN SESSIONS · Enter resumes", disabled=True))
            for sid, s in self.sessions.items():
                ol.add_option(Option(_one_line(f"▸ #{sid} {s.unit} · {s.reading_count} "
                                               f"reading(s) · {s.circuit_title}"),
                                     id=f"session:{sid}"))
        if self.cases:
            ol.add_option(Option("FIELD CASES · Enter picks", disabled=True))
            for name, case in self.cases.items():
                ol.add_option(Option(_one_line(f"◇ {case.title}"), id=f"case:{name}"))
        if ol.option_count:
            ol.highlighted = self._initial_highlight(ol)
        else:
            self.query_one("#about", Static).update(
                "No field cases found here. Type the path of a circuit file below.")

    def _initial_highlight(self, ol) -> int:
        """The case of the circuit named on the command line, else the first choice."""
        from pathlib import Path

        named = self.app.circuit_path
        usable = [i for i in range(ol.option_count) if not ol.get_option_at_index(i).disabled]
        if named:
            try:
                target = Path(named).resolve()
            except OSError:
                target = None
            for i in usable:
                oid = ol.get_option_at_index(i).id or ""
                if oid.startswith("case:") and self.cases[oid[5:]].circuit.resolve() == target:
                    return i
        return usable[0]

    @work(thread=True, exclusive=True, group="sessions")
    def _load_sessions(self) -> None:
        try:
            book = self.app.open_logbook(create=False)
            found = [] if book is None else book.list_sessions(open_only=True)
        except Exception as exc:  # noqa: BLE001 - a bad logbook is reported, not raised
            self.app.call_from_thread(self._say, f"✗ logbook: {exc}", "bad")
            return
        self.app.call_from_thread(self._sessions_loaded, found)

    def _sessions_loaded(self, found) -> None:
        self.sessions = {s.id: s for s in reversed(found)}
        if found:
            self._fill_list()

    @on(OptionList.OptionHighlighted, "#choices")
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        oid = event.option.id or ""
        about = self.query_one("#about", Static)
        if oid.startswith("case:"):
            case = self.cases[oid[5:]]
            about.update(f"{case.title}\n\n{case.description}\n\nEnter picks it.")
        elif oid.startswith("session:"):
            s = self.sessions[int(oid[8:])]
            about.update(f"Session {s.id} · unit {s.unit} · {s.purpose}\n"
                         f"{s.circuit_title or s.circuit_name}\n"
                         f"technician: {s.technician or '—'}\n"
                         f"{s.reading_count} reading(s) · latest verdict: "
                         f"{s.latest_verdict or '—'}\n\nEnter resumes it.")

    @on(OptionList.OptionSelected, "#choices")
    def _option_selected(self, event: OptionList.OptionSelected) -> None:
        oid = event.option.id or ""
        if oid.startswith("session:"):
            self._resume(int(oid[8:]))
        elif oid.startswith("case:"):
            self.query_one("#circuit", Input).value = _shown_path(self.cases[oid[5:]].circuit)
            self.query_one("#unit", Input).focus()
            self._say("Now name the unit (asset tag) and press Enter.", "muted")

    # -- starting ------------------------------------------------------------------------

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        self.action_start()

    @on(Button.Pressed, "#start")
    def _pressed(self) -> None:
        self.action_start()

    def action_start(self) -> None:
        circuit = self.query_one("#circuit", Input).value.strip()
        unit = self.query_one("#unit", Input).value.strip()
        if not circuit:
            self._say("✗ circuit: pick a field case or type a circuit file's path", "bad")
            self.query_one("#circuit", Input).focus()
            return
        if not unit:
            self._say("✗ unit: name the unit or asset you work on (e.g. BP-2)", "bad")
            self.query_one("#unit", Input).focus()
            return
        fields = dict(unit=unit,
                      technician=self.query_one("#technician", Input).value.strip(),
                      location=self.query_one("#location", Input).value.strip(),
                      purpose=self.query_one("#purpose", Select).value)
        self._say("… starting the session", "muted")
        self._start_worker(circuit, fields)

    @work(thread=True, exclusive=True, group="start")
    def _start_worker(self, circuit: str, fields: dict) -> None:
        from ..bench import Bench

        app = self.app
        try:
            book = app.open_logbook(create=True)
            bench = Bench.start(book, circuit, meters=app.meters_path,
                                acknowledged_at=app.acknowledged_at,
                                priors=getattr(app, "priors", None), **fields)
        except Exception as exc:  # noqa: BLE001 - shown to the user, nothing started
            app.call_from_thread(self._say, f"✗ {exc}", "bad")
            return
        app.call_from_thread(self._open_bench, bench)

    def _resume(self, sid: int) -> None:
        self._say(f"… resuming session {sid}", "muted")
        self._resume_worker(sid)

    @work(thread=True, exclusive=True, group="start")
    def _resume_worker(self, sid: int) -> None:
        from ..bench import Bench

        app = self.app
        try:
            bench = Bench.resume(app.open_logbook(create=False), sid,
                                 acknowledged_at=app.acknowledged_at,
                                 priors=getattr(app, "priors", None))
        except Exception as exc:  # noqa: BLE001
            app.call_from_thread(self._say, f"✗ {exc}", "bad")
            return
        app.call_from_thread(self._open_bench, bench)

    def _open_bench(self, bench) -> None:
        from .bench import BenchScreen

        self.app.switch_screen(BenchScreen(bench))

    # -- small things --------------------------------------------------------------------

    def _say(self, text: str, kind: str = "muted") -> None:
        msg = self.query_one("#opening-message", Static)
        msg.update(escape(text))
        msg.set_classes(kind)

    def action_help(self) -> None:
        from .help import HelpScreen

        self.app.push_screen(HelpScreen(self))

    def action_focus_list(self) -> None:
        self.query_one("#choices", OptionList).focus()

    def action_new_circuit(self) -> None:
        from .editor import open_editor

        open_editor(self.app, None, self._circuit_saved)

    def action_edit_circuit(self) -> None:
        from .editor import open_editor

        open_editor(self.app, self.query_one("#circuit", Input).value.strip() or None,
                    self._circuit_saved)

    def _circuit_saved(self, path) -> None:
        if path:
            self.query_one("#circuit", Input).value = path
            self.query_one("#unit", Input).focus()
            self._say(f"Saved {path}. Now name the unit (asset tag) and press Enter.", "muted")


def _one_line(text: str) -> str:
    """An option prompt (opening.tcss keeps it to one line, cut with an ellipsis)."""
    return text


def _shown_path(path) -> str:
    """A case's circuit path relative to the working folder when it is under it."""
    from pathlib import Path

    try:
        return str(Path(path).resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)
