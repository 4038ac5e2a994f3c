"""Close-out: record what was found, how it was confirmed and what was done.

The first field is prefilled with the most probable finding when the
verdict is a fault (``F1:open``); it takes parts as ``REF:MODE`` separated
by commas, or ``none`` for no fault found.  Enter moves to the next field and
records from the last one; ``ctrl+s`` records from any field.  A closed
session is kept as it is.
"""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Vertical
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Input, Static

__all__ = ["CloseoutScreen", "prefill_found"]

_FIELDS = ("found", "confirmed", "action", "notes")


def prefill_found(doc) -> str:
    """``"F1:open"`` for the most probable finding of a fault verdict, else ``""``."""
    if not doc or doc.get("verdict") != "fault" or not doc.get("hypotheses"):
        return ""
    return ", ".join(f"{f['ref']}:{f['mode']}" for f in doc["hypotheses"][0]["faults"])


class CloseoutScreen(ModalScreen[bool]):
    """The outcome form; dismissed with True once the session is closed.

    Parameters
    ----------
    bench : faultfind.tui.bench.Bench
    doc : dict or None
        The latest diagnosis document (prefills the finding).
    """

    CSS_PATH = "closeout.tcss"
    BINDINGS = [
        Binding("ctrl+s", "record", "record the outcome"),
        Binding("escape", "cancel", "cancel"),
    ]

    def __init__(self, bench, doc) -> None:
        super().__init__(id="closeout")
        self.bench = bench
        self.doc = doc

    def compose(self) -> ComposeResult:
        s = self.bench.session
        with Vertical(id="closeout-box"):
            yield Static(f"CLOSE OUT · session {s.id} · unit {s.unit}", id="closeout-title",
                         markup=False)
            with Grid(id="closeout-form"):
                yield Static("found", classes="form-label")
                yield Input(prefill_found(self.doc), id="found", compact=True,
                            select_on_focus=False,
                            placeholder="REF:MODE, e.g. F1:open; none: no fault found")
                yield Static("confirmed by", classes="form-label")
                yield Input(id="confirmed", compact=True,
                            placeholder="e.g. F1 reads OL out of its holder")
                yield Static("action", classes="form-label")
                yield Input(id="action", compact=True, placeholder="e.g. replaced F1 (1 A T)")
                yield Static("notes", classes="form-label")
                yield Input(id="notes", compact=True, placeholder="anything else (optional)")
            yield Static(id="closeout-check")
            yield Static("Enter: next field, records from the last · ctrl+s records · "
                         "Esc cancels", classes="muted")

    def on_mount(self) -> None:
        self.query_one("#found", Input).focus()
        self._check_found(self.query_one("#found", Input).value)

    @on(Input.Changed, "#found")
    def _found_changed(self, event: Input.Changed) -> None:
        self._check_found(event.value)

    def _check_found(self, text: str) -> None:
        from ..bench import parse_found

        out = self.query_one("#closeout-check", Static)
        try:
            found = parse_found(text, self.bench.circuit)
        except Exception as exc:  # noqa: BLE001 - InputError: shown
            out.update(f"[$error]✗ {escape(getattr(exc, 'message', str(exc)))}[/]")
            return
        if not found:
            out.update("records: [b]no fault found[/b]")
        else:
            what = ", ".join(f"{r} {m}" if m else r for r, m in found)
            out.update(f"records: [b]{escape(what)}[/b] found faulty")

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        i = _FIELDS.index(event.input.id)
        if i + 1 < len(_FIELDS):
            self.query_one(f"#{_FIELDS[i + 1]}", Input).focus()
        else:
            self.action_record()

    def action_record(self) -> None:
        values = {f: self.query_one(f"#{f}", Input).value for f in _FIELDS}
        self.query_one("#closeout-check", Static).update("… recording")
        self._record(values)

    @work(thread=True, exclusive=True)
    def _record(self, v: dict) -> None:
        try:
            self.bench.close(v["found"], confirmed_by=v["confirmed"].strip(),
                             action=v["action"].strip(), notes=v["notes"].strip())
        except Exception as exc:  # noqa: BLE001 - shown in the dialog, nothing closed
            self.app.call_from_thread(self._failed, exc)
            return
        self.app.call_from_thread(self.dismiss, True)

    def _failed(self, exc: Exception) -> None:
        msg = getattr(exc, "message", None) or str(exc)
        self.query_one("#closeout-check", Static).update(f"[$error]✗ {escape(msg)}[/]")

    def action_cancel(self) -> None:
        self.dismiss(False)
