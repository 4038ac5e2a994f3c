"""The circuit editor: build or fix a circuit file at the terminal, checked as it is typed.

Left, the parts list (the circuit's own fields on top); right, the form of
what is selected and, under it, what ``faultfind check`` says about it.  Each
field is applied when Enter is pressed in it or the focus leaves it; every
change can be undone.  The whole draft is read again after each change by the
circuit file reader itself, so the marks beside the parts are the messages the
command line prints.  ctrl+s saves in the canonical layout (a file whose
comments the rewrite would drop asks first).

Opened from the opening screen (a new circuit, or the one named there) and
from the bench (the session's circuit: saving makes the edited circuit the
session's next version, and the readings already taken are diagnosed again).
"""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, OptionList, Static, TextArea
from textual.widgets.option_list import Option

from faultfind import units
from faultfind.model import KINDS

from ..widgets.part_form import FieldDone, FieldInput, PartForm
from ..widgets.text import tag

__all__ = ["EditorScreen", "HINTS", "open_editor", "session_draft"]


def escape(text) -> str:
    """Text shown as it is in markup: every ``[`` escaped (Textual's own escape leaves
    ``[[part]]`` half-read)."""
    return str(text).replace("[", r"\[")

#: What the line under the form says while a field has the focus.
HINTS = {
    "file": "the circuit file ctrl+s writes (canonical layout)",
    "ground": "the reference node; every voltage reading defaults to it",
    "frequency": "needed when a source has waveform ac, e.g. 50 Hz or 60 Hz",
    "kind": "Enter takes the grey completion: " + " ".join(KINDS),
    "ref": "unique in the circuit, as printed on the board or schematic",
    "nodes": "Right takes the grey completion; a new name makes a new node",
    "tolerance": "empty: the kind's default; 1% · ±1% · -20%/+80% · ±0.2 V",
    "off_state": "what an ohmmeter sees across the source with power off",
    "waveform": "dc or ac; an AC source's value is RMS",
    "phase": "AC sources only, e.g. -120 deg",
    "state": "closed or open, as the schematic draws it",
    "resistance": "the winding's DC resistance; an ideal winding is a short at DC",
    "gain": "a plain number, no unit or dB (a transistor's: its DC current gain hFE)",
    "test_current": "the current at which the value (forward or zener voltage) holds",
    "ideality": "the emission coefficient n: a plain number from 0.5 to 10",
    "series_resistance": "ohmic resistance in series with the junction, in Ω",
    "reverse_leakage": "reverse current at 1 V reverse bias, in A (a leaky junction)",
    "forward_voltage": "a zener's forward voltage at its test current",
    "vbe": "base-emitter voltage at 1 mA collector current",
    "current_limit": "the most current the supply delivers (optional)",
}


class EditorScreen(Screen):
    """Edit a :class:`~faultfind.tui.draft.CircuitDraft`; dismissed with the saved file's
    path (None when nothing was saved).

    Parameters
    ----------
    draft : CircuitDraft
    apply : callable, optional
        Called in a worker thread as ``apply(text, path)`` with the saved
        text and the file it is about to be written to (None: no file) before
        the file is written (the bench makes it the session's circuit); an
        :class:`~faultfind.errors.InputError` it raises is shown and nothing
        is saved.
    where : str, optional
        Words for the title line (``"new circuit"``, ``"session 3"``).
    """

    CSS_PATH = "editor.tcss"
    AUTO_FOCUS = None
    BINDINGS = [
        Binding("ctrl+s", "save", "save", tooltip="save in the canonical layout (asks before "
                                                   "dropping a hand-written file's comments)"),
        Binding("ctrl+z", "undo", "undo", tooltip="take back the last change"),
        Binding("ctrl+n", "add_part", "add part", tooltip="add a part under the selected one"),
        Binding("ctrl+t", "copy_part", "copy", tooltip="add a copy of the selected part"),
        Binding("ctrl+r", "remove_part", "remove", tooltip="remove the selected part"),
        Binding("ctrl+k", "drop_keys", "drop keys", show=False,
                tooltip="drop the keys the selected part's kind (or the circuit) does not "
                        "take, as read from a file"),
        Binding("ctrl+l", "focus_list", "list", show=False,
                tooltip="back to the parts list (Enter there opens the form)"),
        Binding("escape", "leave", "leave", tooltip="from a field: back to the list; from the "
                                                    "list: close the editor"),
        Binding("f1", "help", "help", tooltip="this help"),
    ]
    HELP_EXTRA = (("Enter", "in a field: apply it and go to the next field"),
                  ("→", "in a node field: take the grey completion"))

    def __init__(self, draft, *, apply=None, where: str = "") -> None:
        super().__init__(id="editor")
        self.draft = draft
        self.apply = apply
        self.where = where
        self.result = None  # the checks of the draft as it is now
        self.saved_path: str | None = None
        self._comments_ok = False
        self._saving = False
        self._showing = None

    # -- layout --------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield Static(id="editor-title")
        with Horizontal(id="editor-body"):
            yield OptionList(id="parts-list")
            with Vertical(id="editor-right"):
                yield PartForm(self.draft.nodes, id="part-form")
                yield Static(id="field-hint")
                yield Static(id="editor-check")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#parts-list", OptionList).border_title = "PARTS"
        if self.apply is not None:
            self.query_one("#f-file", FieldInput).placeholder = \
                "optional: also write the circuit to this file"
        self.recheck()
        self._fill_list(0)
        self._show(0 if not self.draft.parts else 1)
        self.query_one("#parts-list", OptionList).focus()

    # -- the list ------------------------------------------------------------------------

    def _fill_list(self, highlight: int | None = None) -> None:
        ol = self.query_one("#parts-list", OptionList)
        keep = ol.highlighted if highlight is None else highlight
        ol.clear_options()
        title = self.draft.head.get("title", "") or "(untitled)"
        mark = "✗" if self.result and self.result.general else "◆"
        options = [Option(f"{mark} circuit · {title}", id="head")]
        errors = self.result.errors if self.result else {}
        for i, p in enumerate(self.draft.parts):
            sym = "✗" if i in errors else ("✓" if self.result and self.result.ok else "·")
            ref = str(p.get("ref", "")) or "?"
            options.append(Option(f"{sym} {ref:<6} {p.get('kind', '?')}", id=f"part:{i}"))
        ol.add_options(options)
        if options:
            ol.highlighted = min(max(keep or 0, 0), len(options) - 1)

    @on(OptionList.OptionHighlighted, "#parts-list")
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        self._show(event.option_index)

    @on(OptionList.OptionSelected, "#parts-list")
    def _selected(self, event: OptionList.OptionSelected) -> None:
        self._show(event.option_index)
        first = self.form.first_field()
        if first is not None:
            first.focus()

    @property
    def form(self) -> PartForm:
        return self.query_one("#part-form", PartForm)

    def _target_of(self, option_index: int):
        return "head" if option_index == 0 else option_index - 1

    def _show(self, option_index: int | None) -> None:
        """Show the form of list row ``option_index`` (0: the circuit), applying the form
        on show first."""
        if option_index is None:
            return
        target = self._target_of(option_index)
        if target != "head" and target >= len(self.draft.parts):
            target = "head"
        if self._showing is not None and self._showing != target:
            self.apply_form()
        self._showing = target
        if target == "head":
            self.form.show_head(self.draft.head, self.draft.path)
        else:
            self.form.show_part(target, self.draft.parts[target])
        self.show_check()

    # -- applying the form ---------------------------------------------------------------

    def apply_form(self) -> bool:
        """Apply what the form shows to the draft; True when the draft changed."""
        form, draft = self.form, self.draft
        target = form.target
        changed = False
        if target == "head":
            values = form.head_values()
            path = values.pop("file").strip()
            if path != draft.path:
                draft.path = path
                changed = True
            for key in ("title", "ground", "frequency", "notes"):
                changed |= draft.set_head(key, values[key])
        elif isinstance(target, int) and target < len(draft.parts):
            values = form.part_values()
            kind = values.pop("kind", None)
            if kind is not None and draft.set_field(target, "kind", kind.strip()):
                changed = True
            for key, value in values.items():
                if key == "nodes":
                    value = [v.strip() for v in value]
                    want = KINDS[draft.parts[target]["kind"]].nodes \
                        if draft.parts[target].get("kind") in KINDS else len(value)
                    value = (value + [""] * want)[:want]
                elif key != "label":
                    value = value.strip()
                changed |= draft.set_field(target, key, value)
        if changed:
            self.recheck()
            self._fill_list()
            if isinstance(target, int) and target < len(draft.parts):
                form.show_part(target, draft.parts[target])
            self.show_check()
        return changed

    @on(FieldDone)
    def _field_done(self, message: FieldDone) -> None:
        message.stop()
        if self._showing != self.form.target:
            return
        self.apply_form()
        if message.submitted:
            nxt = self.form.next_field(message.field) if message.field.is_mounted else None
            if nxt is not None:
                nxt.focus()

    def on_descendant_blur(self, event) -> None:
        if isinstance(event.widget, TextArea):
            self.apply_form()

    @on(FieldInput.Changed)
    def _typing(self, event: FieldInput.Changed) -> None:
        if event.input.has_focus:  # not a value the form was filled with
            self._hint(event.input)

    def on_descendant_focus(self, event) -> None:
        widget = event.widget
        if isinstance(widget, FieldInput):
            self._hint(widget)
        elif isinstance(widget, TextArea):
            self._say_hint(tag("muted", "free text; Tab leaves the notes"))
        else:
            self._say_hint(tag("muted", "Enter: edit · ctrl+n add · ctrl+t copy · ctrl+r "
                                        "remove · ctrl+z undo · ctrl+s save · Esc close"))

    def _hint(self, field: FieldInput) -> None:
        key = field.key
        text = field.value.strip()
        kind = self.form.kind
        if key in ("value", "resistance", "current_limit", "test_current",
                   "series_resistance", "reverse_leakage", "forward_voltage", "vbe") and text:
            unit = {"resistance": "Ω", "current_limit": "A", "test_current": "A",
                    "series_resistance": "Ω", "reverse_leakage": "A", "forward_voltage": "V",
                    "vbe": "V"}.get(key) or (KINDS[kind].unit if kind in KINDS else None)
            try:
                v = units.parse_value(text, unit)
            except units.UnitError as exc:
                self._say_hint(tag("bad", f"✗ {exc.message}"))
                return
            self._say_hint(tag("ok", f"= {units.format_value(v, unit or '', digits=4)}"))
            return
        if key == "value":
            unit = KINDS[kind].unit if kind in KINDS else None
            default = KINDS[kind].default_value if kind in KINDS else None
            words = f"in {unit}" if unit else "none"
            if default is not None:
                words += f"; empty: {units.format_value(default, unit)}"
            self._say_hint(tag("muted", f"{words} · RKM 4k7 R47 2M2 · prefix 4.7k 100n 2.2m"))
            return
        self._say_hint(tag("muted", HINTS.get(key, "")))

    def _say_hint(self, markup: str) -> None:
        self.query_one("#field-hint", Static).update(markup)

    # -- checks --------------------------------------------------------------------------

    def recheck(self) -> None:
        self.result = self.draft.check()
        self.show_title()

    def show_title(self) -> None:
        r, d = self.result, self.draft
        name = d.path or "not saved yet"
        if r.ok:
            state = tag("ok", "✓ reads as faultfind check reads it")
        else:
            n = len(r.errors) + (1 if r.general and not r.errors else 0)
            state = tag("bad", f"✗ {n} to fix")
        unsaved = tag("warn", " · unsaved") if d.changed else ""
        where = f" · {self.where}" if self.where else ""
        self.query_one("#editor-title", Static).update(
            f"{tag('head', 'CIRCUIT EDITOR')}{escape(where)} · {state}{unsaved} · "
            f"{len(d.parts)} parts · {escape(name)}")

    def show_check(self) -> None:
        r = self.result
        target = self._showing
        lines = []
        if isinstance(target, int):
            msg = r.errors.get(target)
            if msg:
                lines.append(tag("bad", "✗ ") + escape(msg))
            elif r.ok:
                lines.append(tag("ok", "✓ this part reads"))
            ref = self.draft.parts[target].get("ref", "") if target < len(self.draft.parts) \
                else ""
            mine = [w for w in r.warnings if ref and (f" {ref} " in f" {w} " or
                                                     f" {ref}," in w or f" {ref}." in w)]
            lines += [tag("warn", "⚠ ") + escape(w) for w in mine]
        others = len(r.errors) - (1 if isinstance(target, int) and target in r.errors else 0)
        if others:
            lines.append(tag("muted", f"{others} other part(s) marked ✗ in the list"))
        lines += [tag("bad", "✗ ") + escape(g) for g in r.general]
        if r.note:
            lines.append(tag("muted", f"i {r.note}"))
        if target == "head":
            lines += [tag("warn", "⚠ ") + escape(w) for w in r.warnings]
        box = self.query_one("#editor-check", Static)
        box.update("\n".join(lines) if lines else tag("muted", "nothing to report"))

    # -- actions -------------------------------------------------------------------------

    def _selected_part(self) -> int | None:
        return self._showing if isinstance(self._showing, int) else None

    def _after_change(self, target, *, focus_form=False) -> None:
        self.recheck()
        self._showing = None
        option = 0 if target == "head" else target + 1
        self._fill_list(option)
        self._show(option)
        if focus_form:
            first = self.form.first_field()
            if first is not None:
                first.focus()

    def action_add_part(self) -> None:
        self.apply_form()
        at = self._selected_part()
        kind = self.draft.parts[at].get("kind") if at is not None else None
        index = self.draft.add_part(kind if kind in KINDS else "resistor",
                                    after=at if at is not None else len(self.draft.parts) - 1)
        self._after_change(index, focus_form=True)

    def action_copy_part(self) -> None:
        self.apply_form()
        at = self._selected_part()
        if at is None:
            self.notify("Select a part to copy.")
            return
        self._after_change(self.draft.copy_part(at), focus_form=True)

    def action_remove_part(self) -> None:
        self.apply_form()
        at = self._selected_part()
        if at is None:
            self.notify("Select a part to remove.")
            return
        removed = self.draft.remove_part(at)
        self.notify(f"Removed {removed.get('ref', 'the part')} (ctrl+z brings it back).")
        self._after_change(min(at, len(self.draft.parts) - 1) if self.draft.parts else "head")

    def action_drop_keys(self) -> None:
        from ..draft import HEAD_KEYS, part_keys

        self.apply_form()
        at = self._selected_part()
        if at is None:  # the circuit's row: top-level keys the format does not know
            extra = [k for k in self.draft.head if k not in HEAD_KEYS]
            for k in extra:
                self.draft.set_head(k, "")
        else:
            part = self.draft.parts[at]
            extra = [k for k in part if k not in part_keys(part.get("kind", ""))]
            for k in extra:
                self.draft.set_field(at, k, "")
        if not extra:
            self.notify("Every key here is one the format takes.")
            return
        self.notify("Dropped " + ", ".join(extra) + " (ctrl+z undoes each).")
        self._after_change("head" if at is None else at)

    def action_undo(self) -> None:
        self.apply_form()
        what = self.draft.undo()
        if what is None:
            self.notify("Nothing to undo.")
            return
        self.notify(f"Undone: {what}.")
        target = self._showing if self._showing is not None else "head"
        if isinstance(target, int) and target >= len(self.draft.parts):
            target = len(self.draft.parts) - 1 if self.draft.parts else "head"
        self._after_change(target)

    def action_focus_list(self) -> None:
        self.apply_form()
        self.query_one("#parts-list", OptionList).focus()

    def action_leave(self) -> None:
        if not isinstance(self.app.focused, OptionList):
            self.action_focus_list()
            return
        self.apply_form()
        if self.draft.changed:
            from .confirm import ConfirmScreen

            self.app.push_screen(ConfirmScreen(
                "Leave the editor without saving?",
                ["the changes since the last save are lost (the file stays as it is)"],
                yes="leave without saving", no="keep editing"), self._leave_confirmed)
            return
        self.dismiss(self.saved_path)

    def _leave_confirmed(self, yes) -> None:
        if yes:
            self.dismiss(self.saved_path)

    def action_help(self) -> None:
        from .help import HelpScreen

        self.app.push_screen(HelpScreen(self))

    # -- saving --------------------------------------------------------------------------

    def action_save(self) -> None:
        if self._saving:
            return
        self.apply_form()
        if not self.result.ok:
            first = self.result.first_error()
            self.notify(f"Not saved: {first}", severity="error", timeout=8)
            return
        if not self.draft.path.strip() and self.apply is None:
            self.notify("Name the file first: the 'file' field of the circuit (top row).",
                        severity="warning")
            self._fill_list(0)
            self._show(0)
            self.query_one("#f-file", FieldInput).focus()
            return
        comments = [] if self._comments_ok else self.draft.lost_comments()
        if comments:
            from .confirm import ConfirmScreen

            shown = [f"line {c.line}: {c.text}" for c in comments[:5]]
            if len(comments) > 5:
                shown.append(f"and {len(comments) - 5} more")
            self.app.push_screen(ConfirmScreen(
                f"The file has {len(comments)} comment(s) the canonical layout does not keep",
                shown, yes="save without them", no="do not save"), self._comments_confirmed)
            return
        self._start_save()

    def _comments_confirmed(self, yes) -> None:
        if yes:
            self._comments_ok = True
            self._start_save()
        else:
            self.notify("Not saved: the file and its comments are as they were.")

    def _start_save(self) -> None:
        self._saving = True
        self.notify("… saving")
        self._save_worker()

    @work(thread=True, exclusive=True, group="save")
    def _save_worker(self) -> None:
        draft = self.draft
        try:
            text = draft.saved_text()
            path = draft.path.strip()
            if self.apply is not None:
                # the session's next version; a file named too becomes its circuit name
                self.apply(text, path or None)
            if path:
                draft.save()
            else:
                draft.mark_saved(text)
        except Exception as exc:  # noqa: BLE001 - bad input or a file problem: shown
            self.app.call_from_thread(self._save_failed, exc)
            return
        self.app.call_from_thread(self._saved)

    def _save_failed(self, exc) -> None:
        self._saving = False
        self.notify(f"Not saved: {getattr(exc, 'message', None) or exc}", severity="error",
                    timeout=10)

    def _saved(self) -> None:
        self._saving = False
        self.saved_path = self.draft.path or self.saved_path
        self.show_title()
        where = self.draft.path or "the session"
        self.notify(f"Saved: {where}.")


def open_editor(app, path, callback) -> bool:
    """Push the editor on ``path`` (a circuit file; None or "" for a new circuit).

    ``callback`` gets the saved file's path (None when nothing was saved).  A
    file that cannot be opened for editing (missing, not TOML, not format 1) is
    reported with a notification and False is returned.
    """
    import os

    from ..draft import CircuitDraft

    if not path:
        draft, where = CircuitDraft(), "new circuit"
    elif not os.path.exists(os.path.expanduser(path)):
        draft, where = CircuitDraft(os.path.expanduser(path)), "new file"
    else:
        try:
            draft = CircuitDraft.from_file(os.path.expanduser(path))
        except Exception as exc:  # noqa: BLE001 - bad input: shown, nothing opened
            app.notify(f"Cannot edit it: {getattr(exc, 'message', None) or exc}",
                       severity="error", timeout=10)
            return False
        where = ""
    app.push_screen(EditorScreen(draft, where=where), callback)
    return True


def session_draft(bench):
    """A draft of a bench session's circuit as stored in the logbook.  Its file is
    left empty: saving makes it the session's next version, and writes a file only
    when the technician names one (the file the session started from stays as it
    was)."""
    from ..draft import CircuitDraft

    return CircuitDraft.from_text(bench.session.circuit_text, "")
