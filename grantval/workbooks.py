"""Content of the output workbooks: sheets, live formulas, checks and charts.

This module decides what each sheet holds; :mod:`grantval.io.write` writes
it.  The expense workbook is built so that an auditor can test it without the
tool: Black-Scholes-Merton fair values are recomputed by live formulas from
the inputs on their row, row and column totals are SUM formulas, and a checks
sheet ties the figures out with PASS/FAIL formulas.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval import __version__
from grantval.io.cells import col_letter
from grantval.io.write import FIXED_TIME, Chart, Formula, Sheet
from grantval.notes import REVIEW, VALUATION_METHODS

MONEY = "#,##0.00;[Red]-#,##0.00"
UNIT = "#,##0.0000"
FORMATS = {
    "exercise_price": "#,##0.00", "share_price": "#,##0.00", "volatility": "0.00%", "risk_free_rate": "0.000%",
    "dividend_yield": "0.00%", "post_vest_exit_rate": "0.00%", "contractual_term_years": "0.0000",
    "expected_term_years": "0.0000", "fair_value_per_unit": UNIT, "grant_date_fair_value": MONEY,
    "tool_fair_value_per_unit": "0.000000", "recomputed_fair_value_per_unit": "0.000000", "difference": "0.00E+00",
    "quantity": "#,##0", "quantity_granted": "#,##0", "forfeited": "#,##0", "cancelled_unvested": "#,##0",
    "quantity_expensed": "#,##0.00", "service_elapsed": "0.00%", "recognised_to_date": MONEY,
    "unrecognised_cost": MONEY, "remaining_years": "0.00", "total": MONEY, "grant_date": "yyyy-mm-dd",
    "expiration_date": "yyyy-mm-dd", "vest_date": "yyyy-mm-dd", "number": "#,##0",
    "weighted_average_exercise_price": "#,##0.00", "weighted_average_remaining_term_years": "0.00",
    "aggregate_intrinsic_value": MONEY, "weighted_average_grant_date_fair_value": UNIT,
}
LEDGER_TEXT = ("grant_id", "holder_id", "group", "assumption_key")


@dataclass
class RunInfo:
    """What a run sheet states."""

    title: str
    command: str
    ledger: str
    files: list[tuple[str, str]]
    dates: list[tuple[str, str]]
    policies: list[tuple[str, str]]
    timestamp: bool = True

    def workbook_time(self) -> _dt.datetime:
        return _dt.datetime.now().replace(microsecond=0) if self.timestamp else FIXED_TIME


def run_sheet(info: RunInfo, when: _dt.datetime) -> Sheet:
    rows: list[list] = [[info.title], ["Tool", f"grantval {__version__}"], ["Command", info.command]]
    rows.append(["Run at", when.isoformat(sep=" ") if info.timestamp else "(not recorded: --no-timestamp)"])
    rows.append(["Ledger", info.ledger])
    rows.append([])
    rows.append(["Input file", "SHA-256"])
    rows += [[p, d] for p, d in info.files]
    rows.append([])
    rows.append(["Dates"])
    rows += [[k, v] for k, v in info.dates]
    rows.append([])
    rows.append(["Policies"])
    rows += [[k, v] for k, v in info.policies]
    rows.append([])
    rows.append(["Review", REVIEW])
    return Sheet("run", rows=rows, widths={1: 30, 2: 90})


def notes_sheet(extra: list[tuple[str, str]], warnings) -> Sheet:
    rows: list[list] = [["Notes"], [], ["Review", REVIEW], [], ["Valuation methods"]]
    rows += [[k, v] for k, v in VALUATION_METHODS]
    if extra:
        rows.append([])
        rows.append(["Expense rules"])
        rows += [[k, v] for k, v in extra]
    if warnings:
        rows.append([])
        rows.append(["Warnings from the ledger check"])
        rows += [[str(w)] for w in warnings]
    return Sheet("notes", rows=rows, widths={1: 28, 2: 120})


# ---------------------------------------------------------------- fair values

def _bsm_formula(r: int, c: dict[str, str]) -> Formula:
    """Live BSM formula on row ``r`` (cells S, K, T, rate, vol, q named in ``c``)."""
    S, K, T, R, V, Q = (f"{c[k]}{r}" for k in ("S", "K", "T", "r", "v", "q"))
    d1 = f"(LN({S}/{K})+({R}-{Q}+{V}^2/2)*{T})/({V}*SQRT({T}))"
    d2 = f"(LN({S}/{K})+({R}-{Q}-{V}^2/2)*{T})/({V}*SQRT({T}))"
    return Formula(f"={S}*EXP(-{Q}*{T})*NORMSDIST({d1})-{K}*EXP(-{R}*{T})*NORMSDIST({d2})")


AUDIT_INPUTS = ["model", "share_price", "exercise_price", "expected_term_years", "risk_free_rate", "volatility",
                "dividend_yield", "lattice_steps", "exercise_multiple", "post_vest_exit_rate"]


def recomputed_column(table: pd.DataFrame) -> str:
    """Column letter of the formula-recomputed fair value in the fair_values sheet."""
    return col_letter(1 + int("tranche" in table.columns) + len(AUDIT_INPUTS) + 2)


def fair_value_audit(table: pd.DataFrame) -> tuple[pd.DataFrame, dict]:
    """The auditor's fair-value table: inputs, tool value, live BSM recomputation, difference.

    Returns the frame and a dict with the recomputation column letter, the
    number of BSM rows and the tool's total over them.
    """
    cols = ["grant_id"] + (["tranche"] if "tranche" in table.columns else []) + AUDIT_INPUTS
    frame = table[cols].copy()
    frame["tool_fair_value_per_unit"] = table["fair_value_per_unit"].to_numpy()
    pos = {c: col_letter(i + 1) for i, c in enumerate(list(frame.columns) + ["recomputed_fair_value_per_unit"])}
    letters = {"S": pos["share_price"], "K": pos["exercise_price"], "T": pos["expected_term_years"],
               "r": pos["risk_free_rate"], "v": pos["volatility"], "q": pos["dividend_yield"]}
    bsm = table["model"].to_numpy() == "bsm"
    recomputed, diff = [], []
    for i, is_bsm in enumerate(bsm):
        r = i + 2
        if is_bsm:
            recomputed.append(_bsm_formula(r, letters))
            diff.append(Formula(f"={pos['recomputed_fair_value_per_unit']}{r}-{pos['tool_fair_value_per_unit']}{r}"))
        else:
            recomputed.append(None)
            diff.append(None)
    frame["recomputed_fair_value_per_unit"] = recomputed
    frame["difference"] = diff
    frame["fair_value_source"] = np.where(
        table["model"].to_numpy() == "supplied", "supplied by outside valuation",
        np.where(table["model"].to_numpy() == "lattice", "tool (lattice; inputs and steps shown)",
                 np.where(table["model"].to_numpy() == "rsu", "tool (RSU: share price less dividends forgone)",
                          "tool (BSM; recomputed by formula)")))
    assert pos["recomputed_fair_value_per_unit"] == recomputed_column(table)
    info = {"recomputed": pos["recomputed_fair_value_per_unit"], "rows": len(frame), "bsm_rows": int(bsm.sum()),
            "bsm_total": float(table["fair_value_per_unit"].to_numpy()[bsm].sum())}
    return frame, info


# ---------------------------------------------------------------- wide period tables

def with_sum_formulas(frame: pd.DataFrame, first_period_col: int, label_col: str) -> pd.DataFrame:
    """Replace the ``total`` column by row SUM formulas and append a column-total row of SUMs.

    ``first_period_col`` is the 1-based column of the first period; periods
    run up to the column before ``total``.
    """
    n = len(frame)
    cols = list(frame.columns)
    tcol = cols.index("total") + 1
    first, last = col_letter(first_period_col), col_letter(tcol - 1)
    out = frame.copy()
    if tcol - 1 >= first_period_col:
        out["total"] = [Formula(f"=SUM({first}{r}:{last}{r})") for r in range(2, n + 2)]
    else:
        out["total"] = 0.0
    total_row = {c: None for c in cols}
    total_row[label_col] = "Total"
    for j in range(first_period_col, tcol + 1):
        L = col_letter(j)
        total_row[cols[j - 1]] = Formula(f"=SUM({L}2:{L}{n + 1})") if n else 0.0
    return pd.concat([out, pd.DataFrame([total_row])], ignore_index=True)


@dataclass
class CheckRow:
    """One tie-out: two figures (values or formulas), a tolerance and the tool's own verdict."""

    name: str
    a: object
    b: object
    tolerance: float
    tool_pass: bool
    relative: bool = False


def checks_sheet(rows: list[CheckRow]) -> Sheet:
    """Checks as rows: figure A, figure B, difference, tolerance, status (formula) and the tool's verdict."""
    out: list[list] = [["Check", "Figure A", "Figure B", "Difference", "Tolerance", "Status", "Tool's verdict"]]
    fmts = {}
    for i, c in enumerate(rows):
        r = i + 2
        tol = Formula(f"={c.tolerance!r}*ABS(C{r})") if c.relative else c.tolerance
        out.append([c.name, c.a, c.b, Formula(f"=B{r}-C{r}"), tol,
                    Formula(f'=IF(ABS(D{r})<=E{r},"PASS","FAIL")'), "PASS" if c.tool_pass else "FAIL"])
        for j in (1, 2, 3):
            fmts[(i + 1, j)] = "#,##0.00########"
        fmts[(i + 1, 4)] = "0.00E+00"
    return Sheet("checks", rows=out, widths={1: 70, 2: 20, 3: 20, 4: 14, 5: 12, 6: 10, 7: 14}, row_formats=fmts)


def expense_sheets(run, info: RunInfo, fv_frame, by_grant, by_group, tranches, unrec, unrec_total, unrec_wa, forecast,
                   disclosure, checks: list[CheckRow], rules: list[tuple[str, str]]) -> list[Sheet]:
    """Sheets of the expense workbook, in order."""
    sched = run.schedule
    p = len(sched.period_ends)
    period_fmt = {str(d): MONEY for d in np.asarray(sched.period_ends, dtype="datetime64[D]")}
    fperiod_fmt = {str(d): MONEY for d in np.asarray(sched.forecast_ends, dtype="datetime64[D]")}
    fmts = {**FORMATS, **period_fmt}
    total_cents = int(sched.expense_cents.sum())
    period_totals = sched.expense_cents.sum(axis=0)
    summary = [
        ["Summary"], [],
        ["Ledger", run.ledger.location], ["From", run.start], ["Through", run.through],
        ["Forecast through", run.forecast_through or "(none)"],
        ["Grants", run.ledger.n_grants], ["Tranches", len(run.inputs.t_qty)], [],
        ["Policies"], *[[k, v] for k, v in run.policy.describe()], [],
        ["Expense in the window", total_cents / 100.0],
        ["Unrecognised cost at the through date", unrec_total],
        ["Weighted-average remaining recognition period (years)", unrec_wa], [],
    ]
    head = len(summary) + 1  # 1-based row of the period table's header
    summary.append(["Period end", "Expense"])
    summary += [[str(d), int(c) / 100.0] for d, c in zip(sched.period_ends, period_totals)]
    sfmt = {(head - 5, 1): MONEY, (head - 4, 1): MONEY, (head - 3, 1): "0.00"}  # 0-based rows of the totals
    sfmt.update({(head + k, 1): MONEY for k in range(p)})
    charts = [Chart("bar", "Expense by period", (2, head, 2, head + p), (1, head + 1, 1, head + p), "D2",
                    y_title="Expense", x_title="Period end")]
    n_groups = len(by_group)
    group_chart = Chart("bar", "Expense by group", (len(by_group.columns), 1, len(by_group.columns), n_groups + 1),
                        (1, 2, 1, n_groups + 1), f"A{n_groups + 5}", y_title="Expense")
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("summary", rows=summary, widths={1: 52, 2: 22}, charts=charts, row_formats=sfmt),
        Sheet("fair_values", frame=fv_frame, formats=FORMATS, text_columns=("grant_id",),
              widths={"fair_value_source": 44, "recomputed_fair_value_per_unit": 18, "tool_fair_value_per_unit": 16}),
        Sheet("expense_by_grant", frame=with_sum_formulas(by_grant, 7, "grant_id"), formats={**fmts, "total": MONEY},
              text_columns=("grant_id", "group")),
        Sheet("expense_by_group", frame=with_sum_formulas(by_group, 2, "group"), formats={**fmts, "total": MONEY},
              text_columns=("group",), charts=[group_chart]),
        Sheet("tranches", frame=tranches, formats=FORMATS, text_columns=("grant_id",)),
        Sheet("forecast", frame=with_sum_formulas(forecast, 7, "grant_id"),
              formats={**FORMATS, **fperiod_fmt, "total": MONEY}, text_columns=("grant_id", "group")),
        Sheet("unrecognized", frame=unrec, formats=FORMATS, text_columns=("grant_id", "group")),
    ]
    if disclosure is not None:
        sheets += disclosure_sheets(disclosure)
    sheets.append(checks_sheet(checks))
    sheets.append(notes_sheet(rules, run.ledger.warnings))
    return sheets


def disclosure_sheets(d) -> list[Sheet]:
    """Option activity, RSU activity and the window's grant figures."""
    return [
        Sheet("option_activity", frame=d.options, formats=FORMATS, widths={"line": 38}),
        Sheet("rsu_activity", frame=d.rsus, formats=FORMATS, widths={"line": 24}),
        Sheet("grant_disclosures", frame=d.grants, formats={"value": "#,##0.0000"}, widths={"item": 80, "value": 18}),
    ]


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
