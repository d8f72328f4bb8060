"""Journal lines of a close: debits and credits, in cents, built by contributors.

A *contributor* is a function ``contribute(rows, accounts, results=None) -> DataFrame``
that returns journal lines for the booked rows it handles (columns :data:`LINE_COLUMNS`);
``results`` (:class:`JournalResults`) carries figures of the close that are not booked rows,
such as the cash paid to settle cash-settled awards.
The core contributor, :func:`equity_settled_lines`, journalises the awards whose
kind is settled in shares: debit stock-based compensation expense by group (cost
centre), credit additional paid-in capital; a reversal (negative net amount)
credits expense and debits paid-in capital.  A feature adding liability or tax
accounting appends its own function to :data:`CONTRIBUTORS` (one line) and tags
its lines with their ``entry`` (``expense`` for lines that carry the booked
expense, so the close's checks count them).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

#: columns of the lines a contributor returns; ``entry`` stays inside grantval (the register
#: stores the others)
LINE_COLUMNS = ("period_end", "account", "group", "debit_cents", "credit_cents", "description", "entry")
#: columns of the rows given to contributors
ROW_COLUMNS = ("grant_id", "group", "award_type", "settlement", "period_end", "booked_cents", "catch_up_cents")


#: columns of :attr:`JournalResults.cash_paid`
CASH_COLUMNS = ("grant_id", "group", "award_type", "period_end", "cash_cents")


@dataclass
class JournalResults:
    """Figures of a close a contributor may need beside the booked rows.

    Attributes
    ----------
    cash_paid : DataFrame or None
        Columns :data:`CASH_COLUMNS`: cash paid to settle cash-settled awards in each period of
        the close, cents (int64), one row per grant and period with a payment.
    tax_lines : DataFrame or None
        The tax effects' journal lines of the close's periods
        (:func:`grantval.reporting.tax_tables.tax_journal`: period_end, account, group, debit,
        credit, description; currency); None when the ledger has no tax rates.
    """

    cash_paid: pd.DataFrame | None = None
    tax_lines: pd.DataFrame | None = None
    #: cash paid dated in closed periods and not booked there (:data:`CASH_COLUMNS`, either sign), booked
    #: as a catch-up in the close's first period (``grantval.runs.close_late``)
    cash_catch_up: pd.DataFrame | None = None
    #: tax lines of closed periods not booked there (same columns as ``tax_lines``), catch-up likewise
    tax_catch_up: pd.DataFrame | None = None


def _net_lines(part: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Net booked cents of ``part`` by ``keys`` (zero nets dropped)."""
    sums = part.groupby(keys, sort=True, dropna=False)["booked_cents"].sum().reset_index()
    return sums[sums["booked_cents"] != 0]


def _describe(period_end, group, amount: int, what: str) -> str:
    kind = "Stock-based compensation" if amount > 0 else "Reversal of stock-based compensation"
    where = f", group {group}" if isinstance(group, str) and group else ""
    return f"{kind}{what}, period ending {np.datetime64(period_end, 'D')}{where}"


def _settled_lines(rows: pd.DataFrame, accounts, settlement: str, entry: str, expense_what: str,
                   credit_what: str) -> pd.DataFrame:
    """Per period: expense by (group, expense account) against one credit line per ``entry`` account.

    Only rows whose award kind settles in ``settlement`` are used; a net reversal swaps debit and credit.
    """
    part = rows[rows["settlement"] == settlement].copy()
    if part.empty:
        return pd.DataFrame(columns=list(LINE_COLUMNS))
    award = part["award_type"].to_numpy(dtype=object)
    award = np.where(pd.isna(award), "*", award)
    part["expense_account"] = accounts.accounts(award, "expense")
    part["credit_account"] = accounts.accounts(award, entry)
    part["group"] = part["group"].astype(object).where(part["group"].notna(), None)
    out = []
    for pe, per in part.groupby("period_end", sort=True):
        exp = _net_lines(per.assign(group=per["group"].fillna("")), ["group", "expense_account"])
        for g, acct, amt in zip(exp["group"], exp["expense_account"], exp["booked_cents"]):
            amt = int(amt)
            out.append((pe, acct, g or None, max(amt, 0), max(-amt, 0), _describe(pe, g, amt, expense_what),
                        "expense"))
        credit = _net_lines(per, ["credit_account"])
        for acct, amt in zip(credit["credit_account"], credit["booked_cents"]):
            amt = int(amt)
            out.append((pe, acct, None, max(-amt, 0), max(amt, 0), _describe(pe, None, amt, credit_what), entry))
    return pd.DataFrame(out, columns=list(LINE_COLUMNS))


def equity_settled_lines(rows: pd.DataFrame, accounts, results: JournalResults | None = None) -> pd.DataFrame:
    """Expense by group against paid-in capital, for awards settled in shares.

    Parameters
    ----------
    rows : DataFrame
        Columns :data:`ROW_COLUMNS`; only rows with ``settlement == "shares"`` are used.
    accounts : grantval.ledger.ext.accounts.AccountMap
        Account names by award type and entry.

    Returns
    -------
    DataFrame, columns :data:`LINE_COLUMNS`
        Per period: one expense line per (group, expense account) with a
        non-zero net, then one paid-in capital line per equity account.
    """
    return _settled_lines(rows, accounts, "shares", "equity", "", " (equity-settled awards)")


def cash_settled_lines(rows: pd.DataFrame, accounts, results: JournalResults | None = None) -> pd.DataFrame:
    """Expense by group against the share-based payment liability, for awards settled in cash.

    The amount booked for a cash-settled award is the change in its liability plus the cash paid
    (IFRS 2.30-33; ASC 718-30-35): debit expense, credit the liability (a reversal the other
    way).  The payment itself (debit the liability, credit cash) is :func:`cash_payment_lines`.
    """
    return _settled_lines(rows, accounts, "cash", "liability", " (cash-settled awards)",
                          " (liability of cash-settled awards)")


def cash_payment_lines(rows: pd.DataFrame, accounts, results: JournalResults | None = None) -> pd.DataFrame:
    """Cash paid to settle cash-settled awards: debit the liability by group, credit cash.

    In the period of the settlement (exercise of a cash SAR, vesting of a cash unit): the
    liability is settled by the payment (IFRS 2.30-33, IG Example 12; ASC 718-30-35).  The
    amounts are ``results.cash_paid`` (none without it); the lines balance per period.  Cash paid
    dated in a closed period and not booked then (``results.cash_catch_up``) is booked the same way
    in the close's first period, its descriptions starting "Catch-up of closed periods"; a negative
    catch-up (a payment removed from a closed period) swaps debit and credit.
    """
    parts = [] if results is None else [(results.cash_paid, ""), (results.cash_catch_up, _LATE_CASH)]
    out = [line for cash, what in parts if cash is not None and len(cash) for line in _payment_lines(cash, accounts, what)]
    return pd.DataFrame(out, columns=list(LINE_COLUMNS))


#: words of the description of every cash-account line (the close's cash check finds them by it)
CASH_SIDE = "Cash paid to settle cash-settled awards"
_LATE_CASH = "Catch-up of closed periods (dated on or before the last closed period end, not booked then): "


def _payment_lines(cash: pd.DataFrame, accounts, what: str) -> list[tuple]:
    """Dr liability by group / Cr cash per period of ``cash`` (a negative net swaps the sides)."""
    part = cash.copy()
    award = part["award_type"].to_numpy(dtype=object)
    part["liability_account"] = accounts.accounts(award, "liability")
    part["cash_account"] = accounts.accounts(award, "cash")
    part["group"] = part["group"].astype(object).where(part["group"].notna(), "").fillna("")
    out = []
    for pe, per in part.groupby("period_end", sort=True):
        day = np.datetime64(pe, "D")
        dr = per.groupby(["group", "liability_account"], sort=True)["cash_cents"].sum().reset_index()
        for g, acct, amt in zip(dr["group"], dr["liability_account"], dr["cash_cents"]):
            where, amt = (f", group {g}" if g else ""), int(amt)
            if amt:
                out.append((pe, acct, g or None, max(amt, 0), max(-amt, 0),
                            f"{what}Settlement of cash-settled awards (cash paid), period ending {day}{where}", "cash"))
        cr = per.groupby("cash_account", sort=True)["cash_cents"].sum().reset_index()
        for acct, amt in zip(cr["cash_account"], cr["cash_cents"]):
            amt = int(amt)
            if amt:
                out.append((pe, acct, None, max(-amt, 0), max(amt, 0),
                            f"{what}{CASH_SIDE}, period ending {day}", "cash"))
    return out


def tax_effect_lines(rows: pd.DataFrame, accounts, results: JournalResults | None = None) -> pd.DataFrame:
    """The tax effects' lines (deferred tax asset, income tax expense, taxes payable, equity), in cents.

    The accounts and amounts are those of ``tax_journal.csv`` of the expense run (ASC 718-740;
    IAS 12.68A-68C); each pair balances, so the period balance check covers them.
    """
    parts = [] if results is None else [t for t in (results.tax_lines, results.tax_catch_up) if t is not None and len(t)]
    if not parts:
        return pd.DataFrame(columns=list(LINE_COLUMNS))
    tax = pd.concat(parts, ignore_index=True)
    group = tax["group"].astype(object)
    return pd.DataFrame({
        "period_end": tax["period_end"].to_numpy("datetime64[D]"), "account": tax["account"].to_numpy(dtype=object),
        "group": group.where(group != "(none)", None).to_numpy(dtype=object),
        "debit_cents": np.rint(tax["debit"].to_numpy(float) * 100.0).astype(np.int64),
        "credit_cents": np.rint(tax["credit"].to_numpy(float) * 100.0).astype(np.int64),
        "description": tax["description"].to_numpy(dtype=object), "entry": "tax"})[list(LINE_COLUMNS)]


#: the journal's contributors, in the order their lines are written
CONTRIBUTORS: list[Callable] = [equity_settled_lines, cash_settled_lines, cash_payment_lines, tax_effect_lines]


def build_journal(rows: pd.DataFrame, accounts, contributors: list[Callable] | None = None,
                  results: JournalResults | None = None) -> pd.DataFrame:
    """Every contributor's lines, ordered by period end (contributors in order within a period).

    Returns
    -------
    DataFrame, columns :data:`LINE_COLUMNS`
        Debits and credits are non-negative int64 cents.
    """
    parts = [c(rows, accounts, results) for c in (CONTRIBUTORS if contributors is None else contributors)]
    parts = [p for p in parts if len(p)]
    if not parts:
        return pd.DataFrame({c: pd.Series([], dtype=("int64" if c.endswith("_cents") else object))
                             for c in LINE_COLUMNS})
    lines = pd.concat(parts, ignore_index=True)
    lines["period_end"] = pd.to_datetime(lines["period_end"]).to_numpy("datetime64[D]")
    lines = lines.sort_values("period_end", kind="stable").reset_index(drop=True)
    for c in ("debit_cents", "credit_cents"):
        lines[c] = lines[c].astype(np.int64)
    return lines[list(LINE_COLUMNS)]


def period_balances(lines: pd.DataFrame) -> pd.DataFrame:
    """Per period end: total debits and total credits of ``lines``, summed line by line.

    This is the independent side of the balance check: it adds up the lines as
    written, whatever the contributors meant them to be.
    """
    if lines.empty:
        return pd.DataFrame({"period_end": pd.Series([], dtype="datetime64[ns]"),
                             "debit_cents": pd.Series([], dtype=np.int64), "credit_cents": pd.Series([], dtype=np.int64)})
    return lines.groupby("period_end", sort=True)[["debit_cents", "credit_cents"]].sum().reset_index()


def journal_csv_frame(lines: pd.DataFrame) -> pd.DataFrame:
    """The journal as written in ``journal.csv``: amounts in currency (two decimals)."""
    return pd.DataFrame({
        "period_end": lines["period_end"].to_numpy("datetime64[D]"),
        "account": lines["account"].to_numpy(dtype=object),
        "group": lines["group"].to_numpy(dtype=object),
        "debit": lines["debit_cents"].to_numpy(np.int64) / 100.0,
        "credit": lines["credit_cents"].to_numpy(np.int64) / 100.0,
        "description": lines["description"].to_numpy(dtype=object),
    })
