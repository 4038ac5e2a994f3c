"""Calibration of the fault posteriors on simulated cases.

Method: the reliability diagram (calibration curve) of probability
forecasts -- DeGroot & Fienberg, "The comparison and evaluation of
forecasters", The Statistician 32 (1983); Murphy & Winkler, "Reliability of
subjective probability forecasts of precipitation and temperature", Applied
Statistics 26 (1977) (from memory).  Forecasts are grouped into probability
bins; a forecaster is well calibrated when, in each bin, the observed
frequency of the event equals the mean forecast probability.  Here every
hypothesis the engine scores (:func:`faultfind.engine.hypotheses.rank`, with
probabilities normalized over all hypotheses considered) is a forecast that
"this is what is wrong with the board", and the event is that it matches the
planted truth: same part and same mode for a planted fault (any drifted
value), the empty hypothesis for a healthy board.  Pairs of faults are never
right (one fault is planted).

The cases come from benchmarks/accuracy.py (seeded): random realistic circuits
of 5-20 parts, the readings a technician takes, a healthy board inside the
tolerances, no fault with probability P_HEALTHY (the engine's own prior), else
one fault drawn from the engine's own failure-mode priors.  Simulating from the
model's prior is what makes calibration a fair demand of a Bayesian posterior
(the drifted values alone follow a different law than the engine assumes:
0.3-0.7 or 1.5-5 times nominal).

Tolerances (stated): in each bin with at least MIN_COUNT forecasts,
``|observed frequency - mean probability| <= TOL`` (0.15, about two binomial
standard errors of a bin of 40 forecasts at p = 0.5); and the top
hypothesis's mean probability exceeds its observed accuracy by at most
OVERCONFIDENCE (0.10).  Both are common practice (no source) for a check of
this size.
"""

from __future__ import annotations

import functools
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # the benchmarks/ folder

from benchmarks.accuracy import draw_case  # noqa: E402
from faultfind.engine.hypotheses import rank  # noqa: E402
from faultfind.io.meters_file import meters_with_default  # noqa: E402

SEED = 7310
N_CASES = 520
MAX_PARTS = 20
BINS = (0.0, 0.2, 0.5, 0.8, 0.95, 1.0 + 1e-12)
MIN_COUNT = 40
TOL = 0.15
OVERCONFIDENCE = 0.10

METERS = meters_with_default()


def _right(h, fault) -> bool:
    if fault is None:
        return not h.faults
    return len(h.faults) == 1 and h.faults[0].ref == fault[0] and h.faults[0].mode == fault[1]


@functools.lru_cache(maxsize=1)
def forecasts():
    """(probability, right) of every hypothesis, and (top probability, top right) per case."""
    probs, hits, top_p, top_hit = [], [], [], []
    for i in range(N_CASES):
        case = draw_case(SEED, i, METERS, max_parts=MAX_PARTS)
        ranking = rank(case["circuit"], case["readings"], METERS)
        for h in ranking.hypotheses:
            probs.append(h.probability)
            hits.append(_right(h, case["fault"]))
        top = ranking.hypotheses[0]
        top_p.append(top.probability)
        top_hit.append(_right(top, case["fault"]))
    return np.array(probs), np.array(hits, dtype=float), np.array(top_p), np.array(top_hit, dtype=float)


def reliability_table():
    """Rows (low, high, count, mean probability, observed frequency) of the reliability diagram."""
    p, hit, _, _ = forecasts()
    rows = []
    for lo, hi in zip(BINS[:-1], BINS[1:]):
        sel = (p >= lo) & (p < hi)
        n = int(sel.sum())
        rows.append((lo, min(hi, 1.0), n, float(p[sel].mean()) if n else float("nan"),
                     float(hit[sel].mean()) if n else float("nan")))
    return rows


def format_table() -> str:
    lines = ["| probability bin | hypotheses | mean probability | observed frequency |",
             "|---|---|---|---|"]
    for lo, hi, n, mp, fr in reliability_table():
        lines.append(f"| {lo:.2f}-{hi:.2f} | {n} | {mp:.3f} | {fr:.3f} |")
    _, _, tp, th = forecasts()
    lines.append(f"\ntop hypothesis: mean probability {tp.mean():.3f}, observed accuracy "
                 f"{th.mean():.3f} over {tp.size} cases")
    return "\n".join(lines)


def test_every_case_has_a_true_hypothesis_scored():
    # Sanity of the set-up (definition of the event): the planted truth must be
    # among the hypotheses the engine scores, else no bin could be calibrated.
    # Total probability is 1 over all hypotheses of a case (Kolmogorov's axioms).
    p, hit, _, _ = forecasts()
    assert hit.sum() >= 0.95 * N_CASES
    assert p.sum() == pytest.approx(N_CASES, rel=1e-9)


@pytest.mark.parametrize("b", range(len(BINS) - 1))
def test_reliability_bin(b):
    # Reliability diagram (DeGroot & Fienberg 1983; Murphy & Winkler 1977; from
    # memory): observed frequency within TOL of the mean forecast in the bin.
    lo, hi, n, mean_p, freq = reliability_table()[b]
    if n < MIN_COUNT:
        # a sparse bin says nothing either way; the populated bins must exist
        populated = sum(1 for row in reliability_table() if row[2] >= MIN_COUNT)
        assert populated >= 3, f"only {populated} populated bins: too few cases"
        return
    assert abs(freq - mean_p) <= TOL, (
        f"bin {lo:.2f}-{hi:.2f}: {n} hypotheses, mean probability {mean_p:.3f}, "
        f"observed frequency {freq:.3f}")


def test_top_hypothesis_not_overconfident():
    # Over-confidence: a calibrated forecaster's mean stated probability of its
    # first choice equals that choice's hit rate (Murphy & Winkler 1977, from
    # memory); allow OVERCONFIDENCE above it.
    _, _, tp, th = forecasts()
    assert tp.mean() - th.mean() <= OVERCONFIDENCE, (
        f"top hypothesis: mean probability {tp.mean():.3f}, accuracy {th.mean():.3f}")


def test_bins_cover_the_scale():
    # The check must be able to fail at both ends: the confident bin
    # (p >= 0.95) and the uncertain middle must both hold forecasts.
    rows = reliability_table()
    print(format_table())  # the table docs/accuracy.md quotes (shown with pytest -s)
    assert rows[-1][2] >= MIN_COUNT
    assert sum(r[2] for r in rows[1:4]) >= MIN_COUNT


if __name__ == "__main__":
    print(format_table())
