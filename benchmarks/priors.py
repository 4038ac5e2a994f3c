"""Held-out check of learned fault priors (docs/accuracy.md, "Learned priors").

Two simulated sites work on two bundled field cases (the booster pump panel
and the car park barrier's logic supply):

* ``fuse site``: the handbook's failure mix except that fuses fail ten times
  as often (kind weight 3 -> 30);
* ``handbook site``: exactly the handbook's mix.

For each site a history of closed repair sessions is logged through the
logbook API (:func:`faultfind.learned_priors.simulate_history`, tagged with
the site), priors are learned from the logbook (``--scope tag:SITE``), and new
jobs from the same site are ranked with the handbook's priors, the learned
ones and the site's true mix (the best any table can do).  A new job is the
first look at a dead load: the readings of :data:`FIRST_LOOK`, on a board
drawn inside the tolerances with the planted fault (the site's mix; 20 % no
fault), shown as the default meter would.  Top-1: the leading hypothesis is
the planted fault (part and mode), or the healthy circuit when none was
planted.

Run ``python benchmarks/priors.py [--history N] [--jobs N] [--seed S] [--logbook PATH]``;
with ``--logbook`` the simulated histories are kept in that file (sessions
tagged ``fuse-site`` and ``handbook-site``) to try the commands on, e.g.
``faultfind log priors --logbook PATH --scope tag:fuse-site``; ``--jobs 0``
only writes the histories.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

if __package__ in (None, ""):  # run as a script: make the repository importable
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from faultfind.io.circuit_file import load_circuit  # noqa: E402
from faultfind.io.logbook import Logbook  # noqa: E402
from faultfind.learned_priors import from_logbook, simulate_history, site_table  # noqa: E402
from faultfind.model import Reading  # noqa: E402
from faultfind.prior_check import accuracy  # noqa: E402

__all__ = ["ROOT", "FIRST_LOOK", "SITES", "cases", "run_site", "main"]

ROOT = Path(__file__).resolve().parent.parent
#: The first readings at a dead load: (field case, [(plus, minus, label)]).
FIRST_LOOK = (
    ("booster_pump_panel", [("RUN", "0V", "contactor coil A1")]),
    ("car_park_barrier_logic_supply", [("ESTOP", "0V", "K1 coil A1"), ("+5V", "0V", "TP3 5 V rail")]),
)
#: The simulated sites' true mixes.
SITES = {"fuse site": {"fuse": 10.0}, "handbook site": {}}


def cases():
    """``[(circuit file, circuit, readings plan)]`` of :data:`FIRST_LOOK`."""
    out = []
    for name, plan in FIRST_LOOK:
        path = ROOT / "field_cases" / name / "circuit.toml"
        c = load_circuit(path)
        rds = [Reading("voltage", "dc", plus, minus, label=label) for plus, minus, label in plan]
        out.append((str(path), c, rds))
    return out


def run_site(book, site_name, history, jobs, seed):
    """Log ``history`` outcomes for the site, learn, and rank ``jobs`` new jobs.

    Returns
    -------
    (Accuracy or None when ``jobs`` is 0, Learned)
    """
    truth = site_table(SITES[site_name], label=site_name)
    cs = cases()
    tag = site_name.replace(" ", "-")
    rng = np.random.default_rng([seed, 1])
    for i in range(history):
        path, _, _ = cs[i % len(cs)]
        simulate_history(book, path, truth, 1, rng, tag=tag, unit=f"{tag}-{i % len(cs) + 1}")
    learned = from_logbook(book, f"tag:{tag}")
    if jobs <= 0:
        return None, learned
    tables = {"handbook": None, "learned": learned.table, "true mix": truth}
    acc = accuracy([(c, rd) for _, c, rd in cs], truth, tables, jobs, np.random.default_rng([seed, 2]))
    return acc, learned


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--history", type=int, default=300, help="logged outcomes per site (300)")
    ap.add_argument("--jobs", type=int, default=400, help="new jobs per site (400)")
    ap.add_argument("--seed", type=int, default=17)
    ap.add_argument("--logbook", metavar="PATH", help="keep the simulated histories in this logbook")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as d:
        with Logbook(args.logbook or Path(d) / "sites.sqlite") as book:
            rows = []
            for name in SITES:
                acc, learned = run_site(book, name, args.history, args.jobs, args.seed)
                if acc is None:
                    print(f"{name}: {args.history} outcomes logged in {book.path} "
                          f"(tag {name.replace(' ', '-')})")
                    continue
                fuse = next(r for r in learned.kinds if r.kind == "fuse")
                se = acc.stderr_of_difference("learned", "handbook")
                rows.append((name, acc.share("handbook"), acc.share("learned"), acc.share("true mix"),
                             acc.share("learned") - acc.share("handbook"), se, fuse.multiplier))
    if not rows:
        return 0
    print(f"{args.history} logged outcomes and {args.jobs} new jobs per site, seed {args.seed}, "
          f"{time.perf_counter() - t0:.0f} s")
    print("| site | handbook priors | learned priors | true mix | learned - handbook (± s.e.) "
          "| fuse weight learned/handbook |")
    print("|---|---|---|---|---|---|")
    for name, h, lr, t, d, se, m in rows:
        print(f"| {name} | {h * 100:.1f} % | {lr * 100:.1f} % | {t * 100:.1f} % | "
              f"{d * 100:+.1f} (± {se * 100:.1f}) points | x{m:.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
