"""What the readings cannot tell, and what to re-check."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.markup import escape
from textual.widgets import Static

from .text import tag

__all__ = ["ChecksView", "checks_markup"]


def checks_markup(doc) -> str:
    """Re-check hints, ambiguity groups, unseen parts and notes as markup."""
    if doc is None:
        return tag("muted", "Nothing yet: the checks appear with the first findings.")
    lines = []
    recheck = doc.get("recheck", [])
    if recheck:
        lines.append(tag("warn", "⚠ INCONSISTENT READINGS · re-check:"))
        lines += [f" {tag('warn', '?')} {escape(r)}" for r in recheck]
        lines.append(tag("muted", " A reading typed wrong can be struck out: tab 2, select "
                                  "it, press k."))
        lines.append("")
    groups = doc.get("ambiguity_groups", [])
    lines.append(tag("head", "Cannot tell apart (ambiguity groups)"))
    if groups:
        for g in groups:
            lines.append(f" ◇ {escape(' / '.join(g))}")
        lines.append(tag("muted", " These readings cannot tell the parts of a group apart; a "
                                  "reading between them, or a lifted part, would."))
    else:
        lines.append(" none: the readings tell every suspect apart")
    unseen = doc.get("unseen", [])
    if unseen:
        lines.append("")
        lines.append(tag("head", "Not seen by any reading yet"))
        lines.append(" " + escape(", ".join(unseen)))
    notes = doc.get("notes", [])
    if notes:
        lines.append("")
        lines.append(tag("head", "Notes"))
        lines += [f" · {escape(n)}" for n in notes]
    return "\n".join(lines)


class ChecksView(VerticalScroll):
    """Scrolling checks; :meth:`show` redraws them."""

    def compose(self) -> ComposeResult:
        yield Static(id="checks-body")

    def show(self, doc) -> None:
        self.query_one("#checks-body", Static).update(checks_markup(doc))
