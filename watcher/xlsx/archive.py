"""The zip layer of a workbook package: read members safely, copy them *as compressed bytes*, write new
members deterministically.

Why not ``zipfile`` for writing: it cannot copy a member's compressed bytes, and it rewrites header
fields of the ``ZipInfo`` it is given (``writestr`` mutates it). :class:`ZipWriter` writes the local
headers, the central directory and the end record itself (the "ZIP File Format Specification",
PKWARE APPNOTE.TXT, §4.3), so

* a member tocsin does not own is copied byte for byte: same compressed data, CRC, sizes, method, time
  stamp and attributes (only the optional "extra" fields and a data-descriptor flag are dropped, because
  the sizes now stand in the local header);
* a member tocsin writes gets a fixed time stamp (1980-01-01 00:00), so the same inputs give the same
  bytes; big members are streamed through deflate (level 1) in a worker thread while the caller produces
  the next chunk.

Deflate of big members: ``isal`` (python-isal, Intel's ISA-L; installed with tocsin, optional) writes
the same format (raw deflate, RFC 1951) about three times as fast as zlib at level 1 and compresses as
well (measured on a 160 MiB forecast sheet: 0.42 s against 1.23 s, 17.6 % against 18.3 % of the size),
and inflates members being checked faster too; without it zlib does the job. Either way the bytes
depend only on the input and the library.

Reading uses ``zipfile`` for the central directory only, over bytes already in memory (so what is hashed
is what is parsed). Limits: a package is refused if it is not a zip, is truncated, has duplicate or
encrypted members, or declares more than :data:`MAX_TOTAL` uncompressed bytes; a member that is parsed is
read with a hard cap (:data:`MAX_PART`). Packages of 4 GiB or more (ZIP64) are not written.
"""
from __future__ import annotations

import io
import queue
import struct
import threading
import zipfile
import zlib
from collections.abc import Iterable
from dataclasses import dataclass
from typing import BinaryIO

from watcher.xlsx.errors import PackageError

try:
    from isal import isal_zlib as _isal
except ImportError:  # optional: zlib writes the same format, only slower
    _isal = None

__all__ = ["MAX_PART", "MAX_TOTAL", "Member", "ZipSource", "ZipWriter"]

MAX_TOTAL = 2 * 1024**3
"""Largest total uncompressed size a package may declare (2 GiB)."""
MAX_PART = 256 * 1024**2
"""Largest uncompressed size of one part that tocsin parses (workbook, styles, relationships, ...)."""

_LOCAL = struct.Struct("<4sHHHHHIIIHH")
_CENTRAL = struct.Struct("<4sHHHHHHIIIHHHHHII")
_END = struct.Struct("<4sHHHHIIH")
_FIXED_DOS_TIME = (0, (0 << 9) | (1 << 5) | 1)  # 1980-01-01 00:00:00 (time, date)
_LIMIT32 = 0xFFFFFFFF
_UTF8_FLAG = 0x800
_DESCRIPTOR_FLAG = 0x8
_VERSION = 20
_PIECE = 1 << 20


def _compressor(level: int):
    """A raw-deflate compressor at ``level``: ISA-L's for levels 1-3 when it is installed, else zlib's."""
    if _isal is not None and 1 <= level <= 3:
        return _isal.compressobj(level, _isal.DEFLATED, -15)
    return zlib.compressobj(level, zlib.DEFLATED, -15)


_crc32 = _isal.crc32 if _isal is not None else zlib.crc32
_INFLATE_ERRORS: tuple[type[Exception], ...] = (zlib.error,) if _isal is None else (zlib.error, _isal.error)


def _decompressor():
    return (_isal or zlib).decompressobj(-15)


@dataclass(frozen=True)
class Member:
    """What the central directory says about one member (immutable; never handed to ``zipfile``)."""

    name: str
    flags: int
    method: int
    dos_time: int
    dos_date: int
    crc: int
    compress_size: int
    file_size: int
    internal_attr: int
    external_attr: int
    header_offset: int
    raw_name: bytes


class ZipSource:
    """A zip package held in memory. ``names`` keeps the members' order in the central directory."""

    def __init__(self, data: bytes, label: str) -> None:
        self.data = data
        self.label = label
        try:
            zf = zipfile.ZipFile(io.BytesIO(data))
            infos = zf.infolist()
        except zipfile.BadZipFile as exc:
            hint = ""
            if data[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":
                hint = " (it is an OLE compound file: an old .xls workbook or a password-protected one)"
            elif data[:2] == b"PK":
                hint = " (it looks truncated or damaged)"
            raise PackageError(f"'{label}' is not a readable workbook package: not a complete zip file"
                               f"{hint}", workbook=label) from exc
        except (OSError, ValueError, EOFError, struct.error) as exc:
            raise PackageError(f"'{label}' is not a readable workbook package: {exc}",
                               workbook=label) from exc
        self._zf = zf
        self.members: dict[str, Member] = {}
        self.names: list[str] = []
        self._folded: dict[str, str] = {}
        total = 0
        for info in infos:
            name = info.filename
            if name in self.members or name.casefold() in self._folded:
                raise PackageError(f"'{label}' has two members named '{name}'; refusing to guess which "
                                   "counts", workbook=label, part=name)
            if info.flag_bits & 0x1:
                raise PackageError(f"'{label}': member '{name}' is encrypted; password-protected packages "
                                   "are not supported", workbook=label, part=name)
            total += info.file_size
            if total > MAX_TOTAL:
                raise PackageError(f"'{label}' declares more than {MAX_TOTAL // 1024**3} GiB of uncompressed "
                                   "content; refused", workbook=label, limit=MAX_TOTAL)
            dt = info.date_time
            dos_date = ((dt[0] - 1980) << 9) | (dt[1] << 5) | dt[2]
            dos_time = (dt[3] << 11) | (dt[4] << 5) | (dt[5] // 2)
            self.members[name] = Member(name, info.flag_bits, info.compress_type, dos_time, dos_date,
                                        info.CRC, info.compress_size, info.file_size, info.internal_attr,
                                        info.external_attr, info.header_offset,
                                        name.encode("utf-8" if info.flag_bits & _UTF8_FLAG else "cp437"))
            self.names.append(name)
            self._folded[name.casefold()] = name

    def find(self, part: str) -> str | None:
        """The member name of a part name (part names are case-insensitive; a leading '/' is ignored)."""
        return self._folded.get(part.lstrip("/").casefold())

    def read(self, name: str, limit: int = MAX_PART) -> bytes:
        """The uncompressed content of a member, refusing more than ``limit`` bytes."""
        member = self.members[name]
        if member.file_size > limit:
            raise PackageError(f"'{self.label}': part '{name}' is {member.file_size:,} bytes uncompressed, "
                               f"more than the {limit:,} tocsin reads; refused",
                               workbook=self.label, part=name,
                               limit=limit)
        try:
            with self._zf.open(name) as fh:
                out = fh.read(limit + 1)
        except (zipfile.BadZipFile, zlib.error, OSError, EOFError, NotImplementedError) as exc:
            raise PackageError(f"'{self.label}': part '{name}' cannot be read ({exc}); the file is "
                               "damaged", workbook=self.label, part=name) from exc
        if len(out) > limit:
            raise PackageError(f"'{self.label}': part '{name}' is larger than the {limit:,} bytes tocsin "
                               "reads; refused", workbook=self.label, part=name, limit=limit)
        if len(out) != member.file_size:
            raise PackageError(f"'{self.label}': part '{name}' declares {member.file_size:,} bytes but holds "
                               f"{len(out):,}; the file is damaged", workbook=self.label, part=name)
        return out

    def check(self, name: str, *, keep: int = 65_536) -> tuple[str | None, bytes]:
        """Inflate member ``name`` as a stream and compare it with what the central directory declares:
        its size (reading at most one byte more than declared, so a lying small size cannot make it
        inflate a bomb) and its CRC-32. Returns ``(problem, head)``: what is wrong (None when nothing)
        and its first ``keep`` uncompressed bytes."""
        problem, head, _ = self.check_ends(name, keep=keep)
        return problem, head

    def check_ends(self, name: str, *, keep: int = 65_536, tail: int = 0) -> tuple[str | None, bytes, bytes]:
        """:meth:`check`, also keeping the last ``tail`` uncompressed bytes: ``(problem, head, tail)``."""
        m = self.members[name]
        try:
            raw = self.raw(name)
        except PackageError as exc:
            return str(exc), b"", b""
        where = f"'{self.label}': part '{name}'"
        head = bytearray()
        end = b""
        size = crc = 0
        try:
            for piece in self._pieces(name, raw):
                if len(head) < keep:
                    head += piece[:keep - len(head)]
                if tail:
                    end = (end + piece)[-tail:]
                size += len(piece)
                if size > m.file_size:
                    return (f"{where} declares {m.file_size:,} bytes but holds more; the file is damaged",
                            bytes(head), end)
                crc = _crc32(piece, crc)
        except (*_INFLATE_ERRORS, zipfile.BadZipFile, EOFError, OSError, NotImplementedError) as exc:
            return f"{where} cannot be read ({exc}); the file is damaged", bytes(head), end
        if size != m.file_size:
            return (f"{where} declares {m.file_size:,} bytes but holds {size:,}; the file is damaged",
                    bytes(head), end)
        if crc != m.crc:
            return f"{where} fails its CRC-32 check; the file is damaged", bytes(head), end
        return None, bytes(head), end

    def pieces(self, name: str):
        """The uncompressed content of member ``name`` in pieces of at most 1 MiB, bounded by its
        declared size plus one byte (raises PackageError for a member that cannot be read)."""
        try:
            yield from self._pieces(name, self.raw(name))
        except (*_INFLATE_ERRORS, zipfile.BadZipFile, EOFError, OSError, NotImplementedError) as exc:
            raise PackageError(f"'{self.label}': part '{name}' cannot be read ({exc}); the file is "
                               "damaged", workbook=self.label, part=name) from exc

    def _pieces(self, name: str, raw: bytes):
        m = self.members[name]
        if m.method == zipfile.ZIP_STORED:
            return (raw[i:i + _PIECE] for i in range(0, len(raw), _PIECE))
        if m.method == zipfile.ZIP_DEFLATED:
            return _inflate(raw, m.file_size + 1)
        return _read_bounded(self._zf, name, m.file_size + 1)  # other methods (rare): zipfile's reader

    def raw(self, name: str) -> bytes:
        """The compressed bytes of a member, exactly as stored."""
        m = self.members[name]
        off = m.header_offset
        head = self.data[off:off + _LOCAL.size]
        if len(head) < _LOCAL.size:
            raise PackageError(f"'{self.label}': member '{name}' lies past the end of the file (truncated)",
                               workbook=self.label, part=name)
        sig, *_rest, n_name, n_extra = _LOCAL.unpack(head)
        if sig != b"PK\x03\x04":
            raise PackageError(f"'{self.label}': member '{name}' has no local header; the file is damaged",
                               workbook=self.label, part=name)
        start = off + _LOCAL.size + n_name + n_extra
        data = self.data[start:start + m.compress_size]
        if len(data) != m.compress_size:
            raise PackageError(f"'{self.label}': member '{name}' is cut short; the file is truncated",
                               workbook=self.label, part=name)
        return data


def _inflate(raw: bytes, bound: int):
    """The uncompressed pieces (at most 1 MiB each) of a raw deflate stream, stopping once ``bound``
    bytes came out."""
    d = _decompressor()
    out = pos = 0
    pending = b""
    while out < bound:
        if not pending:
            if pos >= len(raw):
                break
            pending, pos = raw[pos:pos + _PIECE], pos + _PIECE
        piece = d.decompress(pending, min(_PIECE, bound - out))
        pending = d.unconsumed_tail
        if piece:
            out += len(piece)
            yield piece
        if d.eof:
            return
    if out < bound and not d.eof:
        raise zlib.error("the compressed data end early")


def _read_bounded(zf: zipfile.ZipFile, name: str, bound: int):
    with zf.open(name) as fh:
        out = 0
        while out < bound and (piece := fh.read(min(_PIECE, bound - out))):
            out += len(piece)
            yield piece


class ZipWriter:
    """Write a zip file member by member into a seekable binary file; :meth:`close` writes the central
    directory. Member order is the order of the calls."""

    def __init__(self, fh: BinaryIO) -> None:
        self._fh = fh
        self._entries: list[tuple[bytes, Member]] = []
        self._names: set[str] = set()

    # -- members ---------------------------------------------------------------------------------
    def copy(self, member: Member, raw: bytes) -> None:
        """Copy a member of another package: same compressed bytes, CRC, sizes, time and attributes."""
        flags = member.flags & ~_DESCRIPTOR_FLAG
        self._add(member.name, flags, member.method, member.dos_time, member.dos_date, member.crc,
                  len(raw), member.file_size, member.internal_attr, member.external_attr, raw,
                  raw_name=member.raw_name)

    def write(self, name: str, data: bytes, *, level: int = 6) -> None:
        """Add a member with content ``data`` (deflated at ``level``; 0 stores it)."""
        if level == 0:
            payload, method = data, zipfile.ZIP_STORED
        else:
            comp = zlib.compressobj(level, zlib.DEFLATED, -15)
            payload, method = comp.compress(data) + comp.flush(), zipfile.ZIP_DEFLATED
        self._add(name, 0, method, *_FIXED_DOS_TIME, zlib.crc32(data), len(payload), len(data), 0,
                  0o600 << 16, payload)

    def write_stream(self, name: str, chunks: Iterable[bytes], *, level: int = 1) -> int:
        """Add a member whose content comes in ``chunks``; compression and writing happen in a worker
        thread while the caller produces the next chunk. Returns the uncompressed size."""
        fh = self._fh
        offset = fh.tell()
        encoded = self._encode_name(name)
        flags = _UTF8_FLAG if not encoded.isascii() else 0
        fh.write(_LOCAL.pack(b"PK\x03\x04", _VERSION, flags, zipfile.ZIP_DEFLATED, *_FIXED_DOS_TIME,
                             0, 0, 0, len(encoded), 0) + encoded)
        work: queue.Queue[bytes | None] = queue.Queue(maxsize=4)
        state = {"crc": 0, "size": 0, "csize": 0, "error": None}
        comp = _compressor(level)

        def worker() -> None:
            ended = False
            try:
                while True:
                    chunk = work.get()
                    if chunk is None:
                        ended = True
                        tail = comp.flush()
                        fh.write(tail)
                        state["csize"] += len(tail)
                        return
                    state["crc"] = _crc32(chunk, state["crc"])
                    state["size"] += len(chunk)
                    out = comp.compress(chunk)
                    if out:
                        fh.write(out)
                        state["csize"] += len(out)
            except BaseException as exc:  # noqa: BLE001 - handed to the producer below
                state["error"] = exc
                # let a producer blocked on the full queue go on, up to its end marker; never wait for
                # one when the failing write was the last (the end marker is already taken)
                while not ended and work.get() is not None:
                    pass

        thread = threading.Thread(target=worker, name="tocsin-zip-deflate", daemon=True)
        thread.start()
        try:
            for chunk in chunks:
                if state["error"] is not None:
                    break
                if chunk:
                    work.put(chunk)
        finally:
            work.put(None)
            thread.join()
        error = state["error"]
        if isinstance(error, Exception) and not isinstance(error, (OSError, PackageError)):
            raise PackageError(f"internal error: compressing part '{name}' failed ({type(error).__name__}: "
                               f"{error})", part=name) from error
        if error is not None:
            raise error  # an OSError (no space, ...) for the caller to name, or KeyboardInterrupt & co
        size, csize, crc = state["size"], state["csize"], state["crc"]
        if size >= _LIMIT32 or csize >= _LIMIT32 or offset >= _LIMIT32:
            raise PackageError(f"part '{name}' would be 4 GiB or more; packages that large are not written",
                               part=name, limit=_LIMIT32)
        end = fh.tell()
        fh.seek(offset)
        fh.write(_LOCAL.pack(b"PK\x03\x04", _VERSION, flags, zipfile.ZIP_DEFLATED, *_FIXED_DOS_TIME,
                             crc, csize, size, len(encoded), 0))
        fh.seek(end)
        self._entries.append((encoded, Member(name, flags, zipfile.ZIP_DEFLATED, *_FIXED_DOS_TIME, crc,
                                              csize, size, 0, 0o600 << 16, offset, encoded)))
        return size

    def close(self) -> None:
        """Write the central directory and the end record."""
        fh = self._fh
        start = fh.tell()
        for encoded, m in self._entries:
            fh.write(_CENTRAL.pack(b"PK\x01\x02", _VERSION, _VERSION, m.flags, m.method, m.dos_time,
                                   m.dos_date, m.crc, m.compress_size, m.file_size, len(encoded), 0, 0, 0,
                                   m.internal_attr, m.external_attr, m.header_offset) + encoded)
        end = fh.tell()
        if len(self._entries) > 0xFFFF or end >= _LIMIT32:
            raise PackageError("the package would need ZIP64 (4 GiB or 65,535 members); not written",
                               limit=_LIMIT32)
        fh.write(_END.pack(b"PK\x05\x06", 0, 0, len(self._entries), len(self._entries), end - start,
                           start, 0))

    # -- internals -------------------------------------------------------------------------------
    def _encode_name(self, name: str) -> bytes:
        if name.casefold() in self._names:
            raise PackageError(f"internal error: member '{name}' written twice", part=name)
        self._names.add(name.casefold())
        return name.encode("utf-8")

    def _add(self, name: str, flags: int, method: int, dos_time: int, dos_date: int, crc: int,
             csize: int, size: int, internal: int, external: int, payload: bytes,
             raw_name: bytes | None = None) -> None:
        encoded = self._encode_name(name)
        if raw_name is not None:
            encoded = raw_name
        elif not encoded.isascii():
            flags |= _UTF8_FLAG
        offset = self._fh.tell()
        if size >= _LIMIT32 or csize >= _LIMIT32 or offset >= _LIMIT32:
            raise PackageError(f"part '{name}' or the package would be 4 GiB or more; not written", part=name,
                               limit=_LIMIT32)
        self._fh.write(_LOCAL.pack(b"PK\x03\x04", _VERSION, flags, method, dos_time, dos_date, crc, csize,
                                   size, len(encoded), 0) + encoded)
        self._fh.write(payload)
        self._entries.append((encoded, Member(name, flags, method, dos_time, dos_date, crc, csize, size,
                                              internal, external, offset, encoded)))
