"""Output tables of cash-settled awards: liabilities by period, the roll-forward, journal lines, checks.

Every function takes an expense run (``run.ledger``, ``run.policy``, ``run.inputs`` with the
liability hook installed, ``run.schedule``); with no cash-settled grant they return empty
tables and no checks.  Amounts are rounded to cents; a period's expense is the schedule's
(differences of the rounded cumulative cost), and the roll-forward's cash paid and
liabilities are rounded on their own.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.attribution.engine import measure
from grantval.attribution.liability import LiabilityEngine, liability_engine
from grantval.attribution.periods import to_cents
from grantval.dates import DAY
from grantval.io.xlsx.sheet import Formula, Sheet
from grantval.ledger.ext.accounts import DEFAULT_ACCOUNTS
from grantval.reporting.checks import CheckRow
from grantval.reporting.formats import MONEY, UNIT

#: columns of liabilities.csv
COLUMNS = ("grant_id", "period_end", "liability", "cash_paid", "fair_value_per_unit", "fair_value_source")
#: default accounts of the journal lines (the close's: ``ledger/ext/accounts.DEFAULT_ACCOUNTS``; a ledger's
#: ``accounts`` table renames them)
EXPENSE_ACCOUNT = DEFAULT_ACCOUNTS["expense"]
LIABILITY_ACCOUNT = DEFAULT_ACCOUNTS["liability"]
CASH_ACCOUNT = DEFAULT_ACCOUNTS["cash"]


def _states(run, engine: LiabilityEngine, dates) -> list:
    kw = dict(attribution=run.policy.attribution, forfeitures=run.policy.forfeitures)
    return [engine.at(measure(run.inputs, d, **kw), d, run.policy.attribution) for d in dates]


def liability_figures(run) -> dict | None:
    """Per cash grant and period: liability and cumulative cash paid in cents, fair values, sources.

    Returns None when the run has no cash-settled grant; else a dict with ``grants`` (positions),
    ``ends``, ``opening_liability``/``opening_cash`` (cents, the day before the window), ``liability``
    and ``cash`` (cents, grants x periods, cash cumulative), ``fair_value`` and ``source``.
    """
    engine = liability_engine(run.inputs)
    if engine is None:
        return None
    ends = np.asarray(run.schedule.period_ends, dtype="datetime64[D]")
    before = np.datetime64(run.schedule.window_start, "D") - DAY
    states = _states(run, engine, [before, *ends])
    pos = np.flatnonzero(engine.cash)
    col = lambda f: np.column_stack([f(s)[pos] for s in states[1:]])  # noqa: E731
    return dict(
        grants=pos, ends=ends, opening_liability=to_cents(states[0].liability[pos]),
        opening_cash=to_cents(states[0].cash_paid[pos]), liability=to_cents(col(lambda s: s.liability)),
        cash=to_cents(col(lambda s: s.cash_paid)), fair_value=col(lambda s: s.fair_value_per_unit),
        source=col(lambda s: s.method))


def paid_in_period(figures: dict) -> np.ndarray:
    """Cash paid in each period, cents (int64, cash grants x periods), from :func:`liability_figures`."""
    return np.diff(np.column_stack([figures["opening_cash"], figures["cash"]]), axis=1).astype(np.int64)


def liability_table(run, figures: dict | None = None) -> pd.DataFrame:
    """``liabilities.csv``: one row per cash-settled grant and period end.

    ``liability`` at the period end, ``cash_paid`` in the period, ``fair_value_per_unit`` at the
    period end (unit-weighted over the grant's tranches; blank when no unit is left) and
    ``fair_value_source`` (the ``liability_values`` row, or the model and assumptions row).
    """
    f = liability_figures(run) if figures is None else figures
    if f is None:
        return pd.DataFrame({c: [] for c in COLUMNS})
    n, p = f["liability"].shape
    paid = paid_in_period(f)
    return pd.DataFrame({
        "grant_id": np.repeat(run.inputs.grant_id[f["grants"]], p),
        "period_end": np.tile(f["ends"], n),
        "liability": f["liability"].ravel() / 100.0,
        "cash_paid": paid.ravel() / 100.0,
        "fair_value_per_unit": f["fair_value"].ravel(),
        "fair_value_source": f["source"].ravel().astype(str),
    })[list(COLUMNS)]


def rollforward(run, figures: dict | None = None) -> pd.DataFrame:
    """Liability roll-forward by period: opening, expense, cash paid, closing (all cash-settled grants)."""
    f = liability_figures(run) if figures is None else figures
    cols = ("period_end", "opening_liability", "expense", "cash_paid", "closing_liability")
    if f is None:
        return pd.DataFrame({c: [] for c in cols})
    close = f["liability"].sum(axis=0)
    open_ = np.concatenate([[f["opening_liability"].sum()], close[:-1]])
    paid = np.diff(np.concatenate([[f["opening_cash"].sum()], f["cash"].sum(axis=0)]))
    expense = run.schedule.expense_cents[f["grants"]].sum(axis=0)
    return pd.DataFrame({"period_end": f["ends"], "opening_liability": open_ / 100.0, "expense": expense / 100.0,
                         "cash_paid": paid / 100.0, "closing_liability": close / 100.0})[list(cols)]


def liability_sheets(run, figures: dict | None = None) -> list[Sheet]:
    """Workbook sheets: ``liabilities`` (per grant and period) and ``liability_rollforward``.

    The roll-forward's ``closing_by_formula`` column is a live formula, opening + expense - cash
    paid, beside the closing liability measured on its own.
    """
    f = liability_figures(run) if figures is None else figures
    if f is None:
        return []
    table = liability_table(run, f)
    rf = rollforward(run, f)
    rf["closing_by_formula"] = [Formula(f"=B{r}+C{r}-D{r}") for r in range(2, len(rf) + 2)]
    money = {c: MONEY for c in ("liability", "cash_paid", "opening_liability", "expense", "closing_liability",
                                "closing_by_formula")}
    return [
        Sheet("liabilities", frame=table, formats={**money, "fair_value_per_unit": UNIT, "period_end": "yyyy-mm-dd"},
              text_columns=("grant_id",), widths={"fair_value_source": 48}),
        Sheet("liability_rollforward", frame=rf, formats={**money, "period_end": "yyyy-mm-dd"}),
    ]


def liability_disclosure(run, figures: dict | None = None) -> pd.DataFrame:
    """Disclosure lines of the window (IFRS 2.51(b); ASC 718-10-50-2): liability at start and end, cash paid."""
    rf = rollforward(run, figures)
    if rf.empty:
        return pd.DataFrame({"item": [], "value": []})
    items = [("Liability for cash-settled awards at the start of the window", rf["opening_liability"].iat[0]),
             ("Expense of cash-settled awards (service and remeasurement)", rf["expense"].sum()),
             ("Cash paid to settle cash-settled awards", rf["cash_paid"].sum()),
             ("Liability for cash-settled awards at the end of the window", rf["closing_liability"].iat[-1])]
    return pd.DataFrame({"item": [i for i, _ in items], "value": [float(v) for _, v in items]})


def cash_paid_rows(run, figures: dict | None = None) -> pd.DataFrame | None:
    """Cash paid per cash-settled grant in each period of the run, cents, or None without cash grants.

    Columns :data:`grantval.reporting.journal.CASH_COLUMNS`, one row per grant and period with a
    payment (:func:`paid_in_period`).  The close journalises these (``JournalResults.cash_paid``).
    """
    f = liability_figures(run) if figures is None else figures
    if f is None:
        return None
    paid = paid_in_period(f)
    gi, k = np.nonzero(paid)
    g = run.ledger.grants
    types = dict(zip(g["grant_id"].to_numpy(dtype=object), g["award_type"].to_numpy(dtype=object)))
    pos = f["grants"][gi]
    ids = np.asarray(run.inputs.grant_id, dtype=object)[pos]
    return pd.DataFrame({"grant_id": ids, "group": np.asarray(run.inputs.group, dtype=object)[pos],
                         "award_type": np.array([types.get(i, "*") for i in ids], dtype=object),
                         "period_end": np.asarray(f["ends"], dtype="datetime64[D]")[k],
                         "cash_cents": paid[gi, k]})


def liability_journal(run, figures: dict | None = None) -> pd.DataFrame:
    """Journal lines of the cash-settled awards of an expense run: a view of the close's journal.

    The lines are :func:`grantval.reporting.journal.build_journal` with the close's cash contributors
    (``cash_settled_lines``: expense by group against the liability, reversed when negative;
    ``cash_payment_lines``: cash paid, debit the liability, credit cash) over each period's expense
    of the cash-settled grants, with the ledger's account names (``accounts`` table, else
    :data:`EXPENSE_ACCOUNT`, :data:`LIABILITY_ACCOUNT`, :data:`CASH_ACCOUNT`).  No line touches equity.

    Returns
    -------
    DataFrame
        Columns ``period_end``, ``account``, ``group``, ``debit``, ``credit``, ``description``
        (currency, as ``journal.csv``).
    """
    from grantval.ledger.ext.accounts import account_map
    from grantval.reporting import journal as J

    f = liability_figures(run) if figures is None else figures
    if f is None:
        return pd.DataFrame({c: [] for c in ("period_end", "account", "group", "debit", "credit", "description")})
    pos = f["grants"]
    expense = run.schedule.expense_cents[pos]
    gi, k = np.nonzero(expense)
    award = run.ledger.grants["award_type"].to_numpy(dtype=object)[pos]
    rows = pd.DataFrame({"grant_id": np.asarray(run.inputs.grant_id, dtype=object)[pos][gi],
                         "group": np.asarray(run.inputs.group, dtype=object)[pos][gi], "award_type": award[gi],
                         "settlement": "cash", "period_end": np.asarray(f["ends"], dtype="datetime64[D]")[k],
                         "booked_cents": expense[gi, k].astype(np.int64), "catch_up_cents": 0})
    lines = J.build_journal(rows, account_map(run.ledger), [J.cash_settled_lines, J.cash_payment_lines],
                            J.JournalResults(cash_paid=cash_paid_rows(run, f)))
    return J.journal_csv_frame(lines)


def cash_from_ledger(run, lo, hi) -> np.ndarray:
    """Cash paid per grant in [lo, hi], recomputed from the ledger rows, not from the liability engine.

    Exercises of cash-settled grants: quantity x max(share price - exercise price, 0), read from the
    ``events`` table; cash units: units of each tranche vesting in the window (its quantity less the
    forfeits and cancels dated before it vests) x the settlement share price of the vesting date.
    """
    ledger = run.ledger
    g, ev, tr, ch = ledger.grants, ledger.events, ledger.tranches, ledger.changes
    engine = liability_engine(run.inputs)
    out = np.zeros(len(g))
    if engine is None:
        return out
    lo, hi = np.datetime64(lo, "D"), np.datetime64(hi, "D")
    pos = {k: i for i, k in enumerate(g["grant_id"].to_numpy(dtype=object))}
    strike = g["exercise_price"].to_numpy(float)
    for gid, kind, d, q, s in zip(ev["grant_id"], ev["event_type"], ev["event_date"].to_numpy("datetime64[D]"),
                                  ev["quantity"].to_numpy(float), ev["share_price"].to_numpy(float)):
        i = pos.get(gid, -1)
        if i >= 0 and engine.cash[i] and kind == "exercise" and lo <= d <= hi:
            out[i] += q * max(s - strike[i], 0.0)
    gi = tr["grant_idx"].to_numpy(np.int64)
    vest = tr["vest_date"].to_numpy("datetime64[D]")
    c_t, c_d = ch["tranche_idx"].to_numpy(np.int64), ch["date"].to_numpy("datetime64[D]")
    gone = np.isin(ch["kind"].to_numpy(dtype=object), ("forfeit", "cancel")) & (c_d < vest[c_t])
    left = tr["quantity"].to_numpy(float) - np.bincount(c_t[gone], weights=ch["quantity"].to_numpy(float)[gone],
                                                        minlength=len(tr))
    for t in np.flatnonzero(engine.unit_g[gi] & (vest >= lo) & (vest <= hi) & (left > 0)):
        mask = np.zeros(len(g), dtype=bool)
        mask[gi[t]] = True
        price, _ = engine.values.settlement_price(vest[t], mask)
        out[gi[t]] += left[t] * price[gi[t]]
    return out


def liability_checks(run, figures: dict | None = None) -> list[CheckRow]:
    """Tie-outs of the cash-settled awards (none when the run has none).

    1. Window: the schedule's expense of the cash-settled grants = closing liability - opening
       liability + cash paid in the window recomputed from the ledger rows (:func:`cash_from_ledger`).
    2. Life: for cash-settled grants granted in the window and with no liability left at its end
       (all settled, lapsed or forfeited), the total expense = the cash paid to them, from the
       ledger rows.
    """
    f = liability_figures(run) if figures is None else figures
    if f is None:
        return []
    sched, pos = run.schedule, f["grants"]
    start = np.datetime64(sched.window_start, "D")
    end = np.datetime64(sched.period_ends[-1], "D")
    cash = cash_from_ledger(run, start, end)[pos]
    cash_c = np.floor(cash * 100.0 + 0.5)
    expense = sched.expense_cents[pos].sum(axis=1)
    roll = f["liability"][:, -1] - f["opening_liability"] + cash_c
    n = len(pos)
    tol = round(0.01 * n + 0.005, 2)
    a1, b1 = int(expense.sum()), int(roll.sum())
    done = (run.inputs.grant_date[pos] >= start) & (f["liability"][:, -1] == 0)
    life = cash_from_ledger(run, np.datetime64("1900-01-01"), end)[pos]
    a2, b2 = int(expense[done].sum()), int(np.floor(life[done] * 100.0 + 0.5).sum())
    tol2 = round(0.01 * int(done.sum()) + 0.005, 2)
    return [
        CheckRow("Cash-settled: expense in the window = closing - opening liability + cash paid (from the events)",
                 a1 / 100.0, b1 / 100.0, tol, abs(a1 - b1) <= n),
        CheckRow(f"Cash-settled, {int(done.sum())} grant(s) fully settled in the window: total expense = cash paid",
                 a2 / 100.0, b2 / 100.0, tol2, abs(a2 - b2) <= int(done.sum())),
    ]
