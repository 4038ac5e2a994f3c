"""The status line at the top of the bench: power state, session, verdict, progress."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.widgets import ProgressBar, Static

from .text import VERDICT_WORDS, tag

__all__ = ["StatusLine"]


class StatusLine(Horizontal):
    """Power badge, session summary, verdict, and a progress bar while work runs."""

    def compose(self) -> ComposeResult:
        yield Static(id="power-badge")
        yield Static(id="session-info", markup=True)
        yield Static(id="busy")
        yield ProgressBar(total=3, show_eta=False, show_percentage=False, id="progress")

    def on_mount(self) -> None:
        self.idle()

    def show_power(self, power: str) -> None:
        from ..bench import POWER_WORDS

        sym, words = POWER_WORDS[power]
        badge = self.query_one("#power-badge", Static)
        badge.update(f" {sym} {words} ")
        badge.set_class(power == "on", "live")
        badge.set_class(power == "off", "isolated")

    def show_session(self, bench, verdict=None, label=None, probability=None) -> None:
        s = bench.session
        n = len(bench.readings())
        sym, words, kind = VERDICT_WORDS.get(verdict, VERDICT_WORDS[None])
        if not bench.is_open:
            state = tag("muted", "CLOSED")
        elif verdict == "fault" and label:
            state = tag(kind, f"{sym} {label} {probability * 100:.0f} %")
        else:
            state = tag(kind, f"{sym} {words}") if n or verdict else tag("muted", "no readings yet")
        self.query_one("#session-info", Static).update(
            f"{tag('head', s.unit)} #{s.id} · {n} rdg · {state}")

    def busy(self, step: int, text: str) -> None:
        self.query_one("#busy", Static).update(tag("muted", f"⟳ {text}"))
        bar = self.query_one("#progress", ProgressBar)
        bar.display = True
        bar.update(progress=step)
        self.query_one("#busy").display = True

    def idle(self) -> None:
        self.query_one("#busy", Static).display = False
        bar = self.query_one("#progress", ProgressBar)
        bar.display = False
        bar.update(progress=0)
