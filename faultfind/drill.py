"""Drills: diagnosis practice on a simulated board with a hidden fault.

A trainer picks a circuit; :class:`Drill` draws a board whose healthy parts
take random values inside their tolerances, hides one fault in it (drawn from
the failure-mode priors, or set by the trainer), and plays the meter: each
reading the apprentice asks for comes back as the meter would show it (its
loading, an error within its accuracy specification, rounding, ``OL``).  Safe
habits are enforced: nothing is read before the safety caution is
acknowledged, and an ohmmeter on a live board is refused and counted as a
safety error; isolating and restoring power are the apprentice's own steps.
The apprentice commits to a verdict; the drill scores it against the path
faultfind's own advice takes on the same board, and explains which readings
pointed to the fault, which were wasted and which reading would have settled
it soonest.  docs/drill.md is the guide (scoring rules, commands).

No UI here: the command line (faultfind/cli/drill.py) and the terminal UI
drive a :class:`Drill` through its methods, or through :meth:`Drill.command`
with the text commands of docs/drill.md, and show the :class:`Step` each
returns::

    drill = Drill(load_circuit("field_cases/booster_pump_panel/circuit.toml"),
                  "Sam", seed=7)
    drill.acknowledge()                # after showing drill.caution
    drill.command("read V 24V-F")      # Step: kind "reading", message "... = 0 V"
    drill.command("verdict F1 open")   # Step: kind "verdict"; drill.result is set
    drill.result.score.total           # 0..100
"""

from __future__ import annotations

import csv
import difflib
import io
import math
import secrets
import zlib
from dataclasses import dataclass
from datetime import datetime, timezone

import numpy as np

from .advise import DEFAULT_COSTS, ELV_AC, ELV_DC, candidate_readings, suggest
from .engine.meter import spec_limit
from .engine.oracle import oracle_readings
from .engine.hypotheses import rank
from .engine.priors import KIND_WEIGHTS, MODE_SHARES, P_HEALTHY
from .errors import InputError, ReadingsError
from .expect import expect
from .io.logbook import SAFETY_CAUTION
from .io.meters_file import meters_with_default
from .io.readings_file import COLUMNS, parse_readings
from .model import QUANTITY_UNITS, Circuit, Reading
from .simulate import draw_board, fault_overrides, simulate_readings
from .units import format_value, parse_value

__all__ = ["Drill", "DrillFault", "Step", "Score", "ReadingNote", "Explanation", "AdvicePath",
           "DrillResult", "parse_fault", "check_fault", "draw_fault", "describe_reading",
           "POINTS", "SAFETY_ERROR_POINTS", "HINT_POINTS", "EFFORT_ALLOWANCE", "EFFORT_SPAN",
           "VALUE_MARGIN",
           "SETTLED", "ADVICE_LIMIT", "WASTED_CHANGE", "COMMANDS"]

#: Points of each part of the score (docs/drill.md, "Scoring"): correctness 60, effort 25,
#: safety 15.
POINTS = {"part": 30, "mode": 20, "value": 10, "effort": 25, "safety": 15}
#: Safety points lost per safety error.
SAFETY_ERROR_POINTS = 10
#: Points taken off per hint (``suggest``).
HINT_POINTS = 5
#: Effort above the advice path's that still earns full effort points.
EFFORT_ALLOWANCE = 2.0
#: Effort over the budget that takes every effort point (or the budget itself, when larger):
#: the points fall linearly in between.
EFFORT_SPAN = 10.0
#: A drift verdict's value is right within this fraction of the actual value.
VALUE_MARGIN = 0.20
#: The advice path stops when its top hypothesis reaches this probability.
SETTLED = 0.95
#: The advice path takes at most this many readings.
ADVICE_LIMIT = 25
#: A reading that moves the ranking less than this (total variation) is wasted.
WASTED_CHANGE = 0.05

#: The text commands of :meth:`Drill.command`, with their one-line help.
COMMANDS = {
    "ack": "acknowledge the safety caution (first, before anything else)",
    "read": "take a reading: read V TP1 | read V A,B | read I R3 | read R F1 | read R R2 lifted "
            "| read V OUT ac | read V OUT ac 1k",
    "isolate": "isolate the board: lock out, tag out, prove dead, discharge (before resistance "
               "readings)",
    "energize": "restore power (before voltage and current readings)",
    "suggest": f"ask faultfind for the next reading (a hint: -{HINT_POINTS} points)",
    "status": "power state, readings and effort so far",
    "verdict": "commit: verdict R7 open | verdict R9 drift 6k8 | verdict none",
    "caution": "show the safety caution again",
    "help": "this list",
    "quit": "stop without a verdict (not scored)",
}

_UNITS = QUANTITY_UNITS
_KINDS = {"v": ("voltage", "dc", None), "vdc": ("voltage", "dc", None),
          "vac": ("voltage", "ac", None), "i": ("current", "dc", None),
          "idc": ("current", "dc", None), "iac": ("current", "ac", None),
          "r": ("resistance", None, "in-circuit"), "rl": ("resistance", None, "lifted"),
          "rlifted": ("resistance", None, "lifted")}
_READ_HELP = ("a reading is KIND WHERE, KIND one of V, I, R (Vac, Iac, Rlifted): read V TP1, "
              "read V A,B, read I R3, read R F1, read R R2 lifted, read V OUT ac 1k")


# -- faults ------------------------------------------------------------------------------


@dataclass(frozen=True)
class DrillFault:
    """A fault as a drill names it: the hidden fault, or an apprentice's verdict.

    Attributes
    ----------
    ref : str or None
        The faulty part; None for "no fault" (a healthy unit).
    mode : str or None
        One of the part's fault modes.
    value : float or None
        For a drift: the actual (hidden fault) or named (verdict) value, SI.
    """

    ref: str | None = None
    mode: str | None = None
    value: float | None = None

    def as_tuple(self) -> tuple:
        return (self.ref, self.mode, self.value)

    def to_json(self) -> dict | None:
        return None if self.ref is None else {"ref": self.ref, "mode": self.mode,
                                               "value": self.value}

    def describe(self, circuit: Circuit) -> str:
        """``F1 open``, ``R9 drift 6.8 kΩ (+45 % of 4.7 kΩ)``, ``no fault (healthy unit)``."""
        if self.ref is None:
            return "no fault (a healthy unit)"
        if self.mode != "drift" or self.value is None:
            return f"{self.ref} {self.mode}"
        p = circuit.part(self.ref)
        ratio = self.value / p.value
        rel = f"{(ratio - 1) * 100:+.0f} %" if 1 / 3 <= ratio <= 3 else f"x{ratio:.3g}"
        return (f"{self.ref} drift {format_value(self.value, p.info.unit)} ({rel} of "
                f"{format_value(p.value, p.info.unit)})")


def _hint(name, choices, what="parts") -> str:
    """``; did you mean 'F1'?`` and the full list when it is short."""
    choices = list(choices)
    close = difflib.get_close_matches(name, choices, n=1, cutoff=0.5)
    out = f"; did you mean {close[0]!r}?" if close else ""
    if len(choices) <= 12:
        out += f"; the circuit's {what} are {', '.join(choices)}"
    return out


def check_fault(circuit: Circuit, ref, mode, value=None, *, what="fault") -> DrillFault:
    """A checked :class:`DrillFault` on ``circuit``.

    Parameters
    ----------
    circuit : Circuit
    ref : str or None
        A part of the circuit; None (or ``"none"``) for no fault.
    mode : str
        One of the part's fault modes (case-insensitive).
    value : str, float or None
        A drift's value, required for a drift and refused otherwise: a number
        in SI units or text with a prefix (``"6k8"``, ``"17.2 V"``).
    what : str, optional
        The argument's name for messages (``"--fault"``, ``"verdict"``).

    Returns
    -------
    DrillFault

    Raises
    ------
    InputError
        An unknown part (with a suggestion), a mode the part cannot have, a
        drift without a value or with one that does not parse or is not
        positive, a value given for another mode.
    """
    if ref is None or str(ref).strip().lower() in ("none", "no-fault", "healthy"):
        if mode not in (None, "") or value not in (None, ""):
            raise InputError("'none' (no fault) takes no mode or value", key=what)
        return DrillFault()
    ref = str(ref).strip()
    if not circuit.has_part(ref):
        refs = [p.ref for p in circuit.parts]
        raise InputError(f"{ref!r} is not a part of the circuit{_hint(ref, refs)}", key=what)
    part = circuit.part(ref)
    mode = str(mode or "").strip().lower()
    modes = part.fault_modes
    if mode not in modes:
        raise InputError(f"{mode or 'no mode'!r} is not a fault mode of {ref} ({part.kind}): "
                         f"{', '.join(modes) or 'it has none'}", part=ref, key=what)
    if mode != "drift":
        if value not in (None, ""):
            raise InputError(f"only a drift takes a value; '{ref} {mode}' takes none",
                             part=ref, key=what)
        return DrillFault(ref, mode)
    unit = part.info.unit
    if value in (None, ""):
        raise InputError(f"a drift needs the value: e.g. '{ref} drift "
                         f"{format_value(part.value * 1.5, unit)}'", part=ref, key=what)
    if isinstance(value, str):
        try:
            v = parse_value(value, unit, what=f"{ref}'s value")
        except InputError as exc:
            raise InputError(exc.message, part=ref, key=what) from None
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"the value must be a number or text, got {value!r}", part=ref, key=what)
    else:
        v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"a drifted value must be above zero, got {value!r}", part=ref, key=what)
    return DrillFault(ref, "drift", v)


def parse_fault(text, circuit: Circuit, *, what="--fault") -> DrillFault:
    """A fault written ``REF:MODE``, ``REF:drift:VALUE`` or ``none`` (a trainer's choice).

    Raises
    ------
    InputError
        Not in that form, or not valid for the circuit (:func:`check_fault`).
    """
    if not isinstance(text, str) or not text.strip():
        raise InputError("write REF:MODE, REF:drift:VALUE or none (e.g. F1:open, R9:drift:6k8)",
                         key=what)
    bits = text.strip().split(":")
    if len(bits) == 1 and bits[0].lower() in ("none", "no-fault", "healthy"):
        return DrillFault()
    if len(bits) not in (2, 3):
        raise InputError(f"{text!r}: write REF:MODE, REF:drift:VALUE or none (e.g. F1:open, "
                         "R9:drift:6k8)", key=what)
    return check_fault(circuit, bits[0], bits[1], bits[2] if len(bits) == 3 else None, what=what)


def _displays(readings, values) -> np.ndarray:
    """Complex network values to displays (signed DC, RMS for AC, ohms; inf for OL)."""
    out = np.empty(len(readings))
    for i, (rd, t) in enumerate(zip(readings, values)):
        t = 0.0 if np.isnan(t) else t
        if rd.quantity == "resistance":
            out[i] = abs(t.real) if np.isfinite(t) else np.inf
        else:
            out[i] = abs(t) if rd.mode == "ac" else t.real
    return out


def _faulted(circuit, readings, meters, fault: DrillFault) -> np.ndarray:
    """Displays of ``readings`` on the nominal circuit with ``fault`` (no meter error)."""
    faults = [] if fault.ref is None else [fault.as_tuple()]
    return _displays(readings, oracle_readings(circuit, list(readings), meters,
                                               fault_overrides(faults)))


def _outside(e, value, meters, rd, k=2.0) -> int:
    """-1/+1 when ``value`` is below/above the healthy band ``e`` widened by ``k`` meter
    accuracy limits, else 0 (OL counts as above)."""
    meter = meters[rd.meter or "default"]
    ol = not np.isfinite(value) or (rd.quantity == "resistance" and value > meter.max_resistance)
    if e.overrange or e.expected is None:
        return 0 if ol else -1
    if ol:
        return 1
    a = float(spec_limit(meter, rd.quantity, rd.mode, abs(value)))
    return 1 if value > e.high + k * a else (-1 if value < e.low - k * a else 0)


def _drift_value(part, rng) -> float:
    if part.is_source:  # a sagging supply
        f = rng.uniform(0.5, 0.8)
    elif part.kind in ("fuse", "switch"):  # a high-resistance contact or fuse
        f = math.exp(rng.uniform(math.log(20), math.log(200)))
    elif rng.random() < 0.5:  # clearly above the tolerance
        lo = max(1.5, (1 + part.tol_high) * 1.3)
        f = math.exp(rng.uniform(math.log(lo), math.log(lo * 10 / 3)))
    else:  # clearly below it
        hi = min(1 / 1.5, (1 - part.tol_low) / 1.3)
        f = math.exp(rng.uniform(math.log(hi * 0.3), math.log(hi)))
    return float(f"{part.value * f:.3g}")


def _probes(circuit, meters):
    cands = candidate_readings(circuit, [p.ref for p in circuit.parts if p.kind != "opamp"])
    return cands, expect(circuit, cands, meters)


def _detectable(circuit, fault, meters, probes) -> bool:
    cands, bands = probes
    values = _faulted(circuit, cands, meters, fault)
    return any(_outside(e, v, meters, rd) for rd, e, v in zip(cands, bands, values))


def draw_fault(circuit: Circuit, rng, meters=None) -> DrillFault:
    """One fault from the failure-mode priors that some reading would show.

    Parameters
    ----------
    circuit : Circuit
    rng : numpy Generator or int
    meters : dict, optional

    Returns
    -------
    DrillFault
        Part and mode drawn with the weights of :mod:`faultfind.engine.priors`
        (kind weight times mode share); a drift's value clearly outside the
        tolerance (passive parts x1.5..x5 or /1.5../5 beyond it, fuses and
        contacts x20..x200, supplies 50..80 % of nominal), three significant
        digits.  A fault no candidate reading (node voltages, currents,
        in-circuit and lifted resistances, AC at other frequencies) would show
        outside its healthy band is redrawn.

    Raises
    ------
    InputError
        No fault of the circuit would show on any reading.
    """
    rng = np.random.default_rng(rng)
    meters = meters_with_default(meters)
    opts = [(p, m) for p in circuit.parts for m in p.fault_modes]
    w = np.array([KIND_WEIGHTS.get(p.kind, 0.0) * MODE_SHARES.get(p.kind, {}).get(m, 0.0)
                  for p, m in opts])
    probes = _probes(circuit, meters)
    while w.sum() > 0:
        i = int(rng.choice(len(opts), p=w / w.sum()))
        part, mode = opts[i]
        fault = DrillFault(part.ref, mode, _drift_value(part, rng) if mode == "drift" else None)
        if _detectable(circuit, fault, meters, probes):
            return fault
        w[i] = 0.0
    raise InputError("no fault faultfind can plant in this circuit would show on a reading: "
                     "set one with --fault", file=circuit.source)


# -- what a drill returns ----------------------------------------------------------------


def describe_reading(rd: Reading, circuit: Circuit | None = None) -> str:
    """A reading in the drill's command words: ``V 24V-F``, ``V A,B``, ``I H1``,
    ``R K1 lifted``, ``V OUT ac 1 kHz``."""
    ground = circuit.ground if circuit is not None else None
    if rd.quantity == "current":
        where = rd.part
    elif rd.part is not None:
        where = rd.part
    else:
        where = rd.plus if rd.minus in (None, ground) else f"{rd.plus},{rd.minus}"
    kind = {"voltage": "V", "current": "I", "resistance": "R"}[rd.quantity]
    text = f"{kind} {where}"
    if rd.quantity == "resistance":
        return text + (" lifted" if rd.setup == "lifted" else "")
    if rd.mode == "ac":
        text += " ac" + (f" {format_value(rd.frequency, 'Hz')}" if rd.frequency else "")
    return text


def _reading_json(rd: Reading | None, circuit) -> dict | None:
    if rd is None:
        return None
    v = rd.value
    return {"quantity": rd.quantity, "mode": rd.mode, "plus": rd.plus, "minus": rd.minus,
            "part": rd.part, "setup": rd.setup, "frequency": rd.frequency, "meter": rd.meter,
            "unit": _UNITS[rd.quantity], "value": v if v is None or math.isfinite(v) else None,
            "overrange": rd.overrange, "display": rd.raw or None,
            "words": describe_reading(rd, circuit)}


@dataclass(frozen=True)
class Step:
    """One command and the drill's answer.

    Attributes
    ----------
    command : str
        The command as given (``"read V TP1"``).
    kind : str
        ``"ack"``, ``"caution"``, ``"reading"`` (taken), ``"refused"`` (a
        reading or step not allowed now), ``"power"``, ``"hint"``,
        ``"status"``, ``"help"``, ``"verdict"``, ``"quit"`` or ``"error"``
        (not understood; nothing happened).
    message : str
        The answer, for people.
    reading : Reading or None
        The reading taken (``value``/``raw`` set) or refused.
    effort : float
        Effort this step cost (docs/advice.md's cost model).
    safety_error : bool
        True when this step counted as a safety error.
    power : str
        ``"on"`` (energized) or ``"off"`` (isolated) after the step.
    """

    command: str
    kind: str
    message: str
    reading: Reading | None = None
    effort: float = 0.0
    safety_error: bool = False
    power: str = "on"

    def to_json(self, circuit=None) -> dict:
        return {"command": self.command, "kind": self.kind, "message": self.message,
                "reading": _reading_json(self.reading, circuit), "effort": self.effort,
                "safety_error": self.safety_error, "power": self.power}


@dataclass(frozen=True)
class Score:
    """A drill's score out of 100 and its breakdown (docs/drill.md, "Scoring").

    Attributes
    ----------
    total : int
        ``correctness + effort + safety - hints``, 0..100.
    correctness, effort, safety : int
        Points earned, out of 60, 25 and 15.
    hints : int
        Points taken off for hints.
    lines : tuple of str
        One line per component, for people.
    """

    total: int
    correctness: int
    effort: int
    safety: int
    hints: int
    lines: tuple

    def to_json(self) -> dict:
        return {"total": self.total, "correctness": self.correctness, "effort": self.effort,
                "safety": self.safety, "hints": -self.hints,
                "out_of": {"correctness": POINTS["part"] + POINTS["mode"] + POINTS["value"],
                           "effort": POINTS["effort"], "safety": POINTS["safety"], "total": 100},
                "lines": list(self.lines)}


@dataclass(frozen=True)
class ReadingNote:
    """What one of the apprentice's readings told.

    Attributes
    ----------
    seq : int
        1-based number among the readings taken.
    reading : Reading
    category : str
        ``"pointed"`` (outside the healthy band the way the fault pulls it),
        ``"cleared"`` (inside it, and it ruled hypotheses out), ``"wasted"``
        (moved the ranking less than :data:`WASTED_CHANGE`), ``"confirmed"``
        (taken after the readings had settled the diagnosis) or ``"off"``
        (outside the band, but not the way the fault pulls it).
    expected, low, high : float or None
        A healthy board's display and ~95 % band (None: OL).
    fault_predicts : float
        The display the hidden fault gives at nominal values (``inf``: OL).
    change : float
        How far the reading moved the ranking (total variation, 0..1).
    text : str
    """

    seq: int
    reading: Reading
    category: str
    expected: float | None
    low: float | None
    high: float | None
    fault_predicts: float
    change: float
    text: str

    def to_json(self, circuit=None) -> dict:
        fp = self.fault_predicts
        return {"seq": self.seq, "reading": _reading_json(self.reading, circuit),
                "category": self.category, "expected": self.expected, "low": self.low,
                "high": self.high, "fault_predicts": fp if math.isfinite(fp) else None,
                "change": round(self.change, 4), "text": self.text}


@dataclass(frozen=True)
class Explanation:
    """Why the verdict was right or wrong, and what each reading was worth.

    Attributes
    ----------
    verdict : tuple of str
        The verdict against the hidden fault; on a wrong verdict the readings
        against it, or the reading that would have told the two apart.
    readings : tuple of ReadingNote
    settle : str
        The reading that would have settled it soonest: faultfind's first
        advice from the start, and what it reads on this board.
    advice : str
        The advice path on this board (the score's yardstick).
    """

    verdict: tuple
    readings: tuple
    settle: str
    advice: str

    @property
    def pointing(self) -> tuple:
        """Numbers of the readings that pointed to the fault."""
        return tuple(n.seq for n in self.readings if n.category == "pointed")

    @property
    def wasted(self) -> tuple:
        """Numbers of the readings that were wasted."""
        return tuple(n.seq for n in self.readings if n.category == "wasted")

    def lines(self) -> list:
        return [*self.verdict, *(n.text for n in self.readings), self.settle, self.advice]

    def to_json(self, circuit=None) -> dict:
        return {"verdict": list(self.verdict), "readings": [n.to_json(circuit)
                                                            for n in self.readings],
                "pointing": list(self.pointing), "wasted": list(self.wasted),
                "settle": self.settle, "advice": self.advice}


@dataclass(frozen=True)
class AdvicePath:
    """Faultfind's own path on the drill's board: its first suggestion each time.

    Attributes
    ----------
    readings : tuple of Reading
        The readings it took, with the displays this board gives.
    effort : float
        Their effort, isolating and restoring power included.
    probabilities : tuple of float
        The top hypothesis' probability after each reading.
    top : tuple
        The top hypothesis at the end, as ``((ref, mode), ...)``.
    settled : bool
        The top hypothesis reached :data:`SETTLED`.
    """

    readings: tuple
    effort: float
    probabilities: tuple
    top: tuple
    settled: bool

    def to_json(self, circuit=None) -> dict:
        return {"readings": [_reading_json(r, circuit) for r in self.readings],
                "effort": self.effort, "probabilities": [round(p, 4) for p in self.probabilities],
                "top": [{"ref": r, "mode": m} for r, m in self.top], "settled": self.settled}


@dataclass(frozen=True)
class DrillResult:
    """A scored drill.

    Attributes
    ----------
    fault, verdict : DrillFault
        The hidden fault and the apprentice's verdict.
    part_right, mode_right : bool
    value_right : bool or None
        For a drift: the named value within :data:`VALUE_MARGIN` of the
        actual one; None when the fault is not a drift.
    readings : int
    effort : float
    advice : AdvicePath
    safety_errors, hints : int
    score : Score
    explanation : Explanation
    """

    fault: DrillFault
    verdict: DrillFault
    part_right: bool
    mode_right: bool
    value_right: bool | None
    readings: int
    effort: float
    advice: AdvicePath
    safety_errors: int
    hints: int
    score: Score
    explanation: Explanation

    @property
    def correct(self) -> bool:
        """Part and mode right, and the value for a drift."""
        return self.part_right and self.mode_right and self.value_right is not False

    def to_json(self, circuit=None) -> dict:
        return {"fault": self.fault.to_json(), "verdict": self.verdict.to_json(),
                "correct": self.correct, "part_right": self.part_right,
                "mode_right": self.mode_right, "value_right": self.value_right,
                "readings": self.readings, "effort": self.effort,
                "safety_errors": self.safety_errors, "hints": self.hints,
                "score": self.score.to_json(), "advice": self.advice.to_json(circuit),
                "explanation": self.explanation.to_json(circuit)}


# -- the drill ---------------------------------------------------------------------------


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def _elv_caution(circuit) -> str:
    """An extra paragraph for a board with a supply above extra-low voltage, else ""."""
    over = [p for p in circuit.parts if p.kind == "voltage-source" and p.value is not None
            and abs(p.value) > (ELV_AC if p.waveform == "ac" else ELV_DC)]
    if not over:
        return ""
    names = ", ".join(f"{p.ref} {format_value(p.value, 'V')}{' AC' if p.waveform == 'ac' else ''}"
                      for p in over)
    # ELV limits: 50 V AC, 120 V ripple-free DC (IEC 61140 / IEC 60364-4-41, from memory)
    return ("\n- This board works above extra-low voltage (" + names + "; ELV is at most 50 V AC\n"
            "  or 120 V DC, IEC 61140): on a real one, live readings are for qualified\n"
            "  persons only, with PPE and a meter rated for the measurement category.")


def _key_text(rd: Reading) -> str:
    return "|".join(str(x) for x in (rd.quantity, rd.mode, rd.plus, rd.minus, rd.part, rd.setup,
                                     rd.frequency, rd.meter))


class Drill:
    """One drill: a simulated board with a hidden fault, the apprentice's steps, the score.

    Parameters
    ----------
    circuit : Circuit
        A validated circuit (a field case or any circuit file).
    apprentice : str
        Who does the drill (one line).
    seed : int, optional
        Makes the drill repeatable: the same seed, circuit and fault give the
        same board, the same hidden fault and the same display for the same
        reading (the n-th repeat of a reading is the same too, in any order).
        Default: a new random seed, kept in :attr:`seed`.
    fault : DrillFault, str or tuple, optional
        The trainer's fault (``"F1:open"``, ``"R9:drift:6k8"``, ``"none"``,
        ``("R9", "drift", 6800.0)``); default drawn by :func:`draw_fault`.
    meters : dict, optional
        Meter profiles; the default profile is the meter the apprentice uses.
    costs : dict, optional
        Effort model (keys of :data:`faultfind.advise.DEFAULT_COSTS`).
    caution_acknowledged : bool, optional
        The caution was acknowledged before the drill (``--caution-acknowledged``).

    Attributes
    ----------
    caution : str
        The safety caution to show before anything else.
    power : str
        ``"on"`` (energized, as the unit was found) or ``"off"`` (isolated).
    acknowledged, finished : bool
    steps : list of Step
        The transcript.
    readings : list of Reading
        Readings taken, with their displays.
    effort : float
    safety_errors, hints : int
    result : DrillResult or None
        Set by the verdict.
    notes : list of str
        Remarks for the trainer (e.g. a set fault no reading can see).

    Raises
    ------
    InputError
        A bad argument, naming it.
    """

    def __init__(self, circuit, apprentice, *, seed=None, fault=None, meters=None, costs=None,
                 caution_acknowledged=False):
        if not isinstance(circuit, Circuit):
            raise InputError(f"expected a Circuit, got {type(circuit).__name__}", key="circuit")
        if not isinstance(apprentice, str) or not apprentice.strip() \
                or "\n" in apprentice or "\r" in apprentice:
            raise InputError("name the apprentice (one line of text)", key="apprentice")
        if seed is None:
            seed = secrets.randbelow(1_000_000)
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise InputError(f"must be a whole number >= 0, got {seed!r}", key="seed")
        if costs is not None and (not isinstance(costs, dict) or set(costs) - set(DEFAULT_COSTS)):
            raise InputError(f"must be a dict with keys among {', '.join(DEFAULT_COSTS)}",
                             key="costs")
        self.circuit = circuit
        self.caution = SAFETY_CAUTION + _elv_caution(circuit)
        self.apprentice = apprentice.strip()
        self.seed = int(seed)
        self.meters = meters_with_default(meters)
        self.costs = dict(DEFAULT_COSTS, **(costs or {}))
        self.board = draw_board(circuit, np.random.default_rng([self.seed, 1]))
        self.notes = []
        if fault is None:
            self._fault = draw_fault(circuit, np.random.default_rng([self.seed, 2]), self.meters)
            self.fault_source = "drawn"
        else:
            if isinstance(fault, str):
                fault = parse_fault(fault, circuit)
            elif isinstance(fault, (tuple, list)) and len(fault) == 3:
                fault = check_fault(circuit, *fault)
            elif isinstance(fault, DrillFault):
                fault = check_fault(circuit, fault.ref, fault.mode, fault.value)
            else:
                raise InputError(f"expected 'REF:MODE[:VALUE]', (ref, mode, value) or a "
                                 f"DrillFault, got {fault!r}", key="fault")
            self._fault = fault
            self.fault_source = "trainer"
            if fault.ref is not None and not _detectable(circuit, fault, self.meters,
                                                         _probes(circuit, self.meters)):
                self.notes.append(f"no reading a meter can take shows {fault.describe(circuit)} "
                                  "outside its healthy band: the drill cannot be solved from "
                                  "readings")
        self.power = "on"
        self.acknowledged = False
        self.steps: list[Step] = []
        self.readings: list[Reading] = []
        self.effort = 0.0
        self.safety_errors = 0
        self.hints = 0
        self.result: DrillResult | None = None
        self.started_at = _now()
        self.finished_at: str | None = None
        self._quit = False
        self._taken: dict = {}
        self._advice: AdvicePath | None = None
        if caution_acknowledged:
            self.acknowledge(command="--caution-acknowledged")

    @property
    def finished(self) -> bool:
        """True after a verdict or ``quit``."""
        return self.result is not None or self._quit

    @property
    def hidden_fault(self) -> DrillFault:
        """The hidden fault, for the trainer: never show it to the apprentice before the
        verdict (afterwards it is also ``result.fault``)."""
        return self._fault

    # steps

    def _add(self, command, kind, message, **kw) -> Step:
        step = Step(command, kind, message, power=self.power, **kw)
        self.steps.append(step)
        return step

    def _blocked(self, command, what) -> Step | None:
        if self.finished:
            return self._add(command, "error", "the drill is over: start a new one")
        if not self.acknowledged:
            return self._add(command, "refused", f"{what} refused: read the safety caution and "
                             "acknowledge it first (ack)")
        return None

    def acknowledge(self, *, command="ack") -> Step:
        """Acknowledge the safety caution (shown as :attr:`caution`)."""
        if self.finished:
            return self._add(command, "error", "the drill is over: start a new one")
        if self.acknowledged:
            return self._add(command, "ack", "the safety caution is acknowledged already")
        self.acknowledged = True
        return self._add(command, "ack", "Safety caution acknowledged. The board is energized "
                         "(live), as the unit was found: take live readings, and isolate it "
                         "before any resistance reading.")

    def show_caution(self, *, command="caution") -> Step:
        """The safety caution again (free)."""
        return self._add(command, "caution", self.caution)

    def help(self, *, command="help") -> Step:
        """The commands (free)."""
        return self._add(command, "help", "\n".join(f"{k:9s} {v}" for k, v in COMMANDS.items()))

    def status(self, *, command="status") -> Step:
        """Power state, readings and effort so far (free)."""
        state = "energized (live)" if self.power == "on" else "isolated (proven dead)"
        return self._add(command, "status", f"board {state}; {len(self.readings)} reading(s), "
                         f"effort {self.effort:g}; safety errors {self.safety_errors}; hints "
                         f"{self.hints}; caution "
                         f"{'acknowledged' if self.acknowledged else 'NOT acknowledged'}")

    def read(self, reading, *, command=None) -> Step:
        """Take a reading on the board, as the meter would show it.

        Parameters
        ----------
        reading : str or Reading
            In the command words (``"V TP1"``, ``"R R2 lifted"``, ``"V OUT ac
            1k"``; see :data:`COMMANDS`) or a Reading (its value ignored).

        Returns
        -------
        Step
            ``"reading"`` with the display; ``"refused"`` before the caution
            is acknowledged or for an ohmmeter on the live board (each a
            safety error), or for a live reading on the isolated board (not
            an error: nothing to read); ``"error"`` for a reading that is not
            valid for the circuit (nothing happens).
        """
        command = command or ("read " + (reading if isinstance(reading, str)
                                         else describe_reading(reading, self.circuit)
                                         if isinstance(reading, Reading) else repr(reading)))
        if self.finished:
            return self._add(command, "error", "the drill is over: start a new one")
        try:
            rd = self._parse_reading(reading)
        except InputError as exc:
            return self._add(command, "error", exc.message)
        if not self.acknowledged:
            self.safety_errors += 1
            return self._add(command, "refused", "REFUSED: no reading before the safety caution "
                             "is read and acknowledged (ack). Safety error "
                             f"{self.safety_errors}.", reading=rd, safety_error=True)
        if rd.quantity == "resistance" and self.power == "on":
            self.safety_errors += 1
            return self._add(command, "refused", "REFUSED: the board is live. An ohmmeter on a "
                             "live circuit reads nonsense and can be damaged or hurt you: isolate "
                             f"first (isolate), then read again. Safety error "
                             f"{self.safety_errors}.", reading=rd, safety_error=True)
        if rd.quantity != "resistance" and self.power == "off":
            return self._add(command, "refused", f"not taken: the board is isolated, so a "
                             f"{rd.quantity} reading shows nothing; restore power first "
                             "(energize).", reading=rd)
        cost = self._cost(rd)
        shown = self._simulate(rd, self._taken)
        self.readings.append(shown)
        self.effort += cost
        extra = (" The meter went in series: the drill counts breaking the circuit with power "
                 "off and restoring it." if rd.quantity == "current" else "")
        words = describe_reading(shown, self.circuit)
        return self._add(command, "reading", f"#{len(self.readings)} {words} = {shown.raw}  "
                         f"(effort {cost:g}, total {self.effort:g}).{extra}",
                         reading=shown, effort=cost)

    def isolate(self, *, command="isolate") -> Step:
        """Isolate the board (lock out, tag out, prove dead, discharge)."""
        blocked = self._blocked(command, "isolating")
        if blocked:
            return blocked
        if self.power == "off":
            return self._add(command, "power", "the board is isolated already")
        self.power = "off"
        cost = self.costs["isolate"]
        self.effort += cost
        return self._add(command, "power", "Isolated: locked out, tagged, proven dead with a "
                         "proven tester, stored energy discharged. Resistance readings may be "
                         f"taken now (effort {cost:g}).", effort=cost)

    def energize(self, *, command="energize") -> Step:
        """Restore power (locks off, covers on, stand clear)."""
        blocked = self._blocked(command, "energizing")
        if blocked:
            return blocked
        if self.power == "on":
            return self._add(command, "power", "the board is energized already")
        self.power = "on"
        cost = self.costs["energize"]
        self.effort += cost
        return self._add(command, "power", "Power restored: locks removed, covers on, stand "
                         f"clear. The board is live: no resistance readings (effort {cost:g}).",
                         effort=cost)

    def hint(self, *, command="suggest") -> Step:
        """faultfind's next reading for the readings so far (a hint costs points)."""
        blocked = self._blocked(command, "a hint")
        if blocked:
            return blocked
        with np.errstate(invalid="ignore", divide="ignore"):
            sug = suggest(self.circuit, self.readings, self.meters, costs=self.costs,
                          power=self.power, top=1)
        if not sug:
            return self._add(command, "hint", "faultfind has no reading to suggest: the "
                             "readings so far settle what they can. Give your verdict.")
        self.hints += 1
        s = sug[0]
        state = "energized" if s.power == "on" else "isolated"
        words = describe_reading(s.reading, self.circuit)
        return self._add(command, "hint", f"faultfind suggests: read {words} (board {state}): "
                         f"{s.why}. Hint {self.hints}: -{HINT_POINTS} points.",
                         reading=s.reading)

    def verdict(self, ref=None, mode=None, value=None, *, command=None) -> Step:
        """Commit to a verdict; the drill is scored and explained (:attr:`result`).

        Parameters
        ----------
        ref : str or None
            The faulty part; None or ``"none"`` for no fault.
        mode : str
            Its fault mode.
        value : str or float, optional
            For a drift: the value you estimate (``"6k8"``, 6800.0).

        Returns
        -------
        Step
            ``"verdict"`` (the drill is over), or ``"error"`` for a verdict
            that is not valid for the circuit (the drill goes on).
        """
        command = command or " ".join(str(x) for x in ("verdict", ref or "none", mode, value)
                                      if x is not None)
        blocked = self._blocked(command, "a verdict")
        if blocked:
            return blocked
        try:
            named = check_fault(self.circuit, ref, mode, value, what="verdict")
        except InputError as exc:
            return self._add(command, "error", exc.message)
        self.result = _score(self, named)
        self.finished_at = _now()
        r = self.result
        return self._add(command, "verdict", f"Verdict: {named.describe(self.circuit)}. The "
                         f"hidden fault: {r.fault.describe(self.circuit)}. "
                         f"{'Right' if r.correct else 'Not right'}: score {r.score.total}/100.")

    def quit(self, *, command="quit") -> Step:
        """Stop without a verdict (not scored)."""
        if self.finished:
            return self._add(command, "error", "the drill is over")
        self._quit = True
        self.finished_at = _now()
        return self._add(command, "quit", "Drill stopped without a verdict: not scored.")

    def command(self, line) -> Step:
        """Run one text command (:data:`COMMANDS`; keywords in any case).

        Returns
        -------
        Step
            An ``"error"`` step for a command not understood: the drill goes on.
        """
        if not isinstance(line, str):
            raise InputError(f"a command is text, got {type(line).__name__}", key="command")
        text = line.strip()
        words = text.split()
        if not words:
            return self._add(text, "error", "empty command: type help for the commands")
        word, rest = words[0].lower(), words[1:]
        simple = {"ack": self.acknowledge, "acknowledge": self.acknowledge,
                  "caution": self.show_caution, "help": self.help, "?": self.help,
                  "status": self.status, "isolate": self.isolate, "energize": self.energize,
                  "energise": self.energize, "suggest": self.hint, "hint": self.hint,
                  "quit": self.quit, "exit": self.quit}
        if word in simple:
            if rest:
                return self._add(text, "error", f"'{word}' takes nothing after it")
            return simple[word](command=text)
        if word == "read":
            return self.read(" ".join(rest), command=text)
        if word == "verdict":
            if len(rest) == 1 and ":" in rest[0]:
                rest = rest[0].split(":")
            if not rest:
                return self._add(text, "error", "name the part and fault mode: verdict R7 open, "
                                 "verdict R9 drift 6k8, or verdict none")
            if rest[0].lower() in ("none", "no-fault", "healthy") and len(rest) > 1:
                return self._add(text, "error", "'verdict none' takes nothing after it")
            return self.verdict(rest[0], rest[1] if len(rest) > 1 else None,
                                " ".join(rest[2:]) or None, command=text)
        close = difflib.get_close_matches(word, list(COMMANDS), n=1)
        return self._add(text, "error", f"unknown command {words[0]!r}"
                         + (f" (did you mean {close[0]!r}?)" if close else "")
                         + f": the commands are {', '.join(COMMANDS)}")

    # the meter

    def _parse_reading(self, spec) -> Reading:
        if isinstance(spec, Reading):
            cells = {"quantity": spec.quantity, "mode": spec.mode, "plus": spec.plus,
                     "minus": spec.minus, "part": spec.part, "setup": spec.setup,
                     "frequency": spec.frequency, "meter": spec.meter}
        elif isinstance(spec, str):
            cells = self._cells(spec.split())
        else:
            raise InputError(f"expected words like 'V TP1' or a Reading, got {spec!r}",
                             key="reading")
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(COLUMNS)
        w.writerow(["" if cells.get(c) is None else str(cells[c]) for c in COLUMNS])
        try:
            found = parse_readings(buf.getvalue(), "drill", self.circuit, self.meters,
                                   require_values=False)
        except ReadingsError as exc:
            problems = getattr(exc, "problems", None) or [exc]
            raise InputError("; ".join(p.message for p in problems), key="reading") from None
        if not found:
            raise InputError(_READ_HELP, key="reading")
        return found[0]

    def _cells(self, tokens) -> dict:
        if len(tokens) < 2 or tokens[0].lower() not in _KINDS:
            raise InputError(_READ_HELP, key="reading")
        quantity, mode, setup = _KINDS[tokens[0].lower()]
        where, rest = tokens[1], tokens[2:]
        freq = None
        for i, word in enumerate(rest):
            w = word.lower()
            if w in ("ac", "dc") and quantity != "resistance":
                mode = w
                if w == "ac" and rest[i + 1:]:
                    freq = " ".join(rest[i + 1:])
                    break
            elif w in ("lifted", "in-circuit") and quantity == "resistance":
                setup = w
            else:
                raise InputError(f"{word!r} not understood after {where!r}: " + (
                    "a resistance reading may end in 'lifted'" if quantity == "resistance"
                    else "a voltage or current reading may end in 'ac' (and a frequency) or "
                         "'dc'"), key="reading")
        cells = {"quantity": quantity, "mode": mode, "setup": setup, "frequency": freq}
        plus, sep, minus = where.partition(",")
        if quantity == "current":
            cells["part"] = where
        elif quantity == "voltage" or sep:
            cells.update(plus=plus, minus=minus)
        elif self.circuit.has_part(where):
            cells["part"] = where
        elif where in self.circuit.nodes:
            cells["plus"] = where
        else:
            names = [p.ref for p in self.circuit.parts] + list(self.circuit.nodes)
            raise InputError(f"{where!r} is neither a part nor a node of the circuit"
                             f"{_hint(where, names, 'parts and nodes')}", key="reading")
        return cells

    def _cost(self, rd: Reading) -> float:
        c = self.costs
        if rd.quantity == "resistance":
            return c["lifted"] if rd.setup == "lifted" else c["resistance"]
        base = c["current"] if rd.quantity == "current" else c["voltage"]
        if rd.mode == "ac" and rd.frequency is not None and rd.frequency != self.circuit.frequency:
            base += c["frequency"]
        return base

    def _simulate(self, rd: Reading, taken: dict) -> Reading:
        """The display of ``rd`` on the board: the same for the same seed, reading and repeat."""
        key = _key_text(rd)
        n = taken.get(key, 0)
        taken[key] = n + 1
        rng = np.random.default_rng([self.seed, 3, zlib.crc32(key.encode("utf-8")), n])
        faults = [] if self.hidden_fault.ref is None else [self.hidden_fault.as_tuple()]
        return simulate_readings(self.circuit, [rd], self.meters, faults, rng=rng,
                                 board=self.board)[0]

    def advice_path(self) -> AdvicePath:
        """Faultfind's path on this board: its first suggestion each time, from the
        energized board, until the top hypothesis reaches :data:`SETTLED` (at most
        :data:`ADVICE_LIMIT` readings).  Computed once."""
        if self._advice is not None:
            return self._advice
        readings, probs, effort, power, hyps, taken = [], [], 0.0, "on", None, {}
        top = ()
        for _ in range(ADVICE_LIMIT):
            with np.errstate(invalid="ignore", divide="ignore"):
                sug = suggest(self.circuit, readings, self.meters, hypotheses=hyps,
                              costs=self.costs, power=power, top=1)
            if not sug:
                break
            effort += sug[0].cost
            power = sug[0].power
            readings.append(self._simulate(sug[0].reading, taken))
            rk = rank(self.circuit, readings, self.meters)
            hyps = [(h.faults, h.probability) for h in rk.hypotheses]
            probs.append(float(rk.hypotheses[0].probability))
            top = tuple((f.ref, f.mode) for f in rk.hypotheses[0].faults)
            if probs[-1] >= SETTLED:
                break
        self._advice = AdvicePath(tuple(readings), float(effort), tuple(probs), top,
                                  bool(probs) and probs[-1] >= SETTLED)
        return self._advice

    def to_json(self) -> dict:
        """The whole drill: header, caution, transcript and (after a verdict) the result."""
        c = self.circuit
        return {"drill": {"apprentice": self.apprentice, "circuit": c.title,
                          "circuit_file": c.source, "seed": self.seed,
                          "fault_source": self.fault_source, "meter": "default",
                          "started_at": self.started_at, "finished_at": self.finished_at,
                          "notes": list(self.notes)},
                "caution": self.caution, "caution_acknowledged": self.acknowledged,
                "transcript": [s.to_json(c) for s in self.steps],
                "finished": self.finished, "scored": self.result is not None,
                "readings": len(self.readings), "effort": self.effort,
                "safety_errors": self.safety_errors, "hints": self.hints,
                "result": None if self.result is None else self.result.to_json(c)}

    def record_fields(self, circuit_name=None) -> dict:
        """Keyword arguments of :meth:`faultfind.io.logbook.Logbook.record_drill`.

        Raises
        ------
        InputError
            The drill has no verdict yet.
        """
        r = self.result
        if r is None:
            raise InputError("the drill has no verdict yet: nothing to record", key="drill")
        return dict(apprentice=self.apprentice,
                    circuit_name=circuit_name or self.circuit.source or self.circuit.title,
                    circuit_title=self.circuit.title, seed=self.seed,
                    fault=r.fault.as_tuple(), verdict=r.verdict.as_tuple(), correct=r.correct,
                    readings=r.readings, effort=float(r.effort),
                    advice_readings=len(r.advice.readings), advice_effort=r.advice.effort,
                    safety_errors=r.safety_errors, hints=r.hints, score=r.score.total,
                    document=self.to_json(), started_at=self.started_at,
                    finished_at=self.finished_at)


# -- scoring and explanation -------------------------------------------------------------


def _score(drill: Drill, named: DrillFault) -> DrillResult:
    fault, advice = drill.hidden_fault, drill.advice_path()
    part_right = named.ref == fault.ref
    mode_right = part_right and named.mode == fault.mode
    value_right = None
    if fault.mode == "drift":
        value_right = bool(mode_right and abs(named.value / fault.value - 1) <= VALUE_MARGIN)
    if fault.ref is None:
        correctness = 60 if part_right else 0
        c_text = "right: no fault" if part_right else "wrong: the unit had no fault"
    else:
        correctness = ((POINTS["part"] if part_right else 0) + (POINTS["mode"] if mode_right else 0)
                       + (POINTS["value"] if mode_right and value_right is not False else 0))
        c_text = ("part right" if part_right else f"part wrong (it was {fault.ref})") + ", " + (
            "mode right" if mode_right else f"mode wrong (it was {fault.mode})"
            if part_right else "no mode points")
        if value_right is not None and mode_right:
            c_text += (f", value within ±{_pct(VALUE_MARGIN)}" if value_right else
                       f", value off by more than ±{_pct(VALUE_MARGIN)}")
    budget = advice.effort + EFFORT_ALLOWANCE
    n = len(drill.readings)
    if not part_right:
        effort_pts = 0
        e_why = "no effort points for a wrong part"
    elif not advice.settled:
        effort_pts = POINTS["effort"]
        e_why = "faultfind's advice did not settle this board, so there is no yardstick"
    else:
        over = max(0.0, drill.effort - budget)
        effort_pts = int(round(POINTS["effort"] * max(0.0, 1.0 - over / max(budget, EFFORT_SPAN))))
        e_why = "within the budget" if over == 0 else f"{over:g} over the budget"
    e_text = (f"{n} reading(s), effort {drill.effort:g}; faultfind's advice path "
              f"{len(advice.readings)} reading(s), effort {advice.effort:g}, budget {budget:g}: "
              + e_why)
    safety = max(0, POINTS["safety"] - SAFETY_ERROR_POINTS * drill.safety_errors)
    s_text = ("no safety errors" if not drill.safety_errors else
              f"{drill.safety_errors} safety error(s): "
              + ", ".join(s.command for s in drill.steps if s.safety_error))
    hints = min(HINT_POINTS * drill.hints, correctness + effort_pts + safety)
    score = Score(correctness + effort_pts + safety - hints, correctness, effort_pts, safety, hints,
                  (f"correctness {correctness}/60: {c_text}", f"effort {effort_pts}/25: {e_text}",
                   f"safety {safety}/15: {s_text}",
                   f"hints -{hints}: {drill.hints} hint(s) used"))
    partial = DrillResult(fault, named, part_right, mode_right, value_right, n, drill.effort,
                          advice, drill.safety_errors, drill.hints, score, None)
    return DrillResult(**{**partial.__dict__, "explanation": _explain(drill, partial)})


def _prior_masses(circuit) -> dict:
    total = sum(KIND_WEIGHTS.get(p.kind, 0.0) for p in circuit.parts if p.fault_modes)
    m = {(): P_HEALTHY}
    for p in circuit.parts:
        for mode in p.fault_modes:
            share = KIND_WEIGHTS.get(p.kind, 0.0) * MODE_SHARES.get(p.kind, {}).get(mode, 0.0)
            if share > 0 and total > 0:
                m[((p.ref, mode),)] = (1 - P_HEALTHY) * share / total
    s = sum(m.values())
    return {k: v / s for k, v in m.items()}


def _masses(readings, circuit, meters) -> dict:
    out: dict = {}
    for h in rank(circuit, readings, meters).hypotheses:
        key = tuple(sorted((f.ref, f.mode) for f in h.faults))
        out[key] = out.get(key, 0.0) + float(h.probability)
    return out


def _pct(p) -> str:
    return f"{p * 100:.0f} %"


def _label(key) -> str:
    return " + ".join(f"{r} {m}" for r, m in key) or "healthy"


def _fmt(value, unit) -> str:
    if value is None or not math.isfinite(value):
        return "OL"
    return format_value(0.0 if abs(value) < 1e-10 and unit != "Ω" else value, unit)


def _band(e) -> str:
    if e.overrange or e.expected is None:
        return "OL"
    return f"{_fmt(e.low, e.unit)}..{_fmt(e.high, e.unit)}"


def _shown(rd) -> float:
    return np.inf if rd.overrange or rd.value is None else float(rd.value)


def _explain(drill: Drill, r: DrillResult) -> Explanation:
    c, meters, rds, fault = drill.circuit, drill.meters, drill.readings, r.fault
    bands = expect(c, rds, meters) if rds else []
    fpred = _faulted(c, rds, meters, fault) if rds else np.array([])
    masses = [_prior_masses(c)] + [_masses(rds[:k + 1], c, meters) for k in range(len(rds))]
    flabel = fault.describe(c)
    notes = []
    for i, (rd, e) in enumerate(zip(rds, bands)):
        before, after = masses[i], masses[i + 1]
        keys = set(before) | set(after)
        change = 0.5 * sum(abs(after.get(k, 0.0) - before.get(k, 0.0)) for k in keys)
        top_key = max(before, key=before.get)
        y = _shown(rd)
        dev = _outside(e, y, meters, rd)
        pull = _outside(e, fpred[i], meters, rd, k=0.0)
        where = f"#{i + 1} {describe_reading(rd, c)} read {rd.raw}"
        if dev and fault.ref is not None and dev == pull:
            cat, text = "pointed", (f"{where}: {'above' if dev > 0 else 'below'} the healthy "
                                    f"band {_band(e)}, the way {flabel} pulls it (it reads "
                                    f"{_fmt(fpred[i], e.unit)} at nominal values): it pointed to "
                                    "the fault")
        elif dev:
            cat, text = "off", (f"{where}: outside the healthy band {_band(e)}, but not the way "
                                f"the fault pulls it ({_fmt(fpred[i], e.unit)}): the parts' "
                                "tolerances or the meter's error")
        elif before[top_key] >= SETTLED:
            cat, text = "confirmed", (f"{where}, inside the healthy band {_band(e)}: taken after "
                                      f"the readings had settled it ({_label(top_key)} "
                                      f"{_pct(before[top_key])}): a confirmation")
        elif change < WASTED_CHANGE:
            cat, text = "wasted", (f"{where}, inside the healthy band {_band(e)}: wasted, it "
                                   f"moved the ranking only {_pct(change)} (what was still "
                                   "possible then reads the same here)")
        else:
            drops = sorted(((before[k] - after.get(k, 0.0), k) for k in before), reverse=True)
            gone = [f"{_label(k)} ({_pct(before[k])} to {_pct(after.get(k, 0.0))})"
                    for d, k in drops[:3] if d >= 0.02]
            cat, text = "cleared", (f"{where}, inside the healthy band {_band(e)}: it moved the "
                                    f"ranking {_pct(change)}" + (f", ruling out {', '.join(gone)}"
                                                               if gone else ""))
        notes.append(ReadingNote(i + 1, rd, cat, e.expected, e.low, e.high, float(fpred[i]),
                                 float(change), text))
    return Explanation(tuple(_verdict_lines(drill, r, masses[-1])), tuple(notes),
                       _settle_line(drill, r), _advice_line(drill, r.advice))


def _verdict_lines(drill, r, final) -> list:
    c, named, fault = drill.circuit, r.verdict, r.fault
    out = []
    if r.correct:
        out.append(f"Right: the hidden fault was {fault.describe(c)}.")
    elif r.part_right and fault.ref is not None:
        out.append(f"Right part, but the hidden fault was {fault.describe(c)}; you named "
                   f"{named.describe(c)}.")
    else:
        out.append(f"Wrong: the hidden fault was {fault.describe(c)}; you named "
                   f"{named.describe(c)}.")
    if fault.mode == "drift" and named.mode == "drift" and r.part_right:
        unit = c.part(fault.ref).info.unit
        off = (named.value / fault.value - 1) * 100
        out.append(f"You named {format_value(named.value, unit)}; the actual value was "
                   f"{format_value(fault.value, unit)} ({off:+.0f} %; within "
                   f"±{_pct(VALUE_MARGIN)} counts).")
    key_true = () if fault.ref is None else ((fault.ref, fault.mode),)
    key_named = () if named.ref is None else ((named.ref, named.mode),)
    if drill.readings:
        top = sorted(final.items(), key=lambda kv: -kv[1])[:3]
        out.append("On your readings faultfind ranks "
                   + ", ".join(f"{_label(k)} {_pct(p)}" for k, p in top)
                   + f"; your verdict {_pct(final.get(key_named, 0))}, the hidden fault "
                   f"{_pct(final.get(key_true, 0))}.")
    if r.correct and final.get(key_true, 0.0) < 0.5:
        out.append(f"Your readings did not show it yet (faultfind gives it "
                   f"{_pct(final.get(key_true, 0.0) if drill.readings else 0)}): take the reading "
                   "that settles it before you replace a part.")
    if r.correct:
        return out
    rds = drill.readings
    against = []
    if rds:
        pv = _faulted(c, rds, drill.meters, named)
        for i, (rd, e) in enumerate(zip(rds, expect(c, rds, drill.meters))):
            y = _shown(rd)
            if _outside(e, pv[i], drill.meters, rd, k=0.0) != _outside(e, y, drill.meters, rd) \
                    or (np.isfinite(y) != np.isfinite(pv[i])):
                against.append(f"#{i + 1} {describe_reading(rd, c)} read {rd.raw}, but "
                               f"{_label(key_named)} would read {_fmt(pv[i], e.unit)}")
    if against:
        out.append("Against your verdict: " + "; ".join(against[:4]) + ".")
        return out
    cands = candidate_readings(c, [x for x in (fault.ref, named.ref) if x])
    bands = expect(c, cands, drill.meters)
    pt = _faulted(c, cands, drill.meters, fault)
    pv = _faulted(c, cands, drill.meters, named)
    best, gap = None, 0.0
    for i, (rd, e) in enumerate(zip(cands, bands)):
        if np.isfinite(pt[i]) != np.isfinite(pv[i]):
            g = 1e9
        elif not np.isfinite(pt[i]):
            continue
        else:
            meter = drill.meters[rd.meter or "default"]
            half = 0.0 if e.expected is None else (e.high - e.low) / 2
            a = float(spec_limit(meter, rd.quantity, rd.mode, max(abs(pt[i]), abs(pv[i]))))
            g = abs(pt[i] - pv[i]) / (half + 2 * a + 1e-30)
        if g > gap:
            best, gap = i, g
    if best is not None and gap > 1:
        rd, unit = cands[best], _UNITS[cands[best].quantity]
        out.append(f"None of your readings could tell {_label(key_named)} from "
                   f"{_label(key_true)}: {describe_reading(rd, c)} (board "
                   f"{'isolated' if rd.quantity == 'resistance' else 'energized'}) would have: "
                   f"{_label(key_true)} reads {_fmt(pt[best], unit)}, {_label(key_named)} "
                   f"{_fmt(pv[best], unit)}.")
    return out


def _settle_line(drill, r) -> str:
    adv = r.advice
    if not adv.readings:
        return "faultfind had no reading to suggest on this board."
    first = adv.readings[0]
    e = expect(drill.circuit, [first], drill.meters)[0]
    state = "isolated" if first.quantity == "resistance" else "energized"
    words = describe_reading(first, drill.circuit)
    return (f"Soonest: faultfind's first advice from the start was {words} (board {state}); "
            f"on this board it reads {first.raw} where a healthy board reads "
            f"{_fmt(e.expected, e.unit)} ({_band(e)}); after it alone the top hypothesis had "
            f"{_pct(adv.probabilities[0])}" + _settled_by(drill, adv) + ".")


def _settled_by(drill, adv) -> str:
    if not adv.settled or len(adv.readings) < 2:
        return ""
    last = adv.readings[-1]
    return (f"; its reading {len(adv.readings)}, {describe_reading(last, drill.circuit)} = "
            f"{last.raw}, settled it")


def _advice_line(drill, adv) -> str:
    steps = "; ".join(f"{describe_reading(x, drill.circuit)} = {x.raw}" for x in adv.readings)
    end = (f"settled on {_label(adv.top)} ({_pct(adv.probabilities[-1])})" if adv.settled else
           f"not settled after {len(adv.readings)} reading(s)") if adv.readings else "no readings"
    return (f"faultfind's advice path on this board: {len(adv.readings)} reading(s), effort "
            f"{adv.effort:g}: {steps or '-'}; {end}.")
