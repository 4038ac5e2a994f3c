"""Earlier sessions of the same unit: when, who, what was read, what was found and done."""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

__all__ = ["HistoryScreen", "outcome_text"]


def outcome_text(outcome) -> str:
    """``F1 open``, ``no fault found``, ``open`` (no outcome yet)."""
    if outcome is None:
        return "open"
    return ", ".join(f"{r} {m}" if m else r for r, m in outcome.faults) or "no fault found"


class HistoryScreen(ModalScreen[None]):
    """The unit's sessions, oldest first; the highlighted one's details on the right.

    Parameters
    ----------
    bench : faultfind.tui.bench.Bench
    """

    CSS_PATH = "history.tcss"
    BINDINGS = [Binding("escape,q,h", "close", "close")]

    def __init__(self, bench) -> None:
        super().__init__(id="history")
        self.bench = bench
        self.sessions = {}

    def compose(self) -> ComposeResult:
        with Vertical(id="history-box"):
            yield Static(f"SESSIONS OF UNIT {self.bench.session.unit} · Esc closes",
                         id="history-title", markup=False)
            with Horizontal(id="history-body"):
                yield OptionList(id="history-list")
                with VerticalScroll(id="history-detail"):
                    yield Static(id="history-text")

    def on_mount(self) -> None:
        self._load()

    @work(thread=True, exclusive=True)
    def _load(self) -> None:
        try:
            found = self.bench.history()
        except Exception as exc:  # noqa: BLE001 - shown
            self.app.call_from_thread(self._show, escape(f"✗ {exc}"))
            return
        self.app.call_from_thread(self._fill, found)

    def _fill(self, found) -> None:
        from faultfind.io.logbook import format_time

        ol = self.query_one("#history-list", OptionList)
        self.sessions = {s.id: s for s in found}
        for s in found:
            mark = "●" if s.id == self.bench.session_id else "○"
            ol.add_option(Option(f"{mark} #{s.id} {format_time(s.started_at)[:10]} · "
                                 f"{outcome_text(s.outcome)}", id=str(s.id)))
        if found:
            ol.highlighted = len(found) - 1
        ol.focus()

    @on(OptionList.OptionHighlighted)
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        self._detail(int(event.option.id))

    @work(thread=True, exclusive=True, group="detail")
    def _detail(self, sid: int) -> None:
        from faultfind.io.circuit_versions import circuit_versions, version_label
        from faultfind.io.logbook import format_time
        from faultfind.io.session_tags import tags_of
        from faultfind.report import assess_session, describe_reading

        try:
            s = self.bench.book.get_session(sid)
            rows = assess_session(s)
            versions = circuit_versions(self.bench.book, sid)
            tags = tags_of(self.bench.book, sid)
        except Exception as exc:  # noqa: BLE001 - shown
            self.app.call_from_thread(self._show, escape(f"✗ {exc}"))
            return
        lines = [f"[b]Session {s.id}[/b] · {escape(s.purpose)} · "
                 f"{escape(s.technician or 'technician not recorded')}",
                 f"started {format_time(s.started_at)}"
                 + (f" · closed {format_time(s.ended_at)}" if s.ended_at else " · open"),
                 f"caution acknowledged: {format_time(s.caution_acknowledged_at) or 'NOT RECORDED'}",
                 f"circuit: {escape(s.circuit_name)} · "
                 f"{escape(version_label(versions[-1].version, versions[-1].sha256))}",
                 f"verdict: {escape(s.latest_verdict or '—')} · outcome: "
                 f"[b]{escape(outcome_text(s.outcome))}[/b]"]
        if tags:
            lines.insert(3, f"tags: {escape(', '.join(tags))}")
        if len(versions) > 1:
            # the circuit was edited during the session: each version and why
            lines.append(f"circuit edited in this session ({len(versions)} versions):")
            for v in versions:
                lines.append(escape(f"  {version_label(v.version, v.sha256)} "
                                    f"{format_time(v.created_at)} {v.reason}"))
        o = s.outcome
        if o is not None:
            if o.confirmed_by:
                lines.append(f"confirmed by: {escape(o.confirmed_by)}")
            if o.action:
                lines.append(f"action: {escape(o.action)}")
            if o.notes:
                lines.append(f"notes: {escape(o.notes)}")
        lines.append("")
        lines.append(f"[b]{len(rows)} reading(s)[/b]")
        for a in rows:
            lr = a.logged
            lines.append(escape(f"#{lr.seq} {describe_reading(lr.reading)} = {a.shown()}  "
                                f"{a.symbol} {a.words.split(' (')[0]}"))
        self.app.call_from_thread(self._show, "\n".join(lines))

    def _show(self, markup: str) -> None:
        self.query_one("#history-text", Static).update(markup)

    def action_close(self) -> None:
        self.dismiss(None)
