"""Sheets of the disclosure tables."""

from __future__ import annotations

from grantval.io.xlsx.sheet import Sheet
from grantval.reporting.formats import FORMATS, MONEY, UNIT


def line_format(item: str) -> str:
    """Number format of one grant-disclosure line: counts whole, money to cents, rates as %, years to 2 places."""
    if "number" in item or item.startswith("Options exercised without"):
        return "#,##0"
    if "weighted-average grant-date fair value" in item:
        return UNIT
    if "years" in item or "term" in item or "correlation" in item:
        return "0.00"
    if any(w in item for w in ("volatility", "rate", "yield")):
        return "0.00%"
    return MONEY


def _grant_lines(grants) -> Sheet:
    """The window's grant figures, one line each with the format of what it holds."""
    rows: list[list] = [["Item", "Value"]]
    fmts = {}
    for i, (item, value) in enumerate(zip(grants["item"], grants["value"]), start=1):
        rows.append([str(item), None if value != value else float(value)])
        fmts[(i, 1)] = line_format(str(item))
    return Sheet("grant_disclosures", rows=rows, row_formats=fmts, widths={1: 80, 2: 18})


def _activity(name: str, frame, line_width: int) -> Sheet:
    """An activity table: its line labels at ``line_width``, figures in narrow columns under wrapped headers."""
    widths = {c: 15 for c in frame.columns if c != "line"} | {"line": line_width}
    return Sheet(name, frame=frame, formats=FORMATS, widths=widths)


def disclosure_sheets(d) -> list[Sheet]:
    """Option activity, RSU activity and the window's grant figures."""
    return [
        _activity("option_activity", d.options, 38),
        _activity("rsu_activity", d.rsus, 24),
        _grant_lines(d.grants),
    ] + ([_activity("performance_unit_activity", d.performance_units, 44)] if d.performance_units is not None else [])
