"""The compact reading form of ``faultfind log add``: ``V TP1 11.91``, ``R F1 0.2``."""

from __future__ import annotations

from ...errors import InputError
__all__ = ["parse_compact", "compact_of", "COMPACT_KINDS"]


COMPACT_KINDS = {
    "v": ("voltage", "dc"), "vdc": ("voltage", "dc"), "vac": ("voltage", "ac"),
    "i": ("current", "dc"), "idc": ("current", "dc"), "iac": ("current", "ac"),
    "r": ("resistance", "in-circuit"), "rl": ("resistance", "lifted"),
    "rlifted": ("resistance", "lifted"),
}
_FIELD_OPTIONS = ("quantity", "mode", "plus", "minus", "part", "setup", "value")
_ACK_HINT = "faultfind log caution {id} --caution-acknowledged"


def parse_compact(tokens, circuit) -> dict:
    """Reading fields from the compact form ``KIND WHERE VALUE``.

    Parameters
    ----------
    tokens : sequence of str
        ``KIND`` one of :data:`COMPACT_KINDS` (any case: ``V``, ``Vac``,
        ``I``, ``Iac``, ``R``, ``Rlifted``); ``WHERE`` a node (voltage to
        ground), ``PLUS,MINUS`` (two nodes), or a part (current; resistance
        across it); ``VALUE`` the display, the rest of the tokens joined by
        spaces (``23.91 V``, ``4k61``, ``OL``).
    circuit : Circuit
        Tells a part from a node for a resistance reading.

    Returns
    -------
    dict
        Readings-file fields for :meth:`Logbook.add_reading`.

    Raises
    ------
    InputError
        Fewer than three tokens or an unknown KIND (key ``READING``).
    """
    tokens = [str(t) for t in tokens]
    if len(tokens) < 3:
        raise InputError("a compact reading is KIND WHERE VALUE, e.g. 'V TP1 11.91', "
                         "'V +24V,24V-F 23.9', 'I H1 2.45mA', 'R F1 OL', 'Rlifted K1 180.6'",
                         key="READING")
    kind, where, value = tokens[0].lower(), tokens[1], " ".join(tokens[2:])
    if kind not in COMPACT_KINDS:
        raise InputError(f"unknown kind {tokens[0]!r}: one of V, Vac, I, Iac, R, Rlifted",
                         key="READING")
    quantity, extra = COMPACT_KINDS[kind]
    fields = {"quantity": quantity, "value": value}
    plus, sep, minus = where.partition(",")
    if quantity == "current":
        fields.update(mode=extra, part=where)
    elif quantity == "voltage":
        fields.update(mode=extra, plus=plus, minus=minus if sep else "")
    elif not sep and circuit.has_part(where):
        fields.update(setup=extra, part=where)
    elif not sep and where not in circuit.nodes:
        raise InputError(f"{where!r} is neither a part nor a node of the circuit: a resistance "
                         "reading is across a part (R F1) or between nodes (R A,0V)",
                         key="READING")
    else:
        fields.update(setup=extra, plus=plus, minus=minus if sep else "")
    return fields


def compact_of(row) -> str:
    """``KIND WHERE`` of the compact form for a reading given as readings-file fields.

    Parameters
    ----------
    row : mapping
        ``quantity, mode, plus, minus, part, setup`` (e.g. a suggestion of
        ``faultfind diagnose --json``).

    Returns
    -------
    str
        e.g. ``"V 24V-F,GUARD"``, ``"Iac H1"``, ``"Rlifted K1"``.
    """
    q = row.get("quantity")
    if q == "resistance":
        kind = "Rlifted" if row.get("setup") == "lifted" else "R"
    else:
        kind = ("V" if q == "voltage" else "I") + ("ac" if row.get("mode") == "ac" else "")
    if row.get("part"):
        where = row["part"]
    else:
        where = row.get("plus") or ""
        if row.get("minus"):
            where += "," + row["minus"]
    return f"{kind} {where}"
