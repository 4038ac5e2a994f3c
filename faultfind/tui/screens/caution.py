"""The safety caution: always the first screen, acknowledged with a deliberate key.

Nothing else is reachable before it is acknowledged: its only keys are
``a`` (arm), then ``y`` (confirm), and quit (``q``, ``Esc``, ``ctrl+c``,
``ctrl+q``).  ``Enter``, ``Space`` and every other key do nothing but
disarm, so a stray key or a key held down cannot acknowledge it.  The
screen opens no file: quitting from it leaves nothing behind.  The time of
the acknowledgement is returned to the app, which records it in the
session's logbook entry when the session starts or resumes.
"""

from __future__ import annotations

from datetime import datetime, timezone

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import Static

__all__ = ["CautionScreen", "CAUTION_ITEMS", "CAUTION_TITLE"]

CAUTION_TITLE = "SAFETY CAUTION · read this before you take any reading"

#: (heading, text) of each point of the caution.  docs/safety.md explains
#: them; the wording is faultfind's own.
CAUTION_ITEMS = (
    ("Live work",
     "Power-on readings are live work: meter and leads rated for the measurement "
     "category (CAT II, III or IV; IEC 61010-1) and the voltage where you probe."),
    ("Isolate",
     "Before resistance or continuity readings and diode tests, or opening a circuit for "
     "current: isolate, lock out and tag out."),
    ("Verify dead",
     "Verify dead with a proven tester: prove the tester, test, prove it again."),
    ("Stored energy",
     "Discharge capacitors and other stored energy (batteries, UPS, second supplies), "
     "then verify dead again."),
    ("One hand",
     "Where a shock could be dangerous, keep one hand away: clip one lead on and probe "
     "with the other hand."),
    ("PPE",
     "Wear what your site's risk assessment asks for: safety glasses at least; insulating "
     "gloves and arc-rated clothing where there is shock or arc-flash risk."),
    ("Decision aid",
     "faultfind is a decision aid that knows only the schematic you give it. Local codes, "
     "the maker's instructions and licensed practice come first."),
)


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


class CautionScreen(Screen[str]):
    """The safety caution.  Dismissed with the acknowledgement time (ISO 8601, UTC).

    Keys: ``a`` then ``y`` acknowledge; ``q``, ``Esc``, ``ctrl+c`` quit the
    app (``ctrl+q`` too, from the app).  Any other key cancels an ``a``.
    """

    CSS_PATH = "caution.tcss"
    AUTO_FOCUS = "#caution-items"
    BINDINGS = [
        Binding("a", "arm", "acknowledge (then y)"),
        Binding("y", "confirm", "confirm", show=False),
        Binding("q,escape", "leave", "quit, nothing saved"),
    ]

    def __init__(self) -> None:
        super().__init__(id="caution")
        self.armed = False

    def compose(self) -> ComposeResult:
        with Vertical(id="caution-box"):
            yield Static(CAUTION_TITLE, id="caution-title")
            with VerticalScroll(id="caution-items"):
                for head, text in CAUTION_ITEMS:
                    yield Static(f"[b]{head}[/b]", classes="caution-head", markup=True)
                    yield Static(text, classes="caution-text", markup=False)
                yield Static("More: docs/safety.md.", classes="caution-more")
            yield Static(id="caution-keys")

    def on_mount(self) -> None:
        self._show_keys()

    def _show_keys(self) -> None:
        keys = self.query_one("#caution-keys", Static)
        if self.armed:
            keys.update("[b]Press y[/b] to confirm you have read this and will work by it.  "
                        "Any other key cancels.")
            keys.add_class("armed")
        else:
            keys.update("[b]a[/b] then [b]y[/b]: I have read this   ·   "
                        "[b]q[/b] / [b]Esc[/b]: quit (nothing is saved)")
            keys.remove_class("armed")

    def on_key(self, event: events.Key) -> None:
        if event.key not in ("a", "y", "q", "escape", "ctrl+c", "ctrl+q") and self.armed:
            self.armed = False
            self._show_keys()

    def action_arm(self) -> None:
        self.armed = True
        self._show_keys()

    def action_confirm(self) -> None:
        if not self.armed:
            self.notify("Press a first, then y.", timeout=3)
            return
        self.dismiss(_now())

    def action_leave(self) -> None:
        self.app.exit(return_code=0)
