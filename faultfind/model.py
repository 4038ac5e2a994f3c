"""The data faultfind works on: parts, circuits, readings and meter profiles.

Plain frozen dataclasses, no I/O.  Values are SI floats (ohm, farad, henry,
volt, ampere, hertz).  Tolerances are stored as relative fractions below and
above nominal (``tol_low=0.05, tol_high=0.05`` is +/-5 %); an absolute
tolerance in a file (``"±0.2 V"``) is converted when the file is read.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["POWER_OFF_QUANTITIES", "power_for", "fault_mode_name", "KindInfo", "KINDS", "SEMICONDUCTORS", "JUNCTION_DEFAULTS", "TRANSISTOR_DEFAULTS",
           "Part", "Circuit", "Reading", "Accuracy", "MeterProfile",
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
        # Semiconductors (formats.md section 4).  The value of a diode or LED
        # is its forward voltage at ``test_current``, of a zener its reverse
        # breakdown voltage; transistors have no value.  Tolerances: the
        # part-to-part spread of forward voltage at a fixed current is of the
        # order of +/-10 % for small-signal diodes and LEDs (common practice,
        # no source); a zener's letter C grade is +/-5 % (the BZX55/BZX79
        # "C" suffix, from memory).
        KindInfo("diode", 2, "V", ("open", "short", "drift", "leaky"), (0.10, 0.10),
                 default_value=0.65),
        KindInfo("led", 2, "V", ("open", "short", "drift"), (0.10, 0.10), default_value=2.0),
        KindInfo("zener", 2, "V", ("open", "short", "drift"), (0.05, 0.05)),
        KindInfo("npn", 3, None, ("open", "short", "base-emitter-open", "base-emitter-short"),
                 (0.0, 0.0)),
        KindInfo("pnp", 3, None, ("open", "short", "base-emitter-open", "base-emitter-short"),
                 (0.0, 0.0)),
    )
}

#: The kinds with a junction: they make a circuit nonlinear.
SEMICONDUCTORS = frozenset({"diode", "led", "zener", "npn", "pnp"})

#: Defaults of the two-terminal junction kinds when the file gives none.
#: ``test_current`` is the current at which ``value`` holds (formats.md
#: section 4 fixes 1 mA, 10 mA and 5 mA).  Emission coefficients (from
#: memory): small-signal silicon diodes about 1.7 to 2 (1N4148 models use
#: about 1.9), LEDs about 2; a zener's breakdown is sharp (n = 1), its
#: dynamic resistance comes from ``series_resistance``.  A zener's forward
#: voltage holds at its ``test_current``.  A zener's value has no default.
JUNCTION_DEFAULTS = {
    "diode": {"test_current": 1e-3, "ideality": 1.8, "series_resistance": 0.0},
    "led": {"test_current": 10e-3, "ideality": 2.0, "series_resistance": 0.0},
    "zener": {"test_current": 5e-3, "ideality": 1.0, "series_resistance": 0.0,
              "forward_voltage": 0.7},
}

#: Defaults of the transistor kinds: DC current gain 100 and a base-emitter
#: voltage of 0.65 V at 1 mA collector current, the order of a small-signal
#: silicon transistor such as a 2N3904 / BC547 (from memory).
TRANSISTOR_DEFAULTS = {"gain": 100.0, "vbe": 0.65}

#: Open-loop gain of an op-amp stage whose file gives none: 10^5 (100 dB), the
#: order of a general-purpose op-amp's DC gain (from memory).
DEFAULT_OPAMP_GAIN = 1.0e5

QUANTITIES = ("voltage", "current", "resistance", "diode-test")
#: Display unit of each quantity.  A diode-test reading displays the voltage
#: the meter's test current develops (formats.md section 4).
QUANTITY_UNITS = {"voltage": "V", "current": "A", "resistance": "Ω", "diode-test": "V"}
#: Quantities read with the circuit isolated (power off): an ohmmeter and the
#: diode test drive their own test current and must not meet a live circuit.
POWER_OFF_QUANTITIES = frozenset({"resistance", "diode-test"})
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
        Transistors: DC current gain (None: :data:`TRANSISTOR_DEFAULTS`).
    test_current : float or None
        Diodes, LEDs, zeners: the current at which ``value`` holds (None:
        the kind's default, :data:`JUNCTION_DEFAULTS`).
    ideality : float or None
        Diodes, LEDs, zeners: emission coefficient n (None: the default).
    series_resistance : float or None
        Diodes, LEDs, zeners: ohmic resistance in series with the junction.
    reverse_leakage : float or None
        Diodes, LEDs: reverse current at 1 V reverse bias, in amperes, as a
        resistance-like leak across the junction (None: none modelled).
    forward_voltage : float or None
        Zeners: forward voltage at ``test_current`` (None: the default).
    vbe : float or None
        Transistors: base-emitter voltage at 1 mA collector current (None:
        :data:`TRANSISTOR_DEFAULTS`).  ``gain`` holds a transistor's DC
        current gain.
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
    test_current: float | None = None
    ideality: float | None = None
    series_resistance: float | None = None
    reverse_leakage: float | None = None
    forward_voltage: float | None = None
    vbe: float | None = None
    label: str = ""
    line: int | None = None

    @property
    def info(self) -> KindInfo:
        return KINDS[self.kind]

    @property
    def is_semiconductor(self) -> bool:
        return self.kind in SEMICONDUCTORS

    def junction(self, key: str) -> float:
        """A junction key of this part with the kind's default filled in.

        ``key`` is one of ``test_current``, ``ideality``, ``series_resistance``,
        ``forward_voltage`` (zener), ``gain``, ``vbe`` (transistors).
        """
        v = getattr(self, key)
        if v is not None:
            return v
        if self.kind in JUNCTION_DEFAULTS and key in JUNCTION_DEFAULTS[self.kind]:
            return JUNCTION_DEFAULTS[self.kind][key]
        if self.kind in ("npn", "pnp") and key in TRANSISTOR_DEFAULTS:
            return TRANSISTOR_DEFAULTS[key]
        raise KeyError(f"{self.kind} has no junction key {key!r}")

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
    def is_nonlinear(self) -> bool:
        """True when any part is a semiconductor (computed once)."""
        if getattr(self, "_nonlinear", None) is None:
            object.__setattr__(self, "_nonlinear", any(p.kind in SEMICONDUCTORS for p in self.parts))
        return self._nonlinear

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
        "voltage", "current", "resistance" or "diode-test".
    mode : str or None
        "dc" or "ac"; None for resistance and diode-test (power off).
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
        sym = {"voltage": "V", "diode-test": "D"}.get(self.quantity, "R")
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

    The diode-test keys (formats.md section 4): ``diode_test_current`` is the
    meter's test current, ``diode_test_voltage`` its open-circuit voltage,
    ``diode_test_max`` the top of the display (above it: OL),
    ``diode_test`` the accuracy; ``diode_test_resolution`` (a key of this
    project's) the display step.  Defaults (from memory, a typical handheld):
    1 mA, 3 V, 2 V, 1 % + 3 counts, 1 mV.
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
    diode_test_current: float = 1e-3
    diode_test_voltage: float = 3.0
    diode_test_max: float = 2.0
    diode_test: Accuracy = Accuracy(1.0, 3.0)
    diode_test_resolution: float = 1e-3

    def accuracy(self, quantity: str, mode: str | None) -> Accuracy:
        """The accuracy specification for a quantity and mode."""
        if quantity == "resistance":
            return self.resistance
        if quantity == "diode-test":
            return self.diode_test
        return getattr(self, f"{mode or 'dc'}_{quantity}")

    def finest_resolution(self, quantity: str) -> float:
        return getattr(self, f"{quantity.replace('-', '_')}_resolution")


def power_for(quantity: str) -> str:
    """``"off"`` (circuit isolated) for a resistance reading or a diode test, else ``"on"``.

    Parameters
    ----------
    quantity : str
        One of :data:`QUANTITIES`.
    """
    return "off" if quantity in POWER_OFF_QUANTITIES else "on"


def fault_mode_name(text) -> str:
    """A fault mode as the user wrote it, in faultfind's spelling.

    Case, surrounding space and the separator are free: ``"Base-emitter
    open"`` (formats.md section 4's table), ``base_emitter_open`` and
    ``base-emitter-open`` are one mode, written ``base-emitter-open`` in JSON
    and in the tables.

    Parameters
    ----------
    text : str or None
        The mode as written; None is ``""`` (no mode given).
    """
    return "-".join(str(text or "").strip().lower().replace("_", " ").split())
