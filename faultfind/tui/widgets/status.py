"""The status line at the top of the bench: power state, session, verdict, progress."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.widgets import ProgressBar, Static

from .text import VERDICT_WORDS, tag

__all__ = ["StatusLine", "STAGE_WORDS", "stage_words"]

#: Diagnosis stage (as :func:`faultfind.diagnose.diagnose` reports it) -> (words for the
#: status line, how far through the diagnosis it starts, 0..1).  Kept short: at 80
#: columns the status line also holds the power badge and the session summary.
STAGE_WORDS = {
    "setting up": ("setting up the equations", 0.0),
    "ranking": ("ranking fault hypotheses", 0.1),
    "screening": ("ranking: screening parts", 0.1),
    "grouping": ("grouping look-alike parts", 0.6),
    "advising": ("weighing the next readings", 0.7),
    "estimating": ("estimating part values", 0.9),
    "done": ("storing the diagnosis", 1.0),
}
#: Share of the diagnosis the screening of a large circuit covers (from its start).
_SCREEN_SHARE = 0.5


def stage_words(stage, done=None, total=None) -> tuple[str, float | None]:
    """Words and fraction (0..1) of a diagnosis stage, for the status line.

    Parameters
    ----------
    stage : str
        A stage of :func:`faultfind.diagnose.diagnose`'s ``progress`` calls.
    done, total : int or None
        Parts screened so far and parts to screen (``"screening"`` only).

    Returns
    -------
    text : str
        E.g. ``"ranking: screening 128/640 parts"``.
    fraction : float or None
        How far through the diagnosis; None for a stage this table does not know
        (the bar stays where it is).
    """
    if stage not in STAGE_WORDS:
        return f"diagnosing: {stage}", None
    text, fraction = STAGE_WORDS[stage]
    if stage == "screening":
        try:
            done, total = int(done), int(total)
        except (TypeError, ValueError):  # no counts: the words alone
            return text, fraction
        if total > 0:
            done = min(max(done, 0), total)
            text = f"ranking: screening {done}/{total} parts"
            fraction += _SCREEN_SHARE * done / total
    return text, fraction


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

    def busy(self, step: int, text: str, fraction: float | None = 0.0) -> None:
        """Show ``text`` and the bar at ``step`` of 3 (1: diagnosis, 2: advice), plus
        ``fraction`` (0..1) of that step done; ``fraction`` None leaves the bar as is."""
        self.query_one("#busy", Static).update(tag("muted", f"⟳ {text}"))
        bar = self.query_one("#progress", ProgressBar)
        bar.display = True
        if fraction is not None:
            bar.update(progress=step + min(max(float(fraction), 0.0), 1.0))
        self.query_one("#busy").display = True

    def idle(self) -> None:
        self.query_one("#busy", Static).display = False
        bar = self.query_one("#progress", ProgressBar)
        bar.display = False
        bar.update(progress=0)
