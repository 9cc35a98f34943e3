"""Hostile and damaged packages on the reading side (archive.py, source.py, validate.py): a "billion
laughs" document type declaration in a data sheet, and members whose declared uncompressed size lies
(smaller, larger, a small size over a deflate bomb). Each ends in a clear PackageError or message naming
the part, never an internal error; the declared size bounds what is inflated. Packages are crafted here
from the pump sample (invented data)."""
from __future__ import annotations

import io
import shutil
import struct
import zipfile
import zlib
from pathlib import Path

import pytest

from watcher.xlsx import archive
from watcher.xlsx.archive import ZipSource
from watcher.xlsx.errors import PackageError
from watcher.xlsx.package import Package, validate, write
from watcher.xlsx.spec import Column, SheetSpec, Table

PUMP = Path(__file__).resolve().parent.parent / "sample_workbooks" / "pump_station.xlsx"
DATA = "xl/worksheets/sheet1.xml"  # the pump sample's data sheet, 'Pump log'
# the classic shape (ten entities, each ten of the one before): 10**9 "lol"s if anything expanded it
LAUGHS = (b'<!DOCTYPE worksheet [<!ENTITY lol "lol">'
          + b"".join(b'<!ENTITY lol%d "%s">' % (i, (b"&lol%d;" % (i - 1) if i > 1 else b"&lol;") * 10)
                     for i in range(1, 10)) + b"]>")


def _members(path: Path = PUMP) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def _zip(path: Path, members: dict[str, bytes]) -> Path:
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, data in members.items():
            z.writestr(name, data)
    return path


def _declare(path: Path, member: str, size: int) -> None:
    """Make the local header and the central directory declare ``size`` uncompressed bytes."""
    raw = bytearray(path.read_bytes())
    info = zipfile.ZipFile(io.BytesIO(bytes(raw))).getinfo(member)
    struct.pack_into("<I", raw, info.header_offset + 22, size)
    pos = raw.find(b"PK\x01\x02")
    while pos >= 0:
        n = struct.unpack_from("<H", raw, pos + 28)[0]
        if raw[pos + 46:pos + 46 + n] == member.encode():
            struct.pack_into("<I", raw, pos + 24, size)
            break
        pos = raw.find(b"PK\x01\x02", pos + 4)
    path.write_bytes(bytes(raw))


def test_billion_laughs_in_a_data_sheet(tmp_path):
    members = _members()
    members[DATA] = b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n' + LAUGHS + members[DATA]
    path = _zip(tmp_path / "laughs.xlsx", members)
    pkg = Package.open(path)  # the workbook opens: only the jobs reading that sheet must fail
    why = ("'laughs.xlsx': part 'xl/worksheets/sheet1.xml' declares a document type, which Office Open XML "
           "parts never do; refused")
    assert pkg.sheet_problems == {"Pump log": why}
    with pytest.raises(PackageError, match="^sheet 'Pump log' cannot be read: 'laughs.xlsx': part") as err:
        pkg.check_sheet("pump LOG")
    assert (err.value.part, err.value.workbook) == (DATA, "laughs.xlsx")
    pkg.check_sheet("tocsin")  # the other sheets are fine
    assert why in validate(path)
    # a write copies the user's part as it is (never parsed, never expanded)
    write(path, [SheetSpec("Fc", (Table(0, 0, None, (Column([1.0]),)),))], state={}, expect=pkg.fingerprint)
    assert _members(path)[DATA] == members[DATA]


def test_a_document_type_behind_a_long_prolog_is_found(tmp_path):
    members = _members()
    prolog = b'<?xml version="1.0"?>\n<!--' + b" " * 10_000 + b"-->\n"
    members["xl/workbook.xml"] = prolog + LAUGHS + members["xl/workbook.xml"]
    path = _zip(tmp_path / "long.xlsx", members)
    with pytest.raises(PackageError, match="part 'xl/workbook.xml' declares a document type") as err:
        Package.open(path)
    assert err.value.part == "xl/workbook.xml"


@pytest.mark.parametrize("factor", [0.5, 2.0])
def test_a_data_sheet_whose_declared_size_lies(tmp_path, factor):
    path = tmp_path / "lies.xlsx"
    shutil.copy(PUMP, path)
    real = len(_members()[DATA])
    says = "holds more" if factor < 1 else f"holds {real:,}"
    _declare(path, DATA, int(real * factor))
    pkg = Package.open(path)
    assert set(pkg.sheet_problems) == {"Pump log"} and says in pkg.sheet_problems["Pump log"]
    with pytest.raises(PackageError, match=f"declares {int(real * factor):,} bytes but {says}"):
        pkg.check_sheet("Pump log")
    problems = validate(path)
    assert len(problems) == 1 and says in problems[0]


def test_a_registry_part_whose_declared_size_lies_refuses_the_workbook(tmp_path):
    path = tmp_path / "lies.xlsx"
    shutil.copy(PUMP, path)
    real = len(_members()["xl/workbook.xml"])
    _declare(path, "xl/workbook.xml", real + 100)
    with pytest.raises(PackageError, match=f"part 'xl/workbook.xml' declares {real + 100:,} bytes but holds "
                                           f"{real:,}; the file is damaged"):
        Package.open(path)


def test_a_small_declared_size_bounds_what_a_bomb_inflates(tmp_path):
    # 200 MB of zeros deflate to about 200 KB; declared as 1,000 bytes, only 1,001 may come out
    comp = zlib.compressobj(9, zlib.DEFLATED, -15)
    zeros = b"\0" * (1 << 20)
    bomb = b"".join(comp.compress(zeros) for _ in range(200)) + comp.flush()
    members = _members()
    path = _zip(tmp_path / "bomb.xlsx", {**members, "xl/media/blob.bin": b"\0" * 1000})
    raw = bytearray(path.read_bytes())
    info = zipfile.ZipFile(io.BytesIO(bytes(raw))).getinfo("xl/media/blob.bin")
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)
    old = info.compress_size  # swap in the bomb's compressed bytes and fix the offsets after it
    raw[start:start + old] = bomb
    for sig, at_size, at_off in ((b"PK\x01\x02", 20, 42), ):
        pos = raw.find(sig)
        while pos >= 0:
            n = struct.unpack_from("<H", raw, pos + 28)[0]
            name = bytes(raw[pos + 46:pos + 46 + n])
            if name == b"xl/media/blob.bin":
                struct.pack_into("<I", raw, pos + at_size, len(bomb))
            elif struct.unpack_from("<I", raw, pos + at_off)[0] > info.header_offset:
                struct.pack_into("<I", raw, pos + at_off, struct.unpack_from("<I", raw, pos + at_off)[0]
                                 + len(bomb) - old)
            pos = raw.find(sig, pos + 4)
    struct.pack_into("<I", raw, info.header_offset + 18, len(bomb))
    end = raw.rfind(b"PK\x05\x06")
    struct.pack_into("<I", raw, end + 16, struct.unpack_from("<I", raw, end + 16)[0] + len(bomb) - old)
    path.write_bytes(bytes(raw))
    zs = ZipSource(bytes(raw), "bomb.xlsx")
    problem, head = zs.check("xl/media/blob.bin", keep=64)
    says = "'bomb.xlsx': part 'xl/media/blob.bin' declares 1,000 bytes but holds more; the file is damaged"
    assert problem == says and head == b"\0" * 64
    assert sum(len(p) for p in archive._inflate(bomb, 1_001)) == 1_001  # the bound: 1,001 bytes came out
    assert says in validate(path)
    assert Package.open(path).problems == {"xl/media/blob.bin": says}


def test_checking_a_sheet_of_a_workbook_saved_since_is_a_conflict(tmp_path):
    from watcher.xlsx.errors import ConcurrentEditError

    path = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, path)
    pkg = Package.open(path)
    _zip(path, {**_members(), "docProps/extra.xml": b"<x/>"})  # someone saved meanwhile
    with pytest.raises(ConcurrentEditError, match="saved by someone else since tocsin read it"):
        pkg.check_sheet("Pump log")
