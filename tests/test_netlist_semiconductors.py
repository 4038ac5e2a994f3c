"""SPICE ``D`` and ``Q`` elements with their ``.model`` cards imported as semiconductors.

Outside reference: ngspice in batch mode (needed; .ci/run installs it, these
tests are not skipped).  Each model card is run in ngspice at 25 °C
(``.options temp=25 tnom=25``) with its test current forced through the
junction by an ideal current source, and the voltage ngspice solves for is
the forward voltage (or zener voltage, or base-emitter voltage at 1 mA with
the collector held at the base's voltage) that the import must write.  The
import uses formats.md's 25.69 mV for the thermal voltage, ngspice kT/q at
298.15 K (25.6926 mV): the difference is 1e-4 of the junction voltage, so
the comparisons allow 3e-4 (well inside the 0.2 % the engine is held to).
The boards are invented.
"""

from __future__ import annotations

import re
import subprocess

import pytest
from numpy.testing import assert_allclose

from faultfind.io.circuit_file import parse_circuit
from faultfind.io.circuit_writer import circuit_text
from faultfind.io.netlist import parse_netlist
from faultfind.io.netlist_models import ZENER_BV_AT_MOST

_ASSIGN = re.compile(r"^\s*(\S+)\s*=\s*(\S+)\s*$")
REL = 3e-4


def ngspice_op(deck_lines, tmp_path) -> dict:
    """Node voltages of ngspice's operating point (ngspice -b), lower-case names."""
    # ngspice knows no type= on a card (another simulator's extension): dropped;
    # parentheses around the parameters are written for it; a second source keeps
    # 'print all' printing one line per vector
    deck_lines = [_for_ngspice(ln) for ln in deck_lines] + ["Vspare spare 0 1",
                                                            "Rspare spare 0 1k"]
    deck = "\n".join(["semiconductor check", ".options temp=25 tnom=25", *deck_lines,
                      ".control", "set numdgt=12", "op", "print all", "echo @@done", ".endc",
                      ".end", ""])
    path = tmp_path / "deck.cir"
    path.write_text(deck, encoding="utf-8")
    run = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)
    assert "@@done" in run.stdout, run.stdout + run.stderr
    out = {}
    for line in run.stdout.splitlines():
        m = _ASSIGN.match(line)
        if m:
            try:
                out[m.group(1).lower()] = float(m.group(2))
            except ValueError:
                pass
    return out


def _for_ngspice(line):
    if not line.lower().startswith(".model"):
        return line
    line = re.sub(r"\s*type=\w+", "", line)
    name, kind, *params = line.replace("(", " ").replace(")", " ").split()[1:]
    return f".model {name} {kind}({' '.join(params)})"


def imported(lines):
    got = parse_netlist("\n".join(["vent board (invented)", "V1 vcc 0 12", *lines, ""]),
                        "vent.cir")
    assert got.check_error is None or "floating" not in got.check_error
    return got


DIODES = [
    # (model card, kind expected): a 1N4148-like signal diode, a rectifier, an LED, LED by type
    ("D(IS=2.52n N=1.752 RS=0.568 CJO=4p M=0.4 TT=20n)", "diode"),
    ("D(IS=14.1n N=1.984 RS=33.9m BV=1000 IBV=5u)", "diode"),
    ("D(IS=1e-19 N=2.2 RS=2.5)", "led"),
    ("D(IS=1e-12 N=3 RS=1 type=led)", "led"),
    ("D IS=3n N=1.6", "diode"),
]


@pytest.mark.parametrize("card,kind", DIODES)
@pytest.mark.parametrize("area", [1.0, 2.0])
def test_forward_voltage_against_ngspice(tmp_path, card, kind, area):
    # formats.md section 4: value = forward voltage at test_current (1 mA diode, 10 mA LED)
    area_text = "" if area == 1.0 else f" area={area:g}"
    got = imported(["R1 vcc a 10k", f"D1 a 0 dm{area_text}", f".model dm {card}"])
    d = got.circuit.part("D1")
    assert d.kind == kind
    it = 10e-3 if kind == "led" else 1e-3
    v = ngspice_op([f"I1 0 a DC {it!r}", f"D1 a 0 dm{area_text}", f".model dm {card}"],
                   tmp_path)["a"]
    assert_allclose(d.value, v, rtol=REL)
    # the value survives the circuit file (written and read back)
    again = parse_circuit(circuit_text(got.circuit)).part("D1")
    assert again.value == d.value and again.ideality == d.ideality


ZENERS = [
    "D(IS=1e-14 N=1 RS=2 BV=5.1 IBV=1m)",
    "D(IS=5e-15 N=1.3 RS=8 BV=12 IBV=5m CJO=50p)",
    "D(IS=1e-14 BV=3.3 IBV=20m type=zener)",
    "D(IS=2e-14 N=1.1 BV=47 IBV=2m)",
]


@pytest.mark.parametrize("card", ZENERS)
def test_zener_against_ngspice(tmp_path, card):
    got = imported(["R1 vcc k 1k", "D1 0 k zm", f".model zm {card}"])
    z = got.circuit.part("D1")
    assert z.kind == "zener" and z.nodes == ("0", "k")
    # 5 mA into the cathode (reverse: the zener voltage) and 5 mA forward
    op = ngspice_op(["I1 0 k DC 5m", "D1 0 k zm", "I2 0 a DC 5m", "D2 a 0 zm",
                     f".model zm {card}"], tmp_path)
    assert_allclose(z.value, op["k"], rtol=REL)
    assert_allclose(z.forward_voltage, op["a"], rtol=REL)


TRANSISTORS = [
    ("NPN(IS=1e-14 BF=200)", "npn"),
    ("NPN(IS=6.734f BF=416.4 NF=1 BR=1 VAF=74.03 CJE=4.5p)", "npn"),
    ("PNP(IS=1.4e-15 BF=180)", "pnp"),
    ("PNP", "pnp"),
]


@pytest.mark.parametrize("card,kind", TRANSISTORS)
def test_vbe_against_ngspice(tmp_path, card, kind):
    # vbe at 1 mA collector current with Vbc = 0: the collector fed by an ideal
    # 1 mA source, the base held at the collector's voltage by a unity buffer
    got = imported(["R1 vcc b 100k", "R2 vcc c 1k", "Q1 c b 0 qm", f".model qm {card}"])
    q = got.circuit.part("Q1")
    assert q.kind == kind and q.nodes == ("c", "b", "0") and q.value is None
    feed = "I1 0 c DC 1m" if kind == "npn" else "I1 c 0 DC 1m"
    op = ngspice_op([feed, "E1 b 0 c 0 1", "Q1 c b 0 qm", f".model qm {card}"], tmp_path)
    assert_allclose(q.vbe, abs(op["b"]), rtol=REL)
    bf = re.search(r"BF=([0-9.]+)", card)
    assert q.gain == (float(bf.group(1)) if bf else 100.0)     # SPICE's default BF is 100


# -- what is reported ----------------------------------------------------------------

def test_ignored_parameters_are_named_once():
    got = imported(["D1 vcc a dm", "D2 a 0 dm", ".model dm D(IS=1n N=1.8 CJO=4p TT=5n IKF=0.1)"])
    model_warnings = [w for w in got.warnings if "model dm" in w]
    assert len(model_warnings) == 2          # once per card, not once per element
    assert any("IKF not used" in w and "DC values will differ" in w for w in model_warnings)
    assert any("CJO, TT not used" in w and "no effect on DC" in w for w in model_warnings)
    assert all(w.startswith("line 5: ") for w in model_warnings)   # the card's line


def test_high_breakdown_is_a_diode_with_a_warning():
    got = imported(["R1 vcc a 1k", "D1 a 0 dm", f".model dm D(BV={ZENER_BV_AT_MOST + 25:g})"])
    assert got.circuit.part("D1").kind == "diode"
    assert any("BV = 75 V (reverse breakdown) not used" in w for w in got.warnings)


def test_nbv_nf_br_warnings():
    got = imported(["R1 vcc k 1k", "D1 0 k zm", ".model zm D(BV=5.1 N=1 NBV=2)",
                    "Q1 vcc k 0 qm", ".model qm NPN(NF=1.2 BR=3)"])
    text = " ".join(got.warnings)
    assert "NBV = 2 differs from N = 1" in text
    assert "NF = 1.2" in text and "BR = 3 not used" in text


def test_substrate_node_and_instance_parameters():
    got = imported(["R1 vcc b 100k", "Q1 vcc b 0 sub qm 2 off", ".model qm NPN(IS=1e-15)",
                    "R2 sub 0 1k", "D1 vcc b dm m=3 temp=50", ".model dm D"])
    q, d = got.circuit.part("Q1"), got.circuit.part("D1")
    assert q.nodes == ("vcc", "b", "0")
    # area 2 doubles IS: vbe drops by Vt ln 2 = 17.8 mV (formats.md's 25.69 mV)
    one = imported(["R1 vcc b 100k", "Q1 vcc b 0 qm", ".model qm NPN(IS=1e-15)"])
    assert_allclose(one.circuit.part("Q1").vbe - q.vbe, 25.69e-3 * 0.6931471805599453,
                    rtol=1e-4)
    assert d.kind == "diode"
    text = " ".join(got.warnings)
    assert "substrate node sub is not used" in text and "parameter temp= is ignored" in text


@pytest.mark.parametrize("lines,reason", [
    (["D1 vcc 0 nomodel"], "no .model nomodel in this netlist"),
    (["D1 vcc 0 qm", ".model qm NPN"], "of type NPN, not D"),
    (["Q1 vcc a 0 dm", ".model dm D"], "of type D, not NPN or PNP"),
    (["D1 vcc 0 dm", ".model dm D(N=20)"], "N = 20, outside the 0.5 to 10"),
    (["D1 vcc 0 dm", ".model dm D(level=3)"], "level 3 diode model"),
    (["D1 vcc 0 dm", ".model dm D(IS=0)"], "IS above 0"),
    (["D1 vcc vcc dm", ".model dm D"], "shorted by its own wiring"),
    (["D1 vcc 0 dm -1", ".model dm D"], "area factor"),
])
def test_unmapped_semiconductors(lines, reason):
    got = imported(["R1 vcc 0 1k", *lines])
    assert any(reason in u.reason for u in got.unmapped), got.unmapped
    assert [p.ref for p in got.circuit.parts] == ["V1", "R1"]


def test_other_model_types_stay_unmapped():
    got = imported(["R1 vcc 0 1k", "M1 vcc g 0 0 nm", ".model nm NMOS(VTO=2)",
                    ".model spare D"])
    reasons = [u.reason for u in got.unmapped]
    assert any("type NMOS" in r for r in reasons)
    assert any("model spare is defined but no element uses it" in w for w in got.warnings)


def test_model_defined_twice():
    got = imported(["R1 vcc a 1k", "D1 a 0 dm", ".model dm D(N=1.5)", ".model dm D(N=1.9)"])
    assert got.circuit.part("D1").ideality == 1.5
    assert any("defined again (first at line 5)" in w for w in got.warnings)
