"""The zip writer of pre-deflated pieces (grantval.io.xlsx.zipwrite) against Python's zipfile reader.

References: zlib.crc32 of the joined bytes for crc32_combine (zlib's own function is not in
Python's zlib module); zipfile.ZipFile (the standard library's independent reader) and its
testzip() for the archive, including the ZIP64 records (PKWARE APPNOTE 4.5.3, 4.3.14-4.3.15)
forced by a lowered limit.
"""

import io
import os
import zipfile
import zlib

import pytest

from grantval.io.xlsx import zipwrite as Z


@pytest.mark.parametrize("a,b", [(b"", b"x"), (b"abc", b""), (b"hello ", b"world"), (os.urandom(7000), os.urandom(123457))])
def test_crc32_combine_equals_crc_of_the_joined_bytes(a, b):
    assert Z.crc32_combine(zlib.crc32(a), zlib.crc32(b), len(b)) == zlib.crc32(a + b)


def test_a_wrong_length_gives_a_different_crc():
    a, b = b"hello ", b"world"
    assert Z.crc32_combine(zlib.crc32(a), zlib.crc32(b), len(b) + 1) != zlib.crc32(a + b)


def _archive(entries: dict[str, list[bytes]]) -> bytes:
    buf = io.BytesIO()
    w = Z.ZipWriter(buf)
    for name, parts in entries.items():
        w.add(name, [(Z.deflate_piece(p, 6), zlib.crc32(p), len(p)) for p in parts], 0o644 << 16)
    w.close()
    return buf.getvalue()


ENTRIES = {"[Content_Types].xml": [b"<Types/>"], "xl/worksheets/sheet1.xml": [b"<row>" * 5000, os.urandom(3000), b"", b"</x>"],
           "empty.txt": []}


def test_pieces_join_into_entries_the_zipfile_reader_accepts():
    with zipfile.ZipFile(io.BytesIO(_archive(ENTRIES))) as z:
        assert z.testzip() is None
        assert z.namelist() == list(ENTRIES)
        for name, parts in ENTRIES.items():
            assert z.read(name) == b"".join(parts)
        assert z.getinfo("empty.txt").date_time == (1980, 1, 1, 0, 0, 0)


def test_zip64_records_where_a_size_or_offset_passes_the_limit(monkeypatch):
    monkeypatch.setattr(Z, "LIMIT", 1000)  # the sheet and the directory pass it: ZIP64 fields and end records
    data = _archive(ENTRIES)
    assert b"PK\x06\x06" in data and b"PK\x06\x07" in data
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        assert z.testzip() is None
        assert z.read("xl/worksheets/sheet1.xml") == b"".join(ENTRIES["xl/worksheets/sheet1.xml"])


def test_a_corrupted_crc_is_caught_by_the_reader():
    data = bytearray(_archive({"a.txt": [b"some text"]}))
    data[14] ^= 0xFF  # the CRC-32 field of the local header (APPNOTE 4.3.7)
    at = data.index(b"PK\x01\x02")
    data[at + 16] ^= 0xFF  # and of the central directory
    with zipfile.ZipFile(io.BytesIO(bytes(data))) as z:
        assert z.testzip() == "a.txt"
