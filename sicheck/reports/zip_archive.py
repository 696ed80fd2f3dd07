"""A ZIP archive written from members that are already compressed (raw deflate), with their CRC and sizes.

Why not zipfile: it compresses every member itself. A workbook's large sheet bodies are compressed in
other processes (sheet_rows.splice_rows), and their compressed bytes must be copied in as they are.

Format: PKWARE's APPNOTE.TXT 6.3.x, the container of Office Open XML (ECMA-376 Part 2): a local file
header (4.3.7) before each member's data, a central directory header per member (4.3.12), the end of
central directory record (4.3.16); ZIP64 extra fields (4.5.3) and the ZIP64 end records (4.3.14, 4.3.15)
only where a size, an offset or the member count does not fit the classic fields.
"""

from __future__ import annotations

import shutil
import struct
import zlib
from typing import BinaryIO, Iterable, NamedTuple

from isal import isal_zlib

DEFLATED = 8
LIMIT = 0xFFFFFFFF              # sizes and offsets from here on go in ZIP64 fields
COUNT_LIMIT = 0xFFFF            # and member counts
_SEE_64, _SEE_64_COUNT = 0xFFFFFFFF, 0xFFFF     # what a classic field then holds
_VERSION, _VERSION64 = 20, 45    # version needed to extract: deflate; ZIP64


class Packed(NamedTuple):
    """A member's raw deflate stream: where it is (a file path or the bytes) and what it holds."""
    data: object                 # the stream's bytes, or the path of a file holding it (None: not said yet)
    crc: int
    size: int                    # uncompressed
    packed_size: int


def deflate(chunks: Iterable[bytes], level: int, out: BinaryIO | None = None) -> Packed:
    """Raw-deflate ``chunks`` into the open binary file ``out`` (Packed.data None: the caller knows where that
    is), else into bytes (Packed.data); with their CRC-32 and sizes.

    level: 0 (fastest) to 3 (smallest), ISA-L's levels. Why ISA-L (the isal package): on a large review's
    sheet XML its level 1 is about 3x faster than zlib's level 1, for a slightly smaller stream
    (DEVELOPERS.md); any deflate reader reads it.
    """
    z = isal_zlib.compressobj(level, isal_zlib.DEFLATED, -15)
    crc = size = packed = 0
    parts = []
    for chunk in chunks:
        crc = zlib.crc32(chunk, crc)
        size += len(chunk)
        c = z.compress(chunk)
        packed += len(c)
        out.write(c) if out is not None else parts.append(c)
    c = z.flush()
    packed += len(c)
    if out is not None:
        out.write(c)
        return Packed(None, crc, size, packed)
    parts.append(c)
    return Packed(b"".join(parts), crc, size, packed)


class _Entry(NamedTuple):
    name: bytes
    flags: int
    crc: int
    size: int
    packed_size: int
    offset: int
    time: int
    date: int


def _dos(date_time: tuple) -> tuple[int, int]:
    y, mo, d, h, mi, s = date_time
    return (h << 11) | (mi << 5) | (s // 2), (max(y, 1980) - 1980) << 9 | (mo << 5) | d


class ZipWriter:
    """Members added one after the other to the binary file ``f`` (positioned at the archive's start)."""

    def __init__(self, f: BinaryIO):
        self._f = f
        self._at = 0
        self._entries: list[_Entry] = []

    def _write(self, b: bytes) -> None:
        self._f.write(b)
        self._at += len(b)

    def add(self, name: str, packed: Packed, date_time: tuple = (1980, 1, 1, 0, 0, 0)) -> None:
        """Add a member from its raw deflate stream (Packed.data: bytes, or a file path to copy from)."""
        raw = name.encode("utf-8")
        flags = 0x800 if not raw.isascii() else 0         # bit 11: the name is UTF-8
        t, d = _dos(date_time)
        e = _Entry(raw, flags, packed.crc, packed.size, packed.packed_size, self._at, t, d)
        big = e.size >= LIMIT or e.packed_size >= LIMIT
        extra = struct.pack("<HHQQ", 1, 16, e.size, e.packed_size) if big else b""
        self._write(struct.pack("<IHHHHHIIIHH", 0x04034B50, _VERSION64 if big else _VERSION, flags, DEFLATED, t, d,
                                e.crc, _SEE_64 if big else e.packed_size, _SEE_64 if big else e.size, len(raw),
                                len(extra)) + raw + extra)
        if isinstance(packed.data, (bytes, bytearray)):
            self._write(packed.data)
        else:
            with open(packed.data, "rb") as src:
                shutil.copyfileobj(src, self._f, 1 << 20)
            self._at += e.packed_size
        self._entries.append(e)

    def close(self) -> None:
        """Write the central directory and the end records."""
        start = self._at
        for e in self._entries:
            fields = []
            if e.size >= LIMIT:
                fields.append(e.size)
            if e.packed_size >= LIMIT:
                fields.append(e.packed_size)
            if e.offset >= LIMIT:
                fields.append(e.offset)
            extra = struct.pack(f"<HH{len(fields)}Q", 1, 8 * len(fields), *fields) if fields else b""
            version = _VERSION64 if fields else _VERSION
            self._write(struct.pack("<IHHHHHHIIIHHHHHII", 0x02014B50, version, version, e.flags, DEFLATED, e.time, e.date,
                                    e.crc, _classic(e.packed_size), _classic(e.size), len(e.name), len(extra), 0,
                                    0, 0, 0, _classic(e.offset)) + e.name + extra)
        size, n = self._at - start, len(self._entries)
        if start >= LIMIT or size >= LIMIT or n >= COUNT_LIMIT:
            end64 = self._at
            self._write(struct.pack("<IQHHIIQQQQ", 0x06064B50, 44, _VERSION64, _VERSION64, 0, 0, n, n, size, start))
            self._write(struct.pack("<IIQI", 0x07064B50, 0, end64, 1))
        count = n if n < COUNT_LIMIT else _SEE_64_COUNT
        self._write(struct.pack("<IHHHHIIH", 0x06054B50, 0, 0, count, count, _classic(size), _classic(start), 0))


def _classic(x: int) -> int:
    return x if x < LIMIT else _SEE_64
