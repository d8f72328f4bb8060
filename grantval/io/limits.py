"""Limits on what is read: file size, rows, uncompressed workbook size, text cell length.

The limits set by environment variables are read when they are used, by
:func:`max_file_bytes` and :func:`max_rows`; a malformed value (``0.5``,
``abc``, ``-1``, ``0``) raises :class:`~grantval.errors.UsageError` naming the
variable instead of being replaced silently by the default.  The module
constants keep the values read at import (the default when the variable is
malformed) for code that imports them; the readers use the functions.
"""

from __future__ import annotations

import os

from grantval.errors import UsageError

#: default largest input file, MiB (GRANTVAL_MAX_FILE_MB)
DEFAULT_FILE_MB = 64
#: default most data rows in one table (GRANTVAL_MAX_ROWS)
DEFAULT_ROWS = 2_000_000
#: longest text accepted in one cell, characters (Excel's limit for a cell)
MAX_CELL_CHARS = 32_767
#: most columns read from one sheet or CSV row (a table has a few dozen at most)
MAX_COLUMNS = 1_024
#: shared strings a workbook may hold beyond the number of cells of its sheets
SHARED_STRING_SLACK = 65_536


def _env_int(name: str, default: int, what: str) -> int:
    """A positive whole number from the environment variable ``name``, or ``default`` when it is unset or empty.

    Raises
    ------
    UsageError
        When the variable is set to anything but a positive whole number.
    """
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    text = raw.strip().replace("_", "")
    if not text.isdigit() or int(text) < 1:
        raise UsageError(f"environment variable {name}={raw!r} is not a positive whole number of {what}; "
                         f"set it to one (the default is {default:,}) or unset it")
    return int(text)


def max_file_bytes() -> int:
    """Largest input file accepted, bytes (``GRANTVAL_MAX_FILE_MB``, whole MiB; default 64)."""
    return _env_int("GRANTVAL_MAX_FILE_MB", DEFAULT_FILE_MB, "MiB") * 2**20


def max_rows() -> int:
    """Most data rows accepted in one table (``GRANTVAL_MAX_ROWS``; default 2,000,000)."""
    return _env_int("GRANTVAL_MAX_ROWS", DEFAULT_ROWS, "rows")


def max_unzipped_bytes() -> int:
    """Largest total uncompressed size of a workbook's parts, bytes (8 times the file limit; a zip-bomb guard)."""
    return 8 * max_file_bytes()


def format_size(n: int) -> str:
    """A byte count as people read it: ``512 bytes``, ``12.5 KiB``, ``3.2 MiB``, ``1.5 GiB``."""
    if n < 1024:
        return f"{n:,} byte" + ("" if n == 1 else "s")
    for unit, scale in (("KiB", 2**10), ("MiB", 2**20), ("GiB", 2**30)):
        if n < 1024 * scale or unit == "GiB":
            x = n / scale
            return f"{x:.1f} {unit}" if x < 100 else f"{x:,.0f} {unit}"
    raise AssertionError(n)  # pragma: no cover


def file_too_large(size: int) -> str | None:
    """The refusal message for a file of ``size`` bytes, or None when it is within the limit."""
    limit = max_file_bytes()
    if size <= limit:
        return None
    return (f"the file is {format_size(size)} ({size:,} bytes), larger than the limit of {format_size(limit)} "
            "(environment variable GRANTVAL_MAX_FILE_MB)")


def _import_value(fn, default):
    try:
        return fn()
    except UsageError:
        return default


#: largest input file accepted, bytes, as read at import (use :func:`max_file_bytes`)
MAX_FILE_BYTES = _import_value(max_file_bytes, DEFAULT_FILE_MB * 2**20)
#: most data rows accepted in one table, as read at import (use :func:`max_rows`)
MAX_ROWS = _import_value(max_rows, DEFAULT_ROWS)
#: largest total uncompressed size of a workbook's parts, bytes, as read at import (use :func:`max_unzipped_bytes`)
MAX_UNZIPPED_BYTES = 8 * MAX_FILE_BYTES
