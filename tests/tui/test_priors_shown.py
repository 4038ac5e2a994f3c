"""The bench says when learned priors (not the handbook's) ordered its findings.

Outside reference: the booster pump panel as drawn (field_cases/, formats.md
semantics): with the contactor coil at 0 V the fuse F1 and the interlocks
S1..S3 are in series, so the reading cannot tell them apart (Kirchhoff's
current law) and only the priors order them; a technician must be able to see
which priors did (docs/priors.md).
"""

from __future__ import annotations

from faultfind.learned_priors import from_logbook
from faultfind.logbook import Logbook

from .conftest import BOOSTER, make_app, run, settle, text_of, to_bench, type_reading


def test_the_findings_say_which_learned_priors_ordered_them(tmp_path):
    with Logbook(tmp_path / "site.sqlite") as book:
        for _ in range(12):
            s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
            book.close_session(s.id, [("F1", "open")])
        learned = from_logbook(book, "all").table
    seen = {}

    async def scenario(name, priors):
        where = tmp_path / name
        where.mkdir()
        app = make_app(where, priors=priors)
        async with app.run_test(size=(100, 30)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V RUN 0.0001")
            await settle(pilot)
            seen[name] = (text_of(app.screen.query_one("#findings-body")), app.screen.bench.stored)

    run(lambda: scenario("learned", learned))
    run(lambda: scenario("handbook", None))
    shown, stored = seen["learned"]
    assert stored.document["priors"]["outcomes"] == 12
    assert "with priors from logbook site.sqlite, all sessions (12 outcomes)" in shown
    assert "with priors from" not in seen["handbook"][0]   # the handbook's: nothing to say
    assert "diagnosed on circuit v1" in seen["handbook"][0]
