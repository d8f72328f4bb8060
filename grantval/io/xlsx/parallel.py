"""Generating and deflating the pieces of a workbook's zip entries, in worker processes where that pays.

A piece is bytes or a function returning bytes (a block of a long table's rows,
:func:`grantval.io.xlsx.bigsheet.row_blocks`).  On Linux, when the process runs no
other Python thread, the pieces are made in forked worker processes, which inherit
the tables without copying or pickling them and send back only the deflated bytes;
elsewhere (or with ``GRANTVAL_WRITER_PROCESSES=1``) they are made here, one after
another.  Either way the results come back in order and are the same bytes.
"""

from __future__ import annotations

import os
import sys
import threading
import zlib
from typing import Iterator

from grantval.io.xlsx.zipwrite import deflate_piece

#: pieces larger than this are deflated at level 1 (speed), smaller ones at 6 (size)
FAST_ABOVE = 2**22
#: the pieces being made by the worker processes (inherited by them when they are forked)
_PIECES: list = []


def _made(index: int) -> tuple[bytes, int, int]:
    """(deflated bytes, CRC-32, length) of piece ``index`` of :data:`_PIECES`."""
    piece = _PIECES[index]
    data = piece if isinstance(piece, bytes) else piece()
    return deflate_piece(data, 1 if len(data) > FAST_ABOVE else 6), zlib.crc32(data), len(data)


def _workers(pieces: list) -> int:
    """Worker processes to use for ``pieces``: 0 (make them here) unless forking is safe and pays."""
    import multiprocessing

    if not sys.platform.startswith("linux") or threading.active_count() > 1 \
            or multiprocessing.current_process().daemon:
        return 0  # fork is safe on Linux without other threads; a pool's worker may not have children
    blocks = sum(not isinstance(p, bytes) for p in pieces)
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    wanted = int(os.environ.get("GRANTVAL_WRITER_PROCESSES", min(cores, 4)))
    return wanted if wanted > 1 and blocks > 1 else 0


def deflated(pieces: list) -> Iterator[tuple[bytes, int, int]]:
    """(deflated bytes, CRC-32, length) of each of ``pieces``, in order."""
    global _PIECES
    workers = _workers(pieces)
    _PIECES = pieces
    try:
        if not workers:
            yield from map(_made, range(len(pieces)))
            return
        import multiprocessing

        with multiprocessing.get_context("fork").Pool(workers) as pool:
            yield from pool.imap(_made, range(len(pieces)))
    finally:
        _PIECES = []
