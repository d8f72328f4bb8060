"""Cumulative stock-compensation cost at a measurement date, vectorised over tranches.

Rules (see docs/expense-rules.md for the standards' paragraphs):

- service period of a tranche: grant date to vest date; through a date d the
  fraction elapsed is (d + 1 day - grant date) / (vest date - grant date),
  capped at 1; a tranche vesting on or before its grant date is fully
  expensed on the grant date;
- graded attribution: cost_i(d) = FV_i x N_i(d) x elapsed_i(d);
- straight-line: cost(d) = (sum_i FV_i N_i(d)) x elapsed of the last tranche,
  never less than the fair value of the tranches vested by d;
- N_i(d) under as-occur: the outstanding quantity (granted less forfeited and
  cancelled by d; vested tranches keep their vested quantity); under
  estimate: for unvested tranches the expected-to-vest quantity from the
  estimate in force at d, trued up to the actual quantity at vesting;
- cancellation of unvested options without replacement: their remaining
  cost is recognised at the cancel date (they count at full fair value).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.dates import DAYS_PER_YEAR
from grantval.expense.inputs import ExpenseInputs

DAY = np.timedelta64(1, "D")
#: days per year for the remaining time of an annual forfeiture rate
RATE_YEAR_DAYS = 365.0


@dataclass
class Measurement:
    """Per-tranche and per-grant quantities and costs at one date."""

    n_expensed: np.ndarray      # per tranche: N_i(d)
    outstanding: np.ndarray     # per tranche: granted - forfeited - cancelled(unvested) by d
    cancelled: np.ndarray       # per tranche: unvested quantity cancelled by d
    elapsed: np.ndarray         # per tranche
    vested: np.ndarray          # per tranche: bool
    grant_cost: np.ndarray      # per grant: cumulative cost
    expected_total: np.ndarray  # per grant: total cost expected at d's estimates (full service)
    unrecognised: np.ndarray    # per grant: expected_total - grant_cost (0 before the grant date)
    remaining_years: np.ndarray  # per grant: weighted-average remaining recognition period, years


def elapsed_fraction(d, start, end) -> np.ndarray:
    """Service fraction through ``d`` (inclusive) of periods from ``start`` to ``end``."""
    served = (d + DAY - start).astype(np.int64)
    length = (end - start).astype(np.int64)
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(length > 0, served / np.where(length > 0, length, 1), np.where(served > 0, 1.0, 0.0))
    return np.clip(frac, 0.0, 1.0)


def estimates_at(inp: ExpenseInputs, d) -> tuple[np.ndarray, np.ndarray]:
    """Annual forfeiture rate and expected vest fraction in force at ``d`` for each grant.

    The most specific estimate (grant, then group, then ``*``) with the latest
    effective date on or before ``d`` applies; NaN where none does.
    """
    n = inp.n_grants
    rate = np.full(n, np.nan)
    frac = np.full(n, np.nan)
    if len(inp.est_applies_to) == 0:
        return rate, frac
    live = inp.est_effective <= d
    latest: dict[str, int] = {}
    for j in np.flatnonzero(live):
        key = inp.est_applies_to[j]
        if key not in latest or inp.est_effective[j] >= inp.est_effective[latest[key]]:
            latest[key] = j
    if not latest:
        return rate, frac
    found = np.full(n, -1, dtype=np.int64)
    for keys in (inp.grant_id, inp.group):
        pick = np.array([latest.get(k, -1) for k in keys], dtype=np.int64) if n else np.zeros(0, np.int64)
        found = np.where(found < 0, pick, found)
    if "*" in latest:
        found = np.where(found < 0, latest["*"], found)
    has = found >= 0
    rate[has] = inp.est_rate[found[has]]
    frac[has] = inp.est_fraction[found[has]]
    return rate, frac


def measure(inp: ExpenseInputs, d, *, attribution: str, forfeitures: str, events_through=None) -> Measurement:
    """Cumulative cost of every grant through ``d``.

    Parameters
    ----------
    inp : ExpenseInputs
    d : datetime64[D]
        Measurement date (counted as served in full).
    attribution : {"straight-line", "graded"}
    forfeitures : {"as-occur", "estimate"}
    events_through : datetime64[D], optional
        Ignore events after this date (forecasts assume no further events).
    """
    d = np.datetime64(d, "D")
    cut = d if events_through is None else min(d, np.datetime64(events_through, "D"))
    n_t = len(inp.t_qty)
    gi = inp.t_grant
    gdate_t = inp.grant_date[gi]
    granted_by = gdate_t <= d

    in_time = inp.c_date <= cut
    forf = (inp.c_kind == "forfeit") & in_time
    canc = (inp.c_kind == "cancel") & in_time & (inp.t_vest[inp.c_tranche] > inp.c_date)
    forfeited = np.bincount(inp.c_tranche[forf], weights=inp.c_qty[forf], minlength=n_t)
    cancelled = np.bincount(inp.c_tranche[canc], weights=inp.c_qty[canc], minlength=n_t)
    outstanding = inp.t_qty - forfeited - cancelled

    vested = (inp.t_vest <= d) & granted_by
    if forfeitures == "estimate":
        rate, frac = estimates_at(inp, d)
        r_t, f_t = rate[gi], frac[gi]
        remaining = (inp.t_vest - (d + DAY)).astype(np.int64) / RATE_YEAR_DAYS
        by_rate = outstanding * np.power(1.0 - np.nan_to_num(r_t), np.maximum(remaining, 0.0))
        by_frac = np.minimum(f_t * inp.t_qty, outstanding)
        expected = np.where(~np.isnan(f_t), by_frac, by_rate)
        n_exp = np.where(vested, outstanding, expected)
    else:
        n_exp = outstanding.astype(float)

    elapsed = np.where(granted_by, elapsed_fraction(d, gdate_t, inp.t_vest), 0.0)
    fv = inp.t_fv
    value = fv * n_exp
    n_g = inp.n_grants
    cancel_cost = np.bincount(gi, weights=np.where(granted_by, fv * cancelled, 0.0), minlength=n_g)
    years_left_t = np.maximum((inp.t_vest - d).astype(np.int64), 0) / DAYS_PER_YEAR
    if attribution == "graded":
        tranche_cost = value * elapsed
        cost = np.bincount(gi, weights=tranche_cost, minlength=n_g)
        left_t = np.where(granted_by, value - tranche_cost, 0.0)
        unrec = np.bincount(gi, weights=left_t, minlength=n_g)
        weighted = np.bincount(gi, weights=left_t * years_left_t, minlength=n_g)
        remaining = weighted / np.where(unrec > 0, unrec, 1.0)
    else:
        total = np.bincount(gi, weights=value, minlength=n_g)
        vested_value = np.bincount(gi, weights=np.where(vested, value, 0.0), minlength=n_g)
        granted_g = inp.grant_date <= d
        el_last = np.where(granted_g, elapsed_fraction(d, inp.grant_date, inp.last_vest), 0.0)
        cost = np.maximum(total * el_last, vested_value)
        unrec = np.where(granted_g, total - cost, 0.0)
        remaining = np.maximum((inp.last_vest - d).astype(np.int64), 0) / DAYS_PER_YEAR
    remaining = np.where(unrec > 0, remaining, 0.0)
    expected_total = np.bincount(gi, weights=np.where(granted_by, value, 0.0), minlength=n_g) + cancel_cost
    return Measurement(
        n_expensed=n_exp, outstanding=outstanding, cancelled=cancelled, elapsed=elapsed, vested=vested,
        grant_cost=cost + cancel_cost, expected_total=expected_total, unrecognised=unrec,
        remaining_years=remaining,
    )
