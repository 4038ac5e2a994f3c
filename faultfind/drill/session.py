"""The drill itself: a session's state machine and the simulated meter it plays."""

from __future__ import annotations

import csv
import difflib
import io
import secrets
import zlib
from datetime import datetime, timezone

import numpy as np

from ..advise import DEFAULT_COSTS, ELV_AC, ELV_DC, suggest
from ..engine.hypotheses import rank
from ..errors import InputError, ReadingsError
from ..io.logbook import SAFETY_CAUTION
from ..io.meters_file import meters_with_default
from ..io.readings_file import COLUMNS, parse_readings
from ..model import POWER_OFF_QUANTITIES, Circuit, Reading, fault_mode_name
from ..simulate import draw_board, simulate_readings
from ..units import format_value
from .faults import DrillFault, _hint, check_fault, parse_fault, _probes, _detectable, draw_fault
from .results import describe_reading, Step, AdvicePath, DrillResult
from .rules import HINT_POINTS, SETTLED, ADVICE_LIMIT, COMMANDS
from .scoring import _score

__all__ = ["Drill"]


_KINDS = {"v": ("voltage", "dc", None), "vdc": ("voltage", "dc", None),
          "vac": ("voltage", "ac", None), "i": ("current", "dc", None),
          "idc": ("current", "dc", None), "iac": ("current", "ac", None),
          "r": ("resistance", None, "in-circuit"), "rl": ("resistance", None, "lifted"),
          "rlifted": ("resistance", None, "lifted"),
          # the meter's diode test (formats.md section 4), power off like an ohmmeter
          "d": ("diode-test", None, None), "diode": ("diode-test", None, None)}
_READ_HELP = ("a reading is KIND WHERE, KIND one of V, I, R, D (Vac, Iac, Rlifted; D the diode "
              "test): read V TP1, read V A,B, read I R3, read R F1, read R R2 lifted, read D D3, "
              "read D B,E, read V OUT ac 1k")
# Readings taken with the board isolated.
_POWER_OFF = POWER_OFF_QUANTITIES


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
    priors : Priors, optional
        Failure priors (learned from a site's outcomes, docs/priors.md) for the
        hidden fault, the ranking and the advice; default the handbook's.

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
                 caution_acknowledged=False, priors=None):
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
        self.priors = priors
        self.caution = SAFETY_CAUTION + _elv_caution(circuit)
        self.apprentice = apprentice.strip()
        self.seed = int(seed)
        self.meters = meters_with_default(meters)
        self.costs = dict(DEFAULT_COSTS, **(costs or {}))
        self.board = draw_board(circuit, np.random.default_rng([self.seed, 1]))
        self.notes = []
        if fault is None:
            self._fault = draw_fault(circuit, np.random.default_rng([self.seed, 2]), self.meters,
                                     self.priors)
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
        if rd.quantity in _POWER_OFF and self.power == "on":
            self.safety_errors += 1
            what = "A diode test" if rd.quantity == "diode-test" else "An ohmmeter"
            return self._add(command, "refused", f"REFUSED: the board is live. {what} on a "
                             "live circuit reads nonsense and can be damaged or hurt you: isolate "
                             f"first (isolate), then read again. Safety error "
                             f"{self.safety_errors}.", reading=rd, safety_error=True)
        if rd.quantity not in _POWER_OFF and self.power == "off":
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
                         "proven tester, stored energy discharged. Resistance readings and diode "
                         f"tests may be taken now (effort {cost:g}).", effort=cost)

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
                         "clear. The board is live: no resistance readings or diode tests "
                         f"(effort {cost:g}).", effort=cost)

    def hint(self, *, command="suggest") -> Step:
        """faultfind's next reading for the readings so far (a hint costs points)."""
        blocked = self._blocked(command, "a hint")
        if blocked:
            return blocked
        with np.errstate(invalid="ignore", divide="ignore"):
            sug = suggest(self.circuit, self.readings, self.meters, costs=self.costs,
                          power=self.power, top=1, priors=self.priors)
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
            if (len(rest) >= 3 and self.circuit.has_part(rest[0])
                    and fault_mode_name(" ".join(rest[1:3])) in self.circuit.part(rest[0]).fault_modes):
                rest = [rest[0], " ".join(rest[1:3])] + rest[3:]   # "base-emitter open"
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
            if quantity == "diode-test":
                raise InputError(f"{word!r} not understood after {where!r}: a diode test is "
                                 "D and the part (read D D3) or the probes' nodes, red first "
                                 "(read D B,E); it takes no ac, dc or lifted", key="reading")
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
        if rd.quantity == "diode-test":   # probes across a part, board isolated: as an ohmmeter
            return c["resistance"]
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
                              costs=self.costs, power=power, top=1, priors=self.priors)
            if not sug:
                break
            effort += sug[0].cost
            power = sug[0].power
            readings.append(self._simulate(sug[0].reading, taken))
            rk = rank(self.circuit, readings, self.meters, priors=self.priors)
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
