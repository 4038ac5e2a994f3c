"""Shared output helpers of the command line: JSON documents and text tables."""

from __future__ import annotations

import json
import math
import sys

from ..model import Reading
from ..units import format_value

__all__ = ["emit_json", "reading_json", "describe_reading", "table", "fmt"]


def _clean(obj):
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    return obj


def emit_json(doc, stream=None) -> None:
    """Print one JSON document (non-finite numbers become null)."""
    stream = stream or sys.stdout
    json.dump(_clean(doc), stream, indent=2, ensure_ascii=False)
    stream.write("\n")


def reading_json(rd: Reading, unit: str) -> dict:
    """A reading in the readings file's terms, with the keys cli.md fixes."""
    return {"quantity": rd.quantity, "mode": rd.mode, "plus": rd.plus, "minus": rd.minus,
            "part": rd.part, "setup": rd.setup, "frequency": rd.frequency, "unit": unit}


def describe_reading(rd: Reading) -> str:
    """Short human form: ``V dc TP1-0V``, ``I ac R3 @ 1 kHz``, ``R R2 lifted``, ``D D3``."""
    if rd.quantity == "diode-test":
        return "D " + (rd.part if rd.part is not None else f"{rd.plus}-{rd.minus}")
    if rd.quantity == "resistance":
        where = rd.part if rd.part is not None else f"{rd.plus}-{rd.minus}"
        return f"R {where}" + (" lifted" if rd.setup == "lifted" else "")
    sym = "V" if rd.quantity == "voltage" else "I"
    where = rd.part if rd.quantity == "current" else f"{rd.plus}-{rd.minus}"
    s = f"{sym} {rd.mode} {where}"
    if rd.mode == "ac" and rd.frequency is not None:
        s += f" @ {format_value(rd.frequency, 'Hz')}"
    return s


def fmt(value, unit: str) -> str:
    """A value with an engineering prefix, or an em dash for None."""
    return "—" if value is None else format_value(value, unit)


def table(header, rows, stream=None, aligns=None) -> None:
    """Print a plain text table with a rule under the header."""
    stream = stream or sys.stdout
    cols = len(header)
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(cols)]
    aligns = aligns or ["<"] * cols

    def line(cells):
        return "  ".join(f"{str(c):{a}{w}}" for c, a, w in zip(cells, aligns, widths)).rstrip()

    print(line(header), file=stream)
    print("  ".join("-" * w for w in widths), file=stream)
    for r in rows:
        print(line(r), file=stream)
