"""Sheets of the fair-value workbook (``grantval value``)."""

from __future__ import annotations

from grantval import __version__
from grantval.io.xlsx.sheet import Sheet
from grantval.reporting.formats import LEDGER_TEXT
from grantval.reporting.notes import REVIEW, VALUATION_METHODS

FAIR_VALUE_FORMATS = {
    "exercise_price": "#,##0.00",
    "share_price": "#,##0.00",
    "volatility": "0.00%",
    "risk_free_rate": "0.000%",
    "dividend_yield": "0.00%",
    "post_vest_exit_rate": "0.00%",
    "contractual_term_years": "0.0000",
    "expected_term_years": "0.0000",
    "fair_value_per_unit": "#,##0.0000",
    "std_error": "0.000000",
    "derived_service_years": "0.0000",
    "grant_date_fair_value": "#,##0.00",
    "quantity": "#,##0",
    "grant_date": "yyyy-mm-dd",
    "expiration_date": "yyyy-mm-dd",
    "vest_date": "yyyy-mm-dd",
}


def notes_rows(run_title: str, ledger, policy, extra: list[tuple[str, str]] = ()) -> list[list]:
    """Rows of the notes sheet: what was run, on what, with which policies and methods."""
    rows: list[list] = [[run_title], [], ["Review", REVIEW], [], ["Tool", f"grantval {__version__}"],
                        ["Ledger", ledger.location]]
    for path, digest in ledger.files:
        rows.append(["Input file", path, digest])
    rows.append([])
    rows.append(["Policies"])
    for k, v in policy.describe():
        rows.append([k, v])
    rows += [[k, v] for k, v in extra]
    rows.append([])
    rows.append(["Methods"])
    rows += [[k, v] for k, v in VALUATION_METHODS]
    if ledger.warnings:
        rows.append([])
        rows.append(["Warnings from the ledger check"])
        rows += [[str(w)] for w in ledger.warnings]
    return rows



def value_sheets(run) -> list[Sheet]:
    """The fair-value table and its notes (what was run, on what, with which policies and methods)."""
    return [
        Sheet("fair_values", frame=run.fair_values.table, formats=FAIR_VALUE_FORMATS, text_columns=LEDGER_TEXT,
              widths={"grant_id": 14, "expected_term_method": 34, "fair_value_source": 28}),
        Sheet("notes", rows=notes_rows("grantval value: grant-date fair values", run.ledger, run.policy,
                                       [("distinct valuations", str(run.fair_values.distinct_valuations))]),
              widths={1: 28, 2: 100, 3: 66}),
    ]
