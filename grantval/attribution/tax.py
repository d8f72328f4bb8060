"""Income-tax effects of share-based awards: deferred tax asset, excess tax benefits and shortfalls.

Two measurements (rules and paragraphs in ``docs/tax-and-dilution.md``):

- ``asc718`` (ASC 718-740 after ASU 2016-09): the deferred tax asset of a deductible award is its
  cumulative compensation cost not yet settled for tax x the tax rate (ASC 718-740-25-2, 30-1); when
  the deduction is fixed (exercise of an option, vesting of a unit, expiry or cancellation without
  deduction) the difference (deduction - cost of those units) x rate is an excess tax benefit
  (negative: a shortfall), recognised in income tax expense of that period (ASC 718-740-35-2,
  45-2).  Awards with no deduction expected carry no deferred tax; a later event that gives one
  (a disqualifying disposition) is recognised when it occurs (ASC 718-740-25-3).
- ``ifrs2`` (IAS 12.68A-68C): the deferred tax asset is measured on the deduction the share price at
  the period end would give, times the part of the service received (IAS 12.68B); the part of the
  tax benefit above cumulative expense x rate goes to equity, the rest to profit or loss (IAS 12.68C).

The functions named ``*_rule`` are pure numpy; :func:`compute_tax` applies them per grant and period.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def settlement_rule(rate, deduction, cost):
    """Tax effect when a deduction is fixed, for units whose cumulative cost is ``cost``.

    Parameters
    ----------
    rate : array_like
        Tax rate in force on the settlement date (decimal).
    deduction : array_like
        Tax deduction of the units (0 when they expire or are cancelled); currency.
    cost : array_like
        Cumulative compensation cost recognised for those units; currency.

    Returns
    -------
    excess : ndarray
        ``(deduction - cost) x rate``: excess tax benefit (> 0) or shortfall (< 0); currency.
    to_equity : ndarray
        ``max(deduction - cost, 0) x rate``: the part IAS 12.68C takes to equity; currency.
    """
    d = np.asarray(deduction, dtype=float) - np.asarray(cost, dtype=float)
    r = np.asarray(rate, dtype=float)
    return d * r, np.maximum(d, 0.0) * r


def ifrs_deferred_rule(rate, estimated_deduction, open_cost):
    """Deferred tax asset under IAS 12.68B and the part of it held in equity under IAS 12.68C.

    Parameters
    ----------
    rate : array_like
        Tax rate at the period end (decimal).
    estimated_deduction : array_like
        Deduction the period-end share price would give, times the part of the service received;
        currency.
    open_cost : array_like
        Cumulative compensation cost of the same units (not yet settled for tax); currency.

    Returns
    -------
    dta : ndarray
        ``estimated_deduction x rate``; currency.
    in_equity : ndarray
        ``max(estimated_deduction - open_cost, 0) x rate``; currency.
    """
    r = np.asarray(rate, dtype=float)
    e = np.asarray(estimated_deduction, dtype=float)
    return e * r, np.maximum(e - np.asarray(open_cost, dtype=float), 0.0) * r


def intrinsic_rule(share_price, exercise_price):
    """Intrinsic value per unit: ``max(share_price - exercise_price, 0)`` (exercise price 0 for units)."""
    return np.maximum(np.asarray(share_price, dtype=float) - np.asarray(exercise_price, dtype=float), 0.0)


@dataclass
class Settlements:
    """Units whose tax deduction is fixed, one entry per (event or vesting, tranche).

    ``cost_per_unit`` is the tranche's fair value per unit (a settled unit has been expensed in full);
    ``deduction_per_unit`` the intrinsic value then (0 for expiry, cancellation); ``outstanding`` says
    the units still counted in the engine's outstanding quantity when settled (not unvested cancels).
    """

    grant: np.ndarray
    tranche: np.ndarray
    day: np.ndarray
    qty: np.ndarray
    cost_per_unit: np.ndarray
    deduction_per_unit: np.ndarray
    outstanding: np.ndarray
    kind: np.ndarray


@dataclass
class TaxInputs:
    """Per-grant facts and the dated tax inputs of a ledger (see :mod:`grantval.runs.tax`)."""

    deductible: np.ndarray          # per grant
    exercise_price: np.ndarray      # per grant (0 for units)
    settlements: Settlements        # deductible grants only
    dd_grant: np.ndarray            # disqualifying dispositions (grants with no deduction expected)
    dd_day: np.ndarray
    dd_deduction: np.ndarray        # currency
    dd_cost: np.ndarray             # currency: cumulative cost of the disposed shares
    rate_at: object                 # rate_at(day_number) -> per-grant rates (0 where none applies)
    price_at: object                # price_at(day_number) -> share price or NaN


@dataclass
class TaxSchedule:
    """Tax effects by grant and period (arrays of shape (grants, periods); currency, full floats)."""

    standard: str
    period_ends: np.ndarray
    dta: np.ndarray                 # deferred tax asset at each period end
    dta_opening: np.ndarray         # per grant, at the day before the window
    in_equity: np.ndarray           # cumulative part of the DTA held in equity (IFRS)
    in_equity_opening: np.ndarray
    on_cost: np.ndarray             # rate x compensation cost of the period (ASC)
    reversed: np.ndarray            # DTA reversed at settlement (ASC, at the settlement rate)
    rate_changes: np.ndarray        # ASC: remeasurement of the DTA to new rates
    deduction: np.ndarray           # tax deductions fixed in the period
    current: np.ndarray             # rate x deductions of the period
    current_to_equity: np.ndarray   # IFRS: part of ``current`` taken to equity
    excess: np.ndarray              # excess tax benefit (+) / shortfall (-) in income tax expense

    @property
    def deferred_benefit(self) -> np.ndarray:
        """Deferred tax benefit in profit or loss: change in the DTA less the part taken to equity."""
        d_dta = np.diff(np.column_stack([self.dta_opening, self.dta]), axis=1)
        d_eq = np.diff(np.column_stack([self.in_equity_opening, self.in_equity]), axis=1)
        return d_dta - d_eq

    @property
    def to_equity(self) -> np.ndarray:
        """Credited to equity in the period: change in the DTA held in equity plus current tax to equity."""
        d_eq = np.diff(np.column_stack([self.in_equity_opening, self.in_equity]), axis=1)
        return d_eq + self.current_to_equity

    @property
    def income_tax_benefit(self) -> np.ndarray:
        """Total tax benefit in profit or loss of the period (current + deferred, less equity parts)."""
        return self.deferred_benefit + self.current - self.current_to_equity


def _settled_cost(inp_n: int, s: Settlements, day: int) -> np.ndarray:
    """Per grant: cumulative cost of the units settled for tax by day number ``day`` (currency)."""
    m = s.day <= day
    return np.bincount(s.grant[m], weights=(s.qty * s.cost_per_unit)[m], minlength=inp_n)


def _rates_on(tx: TaxInputs, days: np.ndarray, grants: np.ndarray) -> np.ndarray:
    """Rate in force for each (day, grant) pair, one table lookup per distinct day."""
    out = np.zeros(len(days))
    for d in np.unique(days):
        m = days == d
        out[m] = tx.rate_at(int(d))[grants[m]]
    return out


def _in_period(n: int, s: Settlements, tx: TaxInputs, lo: int, hi: int, rate_end: np.ndarray) -> dict:
    """Settlements and disqualifying dispositions dated in (lo, hi]: per-grant sums (currency)."""
    m = (s.day > lo) & (s.day <= hi)
    g, q = s.grant[m], s.qty[m]
    rs = _rates_on(tx, s.day[m], g)
    ded, cost = q * s.deduction_per_unit[m], q * s.cost_per_unit[m]
    excess, eq = settlement_rule(rs, ded, cost)
    add = lambda w: np.bincount(g, weights=w, minlength=n).astype(float)
    out = {"deduction": add(ded), "current": add(rs * ded), "current_to_equity": add(eq), "excess": add(excess),
               "reversed": add(rs * cost), "remeasure": add((rs - rate_end[g]) * cost), "settled": add(cost)}
    md = (tx.dd_day > lo) & (tx.dd_day <= hi)
    if md.any():
        gd = tx.dd_grant[md]
        rd = _rates_on(tx, tx.dd_day[md], gd)
        _, eq_d = settlement_rule(rd, tx.dd_deduction[md], tx.dd_cost[md])
        addd = lambda w: np.bincount(gd, weights=w, minlength=n)
        out["deduction"] += addd(tx.dd_deduction[md])
        out["current"] += addd(rd * tx.dd_deduction[md])
        out["current_to_equity"] += addd(eq_d)
    return out


def _ifrs_deduction(inp, tx: TaxInputs, day: int, attribution: str, forfeitures: str, missing: list) -> np.ndarray:
    """Per grant: deduction the period-end share price would give x part of the service received (IAS 12.68B)."""
    from grantval.attribution.engine import measure

    n_t = len(inp.t_qty)
    m = measure(inp, np.datetime64(day, "D"), attribution=attribution, forfeitures=forfeitures)
    s = tx.settlements
    gone = np.bincount(s.tranche[(s.day <= day) & s.outstanding], weights=s.qty[(s.day <= day) & s.outstanding],
                       minlength=n_t)
    granted = inp.prepared().t_gdate <= day
    units = np.where(granted & tx.deductible[inp.t_grant], np.maximum(m.n_expensed - gone, 0.0), 0.0) * m.elapsed
    if not units.any():
        return np.zeros(inp.n_grants)
    price = tx.price_at(day)
    if not np.isfinite(price):
        missing.append(np.datetime64(day, "D"))
        return np.zeros(inp.n_grants)
    per_unit = intrinsic_rule(price, tx.exercise_price[inp.t_grant])
    return np.bincount(inp.t_grant, weights=units * per_unit, minlength=inp.n_grants)


def compute_tax(inp, sched, tx: TaxInputs, standard: str, attribution: str, forfeitures: str) -> TaxSchedule:
    """Tax effects of every grant in every period of an expense schedule.

    Parameters
    ----------
    inp : ExpenseInputs
    sched : ExpenseSchedule
        Its rounded cumulative cost is the compensation cost the deferred tax is measured on.
    tx : TaxInputs
    standard : {"asc718", "ifrs2"}
    attribution, forfeitures : str
        The run's policies (IFRS measures the part of the service received with them).

    Returns
    -------
    schedule : TaxSchedule
    missing : list of datetime64[D]
        Period ends (IFRS) at which a share price was needed and not given.
    """
    n, p = inp.n_grants, len(sched.period_ends)
    ded = tx.deductible.astype(float)
    days = np.concatenate([[np.datetime64(sched.window_start, "D").astype(np.int64) - 1],
                           np.asarray(sched.period_ends, dtype="datetime64[D]").astype(np.int64)])
    cum = np.column_stack([sched.opening_cents, sched.cumulative_cents]) / 100.0
    z = lambda: np.zeros((n, p))
    out = {k: z() for k in ("dta", "in_equity", "on_cost", "reversed", "rate_changes", "deduction", "current",
                            "current_to_equity", "excess")}
    missing: list = []
    open_prev = (cum[:, 0] - _settled_cost(n, tx.settlements, int(days[0]))) * ded
    rate_prev = tx.rate_at(int(days[0]))
    dta_open, eq_open = _dta(inp, tx, standard, int(days[0]), rate_prev, open_prev, attribution, forfeitures, missing)
    for k in range(p):
        lo, hi = int(days[k]), int(days[k + 1])
        rate = tx.rate_at(hi)
        open_cost = (cum[:, k + 1] - _settled_cost(n, tx.settlements, hi)) * ded
        per = _in_period(n, tx.settlements, tx, lo, hi, rate)
        dta, eq = _dta(inp, tx, standard, hi, rate, open_cost, attribution, forfeitures, missing)
        out["dta"][:, k], out["in_equity"][:, k] = dta, eq
        out["deduction"][:, k], out["current"][:, k] = per["deduction"], per["current"]
        if standard == "ifrs2":
            out["current_to_equity"][:, k] = per["current_to_equity"]
            out["excess"][:, k] = per["excess"] - per["current_to_equity"]  # shortfalls only: windfalls go to equity
        else:
            out["excess"][:, k] = per["excess"]
            out["on_cost"][:, k] = rate * (cum[:, k + 1] - cum[:, k]) * ded
            out["reversed"][:, k] = per["reversed"]
            out["rate_changes"][:, k] = (rate - rate_prev) * open_prev + per["remeasure"]
        open_prev, rate_prev = open_cost, rate
    return TaxSchedule(standard, np.asarray(sched.period_ends), dta_opening=dta_open, in_equity_opening=eq_open,
                       **out), missing


def _dta(inp, tx, standard, day, rate, open_cost, attribution, forfeitures, missing):
    """(deferred tax asset, part held in equity) per grant at day number ``day``."""
    if standard != "ifrs2":
        return rate * open_cost, np.zeros(inp.n_grants)
    est = _ifrs_deduction(inp, tx, day, attribution, forfeitures, missing)
    return ifrs_deferred_rule(rate, est, open_cost)
