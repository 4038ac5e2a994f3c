"""What a drill returns: each step, the score, the notes on each reading, the explanation."""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..model import QUANTITY_UNITS, Circuit, Reading
from ..units import format_value
from .faults import DrillFault
from .rules import POINTS

__all__ = ["describe_reading", "Step", "Score", "ReadingNote", "Explanation", "AdvicePath",
           "DrillResult"]


_UNITS = QUANTITY_UNITS


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
    kind = {"voltage": "V", "current": "I", "resistance": "R", "diode-test": "D"}[rd.quantity]
    text = f"{kind} {where}"
    if rd.quantity == "diode-test":
        return text
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
