"""Limits on what is read: file size, rows, uncompressed workbook size."""

from __future__ import annotations


def _limit(name: str, default: int) -> int:
    import os

    try:
        return int(os.environ.get(name, default))
    except ValueError:
        return default


#: largest input file accepted, in bytes (environment variable GRANTVAL_MAX_FILE_MB)
MAX_FILE_BYTES = _limit("GRANTVAL_MAX_FILE_MB", 64) * 2**20


#: most data rows accepted in one table (environment variable GRANTVAL_MAX_ROWS)
MAX_ROWS = _limit("GRANTVAL_MAX_ROWS", 2_000_000)


#: largest total uncompressed size of a workbook's parts, in bytes (a guard against zip bombs)
MAX_UNZIPPED_BYTES = 8 * MAX_FILE_BYTES
