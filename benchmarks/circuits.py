"""Random but realistic circuits for the benchmarks, and the readings a technician takes.

:func:`random_circuit` draws a circuit of 5 to 60 parts the way boards met in
the field are built: a supply (a DC supply, sometimes behind a fuse or a
closed switch; for an AC circuit a mains transformer winding or a signal
generator with its output resistor), then blocks hung off the live nodes:
dividers, resistor chains and ladders, sensor bridges, loads behind a series
resistor, solenoid coils, RC / CR / RL / RLC sections, an op-amp gain stage
(non-inverting or inverting) and a loop-powered 4-20 mA transmitter with its
sense resistor.  Values are standard values: resistors E24 at 1 % or E12 / E24
at 5 %, capacitors E12 at 10 % or E6 at 20 %, inductors E6 at 10-20 % with a
winding resistance (IEC 60063 series, :mod:`faultfind.eseries`).  In an AC
circuit the capacitors and inductors are sized so that their reactance is
within a factor of about three of the resistance beside them at the circuit's
frequency, so that they matter to the readings.

Every circuit is valid in the sense of formats.md: every node has a DC path to
ground and no loop is made only of voltage sources (checked with
:mod:`faultfind.engine.topology` before it is returned).  Beyond that, no part
sits directly across a voltage source or an op-amp output: a single shorted
part never joins two ideal voltage sources, whose faulted network would have
no solution (a real supply would current-limit or blow its fuse).

:func:`technician_readings` picks what a technician would read: most node
voltages to ground (DC where the node carries DC, AC at the circuit's
frequency where it carries AC, and for a signal-generator circuit sometimes a
few at a second frequency), sometimes the drop across one part, a couple of
currents and a couple of in-circuit or lifted-leg resistances.

Everything is drawn from a seeded :class:`numpy.random.Generator`; the same
seed gives the same circuit and readings.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from faultfind.engine.predict import predict
from faultfind.engine.topology import floating_nodes, voltage_loops
from faultfind.errors import InputError
from faultfind.eseries import nearest
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading

__all__ = ["MIN_PARTS", "MAX_PARTS", "random_circuit", "technician_readings", "as_generator"]

MIN_PARTS = 5
MAX_PARTS = 60

GROUND = "0V"

_TITLES = (
    "walk-in cooler controller", "irrigation valve driver", "grain dryer fan board",
    "boiler flame monitor", "car wash pump panel", "greenhouse vent board",
    "cold room alarm unit", "conveyor speed sensor board", "kiln thermocouple amplifier",
    "sluice gate position loop", "bakery oven interlock", "milking parlour pump board",
    "ski lift brake monitor", "ice rink chiller panel", "print room humidifier board",
)

#: Readings whose nominal display is below this are taken as "nothing there"
#: when choosing DC or AC for a node (volts or amperes).
_QUIET = 1e-3


def as_generator(rng, name="rng") -> np.random.Generator:
    """A numpy Generator from ``rng`` (a Generator, an int seed or None)."""
    if isinstance(rng, np.random.Generator):
        return rng
    if rng is None or (isinstance(rng, numbers.Integral) and not isinstance(rng, bool)):
        return np.random.default_rng(rng)
    raise InputError(f"expected a numpy Generator, an int seed or None, got {rng!r}", key=name)


class _Builder:
    """Collects parts; knows the live nodes and the nodes driven by an ideal source."""

    def __init__(self, rng, ac: bool):
        self.rng = rng
        self.ac = ac
        self.parts: list[Part] = []
        self.count: dict[str, int] = {}
        self.n_nodes = 0
        self.stiff = {GROUND}          # ground, voltage-source + nodes, op-amp outputs
        self.live = {"dc": [], "ac": []}
        self.frequency = None

    # ------------------------------------------------------------ helpers
    def ref(self, prefix):
        self.count[prefix] = self.count.get(prefix, 0) + 1
        return f"{prefix}{self.count[prefix]}"

    def node(self):
        self.n_nodes += 1
        return f"TP{self.n_nodes}"

    def logu(self, lo, hi):
        return float(math.exp(self.rng.uniform(math.log(lo), math.log(hi))))

    def add(self, kind, prefix, nodes, value=None, tol=(0.0, 0.0), label="", **kw):
        if kind not in ("voltage-source", "opamp"):
            # a part across two ideal sources (or one and ground) would make its short unsolvable
            if nodes[0] in self.stiff and nodes[1] in self.stiff:
                raise RuntimeError(f"generator bug: {kind} across {nodes}")
        p = Part(self.ref(prefix), kind, tuple(nodes), value, tol[0], tol[1], label=label, **kw)
        self.parts.append(p)
        return p

    def resistor(self, a, b, lo, hi, label=""):
        if self.rng.random() < 0.5:
            tol, series = 0.01, "E24"
        else:
            tol, series = 0.05, ("E12" if self.rng.random() < 0.5 else "E24")
        return self.add("resistor", "R", (a, b), nearest(self.logu(lo, hi), series), (tol, tol), label)

    def capacitor(self, a, b, reactance_of, label=""):
        """A capacitor whose reactance at the circuit frequency is near ``reactance_of`` ohms."""
        f = self.frequency or 1000.0
        x = reactance_of * 10 ** self.rng.uniform(-0.5, 0.5)
        tol, series = (0.10, "E12") if self.rng.random() < 0.5 else (0.20, "E6")
        value = nearest(1.0 / (2 * math.pi * f * x), series)
        return self.add("capacitor", "C", (a, b), value, (tol, tol), label)

    def inductor(self, a, b, reactance_of, label=""):
        f = self.frequency or 50.0
        x = reactance_of * 10 ** self.rng.uniform(-0.5, 0.5)
        tol = 0.10 if self.rng.random() < 0.5 else 0.20
        value = nearest(x / (2 * math.pi * f), "E6")
        # winding resistance: a quality factor of about 3 to 50 at the frequency
        rw = float(f"{2 * math.pi * f * value / self.logu(3.0, 50.0):.2g}")
        return self.add("inductor", "L", (a, b), value, (tol, tol), label, resistance=rw)

    def level(self, domain):
        """Impedance level (ohms) of a block: low on mains, kilohms on signals."""
        if domain == "ac" and self.frequency is not None and self.frequency <= 60:
            return self.logu(22.0, 1000.0)
        return self.logu(1e3, 47e3)

    # ------------------------------------------------------------- blocks
    # Each block hangs off the live node ``a``; its first part is in series
    # from ``a`` so that no single part is across a stiff node and ground.
    def divider(self, a, domain):
        r = self.level(domain)
        m = self.node()
        self.resistor(a, m, r / 3, r * 3, "divider top")
        self.resistor(m, GROUND, r / 3, r * 3, "divider bottom")
        return [m]

    def chain(self, a, domain):
        k = int(self.rng.integers(3, 6))
        r = self.level(domain)
        nodes = [a] + [self.node() for _ in range(k - 1)] + [GROUND]
        for i in range(k):
            self.resistor(nodes[i], nodes[i + 1], r / 3, r * 3, "chain")
        return nodes[1:-1]

    def ladder(self, a, domain):
        k = int(self.rng.integers(2, 4))
        r = self.level(domain)
        out, prev = [], a
        for _ in range(k):
            m = self.node()
            self.resistor(prev, m, r / 2, r * 2, "ladder series")
            self.resistor(m, GROUND, r, r * 4, "ladder shunt")
            out.append(m)
            prev = m
        return out

    def bridge(self, a, domain):
        r = self.level(domain)
        p, q = self.node(), self.node()
        self.resistor(a, p, r / 1.5, r * 1.5, "bridge arm")
        self.resistor(p, GROUND, r / 1.5, r * 1.5, "bridge arm")
        self.resistor(a, q, r / 1.5, r * 1.5, "bridge arm")
        self.resistor(q, GROUND, r / 1.5, r * 1.5, "sensor arm")
        if self.rng.random() < 0.5:
            self.resistor(p, q, r * 3, r * 30, "bridge load")
        return [p, q]

    def load(self, a, domain):
        low = domain == "dc" or (self.frequency or 1e3) <= 60
        rl = self.logu(47.0, 4.7e3) if low else self.level(domain)
        if a not in self.stiff and self.rng.random() < 0.4:
            self.resistor(a, GROUND, rl / 2, rl * 2, "load")
            return []
        m = self.node()
        self.resistor(a, m, rl / 20, rl / 2, "series resistor")
        self.resistor(m, GROUND, rl / 2, rl * 2, "load")
        return [m]

    def coil(self, a, domain):
        m = self.node()
        r = self.logu(10.0, 470.0)
        self.resistor(a, m, r / 10, r, "coil series resistor")
        self.inductor(m, GROUND, r * 3, "solenoid coil")
        return [m]

    def rc(self, a, domain):
        r = self.level(domain)
        m = self.node()
        rr = self.resistor(a, m, r / 2, r * 2, "filter resistor")
        self.capacitor(m, GROUND, rr.value, "filter capacitor")
        if self.rng.random() < 0.5:
            self.resistor(m, GROUND, r * 2, r * 10, "bleed")
        return [m]

    def cr(self, a, domain):
        r = self.level(domain)
        m = self.node()
        rr_value = nearest(self.logu(r / 2, r * 2), "E24")
        self.capacitor(a, m, rr_value, "coupling capacitor")
        self.add("resistor", "R", (m, GROUND), rr_value, (0.05, 0.05), "input resistor")
        return [m]

    def rl(self, a, domain):
        r = self.level(domain)
        m = self.node()
        self.inductor(a, m, r, "series choke")
        self.resistor(m, GROUND, r / 2, r * 2, "load")
        return [m]

    def rlc(self, a, domain):
        r = self.level(domain)
        m, n = self.node(), self.node()
        self.resistor(a, m, r / 3, r, "damping resistor")
        self.inductor(m, n, r, "filter choke")
        self.capacitor(n, GROUND, r, "filter capacitor")
        self.resistor(n, GROUND, r, r * 4, "load")
        return [m, n]

    def opamp(self, a, domain):
        r = self.logu(2.2e3, 22e3)
        gain = self.logu(1.5, 10.0)
        inp, inn, out = self.node(), self.node(), self.node()
        if self.rng.random() < 0.5:  # non-inverting, input from a divider
            self.resistor(a, inp, r, 4 * r, "input divider")
            self.resistor(inp, GROUND, r / 4, r, "input divider")
            rg = self.resistor(inn, GROUND, r / 2, r * 2, "gain resistor")
            self.resistor(out, inn, rg.value * (gain - 1), rg.value * (gain - 1) * 1.2, "feedback")
        else:  # inverting
            ri = self.resistor(a, inn, r, r * 3, "input resistor")
            self.resistor(inn, out, ri.value / gain, ri.value / gain * 1.2, "feedback")
            self.resistor(inp, GROUND, r, r * 3, "bias resistor")
        self.add("opamp", "U", (inp, inn, out), label="gain stage")
        self.stiff.add(out)
        q = self.node()
        self.resistor(out, q, 47.0, 470.0, "output resistor")
        self.resistor(q, GROUND, r, r * 10, "load input")
        return [out, q]

    def transmitter(self, a, domain):
        """A loop-powered 4-20 mA transmitter from ``a`` into a sense resistor."""
        s, t = self.node(), self.node()
        ma = self.rng.uniform(4e-3, 20e-3)
        self.add("current-source", "TX", (s, a), float(f"{ma:.3g}"), (0.02, 0.02),
                 "4-20 mA transmitter")
        self.resistor(s, GROUND, 100.0, 270.0, "loop sense resistor")
        self.resistor(s, t, 1e3, 10e3, "input filter")
        self.resistor(t, GROUND, 47e3, 220e3, "ADC input")
        return [s, t]

    def one(self, a, domain):
        """A single resistor: to ground from a soft node, else between two live nodes."""
        if a not in self.stiff:
            self.resistor(a, GROUND, 4.7e3, 100e3, "bleed")
            return []
        soft = [n for n in self.live[domain] if n not in self.stiff]
        if soft:
            self.resistor(a, soft[int(self.rng.integers(len(soft)))], 10e3, 100e3, "pull-up")
        else:
            m = self.node()
            self.resistor(a, m, 100.0, 10e3, "test point resistor")
            return [m]
        return []

    # ------------------------------------------------------------- supply
    def dc_supply(self):
        volts = float(self.rng.choice([5.0, 9.0, 12.0, 15.0, 24.0, 48.0]))
        rail = f"+{volts:g}V"
        tol = float(self.rng.choice([0.01, 0.02, 0.05]))
        fused = self.rng.random() < 0.5
        switched = self.rng.random() < 0.3
        node = rail + "_IN" if (fused or switched) else rail
        off = "short" if self.rng.random() < 0.2 else "open"
        self.add("voltage-source", "PS", (node, GROUND), volts, (tol, tol), "DC supply",
                 off_state=off)
        self.stiff.add(node)
        if fused:
            nxt = rail + "_F" if switched else rail
            self.add("fuse", "F", (node, nxt), float(self.rng.choice([0.02, 0.05, 0.1])),
                     (0.5, 0.5), "supply fuse")
            node = nxt
        if switched:
            self.add("switch", "S", (node, rail), 0.05, (0.5, 0.5), "supply switch")
        self.live["dc"].append(rail)

    def ac_supply(self):
        if self.rng.random() < 0.5:  # mains transformer secondary
            self.frequency = float(self.rng.choice([50.0, 60.0]))
            volts = float(self.rng.choice([6.0, 12.0, 24.0]))
            node = f"{volts:g}VAC"
            self.add("voltage-source", "TR", (node, GROUND), volts, (0.05, 0.05),
                     "transformer secondary", waveform="ac", off_state="short")
            self.stiff.add(node)
            if self.rng.random() < 0.5:
                out = node + "_F"
                self.add("fuse", "F", (node, out), 0.1, (0.5, 0.5), "secondary fuse")
                node = out
            self.live["ac"].append(node)
        else:  # signal generator with its 50 ohm output resistor
            self.frequency = float(self.rng.choice([100.0, 300.0, 1e3, 3e3, 10e3]))
            volts = float(self.rng.choice([0.5, 1.0, 2.0]))
            self.add("voltage-source", "SG", ("GEN", GROUND), volts, (0.02, 0.02),
                     "signal generator", waveform="ac")
            self.stiff.add("GEN")
            self.add("resistor", "R", ("GEN", "SIG"), 50.0, (0.01, 0.01), "generator output")
            self.live["ac"].append("SIG")


# (block, weight, most parts it adds)
_DC_BLOCKS = (("divider", 3, 2), ("chain", 2, 5), ("ladder", 1, 6), ("bridge", 1, 5),
              ("load", 3, 2), ("coil", 1, 2), ("rc", 1, 3), ("opamp", 1, 7),
              ("transmitter", 1, 4))
_AC_BLOCKS = (("divider", 2, 2), ("chain", 1, 5), ("bridge", 1, 5), ("load", 1, 2),
              ("rc", 3, 3), ("cr", 3, 2), ("rl", 2, 2), ("rlc", 2, 4), ("opamp", 1, 7))


def random_circuit(rng=None, n_parts=None, ac=None) -> Circuit:
    """A random, realistic, valid circuit.

    Parameters
    ----------
    rng : numpy.random.Generator, int or None
        Source of randomness (an int seeds a new Generator).
    n_parts : int, optional
        Number of parts, 5 to 60 (default: drawn uniformly); the circuit has
        exactly this many (op-amps included).
    ac : bool, optional
        True for a circuit with an AC source (and a frequency), False for a DC
        one; default: AC with probability 0.4.

    Returns
    -------
    Circuit
        Ground ``"0V"``; parts with nominal values and tolerances.

    Raises
    ------
    InputError
        ``rng``, ``n_parts`` or ``ac`` of the wrong type or out of range.
    """
    rng = as_generator(rng)
    if n_parts is not None:
        if isinstance(n_parts, bool) or not isinstance(n_parts, numbers.Integral):
            raise InputError(f"expected an integer, got {n_parts!r}", key="n_parts")
        if not MIN_PARTS <= n_parts <= MAX_PARTS:
            raise InputError(f"must be {MIN_PARTS} to {MAX_PARTS}, got {n_parts}", key="n_parts")
    if ac is not None and not isinstance(ac, bool):
        raise InputError(f"expected True, False or None, got {ac!r}", key="ac")
    target = int(rng.integers(MIN_PARTS, MAX_PARTS + 1)) if n_parts is None else int(n_parts)
    if ac is None:
        ac = bool(rng.random() < 0.4)
    b = _Builder(rng, ac)
    if ac:
        b.ac_supply()
        if target >= 15 and rng.random() < 0.4:  # a DC section on the same board
            b.dc_supply()
    else:
        b.dc_supply()
    while len(b.parts) < target:
        room = target - len(b.parts)
        domain = "ac" if b.live["ac"] and (not b.live["dc"] or rng.random() < 0.7) else "dc"
        table = _AC_BLOCKS if domain == "ac" else _DC_BLOCKS
        if domain == "dc" and ac:
            table = tuple(t for t in table if t[0] != "transmitter")
        fits = [(name, w) for name, w, size in table if size <= room]
        anchors = b.live[domain]
        a = anchors[int(rng.integers(len(anchors)))]
        if not fits:
            new = b.one(a, domain)
        else:
            w = np.array([x[1] for x in fits], dtype=float)
            name = fits[int(rng.choice(len(fits), p=w / w.sum()))][0]
            new = getattr(b, name)(a, domain)
        b.live[domain].extend(new)
    title = f"{_TITLES[int(rng.integers(len(_TITLES)))]} (generated, {len(b.parts)} parts)"
    circuit = Circuit(title, GROUND, tuple(b.parts), frequency=b.frequency,
                      notes="Invented by benchmarks/circuits.py")
    floating = floating_nodes(circuit)
    loops = voltage_loops(circuit)
    if floating or loops:  # a bug of this generator, not of the caller's input
        raise RuntimeError(f"generated an invalid circuit: floating {floating}, loops {loops}")
    return circuit


def _with_frequency(rd: Reading, f):
    return Reading(rd.quantity, rd.mode, rd.plus, rd.minus, rd.part, rd.setup, f, rd.meter,
                   rd.label)


def technician_readings(circuit: Circuit, rng=None, meters=None) -> list[Reading]:
    """The readings a technician would take on ``circuit`` (values empty).

    Parameters
    ----------
    circuit : Circuit
        A valid circuit (as from :func:`random_circuit`).
    rng : numpy.random.Generator, int or None
    meters : dict, optional
        Meter profiles (default: the built-in default meter only).

    Returns
    -------
    list of Reading
        Node voltages to ground at 60-100 % of the nodes (at least three, or
        every node when fewer): DC where the nominal DC voltage is at least
        1 mV, AC at the circuit's frequency where the AC one is (both when
        both), DC when neither; for a signal-generator circuit, with
        probability 0.5, one to three nodes again at a second frequency
        (a third, three times or ten times the first).  With probability 0.4
        the drop across one two-terminal part.  One to three currents (the
        supply's with probability 0.7, then random parts').  One to three
        resistances across random passive parts, in-circuit or (40 %) with a
        leg lifted.

    Raises
    ------
    InputError
        ``circuit`` is not a Circuit or ``rng`` is not usable.
    """
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a Circuit, got {type(circuit).__name__}", key="circuit")
    rng = as_generator(rng)
    meters = meters_with_default(meters)
    g = circuit.ground
    nodes = [n for n in circuit.nodes if n != g]
    k = len(nodes) if len(nodes) <= 3 else max(3, int(round(rng.uniform(0.6, 1.0) * len(nodes))))
    picked = [nodes[i] for i in sorted(rng.choice(len(nodes), size=k, replace=False))]
    has_ac = circuit.has_ac
    two = [p for p in circuit.parts if len(p.nodes) == 2]
    sources = [p for p in circuit.parts if p.is_source]
    passive = [p for p in circuit.parts if p.kind in ("resistor", "fuse", "switch", "inductor")]
    caps = [p for p in circuit.parts if p.kind == "capacitor"]

    # candidates in both modes, to learn which carry a signal
    cand = []
    for n in picked:
        cand.append(Reading("voltage", "dc", n, g))
        if has_ac:
            cand.append(Reading("voltage", "ac", n, g))
    if rng.random() < 0.4:
        p = two[int(rng.integers(len(two)))]
        cand.append(Reading("voltage", "dc", p.nodes[0], p.nodes[1], label=f"across {p.ref}"))
        if has_ac:
            cand.append(Reading("voltage", "ac", p.nodes[0], p.nodes[1], label=f"across {p.ref}"))
    n_cur = int(rng.integers(1, 4))
    cur_parts = []
    if sources and rng.random() < 0.7:
        cur_parts.append(sources[int(rng.integers(len(sources)))])
    others = [p for p in circuit.parts if p.kind != "opamp" and p not in cur_parts]
    for i in rng.permutation(len(others))[: max(0, n_cur - len(cur_parts))]:
        cur_parts.append(others[int(i)])
    for p in cur_parts:
        cand.append(Reading("current", "dc", part=p.ref))
        if has_ac:
            cand.append(Reading("current", "ac", part=p.ref))
    nominal = predict(circuit, cand, meters).value
    out = []
    i = 0
    while i < len(cand):
        rd = cand[i]
        if has_ac:
            dc, acr = cand[i], cand[i + 1]
            vd, va = nominal[i], nominal[i + 1]
            use = [r for r, v in ((dc, vd), (acr, va)) if abs(v) >= _QUIET] or [dc]
            out.extend(use)
            i += 2
        else:
            out.append(rd)
            i += 1
    if has_ac and circuit.frequency > 60 and rng.random() < 0.5:
        f2 = circuit.frequency * float(rng.choice([1 / 3, 3.0, 10.0]))
        ac_nodes = [r for r in out if r.quantity == "voltage" and r.mode == "ac"]
        for j in rng.permutation(len(ac_nodes))[: int(rng.integers(1, 4))]:
            out.append(_with_frequency(ac_nodes[int(j)], f2))
    pool = passive + (caps if rng.random() < 0.3 else [])
    for j in rng.permutation(len(pool))[: int(rng.integers(1, 4))]:
        p = pool[int(j)]
        setup = "lifted" if rng.random() < 0.4 else "in-circuit"
        out.append(Reading("resistance", None, part=p.ref, setup=setup))
    return out
