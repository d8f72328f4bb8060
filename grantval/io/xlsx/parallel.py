"""Generating and deflating the pieces of a workbook's zip entries, in worker processes where that pays.

A piece is bytes or a function returning bytes (a block of a long table's rows,
:func:`grantval.io.xlsx.bigsheet.row_blocks`).  The pieces are made and deflated by
:func:`grantval.workers.ordered_map`: in forked worker processes, which inherit the
tables and send back only the deflated bytes, where that is safe; here otherwise.
Either way the results come back in order and are the same bytes.
"""

from __future__ import annotations

import zlib
from typing import Iterator

from grantval.io.xlsx.zipwrite import deflate_piece
from grantval.workers import ordered_map

#: pieces larger than this are deflated at level 1 (speed), smaller ones at 6 (size)
FAST_ABOVE = 2**22


def _made(piece) -> tuple[bytes, int, int]:
    """(deflated bytes, CRC-32, length) of ``piece`` (bytes, or a function returning them)."""
    data = piece if isinstance(piece, bytes) else piece()
    return deflate_piece(data, 1 if len(data) > FAST_ABOVE else 6), zlib.crc32(data), len(data)


def deflated(pieces: list) -> Iterator[tuple[bytes, int, int]]:
    """(deflated bytes, CRC-32, length) of each of ``pieces``, in order.

    Worker processes are used only when more than one piece is a function (a block
    of rows still to be made); deflating ready bytes alone does not pay for them.
    """
    if sum(not isinstance(p, bytes) for p in pieces) > 1:
        yield from ordered_map(_made, pieces)
    else:
        yield from map(_made, pieces)
