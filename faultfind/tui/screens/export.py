"""Export the work-order report of the session (HTML with a chart, or Markdown)."""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Input, Static

__all__ = ["ExportScreen"]


class ExportScreen(ModalScreen[str | None]):
    """Ask the file name and write the report; dismissed with what was written, or None.

    Parameters
    ----------
    bench : faultfind.tui.bench.Bench
    folder : pathlib.Path, optional
        Folder offered (default: the working folder).
    """

    CSS_PATH = "export.tcss"
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, bench, folder=None) -> None:
        super().__init__(id="export")
        self.bench = bench
        self.folder = Path(folder) if folder is not None else None

    def compose(self) -> ComposeResult:
        s = self.bench.session
        name = self.bench.default_report_name()
        path = str(self.folder / name) if self.folder is not None else name
        state = "open" if s.ended_at is None else "closed"
        with Vertical(id="export-box"):
            yield Static(f"WORK-ORDER REPORT · session {s.id} ({state}) · unit {s.unit}",
                         id="export-title", markup=False)
            yield Static("File: ends in .html (a page with a chart) or .md (Markdown).",
                         classes="muted")
            yield Input(path, id="export-path", compact=True)
            yield Static("Enter writes it · Esc cancels", id="export-message")

    def on_mount(self) -> None:
        self.query_one("#export-path", Input).focus()

    @on(Input.Submitted)
    def _submit(self, event: Input.Submitted) -> None:
        self.query_one("#export-message", Static).update("… writing")
        self._write_report(event.value)

    @work(thread=True, exclusive=True)
    def _write_report(self, path: str) -> None:
        try:
            fmt, written = self.bench.export(path)
        except Exception as exc:  # noqa: BLE001 - InputError: shown, nothing written
            msg = getattr(exc, "message", None) or str(exc)
            where = getattr(exc, "file", None)
            text = f"✗ {msg}" + (f" ({where})" if where else "")
            self.app.call_from_thread(self.query_one("#export-message", Static).update,
                                      f"[$error]{escape(text)}[/]")
            return
        words = "HTML" if fmt == "html" else "Markdown"
        self.app.call_from_thread(self.dismiss, f"wrote the {words} report: {written}")

    def action_cancel(self) -> None:
        self.dismiss(None)
