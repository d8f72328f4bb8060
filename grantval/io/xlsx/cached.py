"""Cached results of formula cells, spliced into a saved sheet's XML.

openpyxl writes a formula cell with an empty value (``<f>..</f><v/>``), so a reader that does
not recalculate (a file previewer, openpyxl with ``data_only=True``) shows the cell blank.
When the tool knows what a formula evaluates to (the verdict of a check, the difference of two
plain figures), that result is written as the cell's cached value.  Spreadsheets still
recalculate on load (openpyxl sets ``fullCalcOnLoad``), so the cached value is only what a
non-recalculating reader shows.
"""

from __future__ import annotations

import math
import re

from grantval.errors import OutputError

_CELL = re.compile(rb'<c r="([A-Z]+[0-9]+)"([^>]*)>(<f>[^<]*</f>)<v\s*/>(</c>)')
_TYPE = re.compile(rb'\st="[^"]*"')


def _value_xml(value) -> tuple[bytes, bytes]:
    """(type attribute, escaped value) of a cached result: text as ``t="str"``, numbers as plain."""
    if isinstance(value, bool):
        return b' t="b"', b"1" if value else b"0"
    if isinstance(value, (int, float)):
        if not math.isfinite(float(value)):
            raise OutputError(f"cannot cache the non-finite formula result {value!r}")
        return b"", repr(float(value)).encode() if isinstance(value, float) else str(int(value)).encode()
    text = str(value).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return b' t="str"', text.encode("utf-8")


def splice_cached(sheet_xml: bytes, values: dict[str, object]) -> bytes:
    """``sheet_xml`` with the formula cells named in ``values`` (``"F2"`` -> result) given cached results.

    Raises
    ------
    OutputError
        If a named cell is not an empty-valued formula cell of the sheet (the writer and this
        splice disagree about the layout: better no workbook than a wrong cached value).
    """
    if not values:
        return sheet_xml
    left = dict(values)

    def put(m: re.Match) -> bytes:
        ref = m.group(1).decode()
        if ref not in left:
            return m.group(0)
        kind, text = _value_xml(left.pop(ref))
        attrs = _TYPE.sub(b"", m.group(2)) + kind
        return b'<c r="' + m.group(1) + b'"' + attrs + b">" + m.group(3) + b"<v>" + text + b"</v>" + m.group(4)

    out = _CELL.sub(put, sheet_xml)
    if left:
        raise OutputError(f"internal: no formula cell to hold a cached value at {', '.join(sorted(left))}")
    return out
