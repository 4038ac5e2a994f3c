"""A reading is "against" a finding by the finding's own tolerance spread.

The board (choke_open/) is an invented sensor feed: V1 12 V, R4 10 k from
SIG to TP2, R5 27 k from TP2 to 0V, the choke L1 (170 ohm winding) from TP2
to TP4 and the load R7 5k6 from TP4 to 0V.  With L1 open, the resistance
read across it with the supply off (open when off) is the rest of the
network: R5 + R7 = 32.6 kOhm (resistors in series, Ohm's law).  Healthy it
is 170 ohm || (R5 + R7), spread only by the winding.  A board whose R5 and
R7 both sit 4.5 % high (inside their 5 % tolerance) reads 34.07 kOhm: the
healthy spread rescaled to the open's prediction calls that reading far off
and the finding was reported "inconsistent"; by the spread of the circuit
with L1 open (R5's and R7's tolerances) it fits.  A reading 38 % high is
beyond both tolerances and stays against the finding.

The second board (loop_sense_open/) has a current source beside the open
part: there the leading part's other modes must be scored on the same exact
terms as the leader (see the test's docstring).
"""

from __future__ import annotations

from pathlib import Path

from numpy.testing import assert_allclose

from faultfind.diagnose import diagnose
from faultfind.io.circuit_file import load_circuit
from faultfind.io.meters_file import meters_with_default
from faultfind.io.readings_file import load_readings, parse_readings

HERE = Path(__file__).resolve().parent / "choke_open"
METERS = meters_with_default(None)


def _run(text=None):
    circuit = load_circuit(HERE / "circuit.toml")
    path = HERE / "readings.csv"
    readings = (load_readings(path, circuit, METERS) if text is None
                else parse_readings(text, str(path), circuit, METERS))
    return diagnose(circuit, readings, METERS, advise=False)


def test_open_choke_read_within_the_other_parts_tolerance_is_a_finding():
    d = _run()
    top = d.hypotheses[0]
    assert [(f.ref, f.mode) for f in top.faults] == [("L1", "open")]
    # R5 + R7 in series once L1 is open (Ohm's law); nominal values
    assert_allclose(top.predicted[3], 27e3 + 5.6e3, rtol=1e-6)
    assert_allclose(34.07e3 / (27e3 + 5.6e3) - 1, 0.045, atol=1e-3)   # inside 5 % on both
    assert d.verdict == "fault", d.explanations[0]
    assert not [line for line in d.explanations[0] if line.startswith("against:")]


def test_reading_beyond_every_tolerance_is_still_against_the_finding():
    text = (HERE / "readings.csv").read_text(encoding="utf-8").replace("34.07k", "45k")
    d = _run(text)
    assert [(f.ref, f.mode) for f in d.hypotheses[0].faults] == [("L1", "open")]
    assert any(line.startswith("against: R(L1)") for line in d.explanations[0])
    assert d.verdict == "inconsistent"


# ---------------------------------------------------------------- the leader's other modes

LOOP = Path(__file__).resolve().parent / "loop_sense_open"


def test_open_beside_a_current_source_is_scored_on_equal_terms_with_its_drift():
    """TX1 drives 5 mA into the sense resistor R8 (240 ohm).  With R8 open the
    current goes through R9 into R13 || (R11 + R12): TP5 reads
    5 mA x (6k2 + 4k7 || 11k3) = 47.6 V (Ohm's law; the 10 Mohm meter takes
    0.1 % of it), set by R9's and R13's 5 % tolerances where the healthy
    node (1.2 V across R8) is set by R8's 1 %.  The board here has R9 and R13
    4 % low and TX1 1.5 % low (readings worked out by hand the same way).
    Scored on the healthy spread the open looked 7 standard deviations off
    and R8 "drifted to 185 kOhm" took 100 %; scored like its drift, on the
    spread of the circuit with R8 open, the open is the finding."""
    circuit = load_circuit(LOOP / "circuit.toml")
    readings = load_readings(LOOP / "readings.csv", circuit, METERS)
    d = diagnose(circuit, readings, METERS, advise=False)
    top = d.hypotheses[0]
    assert [(f.ref, f.mode) for f in top.faults] == [("R8", "open")]
    r9, z6, meter = 6200.0, 1.0 / (1 / 4700.0 + 1 / 11300.0), 10e6
    assert_allclose(top.predicted[0], 5e-3 * (r9 + z6) * meter / (meter + r9 + z6), rtol=2e-3)
    assert top.exact and top.chi2 < 7.81     # chi-square 95 % point, 3 degrees of freedom (tables)
    assert d.verdict == "fault"
