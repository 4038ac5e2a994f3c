"""Scale benchmark: diagnosing 1k-, 10k- and 100k-part meshes, against the floor and re-solving.

Two families of scenarios (:mod:`scale_case`), each written to files:

* **bench**: a 48 V supply through a fuse into one corner of a square mesh,
  0.01-1 ohm links, a load on every node, 1 % parts, one cracked link near the
  middle, 100 node-voltage readings with a bench meter: 80 around the fault,
  20 spread;
* **handheld**: a 24 V grid of links fed through a fuse into one corner, loads
  on every fifth node only, one open link a few links out from the feed, 100
  node voltages read with the default handheld meter: 30 near the fault, 70
  spread over the whole grid.

Then, in this one process and run, for each family and size:

* **floor**: reading the same files, assembling the network, one sparse
  factorization, one solve and one adjoint solve per reading -- the least any
  diagnosis of these files must do;
* **diagnose**: the whole ``faultfind diagnose CIRCUIT READINGS [--meters FILE]``
  (the command-line entry point, files read included, report printed to a
  buffer), its stages timed through the progress callback;
* ``--repeat R``: floor and diagnose measured R times, interleaved; the
  ratio reported is the median of the R ratios (each diagnose over the
  smaller of the floors just before and after it; for an even R the higher
  of the middle two), with their range;
* **memory**: the same command in a fresh process, peak resident set size;
* **re-solve**: at 10k parts (``--resolve-size``, bench family), the plain
  approach -- re-assemble, re-factor and re-solve the network for every trial
  of every hypothesis -- timed on a random sample of hypotheses and
  extrapolated to the number of trials the engine's search makes (said so in
  the output);
* **checks**: the planted fault ranks first; the screened ranking equals the
  unscreened one (sizes up to 10k); the leading hypotheses' predictions equal
  a re-assembled, re-solved faulted network's.

    python benchmarks/scale.py [--families bench handheld] [--sizes 1000 10000 100000]
                               [--repeat 3] [--sample 20] [--out FILE]
                               [--case-seed S] [--near K] [--load-every L] [--fault-at I J]

``--case-seed`` draws other boards of both families (the mesh's values, the
healthy parts, the meter's noise, the spread readings' jitter); ``--near``,
``--load-every`` and ``--fault-at`` change the handheld family's shape (how
many of the 100 readings are near the fault, how many nodes carry a load,
where the open link is), so the ratio can be checked on boards it was not
tuned on.

Prints a Markdown report (and writes it to ``--out``).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import math
import os
import pathlib
import platform
import re
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

from scale_case import FAMILIES, shape_args, write  # noqa: E402

from faultfind.cli.main import main as cli_main  # noqa: E402
from faultfind.diagnose import diagnose  # noqa: E402
from faultfind.engine.factor import Factorization  # noqa: E402
from faultfind.engine.hypotheses import Evaluator, rank_with  # noqa: E402
from faultfind.engine.drifts import _GRID  # noqa: E402
from faultfind.engine.mna import assemble  # noqa: E402
from faultfind.engine.predict import predict  # noqa: E402
from faultfind.io.circuit_file import load_circuit  # noqa: E402
from faultfind.io.meters_file import load_meters, meters_with_default  # noqa: E402
from faultfind.io.readings_file import load_readings  # noqa: E402

#: Trial values one drift fit evaluates: the grid, four refinement stages of
#: five points, the final value (:meth:`Evaluator.fit_drifts`).
DRIFT_TRIALS = _GRID + 4 * 5 + 1
DEFAULT_SIZES = {"bench": [1000, 10000, 100000], "handheld": [10000, 100000]}


def floor(paths):
    """Seconds for: read files, assemble, factor, one solve, one adjoint solve per reading."""
    cpath, rpath, mpath = paths
    t = time.perf_counter()
    c = load_circuit(cpath)
    m = meters_with_default(load_meters(mpath) if mpath else None)
    rds = load_readings(rpath, c, m)
    net = assemble(c, "dc", None)
    lu = Factorization(net.A)
    lu.solve(net.b)
    U = np.column_stack([net.node_vector(r.plus, r.minus) for r in rds])
    lu.solve_adjoint(U)
    return time.perf_counter() - t


def _args(paths):
    cpath, rpath, mpath = paths
    return ["diagnose", str(cpath), str(rpath)] + (["--meters", str(mpath)] if mpath else [])


def _load(paths):
    cpath, rpath, mpath = paths
    c = load_circuit(cpath)
    m = meters_with_default(load_meters(mpath) if mpath else None)
    return c, load_readings(rpath, c, m), m


def whole(paths):
    """Seconds for the whole ``faultfind diagnose`` in this process, and its stage times."""
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
            code = cli_main(_args(paths))
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
    out = subprocess.run([sys.executable, "-c", code] + _args(paths), capture_output=True, text=True, check=True,
                         env=dict(os.environ, FAULTFIND_PROGRESS="0"))
    wall = time.perf_counter() - t
    kb, inproc = out.stdout.split()
    return int(kb) / 1024.0, wall, float(inproc)


def resolve_ratio(paths, sample, rng):
    """Engine ranking time against re-solving per hypothesis trial (sampled, extrapolated)."""
    c, rds, m = _load(paths)
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
    c, rds, m = _load(paths)
    d = diagnose(c, rds, m, advise=False, top=5)
    top = d.hypotheses[0]
    first = bool(top.faults) and top.faults[0].ref == fault[0] and top.faults[0].mode == fault[1]
    same = None
    if screen_compare:
        e = diagnose(c, rds, m, advise=False, top=5, screen=False)
        # hypotheses with no probability to speak of (< 1e-6) are left out: their
        # order among themselves is the order of chi-squares in the hundred thousands
        a = [h for h in d.hypotheses if h.probability >= 1e-6]
        b = [h for h in e.hypotheses if h.probability >= 1e-6]
        same = ([h.label for h in a] == [h.label for h in b]
                and np.allclose([h.probability for h in a], [h.probability for h in b], atol=1e-6))
    worst = 0.0
    for h in d.hypotheses[:3]:
        if not h.faults:
            continue
        ov = {f.ref: (f.value if f.mode == "drift" else f.mode) for f in h.faults}
        ref = predict(c, rds, m, overrides=ov).value
        worst = max(worst, float(np.max(np.abs(h.predicted - ref) / np.maximum(np.abs(ref), 1e-3))))
    return first, same, worst, top.label


def _screened(text):
    """"N of M" from the report's note on the screen, or "-"."""
    m = re.search(r"large circuit: (\d+) of (\d+) parts evaluated in full", text)
    return f"{int(m.group(1)):,} of {int(m.group(2)):,}" if m else "-"


def measure(family, n, work, repeat, resolve_size, sample, rng, case_seed=0, shape=None):
    """Every figure of one family at one size (a dict).

    ``case_seed`` and ``shape``: :func:`scale_case.write`'s ``seed`` and shape options.
    """
    cp, rp, mp, fault, nparts = write(n, work / f"{family}-{n}", seed=case_seed, family=family,
                                      **(shape or {}))
    paths = (cp, rp, mp)
    whole(paths)                      # warm the imports and caches once
    fl_prev = floor(paths)
    ratios, totals, floors, runs = [], [], [], []
    for _ in range(repeat):
        tot, stages, text = whole(paths)
        fl_next = floor(paths)        # the floor again, after: the smaller of the two
        fl = min(fl_prev, fl_next)
        ratios.append(tot / fl)
        totals.append(tot)
        floors.append(fl)
        runs.append((stages, text))
        fl_prev = fl_next
    k = int(np.argsort(ratios)[len(ratios) // 2])     # the median run
    stages, text = runs[k]
    mem, wall, inproc = peak_memory(paths)
    first, same, worst, top = checks(paths, fault, screen_compare=n <= 10000)
    out = dict(family=family, parts=nparts, floor=floors[k], whole=totals[k], ratio=ratios[k],
               rmin=min(ratios), rmax=max(ratios), mem=mem, wall=wall, first=first, same=same,
               worst=worst, top=top, stages=stages, screened=_screened(text), resolve=None)
    if family == "bench" and n == resolve_size:
        out["resolve"] = resolve_ratio(paths, sample, rng)
    return out


def report(rows, resolve_size):
    """The Markdown report of :func:`measure`'s rows."""
    lines = [f"Machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
             f"numpy {np.__version__}; {time.strftime('%Y-%m-%d %H:%M')}; load average before the "
             f"run {os.getloadavg()[0]:.1f}." if hasattr(os, "getloadavg") else "", ""]
    lines.append("| family | parts | floor (s) | whole diagnose (s) | ratio | ratio range | peak memory (MiB) "
                 "| fresh process (s) | parts evaluated in full | planted fault first | screened = unscreened "
                 "| max rel. diff. vs re-solve |")
    lines.append("|:--|---:|---:|---:|---:|:--|---:|---:|:--|:--|:--|---:|")
    for r in rows:
        lines.append(f"| {r['family']} | {r['parts']:,} | {r['floor']:.2f} | {r['whole']:.2f} | {r['ratio']:.2f} | "
                     f"{r['rmin']:.2f}-{r['rmax']:.2f} | {r['mem']:.0f} | {r['wall']:.2f} | {r['screened']} | "
                     f"{'yes' if r['first'] else 'NO (' + r['top'] + ')'} | "
                     f"{'-' if r['same'] is None else ('yes' if r['same'] else 'NO')} | {r['worst']:.1e} |")
    lines.append("")
    names = []
    for r in rows:
        for k in r["stages"]:
            if k not in names and k != "done":
                names.append(k)
    lines.append("Stages of the whole diagnose (s):")
    lines.append("")
    lines.append("| family | parts | " + " | ".join(names) + " |")
    lines.append("|:--|---:|" + "---:|" * len(names))
    for r in rows:
        st = r["stages"]
        lines.append(f"| {r['family']} | {r['parts']:,} | " + " | ".join(f"{st.get(k, 0.0):.2f}" for k in names) + " |")
    for fam in FAMILIES:
        fr = [r for r in rows if r["family"] == fam]
        if len(fr) >= 2:
            s0, s1 = fr[0], fr[-1]
            ex = []
            for k in names:
                a, b = s0["stages"].get(k, 0), s1["stages"].get(k, 0)
                if a > 0 and b > 0:
                    ex.append(f"{k} {math.log(b / a) / math.log(s1['parts'] / s0['parts']):.2f}")
            lines.append("")
            lines.append(f"Growth exponent, {fam} family, from {s0['parts']:,} to {s1['parts']:,} parts "
                         "(time ~ parts^e): " + ", ".join(ex) + ".")
    for r in rows:
        q = r["resolve"]
        if not q:
            continue
        lines.append("")
        lines.append(f"Re-solving per hypothesis at {resolve_size:,} parts (extrapolated from a random sample "
                     f"of {q['sample']} hypotheses: re-assemble, re-factor and solve the faulted network, median "
                     f"{q['per_trial'] * 1e3:.1f} ms each; {q['hypotheses']:,} hypotheses, {q['trials']:,} trials "
                     f"counting {DRIFT_TRIALS} per drift fit): {q['resolve_total']:.0f} s.  The engine's ranking "
                     f"(setup included): {q['engine_screened']:.2f} s screened, {q['engine_all']:.2f} s evaluating "
                     f"every part.  Ratio: {q['resolve_total'] / q['engine_screened']:.0f}x screened, "
                     f"{q['resolve_total'] / q['engine_all']:.0f}x every part.  Counting one re-solve per "
                     f"hypothesis only (no drift fit): {q['per_trial'] * q['hypotheses']:.0f} s, "
                     f"{q['per_trial'] * q['hypotheses'] / q['engine_screened']:.0f}x screened.  The re-solves "
                     f"leave out the meters' loading (exact loading needs one re-solve per reading).")
    return "\n".join(lines)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--families", nargs="+", choices=FAMILIES, default=list(FAMILIES))
    ap.add_argument("--sizes", type=int, nargs="+",
                    help="parts (default: 1,000, 10,000 and 100,000 for the bench family; 10,000 and "
                         "100,000 for the handheld one, whose open link a handheld cannot see on a "
                         "1,000-part grid)")
    ap.add_argument("--repeat", type=int, default=1, help="floor and diagnose measurements per size")
    ap.add_argument("--resolve-size", type=int, default=10000)
    ap.add_argument("--sample", type=int, default=20, help="hypotheses re-solved for the extrapolation")
    ap.add_argument("--seed", type=int, default=2026,
                    help="the re-solve sample's draws (the boards are the same for every --seed)")
    ap.add_argument("--case-seed", type=int, default=0,
                    help="the boards: the mesh's values, the healthy parts' draws, the meter's noise "
                         "and the spread readings' jitter (default 0)")
    ap.add_argument("--near", type=int, help="handheld family: readings nearest the fault (default 30 of 100)")
    ap.add_argument("--load-every", type=int, help="handheld family: a load on every n-th node (default 5)")
    ap.add_argument("--fault-at", type=int, nargs=2, metavar=("I", "J"),
                    help="handheld family: the open link from N<I>.<J> to N<I+1>.<J> (default 3 1)")
    ap.add_argument("--out", help="also write the Markdown report here")
    a = ap.parse_args(argv)
    if a.repeat < 1:
        ap.error("--repeat: at least 1")
    shape = shape_args(a)
    if shape and a.families != ["handheld"]:
        ap.error("--near, --load-every, --fault-at: only with --families handheld")
    rng = np.random.default_rng(a.seed)
    rows = []
    with tempfile.TemporaryDirectory(prefix="faultfind-scale-") as tmp:
        for family in a.families:
            for n in a.sizes or DEFAULT_SIZES[family]:
                r = measure(family, n, pathlib.Path(tmp), a.repeat, a.resolve_size, a.sample, rng,
                            a.case_seed, shape)
                rows.append(r)
                print(f"{family} {r['parts']} parts: floor {r['floor']:.2f} s, diagnose {r['whole']:.2f} s "
                      f"({r['ratio']:.2f}x, {r['rmin']:.2f}-{r['rmax']:.2f}), peak {r['mem']:.0f} MiB, "
                      f"top {r['top']}, evaluated {r['screened']}", flush=True)
    text = report(rows, a.resolve_size)
    print()
    print(text)
    if a.out:
        pathlib.Path(a.out).write_text(text + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
