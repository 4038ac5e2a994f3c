"""A session at the bench: the UI's working state over the logbook, without Textual.

:class:`Bench` holds what the bench screen shows and does: the session's
circuit and readings, the power state the technician has declared, the
latest diagnosis and the next suggested readings.  Every reading goes
through :meth:`Bench.add`, which checks it, refuses it when the declared
power state does not allow it, and returns only once the logbook has
committed it.  The screen calls the slow methods (:meth:`Bench.diagnose`,
:meth:`Bench.suggestions`) from a worker thread; the logbook serializes
calls from several threads.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

from faultfind.errors import InputError, ReadingsError
from faultfind.io.circuit_versions import circuit_versions, diagnosis_circuit, revise_circuit
from faultfind.model import Reading, fault_mode_name, power_for

from .entry import check_cells, describe_cells, parse_entry

__all__ = ["Bench", "POWER_WORDS", "Preview", "parse_found", "power_needed", "band_texts"]

#: Power state -> (symbol, words).  "on": the circuit may be live; "off": the
#: technician has isolated it, locked it out and verified it dead.
POWER_WORDS = {
    "on": ("↯", "POWER ON · LIVE"),
    "off": ("⊘", "POWER OFF · ISOLATED"),
}


def power_needed(reading: Reading) -> str:
    """``"off"`` for a resistance reading or a diode test (circuit isolated), else ``"on"``."""
    return power_for(reading.quantity)


@dataclass(frozen=True)
class Preview:
    """What the entry line would store, for the line under it.

    Attributes
    ----------
    reading : Reading or None
        The checked reading (None when the line does not check).
    text : str
        What it is, or what is wrong.
    ok : bool
        True when Enter would store it.
    expected, band : str
        Healthy expected display and ~95 % band, as text ("" when unknown).
    status : str or None
        Status key of :data:`faultfind.io.report.STATUS` once a value is
        typed.
    refused : bool
        True when the power state forbids the reading.
    """

    reading: Reading | None
    text: str
    ok: bool
    expected: str = ""
    band: str = ""
    status: str | None = None
    refused: bool = False


def parse_found(text, circuit) -> list[tuple[str, str | None]]:
    """Parts found faulty, from ``"F1:open, K1"``; ``""``/``"none"`` is no fault.

    Raises
    ------
    InputError
        A ref that is not a part of the circuit or a mode the part cannot
        have (key ``faults``).
    """
    if not isinstance(text, str):
        raise InputError(f"must be text, got {type(text).__name__}", key="faults")
    text = text.strip()
    if text.lower() in ("", "none", "no fault", "-"):
        return []
    out = []
    for item in re.split(r"[,;\s]+", text):
        if not item:
            continue
        ref, _, mode = item.partition(":")
        mode = fault_mode_name(mode)
        if not circuit.has_part(ref):
            close = [p.ref for p in circuit.parts if p.ref.lower() == ref.lower()]
            hint = f" (did you mean {close[0]}?)" if close else ""
            raise InputError(f"{ref!r} is not a part of this circuit{hint}", part=ref,
                             key="faults")
        modes = circuit.part(ref).fault_modes
        if mode and mode not in modes:
            raise InputError(f"{mode!r} is not a fault mode of {ref}: "
                             f"{', '.join(modes) or 'it has none'}", part=ref, key="faults")
        out.append((ref, mode or None))
    return out


class Bench:
    """One logbook session worked on in the UI.

    Use :meth:`start` or :meth:`resume`.  Parameters of the constructor:

    Parameters
    ----------
    book : faultfind.io.logbook.Logbook
        The open logbook.
    session_id : int
    priors : Priors, optional
        Fault priors for the diagnosis and advice (docs/priors.md); default
        the handbook's.
    """

    def __init__(self, book, session_id: int, priors=None):
        self.book = book
        self.priors = priors
        self.session_id = session_id
        self.power = "on"  # live until the technician says it is isolated
        self.session = book.get_session(session_id)
        self.circuit = self.session.circuit()
        self.meters = self.session.meters()
        self.stored = self.session.latest_diagnosis  # StoredDiagnosis or None
        self.suggested: list[dict] = []
        self.suggested_power: str | None = None

    # -- opening -------------------------------------------------------------------------

    @classmethod
    def start(cls, book, circuit, *, unit, technician="", location="", purpose="repair",
              meters=None, acknowledged_at=None, priors=None) -> "Bench":
        """Start a session on ``circuit`` (a file) and record the caution's acknowledgement.

        Parameters
        ----------
        book : Logbook
        circuit : str or os.PathLike
            The circuit file; its text is stored with the session.
        unit, technician, location, purpose
            As :meth:`faultfind.io.logbook.Logbook.start_session`.
        meters : str or os.PathLike, optional
            Meter profile file.
        acknowledged_at : str, optional
            When the safety caution was acknowledged (ISO 8601); recorded in
            the session.

        Raises
        ------
        InputError
            A bad field, a missing or invalid circuit or meter file: no
            session is created.
        """
        if not isinstance(circuit, (str, os.PathLike)) or not os.fspath(circuit).strip():
            raise InputError("name a circuit file (or pick a field case)", key="circuit")
        s = book.start_session(circuit, unit=unit, technician=technician, location=location,
                               purpose=purpose, meters=meters)
        if acknowledged_at is not None:
            book.acknowledge_caution(s.id, at=acknowledged_at)
        return cls(book, s.id, priors)

    @classmethod
    def resume(cls, book, session_id: int, *, acknowledged_at=None, priors=None) -> "Bench":
        """Resume an open session; the caution's acknowledgement is recorded if it
        has none yet.  Raises LogbookError for a closed or missing session."""
        s = book.get_session(session_id)
        if s.ended_at is None and acknowledged_at is not None:
            book.acknowledge_caution(session_id, at=acknowledged_at)
        return cls(book, session_id, priors)

    # -- state ---------------------------------------------------------------------------

    @property
    def is_open(self) -> bool:
        return self.session.ended_at is None

    def refresh(self):
        """Re-read the session from the logbook."""
        self.session = self.book.get_session(self.session_id)
        return self.session

    def readings(self) -> list[Reading]:
        """The readings that count (not struck out), in order."""
        return self.session.live_readings()

    def assessed(self):
        """Every logged reading against its healthy band
        (:func:`faultfind.report.assess_session`)."""
        from faultfind.report import assess

        return assess(self.circuit, self.meters, self.session.readings)

    def set_power(self, state: str) -> None:
        """Declare the circuit live (``"on"``) or isolated (``"off"``)."""
        if state not in POWER_WORDS:
            raise InputError(f"expected 'on' or 'off', got {state!r}", key="power")
        if state != self.power and self.is_open:
            # log the step: isolating (lock-out, verify dead, discharge) or re-energizing
            self.book.add_event(self.session_id, "isolated" if state == "off" else "energized",
                                "declared in the terminal UI")
        self.power = state

    # -- the circuit's versions ----------------------------------------------------------

    def revise_circuit(self, text: str, name: str | None = None):
        """Make ``text`` the session's circuit (its next version in the logbook);
        ``name``: the file it was also saved to, the session's circuit name from now on.

        The readings already taken stay; the diagnosis and the advice are then
        worked out again on the new circuit (the caller runs them).

        Returns
        -------
        faultfind.io.circuit_versions.CircuitVersion

        Raises
        ------
        CircuitError
            Not a valid circuit, or a reading that counts no longer fits it.
        LogbookError
            The session is closed or the logbook cannot be written.
        """
        version = revise_circuit(self.book, self.session_id, text, name=name)
        self.refresh()
        self.circuit = self.session.circuit()
        self.suggested = []
        self.suggested_power = None
        return version

    def circuit_version(self):
        """The version of the circuit the session is on now."""
        return circuit_versions(self.book, self.session_id)[-1]

    def stored_circuit(self):
        """``(version, changed)`` of the stored diagnosis's circuit
        (:func:`faultfind.io.circuit_versions.diagnosis_circuit`); ``(None, False)``
        without a stored diagnosis."""
        if self.stored is None:
            return None, False
        return diagnosis_circuit(self.book, self.session_id, self.stored)

    # -- readings ------------------------------------------------------------------------

    def refusal(self, reading: Reading) -> str | None:
        """Why the declared power state forbids ``reading`` (None: it is allowed)."""
        need = power_needed(reading)
        if need == self.power:
            return None
        if need == "off":
            return ("refused: the circuit is marked LIVE. A resistance reading needs it "
                    "isolated, locked out, verified dead and discharged (on a live circuit the "
                    "ohmmeter reads wrong and can be damaged). When it is, mark it isolated: "
                    "ctrl+o (o outside the entry).")
        return ("refused: the circuit is marked ISOLATED. Voltage and current readings are "
                "compared with the energized circuit (a 0 V reading now is your verify-dead "
                "check, not a diagnosis reading). When power is back on, mark it live: "
                "ctrl+o (o outside the entry).")

    def interpret(self, text: str, *, require_value=True) -> Reading:
        """The reading a typed line means, checked as a readings-file row.

        Raises
        ------
        ReadingsError
            The line does not parse or the row does not check.
        """
        return check_cells(parse_entry(text, self.circuit), self.circuit, self.meters,
                           require_value=require_value)

    def preview(self, text: str) -> Preview:
        """What Enter would do with ``text``: the reading, its band, or what is wrong."""
        from faultfind.expect import expect
        from faultfind.io.logbook import LoggedReading
        from faultfind.report import assess

        try:
            cells = parse_entry(text, self.circuit)
            rd = check_cells(cells, self.circuit, self.meters, require_value=False)
        except ReadingsError as exc:
            return Preview(None, _message(exc), False)
        what = describe_cells(cells)
        e = expect(self.circuit, [rd], self.meters)[0]
        expected, band = band_texts(e.expected, e.low, e.high, e.unit)
        refused = self.refusal(rd)
        if refused:
            return Preview(rd, refused, False, expected, band, None, True)
        if rd.value is None and not rd.overrange:
            return Preview(rd, f"{what}: now type the display", False, expected, band)
        a = assess(self.circuit, self.meters, [LoggedReading(0, "", rd)])[0]
        return Preview(rd, f"{what} = {rd.raw}", True, expected, band, a.status)

    def add(self, text: str):
        """Check a typed reading, refuse it if the power state forbids it, commit it.

        Returns
        -------
        faultfind.io.logbook.LoggedReading
            Returned once the logbook has committed it (on disk).

        Raises
        ------
        ReadingsError
            Bad input (nothing stored), or refused by the power state (key
            ``power``, nothing stored).
        LogbookError
            The session is closed or the logbook cannot be written.
        """
        cells = parse_entry(text, self.circuit)
        rd = check_cells(cells, self.circuit, self.meters)
        why = self.refusal(rd)
        if why:
            raise ReadingsError(why, key="power")
        logged = self.book.add_reading(self.session_id, {k: v for k, v in cells.items()
                                                         if v not in (None, "")}, origin="ui")
        self.refresh()
        return logged

    def strike(self, seq: int, reason: str):
        """Strike out reading ``seq`` (kept, no longer counted)."""
        lr = self.book.strike_reading(self.session_id, seq, reason)
        self.refresh()
        return lr

    # -- diagnosis and advice (slow: call from a worker) ---------------------------------

    def implied_power(self) -> str:
        """The power state the stored diagnosis's suggestions assumed: that of the
        last reading that counts (``"on"`` with none)."""
        live = self.readings()
        return power_needed(live[-1]) if live else "on"

    def diagnose(self, progress=None):
        """Diagnose the readings that count and store the result in the logbook.

        Parameters
        ----------
        progress : callable, optional
            Called as ``progress(stage, done, total)`` as the diagnosis runs
            (:func:`faultfind.diagnose.diagnose`), in the calling thread.

        Returns
        -------
        faultfind.io.logbook.StoredDiagnosis

        Raises
        ------
        TypeError
            ``progress`` is neither None nor callable.
        """
        if progress is not None and not callable(progress):
            raise TypeError(f"progress: must be callable or None, got {type(progress).__name__}")
        self.stored = self.book.store_diagnosis(self.session_id, top=5, progress=progress,
                                                priors=self.priors)
        self.refresh()
        self.suggested = list(self.stored.document.get("suggestions", []))
        self.suggested_power = self.implied_power()
        return self.stored

    def suggestions(self) -> list[dict]:
        """Next readings for the declared power state (``suggestion_json`` dicts).

        The stored diagnosis's suggestions assume the power state of the last
        reading; when the technician has changed it since, the advice is
        worked out again for the declared state (isolating or re-energizing
        is part of a reading's effort).
        """
        if self.suggested_power == self.power:
            return self.suggested
        from faultfind.advise import suggest, suggestion_json

        found = suggest(self.circuit, self.readings(), self.meters, power=self.power, top=5,
                        priors=self.priors)
        self.suggested = [suggestion_json(s) for s in found]
        self.suggested_power = self.power
        return self.suggested

    # -- close-out -----------------------------------------------------------------------

    def close(self, found: str, *, confirmed_by="", action="", notes=""):
        """Close the session with its outcome (``found``: ``"F1:open"``, ``""`` none)."""
        faults = parse_found(found, self.circuit)
        self.session = self.book.close_session(self.session_id, faults,
                                               confirmed_by=confirmed_by, action=action,
                                               notes=notes)
        return self.session

    def default_report_name(self) -> str:
        """``BP-2-session3.html``: the unit (file-safe) and the session number."""
        unit = re.sub(r"[^A-Za-z0-9._-]+", "_", self.session.unit).strip("._") or "unit"
        return f"{unit}-session{self.session_id}.html"

    def export(self, path) -> tuple[str, Path]:
        """Write the work-order report (Markdown or HTML by the file's suffix).

        Returns
        -------
        (str, pathlib.Path)
            The format and the file written.

        Raises
        ------
        InputError
            An unknown suffix or a file that cannot be written.
        """
        from faultfind.report import report_format, write_report

        if not isinstance(path, (str, os.PathLike)) or not os.fspath(path).strip():
            raise InputError("name the report file, e.g. report.html or report.md",
                             key="report")
        path = Path(os.path.expanduser(os.fspath(path).strip()))
        fmt = report_format(path)
        self.refresh()
        write_report(self.session, path, fmt)
        return fmt, path

    def history(self):
        """Every session of this unit, oldest first."""
        return self.book.history(self.session.unit)


def band_texts(expected, low, high, unit) -> tuple[str, str]:
    """``("23.9 V", "23.4 V .. 24.4 V")``; ``("OL", "OL (no path)")`` when a healthy
    circuit reads over range."""
    from faultfind.units import format_value

    def v(x, digits=3):
        if unit != "Ω" and x != 0 and abs(x) < 1e-10:
            x = 0.0
        return format_value(x, unit, digits=digits)

    if expected is None:
        return "OL", "OL (no path)"
    return v(expected, 4), f"{v(min(low, high))} .. {v(max(low, high))}"


def _message(exc: InputError) -> str:
    """An error's message with its column, without the one-row file's place."""
    msg = exc.message
    if exc.key and not msg.startswith(f"{exc.key}:") and exc.key not in ("entry",):
        return f"{exc.key}: {msg}"
    return msg
