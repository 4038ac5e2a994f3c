"""What changes on large circuits outside the engine: BLAS threads, the progress
line, the advice near the suspects.

References: the rule that a reading far from every suspect cannot separate
them is common practice (no source); the thread-count calls are OpenBLAS's
documented ``openblas_set_num_threads`` / ``openblas_get_num_threads``
(OpenBLAS wiki, from memory).
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from faultfind import blas
from faultfind.advise import CANDIDATE_LIMIT, NEAR_CAP, candidate_readings, near_suspects, suggest
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import simulate_readings

GROUND = "0V"


def ladder(n):
    """An invented long heater ladder: supply, fuse, n sections of series link + load."""
    parts = [Part("PS1", "voltage-source", ("N0", GROUND), 24.0, 0.02, 0.02),
             Part("F1", "fuse", ("N0", "N1"), 0.05, 0.3, 0.3)]
    for i in range(1, n + 1):
        parts.append(Part(f"R{i}", "resistor", (f"N{i}", f"N{i + 1}"), 0.01, 0.01, 0.01))
        parts.append(Part(f"RL{i}", "resistor", (f"N{i + 1}", GROUND), 10e3, 0.01, 0.01))
    return Circuit(f"ladder {n}", GROUND, tuple(parts))


# ------------------------------------------------------------------ threads

def test_one_thread_sets_and_restores_the_thread_count():
    libs = blas._libraries()
    if not libs:
        pytest.skip("no OpenBLAS library found in this process (another BLAS): nothing to set")
    before = [get() for _, get in libs]
    with blas.one_thread():
        assert [get() for _, get in libs] == [1] * len(libs)
        with blas.one_thread():           # nested: still one, restored only at the outer exit
            assert [get() for _, get in libs] == [1] * len(libs)
        assert [get() for _, get in libs] == [1] * len(libs)
    assert [get() for _, get in libs] == before


def test_one_thread_gives_the_same_numbers():
    rng = np.random.default_rng(0)
    A = rng.standard_normal((300, 300))
    ref = A @ A.T
    with blas.one_thread():
        got = A @ A.T
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-10)


# ----------------------------------------------------------------- progress

def test_progress_goes_to_stderr_and_leaves_json_alone(tmp_path):
    c = ladder(30)
    m = meters_with_default()
    rds = simulate_readings(c, [Reading("voltage", "dc", f"N{i}", GROUND) for i in range(1, 31, 3)],
                            m, [("R12", "open", None)], rng=3)
    circuit = tmp_path / "ladder.toml"
    lines = ['format = 1', 'title = "ladder"', 'ground = "0V"', ""]
    for p in c.parts:
        lines += ["[[part]]", f'ref = "{p.ref}"', f'kind = "{p.kind}"',
                  f'nodes = ["{p.nodes[0]}", "{p.nodes[1]}"]', f'value = "{p.value!r}"',
                  f'tolerance = "{p.tol_high * 100:g}%"', ""]
    circuit.write_text("\n".join(lines), encoding="utf-8")
    readings = tmp_path / "r.csv"
    readings.write_text("quantity,mode,plus,minus,part,setup,value,label\n" + "".join(
        f"voltage,dc,{r.plus},,,,{r.value!r} V,\n" for r in rds), encoding="utf-8")
    env = dict(__import__("os").environ, FAULTFIND_PROGRESS="1")
    out = subprocess.run([sys.executable, "-m", "faultfind", "diagnose", str(circuit), str(readings),
                          "--json"], capture_output=True, text=True, env=env, timeout=300)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)                       # stdout is the JSON document only
    assert doc["hypotheses"][0]["faults"][0]["ref"] == "R12"
    for stage in ("reading files", "setting up", "ranking", "estimating", "done in"):
        assert stage in out.stderr
    env["FAULTFIND_PROGRESS"] = "0"
    quiet = subprocess.run([sys.executable, "-m", "faultfind", "diagnose", str(circuit), str(readings),
                            "--json"], capture_output=True, text=True, env=env, timeout=300)
    assert quiet.returncode == 0 and quiet.stderr == ""


# ------------------------------------------------------------------- advice

def test_advice_on_a_large_circuit_weighs_readings_near_the_suspects():
    c = ladder(1000)                                  # 2002 parts: about 7,000 candidate readings
    assert 4 * len(c.parts) > CANDIDATE_LIMIT
    nodes, parts = near_suspects(c, ["R500", "RL500"])
    cands = candidate_readings(c, ["R500"], nodes=nodes, parts=parts)
    assert len(cands) <= NEAR_CAP + 2
    assert all(abs(int(n[1:]) - 500) <= 20 for n in nodes)     # a neighbourhood, not the whole ladder
    m = meters_with_default()
    plan = [Reading("voltage", "dc", f"N{i}", GROUND) for i in range(1, 1001, 50)]
    sim = simulate_readings(c, plan, m, [("R500", "open", None)], rng=5)
    sug = suggest(c, sim, m)
    assert sug, "no suggestion"
    where = [s.reading.part or s.reading.plus for s in sug]
    # the suggestions bracket the suspected break: readings on the parts/nodes around it
    idx = [int("".join(ch for ch in w if ch.isdigit())) for w in where]
    assert all(440 <= i <= 560 for i in idx), where
