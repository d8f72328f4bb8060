"""Expense by fiscal period: cumulative costs at period ends, rounded to cents."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.dates import DAY, period_ends
from grantval.errors import GrantvalError, UsageError
from grantval.attribution.engine import Measurement, measure
from grantval.attribution.inputs import ExpenseInputs
from grantval.policy import Policy
from grantval.progress import track


#: largest amount, in currency, the int64 cents arithmetic accepts (well inside 2**63 cents)
MAX_AMOUNT = 1e15


def to_cents(amount: np.ndarray) -> np.ndarray:
    """Round currency amounts to whole cents, half up on the decimal amount, as int64.

    Raises
    ------
    GrantvalError
        When an amount is not finite or exceeds :data:`MAX_AMOUNT` (the arithmetic
        would wrap or lose cents); never wraps silently.
    """
    a = np.asarray(amount, dtype=float)
    if a.size and not (np.all(np.isfinite(a)) and np.max(np.abs(a)) <= MAX_AMOUNT):
        raise GrantvalError(f"an amount of {np.max(np.abs(a)):g} is beyond what grantval's cents arithmetic "
                            f"holds ({MAX_AMOUNT:g}); check the quantities and fair values")
    scaled = a * 100.0
    # half up on the decimal amount: a product such as 2.01 x 365 / 730 is 1.005 exactly in decimals
    # but 100.49999999999999 cents in binary; amounts within a few units in the last place of a
    # half cent are ties and round up
    tie = np.abs(scaled - (np.floor(scaled) + 0.5)) <= 64.0 * np.finfo(float).eps * np.maximum(np.abs(scaled), 1.0)
    return np.where(tie, np.floor(scaled) + 1.0, np.floor(scaled + 0.5)).astype(np.int64)


@dataclass
class ExpenseSchedule:
    """Expense of every grant by period.

    Attributes
    ----------
    period_ends : ndarray of datetime64[D]
        Label (last day) of each period; the last one is the through date.
    window_start : datetime64[D]
        First day of the first period.
    cumulative_cents : ndarray, shape (grants, periods)
        Cumulative cost through each period end, rounded to cents.
    opening_cents : ndarray, shape (grants,)
        Cumulative cost through the day before ``window_start``, rounded.
    expense_cents : ndarray, shape (grants, periods)
        Period expense: differences of the rounded cumulative amounts, so a
        grant's periods sum exactly to its rounded total.
    forecast_ends, forecast_cents : forecast periods after the through date
        (no further events; estimates as in force at each date).
    at_through : Measurement
        Quantities and unrecognised cost at the through date.
    """

    period_ends: np.ndarray
    window_start: np.datetime64
    cumulative_cents: np.ndarray
    opening_cents: np.ndarray
    expense_cents: np.ndarray
    forecast_ends: np.ndarray
    forecast_cents: np.ndarray
    at_through: Measurement


def _ends(first: np.datetime64, last: np.datetime64, policy: Policy) -> np.ndarray:
    ends = period_ends(first, last, policy.period, policy.fiscal_year_end_month)
    ends = ends[(ends >= first) & (ends < last)]
    return np.append(ends, last).astype("datetime64[D]")


def default_start(inp: ExpenseInputs, policy: Policy) -> np.datetime64:
    """First day of the fiscal period containing the earliest grant date or earlier start of service.

    (A grant whose service began before its grant date, ``service_inception_date``, starts its
    grant-date cost layer on that date.)
    """
    first = min(inp.grant_date.min(), np.asarray(inp.layers.start, dtype="datetime64[D]").min())
    end = period_ends(first, first, policy.period, policy.fiscal_year_end_month)[0]
    months = {"month": 1, "quarter": 3, "year": 12}[policy.period]
    start_month = (end.astype("datetime64[M]") - np.timedelta64(months - 1, "M"))
    return start_month.astype("datetime64[D]")


def compute_schedule(inp: ExpenseInputs, policy: Policy, through, start=None, forecast_through=None) -> ExpenseSchedule:
    """Expense by period from ``start`` through ``through`` (and a forecast beyond it).

    Parameters
    ----------
    inp : ExpenseInputs
    policy : Policy
        Uses attribution, forfeitures, period and fiscal_year_end_month.
    through : date
        Last day of the run; the last period ends on it.
    start : date, optional
        First day of the first period; default :func:`default_start`.
    forecast_through : date, optional
        Last day of the forecast.
    """
    through = np.datetime64(through, "D")
    if inp.n_grants == 0:
        raise UsageError("the ledger has no grants to expense")
    start = default_start(inp, policy) if start is None else np.datetime64(start, "D")
    if start > through:
        raise UsageError(f"{{start}} {start} is after {{through}} {through}", ("start", "through"))
    ends = _ends(start, through, policy)
    if forecast_through is not None:
        fthrough = np.datetime64(forecast_through, "D")
        if fthrough <= through:
            raise UsageError(f"{{forecast_through}} {fthrough} must be after {{through}} {through}",
                              ("forecast_through", "through"))
        fends = _ends(through + DAY, fthrough, policy)
    else:
        fends = np.zeros(0, dtype="datetime64[D]")
    kw = dict(attribution=policy.attribution, forfeitures=policy.forfeitures)
    opening, cum, fcum, at_through = _by_blocks(inp, start, ends, fends, kw)
    prev = np.column_stack([opening, cum[:, :-1]])
    expense = cum - prev
    fcents = fcum - np.column_stack([cum[:, -1], fcum[:, :-1]]) if len(fends) else fcum
    return ExpenseSchedule(ends, start, cum, opening, expense, fends, fcents, at_through)


def _by_blocks(inp: ExpenseInputs, start, ends, fends, kw: dict):
    """``_cumulative`` of the whole ledger, or of blocks of grants put together (the same figures)."""
    from grantval.attribution import blocks

    if not blocks.blockable(inp):
        return _cumulative(inp, start, ends, fends, kw, track_periods=True)
    n_blocks = len(blocks.grant_blocks(np.asarray(inp.t_grant), inp.n_grants))
    parts = list(track(blocks.map_blocks(inp, lambda sub: _cumulative(sub, start, ends, fends, kw)), n_blocks,
                       "grants"))
    opening, cum, fcum, at = zip(*parts)
    return np.concatenate(opening), np.vstack(cum), np.vstack(fcum), blocks.joined(list(at))


def _cumulative(inp: ExpenseInputs, start, ends, fends, kw: dict, track_periods: bool = False):
    """Opening cents, cumulative cents at ``ends`` and forecast ``fends``, and the measurement at the last end."""
    through = ends[-1]
    opening = to_cents(measure(inp, start - DAY, cost_only=True, **kw).grant_cost)
    cum = np.empty((inp.n_grants, len(ends)), dtype=np.int64)
    at_through = None
    dates = track(enumerate(ends), len(ends), "periods") if track_periods else enumerate(ends)
    for k, d in dates:
        m = measure(inp, d, cost_only=k < len(ends) - 1, **kw)  # every figure at the through date only
        cum[:, k] = to_cents(m.grant_cost)
        at_through = m
    fcum = np.empty((inp.n_grants, len(fends)), dtype=np.int64)
    for k, d in enumerate(fends):
        fcum[:, k] = to_cents(measure(inp, d, events_through=through, frozen_at=through, cost_only=True,
                                      **kw).grant_cost)
    return opening, cum, fcum, at_through
