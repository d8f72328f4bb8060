"""Reading one ledger table from a CSV file."""

from __future__ import annotations

import csv
import io
import pathlib

from grantval.errors import Problem
from grantval.io.tables import RawTable, _table_from_rows


def read_csv_table(path: pathlib.Path, name: str, known: frozenset = frozenset()) -> RawTable:
    """Read one CSV file (UTF-8, with or without byte-order mark, comma-delimited)."""
    source = path.name
    data = path.read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        return RawTable(name, source, [], [], [], [], [Problem(
            source, line, None,
            "the file is not UTF-8 text (byte %d); save it as CSV UTF-8" % (exc.start + 1),
        )])
    if "\x00" in text:
        return RawTable(name, source, [], [], [], [], [Problem(source, None, None, "the file is not a CSV text file")])
    reader = csv.reader(io.StringIO(text, newline=""))
    table = _table_from_rows(name, source, ((reader.line_num, row) for row in reader), known)
    if table.headers and len(table.headers) == 1 and ";" in table.original_headers[0]:
        table.problems.append(Problem(
            source, 1, None, "the file seems to use ';' as its delimiter; grantval reads comma-separated files",
        ))
    return table
