"""``faultfind expect CIRCUIT [--at READINGS] [--meters FILE] [--json]``."""

from __future__ import annotations

from ..expect import expect
from ..io.circuit_file import load_circuit
from ..io.meters_file import load_meters, meters_with_default
from ..io.readings_file import load_readings
from ..shown import reading_text
from ..units import format_value
from .output import describe_reading, emit_json, reading_json, table

SAFETY_OFF = ("power off: isolate, lock out and tag out, verify dead with a proven tester "
              "and discharge capacitors before any resistance reading.")
SAFETY_ON = ("power on: live work. Use a meter and leads rated for the measurement category "
             "and voltage (IEC 61010-1), follow local codes and licensed practice.")
SAFETY_CURRENT = ("a current reading puts the meter in series: break the circuit with power off "
                  "first, or use a clamp meter.")


def add_parser(sub):
    p = sub.add_parser("expect", help="what a healthy circuit should read",
                       description="What a healthy circuit should read: expected meter displays "
                                   "with ~95 % tolerance bands, including the meter's loading.")
    p.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML)")
    p.add_argument("--at", metavar="READINGS",
                   help="readings file (CSV): expect exactly these readings, in row order")
    p.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML)")
    p.add_argument("--json", action="store_true", help="print one JSON document")
    p.set_defaults(run=run)


def _value(x, unit, digits=4, meter=None, quantity=None):
    if x is None:
        return "—"
    return reading_text(x, unit, meter, quantity, digits=digits)


def run(args) -> int:
    circuit = load_circuit(args.circuit)
    meters = meters_with_default(load_meters(args.meters) if args.meters else None)
    readings = None
    if args.at:
        readings = load_readings(args.at, circuit, meters, require_values=False)
    results = expect(circuit, readings, meters)
    if args.json:
        emit_json({"readings": [
            dict(reading_json(e.reading, e.unit), expected=e.expected, low=e.low, high=e.high)
            for e in results]})
        return 0

    m = meters["default"]
    print(f"Expected readings on a healthy circuit: {circuit.title or args.circuit}")
    print(f"Default meter: {m.counts} counts, {format_value(m.input_resistance, 'Ω')} input, "
          f"{format_value(m.current_shunt, 'Ω')} current shunt (its loading is included).")
    print("Band: where ~95 % of healthy boards read, from the parts' tolerances "
          "(meter accuracy not included).")
    if args.at:
        sections = [("Readings from " + args.at, results)]
    else:
        sections = [
            ("Node voltages to " + circuit.ground + ", DC", [e for e in results if e.reading.quantity == "voltage" and e.reading.mode == "dc"]),
            ("Node voltages to " + circuit.ground + ", AC (RMS)", [e for e in results if e.reading.quantity == "voltage" and e.reading.mode == "ac"]),
            ("Part currents, DC (+ from the part's first node to its second; sources: delivered)", [e for e in results if e.reading.quantity == "current" and e.reading.mode == "dc"]),
            ("Part currents, AC (RMS)", [e for e in results if e.reading.quantity == "current" and e.reading.mode == "ac"]),
            ("In-circuit resistance across each part, power off", [e for e in results if e.reading.quantity == "resistance"]),
            ("Diode tests, power off (red probe on the anode; on a transistor's base for an npn)",
             [e for e in results if e.reading.quantity == "diode-test"]),
        ]
    n = 0
    for title, items in sections:
        if not items:
            continue
        print()
        print(title)
        rows = []
        for e in items:
            n += 1
            rd = e.reading
            if e.expected is None:
                exp, band = "OL", ("reversed or open junction" if rd.quantity == "diode-test"
                                   else "no path between the probes")
            else:
                meter = meters.get(rd.meter or "default", m)
                exp = _value(e.expected, e.unit, 4, meter, rd.quantity)
                band = (f"{_value(e.low, e.unit, 3, meter, rd.quantity)} .. "
                        f"{_value(e.high, e.unit, 3, meter, rd.quantity)}")
                if e.overrange:
                    exp += " (OL)"
            rows.append([str(n), describe_reading(rd), e.power, exp, band, rd.label])
        table(["#", "reading", "power", "expected", "healthy band", "label"], rows,
              aligns=[">", "<", "<", ">", "<", "<"])
    powers = {e.power for e in results}
    print()
    print("Safety:")
    if "on" in powers:
        print("  " + SAFETY_ON)
    if any(e.reading.quantity == "current" for e in results):
        print("  " + SAFETY_CURRENT)
    if "off" in powers:
        print("  " + SAFETY_OFF)
    return 0
