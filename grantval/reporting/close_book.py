"""Sheets and checks of the close workbook: run, close, booked, journal, catch-ups, bridge, checks, notes."""

from __future__ import annotations

import pathlib

import numpy as np
import pandas as pd

from grantval.io.xlsx.sheet import Formula, Sheet
from grantval.reporting import bridge as B
from grantval.reporting.checks import CheckRow, checks_sheet
from grantval.reporting.formats import FORMATS, MONEY
from grantval.reporting.journal import journal_csv_frame, period_balances
from grantval.reporting.notes import expense_notes
from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet

CLOSE_RULES = [
    ("Amount booked", "For each grant: cumulative cost recomputed through the close's last period end less the "
                      "cumulative amount booked for it in earlier closes (and, on a register started with --from, "
                      "the cost before that date)."),
    ("Catch-up", "The part of the amount booked that belongs to earlier, closed periods: cumulative cost recomputed "
                 "through the last closed period end less the cumulative amount booked through it. It is booked in "
                 "the close's first period; closed periods are never restated (ASC 250-10-45-17: a change in "
                 "estimate is accounted for in the period of change; booking late-entered events in the open "
                 "period is common practice)."),
    ("Journal", "Equity-settled awards: debit stock-based compensation expense by group (cost centre), credit "
                "additional paid-in capital; a negative net amount (a reversal) credits expense and debits paid-in "
                "capital. Account names from the ledger's accounts table, else the defaults."),
    ("Payments and tax effects of closed periods", "Cash paid to settle cash-settled awards and tax effects dated "
                "in an already closed period that the close of that period did not book (entered or changed later) "
                "are booked in the close's first period, their descriptions starting 'Catch-up of closed periods': "
                "recomputed through the last closed period end less what the closes recorded as booked through it. "
                "Closed periods are never restated."),
    ("Register", "The close is one transaction in the close register; its rows are never changed or deleted. "
                 "A reopen marks the latest close superseded, with who, when and why."),
]


def _day(d) -> str:
    return str(np.datetime64(d, "D"))


def _date_formula(d) -> str:
    y, m, dd = _day(d).split("-")
    return f"DATE({int(y)},{int(m)},{int(dd)})"


def _by_period(values: pd.Series, periods: pd.Series, ends) -> np.ndarray:
    p = periods.to_numpy("datetime64[D]")
    v = values.to_numpy(np.int64)
    return np.array([int(v[p == e].sum()) for e in np.asarray(ends, dtype="datetime64[D]")], dtype=np.int64)


def _journal_checks(plan, n_lines: int) -> list[CheckRow]:
    """Per period: debits = credits, and the expense lines' net = the amount booked."""
    bal = period_balances(plan.journal)
    ends = np.asarray(plan.period_ends, dtype="datetime64[D]")
    booked = _by_period(plan.rows["booked_cents"], plan.rows["period_end"], ends)
    exp = plan.journal[plan.journal["entry"] == "expense"]
    net = _by_period(exp["debit_cents"], exp["period_end"], ends) - _by_period(exp["credit_cents"], exp["period_end"], ends)
    out = []
    last = n_lines + 1
    for k, e in enumerate(ends):
        row = bal[bal["period_end"].to_numpy("datetime64[D]") == e]
        d, c = (int(row["debit_cents"].sum()), int(row["credit_cents"].sum()))
        sel = f"(journal!A2:A{last}={_date_formula(e)})"
        out.append(CheckRow(f"Journal for the period ending {_day(e)}: debits = credits (line by line)",
                            Formula(f"=SUMPRODUCT({sel}*journal!D2:D{last})"),
                            Formula(f"=SUMPRODUCT({sel}*journal!E2:E{last})"), 0.005, d == c))
        out.append(CheckRow(f"Journal for the period ending {_day(e)}: expense debits less credits = amount booked",
                            int(net[k]) / 100.0, int(booked[k]) / 100.0, 0.005, int(net[k]) == int(booked[k])))
    return out


def _fresh(plan, day) -> np.ndarray:
    from grantval.attribution.engine import measure
    from grantval.attribution.periods import to_cents

    kw = dict(attribution=plan.run.policy.attribution, forfeitures=plan.run.policy.forfeitures)
    return to_cents(measure(plan.run.inputs, np.datetime64(day, "D"), **kw).grant_cost)


def _cumulative_checks(plan, n_rows: int) -> list[CheckRow]:
    """Booked this close + booked before = cumulative recomputed (fresh engine pass), per grant; the catch-up."""
    ids = np.asarray(plan.run.inputs.grant_id, dtype=object)
    fresh = _fresh(plan, plan.run.through)
    this = plan.rows.groupby("grant_id")["booked_cents"].sum()
    before = dict(zip(ids, plan.booked_before))
    before.update(zip(plan.removed["grant_id"], plan.removed["booked_cents"]) if len(plan.removed) else [])
    want = dict(zip(ids, fresh))
    grants = set(before) | set(want) | set(this.index)
    off = [g for g in grants if int(this.get(g, 0)) + int(before.get(g, 0)) != int(want.get(g, 0))]
    total_before = sum(int(v) for v in before.values())
    start = np.datetime64(plan.run.schedule.window_start, "D") - np.timedelta64(1, "D")
    catch_fresh = int(_fresh(plan, start).sum()) - int(plan.booked_before.sum()) - int(plan.removed["booked_cents"].sum()
                                                                                      if len(plan.removed) else 0)
    catch_rows = int(plan.rows["catch_up_cents"].sum())
    return [
        CheckRow(f"Booked this close + booked before = cumulative cost recomputed through {plan.run.through} "
                 "(a fresh engine pass), all grants", Formula(f"=SUM(booked!E2:E{n_rows + 1})+{total_before / 100.0!r}"),
                 int(fresh.sum()) / 100.0, 0.005, not off),
        CheckRow("Grants whose booked this close + booked before differs from their recomputed cumulative cost",
                 len(off), 0, 0, not off),
        CheckRow(f"Catch-up = cost recomputed through {_day(start)} (fresh engine pass) - booked through it",
                 Formula(f"=SUM(booked!F2:F{n_rows + 1})"), catch_fresh / 100.0, 0.005, catch_fresh == catch_rows),
    ]


def _bridge_checks(plan, total_rows: list[int]) -> list[CheckRow]:
    ends = np.asarray(plan.period_ends, dtype="datetime64[D]")
    booked = _by_period(plan.rows["booked_cents"], plan.rows["period_end"], ends)
    tot = plan.bridge.totals()
    return [CheckRow(f"Bridge lines for the period ending {_day(e)} sum to the period's booked expense",
                     Formula(f"=bridge!C{total_rows[k]}"), int(booked[k]) / 100.0, 0.005, int(tot[k]) == int(booked[k]))
            for k, e in enumerate(ends)]


def bridge_frame(plan) -> tuple[pd.DataFrame, list[int]]:
    """The bridge sheet: per period its lines, their SUM, the previous period's expense and the change.

    Returns the frame and the 1-based sheet row of each period's SUM.
    """
    br = plan.bridge
    recs, total_rows = [], []
    row = 2
    for k, e in enumerate(np.asarray(br.period_ends, dtype="datetime64[D]")):
        first = row
        for j, label in enumerate(br.labels):
            recs.append((e, label, int(br.cents[j, k]) / 100.0))
            row += 1
        recs.append((e, "Booked expense of the period (sum of the lines)", Formula(f"=SUM(C{first}:C{row - 1})")))
        total_rows.append(row)
        row += 1
        prev = br.previous_cents[k]
        recs.append((e, "Previous period's booked expense (for reference, not in the sum)",
                     None if prev is None else prev / 100.0))
        recs.append((e, "Change from the previous period (for reference)",
                     None if prev is None else Formula(f"=C{row - 1}-C{row}")))
        row += 2
    return pd.DataFrame(recs, columns=["period_end", "line", "amount"]), total_rows


def _cash_checks(plan) -> list[CheckRow]:
    """Cash paid booked through the close (before + catch-up + its periods) = cash paid from the events.

    Side A: the cash booked by earlier closes (their recorded :data:`~grantval.runs.close_late.CASH_KEY`)
    plus this close's cash-account lines, as written in the journal.  Side B: every settlement of the
    ledger through the close's last period end, from the events table and the settlement prices
    (:func:`~grantval.reporting.liability_tables.cash_from_ledger`), rounded per grant.  A late-entered
    payment dated in a closed period that is not caught up makes them differ.
    """
    from grantval.attribution.liability import liability_engine
    from grantval.reporting.journal import CASH_SIDE
    from grantval.reporting.liability_tables import cash_from_ledger

    engine = liability_engine(plan.run.inputs)
    if engine is None:
        return []
    j = plan.journal
    side = (j["entry"] == "cash") & j["description"].astype(str).str.contains(CASH_SIDE, regex=False)
    a = plan.late.cash_booked_before + int(j.loc[side, "credit_cents"].sum() - j.loc[side, "debit_cents"].sum())
    ledger = cash_from_ledger(plan.run, np.datetime64("1900-01-01"), np.datetime64(plan.run.through, "D"))
    b = int(np.floor(ledger[engine.cash] * 100.0 + 0.5).sum())
    n = int(engine.cash.sum())
    return [CheckRow(f"Cash paid booked through {plan.run.through} (earlier closes + this close) = cash paid from "
                     "the events", a / 100.0, b / 100.0,
                     round(0.01 * n + 0.005, 2), abs(a - b) <= n)]


def _tax_checks(plan) -> list[CheckRow]:
    """Tax lines booked through the close = tax lines recomputed from the first period, per account and group.

    Side A: the nets booked by earlier closes (their recorded :data:`~grantval.runs.close_late.TAX_KEY`)
    plus this close's tax lines as written in the journal.  Side B: a fresh schedule from the first
    period through the close's last period end and its tax journal.  A tax effect of a closed period
    that changed after its close and is not caught up makes them differ.
    """
    from grantval.runs.close_late import tax_through

    before = plan.late.tax_booked_before
    if before is None:
        return []
    j = plan.journal[plan.journal["entry"] == "tax"]
    booked = dict(before)
    group = j["group"].astype(object).where(j["group"].notna(), "(none)")
    for acct, grp, dr, cr in zip(j["account"], group, j["debit_cents"], j["credit_cents"]):
        booked[f"{acct}\t{grp}"] = booked.get(f"{acct}\t{grp}", 0) + int(dr) - int(cr)
    fresh = tax_through(plan.run, plan.run.through)
    off = [k for k in set(booked) | set(fresh) if booked.get(k, 0) != fresh.get(k, 0)]
    return [CheckRow(f"Tax lines booked through {plan.run.through} (earlier closes + this close) vs recomputed: "
                     "accounts differing", len(off), 0, 0, not off)]


def close_checks(plan) -> list[CheckRow]:
    """Tie-outs of a close, each comparing two computations (computed before booking)."""
    _, total_rows = bridge_frame(plan)
    return (_journal_checks(plan, len(plan.journal)) + _cumulative_checks(plan, len(plan.rows))
            + _bridge_checks(plan, total_rows) + _cash_checks(plan) + _tax_checks(plan))


def _catch_up_frame(plan) -> pd.DataFrame:
    inp, sched = plan.run.inputs, plan.run.schedule
    m = plan.catch_up != 0
    out = pd.DataFrame({
        "grant_id": np.asarray(inp.grant_id, dtype=object)[m], "group": np.asarray(inp.group, dtype=object)[m],
        "recomputed_through_last_close": sched.opening_cents[m] / 100.0,
        "booked_through_last_close": plan.booked_before[m] / 100.0, "catch_up": plan.catch_up[m] / 100.0,
        "note": ""})
    if len(plan.removed):
        gone = pd.DataFrame({"grant_id": plan.removed["grant_id"], "group": plan.removed["group"],
                             "recomputed_through_last_close": 0.0,
                             "booked_through_last_close": plan.removed["booked_cents"] / 100.0,
                             "catch_up": -plan.removed["booked_cents"] / 100.0,
                             "note": "no longer in the ledger: reversed"})
        out = pd.concat([out, gone], ignore_index=True)
    return out


def _summary(result) -> list[list]:
    plan = result.plan
    prev = plan.previous
    return [
        ["Close"], [],
        ["Close id", result.close_id], ["Register", str(plan.register)],
        ["Register head digest after the close", result.head_digest],
        ["Through", plan.run.through], ["First day", str(plan.run.schedule.window_start)],
        ["Periods booked", ", ".join(_day(e) for e in plan.period_ends)],
        ["Previous close", "(none: first close)" if prev is None else f"close {prev.close_id} through {prev.through}"],
        ["Closed by", plan.record.user or "(not recorded)"],
        ["Amount booked", int(plan.rows["booked_cents"].sum()) / 100.0],
        ["of which catch-up of closed periods", int(plan.rows["catch_up_cents"].sum()) / 100.0],
        ["Grants with a catch-up", int((plan.catch_up != 0).sum()) + len(plan.removed)],
    ]


def close_sheets(result, info: RunInfo) -> list[Sheet]:
    """Sheets of the close workbook, in order."""
    from grantval.runs.close import close_expense_frame

    plan = result.plan
    booked = close_expense_frame(plan.rows)
    booked.insert(2, "award_type", plan.rows["award_type"].to_numpy(dtype=object))
    booked = booked[["grant_id", "group", "award_type", "period_end", "expense", "catch_up"]]
    bframe, _ = bridge_frame(plan)
    money = {**FORMATS, "expense": MONEY, "catch_up": MONEY, "debit": MONEY, "credit": MONEY, "amount": MONEY,
             "recomputed_through_last_close": MONEY, "booked_through_last_close": MONEY, "period_end": "yyyy-mm-dd"}
    rules = CLOSE_RULES + [(f"Bridge: {k}", v) for k, v in B.notes()] + expense_notes(plan.run.policy, plan.run.ledger)
    rules += [(f"Policy {k}", v) for k, v in plan.run.policy.describe()]
    return [
        run_sheet(info, info.workbook_time()),
        Sheet("close", rows=_summary(result), widths={1: 40, 2: 70}, row_formats={(10, 1): MONEY, (11, 1): MONEY}),
        Sheet("booked", frame=booked, formats=money, text_columns=("grant_id", "group", "award_type")),
        Sheet("journal", frame=journal_csv_frame(plan.journal), formats=money, text_columns=("account", "group"),
              widths={"account": 36, "description": 70}),
        Sheet("catch_ups", frame=_catch_up_frame(plan), formats=money, text_columns=("grant_id", "group")),
        Sheet("bridge", frame=bframe, formats=money, widths={"line": 64}),
        checks_sheet(result.checks),
        notes_sheet(rules, plan.run.ledger.warnings),
    ]


def write_close_book(result, path: pathlib.Path, command: str, timestamp: bool) -> None:
    """Write the close workbook."""
    from grantval.io.xlsx.write import write_workbook

    plan = result.plan
    info = RunInfo("grantval close: expense booked in the close register", command or "(Python API)",
                   plan.run.ledger.location, plan.run.ledger.files,
                   [("from", str(plan.run.schedule.window_start)), ("through", plan.run.through),
                    ("register", str(plan.register)), ("close id", str(result.close_id)),
                    ("register head digest", result.head_digest)],
                   plan.run.policy.describe(), timestamp)
    write_workbook(path, close_sheets(result, info), fixed_time=info.workbook_time(), footer=info.footer())
