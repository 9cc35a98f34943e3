"""The small base XML writer of the parts tocsin makes whole (worksheets, charts, drawings).

A part is written by a subclass of :class:`XMLWriter` whose ``_write_<element>()`` methods call the five
low-level ones -- :meth:`~XMLWriter._start`, :meth:`~XMLWriter._empty`, :meth:`~XMLWriter._data`,
:meth:`~XMLWriter._number` and :meth:`~XMLWriter._end` -- in schema order. Pieces of text collect in a
list; :meth:`~XMLWriter.take` hands them over (and empties the list), so a big part can be streamed.

Escaping (XML 1.0, W3C Recommendation, 5th edition, 2008, §2.2 ``Char`` and §2.4 character data):

* element text: ``&``, ``<`` and ``>`` as entity references; in attribute values also ``"`` (and tab and
  line feed as character references, so a parser does not normalise them to spaces); ``'`` needs no
  escape inside double quotes;
* a character XML 1.0 cannot carry (C0 controls except tab, line feed and carriage return; unpaired
  surrogates; U+FFFE, U+FFFF) and the carriage return (which parsers turn into a line feed) are
  written as ``_xHHHH_``, the escape of Office Open XML strings (ECMA-376 Part 1, §22.9.2.19
  ST_Xstring); a literal ``_xHHHH_`` in the text gets its underscore escaped (``_x005F_xHHHH_``) so it
  reads back as itself;
* numbers take a fast path without any escaping (:func:`number_text`: integers exactly, other doubles
  with the shortest text that reads back as the same double; :func:`number_texts` the same for a whole
  array at once).

Formatting numbers in bulk: Python's ``float.__repr__`` (David Gay's shortest round-trip digits) costs
0.3-0.6 us per full-precision double, most of the time of a million-row sheet. ``orjson`` (a JSON library,
installed with tocsin; optional) formats a numpy array of doubles in one call with the same shortest
digits at about a tenth of that. Its text equals ``repr`` character for character where
1e-4 <= |x| < 1e16 (found on 8 million random doubles; tests/test_xlsx_xmlwriter.py checks 270,000);
outside that range it spells the same digits differently ('1.5e-7' for '1.5e-07', '0.000015' for
'1.5e-05' from 1e-5 to 1e-4), and those texts are respelled (string operations on the joined texts, a
slice per number from 1e-5 to 1e-4: a third to a tenth of ``repr``'s time; a text of another form sends
its group through ``repr``). The written bytes are therefore the same with or without ``orjson``.
"""
from __future__ import annotations

import math
import re
from collections.abc import Iterable

import numpy as np

try:
    import orjson as _orjson
except ImportError:  # optional: the same texts through repr, only slower
    _orjson = None

__all__ = ["DECLARATION", "XMLWriter", "escape_attr", "escape_data", "number_text", "number_texts"]

DECLARATION = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\r\ud800-\udfff\ufffe\uffff]")
_LITERAL_ESCAPE = re.compile(r"_(x[0-9A-Fa-f]{4}_)")
_TWO_53 = 2.0**53

Attrs = Iterable[tuple[str, object]]


def _hex_escape(m: re.Match) -> str:
    return f"_x{ord(m.group()):04X}_"


def escape_data(text: str) -> str:
    """``text`` escaped for element content (see the module docstring)."""
    if "_x" in text:
        text = _LITERAL_ESCAPE.sub(r"_x005F_\1", text)
    text = _NOT_XML.sub(_hex_escape, text)
    if "&" in text:
        text = text.replace("&", "&amp;")
    if "<" in text:
        text = text.replace("<", "&lt;")
    if ">" in text:
        text = text.replace(">", "&gt;")
    return text


def escape_attr(text: str) -> str:
    """``text`` escaped for an attribute value in double quotes (see the module docstring)."""
    text = escape_data(text)
    if '"' in text:
        text = text.replace('"', "&quot;")
    if "\t" in text or "\n" in text:
        text = text.replace("\t", "&#9;").replace("\n", "&#10;")
    return text


def number_text(v: float) -> str | None:
    """A number as XML text with round-trip precision: integers exactly ('3', not '3.0'), other doubles
    as the shortest text that reads back as the same double ('0.1', '-0.0', '5e-324'); None for NaN and
    infinities, which XML numbers cannot hold."""
    if not math.isfinite(v):
        return None
    if v == int(v) and abs(v) <= _TWO_53 and not (v == 0 and math.copysign(1, v) < 0):
        return str(int(v))
    return repr(float(v))


def _repr_texts(x: np.ndarray) -> list[str]:
    if x.dtype.kind == "i":
        return list(map(int.__repr__, x.tolist()))
    return list(map(float.__repr__, x.tolist()))


def _fast_texts(x: np.ndarray) -> list[str]:
    """The texts of a contiguous int64 or float64 array: one ``orjson`` call, else ``repr`` each."""
    if _orjson is not None and x.size:
        try:
            return _orjson.dumps(x, option=_orjson.OPT_SERIALIZE_NUMPY)[1:-1].decode("ascii").split(",")
        except (TypeError, ValueError):  # an array orjson will not take: the slow path below
            pass
    return _repr_texts(x)


def _exponent_texts(texts: list[str]) -> list[str] | None:
    """orjson's texts of doubles with |x| < 1e-5 or >= 1e16 in repr's spelling: the same digits, a
    one-digit negative exponent padded ('1.5e-7' -> '1.5e-07'); None if a text is not of that form.
    A few passes of ``str.replace`` over the joined texts: no Python call per number."""
    s = ",".join(texts) + ","
    if s.count("e") != len(texts):
        return None
    for d in "123456789":
        s = s.replace(f"e-{d},", f"e-0{d},")
    return s[:-1].split(",")


def _positional_texts(texts: list[str]) -> list[str] | None:
    """orjson's texts of doubles with 1e-5 <= |x| < 1e-4 ('0.0000123', '-0.00004') in repr's spelling
    ('1.23e-05', '-4e-05'); None if a text is not of that form (checked on the joined texts). A string
    slice per number: a third of ``repr``'s time."""
    joined = "," + ",".join(texts)
    if (joined.count(",0.0000") + joined.count(",-0.0000") != len(texts) or ",0.00000" in joined
            or ",-0.00000" in joined or "e" in joined):
        return None
    return [(f"-{t[7]}.{t[8:]}e-05" if len(t) > 8 else f"-{t[7]}e-05") if t[0] == "-" else
            (f"{t[6]}.{t[7:]}e-05" if len(t) > 7 else f"{t[6]}e-05") for t in texts]


def number_texts(x: np.ndarray) -> np.ndarray:
    """:func:`number_text` of every element of an array of **finite** doubles, as an object array of
    str: integers of magnitude up to 2**53 exactly ('3'), every other double as the shortest text that
    reads back as the same double, character for character ``repr`` ('0.1', '-0.0', '1e-05')."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    out = np.empty(x.shape[0], dtype=object)
    if not x.size:
        return out
    whole = (x == np.trunc(x)) & (np.abs(x) <= _TWO_53) & ~((x == 0) & np.signbit(x))
    if whole.all():
        out[:] = _fast_texts(x.astype(np.int64))
        return out
    out[:] = _fast_texts(x)
    ax = np.abs(x)
    outside = ((ax < 1e-4) | (ax >= 1e16)) & ~whole & (ax != 0.0)  # -0.0: "-0.0" either way
    if _orjson is not None and outside.any():  # where orjson spells the exponent unlike repr
        positional = outside & (ax >= 1e-5) & (ax < 1e-4)
        for sel, respell in ((outside & ~positional, _exponent_texts), (positional, _positional_texts)):
            idx = np.flatnonzero(sel)
            if idx.size:
                texts = respell(out[idx].tolist())
                out[idx] = texts if texts is not None else _repr_texts(x[idx])
    idx = np.flatnonzero(whole)
    if idx.size:  # integers among other numbers: '3', not '3.0'
        out[idx] = _fast_texts(x[idx].astype(np.int64))
    return out


def _attr_text(attrs: Attrs) -> str:
    out = ""
    for name, value in attrs:
        t = type(value)
        if t is int:  # the fast path: numbers need no escaping
            out += f' {name}="{value}"'
        elif t is str:
            out += f' {name}="{escape_attr(value)}"'
        else:
            out += f' {name}="{number_text(float(value))}"'
    return out


class XMLWriter:
    """Collects one XML part as pieces of text.

    Subclasses write a part with one ``_write_<element>()`` method per element, in schema order, each
    calling the low-level methods below. Attributes are ``(name, value)`` pairs; an ``int`` value is
    written as it is, a ``float`` through :func:`number_text`, text escaped.
    """

    def __init__(self) -> None:
        self._pieces: list[str] = []
        self._put = self._pieces.append

    # -- the low-level methods -------------------------------------------------------------------
    def _declaration(self) -> None:
        self._put(DECLARATION)

    def _start(self, tag: str, attrs: Attrs = ()) -> None:
        """``<tag a="1">``"""
        self._put(f"<{tag}{_attr_text(attrs)}>" if attrs else f"<{tag}>")

    def _empty(self, tag: str, attrs: Attrs = ()) -> None:
        """``<tag a="1"/>``"""
        self._put(f"<{tag}{_attr_text(attrs)}/>" if attrs else f"<{tag}/>")

    def _data(self, tag: str, text: str, attrs: Attrs = ()) -> None:
        """``<tag>text</tag>`` with ``text`` escaped."""
        self._put(f"<{tag}{_attr_text(attrs)}>{escape_data(text)}</{tag}>")

    def _number(self, tag: str, value: int | str, attrs: Attrs = ()) -> None:
        """``<tag>value</tag>`` for an ``int`` or the text of a number: no escaping (the fast path)."""
        self._put(f"<{tag}{_attr_text(attrs)}>{value}</{tag}>" if attrs else f"<{tag}>{value}</{tag}>")

    def _end(self, tag: str) -> None:
        """``</tag>``"""
        self._put(f"</{tag}>")

    def _raw(self, xml: str) -> None:
        """Text that is already XML (e.g. rows of cells made in bulk)."""
        self._put(xml)

    # -- output ----------------------------------------------------------------------------------
    def take(self) -> str:
        """The text written since the last call, as one string; the collected pieces are dropped."""
        text = "".join(self._pieces)
        self._pieces.clear()
        return text

    def getvalue(self) -> bytes:
        """Everything written (since the last :meth:`take`) as UTF-8 bytes."""
        return self.take().encode("utf-8")
