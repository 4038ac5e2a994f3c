"""The NEXT READING box: what to measure next, with its power state in words and a symbol."""

from __future__ import annotations

from textual.markup import escape
from textual.widgets import Static

from .text import tag

__all__ = ["NextReading", "describe_suggestion"]


def describe_suggestion(s: dict) -> str:
    """``V dc +24V to 24V-F (across F1)``, ``R F1``, ``R K1 lifted``, ``D D3``."""
    q = s["quantity"]
    if q == "diode-test":
        text = "D " + (s["part"] or f"{s['plus']} to {s['minus']}") + " (diode test)"
    elif q == "resistance":
        where = s["part"] or f"{s['plus']} to {s['minus']}"
        text = f"R {where}" + (" lifted" if s.get("setup") == "lifted" else "")
    elif q == "current":
        text = f"I {s['mode']} through {s['part']}"
    else:
        text = f"V {s['mode']} {s['plus']} to {s['minus']}"
    if s.get("frequency"):
        from faultfind.units import format_value
        text += f" @ {format_value(s['frequency'], 'Hz')}"
    label = s.get("label") or ""
    if label and not label.startswith(("node ", "through ")):
        text += f" ({label})"
    return text


class NextReading(Static):
    """The best next reading, always on screen; ``t`` takes it into the entry."""

    def show(self, suggestions, power: str, *, verdict=None, best=None, is_open=True,
             working=False) -> None:
        """Show the first of ``suggestions`` (dicts of ``suggestion_json``)."""
        from ..bench import POWER_WORDS

        self.border_title = "NEXT READING"
        if not is_open:
            self.border_subtitle = ""
            self.update(tag("muted", "The session is closed. x exports the report, h shows the "
                                     "unit's sessions, ctrl+n starts another."))
            return
        if not suggestions:
            self.border_subtitle = ""
            if working:
                self.update(tag("muted", "working out the best next reading …"))
            elif verdict == "inconsistent":
                self.update(tag("warn", "⚠ Re-check first:") + " the readings that do not fit "
                            "are listed in tab 4 (press 4). A reading typed wrong is struck out "
                            "in tab 2 with k.")
            elif verdict == "fault" and best:
                self.update(f"No reading would change the findings now.\n"
                            f"Confirm {tag('head', best)} with the circuit isolated, then press "
                            f"{tag('key', ' c ')} to close out.")
            else:
                self.update("No suggestion: press " + tag("key", " n ") + " to type any reading.")
            return
        s = suggestions[0]
        need = s["power"]
        sym, words = POWER_WORDS[need]
        badge = tag("live" if need == "on" else "safe", f"{sym} {words}")
        lines = [f"{badge}  {tag('head', describe_suggestion(s))}"]
        if need != power:
            if need == "off":
                lines[0] += "  " + tag("warn", "isolate first, then o")
            else:
                lines[0] += "  " + tag("warn", "re-energize first, then o")
        lines.append(escape(s.get("why") or ""))
        if s.get("caution"):
            lines.append(tag("muted", "caution: " + s["caution"]))
        self.border_subtitle = "t takes it"
        self.update("\n".join(lines))
