"""The quick reading entry: one line, completion of kinds, nodes and parts, checked as typed.

The grammar is :mod:`faultfind.tui.entry`'s.  ``Tab`` accepts the grey
completion (and adds the space after it); ``Enter`` stores; ``Esc`` leaves.
The line under the input says what the reading is, the band a healthy
circuit reads in, and whether Enter would store it; the line under that
lists what may be typed next.
"""

from __future__ import annotations

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.markup import escape
from textual.message import Message
from textual.suggester import Suggester
from textual.widgets import Input, Static

from ..entry import EXAMPLES, complete
from .text import BAND_WORDS, tag

__all__ = ["ReadingEntry", "EntryInput", "EntrySuggester"]


class EntrySuggester(Suggester):
    """Completes the word being typed from the circuit's kinds, nodes and parts."""

    def __init__(self, circuit) -> None:
        super().__init__(use_cache=False, case_sensitive=True)
        self.circuit = circuit

    async def get_suggestion(self, value: str) -> str | None:
        return complete(value, self.circuit).completed(value)


class EntryInput(Input):
    """The entry's input: Tab completes instead of moving the focus."""

    BINDINGS = [Binding("tab", "complete", "complete a name", show=False)]

    def action_complete(self) -> None:
        suggestion = self._suggestion
        if suggestion and self.cursor_at_end and len(suggestion) > len(self.value):
            comp = complete(self.value, self.suggester.circuit)
            self.value = suggestion + ("" if comp.what in ("value", "node") else " ")
            self.cursor_position = len(self.value)


class ReadingEntry(Vertical):
    """Input, check line and hint line.  Posts :class:`ReadingEntry.Commit` on Enter."""

    class Commit(Message):
        """Enter was pressed on a line the preview accepted (or not yet checked)."""

        def __init__(self, text: str) -> None:
            super().__init__()
            self.text = text

    def __init__(self, bench, **kwargs) -> None:
        super().__init__(**kwargs)
        self.bench = bench
        self.sticky: str | None = None  # a line whose commit failed: keep that message

    def compose(self) -> ComposeResult:
        yield EntryInput(placeholder="n: type a reading · t: take the NEXT READING",
                         suggester=EntrySuggester(self.bench.circuit), id="entry-input",
                         compact=True, select_on_focus=False)
        yield Static(id="entry-check")
        yield Static(id="entry-hint")

    def on_mount(self) -> None:
        self.border_title = "READING"
        self.border_subtitle = "Enter stores · Tab completes · Esc leaves"
        self.show_idle()

    @property
    def input(self) -> EntryInput:
        return self.query_one("#entry-input", EntryInput)

    def open(self, text: str = "", cursor: int | None = None) -> None:
        """Focus the input with ``text``, the cursor at ``cursor`` (default: the end)."""
        inp = self.input
        inp.disabled = False
        inp.value = text
        inp.focus()
        inp.cursor_position = len(text) if cursor is None else cursor
        self.add_class("open")
        self.update_preview(text)

    def leave(self) -> None:
        self.remove_class("open")
        self.screen.set_focus(None)
        self.show_idle()

    def show_idle(self) -> None:
        if not self.input.value:
            self.say(tag("muted", f"e.g. {EXAMPLES}"))
            self.hint("")

    def say(self, markup: str) -> None:
        self.query_one("#entry-check", Static).update(markup)

    def hint(self, markup: str) -> None:
        self.query_one("#entry-hint", Static).update(markup)

    # -- as the line is typed ------------------------------------------------------------

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        self.update_preview(event.value)

    def update_preview(self, text: str, *, force: bool = False) -> None:
        """Redraw the hint and check lines for ``text`` (``force``: also after a failed
        commit of the same line)."""
        if force:
            self.sticky = None
        inp = self.input
        head = text[:inp.cursor_position] if inp.value == text else text
        comp = complete(head, self.bench.circuit)
        self._show_hint(comp)
        if not text.strip():
            if inp.has_focus:
                self.say(tag("muted", f"e.g. {EXAMPLES}"))
            return
        self._preview(text)

    def _show_hint(self, comp) -> None:
        if comp.what == "value":
            self.hint(tag("muted", "display: 23.91 · 23.91 V · 4k61 · 2.45 mA · OL "
                                   "(then @ FREQ, # label)"))
            return
        if comp.what in ("label", "frequency", "row"):
            self.hint("")
            return
        words = " ".join(comp.candidates) if comp.candidates else "(none match)"
        width = max(self.size.width - len(comp.what) - 6, 20)
        if len(words) > width:
            words = words[:width - 1].rsplit(" ", 1)[0] + " …"
        self.hint(f"{tag('muted', comp.what + ':')} {escape(words)}")

    @work(thread=True, exclusive=True, group="entry-preview")
    def _preview(self, text: str) -> None:
        try:
            pv = self.bench.preview(text)
        except Exception as exc:  # noqa: BLE001 - shown, never raised into the UI
            pv = None
            msg = tag("bad", f"✗ {exc}")
        else:
            msg = _preview_markup(pv)
        self.app.call_from_thread(self._preview_done, text, msg)

    def _preview_done(self, text: str, msg: str) -> None:
        if self.input.value == text and self.sticky != text:
            self.say(msg)

    def on_input_blurred(self, event: Input.Blurred) -> None:
        self.remove_class("open")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if event.value.strip():
            self.post_message(self.Commit(event.value))


def _preview_markup(pv) -> str:
    """The check line for a :class:`faultfind.tui.bench.Preview`."""
    if pv.reading is None:
        return tag("bad", f"✗ {pv.text}")
    band = f"healthy {pv.expected} ({pv.band})" if pv.expected != "OL" else \
        "healthy: OL (no path)"
    if pv.refused:
        return tag("bad", f"⊘ {pv.text}")
    if not pv.ok:
        return f"{escape(pv.text)} · {tag('muted', band)}"
    sym, words, kind = BAND_WORDS[pv.status]
    return (f"{tag('ok', '↵')} {escape(pv.text)} · {escape(band)} · "
            f"{tag(kind, f'{sym} {words}')} · {tag('muted', 'Enter stores it')}")
