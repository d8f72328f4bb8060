"""Tables, journal lines, checks and workbook sheets of the tax effects of an expense run."""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.io.xlsx.sheet import Formula, Sheet
from grantval.reporting.checks import CheckRow
from grantval.reporting.formats import MONEY

#: money columns of ``deferred_tax.csv``
DEFERRED_MONEY = ("deferred_tax_asset", "excess_tax_benefit", "to_equity", "tax_deduction", "current_tax_benefit",
                  "deferred_tax_benefit", "income_tax_benefit")

DTA = "Deferred tax asset - share-based compensation"
DEFERRED_PL = "Deferred income tax expense (benefit)"
CURRENT_PL = "Current income tax expense (benefit)"
PAYABLE = "Income taxes payable"
EQUITY = "Additional paid-in capital - share-based payment tax (IAS 12.68C)"


def cents(values) -> np.ndarray:
    """Signed currency amounts rounded to whole cents, half away from zero (currency)."""
    v = np.asarray(values, dtype=float)
    return np.sign(v) * np.floor(np.abs(v) * 100.0 + 0.5) / 100.0


def _groups(inp) -> np.ndarray:
    """Group of each grant, blank shown as ``(none)`` (as the expense tables do)."""
    g = np.asarray(inp.group, dtype=object)
    return np.where(pd.isna(g) | (g == ""), "(none)", g).astype(str)


def deferred_tax_table(inp, eff) -> pd.DataFrame:
    """``deferred_tax.csv``: one row per grant with any tax effect and period.

    Columns: grant_id, group, period_end, deferred_tax_asset (at the period end), excess_tax_benefit
    (+ windfall / - shortfall in income tax expense of the period), to_equity (credited to equity in
    the period; IFRS only), then tax_deduction, current_tax_benefit, deferred_tax_benefit and
    income_tax_benefit (total in profit or loss) of the period; currency.
    """
    cols = {"deferred_tax_asset": eff.dta, "excess_tax_benefit": eff.excess, "to_equity": eff.to_equity,
            "tax_deduction": eff.deduction, "current_tax_benefit": eff.current,
            "deferred_tax_benefit": eff.deferred_benefit, "income_tax_benefit": eff.income_tax_benefit}
    n, p = eff.dta.shape
    any_effect = np.zeros(n, dtype=bool)
    for v in cols.values():
        any_effect |= np.any(np.abs(v) >= 0.005, axis=1)
    any_effect |= np.abs(eff.dta_opening) >= 0.005
    keep = np.repeat(any_effect, p)
    data = {"grant_id": np.repeat(np.asarray(inp.grant_id, dtype=object), p)[keep],
            "group": np.repeat(_groups(inp), p)[keep],
            "period_end": np.tile(np.asarray(eff.period_ends, dtype="datetime64[D]"), n)[keep]}
    data.update({k: cents(v.ravel()[keep]) for k, v in cols.items()})
    return pd.DataFrame(data)


def tax_rollforward(eff) -> pd.DataFrame:
    """Roll-forward of the deferred tax asset and the tax lines of profit or loss, one row per period.

    ASC 718-740: opening + on compensation cost - reversed at settlement + rate changes = closing.
    IFRS (IAS 12.68A-68C): opening + to profit or loss + to equity = closing.
    """
    s = lambda a: a.sum(axis=0)
    closing = s(eff.dta)
    opening = np.concatenate([[eff.dta_opening.sum()], closing[:-1]])
    frame = {"period_end": np.asarray(eff.period_ends, dtype="datetime64[D]"), "opening_deferred_tax_asset": opening}
    if eff.standard == "ifrs2":
        d_eq = np.diff(np.column_stack([eff.in_equity_opening, eff.in_equity]), axis=1)
        frame.update({"deferred_to_profit_or_loss": s(eff.deferred_benefit), "deferred_to_equity": s(d_eq)})
    else:
        frame.update({"on_compensation_cost": s(eff.on_cost), "reversed_at_settlement": -s(eff.reversed),
                      "rate_changes": s(eff.rate_changes)})
    frame["closing_deferred_tax_asset"] = closing
    frame.update({"current_tax_benefit": s(eff.current), "excess_tax_benefit": s(eff.excess),
                  "to_equity": s(eff.to_equity), "income_tax_benefit": s(eff.income_tax_benefit)})
    out = pd.DataFrame(frame)
    for c in out.columns[1:]:
        out[c] = cents(out[c].to_numpy())
    return out


def _entries(eff) -> list[tuple[str, str, str, np.ndarray]]:
    """(description, account debited when positive, account credited when positive, amounts per grant x period)."""
    d_eq = np.diff(np.column_stack([eff.in_equity_opening, eff.in_equity]), axis=1)
    if eff.standard == "ifrs2":
        return [
            ("Deferred tax on share-based payment to profit or loss (IAS 12.68B)", DTA, DEFERRED_PL,
             eff.deferred_benefit),
            ("Deferred tax on share-based payment above cumulative expense, to equity (IAS 12.68C)", DTA, EQUITY, d_eq),
            ("Current tax deduction on exercise, vesting or disposition, to profit or loss", PAYABLE, CURRENT_PL,
             eff.current - eff.current_to_equity),
            ("Current tax deduction above cumulative expense, to equity (IAS 12.68C)", PAYABLE, EQUITY,
             eff.current_to_equity),
        ]
    return [
        ("Deferred tax on share-based compensation cost and rate changes (ASC 718-740-25-2, 30-1)", DTA, DEFERRED_PL,
         eff.on_cost + eff.rate_changes),
        ("Deferred tax reversed when the deduction is fixed (ASC 718-740-35-2)", DEFERRED_PL, DTA, eff.reversed),
        ("Current tax deduction on exercise, vesting or disqualifying disposition (ASC 718-740-35-2, 25-3)", PAYABLE,
         CURRENT_PL, eff.current),
    ]


def tax_journal(inp, eff) -> pd.DataFrame:
    """Journal lines of the tax effects: period_end, account, group, debit, credit, description (currency).

    One balanced pair of lines per entry, period and group; zero amounts are left out, negative
    amounts swap debit and credit.
    """
    groups = _groups(inp)
    names, inverse = np.unique(groups, return_inverse=True)
    rows = []
    ends = np.asarray(eff.period_ends, dtype="datetime64[D]")
    for desc, dr, cr, amounts in _entries(eff):
        sums = np.zeros((len(names), amounts.shape[1]))
        np.add.at(sums, inverse, amounts)
        sums = cents(sums)
        for gi, k in zip(*np.nonzero(np.abs(sums) >= 0.005)):
            a = float(sums[gi, k])
            first, second = (dr, cr) if a > 0 else (cr, dr)
            rows.append((ends[k], first, names[gi], abs(a), 0.0, desc))
            rows.append((ends[k], second, names[gi], 0.0, abs(a), desc))
    frame = pd.DataFrame(rows, columns=["period_end", "account", "group", "debit", "credit", "description"])
    if len(frame):
        frame["period_end"] = frame["period_end"].to_numpy("datetime64[D]")
        frame = frame.sort_values(["period_end", "group"], kind="stable").reset_index(drop=True)
    return frame


def tax_checks(inp, eff, deferred: pd.DataFrame, roll: pd.DataFrame, journal: pd.DataFrame) -> list[CheckRow]:
    """Tie-outs of the tax tables, each from two independent computations."""
    out = []
    if eff.standard != "ifrs2":
        lines = roll["opening_deferred_tax_asset"].iloc[0] + roll[["on_compensation_cost", "reversed_at_settlement",
                                                                   "rate_changes"]].to_numpy().sum()
        last = deferred[deferred["period_end"] == np.asarray(eff.period_ends, dtype="datetime64[D]")[-1]]
        b = float(last["deferred_tax_asset"].sum())
        tol = 0.005 * (len(roll) * 4 + len(last)) + 1e-9
        out.append(CheckRow("Deferred tax asset: opening + roll-forward lines vs sum of grants at the through date",
                            float(lines), b, tol, abs(lines - b) <= tol))
    else:
        worst = float(np.max(eff.in_equity - eff.dta, initial=0.0))
        # open cost is the rounded cumulative cost less full-precision settled cost: within a cent of exact
        out.append(CheckRow("Deferred tax held in equity never above the deferred tax asset (IAS 12.68C)", worst, 0.0,
                            0.01, worst <= 0.01))
    pl = {CURRENT_PL, DEFERRED_PL}
    m = journal["account"].isin(pl) if len(journal) else np.zeros(0, bool)
    net_pl = float((journal["credit"][m] - journal["debit"][m]).sum()) if len(journal) else 0.0
    benefit = float(deferred["income_tax_benefit"].sum())
    tol = 0.005 * (len(journal) + len(deferred)) + 1e-9
    out.append(CheckRow("Tax benefit in profit or loss: journal lines vs deferred_tax table", net_pl, benefit, tol,
                        abs(net_pl - benefit) <= tol))
    dr, cr = (float(journal["debit"].sum()), float(journal["credit"].sum())) if len(journal) else (0.0, 0.0)
    out.append(CheckRow("Tax journal: debits vs credits", dr, cr, 0.005, abs(dr - cr) <= 0.005))
    return out


def tax_csv_tables(inp, eff) -> dict[str, tuple[pd.DataFrame, tuple[str, ...]]]:
    """The CSV files of the tax effects: name -> (frame, money columns)."""
    roll = tax_rollforward(eff)
    return {"deferred_tax.csv": (deferred_tax_table(inp, eff), DEFERRED_MONEY),
            "tax_rollforward.csv": (roll, tuple(roll.columns[1:])),
            "tax_journal.csv": (tax_journal(inp, eff), ("debit", "credit"))}


def _roll_with_formula(roll: pd.DataFrame) -> pd.DataFrame:
    """The roll-forward with a live recomputation of each closing balance."""
    from grantval.io.cells import col_letter

    cols = list(roll.columns)
    first = col_letter(cols.index("opening_deferred_tax_asset") + 1)
    last = col_letter(cols.index("closing_deferred_tax_asset"))
    out = roll.copy()
    out["closing_recomputed"] = [Formula(f"=SUM({first}{r}:{last}{r})") for r in range(2, len(roll) + 2)]
    return out


def tax_sheets(inp, eff) -> tuple[list[Sheet], list[CheckRow]]:
    """Workbook sheets (deferred_tax, tax_rollforward, tax_journal) and the checks to add to the checks sheet."""
    deferred, roll, journal = deferred_tax_table(inp, eff), tax_rollforward(eff), tax_journal(inp, eff)
    money = {c: MONEY for c in list(DEFERRED_MONEY) + list(roll.columns[1:]) + ["debit", "credit",
                                                                                 "closing_recomputed"]}
    sheets = [
        Sheet("deferred_tax", frame=deferred, formats=money, text_columns=("grant_id", "group")),
        Sheet("tax_rollforward", frame=_roll_with_formula(roll), formats=money),
        Sheet("tax_journal", frame=journal, formats=money, text_columns=("group",), widths={"description": 80}),
    ]
    return sheets, tax_checks(inp, eff, deferred, roll, journal)
