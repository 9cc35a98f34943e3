"""The validator's fast look at a worksheet's rows and cells (:mod:`watcher.xlsx.validate`).

Walking a sheet of a million rows element by element (``iterparse``, a Python call per row and per
cell) takes a minute. The rules the validator applies to rows and cells are simple enough to check on
the text itself, a megabyte at a time, with a few regular expressions and numpy:

* rows in ascending order (``<row r="...">``, SpreadsheetML, ECMA-376 Part 1, §18.3.1.73);
* each cell on its row and the cells of a row in ascending column order (``<c r="...">``, §18.3.1.4);
* every style index (``s="..."`` of a row or a cell) below the number of cell formats.

The fast look covers the common form of a sheet: the main namespace as default namespace (no prefix),
every row and cell carrying its reference, no comment or CDATA section among the rows. Anything else,
or any rule broken, makes it answer "not sure", and the validator walks that sheet element by element
as before (so a problem is always reported in the same words). Well-formedness is checked by libxml2
with no tree built (a parser target without callbacks).

:func:`skeleton` cuts the rows out of a worksheet's text, leaving what surrounds them (sheet views,
columns, conditional formats, the order of the parts of the sheet) for the element-by-element checks.
"""
from __future__ import annotations

import re
from collections.abc import Iterable

import numpy as np
from lxml import etree

__all__ = ["scan_rows", "skeleton"]

_OPEN, _CLOSE, _EMPTY = b"<sheetData", b"</sheetData>", b"<sheetData/>"
_KIND = re.compile(rb"<(?=row\b|c\b)(.)")  # b"r" for a row, b"c" for a cell
# within sheetData only rows and cells carry attributes named r and s (§18.3.1.73, §18.3.1.4); a
# literal space before them lets the search skip ahead (other white space there makes the look unsure)
_REF = re.compile(rb' r="([^"]*)"')
_STYLE = re.compile(rb' s="([^"]*)"')
_UNSURE = (b"<!--", b"<![CDATA[", b'\tr="', b'\nr="', b'\rr="', b'\ts="', b'\ns="', b'\rs="')


def skeleton(head: bytes, tail: bytes) -> bytes | None:
    """The worksheet without the content of ``sheetData``, from its first and last bytes (``head``
    holds the opening ``<sheetData>``, ``tail`` the closing one); None when they do not."""
    i, j = head.find(_OPEN), tail.rfind(_CLOSE)
    if i < 0 or j < 0 or head.startswith(_EMPTY, i):
        return None
    return head[:i] + _EMPTY + tail[j + len(_CLOSE):]


class _Null:
    """A parser target without callbacks: libxml2 checks the text and builds nothing."""

    def close(self) -> None:
        return None


class _Rows:
    """The state of a scan carried from one piece of ``sheetData`` to the next."""

    def __init__(self, n_xfs: int) -> None:
        self.n_xfs = n_xfs
        self.last_row = 0      # number of the last row seen
        self.last_col = 0      # column of the last cell of that row (0: none yet)

    def feed(self, text: bytes) -> bool:
        """Check the rows and cells of ``text`` (whole tags only); False: not sure."""
        if any(u in text for u in _UNSURE):
            return False
        kinds = _KIND.findall(text)
        if not kinds:
            return True
        refs = _REF.findall(text)
        if len(refs) != len(kinds):
            return False  # a row or cell without its reference
        is_row = np.frombuffer(b"".join(kinds), dtype=np.uint8) == ord("r")
        parsed = _refs(np.array(refs))
        if parsed is None:
            return False
        col, num = parsed
        if np.any(col[is_row] != 0) or np.any(col[~is_row] == 0):
            return False
        rows = num[is_row]
        if np.any(np.diff(np.concatenate([[self.last_row], rows])) <= 0):
            return False
        enclosing = np.concatenate([[self.last_row], rows])[np.cumsum(is_row)]
        cells = ~is_row
        if np.any(enclosing[cells] <= 0) or np.any(num[cells] != enclosing[cells]):
            return False
        # ascending columns within a row: the column before a cell is that of the cell before it in
        # its row, 0 after the row's start tag (or the last piece's last cell)
        prev = np.where(is_row, 0, col)
        before = np.concatenate([[self.last_col], prev[:-1]])
        if np.any(cells & (col <= before)):
            return False
        for v in set(_STYLE.findall(text)):  # a sheet uses a few styles
            if not v.isdigit() or len(v) > 9 or int(v) >= self.n_xfs:
                return False
        self.last_row = int(enclosing[-1])
        self.last_col = int(prev[-1])
        return True


def _refs(refs: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Column (0 for none) and row numbers of references like ``AB12`` or ``12`` (an ``S`` array, read
    as a matrix of bytes); None when one is not letters (at most 3) followed by 1-7 digits."""
    width = refs.dtype.itemsize
    if width == 0 or width > 10:
        return None
    u8 = refs.view(np.uint8).reshape(refs.size, width)
    letter = (u8 >= 65) & (u8 <= 90)
    digit = (u8 >= 48) & (u8 <= 57)
    pad = u8 == 0
    if not np.all(letter | digit | pad):
        return None
    n_letters, n_digits = letter.sum(axis=1), digit.sum(axis=1)
    # letters first, then digits, then padding: each kind is a run in that order
    rank = np.where(letter, 0, np.where(digit, 1, 2))
    if np.any(np.diff(rank, axis=1) < 0) or np.any(n_letters > 3) or np.any((n_digits < 1) | (n_digits > 7)):
        return None
    col = np.zeros(refs.size, dtype=np.int64)
    num = np.zeros(refs.size, dtype=np.int64)
    for j in range(width):
        c = u8[:, j].astype(np.int64)
        col = np.where(letter[:, j], col * 26 + c - 64, col)
        num = np.where(digit[:, j], num * 10 + c - 48, num)
    return col, num


def scan_rows(pieces: Iterable[bytes], n_xfs: int) -> bytes | None:
    """Check the rows and cells of a worksheet given as its text in pieces; return its
    :func:`skeleton` when every rule holds and the text is well-formed, None when not sure."""
    parser = etree.XMLParser(target=_Null(), resolve_entities=False, no_network=True, load_dtd=False,
                             huge_tree=True)
    rows = _Rows(n_xfs)
    head, tail = bytearray(), bytearray()
    where = "head"   # head -> rows -> tail
    rest = b""
    try:
        for piece in pieces:
            parser.feed(piece)
            if where == "head":
                head += piece
                i = head.find(_OPEN)
                if i < 0:
                    if len(head) > 1 << 24:
                        return None
                    continue
                if head.startswith(_EMPTY, i):
                    return None  # no rows: the element walk is short
                gt = head.find(b">", i)
                if gt < 0:
                    continue
                rest = bytes(head[gt + 1:])
                del head[gt + 1:]
                where = "rows"
                piece = b""
            if where == "rows":
                buf = rest + piece
                j = buf.find(_CLOSE)
                if j >= 0:
                    if not rows.feed(buf[:j]):
                        return None
                    tail += buf[j:]
                    where, rest = "tail", b""
                    continue
                cut = buf.rfind(b"<")
                if cut < 0:
                    rest = buf
                    continue
                if not rows.feed(buf[:cut]):
                    return None
                rest = buf[cut:]
            elif where == "tail" and piece:
                tail += piece
        parser.close()
    except etree.XMLSyntaxError:
        return None
    if where != "tail":
        return None
    return skeleton(bytes(head), bytes(tail))
