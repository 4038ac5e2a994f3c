"""Scale benchmark: diagnosing 1k-, 10k- and 100k-part meshes, against the floor and re-solving.

For each size a mesh scenario is written to files (:mod:`scale_case`: a 48 V
supply through a fuse into one corner, 0.01-1 ohm links, loads to ground, 1 %
parts, one cracked link, 100 node-voltage readings with a bench meter: 80
around the fault, 20 spread), then, in this one process and run:

* **floor**: reading the same three files, assembling the network, one sparse
  factorization, one solve and one adjoint solve per reading -- the least any
  diagnosis of these files must do;
* **diagnose**: the whole ``faultfind diagnose CIRCUIT READINGS --meters FILE``
  (the command-line entry point, files read included, report printed to a
  buffer), its stages timed through the progress callback;
* **memory**: the same command in a fresh process, peak resident set size;
* **re-solve**: at 10k parts (``--resolve-size``), the plain approach --
  re-assemble, re-factor and re-solve the network for every trial of every
  hypothesis -- timed on a random sample of hypotheses and extrapolated to the
  number of trials the engine's search makes (said so in the output);
* **checks**: the planted fault ranks first; the screened ranking equals the
  unscreened one (sizes up to 10k); the leading hypotheses' predictions equal
  a re-assembled, re-solved faulted network's.

    python benchmarks/scale.py [--sizes 1000 10000 100000] [--sample 20] [--out FILE]

Prints a Markdown table (and writes it to ``--out``).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import math
import os
import pathlib
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

from scale_case import write  # noqa: E402

from faultfind.cli.main import main as cli_main  # noqa: E402
from faultfind.diagnose import diagnose  # noqa: E402
from faultfind.engine.factor import Factorization  # noqa: E402
from faultfind.engine.hypotheses import Evaluator, rank_with  # noqa: E402
from faultfind.engine.hypotheses import _GRID  # noqa: E402
from faultfind.engine.mna import assemble  # noqa: E402
from faultfind.engine.predict import predict  # noqa: E402
from faultfind.io.circuit_file import load_circuit  # noqa: E402
from faultfind.io.meters_file import load_meters, meters_with_default  # noqa: E402
from faultfind.io.readings_file import load_readings  # noqa: E402

#: Trial values one drift fit evaluates: the grid, four refinement stages of
#: five points, the final value (:meth:`Evaluator.fit_drifts`).
DRIFT_TRIALS = _GRID + 4 * 5 + 1


def floor(paths):
    """Seconds for: read files, assemble, factor, one solve, one adjoint solve per reading."""
    cpath, rpath, mpath = paths
    t = time.perf_counter()
    c = load_circuit(cpath)
    m = meters_with_default(load_meters(mpath))
    rds = load_readings(rpath, c, m)
    net = assemble(c, "dc", None)
    lu = Factorization(net.A)
    lu.solve(net.b)
    U = np.column_stack([net.node_vector(r.plus, r.minus) for r in rds])
    lu.solve_adjoint(U)
    return time.perf_counter() - t


def whole(paths):
    """Seconds for the whole ``faultfind diagnose`` in this process, and its stage times."""
    cpath, rpath, mpath = paths
    stages = []

    import faultfind.cli.diagnose as cd
    real = cd.diagnose

    def timed(*a, **k):
        prev = k.get("progress")

        def tick(stage, done=None, total=None):
            if done is None:
                stages.append((stage, time.perf_counter()))
            if prev is not None:
                prev(stage, done, total)
        k["progress"] = tick
        return real(*a, **k)

    cd.diagnose = timed
    buf = io.StringIO()
    try:
        t = time.perf_counter()
        with contextlib.redirect_stdout(buf):
            code = cli_main(["diagnose", str(cpath), str(rpath), "--meters", str(mpath)])
        total = time.perf_counter() - t
    finally:
        cd.diagnose = real
    if code != 0:
        raise SystemExit(f"faultfind diagnose exited {code}")
    marks = [("reading files", t)] + stages
    times = {}
    for (name, a), (_, b) in zip(marks, marks[1:]):
        times[name] = times.get(name, 0.0) + (b - a)
    return total, times, buf.getvalue()


def peak_memory(paths):
    """Peak RSS (MiB) and wall time of ``faultfind diagnose`` in a fresh process."""
    cpath, rpath, mpath = paths
    # VmHWM of /proc/self/status: the peak of this process's own memory
    # (ru_maxrss would carry the parent's peak over the exec on Linux)
    code = ("import resource, sys, io, contextlib, time\n"
            "from faultfind.cli.main import main\n"
            "t = time.perf_counter()\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    rc = main(sys.argv[1:])\n"
            "kb = None\n"
            "try:\n"
            "    for line in open('/proc/self/status'):\n"
            "        if line.startswith('VmHWM:'):\n"
            "            kb = int(line.split()[1])\n"
            "except OSError:\n"
            "    pass\n"
            "kb = kb or resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
            "print(kb, time.perf_counter() - t)\n")
    t = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", code, "diagnose", str(cpath), str(rpath),
                          "--meters", str(mpath)], capture_output=True, text=True, check=True,
                         env=dict(os.environ, FAULTFIND_PROGRESS="0"))
    wall = time.perf_counter() - t
    kb, inproc = out.stdout.split()
    return int(kb) / 1024.0, wall, float(inproc)


def resolve_ratio(paths, sample, rng):
    """Engine ranking time against re-solving per hypothesis trial (sampled, extrapolated)."""
    cpath, rpath, mpath = paths
    c = load_circuit(cpath)
    m = meters_with_default(load_meters(mpath))
    rds = load_readings(rpath, c, m)
    out = {}
    for scr in (True, False):
        t = time.perf_counter()
        ev = Evaluator(c, rds, m)
        rank_with(ev, screen=scr)
        out["engine_screened" if scr else "engine_all"] = time.perf_counter() - t
    parts = [p for p in c.parts if p.fault_modes]
    trials = sum(len([x for x in p.fault_modes if x != "drift"]) + (DRIFT_TRIALS if "drift" in p.fault_modes else 0)
                 for p in parts)
    pick = rng.choice(len(parts), size=min(sample, len(parts)), replace=False)
    times = []
    for k in pick:
        p = parts[int(k)]
        mode = rng.choice([x for x in p.fault_modes])
        ov = {p.ref: (p.value * 1.5 if mode == "drift" else str(mode))}
        t = time.perf_counter()
        try:
            net = assemble(c, "dc", None, ov)
            lu = Factorization(net.A)
            x = lu.solve(net.b)
            _ = [x[net.node_index[r.plus]] for r in rds]
        except Exception:  # noqa: BLE001 - a singular faulted network still cost the attempt
            pass
        times.append(time.perf_counter() - t)
    per = float(np.median(times))
    out.update(per_trial=per, trials=trials, hypotheses=sum(len(p.fault_modes) for p in parts),
               resolve_total=per * trials, sample=len(pick))
    return out


def checks(paths, fault, screen_compare):
    """The planted fault first; screened == unscreened; predictions == re-solved network."""
    cpath, rpath, mpath = paths
    c = load_circuit(cpath)
    m = meters_with_default(load_meters(mpath))
    rds = load_readings(rpath, c, m)
    d = diagnose(c, rds, m, advise=False, top=5)
    top = d.hypotheses[0]
    first = bool(top.faults) and top.faults[0].ref == fault[0] and top.faults[0].mode == fault[1]
    same = None
    if screen_compare:
        e = diagnose(c, rds, m, advise=False, top=5, screen=False)
        same = ([h.label for h in d.hypotheses] == [h.label for h in e.hypotheses]
                and np.allclose([h.probability for h in d.hypotheses],
                                [h.probability for h in e.hypotheses], atol=1e-6))
    worst = 0.0
    for h in d.hypotheses[:3]:
        if not h.faults:
            continue
        ov = {f.ref: (f.value if f.mode == "drift" else f.mode) for f in h.faults}
        ref = predict(c, rds, m, overrides=ov).value
        worst = max(worst, float(np.max(np.abs(h.predicted - ref) / np.maximum(np.abs(ref), 1e-3))))
    return first, same, worst, top.label


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    ap.add_argument("--resolve-size", type=int, default=10000)
    ap.add_argument("--sample", type=int, default=20, help="hypotheses re-solved for the extrapolation")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--out", help="also write the Markdown report here")
    a = ap.parse_args(argv)
    rng = np.random.default_rng(a.seed)
    rows, stage_rows, lines = [], [], []
    tmp = tempfile.TemporaryDirectory(prefix="faultfind-scale-")
    work = pathlib.Path(tmp.name)
    resolve = None
    for n in a.sizes:
        cp, rp, mp, fault, nparts = write(n, work / str(n))
        paths = (cp, rp, mp)
        whole(paths)                      # warm the imports and caches once
        fl = floor(paths)
        tot, stages, text = whole(paths)
        fl2 = floor(paths)                # the floor again, after: the smaller of the two
        fl = min(fl, fl2)
        mem, wall, inproc = peak_memory(paths)
        first, same, worst, top = checks(paths, fault, screen_compare=n <= 10000)
        rows.append((nparts, fl, tot, tot / fl, mem, wall, first, same, worst, top))
        stage_rows.append((nparts, stages))
        print(f"{nparts} parts: floor {fl:.2f} s, diagnose {tot:.2f} s ({tot / fl:.2f}x), "
              f"peak {mem:.0f} MiB, top {top}", flush=True)
        if n == a.resolve_size:
            resolve = resolve_ratio(paths, a.sample, rng)
    lines.append(f"Machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
                 f"numpy {np.__version__}; {time.strftime('%Y-%m-%d')}.")
    lines.append("")
    lines.append("| parts | floor (s) | whole diagnose (s) | ratio | peak memory (MiB) | fresh process (s) "
                 "| planted fault first | screened = unscreened | max rel. diff. vs re-solve |")
    lines.append("|---:|---:|---:|---:|---:|---:|:--|:--|---:|")
    for nparts, fl, tot, r, mem, wall, first, same, worst, top in rows:
        lines.append(f"| {nparts:,} | {fl:.2f} | {tot:.2f} | {r:.2f} | {mem:.0f} | {wall:.2f} | "
                     f"{'yes' if first else 'NO (' + top + ')'} | "
                     f"{'-' if same is None else ('yes' if same else 'NO')} | {worst:.1e} |")
    lines.append("")
    names = []
    for _, st in stage_rows:
        for k in st:
            if k not in names and k != "done":
                names.append(k)
    lines.append("Stages of the whole diagnose (s):")
    lines.append("")
    lines.append("| parts | " + " | ".join(names) + " |")
    lines.append("|---:|" + "---:|" * len(names))
    for nparts, st in stage_rows:
        lines.append(f"| {nparts:,} | " + " | ".join(f"{st.get(k, 0.0):.2f}" for k in names) + " |")
    if len(stage_rows) >= 2:
        (n0, s0), (n1, s1) = stage_rows[0], stage_rows[-1]
        ex = []
        for k in names:
            if s0.get(k, 0) > 0 and s1.get(k, 0) > 0:
                ex.append(f"{k} {math.log(s1[k] / s0[k]) / math.log(n1 / n0):.2f}")
        lines.append("")
        lines.append(f"Growth exponent from {n0:,} to {n1:,} parts (time ~ parts^e): " + ", ".join(ex) + ".")
    if resolve:
        r = resolve
        lines.append("")
        lines.append(f"Re-solving per hypothesis at {a.resolve_size:,} parts (extrapolated from a random sample "
                     f"of {r['sample']} hypotheses: re-assemble, re-factor and solve the faulted network, median "
                     f"{r['per_trial'] * 1e3:.1f} ms each; {r['hypotheses']:,} hypotheses, {r['trials']:,} trials "
                     f"counting {DRIFT_TRIALS} per drift fit): {r['resolve_total']:.0f} s.  The engine's ranking "
                     f"(setup included): {r['engine_screened']:.2f} s screened, {r['engine_all']:.2f} s evaluating "
                     f"every part.  Ratio: {r['resolve_total'] / r['engine_screened']:.0f}x screened, "
                     f"{r['resolve_total'] / r['engine_all']:.0f}x every part.  Counting one re-solve per "
                     f"hypothesis only (no drift fit): {r['per_trial'] * r['hypotheses']:.0f} s, "
                     f"{r['per_trial'] * r['hypotheses'] / r['engine_screened']:.0f}x screened.  The re-solves "
                     f"leave out the meters' loading (exact loading needs one re-solve per reading).")
    tmp.cleanup()
    report = "\n".join(lines)
    print()
    print(report)
    if a.out:
        pathlib.Path(a.out).write_text(report + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
