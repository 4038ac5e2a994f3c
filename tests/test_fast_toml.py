"""The fast reader of plain circuit files answers exactly what tomllib answers.

Reference: Python's standard tomllib (TOML v1.0.0 reader), on the bundled
field cases, on a generated 3,000-part mesh file, and on random documents of
the plain subset (hypothesis).  Outside the subset the fast reader must give
up (None), never answer differently.
"""

from __future__ import annotations

import sys
import tomllib
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from faultfind.io.fast_toml import loads_subset

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))

from mesh import mesh, mesh_toml  # noqa: E402


def agrees(text):
    fast = loads_subset(text)
    try:
        ref = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        assert fast is None, "the fast reader accepted text tomllib rejects"
        return None
    assert fast is None or fast == ref
    return fast


def test_field_cases_agree_or_fall_back():
    for f in sorted(ROOT.glob("field_cases/*/circuit.toml")):
        agrees(f.read_text(encoding="utf-8"))


def test_generated_mesh_is_read_by_the_fast_path():
    text = mesh_toml(mesh(3000))
    assert agrees(text) is not None


def test_outside_the_subset_falls_back():
    for text in ('a = "x\\ny"\n', "[meta]\nb = 1\n", 'c = """\nmulti\n"""\n', "d = true\n",
                 "e = 1\nе = 2\ne = 3\n", 'f = {g = 1}\n', "h = [1, 2]\n", "i = 012\n", "j = inf\n"):
        assert agrees(text) is None


keys = st.from_regex(r"[A-Za-z_][A-Za-z0-9_-]{0,8}", fullmatch=True)
plain = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc"), blacklist_characters='"\\'),
                max_size=12)
numbers = st.one_of(st.integers(-10**9, 10**9).map(str),
                    st.floats(allow_nan=False, allow_infinity=False, width=32).map(repr))
values = st.one_of(plain.map(lambda s: f'"{s}"'), numbers,
                   st.lists(plain, max_size=4).map(lambda xs: "[" + ", ".join(f'"{x}"' for x in xs) + "]"))
tables = st.lists(st.dictionaries(keys, values, max_size=5), max_size=4)


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(keys, values, max_size=4), tables, st.booleans())
def test_random_plain_documents(top, parts, comments):
    lines = [f"{k} = {v}" + ("  # note" if comments else "") for k, v in top.items()]
    for t in parts:
        lines.append("[[part]]")
        lines += [f"{k} = {v}" for k, v in t.items()]
    text = "\n".join(lines) + "\n"
    agrees(text)
