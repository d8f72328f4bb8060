"""Sheets of the disclosure tables."""

from __future__ import annotations

from grantval.io.xlsx.sheet import Sheet
from grantval.reporting.formats import FORMATS


def disclosure_sheets(d) -> list[Sheet]:
    """Option activity, RSU activity and the window's grant figures."""
    return [
        Sheet("option_activity", frame=d.options, formats=FORMATS, widths={"line": 38}),
        Sheet("rsu_activity", frame=d.rsus, formats=FORMATS, widths={"line": 24}),
        Sheet("grant_disclosures", frame=d.grants, formats={"value": "#,##0.0000"}, widths={"item": 80, "value": 18}),
    ] + ([Sheet("performance_unit_activity", frame=d.performance_units, formats=FORMATS, widths={"line": 44})]
         if d.performance_units is not None else [])
