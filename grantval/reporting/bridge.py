"""The expense bridge: a period's booked expense explained line by line, exactly in cents.

Measurement by sequential recomputation with the engine.  For a period from
``d0`` (the previous period end) to ``d1``, each *state* is a cumulative cost
per grant at ``d1`` under some of the period's news; the states run from
``cum(d0)`` to ``cum(d1)`` and each line is the difference of two successive
states, each rounded per grant to cents, so the lines add up exactly:

- awards granted in the period: ``cum(d1)`` of grants granted after ``d0``;
- ongoing cost of earlier awards: ``cum(d1; events through d0, estimates as of d0) - cum(d0)``;
- forfeitures and cancellations: ``cum(d1; events through d1, estimates as of d0)`` less the previous state;
- changes of estimate: ``cum(d1)`` less the previous state;
- catch-ups of closed periods: from the close (recomputed through the last
  closed period end less booked through it), in the close's first period.

A feature (modifications, remeasurement of liabilities ...) inserts its own
:class:`BridgeStep` into :data:`STEPS` before the last one: a state function
returning the cumulative cost at ``d1`` with its news in and the later steps'
news out.  The last step must be the full recomputation ``cum(d1)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from grantval.attribution.engine import measure
from grantval.attribution.periods import to_cents

GRANTED = "Awards granted in the period"
CATCH_UP = "Catch-up of closed periods"


@dataclass(frozen=True)
class BridgeStep:
    """One line of the bridge for awards granted before the period.

    Attributes
    ----------
    label : str
        The line's name.
    how : str
        How the line is measured, in words (stated in the notes).
    state : callable
        ``state(inputs, d0, d1, kw) -> ndarray``: per-grant cumulative cost
        (currency) at ``d1`` with this step's news included; ``kw`` holds the
        engine's ``attribution`` and ``forfeitures``.
    """

    label: str
    how: str
    state: Callable


def _ongoing(inp, d0, d1, kw):
    return measure(inp, d1, events_through=d0, estimates_as_of=d0, **kw).grant_cost


def _events(inp, d0, d1, kw):
    return measure(inp, d1, estimates_as_of=d0, **kw).grant_cost


def _full(inp, d0, d1, kw):
    return measure(inp, d1, **kw).grant_cost


#: the lines for awards granted before the period, in order; the last is the full recomputation
STEPS: list[BridgeStep] = [
    BridgeStep("Ongoing cost of earlier awards",
               "cum(d1; events through d0, estimates as of d0) - cum(d0), for awards granted by d0", _ongoing),
    BridgeStep("Forfeitures and cancellations",
               "cum(d1; events through d1, estimates as of d0) - cum(d1; events through d0, estimates as of d0)",
               _events),
    BridgeStep("Changes of estimate", "cum(d1) - cum(d1; events through d1, estimates as of d0)", _full),
]


def notes() -> list[tuple[str, str]]:
    """How each line of the bridge is measured (for the notes sheet and docs)."""
    return ([(GRANTED, "cum(d1) of the awards granted after d0 (the previous period end) through d1")]
            + [(s.label, s.how) for s in STEPS]
            + [(CATCH_UP, "in the close's first period: cumulative cost recomputed through the last closed period "
                          "end less the cumulative amount booked through it (from the close register)"),
               ("Rounding", "every state is each grant's cumulative cost rounded to cents; each line is a difference "
                            "of rounded states, so the lines add up exactly to the period's booked expense")])


@dataclass
class Bridge:
    """The bridge of a close's periods.

    Attributes
    ----------
    period_ends : ndarray of datetime64[D]
    labels : list of str
        Line names, in order (granted, the steps, catch-up).
    cents : ndarray, shape (lines, periods)
        Total of each line, int64 cents.
    per_grant : dict of str to ndarray (grants, periods)
        Each line per ledger grant (the catch-up line is not per grant here).
    previous_cents : list of int or None
        Per period: the previous period's booked expense (None when unknown).
    """

    period_ends: np.ndarray
    labels: list[str]
    cents: np.ndarray
    per_grant: dict
    previous_cents: list

    def table(self) -> pd.DataFrame:
        """Long table: period_end, line, amount (currency)."""
        p = len(self.period_ends)
        return pd.DataFrame({
            "period_end": np.tile(np.asarray(self.period_ends, dtype="datetime64[D]"), len(self.labels)),
            "line": np.repeat(np.array(self.labels, dtype=object), p),
            "amount": self.cents.reshape(-1) / 100.0,
        }).sort_values(["period_end"], kind="stable").reset_index(drop=True)

    def totals(self) -> np.ndarray:
        """Sum of the lines per period (int64 cents)."""
        return self.cents.sum(axis=0)


def compute_bridge(inp, policy, start, period_ends, opening_cents, cumulative_cents, catch_up_cents,
                   previous_cents=None, steps: list[BridgeStep] | None = None) -> Bridge:
    """The bridge of each period, by sequential recomputation.

    Parameters
    ----------
    inp : ExpenseInputs
    policy : Policy
    start : datetime64[D]
        First day of the close's first period (its ``d0`` is the day before).
    period_ends : array of datetime64[D]
        The close's period ends.
    opening_cents : ndarray (grants,)
        Cumulative cost per grant recomputed through the day before ``start``, cents.
    cumulative_cents : ndarray (grants, periods)
        Cumulative cost per grant through each period end, cents (the close's schedule).
    catch_up_cents : sequence of int
        Catch-up booked in each period (non-zero in the first period only), cents.
    previous_cents : int, optional
        Booked expense of the period before the first (from the register).
    steps : list of BridgeStep, optional
        Default :data:`STEPS`.
    """
    steps = STEPS if steps is None else steps
    ends = np.asarray(period_ends, dtype="datetime64[D]")
    kw = dict(attribution=policy.attribution, forfeitures=policy.forfeitures)
    n, p = len(inp.grant_id), len(ends)
    labels = [GRANTED] + [s.label for s in steps] + [CATCH_UP]
    per = {k: np.zeros((n, p), dtype=np.int64) for k in labels[:-1]}
    gdate = np.asarray(inp.grant_date, dtype="datetime64[D]")
    for k, d1 in enumerate(ends):
        d0 = ends[k - 1] if k else np.datetime64(start, "D") - np.timedelta64(1, "D")
        prev = np.asarray(opening_cents if k == 0 else cumulative_cents[:, k - 1], dtype=np.int64)
        new = gdate > d0
        per[GRANTED][new, k] = cumulative_cents[new, k] - prev[new]
        state = prev
        for s in steps:
            nxt = to_cents(s.state(inp, d0, d1, kw))
            per[s.label][~new, k] = (nxt - state)[~new]
            state = nxt
    cents = np.vstack([per[k].sum(axis=0) for k in labels[:-1]] + [np.asarray(catch_up_cents, dtype=np.int64)])
    booked = cents.sum(axis=0)
    previous = [previous_cents] + [int(b) for b in booked[:-1]]
    return Bridge(ends, labels, cents, per, previous)
