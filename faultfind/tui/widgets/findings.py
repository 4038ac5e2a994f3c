"""The findings: verdict, ranked hypotheses with probability bars, and why."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.markup import escape
from textual.widgets import Static

from .items import ItemList
from .text import VERDICT_WORDS, hypothesis_label, prob_bar, short_label, tag

__all__ = ["FindingsView", "findings_markup"]

_MARKS = {"for": ("+", "ok"), "against": ("−", "bad"), "value": ("≈", "warn")}


def findings_markup(doc, circuit, n_readings: int, *, bar_width: int = 20):
    """The findings of a ``diagnose --json`` document: (head markup, explanation rows).

    The head is the verdict and the ranked list with probability bars; the rows
    are ``(marker, text)`` pairs for :class:`~faultfind.tui.widgets.items.ItemList`.
    """
    if doc is None or n_readings == 0:
        return ("No readings yet. Take the NEXT READING: press "
                + tag("key", " t ") + ", type the meter's display, press Enter.\n"
                + tag("muted", "Or press n and type any reading, e.g. V +24V 23.91 or R F1 OL."),
                [])
    verdict = doc.get("verdict")
    sym, words, kind = VERDICT_WORDS.get(verdict, VERDICT_WORDS[None])
    hyps = doc.get("hypotheses", [])
    labels = [hypothesis_label(circuit, h["faults"]) for h in hyps]
    lines = []
    if verdict == "fault" and hyps:
        lines.append(tag(kind, f"{sym} {words}: {labels[0]}")
                     + f" · {hyps[0]['probability'] * 100:.1f} %")
    elif verdict == "no-fault":
        lines.append(tag(kind, f"{sym} {words}: the readings fit a healthy circuit"))
    elif verdict == "inconsistent":
        lines.append(tag(kind, f"{sym} {words}: no explanation fits; re-check (tab 4)"))
    shorts = [label if len(label) <= 30 else short_label(circuit, h["faults"])
              for h, label in zip(hyps, labels)]
    width = min(max([len(x) for x in shorts] + [10]), 30)
    for i, (h, label) in enumerate(zip(hyps, shorts), 1):
        p = h["probability"]
        shown = label if len(label) <= width else label[:width - 1] + "…"
        bar = prob_bar(p, bar_width)
        style = "head" if i == 1 else "muted"
        lines.append(f"{i} {escape(f'{shown:<{width}}')} {tag(style, bar)} {p * 100:5.1f} %")
    groups = doc.get("ambiguity_groups", [])
    if groups:
        shown = "; ".join(" / ".join(g) for g in groups[:3]) + (" …" if len(groups) > 3 else "")
        lines.append(tag("muted", "◇ cannot tell apart yet: ") + escape(shown)
                     + tag("muted", " (tab 4)"))
    rows = []
    for ex in doc.get("explanations", [])[:3]:
        i = ex.get("hypothesis", 0)
        if i >= len(labels):
            continue
        rows.append((None, ""))
        rows.append((None, tag("head", f"Why {labels[i]}" + (" (#1)" if i == 0 else ""))))
        for line in ex.get("lines", []):
            head = line.split(":", 1)[0]
            mark, style = _MARKS.get(head, ("·", "muted"))
            rows.append((tag(style, mark), escape(line)))
    notes = doc.get("notes", [])
    if notes:
        rows.append((None, ""))
        rows += [(tag("muted", "i"), tag("muted", note)) for note in notes]
    return "\n".join(lines), rows


class FindingsView(VerticalScroll):
    """Scrolling findings; :meth:`show` redraws them."""

    def compose(self) -> ComposeResult:
        yield Static(id="findings-body")
        yield ItemList(classes="findings-why")

    def show(self, doc, circuit, n_readings: int, circuit_note: str = "") -> None:
        """Redraw; ``circuit_note`` (markup) says which circuit version the findings used."""
        head, rows = findings_markup(doc, circuit, n_readings)
        if circuit_note and doc is not None and n_readings:
            head = f"{head}\n{circuit_note}"
        self.query_one("#findings-body", Static).update(head)
        self.query_one(ItemList).set_items(rows)

    def fail(self, markup: str) -> None:
        """Show an error instead of the findings."""
        self.query_one("#findings-body", Static).update(markup)
        self.query_one(ItemList).set_items([])
