"""Scoring a verdict and explaining it: which readings pointed to the fault, which were wasted."""

from __future__ import annotations

import math

import numpy as np

from ..advise import candidate_readings
from ..engine.meter import spec_limit
from ..engine.hypotheses import rank
from ..engine.priors import HANDBOOK
from ..expect import expect
from ..model import power_for
from ..units import format_value
from .faults import DrillFault, _faulted, _outside
from .results import _UNITS, describe_reading, Score, ReadingNote, Explanation, DrillResult
from .rules import (POINTS, SAFETY_ERROR_POINTS, HINT_POINTS, EFFORT_ALLOWANCE, EFFORT_SPAN,
                    VALUE_MARGIN, SETTLED, WASTED_CHANGE)


# -- scoring and explanation -------------------------------------------------------------


def _score(drill, named: DrillFault) -> DrillResult:
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


def _prior_masses(circuit, priors=None) -> dict:
    table = HANDBOOK if priors is None else priors
    total = table.total(circuit.parts)
    m = {(): table.p_healthy}
    for p in circuit.parts:
        for mode in p.fault_modes:
            mass = table.mass(p, mode, total)
            if mass > 0:
                m[((p.ref, mode),)] = mass
    s = sum(m.values())
    return {k: v / s for k, v in m.items()}


def _masses(readings, circuit, meters, priors=None) -> dict:
    out: dict = {}
    for h in rank(circuit, readings, meters, priors=priors).hypotheses:
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


def _explain(drill, r: DrillResult) -> Explanation:
    c, meters, rds, fault = drill.circuit, drill.meters, drill.readings, r.fault
    bands = expect(c, rds, meters) if rds else []
    fpred = _faulted(c, rds, meters, fault) if rds else np.array([])
    priors = getattr(drill, "priors", None)
    masses = [_prior_masses(c, priors)] + [_masses(rds[:k + 1], c, meters, priors)
                                           for k in range(len(rds))]
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
                   f"{'isolated' if power_for(rd.quantity) == 'off' else 'energized'}) would have: "
                   f"{_label(key_true)} reads {_fmt(pt[best], unit)}, {_label(key_named)} "
                   f"{_fmt(pv[best], unit)}.")
    return out


def _settle_line(drill, r) -> str:
    adv = r.advice
    if not adv.readings:
        return "faultfind had no reading to suggest on this board."
    first = adv.readings[0]
    e = expect(drill.circuit, [first], drill.meters)[0]
    state = "isolated" if power_for(first.quantity) == "off" else "energized"
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
