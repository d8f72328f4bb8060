"""Sheets of the what-if workbook."""

from __future__ import annotations

from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Chart, Sheet
from grantval.reporting.formats import MONEY, UNIT
from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet


WHATIF_NOTES = [
    ("Scenarios", "Each scenario shifts the named assumptions of the grants dated in the chosen window: a level "
                  "(0.45) replaces the value, +0.05 adds to it, +10% scales it. Several --vary options give the full "
                  "grid of their shifts. Other grants keep their base fair values."),
    ("Expected term", "Shifts the term used by Black-Scholes-Merton (given or simplified). Lattice grants run to "
                      "the contractual term and RSUs to their vesting dates, so it does not change them."),
    ("Forfeiture rate", "Shifts the annual forfeiture rate in force (zero where none); grants estimated by an "
                        "expected vest fraction keep it."),
    ("Supplied values", "Fair values supplied by an outside valuation are never changed."),
    ("Tornado", "One shift at a time, the others at base: the change in total expense and in the window's "
                "grant-date fair value."),
    ("Sensitivities", "Analytic Black-Scholes-Merton derivatives of each BSM grant's base value: per volatility "
                      "point (+0.01), per year of expected term, per rate and dividend point (+0.01)."),
]


def whatif_sheets(info: RunInfo, scen, sens, torn, fvs, exp, greeks, curve, warnings) -> list[Sheet]:
    """Sheets of the what-if workbook, with a line chart of expense by period and a volatility chart."""
    money_cols = {c: MONEY for c in sens.columns if "percent" not in c and c not in ("scenario", "description")}
    pct_cols = {c: "0.00%" for c in sens.columns if "percent" in c}
    n_s = len(scen)
    exp_fmt = {c: MONEY for c in exp.columns if c != "period_end"}
    line = Chart("line", "Expense by period per scenario", (2, 1, 1 + n_s, len(exp) + 1), (1, 2, 1, len(exp) + 1),
                 f"{col_letter(n_s + 3)}2", y_title="Expense", x_title="Period end")
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("scenarios", frame=scen, widths={"description": 70}),
        Sheet("sensitivity", frame=sens, formats={**money_cols, **pct_cols}, widths={"description": 60}),
        Sheet("tornado", frame=torn, formats={c: MONEY for c in torn.columns if "change" in c or "range" in c}),
        Sheet("fair_values", frame=fvs, formats={c: UNIT for c in fvs.columns if c != "grant_id"},
              text_columns=("grant_id",)),
        Sheet("expense_by_period", frame=exp, formats={**exp_fmt, "period_end": "yyyy-mm-dd"}, charts=[line]),
    ]
    if curve is not None:
        vc = Chart("line", "Grant-date fair value against volatility", (4, 1, 4, len(curve) + 1),
                   (3, 2, 3, len(curve) + 1), "F2", y_title="Grant-date fair value", x_title="Weighted-average volatility")
        sheets.append(Sheet("volatility_curve", frame=curve,
                            formats={"weighted_average_volatility": "0.00%", "grant_date_fair_value_window": MONEY},
                            widths={"description": 40}, charts=[vc]))
    sheets.append(Sheet("sensitivities_bsm", frame=greeks,
                        formats={c: "#,##0.0000" for c in greeks.columns if c not in ("grant_id", "tranche")},
                        text_columns=("grant_id",)))
    sheets.append(notes_sheet(WHATIF_NOTES, warnings))
    return sheets
