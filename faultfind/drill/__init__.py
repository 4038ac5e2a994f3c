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

The modules, each named for what it holds: ``rules`` (points and commands),
``faults`` (the hidden fault), ``session`` (the :class:`Drill`: its state
machine and the simulated meter), ``scoring`` (the score and its
explanation) and ``results`` (what a drill returns).  Import from here:
``faultfind.drill`` is the one public place.
"""

from __future__ import annotations

from .faults import DrillFault, check_fault, draw_fault, parse_fault
from .results import (AdvicePath, DrillResult, Explanation, ReadingNote, Score, Step,
                      describe_reading)
from .rules import (ADVICE_LIMIT, COMMANDS, EFFORT_ALLOWANCE, EFFORT_SPAN, HINT_POINTS, POINTS,
                    SAFETY_ERROR_POINTS, SETTLED, VALUE_MARGIN, WASTED_CHANGE)
from .session import Drill

__all__ = ["Drill", "DrillFault", "Step", "Score", "ReadingNote", "Explanation", "AdvicePath",
           "DrillResult", "parse_fault", "check_fault", "draw_fault", "describe_reading",
           "POINTS", "SAFETY_ERROR_POINTS", "HINT_POINTS", "EFFORT_ALLOWANCE", "EFFORT_SPAN",
           "VALUE_MARGIN",
           "SETTLED", "ADVICE_LIMIT", "WASTED_CHANGE", "COMMANDS"]
