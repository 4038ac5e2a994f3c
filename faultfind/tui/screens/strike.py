"""Strike out a reading typed wrong: it stays in the logbook with the reason, and no
longer counts."""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Input, Static

__all__ = ["StrikeScreen"]


class StrikeScreen(ModalScreen[bool]):
    """Ask the reason and strike the reading out; dismissed with True when done.

    Parameters
    ----------
    bench : faultfind.tui.bench.Bench
    logged : faultfind.io.logbook.LoggedReading
    """

    CSS_PATH = "strike.tcss"
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, bench, logged) -> None:
        super().__init__(id="strike")
        self.bench = bench
        self.logged = logged

    def compose(self) -> ComposeResult:
        from faultfind.io.report import describe_reading

        rd = self.logged.reading
        with Vertical(id="strike-box"):
            yield Static(f"Strike out reading #{self.logged.seq}: {describe_reading(rd)} = "
                         f"{rd.raw}", id="strike-title", markup=False)
            yield Static("It stays in the logbook with your reason and no longer counts.",
                         classes="muted")
            yield Input(placeholder="reason, e.g. probe on the wrong terminal",
                        id="strike-reason", compact=True)
            yield Static("Enter strikes it out · Esc keeps it", id="strike-message")

    def on_mount(self) -> None:
        self.query_one("#strike-reason", Input).focus()

    @on(Input.Submitted)
    def _submit(self, event: Input.Submitted) -> None:
        reason = event.value.strip()
        if not reason:
            self.query_one("#strike-message", Static).update("✗ give a reason")
            return
        self._strike(reason)

    @work(thread=True, exclusive=True)
    def _strike(self, reason: str) -> None:
        try:
            self.bench.strike(self.logged.seq, reason)
        except Exception as exc:  # noqa: BLE001 - shown in the dialog
            self.app.call_from_thread(self.query_one("#strike-message", Static).update,
                                      escape(f"✗ {exc}"))
            return
        self.app.call_from_thread(self.dismiss, True)

    def action_cancel(self) -> None:
        self.dismiss(False)
