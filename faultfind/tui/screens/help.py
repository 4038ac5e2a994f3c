"""Help: every key of the screen it was opened from, and a short guide for first use."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Vertical, VerticalScroll
from textual.screen import ModalScreen, Screen
from textual.widgets import Static

__all__ = ["HelpScreen", "FIRST_USE", "key_names", "bindings_of"]

#: The guide for first use, step by step.
FIRST_USE = (
    "Pick the circuit (a bundled field case or your circuit file), name the unit, "
    "press Enter: a logbook session starts.",
    "The NEXT READING box says what to measure and whether the circuit must be "
    "POWER ON (live) or POWER OFF (isolated). Press t to take it: the entry opens with "
    "the probe points filled in; type the meter's display and press Enter.",
    "Or press n and type any reading: V +24V 23.91 · V F1 23.9 (across F1) · "
    "I H1 2.4mA · R F1 OL · Rlifted K1 180. Tab completes node and part names; the "
    "line under the entry checks it as you type.",
    "Each reading is stored in the logbook first, then the findings are worked out "
    "again: the most probable fault is at the top, with its probability.",
    "Before a resistance reading isolate the circuit, lock it out, verify it dead and "
    "discharge it, then press o to mark it isolated. Press o again when power is back.",
    "When the fault is found and confirmed, press c to record the outcome, then x to "
    "export the work-order report. h shows earlier sessions of the unit.",
)

_NAMES = {"question_mark": "?", "escape": "Esc", "enter": "Enter", "space": "Space",
          "tab": "Tab", "up": "↑", "down": "↓", "delete": "Del", "slash": "/"}


def key_names(keys: str) -> str:
    """``"f1,question_mark"`` -> ``"F1 / ?"``."""
    out = []
    for k in keys.split(","):
        k = k.strip()
        if k in _NAMES:
            out.append(_NAMES[k])
        elif len(k) >= 2 and k[0] == "f" and k[1:].isdigit():
            out.append(k.upper())
        else:
            out.append(k)
    return " / ".join(out)


def bindings_of(*classes) -> list[tuple[str, str]]:
    """(keys, text) of every binding of these classes, in order, once each (the
    binding's tooltip, else its description)."""
    seen, out = set(), []
    for cls in classes:
        for b in getattr(cls, "BINDINGS", []):
            if not isinstance(b, Binding):
                b = Binding(*b)
            if b.action in seen or not b.description:
                continue
            seen.add(b.action)
            out.append((key_names(b.key), b.tooltip or b.description))
    return out


class HelpScreen(ModalScreen[None]):
    """Every key of ``screen`` (and the app's), plus the first-use guide.

    Parameters
    ----------
    screen : Screen
        The screen help was opened from.
    extra : sequence of (str, str), optional
        More (keys, description) rows, e.g. the reading entry's own keys.
    """

    CSS_PATH = "help.tcss"
    BINDINGS = [Binding("escape,q,f1,question_mark", "close", "close help")]

    def __init__(self, screen: Screen, extra=()) -> None:
        super().__init__(id="help")
        self.for_screen = screen
        self.extra = list(extra) + list(getattr(screen, "HELP_EXTRA", ()))

    def compose(self) -> ComposeResult:
        rows = bindings_of(type(self.for_screen)) + self.extra + bindings_of(type(self.app))
        with Vertical(id="help-box"):
            yield Static("HELP · Esc closes", id="help-title")
            with VerticalScroll(id="help-body"):
                yield Static("First use", classes="help-head")
                with Grid(id="help-steps", classes="help-grid"):
                    for i, step in enumerate(FIRST_USE, 1):
                        yield Static(f"{i}.", classes="help-key")
                        yield Static(step, markup=False)
                yield Static("Keys", classes="help-head")
                with Grid(id="help-keys", classes="help-grid"):
                    for keys, text in rows:
                        yield Static(keys, classes="help-key", markup=False)
                        yield Static(text, markup=False)
                yield Static("Full guide: docs/ui.md · safety: docs/safety.md",
                             classes="muted")

    def action_close(self) -> None:
        self.dismiss(None)
