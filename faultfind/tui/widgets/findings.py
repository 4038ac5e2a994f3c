"""The findings: verdict, ranked hypotheses with probability bars, and why."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.markup import escape
from textual.widgets import Static

from .text import VERDICT_WORDS, hypothesis_label, prob_bar, tag

__all__ = ["FindingsView", "findings_markup"]

_MARKS = {"for": ("+", "ok"), "against": ("−", "bad"), "value": ("≈", "warn")}


def findings_markup(doc, circuit, n_readings: int, *, bar_width: int = 20) -> str:
    """The findings of a ``diagnose --json`` document as Textual markup."""
    if doc is None or n_readings == 0:
        return ("No readings yet. Take the NEXT READING: press "
                + tag("key", " t ") + ", type the meter's display, press Enter.\n"
                + tag("muted", "Or press n and type any reading, e.g. V +24V 23.91 or R F1 OL."))
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
    width = max([len(x) for x in labels] + [10])
    width = min(width, 30)
    for i, (h, label) in enumerate(zip(hyps, labels), 1):
        p = h["probability"]
        shown = label if len(label) <= width else label[:width - 1] + "…"
        bar = prob_bar(p, bar_width)
        style = "head" if i == 1 else "muted"
        lines.append(f"{i} {escape(f'{shown:<{width}}')} {tag(style, bar)} {p * 100:5.1f} %")
    for ex in doc.get("explanations", [])[:3]:
        i = ex.get("hypothesis", 0)
        if i >= len(labels):
            continue
        lines.append("")
        lines.append(tag("head", f"Why {labels[i]}" if i else f"Why {labels[0]} (#1)"))
        for line in ex.get("lines", []):
            head = line.split(":", 1)[0]
            mark, style = _MARKS.get(head, ("·", "muted"))
            lines.append(f" {tag(style, mark)} {escape(line)}")
    for note in doc.get("notes", []):
        lines.append(tag("muted", f"note: {note}"))
    return "\n".join(lines)


class FindingsView(VerticalScroll):
    """Scrolling findings; :meth:`show` redraws them."""

    def compose(self) -> ComposeResult:
        yield Static(id="findings-body")

    def show(self, doc, circuit, n_readings: int) -> None:
        self.query_one("#findings-body", Static).update(findings_markup(doc, circuit, n_readings))
