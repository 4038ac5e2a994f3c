"""A yes/no question over the screen: ``y`` says yes, Esc (or ``n``) says no."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

__all__ = ["ConfirmScreen"]


class ConfirmScreen(ModalScreen[bool]):
    """Ask before something that cannot be taken back; dismissed with True or False.

    Parameters
    ----------
    question : str
    details : sequence of str
        Lines shown under the question (what would be lost).
    yes, no : str
        What ``y`` and Esc do, in words.
    """

    CSS_PATH = "confirm.tcss"
    BINDINGS = [
        Binding("y", "yes", "yes"),
        Binding("escape,n", "no", "no"),
    ]

    def __init__(self, question: str, details=(), *, yes: str = "yes", no: str = "no") -> None:
        super().__init__(id="confirm")
        self.question = question
        self.details = [str(d) for d in details]
        self.yes_words = yes
        self.no_words = no

    def compose(self) -> ComposeResult:
        with Vertical(id="confirm-box"):
            yield Static(self.question, id="confirm-question", markup=False)
            if self.details:
                yield Static("\n".join(f" · {d}" for d in self.details), id="confirm-details",
                             markup=False)
            yield Static(f"y: {self.yes_words}   ·   Esc: {self.no_words}", id="confirm-keys",
                         markup=False)

    def action_yes(self) -> None:
        self.dismiss(True)

    def action_no(self) -> None:
        self.dismiss(False)
