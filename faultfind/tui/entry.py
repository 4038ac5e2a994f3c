"""The quick reading entry: one line of text to a reading, with completion.

A technician types what the meter shows the way it is said at the panel::

    V +24V 23.91            voltage (DC) from node +24V to ground
    V +24V,24V-F 23.89 V    voltage between two nodes (red probe first)
    V F1 23.89              voltage across a part: between its two nodes
    Vac OUT 0.98 @ 1.5 kHz  AC voltage, with the generator's frequency
    I H1 2.45 mA            current through a part (Iac for AC)
    R F1 OL                 resistance across a part, in circuit
    R A,0V 4k61             resistance between two nodes
    Rlifted K1 180.6        resistance of a part alone (one leg lifted)
    D D3 0.612              diode test across a part, red probe on nodes[0] (anode)
    D B,E 0.65              diode test between two nodes (red probe first)
    ... # TP2 after fuse    anything after ``#`` is the reading's label

The kinds may also be written as the readings file's words (``voltage dc``,
``voltage ac``, ``current``, ``resistance lifted``, ``diode-test``), and a whole readings-file
row may be pasted (``voltage,dc,A,,,,11.91,TP1``: the columns of formats.md's
example header, ``quantity,mode,plus,minus,part,setup,value,label``).  The
value is the display as shown: a number with optional prefix and unit, or
``OL`` / ``-OL``.  Node names with spaces can only be given in the row form.

The line becomes readings-file cells (:func:`parse_entry`), and the cells are
checked exactly as a file row would be, as a one-row CSV through
:func:`faultfind.io.readings_file.parse_readings` (:func:`check_cells`).
No Textual here: the screen's widget uses :func:`complete`.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

from faultfind.errors import ReadingsError
from faultfind.model import Circuit, Reading

__all__ = ["KINDS", "ROW_COLUMNS", "parse_entry", "check_cells", "complete", "Completion",
           "entry_text", "describe_cells", "EXAMPLES"]

#: Short kinds: word (any case) -> (quantity, mode, setup).
KINDS = {
    "v": ("voltage", "dc", None), "vdc": ("voltage", "dc", None),
    "vac": ("voltage", "ac", None),
    "i": ("current", "dc", None), "idc": ("current", "dc", None),
    "iac": ("current", "ac", None),
    "r": ("resistance", None, "in-circuit"), "rl": ("resistance", None, "lifted"),
    "rlifted": ("resistance", None, "lifted"),
    "d": ("diode-test", None, None), "diode": ("diode-test", None, None),
}
#: The readings file's words, each with the words that may follow it.
_WORDS = {"voltage": ("dc", "ac"), "current": ("dc", "ac"),
          "resistance": ("in-circuit", "lifted"), "diode-test": ()}
#: Kinds offered by completion, in this order.
_OFFERED = ("V", "Vac", "I", "Iac", "R", "Rlifted", "D", "voltage", "current", "resistance",
            "diode-test")
#: Columns of a pasted readings-file row, in formats.md's example order.
ROW_COLUMNS = ("quantity", "mode", "plus", "minus", "part", "setup", "value", "label")
#: Columns given to :func:`check_cells` (every column a typed reading can set).
_CHECK_COLUMNS = ("quantity", "mode", "plus", "minus", "part", "setup", "value", "frequency",
                  "label")
EXAMPLES = "V +24V 23.91 · V F1 23.9 · I H1 2.4mA · R F1 OL · Rlifted K1 180"


def _fail(message, key="entry"):
    return ReadingsError(message, key=key)


def _row_form(text: str) -> dict | None:
    """Cells of a pasted readings-file row, or None when ``text`` is not one."""
    if text.count(",") < 5:
        return None
    first = text.split(",", 1)[0].strip().lower()
    if first not in _WORDS:
        return None
    cells = next(csv.reader([text]))
    if len(cells) > len(ROW_COLUMNS):
        raise _fail(f"a pasted row has at most {len(ROW_COLUMNS)} cells "
                    f"({','.join(ROW_COLUMNS)}), this one has {len(cells)}")
    return {c: v.strip() for c, v in zip(ROW_COLUMNS, cells)}


def _split_tail(text: str) -> tuple[str, str, str]:
    """``(body, frequency, label)`` of a line: ``... @ FREQ # LABEL``."""
    body, _, label = text.partition("#")
    body, _, freq = body.partition("@")
    return body.strip(), freq.strip(), label.strip()


def _kind(tokens: list[str]) -> tuple[tuple[str, str | None, str | None], int]:
    """The reading kind at the head of ``tokens`` and how many tokens it took."""
    word = tokens[0].lower()
    if word in KINDS:
        return KINDS[word], 1
    if word in _WORDS:
        nxt = tokens[1].lower() if len(tokens) > 1 else ""
        if word == "diode-test":
            return (word, None, None), 1
        if word == "resistance":
            if nxt in _WORDS[word]:
                return (word, None, nxt), 2
            return (word, None, "in-circuit"), 1
        if nxt in _WORDS[word]:
            return (word, nxt, None), 2
        return (word, "dc", None), 1
    raise _fail(f"{tokens[0]!r} is not a kind of reading: start with V, Vac, I, Iac, R, "
                "Rlifted or D (or voltage, current, resistance, diode-test)", key="quantity")


def _where(quantity: str, where: str, circuit: Circuit, cells: dict) -> None:
    """Fill ``plus``/``minus``/``part`` (and a default label) from the WHERE token."""
    plus, sep, minus = where.partition(",")
    nodes = set(circuit.nodes)
    if quantity == "current":
        cells["part"] = where
        return
    if sep:
        cells["plus"], cells["minus"] = plus.strip(), minus.strip()
        return
    if quantity == "voltage":
        if where not in nodes and circuit.has_part(where):
            p = circuit.part(where)
            cells["plus"], cells["minus"] = p.nodes[0], p.nodes[1]
            cells.setdefault("label", f"across {where}")
        else:
            cells["plus"] = where
        return
    if circuit.has_part(where):
        cells["part"] = where
    elif where in nodes:
        cells["plus"] = where
    elif quantity == "diode-test":
        raise _fail(f"{where!r} is neither a part nor a node of the circuit: a diode test is "
                    "across a part (D D3) or between nodes, red probe first (D B,E)",
                    key="part")
    else:
        raise _fail(f"{where!r} is neither a part nor a node of the circuit: a resistance "
                    "reading is across a part (R F1) or between nodes (R A,0V)", key="part")


def parse_entry(text, circuit) -> dict:
    """Readings-file cells of one typed line.

    Parameters
    ----------
    text : str
        One line in the forms of the module docstring.
    circuit : Circuit
        Tells parts from nodes (``V F1`` is across F1; ``R A`` is node A to
        ground).

    Returns
    -------
    dict
        Cells keyed by readings-file column (``quantity``, ``mode``,
        ``plus``, ``minus``, ``part``, ``setup``, ``value``, ``frequency``,
        ``label``); ``value`` is ``""`` while it has not been typed.  Node
        and part names are checked by :func:`check_cells`, not here.

    Raises
    ------
    ReadingsError
        Empty text, an unknown kind (key ``quantity``), a missing WHERE
        (key ``plus`` or ``part``), a resistance WHERE that is neither part
        nor node (key ``part``), a pasted row with too many cells.
    TypeError
        ``text`` not a str or ``circuit`` not a Circuit.
    """
    if not isinstance(text, str):
        raise TypeError(f"text: expected str, got {type(text).__name__}")
    if not isinstance(circuit, Circuit):
        raise TypeError(f"circuit: expected a Circuit, got {type(circuit).__name__}")
    text = text.strip()
    if not text:
        raise _fail(f"type a reading, e.g. {EXAMPLES}")
    row = _row_form(text)
    if row is not None:
        return row
    body, freq, label = _split_tail(text)
    tokens = body.split()
    if not tokens:
        raise _fail(f"type a reading before '@' or '#', e.g. {EXAMPLES}")
    (quantity, mode, setup), used = _kind(tokens)
    cells = {"quantity": quantity}
    if mode is not None:
        cells["mode"] = mode
    if setup is not None:
        cells["setup"] = setup
    rest = tokens[used:]
    if not rest:
        what = "part" if quantity == "current" else "node or part"
        raise _fail(f"after {tokens[0]} type the {what} read, then the display",
                    key="part" if quantity == "current" else "plus")
    if label:
        cells["label"] = label
    _where(quantity, rest[0], circuit, cells)
    cells["value"] = " ".join(rest[1:])
    if freq:
        cells["frequency"] = freq
    return cells


def check_cells(cells, circuit, meters=None, *, require_value=True,
                source="reading entry") -> Reading:
    """The reading of ``cells``, checked exactly as a readings-file row.

    The cells are written as a one-row CSV under a header and read with
    :func:`faultfind.io.readings_file.parse_readings`, so every rule of the
    file format applies (known nodes and parts, value and unit, ``OL``,
    ``minus`` defaulting to ground, AC only with an AC source).

    Parameters
    ----------
    cells : dict
        Readings-file cells (:func:`parse_entry`).
    circuit : Circuit
    meters : dict, optional
        Meter profiles (a ``meter`` cell must name one).
    require_value : bool, optional
        False accepts an empty value (the preview while typing).
    source : str, optional
        Name used in messages.

    Returns
    -------
    Reading
        ``line`` is None.

    Raises
    ------
    ReadingsError
        The row's problems; its message lists each as ``column: what``
        without the one-row file's line number.
    """
    from dataclasses import replace

    from faultfind.io.readings_file import parse_readings

    if not isinstance(cells, dict):
        raise TypeError(f"cells: expected dict, got {type(cells).__name__}")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(_CHECK_COLUMNS)
    w.writerow([str(cells.get(c, "") or "") for c in _CHECK_COLUMNS])
    try:
        found = parse_readings(buf.getvalue(), source, circuit, meters,
                               require_values=require_value)
    except ReadingsError as exc:
        problems = getattr(exc, "problems", None) or [exc]
        text = "; ".join(f"{p.key}: {p.message}" if p.key else p.message for p in problems)
        err = ReadingsError(text, key=problems[0].key)
        err.problems = problems
        raise err from None
    if not found:
        raise _fail("no reading: type KIND WHERE VALUE", key="quantity")
    return replace(found[0], line=None)


@dataclass(frozen=True)
class Completion:
    """What may come next at the end of a typed line.

    Attributes
    ----------
    start : int
        Where the word being typed starts in the text.
    prefix : str
        The part of that word typed so far.
    candidates : tuple of str
        Words that fit here and start with ``prefix`` (exact case first).
    what : str
        What is expected: ``"kind"``, ``"node"``, ``"part"``, ``"node or
        part"``, ``"part or node"``, ``"value"``, ``"frequency"``,
        ``"label"``, ``"row"`` (a pasted readings-file row).
    """

    start: int
    prefix: str
    candidates: tuple
    what: str

    def completed(self, text: str) -> str | None:
        """``text`` with the word completed to the first candidate (None: none)."""
        if not self.candidates or self.candidates[0] == self.prefix:
            return None
        return text[:self.start] + self.candidates[0]


def _matching(prefix, words) -> tuple:
    exact = [w for w in words if w.startswith(prefix)]
    loose = [w for w in words if w.lower().startswith(prefix.lower()) and w not in exact]
    return tuple(exact + loose)


def complete(text, circuit) -> Completion:
    """Completion of the word at the end of ``text`` (kinds, nodes, parts, ``OL``).

    Parameters
    ----------
    text : str
        The line typed so far.
    circuit : Circuit

    Returns
    -------
    Completion
    """
    if not isinstance(text, str):
        raise TypeError(f"text: expected str, got {type(text).__name__}")
    if not isinstance(circuit, Circuit):
        raise TypeError(f"circuit: expected a Circuit, got {type(circuit).__name__}")
    if "#" in text:
        return Completion(len(text), "", (), "label")
    if "@" in text:
        return Completion(len(text), "", (), "frequency")
    if text.count(",") >= 5 and text.split(",", 1)[0].strip().lower() in _WORDS:
        return Completion(len(text), "", (), "row")
    start = len(text) - len(text.split(" ")[-1])
    prefix = text[start:]
    before = text[:start].split()
    if not before:
        return Completion(start, prefix, _matching(prefix, _OFFERED), "kind")
    try:
        (quantity, _, _), used = _kind(before + [prefix])
    except ReadingsError:
        return Completion(start, prefix, (), "kind")
    if before[0].lower() in _WORDS and len(before) == 1:
        follow = _WORDS[before[0].lower()]
        words = list(follow) + _where_words(quantity, circuit)
        what = _where_what(quantity)
        return Completion(start, prefix, _matching(prefix, words), what)
    if len(before) < used:
        return Completion(start, prefix, (), "kind")
    if len(before) == used:  # the WHERE word
        head, sep, tail = prefix.rpartition(",")
        if sep:
            nodes = [n for n in circuit.nodes]
            return Completion(start + len(head) + 1, tail, _matching(tail, nodes), "node")
        return Completion(start, prefix, _matching(prefix, _where_words(quantity, circuit)),
                          _where_what(quantity))
    return Completion(start, prefix, _matching(prefix, ("OL", "-OL")) if prefix else (), "value")


def _where_words(quantity, circuit) -> list[str]:
    nodes = [n for n in circuit.nodes if n != circuit.ground]
    parts = [p.ref for p in circuit.parts if p.kind != "opamp"]
    if quantity == "current":
        return parts
    if quantity == "voltage":
        return nodes + [r for r in parts if r not in nodes]
    return parts + [n for n in nodes if n not in parts]


def _where_what(quantity) -> str:
    return {"current": "part", "voltage": "node or part", "resistance": "part or node",
            "diode-test": "part or node"}[quantity]


def entry_text(reading: Reading, ground: str | None = None) -> tuple[str, int]:
    """The entry line for a planned reading (a suggestion), and where the value goes.

    Parameters
    ----------
    reading : Reading
        A reading in the readings file's terms (its value is ignored).
    ground : str, optional
        The circuit's ground: a voltage to it is written as one node.

    Returns
    -------
    (str, int)
        e.g. ``("V +24V,24V-F  # across F1", 13)``: the text, and the cursor
        position at which the display is to be typed.
    """
    if not isinstance(reading, Reading):
        raise TypeError(f"reading: expected a Reading, got {type(reading).__name__}")
    rd = reading
    ac = rd.mode == "ac"
    if rd.quantity == "current":
        head = f"{'Iac' if ac else 'I'} {rd.part}"
    elif rd.quantity == "voltage":
        where = rd.plus if rd.minus in (None, "", ground) else f"{rd.plus},{rd.minus}"
        head = f"{'Vac' if ac else 'V'} {where}"
    else:
        kind = ("D" if rd.quantity == "diode-test" else
                "Rlifted" if rd.setup == "lifted" else "R")
        if rd.part is not None:
            where = rd.part
        else:
            where = rd.plus if rd.minus in (None, "", ground) else f"{rd.plus},{rd.minus}"
        head = f"{kind} {where}"
    head += " "
    tail = ""
    if rd.frequency is not None:
        from faultfind.units import format_value
        tail += f" @ {format_value(rd.frequency, 'Hz', digits=6)}"
    if rd.label:
        tail += f" # {rd.label}"
    return head + tail, len(head)


def describe_cells(cells: dict) -> str:
    """A short reading of the cells for people: ``V dc +24V to 0V``, ``R F1 lifted``."""
    q = cells.get("quantity", "")
    if q == "diode-test":
        where = cells.get("part") or f"{cells.get('plus', '?')} to {cells.get('minus') or 'ground'}"
        return f"D {where} (diode test)"
    if q == "resistance":
        where = cells.get("part") or f"{cells.get('plus', '?')} to {cells.get('minus') or 'ground'}"
        return f"R {where}" + (" lifted" if cells.get("setup") == "lifted" else "")
    mode = cells.get("mode") or "dc"
    if q == "current":
        return f"I {mode} {cells.get('part', '?')}"
    return f"V {mode} {cells.get('plus', '?')} to {cells.get('minus') or 'ground'}"
