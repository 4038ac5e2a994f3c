"""Words, symbols and bars the workspace shows (plain functions, no widgets).

Every state is written in words with a symbol; colour only repeats it.
"""

from __future__ import annotations

from types import SimpleNamespace

from textual.content import Content
from textual.markup import escape

__all__ = ["BAND_WORDS", "VERDICT_WORDS", "MARKUP", "tag", "prob_bar", "hypothesis_label",
           "short_label", "band_status", "power_text"]

#: Band status (keys of faultfind.io.report.STATUS) -> (symbol, words, style).
BAND_WORDS = {
    "in": ("✓", "in band", "ok"),
    "edge": ("≈", "EDGE", "warn"),
    "high": ("▲", "HIGH", "bad"),
    "low": ("▼", "LOW", "bad"),
    "struck": ("✗", "struck", "muted"),
}

#: Verdict -> (symbol, words, style).
VERDICT_WORDS = {
    "fault": ("▶", "FAULT FOUND", "bad"),
    "no-fault": ("✓", "NO FAULT SEEN", "ok"),
    "inconsistent": ("⚠", "INCONSISTENT READINGS", "warn"),
    None: ("·", "NO READINGS YET", "muted"),
}

#: Status name -> Textual markup style (theme variables, so that the daylight
#: theme recolours it).
MARKUP = {"ok": "$success", "warn": "$warning b", "bad": "$error b", "muted": "$text-muted",
          "live": "$warning b", "safe": "$success b", "head": "$secondary b",
          "key": "reverse $primary b"}


def tag(kind: str, text: str) -> str:
    """``text`` (escaped) in the markup style of a status name (:data:`MARKUP`)."""
    return f"[{MARKUP[kind]}]{escape(str(text))}[/]"


def prob_bar(p: float, width: int = 20) -> str:
    """A bar of ``width`` cells for a probability, in eighths: ``█████▍░░░░``."""
    p = min(max(float(p), 0.0), 1.0)
    eighths = int(round(p * width * 8))
    full, part = divmod(eighths, 8)
    bar = "█" * full + ("" if part == 0 else " ▏▎▍▌▋▊▉"[part])
    return bar + "░" * (width - len(bar))


def hypothesis_label(circuit, faults) -> str:
    """``F1 open``, ``R9 drifted to 6.1 kΩ (+30 %)``, ``healthy (no fault)``."""
    from faultfind.diagnose import describe_fault

    if not faults:
        return "healthy (no fault)"
    out = []
    for f in faults:
        ns = SimpleNamespace(ref=f["ref"], mode=f["mode"], value=f.get("value"),
                             seen=not (f["mode"] == "drift" and f.get("value") is None))
        try:
            out.append(describe_fault(circuit, ns))
        except (KeyError, TypeError, ZeroDivisionError):
            out.append(f"{f['ref']} {f['mode']}")
    return " + ".join(out)


def short_label(circuit, faults) -> str:
    """A compact label for the ranked list: ``F1 open``, ``R9 → 6.1 kΩ``, ``F1 high R``,
    ``PS1 → 28.5 V + K1 open``."""
    from faultfind.units import format_value

    if not faults:
        return "healthy (no fault)"
    out = []
    for f in faults:
        ref, mode, value = f["ref"], f["mode"], f.get("value")
        if mode != "drift":
            out.append(f"{ref} {mode}")
            continue
        try:
            p = circuit.part(ref)
        except KeyError:
            out.append(f"{ref} drift")
            continue
        if p.kind in ("fuse", "switch"):
            out.append(f"{ref} high R")
        elif value is None:
            out.append(f"{ref} off value")
        else:
            out.append(f"{ref} → {format_value(value, p.info.unit or '')}")
    return " + ".join(out)


def band_status(status: str) -> Content:
    """``✓ in band`` / ``▲ HIGH`` ... as styled content (the words carry the meaning)."""
    sym, words, kind = BAND_WORDS[status]
    return Content.from_markup(tag(kind, f"{sym} {words}"))


def power_text(power: str) -> str:
    """``↯ POWER ON · LIVE`` / ``⊘ POWER OFF · ISOLATED``."""
    from ..bench import POWER_WORDS

    sym, words = POWER_WORDS[power]
    return f"{sym} {words}"
