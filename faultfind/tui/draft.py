"""The circuit being edited in the terminal UI: raw fields, undo, checks, saving.

A :class:`CircuitDraft` holds what the technician typed, as text, key by key,
exactly as a circuit file would hold it (``value = "4k7"``).  It is never
checked by code of its own: :meth:`CircuitDraft.check` writes the draft as a
circuit file's text and reads it with :func:`faultfind.io.circuit_file.parse_circuit`,
so every message is the one ``faultfind check`` prints for the same file.
Saving writes the circuit in the format's canonical layout
(:mod:`faultfind.io.circuit_writer`).
"""

from __future__ import annotations

import copy
import json
import math
import os
import re
import tomllib
from dataclasses import dataclass, field

from faultfind.errors import CircuitError, InputError
from faultfind.io.circuit_file import PART_KEYS, circuit_warnings, parse_circuit
from faultfind.io.circuit_writer import circuit_text, lost_comments, write_circuit
from faultfind.io.junction_keys import TERMINALS
from faultfind.model import KINDS, Circuit

__all__ = ["CircuitDraft", "DraftCheck", "HEAD_KEYS", "part_keys", "terminal_names",
           "MAX_CHECK_ROUNDS"]

#: The circuit's own fields in the editor, in order.
HEAD_KEYS = ("title", "ground", "frequency", "notes")

#: At most this many parts are marked by one check (each mark is one more read of
#: the whole file with the marked parts left out).
MAX_CHECK_ROUNDS = 12

_WAITING = ("the whole circuit (floating nodes, source loops) is checked once the marked "
            "parts read")
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def part_keys(kind: str) -> tuple[str, ...]:
    """The keys a part of ``kind`` may hold, in the file's order (``nodes`` included)."""
    if kind in PART_KEYS:
        return PART_KEYS[kind]
    return ("ref", "kind", "nodes", "value", "tolerance", "label")


def terminal_names(kind: str) -> tuple[str, ...]:
    """What each node of a part of ``kind`` is, for the form's labels."""
    if kind == "opamp":
        return ("non-inv. in", "inv. in", "output")
    if kind in TERMINALS:                 # anode, cathode; collector, base, emitter
        return TERMINALS[kind]
    if kind in ("voltage-source", "current-source"):
        return ("+ terminal", "- terminal")
    n = KINDS[kind].nodes if kind in KINDS else 2
    return tuple(f"end {i + 1}" for i in range(n))


@dataclass(frozen=True)
class DraftCheck:
    """What :func:`~faultfind.io.circuit_file.parse_circuit` says about a draft.

    Attributes
    ----------
    circuit : Circuit or None
        The circuit, when the draft reads without error.
    errors : dict of int to str
        Part index -> the message ``faultfind check`` prints for that part.
    general : list of str
        Messages not about one part (title, ground, frequency, no parts).
    warnings : list of str
        :func:`~faultfind.io.circuit_file.circuit_warnings` of a circuit that reads.
    note : str
        What was not checked yet: the whole circuit's checks (floating nodes,
        source loops) wait until the marked parts read.
    """

    circuit: Circuit | None
    errors: dict = field(default_factory=dict)
    general: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    note: str = ""

    @property
    def ok(self) -> bool:
        return self.circuit is not None

    def first_error(self) -> str | None:
        """The first message, general ones first (None when the draft reads)."""
        if self.general:
            return self.general[0]
        if self.errors:
            return self.errors[min(self.errors)]
        return None


def _toml_string(text: str) -> str:
    # JSON escapes are TOML basic-string escapes; TOML also wants DEL escaped.
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _toml_key(key: str) -> str:
    return key if _BARE_KEY.match(key) else _toml_string(key)


def _raw(value) -> str | list:
    """A value read from a file as the text the form shows."""
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else str(value)
    if isinstance(value, list):
        return [_raw(v) if not isinstance(v, list) else json.dumps(v) for v in value]
    return json.dumps(value, ensure_ascii=False, default=str)


class CircuitDraft:
    """A circuit being edited: its fields as text, an undo history, checks and saving.

    Parameters
    ----------
    path : str, optional
        The file the draft is saved to ("" until the technician names one).
    source_text : str, optional
        The text the draft was read from; its comments are what a save would
        lose (:meth:`lost_comments`).

    Attributes
    ----------
    head : dict of str to str
        ``title``, ``ground``, ``frequency``, ``notes`` and any other top-level
        key read from a file (unknown ones are kept, so that the check names
        them).
    parts : list of dict
        One dict a part: keys as in the file, values as text, ``nodes`` a
        list of text.
    """

    def __init__(self, path: str = "", source_text: str | None = None) -> None:
        if not isinstance(path, str):
            raise TypeError(f"path must be a str, not {type(path).__name__}")
        self.path = path
        self.source_text = source_text
        self.head: dict = {"title": "", "ground": "0V"}
        self.parts: list[dict] = []
        self._undo: list[tuple[str, dict, list]] = []
        self._saved_state = self._state()

    # -- reading -------------------------------------------------------------------------

    @classmethod
    def from_text(cls, text: str, path: str = "") -> "CircuitDraft":
        """A draft of a circuit file's text, valid or not (a mistake is shown, not refused).

        Raises
        ------
        CircuitError
            The text is not TOML, or says another ``format`` than 1: there is
            nothing to edit.  (A missing ``format`` is written on saving.)
        """
        if not isinstance(text, str):
            raise TypeError(f"text must be a str, not {type(text).__name__}")
        source = path or "<circuit>"
        try:
            doc = tomllib.loads(text[1:] if text.startswith("\ufeff") else text)
        except tomllib.TOMLDecodeError:
            parse_circuit(text, source=source)  # raises the reader's message, with its line
            raise  # pragma: no cover - the reader refuses what tomllib refuses
        fmt = doc.get("format", 1)
        if type(fmt) is not int or fmt != 1:
            parse_circuit(text, source=source)  # raises the reader's message on 'format'
        draft = cls(path, source_text=text)
        draft.head = {k: _raw(v) for k, v in doc.items() if k not in ("format", "part")}
        draft.head.setdefault("title", "")
        draft.head.setdefault("ground", "")
        tables = doc.get("part", [])
        if not isinstance(tables, list):
            tables = [tables]
        for t in tables:
            if not isinstance(t, dict):
                continue
            part = {k: _raw(v) for k, v in t.items()}
            if "nodes" in part and not isinstance(part["nodes"], list):
                part["nodes"] = [part["nodes"]]
            draft.parts.append(part)
        draft._saved_state = draft._state()
        return draft

    @classmethod
    def from_file(cls, path) -> "CircuitDraft":
        """A draft of a circuit file (see :meth:`from_text`).

        Raises
        ------
        CircuitError
            The file cannot be read, is not TOML or not format 1.
        """
        from faultfind.io.textfile import read_text

        text = read_text(path, CircuitError, "circuit file")
        return cls.from_text(text, os.fspath(path))

    # -- what is there -------------------------------------------------------------------

    def nodes(self) -> list[str]:
        """Node names already used: ground first, then in order of first use."""
        seen = {}
        ground = self.head.get("ground", "")
        if isinstance(ground, str) and ground.strip():
            seen[ground] = None
        for p in self.parts:
            for n in p.get("nodes", []) or []:
                if isinstance(n, str) and n.strip():
                    seen.setdefault(n, None)
        return list(seen)

    def refs(self) -> list[str]:
        return [str(p.get("ref", "")) for p in self.parts]

    def next_ref(self, kind: str) -> str:
        """A free reference designator for a new part of ``kind`` (``R3``, ``C1`` ...)."""
        letter = {"resistor": "R", "capacitor": "C", "inductor": "L", "fuse": "F",
                  "switch": "S", "voltage-source": "V", "current-source": "I",
                  "opamp": "U", "diode": "D", "led": "LED", "zener": "ZD", "npn": "Q",
                  "pnp": "Q"}.get(kind, "X")
        used = set(self.refs())
        n = 1
        while f"{letter}{n}" in used:
            n += 1
        return f"{letter}{n}"

    @property
    def changed(self) -> bool:
        """True when the draft differs from what was read or last saved."""
        return self._state() != self._saved_state

    # -- changes (each one can be undone) ------------------------------------------------

    def _state(self):
        return (copy.deepcopy(self.head), copy.deepcopy(self.parts))

    def _push(self, what: str) -> None:
        head, parts = self._state()
        self._undo.append((what, head, parts))

    @property
    def can_undo(self) -> bool:
        return bool(self._undo)

    def undo(self) -> str | None:
        """Take back the last change; returns what it was (None when there is none)."""
        if not self._undo:
            return None
        what, self.head, self.parts = self._undo.pop()
        return what

    def set_head(self, key: str, value: str) -> bool:
        """Set a top-level field (empty text removes it); False when nothing changed."""
        if not isinstance(key, str) or key in ("format", "part"):
            raise InputError(f"not a field of the circuit: {key!r}", key=str(key))
        if not isinstance(value, str):
            raise TypeError(f"value must be a str, not {type(value).__name__}")
        old = self.head.get(key)
        removes = value == "" and key not in ("title", "ground")
        if old == value or (old is None and removes):
            return False
        self._push(f"{key} of the circuit")
        if removes:
            self.head.pop(key, None)
        else:
            self.head[key] = value
        return True

    def add_part(self, kind: str = "resistor", *, after: int | None = None,
                 fields: dict | None = None) -> int:
        """Add a part (a free ref, the kind's node count, empty values); returns its index."""
        if kind not in KINDS:
            raise InputError(f"unknown kind {kind!r}; the kinds are " + ", ".join(KINDS),
                             key="kind")
        part = dict(fields) if fields else {
            "ref": self.next_ref(kind), "kind": kind, "nodes": [""] * KINDS[kind].nodes}
        self._push(f"adding {part.get('ref', 'a part')}")
        index = len(self.parts) if after is None else max(0, min(after + 1, len(self.parts)))
        self.parts.insert(index, part)
        return index

    def copy_part(self, index: int) -> int:
        """Add a copy of part ``index`` under it, with a free ref; returns its index."""
        src = self.parts[self._index(index)]
        fields = copy.deepcopy(src)
        kind = fields.get("kind", "resistor")
        fields["ref"] = self.next_ref(kind if kind in KINDS else "resistor")
        return self.add_part(kind if kind in KINDS else "resistor", after=index, fields=fields)

    def remove_part(self, index: int) -> dict:
        """Remove part ``index``; returns it."""
        index = self._index(index)
        self._push(f"removing {self.parts[index].get('ref', 'a part')}")
        return self.parts.pop(index)

    def set_field(self, index: int, key: str, value) -> bool:
        """Set one key of part ``index`` (text; a list of text for ``nodes``; empty text
        removes the key).  Changing ``kind`` resizes the nodes and drops keys the new
        kind does not take.  Returns False when nothing changed."""
        index = self._index(index)
        part = self.parts[index]
        if key == "nodes":
            if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
                raise TypeError("nodes must be a list of str")
            value = list(value)
        elif not isinstance(value, str):
            raise TypeError(f"value must be a str, not {type(value).__name__}")
        if part.get(key, "" if key != "nodes" else None) == value:
            return False
        self._push(f"{key} of {part.get('ref', 'a part')}")
        if value == "" and key not in ("ref", "kind"):
            part.pop(key, None)
        else:
            part[key] = value
        if key == "kind" and value in KINDS:
            nodes = list(part.get("nodes", []))
            want = KINDS[value].nodes
            part["nodes"] = (nodes + [""] * want)[:want]
            allowed = set(part_keys(value))
            for k in [k for k in part if k not in allowed]:
                del part[k]
        return True

    def _index(self, index) -> int:
        if isinstance(index, bool) or not isinstance(index, int) \
                or not 0 <= index < len(self.parts):
            raise IndexError(f"no part #{index!r} (the draft has {len(self.parts)})")
        return index

    # -- the file's text and its check ---------------------------------------------------

    def text(self, *, leave_out=()) -> tuple[str, list[int]]:
        """The draft as a circuit file's text, and the line of each part's ``[[part]]``
        (0 for a part left out).  Not the saved layout: see :meth:`saved_text`."""
        out = ["format = 1"]
        for key, value in self.head.items():
            if key in ("title", "ground") or value != "":
                out.append(f"{_toml_key(key)} = {_toml_string(str(value))}")
        lines = []
        for i, part in enumerate(self.parts):
            if i in leave_out:
                lines.append(0)
                continue
            out.append("")
            out.append("[[part]]")
            lines.append(len(out))
            for key, value in part.items():
                if isinstance(value, list):
                    body = ", ".join(_toml_string(str(v)) for v in value)
                    out.append(f"{_toml_key(key)} = [{body}]")
                else:
                    out.append(f"{_toml_key(key)} = {_toml_string(str(value))}")
        return "\n".join(out) + "\n", lines

    def check(self) -> DraftCheck:
        """Read the draft as ``faultfind check`` reads a file; every part with a mistake
        is marked with the reader's message.

        The reader stops at the first mistake.  To mark more than one part, the
        draft is read again with each marked part left out, up to
        :data:`MAX_CHECK_ROUNDS` times; once a part is left out, a floating node
        or a ground on no part may be caused by its absence, so those are only
        reported when no part was left out.
        """
        left_out: set[int] = set()
        errors: dict[int, str] = {}
        general: list[str] = []
        source = self.path or "<new circuit>"
        for _ in range(MAX_CHECK_ROUNDS):
            text, lines = self.text(leave_out=left_out)
            try:
                circuit = parse_circuit(text, source=source)
            except CircuitError as exc:
                index = self._part_of(exc, lines)
                whole = exc.key is None or exc.key == "ground" or index is None
                if left_out and whole:
                    break
                if index is None:
                    general.append(exc.message)
                    break
                errors[index] = self._placed(exc.message, lines)
                left_out.add(index)
                continue
            if not left_out:
                return DraftCheck(circuit, {}, [], circuit_warnings(circuit))
            break
        else:
            return DraftCheck(None, errors, general, note=f"more parts may be wrong: the "
                              f"first {MAX_CHECK_ROUNDS} are marked")
        return DraftCheck(None, errors, general, note=_WAITING if left_out else "")

    def _placed(self, message: str, lines: list[int]) -> str:
        """The message with a line of the draft's text ("first at line 23") said as the
        part it is (``part #2, H1``): the draft has no lines of its own."""
        def part_at(m):
            n = int(m.group(1))
            index = self._part_of(CircuitError("", line=n), lines)
            if index is None:
                return m.group(0)
            return f"part #{index + 1}, {self.parts[index].get('ref', '?')}"

        return re.sub(r"\bline (\d+)", part_at, message)

    def _part_of(self, exc: CircuitError, lines: list[int]) -> int | None:
        """The index of the part an error is about (its line, else its ref)."""
        if exc.line is not None:
            best = None
            for i, start in enumerate(lines):
                if start and start <= exc.line:
                    if best is None or start > lines[best]:
                        best = i
            if best is not None:
                return best
        if exc.part is not None:
            for i, p in enumerate(self.parts):
                if p.get("ref") == exc.part and lines[i]:
                    return i
        return None

    # -- saving --------------------------------------------------------------------------

    def saved_text(self) -> str:
        """The circuit file's text in the canonical layout.

        Raises
        ------
        CircuitError
            The draft does not read (the first mistake, as ``faultfind check``).
        """
        result = self.check()
        if not result.ok:
            raise CircuitError(result.first_error() or "the circuit does not read",
                               file=self.path or None)
        return circuit_text(result.circuit)

    def lost_comments(self) -> list:
        """The comments of the text read that a save would drop
        (:func:`faultfind.io.circuit_writer.lost_comments`; empty: none)."""
        if self.source_text is None:
            return []
        return list(lost_comments(self.source_text))

    def save(self, path: str | None = None) -> str:
        """Write the canonical text to ``path`` (default :attr:`path`); returns the text.

        The file is replaced atomically
        (:func:`faultfind.io.circuit_writer.write_circuit`): a failed save leaves
        the old file as it was.

        Raises
        ------
        CircuitError
            The draft does not read, no file is named, or it cannot be written.
        """
        target = self.path if path is None else path
        if not isinstance(target, str) or not target.strip():
            raise CircuitError("name the file to save to (the circuit's 'file' field)",
                               key="file")
        target = os.path.expanduser(target.strip())
        result = self.check()
        if not result.ok:
            raise CircuitError(result.first_error() or "the circuit does not read",
                               file=target)
        write_circuit(result.circuit, target)
        text = circuit_text(result.circuit)
        self.path = target
        self.source_text = text
        self._saved_state = self._state()
        return text

    def mark_saved(self, text: str) -> None:
        """Note that ``text`` is now the saved circuit (stored in a session, say)."""
        self.source_text = text
        self._saved_state = self._state()

