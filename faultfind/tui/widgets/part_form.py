"""The circuit editor's form: the circuit's own fields, or one part's keys.

One row a key, label on the left; only the rows the selected part's kind takes
are shown (``faultfind.io.circuit_file.PART_KEYS``), so a kind's own keys
(a source's ``off_state``, a switch's ``state``, an inductor's winding
``resistance`` ...) appear when the kind is chosen.  Node fields offer the
node names already in the circuit (Right accepts the grey completion); the
kind and the fields with fixed choices take their completion on Enter too.
Enter moves to the next field.  The form only shows and collects text: the
screen applies it to the draft (:class:`faultfind.tui.draft.CircuitDraft`).
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.suggester import Suggester
from textual.widgets import Input, Static, TextArea

from faultfind.io.circuit_file import PART_KEYS
from faultfind.model import KINDS

from ..draft import HEAD_KEYS, part_keys, terminal_names

__all__ = ["PartForm", "FieldInput", "FieldDone", "PART_ROWS", "CHOICES"]

# Every key a part of some kind takes, kind first and label last (the editor's order).
_seen: dict = {"kind": None, "ref": None, "nodes": None}
for _keys in PART_KEYS.values():
    for _k in _keys:
        if _k != "label":
            _seen.setdefault(_k, None)
_seen["label"] = None
#: The part rows of the form, in order.
PART_ROWS: tuple[str, ...] = tuple(_seen)
del _seen, _keys, _k

#: Completions offered for the keys with fixed choices (the reader checks them).
CHOICES = {"kind": tuple(KINDS), "off_state": ("open", "short"), "waveform": ("dc", "ac"),
           "state": ("closed", "open")}

_LABELS = {"file": "file", "title": "title", "ground": "ground", "frequency": "frequency",
           "notes": "notes", "off_state": "off state", "current_limit": "current limit",
           "resistance": "winding R", "test_current": "test current",
           "series_resistance": "series R", "reverse_leakage": "leakage",
           "forward_voltage": "forward V"}

_PLACEHOLDERS = {
    "file": "where ctrl+s saves, e.g. panel.toml",
    "title": "what the board or panel is",
    "ground": "reference node, e.g. 0V",
    "frequency": "only with an AC source, e.g. 50 Hz",
    "kind": "resistor, capacitor, fuse, switch, ...",
    "ref": "reference designator, e.g. R7",
    "value": "4k7 · R47 · 100n · 2.2 mH · 24 V",
    "tolerance": "5% · -20%/+80% · ±0.2 V (empty: kind's default)",
    "off_state": "open or short (ohmmeter, power off)",
    "waveform": "dc or ac (an AC source's value is RMS)",
    "phase": "AC only, e.g. -120 deg",
    "current_limit": "most current the supply gives, e.g. 2.5 A",
    "state": "closed or open, as drawn",
    "resistance": "winding resistance, e.g. 180",
    "gain": "op-amp open-loop gain 2e5 · transistor hFE 150",
    "test_current": "current the value holds at (empty: diode 1 mA, LED 10 mA, zener 5 mA)",
    "ideality": "emission coefficient n, 0.5 to 10 (empty: the kind's default)",
    "series_resistance": "ohmic resistance in series, e.g. 0.5 (empty: 0)",
    "reverse_leakage": "reverse current at 1 V, e.g. 50 nA (empty: none)",
    "forward_voltage": "zener's forward voltage (empty: 0.7 V)",
    "vbe": "base-emitter voltage at 1 mA (empty: 0.65 V)",
    "label": "free text shown beside the ref",
}


#: The value's placeholder for the kinds whose value is not an ordinary part value.
_VALUE_HINTS = {
    "diode": "forward voltage at test current, e.g. 0.62 V (empty: 0.65 V)",
    "led": "forward voltage at test current, e.g. 2.1 V (empty: 2 V)",
    "zener": "zener (breakdown) voltage, e.g. 5.1 V (required)",
}


class FieldDone(Message):
    """A field was left or Enter was pressed in it: the screen applies the form."""

    def __init__(self, field: "FieldInput", submitted: bool) -> None:
        super().__init__()
        self.field = field
        self.submitted = submitted


class _Names(Suggester):
    """Completes from a list that a callable returns when asked (the draft's nodes)."""

    def __init__(self, names) -> None:
        super().__init__(use_cache=False, case_sensitive=True)
        self.names = names

    async def get_suggestion(self, value: str) -> str | None:
        if not value:
            return None
        for name in self.names():
            if name.startswith(value) and name != value:
                return name
        return None


class FieldInput(Input):
    """One field of the form; ``key`` is the file's key, ``node`` the node's index."""

    def __init__(self, key: str, node: int | None = None, *, names=None, **kw) -> None:
        suggester = _Names(names) if names is not None else None
        super().__init__(compact=True, select_on_focus=False, suggester=suggester,
                         placeholder=_PLACEHOLDERS.get(key, ""), **kw)
        self.key = key
        self.node = node

    def on_blur(self) -> None:
        self.post_message(FieldDone(self, False))

    async def action_submit(self) -> None:
        if self.key in CHOICES and self._suggestion and self.cursor_at_end:
            self.value = self._suggestion  # a fixed choice: Enter takes the completion
            self.cursor_position = len(self.value)
        self.post_message(FieldDone(self, True))


class PartForm(Vertical):
    """The form; :meth:`show_head` or :meth:`show_part` fills it, :meth:`values` reads it.

    Parameters
    ----------
    nodes : callable
        Returns the node names to offer (the draft's, ground first).
    """

    def __init__(self, nodes, **kw) -> None:
        super().__init__(**kw)
        self.nodes = nodes
        self.target: str | int | None = None  # "head" or a part's index
        self.kind: str | None = None

    def compose(self) -> ComposeResult:
        names = lambda: list(CHOICES["kind"])  # noqa: E731
        for key in ("file", "title", "ground", "frequency"):
            with Horizontal(classes="form-row head-row", id=f"row-{key}"):
                yield Static(_LABELS.get(key, key), classes="form-label")
                yield FieldInput(key, names=self.nodes if key == "ground" else None,
                                 id=f"f-{key}", classes="form-input")
        with Horizontal(classes="form-row head-row", id="row-notes"):
            yield Static("notes", classes="form-label")
            yield TextArea(id="f-notes", classes="form-input", compact=True,
                           soft_wrap=True, show_line_numbers=False)
        for key in PART_ROWS:
            with Horizontal(classes="form-row part-row", id=f"row-{key}"):
                yield Static(_LABELS.get(key, key), classes="form-label", id=f"lbl-{key}")
                if key == "nodes":
                    for i in range(3):
                        yield FieldInput("nodes", i, names=self.nodes, id=f"f-node-{i}",
                                         classes="form-input node-input")
                else:
                    choices = CHOICES.get(key)
                    yield FieldInput(key, names=(lambda c=choices: list(c)) if choices else None,
                                     id=f"f-{key}", classes="form-input")
        del names

    # -- filling -------------------------------------------------------------------------

    def inputs(self) -> list:
        """The fields on show (inputs and the notes' text area), in order."""
        return [w for w in self.query("FieldInput, TextArea") if w.parent.display and w.display]

    def show_head(self, head: dict, path: str) -> None:
        self.target = "head"
        self.kind = None
        for row in self.query(".part-row"):
            row.display = False
        for row in self.query(".head-row"):
            row.display = True
        self.query_one("#f-file", FieldInput).value = path
        for key in HEAD_KEYS:
            if key == "notes":
                area = self.query_one("#f-notes", TextArea)
                if area.text != head.get("notes", ""):
                    area.text = head.get("notes", "")
            else:
                self.query_one(f"#f-{key}", FieldInput).value = str(head.get(key, ""))

    def show_part(self, index: int, part: dict) -> None:
        self.target = index
        kind = part.get("kind", "")
        self.kind = kind if kind in KINDS else None
        for row in self.query(".head-row"):
            row.display = False
        keys = set(part_keys(kind)) | {"kind", "ref", "nodes"}
        for key in PART_ROWS:
            self.query_one(f"#row-{key}").display = key in keys
            if key in ("nodes",):
                continue
            inp = self.query_one(f"#f-{key}", FieldInput)
            inp.value = str(part.get(key, ""))
        nodes = list(part.get("nodes", []) or [])
        count = KINDS[kind].nodes if kind in KINDS else max(len(nodes), 2)
        names = terminal_names(kind) if kind in KINDS else tuple(f"end {i + 1}" for i in range(3))
        for i in range(3):
            inp = self.query_one(f"#f-node-{i}", FieldInput)
            inp.display = i < count
            inp.value = str(nodes[i]) if i < len(nodes) else ""
            inp.placeholder = names[i] if i < len(names) else ""
        self.query_one("#lbl-nodes", Static).update("nodes" if count < 3 else "nodes (3)")
        self.query_one("#f-value", FieldInput).placeholder = _VALUE_HINTS.get(
            kind, _PLACEHOLDERS["value"])

    # -- reading -------------------------------------------------------------------------

    def head_values(self) -> dict:
        """The circuit's fields as typed (``file`` included)."""
        out = {k: self.query_one(f"#f-{k}", FieldInput).value
               for k in ("file", "title", "ground", "frequency")}
        out["notes"] = self.query_one("#f-notes", TextArea).text
        return out

    def part_values(self) -> dict:
        """The part's fields on show as typed; ``nodes`` a list."""
        out = {}
        for key in PART_ROWS:
            if not self.query_one(f"#row-{key}").display:
                continue
            if key == "nodes":
                out["nodes"] = [w.value for w in (self.query_one(f"#f-node-{i}", FieldInput)
                                                  for i in range(3)) if w.display]
            else:
                out[key] = self.query_one(f"#f-{key}", FieldInput).value
        return out

    def next_field(self, field: FieldInput):
        """The field after ``field`` on show (None after the last)."""
        shown = self.inputs()
        try:
            i = shown.index(field)
        except ValueError:
            return None
        return shown[i + 1] if i + 1 < len(shown) else None

    def first_field(self):
        shown = self.inputs()
        return shown[0] if shown else None
