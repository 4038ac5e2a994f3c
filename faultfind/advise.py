"""Next-reading advice: which reading settles the diagnosis fastest.

Every candidate reading a technician could take (a node voltage, a voltage
across a part, a current through a part, an in-circuit resistance, a lifted
part, an AC reading at another frequency) is scored by its expected
information gain about the fault hypotheses (:mod:`faultfind.engine.advise`)
divided by the effort it costs on site (:data:`DEFAULT_COSTS`, changeable with
a costs file).  Predictions for every candidate under every hypothesis come
from the rank-one engine with one factorization per analysis.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, replace

import numpy as np

from .blas import threads_for
from .engine.advise import condition_on_taken, expected_information_gain
from .engine.drifts import DRIFT_RANGE, RESISTOR_FLOOR, SOURCE_RANGE
from .engine.hypotheses import Board, Fault, rank
from .engine.junction_faults import exact_faults
from .engine.meter import standard_uncertainty
from .engine.predict import predict
from .engine.priors import HANDBOOK
from .errors import InputError, SolveError
from .io.meters_file import meters_with_default
from .model import QUANTITY_UNITS, Circuit, Reading, power_for
from .shown import reading_text
from .units import format_value

__all__ = ["Suggestion", "DEFAULT_COSTS", "suggest", "candidate_readings", "contact_strings", "load_costs",
           "follows_by_kvl", "ELV_AC", "ELV_DC", "suggestion_json"]

#: Effort of each kind of reading, in "probe placements" (docs/advice.md).
#: Common practice (no source): a voltage probe is cheap; a current reading
#: means breaking the circuit (or a clamp); isolating means lock-out, verify
#: dead and discharge before any resistance reading; lifting a leg means
#: unsoldering or unplugging.
DEFAULT_COSTS = {
    "voltage": 1.0,          # probe a node or across a part, circuit live
    "current": 4.0,          # break the circuit (power off to do it), meter in series
    "resistance": 1.0,       # ohmmeter across a part or nodes, circuit already isolated
    "lifted": 4.0,           # lift one leg of a part (isolated), read it alone
    "frequency": 1.0,        # extra for re-setting the signal generator to another frequency
    "isolate": 3.0,          # lock out, tag out, verify dead, discharge stored energy
    "energize": 2.0,         # remove locks, restore power, stand clear
}

#: Extra-low-voltage limits: 50 V AC RMS and 120 V ripple-free DC
#: (IEC 61140 / IEC 60364-4-41 band I; from memory).
ELV_AC = 50.0
ELV_DC = 120.0

_MAX_HYP = 40
#: Leak resistance of a leaky diode before any reading (ohms), for the first suggestion;
#: common practice (no source): a leak a diode test shows plainly.
LEAK_TYPICAL = 1e3
_CHUNK = 60
#: On a circuit with more candidate readings than this, only the readings near
#: the leading suspects are weighed (:func:`near_suspects`).
CANDIDATE_LIMIT = 3000
#: How many candidate readings are weighed then, at most.
NEAR_CAP = 100
#: Top current range of the meter, in amperes: the fused 10 A input of a
#: typical handheld or bench multimeter (common practice, from memory).  A
#: current reading whose predicted value under any kept hypothesis exceeds it
#: is never suggested.
CURRENT_RANGE = 10.0
# A private meter profile with no shunt: a supply's own current, unloaded.
_IDEAL = "\x00supply"


@dataclass(frozen=True)
class Suggestion:
    """A reading worth taking next.

    Attributes
    ----------
    reading : Reading
        In the readings file's terms (append it as a row).
    power : str
        "on" (circuit energized) or "off" (isolated).
    score : float
        Expected information gain per unit of effort (bits per effort unit).
    gain : float
        Expected information gain in bits.
    cost : float
        Effort, from the cost model.
    why : str
        Which hypotheses it separates and what each would read.
    caution : str or None
        Safety caution for this reading.
    """

    reading: Reading
    power: str
    score: float
    gain: float
    cost: float
    why: str
    caution: str | None = None


def load_costs(path) -> dict:
    """Read a costs file (TOML, keys of :data:`DEFAULT_COSTS`, positive numbers)."""
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except OSError as exc:
        raise InputError(f"cannot read the costs file: {exc.strerror}", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", file=path) from None
    costs = dict(DEFAULT_COSTS)
    for k, v in doc.items():
        if k not in DEFAULT_COSTS:
            raise InputError(f"unknown cost; expected one of {', '.join(DEFAULT_COSTS)}", file=path, key=k)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not v > 0:
            raise InputError(f"must be a positive number, got {v!r}", file=path, key=k)
        costs[k] = float(v)
    return costs


def _power(rd: Reading) -> str:
    """A resistance and a diode test are power-off readings."""
    return power_for(rd.quantity)


def junction_probes(part):
    """The diode-test readings of a semiconductor ``part``: ``[(plus, minus, what)]``.

    A two-terminal junction is read forward (red probe on the anode); a
    transistor's base-emitter and base-collector junctions forward (npn: red
    on the base; pnp: black on the base), the usual check of a bipolar
    transistor with a meter's diode test (common practice, no source).
    """
    if part.kind in ("npn", "pnp"):
        c, b, e = part.nodes
        if part.kind == "npn":
            return [(b, e, f"{part.ref} base-emitter"), (b, c, f"{part.ref} base-collector")]
        return [(e, b, f"{part.ref} emitter-base"), (c, b, f"{part.ref} collector-base")]
    return [(part.nodes[0], part.nodes[1], f"across {part.ref}")]


def candidate_readings(circuit: Circuit, suspects=(), frequencies=None, *, nodes=None,
                       parts=None) -> list[Reading]:
    """Every reading worth considering on ``circuit``.

    Node voltages to ground and voltages across two-terminal parts (DC; AC at
    the circuit frequency and at ``frequencies`` when AC sources exist),
    currents through parts, in-circuit resistances across passive parts,
    diode tests across every junction (power off: :func:`junction_probes`), and
    lifted-part resistances of the ``suspects``.  ``nodes`` and ``parts``
    (sets of names), when given, restrict the readings to those nodes and parts.
    """
    g = circuit.ground
    out = []
    modes = [("dc", None)]
    if circuit.has_ac:
        fs = frequencies if frequencies is not None else [circuit.frequency / 10, circuit.frequency * 10]
        modes += [("ac", None)] + [("ac", float(f)) for f in fs]
    pool = circuit.parts if parts is None else [circuit.part(r) for r in sorted(parts)]
    two = [p for p in pool if p.kind not in ("opamp", "npn", "pnp")]
    node_list = circuit.nodes if nodes is None else [n for n in circuit.nodes if n in nodes] \
        if len(nodes) * 50 > len(circuit.nodes) else sorted(nodes)
    for mode, f in modes:
        for n in node_list:
            if n != g:
                out.append(Reading("voltage", mode, n, g, frequency=f, label=f"node {n}"))
        if f is None:
            for p in two:
                if g not in p.nodes[:2] and p.nodes[0] != p.nodes[1]:
                    out.append(Reading("voltage", mode, p.nodes[0], p.nodes[1], label=f"across {p.ref}"))
            for p in two:
                out.append(Reading("current", mode, part=p.ref, label=f"through {p.ref}"))
    for a, b, refs in contact_strings(circuit, pool):
        if nodes is None or (a in nodes and b in nodes):
            for mode, f in modes:
                if f is None:
                    out.append(Reading("voltage", mode, a, b, label=f"across {' + '.join(refs)}"))
    for p in two:
        if not p.is_source and not p.is_semiconductor:
            out.append(Reading("resistance", None, part=p.ref, setup="in-circuit", label=f"across {p.ref}"))
    for p in pool:
        if p.is_semiconductor:
            for plus, minus, what in junction_probes(p):
                if len(p.nodes) == 2:
                    out.append(Reading("diode-test", None, part=p.ref, label=f"diode test {what}"))
                else:
                    out.append(Reading("diode-test", None, plus, minus, label=f"diode test {what}"))
    for ref in suspects:
        p = circuit.part(ref)
        if p.kind in ("resistor", "fuse", "switch", "inductor", "capacitor"):
            out.append(Reading("resistance", None, part=ref, setup="lifted", label=f"{ref} alone"))
    return out


#: Kinds that make a string of contacts: closed contacts and fuses in series.
STRING_KINDS = ("switch", "fuse")
#: Longest string of contacts read across in one reading (parts).
STRING_MAX = 6


def contact_strings(circuit: Circuit, parts=None, longest=STRING_MAX):
    """Runs of two or more contacts or fuses in series, to read across in one go.

    An interlock chain (a fuse and three door switches feeding a coil) is
    checked by reading across the whole string first, then across half of it:
    one reading tells whether any contact in the string has a high
    resistance, where reading contact by contact needs one reading each
    (half-splitting, common practice, no source).  Each run is a simple path
    of :data:`STRING_KINDS` parts (not through ground), 2 to ``longest``
    parts long, whose inner nodes join exactly two such parts (a node where
    contacts branch ends a run: the contacts beyond it are not in series
    with these); a pair of end nodes is listed once (the shortest run
    between them), its plus end the one nearer a supply (the reading is then
    positive on a DC feed).

    Returns
    -------
    list of (str, str, tuple of str)
        The two end nodes and the parts of the run, in order.
    """
    g = circuit.ground
    pool = circuit.parts if parts is None else parts
    adj = {}
    for p in pool:
        if p.kind in STRING_KINDS and p.nodes[0] != p.nodes[1]:
            a, b = p.nodes[:2]
            adj.setdefault(a, []).append((b, p.ref))
            adj.setdefault(b, []).append((a, p.ref))
    found = {}
    for start in sorted(adj):
        if start == g:
            continue
        stack = [(start, (start,), ())]
        while stack:
            node, path, refs = stack.pop()
            if len(refs) >= 2:
                key = frozenset((start, node))
                if key not in found or len(refs) < len(found[key][2]):
                    found[key] = (start, node, refs)
            if len(refs) >= longest or (node == g and refs):
                continue
            if refs and len(adj[node]) != 2:
                continue   # a branch point: the contacts beyond it are not in series with these
            for nxt, ref in adj.get(node, ()):
                if nxt not in path and nxt != g and ref not in refs:
                    stack.append((nxt, path + (nxt,), refs + (ref,)))
    dist = _supply_distance(circuit)
    runs = []
    for a, b, refs in found.values():
        if dist.get(b, math.inf) < dist.get(a, math.inf):   # plus probe on the supply side
            a, b, refs = b, a, refs[::-1]
        runs.append((a, b, refs))
    return sorted(runs, key=lambda t: (t[0], t[1]))


def _supply_distance(circuit):
    """Parts between each node and the nearest voltage source's + terminal (breadth first)."""
    g = circuit.ground
    adj = {}
    for p in circuit.parts:
        if p.kind != "opamp":
            a, b = p.nodes[:2]
            adj.setdefault(a, set()).add(b)
            adj.setdefault(b, set()).add(a)
    frontier = [p.nodes[0] for p in circuit.parts if p.kind == "voltage-source" and p.nodes[0] != g]
    dist = {n: 0 for n in frontier}
    while frontier:
        nxt = []
        for n in frontier:
            for m in adj.get(n, ()):
                if m != g and m not in dist:
                    dist[m] = dist[n] + 1
                    nxt.append(m)
        frontier = nxt
    return dist


def near_suspects(circuit: Circuit, suspects, cap=NEAR_CAP):
    """The nodes and parts on or next to the ``suspects``, for about ``cap`` candidate readings.

    On a large network a reading far from every suspect cannot separate
    them, and weighing every node and part would cost one solve per
    candidate.  The neighbourhood grows one part at a time (nodes joined by a
    part) from the suspects' own nodes until its readings (a node voltage per
    node; a voltage, a current and an in-circuit resistance per part) reach
    about ``cap``.

    Returns
    -------
    nodes : set of str
    parts : set of str
    """
    g = circuit.ground
    node_parts = {}
    for p in circuit.parts:
        for n in p.nodes:
            if n != g:
                node_parts.setdefault(n, []).append(p)
    near = {n for r in suspects for n in circuit.part(r).nodes if n != g}
    parts = set(suspects)
    frontier = set(near)
    while frontier:
        new_parts = {p.ref for n in frontier for p in node_parts.get(n, ()) if p.ref not in parts}
        if len(near) + 3 * len(parts | new_parts) > cap and len(near) + 3 * len(parts) > 0:
            break
        parts |= new_parts
        nxt = {n for r in new_parts for n in circuit.part(r).nodes if n != g} - near
        near |= nxt
        frontier = nxt
    return near, parts


def _prior_hypotheses(circuit, priors=None):
    """Hypotheses before any reading: healthy and every single fault, with their priors."""
    table = HANDBOOK if priors is None else priors
    total = table.total(circuit.parts)
    hyps = [((), table.p_healthy)]
    for p in circuit.parts:
        for mode in p.fault_modes:
            pr = table.mass(p, mode, total)
            if pr <= 0:
                continue
            if mode == "drift":
                factors = (0.8,) if p.is_source else ((3.0,) if p.kind in ("fuse", "switch") else (0.5, 2.0))
                if p.is_semiconductor:
                    factors = (0.8, 1.25)   # a forward or zener voltage 20 % off
                for fct in factors:
                    hyps.append(((Fault(p.ref, "drift", p.value * fct),), pr / len(factors)))
            elif mode == "leaky":
                hyps.append(((Fault(p.ref, "leaky", LEAK_TYPICAL),), pr))
            else:
                hyps.append(((Fault(p.ref, mode),), pr))
    s = sum(pr for _, pr in hyps)
    return [(f, pr / s) for f, pr in hyps]


def _repair_groups(kept):
    """One group per set of faulted parts: the modes of a part call for one repair."""
    keys = {}
    return np.array([keys.setdefault(frozenset(f.ref for f in faults), len(keys)) for faults, _ in kept])


def _spread_unseen(circuit, hypotheses):
    """Unseen drifts (value unknown over the whole drift range) as a few values across it.

    A drift no reading has seen yet is only known to lie somewhere in its
    range (log-uniform outside the tolerance band, :mod:`.engine.drifts`);
    the diagnosis carries it at one end of the range.  Weighing readings
    against that end alone would count every reading that sees a thousandfold
    drift as settling it; the values at the quarter and three-quarter points
    of each side of the band (mass by the side's share of the range) stand
    for the small drifts a reading may not see as well.
    """
    out = []
    for faults, pr in hypotheses:
        f = faults[0] if len(faults) == 1 else None
        p = circuit.part(f.ref) if f is not None else None
        if f is None or f.mode != "drift" or f.seen or p.is_semiconductor:
            out.append((faults, pr))
            continue
        lo, hi, blo, bhi = _drift_span(p)
        sides = [(a, b) for a, b in ((lo, min(blo, hi)), (max(bhi, lo), hi)) if b - a > 1e-9]
        total = sum(b - a for a, b in sides)
        for a, b in sides:
            for q in (0.25, 0.75):
                out.append(((Fault(f.ref, "drift", float(p.value * math.exp(a + q * (b - a)))),),
                            pr * (b - a) / total / 2))
    return out


def _drift_span(part):
    """The drift range of ``part`` and its tolerance band, in log-value (as the diagnosis searches)."""
    lo, hi = np.log(SOURCE_RANGE if part.is_source else DRIFT_RANGE)
    if part.kind == "resistor":
        lo = np.log(RESISTOR_FLOOR)
    if part.kind in ("fuse", "switch"):
        lo = 0.0
    return (float(lo), float(hi), float(np.log1p(-min(part.tol_low, 0.999))), float(np.log1p(part.tol_high)))


def _solvable(circuit, rd, meters) -> bool:
    """False for a power-off reading of a board with junctions that has no solution."""
    if rd.quantity not in ("resistance", "diode-test") or rd.setup == "lifted":
        return True
    try:
        predict(circuit, [rd], meters)
    except (ValueError, ArithmeticError, SolveError):   # ConvergenceError is both
        return False
    return True


def _scale(rd, meter, values):
    """Map displays to the scale the reading's noise is Gaussian on (log for ohms; an OL
    diode test above the display's top, apart from a shorted junction's 0 V)."""
    v = np.asarray(values, dtype=float)
    if rd.quantity == "diode-test":
        top = meter.diode_test_max
        return np.where(np.isfinite(v) & (v <= top), v, 1.5 * top)
    if rd.quantity == "resistance":
        top = meter.max_resistance * 2.0
        r = np.where(np.isfinite(v), np.clip(np.abs(v), 1e-3, top), top)
        return np.log10(r)
    return np.where(np.isfinite(v), v, 0.0)


def suggest(circuit: Circuit, readings=(), meters=None, *, hypotheses=None, costs=None,
            power=None, top=5, factors=None, priors=None) -> list[Suggestion]:
    """The next readings worth taking, best first.

    Parameters
    ----------
    circuit : Circuit
    readings : sequence of Reading, optional
        Readings taken so far (with values).  Without them the advice is for a
        circuit that has just failed (prior probabilities only).
    meters : dict, optional
        Meter profiles; the default is added.
    hypotheses : list of (tuple of Fault, probability), optional
        The current posterior; computed from ``readings`` when omitted.
    costs : dict, optional
        Effort model, keys of :data:`DEFAULT_COSTS`.
    power : {"on", "off"}, optional
        Whether the circuit is energized now; default: the state the last
        reading needed (energized when there is none).
    top : int
        How many suggestions.
    factors : dict, optional
        Factored healthy networks of ``circuit`` from an earlier
        :func:`~faultfind.engine.predict.predict` (its ``share``), reused
        instead of factoring again.
    priors : Priors, optional
        Fault priors for the hypotheses computed here (default the handbook's).

    Returns
    -------
    list of Suggestion
    """
    with threads_for(len(circuit.parts)):
        return _suggest(circuit, readings, meters, hypotheses, costs, power, top, factors, priors)


def _suggest(circuit, readings, meters, hypotheses, costs, power, top, factors, priors=None):
    if power not in (None, "on", "off"):
        raise ValueError(f"power: expected 'on' or 'off', got {power!r}")
    meters = meters_with_default(meters)
    costs = dict(DEFAULT_COSTS, **(costs or {}))
    readings = list(readings)
    if power is None:
        power = _power(readings[-1]) if readings else "on"
    if hypotheses is None:
        if readings:
            rk = rank(circuit, readings, meters, priors=priors)
            hypotheses = [(h.faults, h.probability) for h in rk.hypotheses]
        else:
            hypotheses = _prior_hypotheses(circuit, priors)
    hypotheses = sorted(_spread_unseen(circuit, hypotheses), key=lambda fp: -fp[1])
    kept, acc = [], 0.0
    for f, pr in hypotheses:
        kept.append((f, pr))
        acc += pr
        if acc >= 0.995 or len(kept) >= _MAX_HYP:
            break
    probs = np.array([pr for _, pr in kept])
    probs = probs / probs.sum()
    suspects = []
    for f, _ in kept[:6]:
        for x in f:
            if x.ref not in suspects:
                suspects.append(x.ref)
    taken = {_same(circuit, r) for r in readings}
    if 4 * len(circuit.parts) > CANDIDATE_LIMIT and suspects:
        near, nparts = near_suspects(circuit, suspects)
        cands = candidate_readings(circuit, suspects, nodes=near, parts=nparts)
    else:
        cands = candidate_readings(circuit, suspects)
    cands = [c for c in cands if _same(circuit, c) not in taken]
    if circuit.is_nonlinear:   # a power-off reading the engine cannot solve is not offered
        cands = [c for c in cands if _solvable(circuit, c, meters)]
    if not cands or len(kept) < 2:
        return []
    if len(set(_repair_groups(kept).tolist())) < 2:
        # only one part's modes are left: no reading changes what to repair (the gain
        # over repair groups is zero), so none is advised - without the work of weighing
        return []
    seen = [r for r in readings if r.value is not None and r.overrange == 0
            and math.isfinite(r.value)]
    supplies = [p for p in circuit.parts if p.kind == "voltage-source" and p.current_limit]
    feeds = [Reading("current", p.waveform, part=p.ref, meter=_IDEAL) for p in supplies]
    rows = cands + seen + feeds
    C, M = len(cands), len(seen)
    meters = dict(meters, **{_IDEAL: replace(meters["default"], current_shunt=0.0)})
    m = _Model(circuit, rows, meters, kept, factors)
    mu = m.mu
    drawn = _undeliverable(supplies, mu[C + M:])
    bad = np.isnan(mu[:C]).any(axis=0)
    cands_ok = np.ones(C, dtype=bool)
    for c, rd in enumerate(cands):   # never a current beyond the meter's range
        if rd.quantity == "current":
            cands_ok[c] = not np.any(np.abs(np.nan_to_num(mu[c, ~bad])) > CURRENT_RANGE)
    mu_s, noise_s, fac, sens_s = m.scaled(C + M)
    y_obs = np.array([_scale(r, meters[r.meter or "default"], [r.value])[0] for r in seen])
    mean_s, sd_s = condition_on_taken(mu_s, noise_s, fac, sens_s, m.var,
                                      np.arange(C, C + M), y_obs)
    probs_eff = np.where(bad, 0.0, probs)
    probs_eff = probs_eff / probs_eff.sum()
    # the worth of a reading, counting only hypotheses the supplies could feed
    fed = np.where(np.array([k in drawn for k in range(len(kept))]), 0.0, probs_eff)
    if fed.sum() <= 0:
        return []
    groups = _repair_groups(kept)   # the information about which part to repair
    gain = np.concatenate([expected_information_gain(fed / fed.sum(), mean_s[a:a + _CHUNK],
                                                     sd_s[a:a + _CHUNK], groups)
                           for a in range(0, C, _CHUNK)]) * fed.sum()
    # a reading that repeats one taken, another way, tells nothing new
    cands_ok &= ~_repeats(mu_s[:C], noise_s[:C], mu_s[C:C + M], fed,
                          [rd.quantity for rd in cands], [rd.quantity for rd in seen])
    # nor does a DC voltage that follows from taken ones by Kirchhoff's voltage law
    cands_ok &= ~follows_by_kvl(cands, seen)
    gain = np.where(cands_ok, gain, 0.0)
    cost = np.array([_cost(rd, power, costs, circuit) for rd in cands])
    score = gain / cost
    # best score first; of equal worth, a reading without the meter in series first
    order = np.lexsort((np.array([rd.quantity == "current" for rd in cands]), -np.round(score, 9)))
    caution_on = _live_caution(circuit)
    out, listed = [], []
    for c in order:
        if len(out) >= max(top, 0) or gain[c] <= 1e-6:
            break
        if any(_coincide(mean_s[c], sd_s[c], mean_s[o], fed) for o in listed
               if cands[o].quantity == cands[c].quantity):
            continue   # the same reading as one listed above (e.g. two parts in series)
        listed.append(c)
        rd = cands[c]
        pw = _power(rd)
        caution = caution_on if pw == "on" else _off_caution(rd)
        if rd.quantity == "current":
            caution += ("; the meter goes in series: break the circuit with power off first "
                        "(or use a clamp meter), then restore power")
        why = _why(circuit, rd, kept, fed / fed.sum(), mu[c], mean_s[c], sd_s[c], power,
                   meters.get(rd.meter or "default", meters["default"]))
        why += _limit_note(circuit, kept, probs_eff, drawn)
        out.append(Suggestion(rd, pw, float(score[c]), float(gain[c]), float(cost[c]), why, caution))
    return out


class _Model:
    """Predictions of readings under the kept hypotheses, with what their spread needs."""

    def __init__(self, circuit, rows, meters, kept, factors):
        self.circuit, self.rows, self.meters = circuit, rows, meters
        share = dict(factors or {})
        nominal = predict(circuit, rows, meters, share=share)
        board = Board(circuit, rows, meters, share)
        singles = [(i, f[0]) for i, (f, _) in enumerate(kept) if len(f) == 1]
        items = [(circuit.part(x.ref), x.mode,
                  None if x.mode != "drift" else np.array([x.value / circuit.part(x.ref).value]))
                 for _, x in singles]
        mu = np.zeros((len(rows), len(kept)))
        if circuit.is_nonlinear:   # a board with junctions: each fault re-solved exactly
            for i, x in singles:
                mu[:, i] = exact_faults(board, [x])
            singles, items = [], []
        for (i, _), P in zip(singles, board.predict_many(items)):
            mu[:, i] = P[0]
        for i, (f, _) in enumerate(kept):
            if len(f) == 0:
                mu[:, i] = nominal.value
            elif len(f) > 1:
                mu[:, i] = board.predict_faults(list(f))
        self.mu = mu
        self.nominal = nominal
        # each part's log-value: rectangular inside its tolerance (GUM 4.3.7)
        tl = np.array([circuit.part(r).tol_low for r in nominal.params])
        th = np.array([circuit.part(r).tol_high for r in nominal.params])
        self.var = ((np.log1p(th) - np.log1p(-tl)) / 2) ** 2 / 3

    def scaled(self, n):
        """The first ``n`` rows on their Gaussian scale: mean, meter noise, tolerance factor, sensitivities."""
        rows, mu = self.rows[:n], self.mu[:n]
        # in place: the sensitivities (rows x parts, the largest array here) are
        # only read here, and a copy costs a tenth of a second at 100,000 parts
        S = np.nan_to_num(self.nominal.sensitivity[:n], copy=False, posinf=0.0, neginf=0.0)
        p0 = np.abs(np.where(np.isfinite(self.nominal.value[:n]), self.nominal.value[:n], 0.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            sc = np.where(p0[:, None] > 0, np.clip(np.abs(np.nan_to_num(mu, posinf=0)) / p0[:, None], 0, 10), 0.0)
        mu_s, noise, fac, sens = np.zeros_like(mu), np.zeros_like(mu), sc.copy(), S
        for c, rd in enumerate(rows):
            meter = self.meters[rd.meter or "default"]
            col = np.where(np.isfinite(mu[c]), np.abs(mu[c]), 0.0)
            um = np.asarray(standard_uncertainty(meter, rd.quantity, rd.mode, col), dtype=float)
            nz = np.sqrt(um ** 2 + (0.01 * col * (p0[c] == 0)) ** 2)
            mu_s[c] = _scale(rd, meter, mu[c])
            if rd.quantity == "resistance":
                # log10 scale: the tolerance term is relative, the same under every hypothesis
                r = np.where(np.isfinite(mu[c]), np.maximum(np.abs(mu[c]), 1e-3), np.inf)
                noise[c] = np.where(np.isfinite(r), np.maximum(nz / (r * math.log(10)), 0.002), 0.02)
                fac[c] = np.where(np.isfinite(r), 1.0, 0.0)
                sens[c] = S[c] / (max(p0[c], 1e-3) * math.log(10)) if p0[c] > 0 else 0.0
            else:
                noise[c] = np.maximum(nz, 1e-12)
        return mu_s, noise, fac, sens


def _same(circuit, rd):
    """What a reading measures, so that one written another way is the same reading."""
    if rd.quantity == "resistance" and rd.setup != "lifted":
        plus, minus = circuit.part(rd.part).nodes[:2] if rd.part is not None else (rd.plus, rd.minus)
        return ("resistance", frozenset((plus, minus)))
    if rd.quantity == "diode-test":   # red probe on the first node: the direction counts
        plus, minus = circuit.part(rd.part).nodes[:2] if rd.part is not None else (rd.plus, rd.minus)
        return ("diode-test", plus, minus)
    freq = rd.frequency if rd.frequency != circuit.frequency else None
    if rd.quantity == "voltage":
        return ("voltage", rd.mode, frozenset((rd.plus, rd.minus)), freq)
    return (rd.quantity, rd.mode, rd.part, rd.setup, freq)


def _coincide(a, na, b, weight):
    """True when two readings' predictions agree (or are opposite) under every weighted hypothesis."""
    on = weight > 0
    tol = 0.1 * na[on]
    return bool(np.all(np.abs(a[on] - b[on]) <= tol) or np.all(np.abs(a[on] + b[on]) <= tol))


def _repeats(a, na, b, weight, qa, qb):
    """For each row of ``a``: does it :func:`_coincide` with a row of ``b`` of the same
    quantity (``qa``, ``qb``)?  All pairs at once."""
    out = np.zeros(len(a), dtype=bool)
    if len(a) == 0 or len(b) == 0:
        return out
    on = weight > 0
    A, B, tol = a[:, on], b[:, on], 0.1 * na[:, on]
    same = np.array(qa, dtype=object)[:, None] == np.array(qb, dtype=object)[None, :]
    step = max(1, 2_000_000 // max(B.size, 1))
    for s in range(0, len(a), step):
        x, t = A[s:s + step, None, :], tol[s:s + step, None, :]
        with np.errstate(invalid="ignore"):
            hit = np.all(np.abs(x - B[None]) <= t, axis=2) | np.all(np.abs(x + B[None]) <= t, axis=2)
        out[s:s + step] = np.any(hit & same[s:s + step], axis=1)
    return out


def follows_by_kvl(cands, taken):
    """For each of ``cands``: is it a DC voltage that the ``taken`` DC voltages already give?

    Kirchhoff's voltage law: the voltage between two nodes is the sum of the
    voltages along any path joining them, so once V(a,b) and V(b,c) are read,
    V(a,c) is their sum under every hypothesis (up to the meter's own error
    and loading), and reading it tells nothing new.  The taken readings are
    edges between their probe nodes; a candidate whose probe nodes the edges
    already join follows from them.  AC readings are left alone: a meter
    shows the magnitude, and magnitudes of phasors do not add.

    The Gaussian conditional of :func:`~faultfind.engine.advise.condition_on_taken`
    would find this too if every reading's tolerance spread under a fault
    were the healthy one, but it is rescaled per reading and hypothesis
    (docs/advice.md, step 3), and the rescaled spreads no longer add up
    along a loop: a fuse's drop read after the drops across the fuse and
    the contacts together, and across the contacts alone, was predicted to
    tell a lamp open from healthy by four standard deviations.

    Parameters
    ----------
    cands, taken : sequence of Reading
        ``taken`` with finite values on scale.

    Returns
    -------
    ndarray of bool, shape (len(cands),)
    """
    parent = {}

    def find(n):
        while parent.get(n, n) != n:
            parent[n] = parent.get(parent[n], parent[n])
            n = parent[n]
        return n

    def dc_volts(rd):
        return rd.quantity == "voltage" and rd.mode == "dc" and rd.setup is None \
            and rd.plus is not None and rd.minus is not None

    for rd in taken:
        if dc_volts(rd):
            a, b = find(rd.plus), find(rd.minus)
            if a != b:
                parent[a] = b
    out = np.zeros(len(cands), dtype=bool)
    if parent:
        for c, rd in enumerate(cands):
            out[c] = dc_volts(rd) and rd.plus != rd.minus and find(rd.plus) == find(rd.minus)
    return out


def _undeliverable(supplies, currents):
    """Hypotheses under which a current-limited supply would have to deliver more than its limit.

    Returns a dict: hypothesis index to a list of (source, predicted current).
    """
    out = {}
    for j, p in enumerate(supplies):
        for k in np.flatnonzero(np.abs(np.nan_to_num(currents[j])) > p.current_limit):
            out.setdefault(int(k), []).append((p, float(abs(currents[j][k]))))
    return out


def _limit_note(circuit, kept, probs, drawn):
    notes = []
    for k in np.argsort(-probs)[:6]:
        if probs[k] >= 0.01 and int(k) in drawn:
            for p, amps in drawn[int(k)]:
                notes.append(f"if {_label(circuit, kept[k][0])}, {p.ref} would have to deliver "
                             f"{format_value(amps, 'A')}, above its {format_value(p.current_limit, 'A')} "
                             "limit: the supply would not deliver it (it folds back or trips, or a "
                             "fuse blows), so that case is not counted here")
    return ("; " + "; ".join(notes)) if notes else ""


def _cost(rd, power, costs, circuit):
    q = rd.quantity
    if q in ("resistance", "diode-test"):
        base = costs["lifted"] if rd.setup == "lifted" else costs["resistance"]
        return base + (costs["isolate"] if power == "on" else 0.0)
    base = costs["current"] if q == "current" else costs["voltage"]
    if rd.mode == "ac" and rd.frequency is not None and rd.frequency != circuit.frequency:
        base += costs["frequency"]
    return base + (costs["energize"] if power == "off" else 0.0)


def _live_caution(circuit):
    vac = max([abs(p.value) for p in circuit.parts if p.kind == "voltage-source" and p.waveform == "ac"],
              default=0.0)
    vdc = max([abs(p.value) for p in circuit.parts if p.kind == "voltage-source" and p.waveform == "dc"],
              default=0.0)
    if vac > ELV_AC or vdc > ELV_DC:
        return ("live work above extra-low voltage (50 V AC / 120 V DC, IEC 61140): qualified persons "
                "only, meter and leads rated for the measurement category (IEC 61010-1), PPE, one hand "
                "away; follow local codes and licensed practice")
    return "live circuit: meter and leads rated for the measurement category (IEC 61010-1)"


def _off_caution(rd):
    if rd.quantity == "diode-test":
        return ("power off: isolate, lock out and tag out, verify dead with a proven tester and "
                "discharge capacitors before the diode test")
    return ("isolate, lock out and tag out, verify dead with a proven tester and discharge "
            "capacitors before connecting the ohmmeter")


def _label(circuit, faults):
    if not faults:
        return "healthy"
    parts = []
    for f in faults:
        p = circuit.part(f.ref)
        if f.mode == "drift" and not f.seen:
            parts.append(f"{f.ref} off its value")
        elif f.mode == "drift":
            parts.append(f"{f.ref} drifted (about {format_value(f.value, p.info.unit)})")
        else:
            parts.append(f"{f.ref} {f.mode}")
    return " + ".join(parts)


def _why(circuit, rd, kept, probs, mu, mu_s, sd_s, power, meter=None):
    unit = QUANTITY_UNITS[rd.quantity]
    idx = [i for i in np.argsort(-probs)[:6] if probs[i] > 0]
    best, bd = None, 0.0
    for a in idx:
        for b in idx:
            if a < b:
                d = abs(mu_s[a] - mu_s[b]) / max(sd_s[a], sd_s[b])
                w = d * math.sqrt(probs[a] * probs[b])
                if w > bd:
                    best, bd = (a, b), w
    if best is None:
        return "separates the remaining hypotheses"

    def val(i):
        return reading_text(mu[i], unit, meter, rd.quantity)

    a, b = best
    text = f"if {_label(circuit, kept[a][0])}, it reads {val(a)}; if {_label(circuit, kept[b][0])}, {val(b)}"
    if rd.quantity in ("resistance", "diode-test") and power == "off":
        text += " (the circuit is already isolated: take the power-off readings together now)"
    return text


def suggestion_json(s: Suggestion) -> dict:
    """A suggestion in the readings file's terms, with the keys cli.md fixes plus documented extras."""
    rd = s.reading
    return {"quantity": rd.quantity, "mode": rd.mode, "plus": rd.plus, "minus": rd.minus,
            "part": rd.part, "setup": rd.setup, "frequency": rd.frequency, "power": s.power,
            "score": round(s.score, 6), "gain_bits": round(s.gain, 6), "cost": s.cost,
            "label": rd.label, "why": s.why, "caution": s.caution}
