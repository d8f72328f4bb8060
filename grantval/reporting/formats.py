"""Number formats of the output sheets, by column name."""

from __future__ import annotations

MONEY = "#,##0.00;[Red]-#,##0.00"


UNIT = "#,##0.0000"


COUNT = "#,##0"


PRICE = "#,##0.00"


FORMATS = {
    "exercise_price": "#,##0.00", "share_price": "#,##0.00", "volatility": "0.00%", "risk_free_rate": "0.000%",
    "dividend_yield": "0.00%", "post_vest_exit_rate": "0.00%", "contractual_term_years": "0.0000",
    "expected_term_years": "0.0000", "fair_value_per_unit": UNIT, "grant_date_fair_value": MONEY,
    "tool_fair_value_per_unit": "0.000000", "recomputed_fair_value_per_unit": "0.000000", "difference": "0.000000000",
    "quantity": "#,##0", "quantity_granted": "#,##0", "forfeited": "#,##0", "cancelled_unvested": "#,##0",
    "quantity_expected_to_vest": "#,##0.00", "service_elapsed": "0.00%", "recognised_to_date": MONEY,
    "unrecognised_cost": MONEY, "remaining_years": "0.00", "total": MONEY, "grant_date": "yyyy-mm-dd",
    "expiration_date": "yyyy-mm-dd", "vest_date": "yyyy-mm-dd", "number": "#,##0",
    "weighted_average_exercise_price": "#,##0.00", "weighted_average_remaining_term_years": "0.00",
    "aggregate_intrinsic_value": MONEY, "weighted_average_grant_date_fair_value": UNIT,
    "std_error": "0.000000", "derived_service_years": "0.0000",
}


LEDGER_TEXT = ("grant_id", "holder_id", "group", "assumption_key")


def period_labels(period_ends) -> list[str]:
    """Period ends as printed labels: "Dec 2026" for a month end, "17 Aug 2030" for any other day.

    Every period (month, quarter or fiscal year) ends on a month end, so the month names it
    exactly; a window cut short (a through date within a month) keeps its day.
    """
    import numpy as np

    days = np.asarray(period_ends, dtype="datetime64[D]")
    month_end = (days + np.timedelta64(1, "D")).astype("datetime64[M]") != days.astype("datetime64[M]")
    out = []
    for d, whole in zip(days.astype(object), month_end):
        out.append(d.strftime("%b %Y") if whole else f"{d.day} {d.strftime('%b %Y')}")
    return out
