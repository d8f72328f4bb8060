"""Sheets of the what-if workbook."""

from __future__ import annotations

import numpy as np

from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Chart, Formula, Sheet
from grantval.reporting.formats import MONEY, UNIT, period_labels
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


#: the change chart draws every scenario up to this many; beyond, the lowest and highest totals
CHART_SCENARIOS = 6


TORNADO_LABELS = {"shift_lowest_expense": "Shift giving the lowest expense",
                  "expense_change_low": "Expense change, lowest",
                  "shift_highest_expense": "Shift giving the highest expense",
                  "expense_change_high": "Expense change, highest"}


def tornado_sheet(torn) -> Sheet:
    """The tornado table with its chart: the low and high change of expense on one row per assumption.

    Horizontal bars around the base (zero change), the widest swing on top (the table's first row).
    """
    n = len(torn)
    cols = list(torn.columns)
    charts = []
    if n:
        lo, hi = cols.index("expense_change_low") + 1, cols.index("expense_change_high") + 1
        charts.append(Chart("bar", "Tornado: change in expense, one assumption at a time",
                            [(lo, 1, lo, n + 1), (hi, 1, hi, n + 1)], (1, 2, 1, n + 1), f"A{n + 4}",
                            y_title="Change in expense from the base", x_title="Assumption shifted",
                            horizontal=True, first_on_top=True, overlap=100,
                            size=(22.0, min(14.0, max(8.0, 4.0 + 1.5 * n)))))
    return Sheet("tornado", frame=torn, formats={c: MONEY for c in torn.columns if "change" in c or "range" in c},
                 labels=TORNADO_LABELS, widths={"assumption": 24}, charts=charts)


def expense_period_sheet(exp, scen) -> Sheet:
    """Expense by period per scenario, with a label per period and each scenario's change from the base.

    The changes are live formulas on the scenario columns; the chart draws them as straight lines
    (every scenario, or beyond ``CHART_SCENARIOS`` the ones with the lowest and highest total change),
    each named with its scenario's shifts.
    """
    n, ids = len(exp), [c for c in exp.columns if c != "period_end"]
    describe = dict(zip(scen["scenario"], scen["description"]))
    frame = exp.copy()
    frame.insert(0, "period", period_labels(exp["period_end"]))  # the label (text, left) beside the date (right)
    base = col_letter(3)
    labels, change = {"period": "Period ending"}, []
    for k, sid in enumerate(ids[1:]):
        own = col_letter(4 + k)
        name = f"change_{sid}"
        frame[name] = [Formula(f"={own}{r}-${base}{r}") for r in range(2, n + 2)]
        labels[name] = f"Change {sid} ({describe.get(sid, sid).replace('_', ' ')})"  # breaks between words
        change.append(name)
    first = 3 + len(ids)  # 1-based column of the first change
    shown = list(range(len(change)))
    if len(change) > CHART_SCENARIOS:
        totals = [float((exp[sid] - exp[ids[0]]).sum()) for sid in ids[1:]]
        shown = sorted({int(np.argmin(totals)), int(np.argmax(totals))})
    title = "Change in expense from the base, by period" + (
        "" if len(shown) == len(change) else " (the scenarios with the lowest and highest total)")
    charts = [Chart("line", title, [(first + k, 1, first + k, n + 1) for k in shown], (1, 2, 1, n + 1),
                    f"A{n + 4}", y_title="Change in expense from the base", x_title="Period ending",
                    size=(24.0, 11.0), new_page=n > 20)] if change and n else []
    fmt = {c: MONEY for c in frame.columns if c not in ("period_end", "period")}
    return Sheet("expense_by_period", frame=frame, formats={**fmt, "period_end": "yyyy-mm-dd"}, labels=labels,
                 widths={**{c: 18 for c in change}, "period": 12}, text_columns=("period",), charts=charts)


def whatif_sheets(info: RunInfo, scen, sens, torn, fvs, exp, greeks, curve, warnings) -> list[Sheet]:
    """Sheets of the what-if workbook, with the tornado, the change of expense by period and a volatility chart."""
    money_cols = {c: MONEY for c in sens.columns if "percent" not in c and c not in ("scenario", "description")}
    pct_cols = {c: "0.00%" for c in sens.columns if "percent" in c}
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("scenarios", frame=scen, widths={"description": 70}),
        Sheet("sensitivity", frame=sens, formats={**money_cols, **pct_cols},
              widths={**{c: 14 for c in [*money_cols, *pct_cols]}, "description": 44}),  # headers wrap
        tornado_sheet(torn),
        Sheet("fair_values", frame=fvs, formats={c: UNIT for c in fvs.columns if c != "grant_id"},
              text_columns=("grant_id",)),
        expense_period_sheet(exp, scen),
    ]
    if curve is not None:
        vc = Chart("scatter", "Grant-date fair value of the window's grants by volatility",
                   (4, 1, 4, len(curve) + 1), (3, 2, 3, len(curve) + 1), f"A{len(curve) + 4}",
                   y_title="Grant-date fair value", x_title="Weighted-average volatility", category_format="0%",
                   size=(18.0, 9.0),
                   legend=None)
        sheets.append(Sheet("volatility_curve", frame=curve,
                            formats={"weighted_average_volatility": "0.00%", "grant_date_fair_value_window": MONEY},
                            widths={"description": 40}, charts=[vc]))
    sheets.append(Sheet("sensitivities_bsm", frame=greeks,
                        formats={c: "#,##0.0000" for c in greeks.columns if c not in ("grant_id", "tranche")},
                        text_columns=("grant_id",)))
    sheets.append(notes_sheet(WHATIF_NOTES, warnings))
    return sheets
