"""The base XML writer (watcher/xlsx/xmlwriter.py): escaping against the XML 1.0 specification (W3C,
"Extensible Markup Language (XML) 1.0", 5th edition, 2008: §2.2 the ``Char`` production, §2.4 character
data, §3.3.3 attribute-value normalisation) and the Office Open XML string escape (ECMA-376 Part 1,
§22.9.2.19 ST_Xstring), checked by parsing the output with lxml (libxml2, a strict parser) and decoding it
with a slow reference decoder written here; numbers with round-trip precision; the low-level methods."""
from __future__ import annotations

import re
import struct

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lxml import etree

from watcher.xlsx import xmlwriter
from watcher.xlsx.chart import _ChartWriter
from watcher.xlsx.spec import Cells, SheetSpec
from watcher.xlsx.worksheet import _WorksheetWriter
from watcher.xlsx.xmlwriter import DECLARATION, XMLWriter, escape_attr, escape_data, number_text, number_texts


def _is_xml_char(cp: int) -> bool:
    """XML 1.0 (2008) §2.2:
    Char ::= #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD] | [#x10000-#x10FFFF]."""
    return (cp in (0x9, 0xA, 0xD) or 0x20 <= cp <= 0xD7FF or 0xE000 <= cp <= 0xFFFD
            or 0x10000 <= cp <= 0x10FFFF)


def _decode_xstring(text: str) -> str:
    """ECMA-376 Part 1, §22.9.2.19: each ``_xHHHH_`` stands for the character with code HHHH."""
    return re.sub(r"_x([0-9A-Fa-f]{4})_", lambda m: chr(int(m.group(1), 16)), text)


def _round_trip(text: str) -> tuple[str, str]:
    """``text`` written as element content and as an attribute value, parsed back and decoded."""
    w = XMLWriter()
    w._data("a", text, (("b", text),))
    el = etree.fromstring(w.getvalue())
    return _decode_xstring(el.text or ""), _decode_xstring(el.get("b"))


# -- the five XML specials ---------------------------------------------------------------------------
def test_the_five_specials_in_content_and_attributes():
    text = "a&b<c>d\"e'f"
    assert escape_data(text) == "a&amp;b&lt;c&gt;d\"e'f"     # quotes need no escape in content (§2.4)
    assert escape_attr(text) == "a&amp;b&lt;c&gt;d&quot;e'f"  # ' is safe inside double quotes (§2.3)
    assert _round_trip(text) == (text, text)


def test_entity_text_is_not_taken_for_an_entity():
    assert escape_data("&amp; &#65;") == "&amp;amp; &amp;#65;"
    assert _round_trip("&amp; &#65;") == ("&amp; &#65;", "&amp; &#65;")


# -- characters XML 1.0 cannot carry -------------------------------------------------------------------
@pytest.mark.parametrize("cp", [*range(0x20), 0x7F, 0xD800, 0xDBFF, 0xDC00, 0xDFFF, 0xFFFE, 0xFFFF, 0xFFFD,
                                0x10000, 0x10FFFF])
def test_every_control_character_survives(cp):
    ch = chr(cp)
    esc = escape_data(ch)
    if cp == 0xD:  # a legal Char, but a parser turns it into a line feed (§2.11): written escaped
        assert esc == "_x000D_"
    elif _is_xml_char(cp):
        assert esc == ch
    else:
        assert esc == f"_x{cp:04X}_"
    assert all(_is_xml_char(ord(c)) for c in esc)
    text = f"x{ch}y"
    assert _round_trip(text) == (text, text)


def test_tab_and_line_feed_keep_in_attributes():
    # §3.3.3: a parser normalises a literal tab or line feed in an attribute value to a space
    assert escape_attr("a\tb\nc") == "a&#9;b&#10;c"
    assert _round_trip("a\tb\nc") == ("a\tb\nc", "a\tb\nc")


def test_a_literal_escape_reads_back_as_itself():
    assert escape_data("_x0041_ and _xFFFF_") == "_x005F_x0041_ and _x005F_xFFFF_"
    assert _round_trip("pay_x0041_due") == ("pay_x0041_due", "pay_x0041_due")
    assert escape_data("_x41_ _xZZZZ_") == "_x41_ _xZZZZ_"  # not the escape's shape: left alone


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=st.characters(codec=None, min_codepoint=0, max_codepoint=0x10FFFF)))
def test_any_text_round_trips(text):
    # property test on generated text (hypothesis), any code point including surrogates
    assert _round_trip(text) == (text, text)


# -- numbers -----------------------------------------------------------------------------------------
def test_number_text_by_hand():
    assert [number_text(v) for v in (3.0, -7.0, 0.0, 2.0**53, 0.1, -0.0, 5e-324, 1e300, 2.0**53 + 2.0)] == \
        ["3", "-7", "0", "9007199254740992", "0.1", "-0.0", "5e-324", "1e+300", "9007199254740994.0"]
    assert [number_text(v) for v in (float("nan"), float("inf"), -float("inf"))] == [None, None, None]


def test_number_text_reads_back_bit_exact():
    # invented data: seeded random bit patterns cover subnormals, huge and tiny doubles of both signs
    rng = np.random.default_rng(11)
    bits = rng.integers(0, 2**64, size=20_000, dtype=np.uint64)
    values = bits.view(np.float64)
    for v in values[np.isfinite(values)].tolist():
        text = number_text(v)
        assert struct.pack("<d", float(text)) == struct.pack("<d", v), text


def _many_doubles() -> np.ndarray:
    # invented data: seeded random bit patterns (every exponent, subnormals), ordinary magnitudes, one
    # decimal, integers, and the edges of repr's positional range (1e-4, 1e16) and of exact integers
    rng = np.random.default_rng(12)
    bits = rng.integers(0, 2**64, size=100_000, dtype=np.uint64).view(np.float64)
    edges = [1e-4, np.nextafter(1e-4, 0), 1e16, np.nextafter(1e16, 0), 2.0**53, 2.0**53 + 2, -(2.0**53),
             0.0, -0.0, 5e-324, 1.7976931348623157e308, 0.1, 1 / 3, 3.0, -7.0, 1e22, 1e23]
    x = np.concatenate([bits, rng.standard_normal(100_000) * 10.0 ** rng.integers(-8, 20, 100_000),
                        np.round(rng.normal(800, 90, 50_000), 1), rng.integers(-10**9, 10**9, 20_000), edges])
    return x[np.isfinite(x)]


@pytest.mark.parametrize("fast", [True, False], ids=["orjson", "repr"])
def test_number_texts_is_number_text_in_bulk(monkeypatch, fast):
    # The bulk texts must be the scalar rule's texts character for character (one rule, two speeds),
    # with orjson and without it; and they read back bit-exact (Python's float(), a correctly rounded
    # decimal-to-double conversion).
    if not fast:
        monkeypatch.setattr(xmlwriter, "_orjson", None)
    else:
        assert xmlwriter._orjson is not None  # orjson is a dependency; the fast path must be tested
    x = _many_doubles()
    got = number_texts(x)
    assert got.dtype == object and len(got) == len(x)
    assert got.tolist() == [number_text(v) for v in x.tolist()]
    back = np.array(got.tolist(), dtype=np.float64)
    assert np.array_equal(back.view(np.int64), x.view(np.int64))
    assert number_texts(np.array([3.0, 4.0, -0.0])).tolist() == ["3", "4", "-0.0"]
    assert number_texts(np.array([], dtype=float)).tolist() == []
    assert number_texts(np.arange(1, 4, dtype=float)).tolist() == ["1", "2", "3"]


def test_number_texts_respells_orjson_outside_its_repr_range(monkeypatch):
    # Below 1e-4 and from 1e16 orjson spells the shortest digits otherwise than repr ('1.5e-7',
    # '0.000015'); the bulk path respells its texts, so no number may take the slow repr path there
    # (the scalar rule, number_text, still calls repr itself and is the reference)
    assert xmlwriter._orjson is not None
    x = _many_doubles()
    rng = np.random.default_rng(13)  # invented data: the 1e-5 .. 1e-4 band, its edges and signs
    edges = [1e-5, np.nextafter(1e-5, 0), np.nextafter(1e-5, 1), 2e-5, 1.5e-5, 9.999999999999999e-05]
    band = np.concatenate([rng.uniform(1e-5, 1e-4, 20_000), edges])
    x = np.concatenate([x, band, -band])
    ax = np.abs(x)
    x = x[((ax < 1e-4) | (ax >= 1e16)) & (x != np.trunc(x))]

    def no_repr(_x):
        raise AssertionError("a number went through repr")

    monkeypatch.setattr(xmlwriter, "_repr_texts", no_repr)
    assert number_texts(x).tolist() == [number_text(v) for v in x.tolist()]


def test_number_attributes_and_elements_take_the_fast_path():
    w = XMLWriter()
    w._empty("c:max", (("val", 1.0),))
    w._empty("c:min", (("val", 0.25),))
    w._number("v", 42)
    w._number("v", "0.1", (("i", 3),))
    assert w.take() == '<c:max val="1"/><c:min val="0.25"/><v>42</v><v i="3">0.1</v>'


# -- the low-level methods ------------------------------------------------------------------------------
def test_low_level_methods_and_take():
    w = XMLWriter()
    w._declaration()
    w._start("root", (("xmlns", "urn:x"), ("n", 2)))
    w._empty("e")
    w._data("d", "1 < 2", (("q", 'say "hi"'),))
    w._raw("<r/>")
    w._end("root")
    text = w.take()
    assert text == (DECLARATION + '<root xmlns="urn:x" n="2"><e/><d q="say &quot;hi&quot;">1 &lt; 2</d><r/>'
                    "</root>")
    assert w.take() == ""  # take() empties the writer
    assert etree.fromstring(text.encode()).find("{urn:x}d").text == "1 < 2"


def test_a_part_writer_method_can_be_called_alone():
    spec = SheetSpec("S", (Cells(0, 0, (("x", "general"),)),), freeze=(2, 1))
    ws = _WorksheetWriter(spec, selected=True, drawing_rid=None)
    ws._write_pane()
    assert ws.take() == ('<pane xSplit="1" ySplit="2" topLeftCell="B3" activePane="bottomRight" '
                         'state="frozen"/><selection pane="bottomRight" activeCell="B3" sqref="B3"/>')
    chart = _ChartWriter(None, spec, False)
    chart._write_scaling((0, 1))
    assert chart.take() == ('<c:scaling><c:orientation val="minMax"/><c:max val="1"/><c:min val="0"/>'
                            "</c:scaling>")
