"""The power-state dialog: the technician says the circuit is isolated, or live again.

Marking it isolated lists what must be done first and takes a deliberate
``y``; so does marking it live again.  Escape keeps the state as it was.
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

__all__ = ["PowerScreen", "TO_ISOLATED", "TO_LIVE"]

#: What must be done before the circuit is marked isolated.
TO_ISOLATED = (
    "every supply that can feed it is isolated (control, backup and second supplies too)",
    "locked out and tagged with your own lock",
    "verified dead with a proven tester: prove, test, prove",
    "capacitors and other stored energy discharged, and verified dead again",
)
#: What must be done before the circuit is marked live again.
TO_LIVE = (
    "tools and meter leads clear, covers and shrouds back where they belong",
    "your own locks and tags removed by you; people around told",
    "from now on every reading is live work: meter and leads rated for the "
    "measurement category and voltage (IEC 61010-1)",
)


class PowerScreen(ModalScreen[str | None]):
    """Confirm a change of the declared power state; dismissed with the new state or None.

    Parameters
    ----------
    current : {"on", "off"}
        The state now.
    """

    CSS_PATH = "power.tcss"
    BINDINGS = [
        Binding("y", "confirm", "confirm"),
        Binding("escape,n,q", "cancel", "keep it as it is"),
    ]

    def __init__(self, current: str) -> None:
        super().__init__(id="power")
        self.current = current
        self.target = "off" if current == "on" else "on"

    def compose(self) -> ComposeResult:
        from ..bench import POWER_WORDS

        sym, words = POWER_WORDS[self.target]
        now_sym, now_words = POWER_WORDS[self.current]
        items = TO_ISOLATED if self.target == "off" else TO_LIVE
        with Vertical(id="power-box", classes=f"to-{self.target}"):
            yield Static(f"Mark the circuit {sym} {words}?", id="power-title", markup=False)
            yield Static("Only when all of these are done:", classes="power-lead")
            yield Static("\n".join(f" ☐ {x}" for x in items), id="power-items", markup=False)
            yield Static(f"[b]y[/b]: yes, mark it {words}   ·   [b]Esc[/b]: keep it "
                         f"{now_sym} {now_words}", id="power-keys")

    def action_confirm(self) -> None:
        self.dismiss(self.target)

    def action_cancel(self) -> None:
        self.dismiss(None)
