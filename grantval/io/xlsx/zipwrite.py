"""A small writer of zip archives whose entries arrive already deflated, in pieces.

The workbook writer deflates the blocks of a long sheet in separate processes
(:mod:`grantval.io.xlsx.parallel`); this module joins them into one entry.  Each
piece is raw deflate data ending on a byte boundary (``Z_SYNC_FLUSH``), so the
pieces laid end to end, followed by an empty final block, are one valid deflate
stream (RFC 1951, 3.2.3-3.2.4).  The entry's CRC-32 is combined from the pieces'
CRCs (:func:`crc32_combine`, the method of zlib's ``crc32_combine``).

Records follow PKWARE's APPNOTE.TXT 6.3: local file header (4.3.7), central
directory (4.3.12) and end of central directory (4.3.16), with the ZIP64 extra
field (4.5.3) and end records (4.3.14-4.3.15) only where a size or an offset
needs them.  All entries are dated 1980-01-01 00:00, so equal content gives
equal bytes.
"""

from __future__ import annotations

import struct
import zlib
from typing import BinaryIO, Iterable

#: sizes and offsets at or above this need ZIP64 fields
LIMIT = 0xFFFFFFFF
_MARK = 0xFFFFFFFF  # a 32-bit field whose value is in the ZIP64 record (APPNOTE 4.4.8)
_DOS_DATE = (0 << 9) | (1 << 5) | 1  # 1980-01-01
_DOS_TIME = 0
_EMPTY_FINAL = b"\x03\x00"  # an empty fixed-Huffman block with BFINAL set (RFC 1951 3.2.6)


def deflate_piece(data: bytes, level: int) -> bytes:
    """Raw deflate data of ``data`` ending on a byte boundary, to be followed by more pieces."""
    c = zlib.compressobj(level, zlib.DEFLATED, -15)
    return c.compress(data) + c.flush(zlib.Z_SYNC_FLUSH)


def _gf2_times(matrix: list[int], vector: int) -> int:
    out, i = 0, 0
    while vector:
        if vector & 1:
            out ^= matrix[i]
        vector >>= 1
        i += 1
    return out


def _gf2_square(matrix: list[int]) -> list[int]:
    return [_gf2_times(matrix, row) for row in matrix]


def crc32_combine(crc1: int, crc2: int, len2: int) -> int:
    """The CRC-32 of ``A + B`` from ``crc1 = crc32(A)``, ``crc2 = crc32(B)`` and ``len2 = len(B)``.

    zlib's ``crc32_combine`` (Mark Adler's method): apply ``len2`` zero bytes to ``crc1`` by
    repeated squaring of the one-zero-bit operator over GF(2), then add ``crc2``.
    """
    if len2 <= 0 or crc1 == 0:  # the zero-byte operator is linear: it leaves 0 at 0
        return crc1 ^ crc2 if len2 > 0 else crc1
    odd = [0xEDB88320] + [1 << i for i in range(31)]  # operator for one zero bit
    even = _gf2_square(odd)  # two zero bits
    odd = _gf2_square(even)  # four zero bits
    while True:
        even = _gf2_square(odd)  # apply len2 zero bytes: start at one byte (eight bits)
        if len2 & 1:
            crc1 = _gf2_times(even, crc1)
        len2 >>= 1
        if not len2:
            break
        odd = _gf2_square(even)
        if len2 & 1:
            crc1 = _gf2_times(odd, crc1)
        len2 >>= 1
        if not len2:
            break
    return crc1 ^ crc2


class ZipWriter:
    """Write entries of deflated pieces to a binary file, then the central directory on :meth:`close`.

    Parameters
    ----------
    out : binary file
        Opened for writing, positioned at its start.
    """

    def __init__(self, out: BinaryIO) -> None:
        self._out = out
        self._at = 0
        self._entries: list[tuple[bytes, int, int, int, int, int]] = []

    def _write(self, data: bytes) -> None:
        self._out.write(data)
        self._at += len(data)

    def add(self, name: str, pieces: Iterable[tuple[bytes, int, int]], external_attr: int = 0) -> None:
        """Add the entry ``name`` from ``(deflated piece, crc32 of its bytes, its length)`` triples, in order."""
        crc, size, data = 0, 0, []
        for deflated, piece_crc, length in pieces:
            crc, size = crc32_combine(crc, piece_crc, length), size + length
            data.append(deflated)
        data.append(_EMPTY_FINAL)
        packed = sum(map(len, data))
        raw_name = name.encode("utf-8")
        offset = self._at
        big = size >= LIMIT or packed >= LIMIT
        extra = struct.pack("<HHQQ", 1, 16, size, packed) if big else b""
        self._write(struct.pack("<4s5H3L2H", b"PK\x03\x04", 45 if big else 20, 0, 8, _DOS_TIME, _DOS_DATE, crc,
                                _MARK if big else packed, _MARK if big else size, len(raw_name), len(extra))
                    + raw_name + extra)
        for piece in data:
            self._write(piece)
        self._entries.append((raw_name, crc, packed, size, offset, external_attr))

    def close(self) -> None:
        """Write the central directory and the end records (ZIP64 ones where needed)."""
        start = self._at
        for raw_name, crc, packed, size, offset, attr in self._entries:
            big = max(size, packed, offset) >= LIMIT
            extra = (struct.pack("<HH", 1, 8 * 3) + struct.pack("<3Q", size, packed, offset)) if big else b""
            self._write(struct.pack("<4s6H3L5H2L", b"PK\x01\x02", (3 << 8) | (45 if big else 20), 45 if big else 20,
                                    0, 8, _DOS_TIME, _DOS_DATE, crc, _MARK if big else packed,
                                    _MARK if big else size, len(raw_name), len(extra), 0, 0, 0, attr,
                                    _MARK if big else offset) + raw_name + extra)
        length, count = self._at - start, len(self._entries)
        wide = start >= LIMIT or length >= LIMIT or count >= 0xFFFF
        if wide:
            end64 = self._at
            self._write(struct.pack("<4sQ2H2L4Q", b"PK\x06\x06", 44, 45, 45, 0, 0, count, count, length, start))
            self._write(struct.pack("<4sLQL", b"PK\x06\x07", 0, end64, 1))
        self._write(struct.pack("<4s4H2LH", b"PK\x05\x06", 0, 0, *[0xFFFF if wide else count] * 2,
                                _MARK if wide else length, _MARK if wide else start, 0))
