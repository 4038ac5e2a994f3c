"""The data faultfind works on: parts, circuits, readings and meter profiles.

Plain frozen dataclasses, no I/O.  Values are SI floats (ohm, farad, henry,
volt, ampere, hertz).  Tolerances are stored as relative fractions below and
above nominal (``tol_low=0.05, tol_high=0.05`` is +/-5 %); an absolute
tolerance in a file (``"±0.2 V"``) is converted when the file is read.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["KindInfo", "KINDS", "Part", "Circuit", "Reading", "Accuracy", "MeterProfile",
           "QUANTITIES", "QUANTITY_UNITS", "MODES", "SETUPS"]


@dataclass(frozen=True)
class KindInfo:
    """What faultfind knows of a part kind.

    Attributes
    ----------
    name : str
        The kind as written in a circuit file.
    nodes : int
        Number of terminals.
    unit : str or None
        SI unit symbol of the value, None for a kind without a value.
    fault_modes : tuple of str
        Fault modes this kind can have (formats.md, kinds table).
    default_tolerance : tuple of float
        (below, above) relative tolerance used when the file gives none.
    default_value : float or None
        Value used when the file gives none (None: the value is required).
    """

    name: str
    nodes: int
    unit: str | None
    fault_modes: tuple[str, ...]
    default_tolerance: tuple[float, float]
    default_value: float | None = None


# Default tolerances: the usual grade of a general-purpose part of each kind
# (common practice, no source): E24 film resistors 5 %, general-purpose
# capacitors and inductors 20 % (E6 grade), regulated supplies 5 %.  Fuse cold
# resistance and switch contact resistance vary widely between makers, hence
# 50 %.  Defaults for fuse and switch values are typical small-signal figures
# (from memory): a few tens of milliohms.
KINDS: dict[str, KindInfo] = {
    k.name: k
    for k in (
        KindInfo("resistor", 2, "Ω", ("open", "short", "drift"), (0.05, 0.05)),
        KindInfo("capacitor", 2, "F", ("open", "short", "drift"), (0.20, 0.20)),
        KindInfo("inductor", 2, "H", ("open", "short", "drift"), (0.20, 0.20)),
        KindInfo("fuse", 2, "Ω", ("open", "drift"), (0.50, 0.50), default_value=0.02),
        KindInfo("switch", 2, "Ω", ("open", "short", "drift"), (0.50, 0.50), default_value=0.05),
        KindInfo("voltage-source", 2, "V", ("drift", "dead"), (0.05, 0.05)),
        KindInfo("current-source", 2, "A", ("drift", "dead"), (0.05, 0.05)),
        KindInfo("opamp", 3, None, (), (0.0, 0.0)),
    )
}

#: Open-loop gain of an op-amp stage whose file gives none: 10^5 (100 dB), the
#: order of a general-purpose op-amp's DC gain (from memory).
DEFAULT_OPAMP_GAIN = 1.0e5

QUANTITIES = ("voltage", "current", "resistance")
#: Display unit of each quantity.
QUANTITY_UNITS = {"voltage": "V", "current": "A", "resistance": "Ω"}
MODES = ("dc", "ac")
SETUPS = ("in-circuit", "lifted")


@dataclass(frozen=True)
class Part:
    """One part as drawn on the schematic.

    Attributes
    ----------
    ref : str
        Reference designator, unique in its circuit.
    kind : str
        A key of :data:`KINDS`.
    nodes : tuple of str
        Node names; for sources ``nodes[0]`` is the + terminal; for an opamp
        (non-inverting input, inverting input, output).
    value : float or None
        Nominal value in SI units (None for an opamp).  For an AC source the
        RMS value.
    tol_low, tol_high : float
        Relative tolerance below and above nominal (fractions, >= 0).
    off_state : str
        Sources: what an ohmmeter sees with power off, "open" or "short".
    waveform : str
        Sources: "dc" or "ac".
    phase : float
        AC sources: phase in degrees.
    state : str
        Switches: "closed" or "open" as drawn.
    resistance : float or None
        Inductors: winding resistance in ohms (None: ideal winding).
    gain : float or None
        Opamps: open-loop gain (None: :data:`DEFAULT_OPAMP_GAIN`).
    current_limit : float or None
        Voltage sources: the most current the supply delivers, in amperes
        (RMS for an AC source); None: no limit known (an ideal source).  A
        fault that would draw more is one the supply would not feed: it folds
        back or trips (docs/circuit-files.md).
    label : str
        Free text shown beside the ref.
    line : int or None
        Line of the part's ``[[part]]`` header in its file, for messages.
    """

    ref: str
    kind: str
    nodes: tuple[str, ...]
    value: float | None = None
    tol_low: float = 0.0
    tol_high: float = 0.0
    off_state: str = "open"
    waveform: str = "dc"
    phase: float = 0.0
    state: str = "closed"
    resistance: float | None = None
    gain: float | None = None
    current_limit: float | None = None
    label: str = ""
    line: int | None = None

    @property
    def info(self) -> KindInfo:
        return KINDS[self.kind]

    @property
    def is_source(self) -> bool:
        return self.kind in ("voltage-source", "current-source")

    @property
    def fault_modes(self) -> tuple[str, ...]:
        """Fault modes this part can have; a switch's depend on its drawn state."""
        if self.kind == "switch":
            return ("open", "drift") if self.state == "closed" else ("short",)
        return self.info.fault_modes


@dataclass(frozen=True)
class Circuit:
    """A circuit as drawn: parts with nominal values, a ground node.

    Attributes
    ----------
    title : str
    ground : str
        Reference node; voltage readings default to it.
    parts : tuple of Part
    frequency : float or None
        Frequency of the AC sources in hertz (None when there are none).
    notes : str
    source : str or None
        File the circuit was read from, for messages.
    """

    title: str
    ground: str
    parts: tuple[Part, ...]
    frequency: float | None = None
    notes: str = ""
    source: str | None = None
    _by_ref: dict = field(default=None, init=False, repr=False, compare=False)
    _nodes: tuple = field(default=None, init=False, repr=False, compare=False)

    def __post_init__(self):
        object.__setattr__(self, "_by_ref", {p.ref: p for p in self.parts})

    @property
    def nodes(self) -> tuple[str, ...]:
        """Every node name, ground first, then in order of first appearance (computed once)."""
        if self._nodes is None:
            seen = {self.ground: None}
            for p in self.parts:
                for n in p.nodes:
                    seen.setdefault(n, None)
            object.__setattr__(self, "_nodes", tuple(seen))
        return self._nodes

    @property
    def fault_parts(self) -> tuple:
        """The parts that have fault modes, in file order (computed once)."""
        if getattr(self, "_fault_parts", None) is None:
            object.__setattr__(self, "_fault_parts", tuple(p for p in self.parts if p.fault_modes))
        return self._fault_parts

    def has_node(self, name: str) -> bool:
        """True when ``name`` is a node of the circuit."""
        if getattr(self, "_node_set", None) is None:
            object.__setattr__(self, "_node_set", frozenset(self.nodes))
        return name in self._node_set

    def part(self, ref: str) -> Part:
        """The part with reference designator ``ref`` (KeyError if absent)."""
        return self._by_ref[ref]

    def has_part(self, ref: str) -> bool:
        return ref in self._by_ref

    @property
    def has_ac(self) -> bool:
        """True when any source has an AC waveform (computed once)."""
        if getattr(self, "_has_ac", None) is None:
            object.__setattr__(self, "_has_ac", any(p.is_source and p.waveform == "ac" for p in self.parts))
        return self._has_ac


@dataclass(frozen=True)
class Reading:
    """One reading as a technician writes it down (a row of a readings file).

    Attributes
    ----------
    quantity : str
        "voltage", "current" or "resistance".
    mode : str or None
        "dc" or "ac"; None for resistance.
    plus, minus : str or None
        Probe nodes (voltage; resistance across nodes).  ``minus`` is already
        resolved to the circuit's ground when the file left it empty.
    part : str or None
        Current: the part whose current is read.  Resistance: read across
        this part's nodes.
    setup : str or None
        Resistance only: "in-circuit" or "lifted".
    frequency : float or None
        AC only: frequency of this reading in Hz (None: the circuit's).
    meter : str or None
        Meter profile name (None: the default profile).
    label : str
    value : float or None
        The display as a number in SI units; None when empty or over range.
    overrange : int
        +1 for ``OL``, -1 for ``-OL``, 0 otherwise.
    raw : str
        The value exactly as written.
    line : int or None
        Line in the readings file, for messages.
    """

    quantity: str
    mode: str | None = "dc"
    plus: str | None = None
    minus: str | None = None
    part: str | None = None
    setup: str | None = None
    frequency: float | None = None
    meter: str | None = None
    label: str = ""
    value: float | None = None
    overrange: int = 0
    raw: str = ""
    line: int | None = None

    def where(self) -> str:
        """Short description of where the probes sit, e.g. ``V(A,0V)`` or ``I(R1)``."""
        if self.quantity == "current":
            return f"I({self.part})"
        sym = "V" if self.quantity == "voltage" else "R"
        if self.part is not None:
            return f"{sym}({self.part}{', lifted' if self.setup == 'lifted' else ''})"
        return f"{sym}({self.plus},{self.minus})"


@dataclass(frozen=True)
class Accuracy:
    """A meter accuracy specification ``±(percent % of reading + counts)``."""

    percent: float
    counts: float


@dataclass(frozen=True)
class MeterProfile:
    """A multimeter as faultfind models it (formats.md section 3).

    The built-in default (``faultfind.io.meters_file.DEFAULT_METER``) is a
    typical 6000-count handheld; see docs/meter-model.md for its sources.
    """

    name: str
    counts: int
    input_resistance: float
    current_shunt: float
    dc_voltage: Accuracy
    ac_voltage: Accuracy
    dc_current: Accuracy
    ac_current: Accuracy
    resistance: Accuracy
    max_resistance: float
    voltage_resolution: float
    current_resolution: float
    resistance_resolution: float

    def accuracy(self, quantity: str, mode: str | None) -> Accuracy:
        """The accuracy specification for a quantity and mode."""
        if quantity == "resistance":
            return self.resistance
        return getattr(self, f"{mode or 'dc'}_{quantity}")

    def finest_resolution(self, quantity: str) -> float:
        return getattr(self, f"{quantity}_resolution")
