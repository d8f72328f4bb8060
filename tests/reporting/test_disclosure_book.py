"""Number formats of the grant_disclosures lines: counts whole, money to cents, rates as %, years to 2 places."""

import pandas as pd

from grantval.reporting.disclosure_book import _grant_lines, line_format


def test_each_line_has_the_format_of_what_it_holds():
    assert line_format("options granted: number") == "#,##0"
    assert line_format("Options exercised without an event share price (not in the intrinsic value)") == "#,##0"
    assert line_format("options granted: weighted-average grant-date fair value") == "#,##0.0000"
    assert line_format("BSM options granted: weighted-average expected volatility") == "0.00%"
    assert line_format("BSM options granted: lowest risk-free rate") == "0.00%"
    assert line_format("BSM options granted: highest dividend yield") == "0.00%"
    assert line_format("BSM options granted: weighted-average expected term (years)") == "0.00"
    assert line_format("Weighted-average remaining recognition period (years)") == "0.00"
    assert line_format("Unrecognised cost at end") == "#,##0.00;[Red]-#,##0.00"
    assert line_format("Total intrinsic value of options exercised") == "#,##0.00;[Red]-#,##0.00"


def test_sheet_formats_per_line():
    g = pd.DataFrame({"item": ["RSUs granted: number", "BSM options granted: lowest expected volatility"],
                      "value": [1200.0, 0.35]})
    sh = _grant_lines(g)
    assert sh.rows[1] == ["RSUs granted: number", 1200.0]
    assert sh.row_formats[(1, 1)] == "#,##0" and sh.row_formats[(2, 1)] == "0.00%"
