"""A list of marked lines that wrap under their text, not under their marker."""

from __future__ import annotations

from textual.containers import Horizontal, Vertical
from textual.widgets import Static

__all__ = ["ItemList"]


class ItemList(Vertical):
    """Rows of (marker, text), both Textual markup; long text wraps with a hanging indent.

    A row whose marker is ``None`` is a heading over both columns.
    """

    DEFAULT_CSS = """
    ItemList {
        height: auto;
    }
    ItemList > .item-row {
        height: auto;
    }
    ItemList .item-mark {
        width: 3;
    }
    ItemList .item-text {
        width: 1fr;
    }
    """

    def set_items(self, rows) -> None:
        """Replace the rows: a list of ``(marker, text)`` markup pairs."""
        widgets = []
        for marker, text in rows:
            if marker is None:
                widgets.append(Static(text, classes="item-head"))
            else:
                widgets.append(Horizontal(Static(marker, classes="item-mark"),
                                          Static(text, classes="item-text"),
                                          classes="item-row"))
        with self.app.batch_update():
            self.remove_children()
            if widgets:
                self.mount(*widgets)

    def plain(self) -> str:
        """The rows as plain text (for tests and the log)."""
        out = []
        for w in self.query(Static):
            out.append(getattr(w.visual, "plain", ""))
        return "\n".join(out)
