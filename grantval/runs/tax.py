"""Tax effects of an expense run (deferred tax, excess tax benefits and shortfalls), for the lead's wiring.

Nothing here runs unless the ledger has a ``tax_rates`` table with rows: :func:`tax_effects` and
:func:`tax_schedule` return None otherwise, so runs on existing ledgers are unchanged.

Wiring (see ``docs/tax-and-dilution.md``): the expense run calls :func:`tax_effects` once after the
schedule; ``write_expense`` writes :func:`grantval.reporting.tax_tables.tax_csv_tables` next to its
CSV files and appends :func:`grantval.reporting.tax_tables.tax_sheets` to the workbook; the close adds
:func:`grantval.reporting.tax_tables.tax_journal` rows to its journal.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.attribution.tax import (
    Settlements,
    TaxInputs,
    TaxSchedule,
    compute_tax,
    intrinsic_rule,
)
from grantval.awards.registry import flag
from grantval.errors import LedgerError, Problem
from grantval.ledger.ext.tax import DISQUALIFYING, treatments


def has_tax(ledger) -> bool:
    """The ledger has a ``tax_rates`` table with rows (tax effects are produced)."""
    t = ledger.tables.get("tax_rates")
    return t is not None and len(t) > 0


class _Rates:
    """Tax rate in force for each grant on a day: grant, then group, then ``*``; latest effective date wins."""

    def __init__(self, ledger):
        t = ledger.tables["tax_rates"]
        keys = t["applies_to"].to_numpy(dtype=object)
        self.eff = t["effective_date"].to_numpy("datetime64[D]").astype(np.int64)
        self.rate = t["tax_rate"].to_numpy(float)
        names = sorted({k for k in keys if k is not None})
        index = {k: i for i, k in enumerate(names)}
        self.key = np.array([index.get(k, -1) for k in keys], dtype=np.int64)
        self.n_keys = len(names)
        self.code_grant = np.array([index.get(k, -1) for k in ledger.grants["grant_id"]], dtype=np.int64)
        self.code_group = np.array([index.get(k, -1) for k in ledger.grants["group"]], dtype=np.int64)
        self.code_star = index.get("*", -1)
        self.order = np.lexsort((np.arange(len(keys)), self.eff))
        self.cache: dict = {}

    def __call__(self, day: int) -> np.ndarray:
        """Per grant: the rate in force on day number ``day`` (0 where no row applies)."""
        if day not in self.cache:
            best = np.full(self.n_keys + 1, np.nan)  # last entry: no key
            for j in self.order[self.eff[self.order] <= day]:
                if self.key[j] >= 0:
                    best[self.key[j]] = self.rate[j]
            pick = lambda codes: np.where(codes >= 0, best[codes], np.nan)
            r = pick(self.code_grant)
            r = np.where(np.isnan(r), pick(self.code_group), r)
            if self.code_star >= 0:
                r = np.where(np.isnan(r), best[self.code_star], r)
            self.cache[day] = np.nan_to_num(r)
        return self.cache[day]


def _prices(ledger):
    """``price_at(day_number)``: the ``share_prices`` row of exactly that date, else NaN."""
    t = ledger.tables["share_prices"]
    table = {int(np.datetime64(d, "D").astype(np.int64)): float(x)
             for d, x in zip(t["date"], t["share_price"]) if not pd.isna(d)}
    return lambda day: table.get(int(day), float("nan"))


def _unit_vesting(ledger, inp, left: np.ndarray, through: int) -> tuple[np.ndarray, np.ndarray]:
    """Per tranche: the day share units vest and the shares then issued.

    The schedule's vesting date and the units left, except for performance units (``psu``), whose
    vesting date is the one in force at ``through`` (day number; ``expected_vest_date``) and whose
    shares are floor(units x payout in force on that date), as the cost hook fixes them
    (:mod:`grantval.attribution.performance`): the deduction and the cost settled are those shares'.
    """
    from grantval.attribution.dilution import performance_units
    from grantval.attribution.performance import Assessments

    pre = inp.prepared()
    vest, shares = pre.t_vest.astype(np.int64), left.astype(float)
    psu = performance_units(ledger)
    if not psu.any():
        return vest, shares
    A, psu_t = Assessments(ledger, psu), psu[inp.t_grant]
    _, moved = A.at(inp.t_grant, np.full(len(vest), through))
    vest = np.where(psu_t & (moved != np.iinfo(np.int64).max), moved, vest)
    payout, _ = A.at(inp.t_grant, np.minimum(vest, through))
    return vest, np.where(psu_t, np.floor(left * payout + 1e-9), shares)


def _market_scale(ledger, inp, left: np.ndarray, through: int) -> np.ndarray:
    """Per tranche: shares issued per unit at vesting (1 except market-condition units vested by ``through``:
    floor(units x the condition's ``achieved_payout``) / units; a blank achieved payout is refused).

    A market condition's cost does not depend on the outcome (the units' fair value holds it), so the cost
    settled stays units x fair value while the deduction is the shares issued x the share price.
    """
    from grantval.ledger.ext.market import achieved_payouts

    vested = inp.prepared().t_vest <= through
    achieved, market = achieved_payouts(ledger, vested & (left > 0), inp.t_grant)
    m_t = market[inp.t_grant] & vested & (left > 0)
    issued = np.floor(left * np.nan_to_num(achieved[inp.t_grant]) + 1e-9)
    return np.where(m_t, issued / np.where(left > 0, left, 1), 1.0)


def _settlements(ledger, inp, deductible, strike, price_at, window, problems) -> Settlements:
    """Exercises, expiries, cancellations, unit vestings and automatic expiries of deductible grants."""
    ch, ev, g = ledger.changes, ledger.events, ledger.grants
    n_t = len(inp.t_qty)
    fv = inp.layers.per_tranche_value(n_t)
    pre = inp.prepared()
    t_idx = ch["tranche_idx"].to_numpy(np.int64)
    kind = ch["kind"].to_numpy(dtype=object)
    day = ch["date"].to_numpy("datetime64[D]").astype(np.int64)
    qty = ch["quantity"].to_numpy(float)
    ev_price = ev["share_price"].to_numpy(float)[ch["event_idx"].to_numpy(np.int64)] if len(ch) else np.zeros(0)
    tg = inp.t_grant
    keep = np.isin(kind, ("exercise", "expire", "cancel")) & deductible[tg[t_idx]]
    ded = np.where(kind == "exercise", intrinsic_rule(np.nan_to_num(ev_price), strike[tg[t_idx]]), 0.0)
    outst = (kind != "cancel") | (pre.t_vest[t_idx] <= day)
    left = inp.t_qty - np.bincount(t_idx, weights=qty, minlength=n_t)
    exercisable = flag(g["award_type"].to_numpy(), "exercisable")[tg]
    expiry = g["expiration_date"].to_numpy("datetime64[D]")[tg]
    units = ~exercisable & deductible[tg] & (left > 0)
    lapse = exercisable & deductible[tg] & (left > 0) & ~np.isnat(expiry)
    t_vest, issued = _unit_vesting(ledger, inp, left, window[1])
    vest_price = np.array([price_at(d) for d in t_vest[units]], dtype=float)
    vest_price = vest_price * _market_scale(ledger, inp, left, window[1])[units]  # deduction per unit
    in_window = (t_vest[units] >= window[0]) & (t_vest[units] <= window[1])
    for d, t in zip(t_vest[units][in_window & ~np.isfinite(vest_price)], np.flatnonzero(units)[in_window
                                                                                       & ~np.isfinite(vest_price)]):
        problems.append(Problem(ledger.sources.get("share_prices", "share_prices"), None, "date",
                                f"no share price on {np.datetime64(int(d), 'D')}, the vesting date of deductible "
                                f"grant {inp.grant_id[tg[t]]} (its tax deduction is the share value then)"))
    parts = [
        (t_idx[keep], day[keep], qty[keep], ded[keep], outst[keep], kind[keep]),
        (np.flatnonzero(units), t_vest[units], issued[units], np.nan_to_num(vest_price), np.ones(units.sum(), bool),
         np.full(units.sum(), "vest", dtype=object)),
        (np.flatnonzero(lapse), expiry[lapse].astype(np.int64), left[lapse], np.zeros(lapse.sum()),
         np.ones(lapse.sum(), bool), np.full(lapse.sum(), "lapse", dtype=object)),
    ]
    cat = [np.concatenate([pp[i] for pp in parts]) for i in range(6)]
    tr = cat[0].astype(np.int64)
    return Settlements(tg[tr], tr, cat[1].astype(np.int64), cat[2].astype(float), fv[tr], cat[3].astype(float),
                       cat[4].astype(bool), cat[5])


def _dispositions(ledger, inp, strike):
    """Disqualifying dispositions: grant, day, deduction and cost of the disposed shares (currency)."""
    ev = ledger.events
    dd = ev[ev["event_type"] == DISQUALIFYING]
    index = {k: i for i, k in enumerate(inp.grant_id)}
    gi = np.array([index[k] for k in dd["grant_id"]], dtype=np.int64)
    q = dd["quantity"].to_numpy(float)
    n_t = len(inp.t_qty)
    fv = inp.layers.per_tranche_value(n_t)
    tq = np.bincount(inp.t_grant, weights=inp.t_qty, minlength=inp.n_grants)
    avg = np.bincount(inp.t_grant, weights=inp.t_qty * fv, minlength=inp.n_grants) / np.where(tq > 0, tq, 1)
    ded = q * intrinsic_rule(dd["share_price"].to_numpy(float), strike[gi]) if len(gi) else np.zeros(0)
    return gi, dd["event_date"].to_numpy("datetime64[D]").astype(np.int64), ded, q * avg[gi] if len(gi) else ded


def tax_inputs(run) -> TaxInputs:
    """The tax inputs of an expense run's ledger (raises :class:`LedgerError` for missing share prices)."""
    ledger, inp = run.ledger, run.inputs
    deductible = treatments(ledger.grants) == "deductible"
    k = ledger.grants["exercise_price"].to_numpy(float)
    strike = np.where(flag(ledger.grants["award_type"].to_numpy(), "option_terms") & np.isfinite(k), k, 0.0)
    price_at = _prices(ledger)
    window = (int(np.datetime64(run.schedule.window_start, "D").astype(np.int64)),
              int(np.asarray(run.schedule.period_ends, dtype="datetime64[D]")[-1].astype(np.int64)))
    problems: list = []
    s = _settlements(ledger, inp, deductible, strike, price_at, window, problems)
    if problems:
        raise LedgerError(problems, ledger.location)
    gi, dday, dded, dcost = _dispositions(ledger, inp, strike)
    return TaxInputs(deductible, strike, s, gi, dday, dded, dcost, _Rates(ledger), price_at)


def tax_effects(run) -> TaxSchedule | None:
    """Tax effects of every grant and period of an expense run; None without a ``tax_rates`` table.

    Raises
    ------
    LedgerError
        When a share price the measurement needs is missing from ``share_prices`` (vesting dates of
        deductible units in the window; period ends under IFRS), naming each date.
    """
    if not has_tax(run.ledger):
        return None
    tx = tax_inputs(run)
    sched, missing = compute_tax(run.inputs, run.schedule, tx, run.policy.standard, run.policy.attribution,
                                 run.policy.forfeitures)
    if missing:
        src = run.ledger.sources.get("share_prices", "share_prices")
        raise LedgerError([Problem(src, None, "date", f"no share price on {d}: IFRS measures the deferred tax on "
                                   "the period-end share price (IAS 12.68B)") for d in sorted(set(missing))],
                          run.ledger.location)
    return sched


def tax_schedule(run) -> pd.DataFrame | None:
    """``deferred_tax.csv`` of an expense run (None without a ``tax_rates`` table)."""
    from grantval.reporting.tax_tables import deferred_tax_table

    eff = tax_effects(run)
    return None if eff is None else deferred_tax_table(run.inputs, eff)


def write_tax_csvs(run, eff: TaxSchedule, csv_dir) -> list:
    """Write ``deferred_tax.csv``, ``tax_rollforward.csv`` and ``tax_journal.csv`` in ``csv_dir``; their paths.

    For ``write_expense`` (after its own CSV files; the caller checks the paths against the inputs).
    """
    import pathlib

    from grantval.io.csv import write_csv
    from grantval.reporting.tax_tables import tax_csv_tables

    paths = []
    for name, (frame, money) in tax_csv_tables(run.inputs, eff).items():
        path = pathlib.Path(csv_dir) / name
        write_csv(path, frame, money=money)
        paths.append(path)
    return paths
