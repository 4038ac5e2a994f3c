"""What the readings cannot tell, and what to re-check."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.markup import escape

from .items import ItemList
from .text import tag

__all__ = ["ChecksView", "checks_markup"]


def checks_markup(doc):
    """Re-check hints, ambiguity groups, unseen parts and notes as ItemList rows."""
    if doc is None:
        return [(None, tag("muted", "Nothing yet: the checks appear with the first findings."))]
    rows = []
    recheck = doc.get("recheck", [])
    if recheck:
        rows.append((None, tag("warn", "⚠ INCONSISTENT READINGS · re-check:")))
        rows += [(tag("warn", "?"), escape(r)) for r in recheck]
        rows.append((tag("muted", "·"), tag("muted", "A reading typed wrong can be struck "
                                                     "out: tab 2, select it, press k.")))
        rows.append((None, ""))
    groups = doc.get("ambiguity_groups", [])
    rows.append((None, tag("head", "Cannot tell apart (ambiguity groups)")))
    if groups:
        rows += [("◇", escape(" / ".join(g))) for g in groups]
        rows.append((tag("muted", "·"), tag("muted", "These readings cannot tell the parts of "
                                                     "a group apart; a reading between them, "
                                                     "or a lifted part, would.")))
    else:
        rows.append(("·", "none: the readings tell every suspect apart"))
    unseen = doc.get("unseen", [])
    if unseen:
        rows.append((None, ""))
        rows.append((None, tag("head", "Not seen by any reading yet")))
        rows.append(("·", escape(", ".join(unseen))))
    notes = doc.get("notes", [])
    if notes:
        rows.append((None, ""))
        rows.append((None, tag("head", "Notes")))
        rows += [("·", escape(n)) for n in notes]
    return rows


class ChecksView(VerticalScroll):
    """Scrolling checks; :meth:`show` redraws them."""

    def compose(self) -> ComposeResult:
        yield ItemList(id="checks-body")

    def show(self, doc) -> None:
        self.query_one("#checks-body", ItemList).set_items(checks_markup(doc))
