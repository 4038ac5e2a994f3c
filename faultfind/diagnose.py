"""Diagnosis: readings compared with the circuit, turned into ranked findings.

The library call behind ``faultfind diagnose`` and the terminal UI's live
findings.  The numbers come from the engine (:mod:`faultfind.engine`); this
module adds what a person reads: explanations, what to re-check, replacement
values from the E-series, and the JSON document of cli.md.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from scipy.special import ndtri

from .blas import threads_for
from .engine.ambiguity import VISIBLE_CHANGE, groups_from_hypotheses, groups_from_sensitivity, merge_groups
from .engine.estimate import limit_value, map_estimate
from .engine.hypotheses import DRIFT_RANGE, Board, Evaluator, Hypothesis, rank_with
from .engine.predict import predict
from .eseries import nearest, series_for_tolerance
from .io.meters_file import meters_with_default
from .model import QUANTITY_UNITS, Circuit, Reading
from .shown import reading_text
from .units import format_value

__all__ = ["Diagnosis", "diagnose", "diagnosis_json", "describe_fault", "priors_json"]

UNITS = QUANTITY_UNITS


@dataclass
class Diagnosis:
    """The outcome of comparing readings with a circuit.

    Attributes
    ----------
    verdict : str
        "fault", "no-fault" or "inconsistent" (cli.md).
    hypotheses : list of Hypothesis
        The most probable, best first; ``probability`` renormalized over this
        list.
    tail : float
        Total probability of the hypotheses not listed (before renormalizing).
    estimates : dict
        Ref to :class:`~faultfind.engine.estimate.Estimate`.
    ambiguity_groups : list of list of str
    unseen : list of str
        Parts whose value no reading depends on.
    explanations : list of list of str
        For each listed hypothesis (up to three), the readings that speak for
        and against it.
    recheck : list of str
        What to re-check when the readings are inconsistent.
    notes : list of str
    suggestions : list of dict
        Next readings (filled by the advisor).
    priors : Priors or None
        The fault priors the ranking used (None: the handbook's).
    """

    circuit: Circuit
    readings: list
    verdict: str
    hypotheses: list
    tail: float
    estimates: dict
    ambiguity_groups: list
    unseen: list
    explanations: list
    recheck: list
    notes: list
    suggestions: list = field(default_factory=list)
    evaluator: Evaluator | None = None
    priors: object = None


def _name(rd: Reading) -> str:
    return rd.label or rd.where()


def _fmt(v, unit):
    return reading_text(v, unit)


def _rfmt(ev, rd, v):
    """``v`` as the meter that takes ``rd`` would show it (zero below its resolution)."""
    meter = ev.meters.get(rd.meter or "default") or ev.meters.get("default")
    return reading_text(v, UNITS[rd.quantity], meter, rd.quantity)


def describe_fault(circuit, f) -> str:
    """``R7 open``, ``R9 drifted to 6.1 kΩ (+30 %)``, ``PS1 dead``."""
    p = circuit.part(f.ref)
    if f.mode == "drift" and not getattr(f, "seen", True):
        return f"{f.ref} off its value (no reading sees it)"
    if f.mode == "drift" and p.kind in ("fuse", "switch"):
        return f"{f.ref} high resistance" + (f" ({format_value(f.value, 'Ω')})" if f.value else "")
    if f.mode == "drift" and f.value is not None:
        pct = (f.value / p.value - 1.0) * 100.0
        return f"{f.ref} drifted to {format_value(f.value, p.info.unit)} ({pct:+.0f} %)"
    if f.mode == "short" and p.kind == "switch":
        return f"{f.ref} short (welded contacts)" + (f" (about {format_value(f.value, 'Ω')})" if f.value else "")
    if f.mode == "short" and f.value:
        return f"{f.ref} short (about {format_value(f.value, 'Ω')})"
    if f.mode == "leaky":
        return f"{f.ref} leaky" + (f" (about {format_value(f.value, 'Ω')} across it)" if f.value else "")
    if p.kind in ("npn", "pnp"):
        return f"{f.ref} " + JUNCTION_WORDS.get(f.mode, f.mode)
    return f"{f.ref} {f.mode}"


#: How a transistor's fault modes read in a finding.
JUNCTION_WORDS = {"short": "collector-emitter short", "open": "open (no collector current)",
                  "base-emitter-open": "base-emitter open", "base-emitter-short": "base-emitter short"}


def _shown(ev: Evaluator, h: Hypothesis):
    """The predictions shown for ``h``: the healthy circuit's are the nominal-value
    predictions, the numbers ``faultfind expect`` and the suggestions show (its
    score also carries the mean shift of asymmetric log tolerances,
    docs/estimate.md)."""
    return ev.pred0 if not h.faults else h.predicted


def _residuals(ev: Evaluator, h: Hypothesis):
    """Standardized residuals of the readings under ``h``, with the spread its score used.

    A hypothesis scored exactly (:meth:`Evaluator.exact`) has the faulted
    circuit's own tolerance spread: with L1 open, the resistance read across
    it is the rest of the network's (spread by those parts' tolerances), not
    the winding's; the healthy spread rescaled would call a reading 4 % off
    "against" a hypothesis that fits it.  On a board with junctions every
    fault is scored so (a clamped base voltage spreads like a divider once
    its junction is open).
    """
    tol_var = None
    if h.faults and (h.exact or ev.circuit.is_nonlinear):
        S = ev.faulted_sensitivity(h.faults)
        if S is not None and np.all(np.isfinite(S)):
            tol_var = (S ** 2) @ ev.ev.var_p
        elif S is not None and ev.circuit.is_nonlinear:
            tol_var = (np.nan_to_num(S) ** 2) @ ev.ev.var_p
    return ev.ev.residuals(h.predicted, ev.drop_cols(h.faults), ev.weak(h.faults), tol_var=tol_var)


def _explain(ev: Evaluator, h: Hypothesis, healthy: Hypothesis, limit=4):
    out = []
    e = ev.ev
    z0 = e.residuals(healthy.predicted)
    zh = _residuals(ev, h)
    label = " + ".join(describe_fault(ev.circuit, f) for f in h.faults) or "a healthy circuit"
    order = np.argsort(-np.abs(z0))
    n_for = 0
    for i in order:
        rd = ev.readings[i]
        unit = UNITS[rd.quantity]
        shown = "OL" if rd.overrange else _fmt(rd.value, unit)
        if abs(z0[i]) > 3 and abs(zh[i]) <= 2 and n_for < limit:
            out.append(f"for: {_name(rd)} reads {shown} where {_rfmt(ev, rd, ev.pred0[i])} "
                       f"is expected; {label} explains it (predicts {_rfmt(ev, rd, _shown(ev, h)[i])})")
            n_for += 1
    # a reading is "against" when it is off by more than chance allows among this many
    # readings: 3 standard deviations, raised so that the chance of any one of n readings
    # passing it is about 1 % (Bonferroni; 3.5 for 20 readings)
    z_against = max(3.0, float(ndtri(1.0 - 0.005 / max(len(ev.readings), 1))))
    for i in np.argsort(-np.abs(zh)):
        rd = ev.readings[i]
        unit = UNITS[rd.quantity]
        shown = "OL" if rd.overrange else _fmt(rd.value, unit)
        if abs(zh[i]) > z_against and len(out) < 2 * limit:
            out.append(f"against: {_name(rd)} reads {shown} but {label} predicts "
                       f"{_rfmt(ev, rd, _shown(ev, h)[i])}")
    for f in h.faults:
        p = ev.circuit.part(f.ref)
        if f.mode == "drift" and f.value and getattr(f, "seen", True):
            series = series_for_tolerance(max(p.tol_low, p.tol_high, 0.001))
            if p.kind in ("resistor", "capacitor", "inductor"):
                out.append(f"value: {f.ref} estimated {format_value(f.value, p.info.unit)} against "
                           f"{format_value(p.value, p.info.unit)} nominal "
                           f"({(f.value / p.value - 1) * 100:+.0f} %); it reads like a "
                           f"{format_value(nearest(f.value, series), p.info.unit)} part ({series}): "
                           f"check a wrong value was not fitted; replace with "
                           f"{format_value(p.value, p.info.unit)}")
    out += _protection(ev, h)
    if not out:
        out.append(f"{label} fits every reading within its uncertainty")
    return out


#: A fault puts a fuse "in practice blown" when its cold resistance would drop
#: at least this much (V): small cartridge fuses drop about 0.1-0.2 V at their
#: rated current (from memory), so 0.5 V is about three times the rating.
FUSE_BLOW_DROP = 0.5


def _protection(ev: Evaluator, h: Hypothesis):
    """Where the fault would in practice blow a fuse or trip a supply (DC only).

    The fault's currents through every fuse and supply, from the healthy
    factors (an ammeter of negligible shunt), against the fuse's cold
    resistance (:data:`FUSE_BLOW_DROP`) and the supply's ``current_limit``.
    """
    c = ev.circuit
    if not h.faults:
        return []
    parts = [p for p in c.parts if (p.kind == "fuse" or (p.kind == "voltage-source" and p.current_limit))
             and p.waveform != "ac" and not any(f.ref == p.ref and f.mode == "open" for f in h.faults)]
    if not parts:
        return []
    meter = replace(ev.meters["default"], current_shunt=1e-9)
    rds = [Reading("current", "dc", part=p.ref) for p in parts]
    try:
        key = tuple(p.ref for p in parts)
        cache = ev.__dict__.setdefault("_protection_boards", {})
        b = cache.get(key)
        if b is None:
            # on the diagnosis' own factored network (no second factorization)
            b = cache[key] = Board(c, rds, {"default": meter}, share=getattr(ev, "share", None))
        now = np.abs(b.predict_faults(list(h.faults)))
        before = np.abs(b.predict_faults([]))
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return []
    out = []
    for p, i1, i0 in zip(parts, now, before):
        if not np.isfinite(i1) or i1 <= 2 * i0:
            continue
        if p.kind == "fuse" and i1 * p.value >= FUSE_BLOW_DROP:
            out.append(f"in practice: this fault puts about {_fmt(i1, 'A')} through {p.ref} "
                       f"({_fmt(i0, 'A')} when healthy), which would blow it; if {p.ref} is found "
                       f"open, check {', '.join(f.ref for f in h.faults)} before fitting a new one")
        elif p.kind == "voltage-source" and i1 > p.current_limit:
            out.append(f"in practice: this fault would draw about {_fmt(i1, 'A')} from {p.ref}, above its "
                       f"{_fmt(p.current_limit, 'A')} limit: {p.ref} current-limits or trips"
                       + ("; the predictions shown are those of the supply in current limit"
                          if p.ref in getattr(h, "limited", ()) else ""))
    return out


def _recheck(ev: Evaluator, best: Hypothesis):
    """What to re-check when no hypothesis explains the readings."""
    e = ev.ev
    z = e.residuals(best.predicted, ev.drop_cols(best.faults), ev.weak(best.faults))
    out = []
    healthy_all = None
    for i in np.argsort(-np.abs(z))[:3]:
        if abs(z[i]) <= 3:
            break
        rd = ev.readings[i]
        unit = UNITS[rd.quantity]
        sd = np.sqrt(e.u[i] ** 2 + max(e.T0[i, i], 0))
        y, p = rd.value, _shown(ev, best)[i]
        p_ok = ev.pred0[i] if i < len(ev.pred0) else np.nan
        hints = []
        if y is not None and np.isfinite(p):
            if any(np.isfinite(q) and abs(y + q) <= 3 * sd and abs(q) > 3 * sd for q in (p, p_ok)):
                hints.append("the probes reversed")
            for k in (1e3, 1e-3):
                if abs(y * k - p) <= 3 * sd * max(1, k):
                    hints.append("a unit prefix (mV against V, mA against A)")
                    break
            if rd.quantity == "voltage":
                if healthy_all is None:
                    healthy_all = _node_voltages(ev)
                for (node, mode), v in healthy_all.items():
                    if node not in (rd.plus, rd.minus) and mode == rd.mode and abs(v - y) <= 3 * sd:
                        hints.append(f"the probe on node {node} instead of {rd.plus}")
                        break
                if rd.mode == "dc" and abs(y) < 3 * sd and ev.circuit.has_ac:
                    hints.append("the meter on DC where the signal is AC")
        if rd.overrange:
            hints.append("the meter's function or range (it shows OL)")
        hint = ("; possible causes: " + ", ".join(hints)) if hints else \
            "; re-take it, check the probe points and the meter's mode and range"
        out.append(f"re-check {_name(rd)}: reads {'OL' if rd.overrange else _fmt(y, unit)} where the best "
                   f"explanation ({best.label}) expects {_rfmt(ev, rd, p)}{hint}")
    out.append("if the readings stand, more than one part may have failed, or the unit differs "
               "from its drawing (a modification, a wrong part fitted)")
    return out


def _node_voltages(ev: Evaluator):
    c = ev.circuit
    modes = ["dc"] + (["ac"] if c.has_ac else [])
    rds = [Reading("voltage", m, n, c.ground) for m in modes for n in c.nodes if n != c.ground]
    vals = predict(c, rds, ev.meters).value
    return {(r.plus, r.mode): v for r, v in zip(rds, vals)}


def diagnose(circuit: Circuit, readings, meters=None, *, top: int = 10, doubles: bool = True,
             advise: bool = True, costs=None, power=None, progress=None, screen=None,
             priors=None) -> Diagnosis:
    """Compare ``readings`` with ``circuit``; rank fault hypotheses.

    Parameters
    ----------
    circuit : Circuit
        A validated circuit.
    readings : sequence of Reading
        Validated readings, each with a value or ``OL``.
    meters : dict, optional
        Meter profiles; the built-in default is added.
    top : int, optional
        How many hypotheses to list (at least 1).
    doubles : bool, optional
        Try pairs of faults when no single fault explains the readings.
    advise : bool, optional
        Fill ``suggestions`` with the next readings worth taking
        (:func:`faultfind.advise.suggest`); ``costs`` and ``power`` go to it.
    progress : callable, optional
        Called as ``progress(stage, done, total)`` when a step starts
        (``done``/``total`` None) and during the screened search of a large
        circuit, for a progress display.
    screen : bool, optional
        Force the screen of large circuits (:mod:`faultfind.engine.screen`)
        on or off; by default it is used from
        :data:`~faultfind.engine.hypotheses.SCREEN_PARTS` parts up.
    priors : Priors, optional
        The fault priors (:class:`~faultfind.engine.priors.Priors`, e.g.
        learned from the logbook: docs/priors.md); default the handbook's.

    Returns
    -------
    Diagnosis
    """
    with threads_for(len(circuit.parts)):
        d = _diagnose(circuit, readings, meters, top, doubles, advise, costs, power, progress, screen,
                      priors)
    d.priors = priors
    return d


def _diagnose(circuit, readings, meters, top, doubles, advise, costs, power, progress, screen,
              priors=None):
    if top < 1:
        raise ValueError(f"top: must be at least 1, got {top}")
    meters = meters_with_default(meters)
    readings = list(readings)
    for rd in readings:
        if rd.value is None and not rd.overrange:
            raise ValueError(f"readings: {rd.where()} has no value")
    tick = progress if progress is not None else (lambda *a: None)
    tick("setting up", None, None)
    ev = Evaluator(circuit, readings, meters, priors)
    if not readings:
        healthy = ev.make([], ev.healthy_prediction())
        healthy.probability = 1.0
        suggestions = []
        if advise:
            from .advise import suggest, suggestion_json
            suggestions = [suggestion_json(x) for x in suggest(circuit, [], meters, costs=costs, power=power,
                                                               priors=priors)]
        return Diagnosis(circuit, readings, "no-fault", [healthy], 0.0, _estimates(ev, healthy), [],
                         list(ev.params), [["no readings yet: take the suggested readings"]], [],
                         ["no readings: nothing can be told yet"], suggestions, ev)
    tick("ranking", None, None)
    ranking = rank_with(ev, doubles=doubles, screen=screen, progress=progress)
    listed = ranking.hypotheses[:top]
    total = sum(h.probability for h in listed)
    tail = 1.0 - total
    shown = []
    for h in listed:
        h2 = Hypothesis(h.faults, h.predicted, h.chi2, h.log_like, h.log_prior, h.log_post,
                        h.probability / total if total > 0 else 1.0 / len(listed), h.drift_sd, h.exact,
                        h.occam, h.limited)
        shown.append(h2)
    best = ranking.hypotheses[0]
    tick("grouping", None, None)
    with np.errstate(over="ignore"):
        sd = np.sqrt(ev.ev.u ** 2 + np.clip(np.diag(ev.ev.T0), 0, None))
    explanations = [_explain(ev, h, ranking.healthy) for h in ranking.hypotheses[:3]]
    verdict = ranking.verdict
    if verdict == "fault" and any(line.startswith("against:") for line in explanations[0]):
        verdict = "inconsistent"   # never headline a finding some reading speaks against
    all_groups, unseen = _groups(ev, ranking, best, sd, verdict)
    recheck = _recheck(ev, best) if verdict == "inconsistent" else []
    notes = []
    if verdict == "no-fault":
        hidden = [h for h in ranking.hypotheses[1:6] if h.faults and h.probability >= 0.05]
        if hidden:
            notes.append("the readings fit a healthy circuit, but they cannot rule out: "
                         + ", ".join(describe_fault(circuit, f) for h in hidden for f in h.faults)
                         + "; take the suggested readings to see them")
        if unseen:
            notes.append("no reading depends on " + ", ".join(unseen[:12])
                         + (" and others" if len(unseen) > 12 else "") + ": a fault there would not show")
    if ranking.doubles_tried:
        notes.append("no single fault explained the readings, so pairs of faults were tried")
    scr = ranking.screening
    if scr is not None:
        notes.append(f"large circuit: {scr.evaluated} of {scr.evaluated + scr.pruned + len(scr.unresolved)} "
                     f"parts evaluated in full; the other {scr.pruned + len(scr.unresolved)} were screened "
                     "by an upper bound of how well any fault of theirs could fit the readings")
        if scr.unresolved:
            notes.append(f"{len(scr.unresolved)} parts could not be told from a healthy circuit by these "
                         f"readings and were not evaluated one by one (e.g. {', '.join(scr.unresolved[:6])}); "
                         "their faults keep their share of the probability; take the suggested readings "
                         "to narrow it")
    suggestions = []
    if advise:
        from .advise import suggest, suggestion_json
        tick("advising", None, None)
        sug = suggest(circuit, readings, meters, costs=costs, power=power,
                      hypotheses=[(h.faults, h.probability) for h in ranking.hypotheses],
                      factors=ev.share)
        suggestions = [suggestion_json(x) for x in sug]
    tick("estimating", None, None)
    estimates = _estimates(ev, best)
    tick("done", None, None)
    return Diagnosis(circuit, readings, verdict, shown, tail, estimates, all_groups,
                     unseen, explanations, recheck, notes, suggestions, ev)


#: A finding is settled when the verdict is a fault and its hypothesis holds at
#: least this probability: no ambiguity group then names its parts.
SETTLED_P = 0.9


def _groups(ev: Evaluator, ranking, best: Hypothesis, sd, verdict):
    """Ambiguity groups and unseen parts, consistent with the finding.

    Hypothesis groups (coinciding predictions) and sensitivity groups; the
    sensitivities are those of the best hypothesis' circuit (the ones its
    estimates use), whose faulted parts have a fixed value and are neither
    grouped nor unseen.  When the finding is settled (:data:`SETTLED_P`),
    its parts are taken out of every group: the readings and the priors
    together have told them apart.
    """
    groups = groups_from_hypotheses(ranking.hypotheses, sd)
    sd_s = np.where(np.isfinite(sd) & (sd > 0), sd, np.where(sd > 0, np.finfo(float).max, 1.0))
    S = ev.S0
    fixed = {f.ref for f in best.faults}
    if best.faults:
        Sf = ev.faulted_sensitivity(best.faults)
        if Sf is not None:
            S = np.nan_to_num(Sf, nan=0.0, posinf=0.0, neginf=0.0)
    sgroups, unseen = groups_from_sensitivity(list(ev.params), S, sd_s, ev.ev.var_p)
    unseen = [r for r in unseen if r not in fixed]
    settled = verdict == "fault" and best.probability >= SETTLED_P
    drop = set(fixed)
    if settled:
        # beside a settled finding, only parts a fault would visibly move are worth naming
        z = np.sqrt(((S / sd_s[:, None]) ** 2).sum(axis=0))
        drop |= {r for r, zj in zip(ev.params, z) if VISIBLE_CHANGE * zj < 1.0}
    sgroups = [[r for r in g if r not in drop] for g in sgroups]
    all_groups = merge_groups([set(g) for g in groups] + [set(g) for g in sgroups])
    if settled:
        all_groups = merge_groups([set(g) - fixed for g in all_groups])
    return all_groups, unseen


def _estimates(ev: Evaluator, h: Hypothesis) -> dict:
    circuit = ev.circuit
    fixed = {}
    for f in h.faults:
        p = circuit.part(f.ref)
        if f.mode == "drift":
            sd = h.drift_sd
            if not f.seen:
                fixed[f.ref] = (p.value, p.value * DRIFT_RANGE[0], p.value * DRIFT_RANGE[1], "drift")
                continue
            if sd is None:
                lo, hi = p.value * DRIFT_RANGE[0], p.value * DRIFT_RANGE[1]
            else:
                lo, hi = f.value * np.exp(-1.96 * sd), f.value * np.exp(1.96 * sd)
            fixed[f.ref] = (f.value, float(lo), float(hi), "drift")
        elif p.is_semiconductor and (p.value is None or f.mode not in ("open", "short")):
            if p.value is not None:   # a leaky diode keeps its forward voltage
                fixed[f.ref] = (p.value, p.value, p.value, f.mode)
        else:
            v = limit_value(p, f.mode)
            if f.mode == "short" and f.value and p.kind in ("resistor", "fuse", "switch"):
                # a short of resistance r across the part: the part reads r in parallel with itself
                v = f.value if p.kind == "switch" and p.state == "open" else p.value * f.value / (p.value + f.value)
            fixed[f.ref] = (v, v, v, f.mode)
    params = list(ev.params)
    nominal = np.array([circuit.part(r).value for r in params])
    S = ev.S0
    if h.faults:
        Sf = ev.faulted_sensitivity(h.faults)
        if Sf is not None:
            S = np.nan_to_num(Sf)
    e = ev.ev
    use = (~e.ol) & np.isfinite(h.predicted)
    est = map_estimate(params, nominal, e.centre, e.var_p, S, np.nan_to_num(e.y), h.predicted, e.u, use, fixed)
    return est


def _num(x):
    return None if x is None or not np.isfinite(x) else float(x)


def diagnosis_json(d: Diagnosis) -> dict:
    """The ``diagnose --json`` document of cli.md (plus the documented extra keys)."""
    return {
        "verdict": d.verdict,
        "hypotheses": [
            {"faults": [{"ref": f.ref, "mode": f.mode, "value": _num(f.value) if f.mode == "drift" and f.seen else None}
                        for f in h.faults],
             "probability": float(h.probability), "chi2": _num(h.chi2), "readings": len(d.readings)}
            for h in d.hypotheses],
        "estimates": {ref: {"nominal": e.nominal, "value": _num(e.value), "low": _num(e.low),
                            "high": _num(e.high)} for ref, e in d.estimates.items()},
        "ambiguity_groups": d.ambiguity_groups,
        "suggestions": d.suggestions,
        "explanations": [{"hypothesis": i, "lines": lines} for i, lines in enumerate(d.explanations)
                         if i < len(d.hypotheses)],
        "unseen": d.unseen,
        "recheck": d.recheck,
        "notes": d.notes,
        "priors": priors_json(d.priors),
    }


def priors_json(table) -> dict:
    """Which fault priors a diagnosis used: ``{"source", "outcomes"}`` (docs/priors.md)."""
    if table is None or table.label == "handbook":
        return {"source": "handbook", "outcomes": 0}
    return {"source": table.label, "outcomes": int(table.outcomes)}
