"""Held-out check: priors learned from a site's logged outcomes pick the right fault more
often on new jobs from that site, and not less often on a handbook-like site.

The sites are simulated (benchmarks/priors.py, faultfind/prior_check.py): a
history of closed repair sessions is logged through the logbook API, priors
are learned from it (``--scope tag:SITE``), and new jobs -- the first look at
a dead load on two bundled field cases, a fault drawn from the site's true mix
on a board drawn inside the tolerances -- are ranked with the handbook's and
the learned priors.  The reference is the planted fault itself (the
simulation's ground truth).  The decision rule is statistical: a paired
difference of top-1 accuracy is called a gain when it exceeds twice its
standard error (common practice, no source).  The larger run and its figures
are in docs/accuracy.md.
"""

from __future__ import annotations

import numpy as np
import pytest

from benchmarks.priors import run_site
from faultfind.io.logbook import Logbook

HISTORY = 150   # per site: 300 logged outcomes in all
JOBS = 24       # new jobs per site
SEED = 23


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    b = Logbook(tmp_path_factory.mktemp("sites") / "sites.sqlite")
    yield b
    b.close()


def test_learned_priors_raise_top1_on_a_site_whose_fuses_fail_often(book):
    acc, learned = run_site(book, "fuse site", HISTORY, JOBS, SEED)
    assert learned.counts.sessions == HISTORY
    fuse = next(r for r in learned.kinds if r.kind == "fuse")
    assert fuse.culprits > 2 * fuse.expected     # the history shows the site's fuses
    gain = acc.share("learned") - acc.share("handbook")
    se = acc.stderr_of_difference("learned", "handbook")
    assert gain > 2 * se and gain > 0.15, (acc.share("handbook"), acc.share("learned"), se)
    # the learned table does about as well as the site's true mix (the best possible)
    assert acc.share("learned") >= acc.share("true mix") - 2 * max(
        acc.stderr_of_difference("learned", "true mix"), 1 / JOBS)


def test_learned_priors_do_not_lower_top1_on_a_handbook_like_site(book):
    acc, learned = run_site(book, "handbook site", HISTORY, JOBS, SEED + 1)
    assert learned.counts.sessions == HISTORY
    diff = acc.share("learned") - acc.share("handbook")
    se = acc.stderr_of_difference("learned", "handbook")
    assert diff >= -2 * se - 1e-12, (acc.share("handbook"), acc.share("learned"), se)
    # learned from a handbook-like history the table stays near the handbook's
    for r in learned.kinds:
        if r.expected > 5:
            assert 0.4 < r.multiplier < 2.5, (r.kind, r.multiplier)
    assert np.isfinite(se)
