"""The compact reading form of ``faultfind log add``: ``V TP1 11.91``, ``R F1 0.2``, ``D D3 0.61``."""

from __future__ import annotations

from ...errors import InputError
__all__ = ["parse_compact", "compact_of", "COMPACT_KINDS"]


COMPACT_KINDS = {
    "v": ("voltage", "dc"), "vdc": ("voltage", "dc"), "vac": ("voltage", "ac"),
    "i": ("current", "dc"), "idc": ("current", "dc"), "iac": ("current", "ac"),
    "r": ("resistance", "in-circuit"), "rl": ("resistance", "lifted"),
    "rlifted": ("resistance", "lifted"),
    # the meter's diode test (formats.md section 4): a power-off reading
    "d": ("diode-test", None), "diode": ("diode-test", None),
}
_FIELD_OPTIONS = ("quantity", "mode", "plus", "minus", "part", "setup", "value")
_ACK_HINT = "faultfind log caution {id} --caution-acknowledged"


def parse_compact(tokens, circuit) -> dict:
    """Reading fields from the compact form ``KIND WHERE VALUE``.

    Parameters
    ----------
    tokens : sequence of str
        ``KIND`` one of :data:`COMPACT_KINDS` (any case: ``V``, ``Vac``,
        ``I``, ``Iac``, ``R``, ``Rlifted``, ``D`` or ``Diode`` for the diode
        test); ``WHERE`` a node (voltage to ground), ``PLUS,MINUS`` (two
        nodes), or a part (current; resistance or diode test across it, a
        diode test with the red probe on its ``nodes[0]``, the anode);
        ``VALUE`` the display, the rest of the tokens joined by spaces
        (``23.91 V``, ``4k61``, ``OL``).
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
                         "'V +24V,24V-F 23.9', 'I H1 2.45mA', 'R F1 OL', 'Rlifted K1 180.6', "
                         "'D D3 0.612'",
                         key="READING")
    kind, where, value = tokens[0].lower(), tokens[1], " ".join(tokens[2:])
    if kind not in COMPACT_KINDS:
        raise InputError(f"unknown kind {tokens[0]!r}: one of V, Vac, I, Iac, R, Rlifted, D "
                         "(diode test)",
                         key="READING")
    quantity, extra = COMPACT_KINDS[kind]
    fields = {"quantity": quantity, "value": value}
    plus, sep, minus = where.partition(",")
    if quantity == "current":
        fields.update(mode=extra, part=where)
    elif quantity == "voltage":
        fields.update(mode=extra, plus=plus, minus=minus if sep else "")
    elif not sep and circuit.has_part(where):
        fields.update(part=where, **({"setup": extra} if extra else {}))
    elif not sep and where not in circuit.nodes:
        what = (("a diode test", "D D3", "D B,E") if quantity == "diode-test"
                else ("a resistance reading", "R F1", "R A,0V"))
        raise InputError(f"{where!r} is neither a part nor a node of the circuit: {what[0]} "
                         f"is across a part ({what[1]}) or between nodes ({what[2]})",
                         key="READING")
    else:
        fields.update(plus=plus, minus=minus if sep else "", **({"setup": extra} if extra
                                                                 else {}))
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
        e.g. ``"V 24V-F,GUARD"``, ``"Iac H1"``, ``"Rlifted K1"``, ``"D D3"``.
    """
    q = row.get("quantity")
    if q == "diode-test":
        kind = "D"
    elif q == "resistance":
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
