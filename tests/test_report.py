"""Tests of faultfind.io.report: readings against their bands, Markdown and HTML reports."""

import html
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pytest

from faultfind.errors import InputError
from faultfind.logbook import SAFETY_CAUTION, Logbook
from faultfind.report import (STATUS, assess_session, chart_svg, html_report,
                                 markdown_report, report_format, write_report)

ROOT = Path(__file__).resolve().parent.parent
BOOSTER = ROOT / "field_cases" / "booster_pump_panel"

# An invented cooler controller: a 24 V supply, a 4k7/4k7 divider to node A, a defrost
# thermostat contact S1 drawn open (A to DT, R3 to ground), a fuse and a 12 Ω heater.
CC3 = """\
format = 1
title = "Cooler controller CC-3: defrost input"
ground = "0V"

[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["+24V", "0V"]
value = "24 V"
tolerance = "1%"

[[part]]
ref = "R1"
kind = "resistor"
nodes = ["+24V", "A"]
value = "4k7"
tolerance = "1%"

[[part]]
ref = "R2"
kind = "resistor"
nodes = ["A", "0V"]
value = "4k7"
tolerance = "1%"

[[part]]
ref = "S1"
kind = "switch"
nodes = ["A", "DT"]
state = "open"
label = "defrost thermostat contact"

[[part]]
ref = "R3"
kind = "resistor"
nodes = ["DT", "0V"]
value = "10k"
tolerance = "1%"

[[part]]
ref = "F1"
kind = "fuse"
nodes = ["+24V", "HTR"]

[[part]]
ref = "RH1"
kind = "resistor"
nodes = ["HTR", "0V"]
value = "12"
tolerance = "10%"
"""

EVIL = '<script>alert("x")</script> & | *bold* `tick`'


@pytest.fixture
def session(tmp_path):
    circuit = tmp_path / "cc3.toml"
    circuit.write_text(CC3, encoding="utf-8")
    with Logbook(tmp_path / "book.sqlite") as book:
        s = book.start_session(circuit, unit="CC-3", technician=EVIL, location="Store 4")
        add = book.add_reading
        add(s.id, quantity="voltage", plus="A", value="12.00", label="TP-A")
        add(s.id, quantity="voltage", plus="A", value="11.00", label=EVIL)
        add(s.id, quantity="resistance", part="S1", setup="lifted", value="OL")
        add(s.id, quantity="resistance", part="S1", setup="lifted", value="0.2")
        add(s.id, quantity="resistance", part="F1", value="OL")
        add(s.id, quantity="voltage", plus="A", value="13.5")
        book.strike_reading(s.id, 6, "probe on +24V by mistake")
        yield book, s.id


def test_expected_value_is_the_loaded_divider_by_ohms_law(session):
    # Ohm's law with the meter as a 10 MΩ load across R2 (the default profile's input
    # resistance, a typical handheld DMM figure, from memory): V = 24 Rp / (R1 + Rp).
    book, sid = session
    rows = assess_session(book.get_session(sid))
    rp = 1 / (1 / 4700 + 1 / 10e6)
    assert rows[0].expected == pytest.approx(24 * rp / (4700 + rp), rel=1e-9)
    assert rows[0].low < rows[0].expected < rows[0].high
    # A ±1 % supply alone moves node A by ±1 %: the band is at least that wide (95 %
    # coverage of a rectangular ±1 % is ±0.95 %) and far narrower than ±5 %.
    half = (rows[0].high - rows[0].low) / 2 / rows[0].expected
    assert 0.0095 * 0.99 < half < 0.05


def test_status_of_each_reading(session):
    book, sid = session
    rows = assess_session(book.get_session(sid))
    # 12.00 V in the band; 11.00 V below it; an open contact read lifted shows OL, as a
    # healthy open contact does (common practice (no source)); 0.2 Ω across an open-drawn
    # contact is a welded contact: below "OL"; a fuse reading OL is above its band.
    assert [a.status for a in rows] == ["in", "low", "in", "low", "high", "struck"]
    assert rows[2].expected is None and rows[2].healthy_ol
    assert rows[2].band_text() == "OL (no path)"
    assert [a.symbol for a in rows] == ["✓", "▼", "✓", "▼", "▲", "✗"]


def test_edge_status_uses_the_meters_accuracy(tmp_path):
    # Default profile: ±(0.5 % of reading + 2 counts), 6000 counts, so near 24 V the step is
    # 0.01 V (6000 x 0.01 V = 60 V exceeds it; 6000 x 1 mV = 6 V does not) and the limit
    # 0.005 x 24.3 + 0.02 = 0.14 V (formats.md section 3 range rule).
    circuit = tmp_path / "cc3.toml"
    circuit.write_text(CC3, encoding="utf-8")
    with Logbook(tmp_path / "b.sqlite") as book:
        s = book.start_session(circuit, unit="CC-3")
        probe = book.add_reading(s.id, quantity="voltage", plus="HTR", value="24")
        high = assess_session(book.get_session(s.id))[0].high
        book.add_reading(s.id, quantity="voltage", plus="HTR", value=f"{high + 0.04:.2f}")
        book.add_reading(s.id, quantity="voltage", plus="HTR", value=f"{high + 0.30:.2f}")
        rows = assess_session(book.get_session(s.id))
    assert probe.seq == 1
    assert rows[1].slack == pytest.approx(0.005 * rows[1].logged.reading.value + 0.02)
    assert [a.status for a in rows[1:]] == ["edge", "high"]


def test_markdown_report_has_every_section(session):
    book, sid = session
    book.store_diagnosis(sid)
    book.close_session(sid, ["S1:short"], confirmed_by="0.2 Ω lifted", action="replaced S1")
    text = markdown_report(book.get_session(sid), generated_at="2026-03-04T08:00:00+00:00")
    for head in ("# Work order report: CC-3", "## Circuit", "## Readings against a healthy unit",
                 "## Findings", "## Outcome", "## Safety"):
        assert head in text
    s = book.get_session(sid)
    assert s.circuit_sha256 in text
    assert SAFETY_CAUTION in text and "NOT RECORDED" in text
    assert "| Found | S1 short |" in text and "replaced S1" in text
    assert "✗ struck out: probe on +24V by mistake" in text
    for h in s.latest_diagnosis.document["hypotheses"]:
        assert f"{h['probability'] * 100:.1f} %" in text


def test_markdown_tables_survive_user_text(session):
    # GitHub Flavored Markdown spec, tables: an unescaped | starts a new cell; "\|" does not.
    book, sid = session
    text = markdown_report(book.get_session(sid))
    lines = text.splitlines()
    head = next(i for i, line in enumerate(lines) if line.startswith("| # | time |"))
    table = []
    for line in lines[head:]:
        if not line.startswith("|"):
            break
        table.append(line)
    cells = [len(re.findall(r"(?<!\\)\|", line)) for line in table]
    assert len(table) == 2 + 6 and len(set(cells)) == 1
    assert "<script>" not in text and "&lt;script&gt;" in text


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.attrs = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += attrs


def test_html_report_is_self_contained_and_escapes_user_text(session):
    book, sid = session
    book.store_diagnosis(sid)
    page = html_report(book.get_session(sid))
    parser = _Tags()
    parser.feed(page)
    # HTML Living Standard: text is escaped with &lt; &gt; &amp; so no markup is injected.
    assert "script" not in parser.tags
    assert "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp;" in page
    assert page.startswith("<!DOCTYPE html>") and page.rstrip().endswith("</html>")
    # Nothing fetched from elsewhere: no src/href attributes, no CSS imports or url().
    assert not [a for a in parser.attrs if a[0] in ("src", "href")]
    assert "@import" not in page and "url(" not in page
    assert SAFETY_CAUTION.splitlines()[1].replace("'", "&#x27;") in page


def test_svg_chart_is_well_formed_with_one_row_per_reading(session):
    # W3C XML 1.0 well-formedness, checked by the standard library's XML parser.
    book, sid = session
    rows = assess_session(book.get_session(sid))
    svg = chart_svg(rows)
    root = ET.fromstring(svg)
    ns = {"s": "http://www.w3.org/2000/svg"}
    groups = root.findall("s:g", ns)
    assert len(groups) == len(rows) == 6
    assert root.get("role") == "img" and root.find("s:title", ns) is not None
    for g, a in zip(groups, rows):
        texts = [t.text for t in g.findall("s:text", ns)]
        # Colour is never the only carrier: the symbol and words are written in each row.
        assert f"{a.symbol} {a.words.split(' (')[0]}" in texts
        assert g.find("s:title", ns).text.startswith(f"{a.logged.seq}.")
    ol_rows = [g for g, a in zip(groups, rows) if a.logged.reading.overrange]
    assert all("OL" in [t.text for t in g.findall("s:text", ns)] for g in ol_rows)
    assert "healthy unit reads OL" in ET.tostring(groups[2], encoding="unicode")
    html_svg = html_report(book.get_session(sid))
    inner = html_svg[html_svg.index("<svg"):html_svg.index("</svg>") + 6]
    ET.fromstring(inner)


def test_marker_sits_inside_the_band_bar_for_an_in_band_reading(session):
    book, sid = session
    rows = assess_session(book.get_session(sid))
    root = ET.fromstring(chart_svg(rows[:1]))
    ns = {"s": "http://www.w3.org/2000/svg"}
    g = root.find("s:g", ns)
    bar = [r for r in g.findall("s:rect", ns) if r.get("height") == "10"][0]
    x0, w = float(bar.get("x")), float(bar.get("width"))
    dot = float(g.find("s:circle", ns).get("cx"))
    assert x0 <= dot <= x0 + w


def test_report_notes_readings_added_after_the_diagnosis(session):
    book, sid = session
    book.store_diagnosis(sid)
    book.add_reading(sid, quantity="voltage", plus="A", value="12.01")
    text = markdown_report(book.get_session(sid))
    assert "added after this diagnosis" in text


def test_report_of_a_fresh_session(tmp_path):
    with Logbook(tmp_path / "b.sqlite") as book:
        s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2", caution_acknowledged=True)
        text = markdown_report(book.get_session(s.id))
        page = html_report(book.get_session(s.id))
    assert "No readings were logged." in text and "No diagnosis was stored" in text
    assert "open: no outcome recorded yet" in text and "NOT RECORDED" not in text
    assert "No readings." in page


def test_write_report_picks_the_format_from_the_suffix(session, tmp_path):
    book, sid = session
    s = book.get_session(sid)
    assert write_report(s, tmp_path / "r.html") == "html"
    assert (tmp_path / "r.html").read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert write_report(s, tmp_path / "r.md") == "markdown"
    assert write_report(s, tmp_path / "r.txt", "markdown") == "markdown"
    with pytest.raises(InputError) as e:
        report_format(tmp_path / "r.pdf")
    assert e.value.file == str(tmp_path / "r.pdf")
    with pytest.raises(InputError) as e:
        report_format(None, "pdf")
    assert e.value.key == "format"
    with pytest.raises(InputError):
        write_report(s, tmp_path / "no" / "such" / "dir" / "r.md")
    with pytest.raises(InputError):
        markdown_report("not a session")


def test_status_table_is_complete():
    assert set(STATUS) == {"in", "edge", "high", "low", "struck"}
    assert len({v[0] for v in STATUS.values()}) == len(STATUS)  # distinct symbols


def test_next_readings_are_listed_while_the_session_is_open(session):
    book, sid = session
    doc = book.store_diagnosis(sid).document
    text = markdown_report(book.get_session(sid))
    suggested = doc.get("suggestions") or []
    assert ("Next readings worth taking:" in text) == bool(suggested)
    for g in suggested[:3]:
        assert g["why"] in html.unescape(text.replace("\\", ""))
    book.close_session(sid, [])
    assert "Next readings worth taking" not in markdown_report(book.get_session(sid))
