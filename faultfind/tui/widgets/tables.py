"""The readings taken (each against its healthy band) and the parts (nominal, tolerance,
live estimate), as tables."""

from __future__ import annotations

import math

from textual.content import Content
from textual.widgets import DataTable

from .text import band_status, tag

__all__ = ["ReadingsTable", "PartsTable", "estimate_note"]


class ReadingsTable(DataTable):
    """One row a logged reading: number, what, display, healthy band, status, label."""

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        self.add_column("#", key="seq")
        self.add_column("reading", key="reading")
        self.add_column("shows", key="shows")
        self.add_column("healthy band", key="band")
        self.add_column("status", key="status", width=9)  # styled cells: fixed width
        self.add_column("label", key="label")

    def show(self, assessed) -> None:
        """Rows from :func:`faultfind.report.assess` results, newest last."""
        from faultfind.io.report import describe_reading

        self.clear()
        for a in assessed:
            lr = a.logged
            status = band_status(a.status)
            label = lr.reading.label
            if lr.struck:
                status = Content.from_markup(tag("muted", "✗ struck"))
                label = f"struck: {lr.struck_reason}" + (f" · {label}" if label else "")
            band = "OL (no path)" if a.expected is None else a.band_text()
            self.add_row(str(lr.seq), describe_reading(lr.reading), a.shown(), band, status,
                         label, key=str(lr.seq))
        if self.row_count:
            self.move_cursor(row=self.row_count - 1)

    def selected_seq(self) -> int | None:
        """The reading number of the row under the cursor (None: no rows)."""
        if not self.row_count:
            return None
        key = self.coordinate_to_cell_key((self.cursor_row, 0)).row_key
        return int(key.value)


def estimate_note(part, est, fault_mode=None) -> Content:
    """``✓ in tol``, ``▲ +31 %``, ``▼ -40 %``, ``✗ OPEN``, ``✗ SHORT`` against the tolerance."""
    if fault_mode in ("open", "short", "dead"):
        return Content.from_markup(tag("bad", f"✗ {fault_mode.upper()}"))
    if est is None or part.value in (None, 0):
        return Content("—")
    v = est.get("value")
    if v is None:
        return Content.from_markup(tag("bad", "✗ OPEN (∞)"))
    rel = v / part.value - 1.0
    if -part.tol_low - 1e-9 <= rel <= part.tol_high + 1e-9:
        return Content.from_markup(tag("ok", "✓ in tol"))
    if rel > 0:
        return Content.from_markup(tag("bad", f"▲ {rel * 100:+.0f} %"))
    return Content.from_markup(tag("bad", f"▼ {rel * 100:+.0f} %"))


#: Largest number of parts listed one row each; a larger circuit lists the parts
#: that matter (in the leading finding, estimated outside tolerance) first, then
#: the others in file order up to this, and one closing row counting the rest.
PARTS_SHOWN = 2000


class PartsTable(DataTable):
    """One row a part: ref, nominal, tolerance, live estimate, note, ~95 % range, kind,
    label.  On a circuit of more than :data:`PARTS_SHOWN` parts, the parts that
    matter come first and the rest are counted in a last row."""

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        for name in ("ref", "nominal", "tol", "estimate", "note", "~95 % range", "kind",
                     "label"):
            # styled cells get a fixed width (their width is not measured)
            self.add_column(name, key=name, width=10 if name == "note" else None)

    def show(self, circuit, doc) -> None:
        """Rows for every part; estimates from a ``diagnose --json`` document."""
        from faultfind.units import format_tolerance, format_value

        estimates = (doc or {}).get("estimates", {})
        best = (doc or {}).get("hypotheses", [{}])[0].get("faults", []) if doc else []
        modes = {f["ref"]: f["mode"] for f in best}
        self.clear()
        parts = list(circuit.parts)
        hidden = 0
        if len(parts) > PARTS_SHOWN:
            def matters(p):
                if p.ref in modes:
                    return True
                est = estimates.get(p.ref)
                if est is None or p.value is None:
                    return False
                v = est.get("value")
                if v is None or p.value == 0:
                    return True
                rel = v / p.value - 1.0
                return not (-p.tol_low - 1e-9 <= rel <= p.tol_high + 1e-9)
            first = [p for p in parts if matters(p)][:PARTS_SHOWN]
            seen = {p.ref for p in first}
            rest = [p for p in parts if p.ref not in seen][:max(PARTS_SHOWN - len(first), 0)]
            hidden = len(parts) - len(first) - len(rest)
            parts = first + rest
        for p in parts:
            unit = p.info.unit or ""
            nominal = "—" if p.value is None else format_value(p.value, unit)
            tol = "—" if p.value is None else format_tolerance(p.tol_low, p.tol_high)
            est = estimates.get(p.ref)
            if est is None or p.value is None:
                value, rng = "—", "—"
            else:
                value = _v(est.get("value"), unit)
                rng = f"{_v(est.get('low'), unit)} .. {_v(est.get('high'), unit)}"
            note = estimate_note(p, est, modes.get(p.ref)) if doc else Content("—")
            self.add_row(p.ref, nominal, tol, value, note, rng, p.kind, p.label, key=p.ref)
        if hidden:
            more = f"{hidden:,} more parts" + (" within tolerance" if doc else "")
            self.add_row("…", "", "", "", Content(""), more,
                         "", "not listed: faultfind diagnose --json has every estimate",
                         key="__more__")


def _v(x, unit) -> str:
    from faultfind.units import format_value

    if x is None:
        return "∞"
    if isinstance(x, float) and not math.isfinite(x):
        return "∞"
    return format_value(x, unit)
