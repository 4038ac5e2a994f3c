"""The drill's rules: the points of the score (docs/drill.md, "Scoring") and the text commands."""

from __future__ import annotations

__all__ = ["POINTS", "SAFETY_ERROR_POINTS", "HINT_POINTS", "EFFORT_ALLOWANCE", "EFFORT_SPAN",
           "VALUE_MARGIN", "SETTLED", "ADVICE_LIMIT", "WASTED_CHANGE", "COMMANDS"]


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
            "| read D D3 (diode test) | read V OUT ac | read V OUT ac 1k",
    "isolate": "isolate the board: lock out, tag out, prove dead, discharge (before resistance "
               "readings and diode tests)",
    "energize": "restore power (before voltage and current readings)",
    "suggest": f"ask faultfind for the next reading (a hint: -{HINT_POINTS} points)",
    "status": "power state, readings and effort so far",
    "verdict": "commit: verdict R7 open | verdict R9 drift 6k8 | verdict none",
    "caution": "show the safety caution again",
    "help": "this list",
    "quit": "stop without a verdict (not scored)",
}
