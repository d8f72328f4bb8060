"""The expense bridge: a period's booked expense explained line by line, exactly in cents.

Measurement by sequential recomputation with the engine.  For a period from
``d0`` (the previous period end) to ``d1``, each *state* is a cumulative cost
per grant at ``d1`` under some of the period's news; the states run from
``cum(d0)`` to ``cum(d1)`` and each line is the difference of two successive
states, each rounded per grant to cents, so the lines add up exactly:

- awards granted in the period: ``cum(d1)`` of grants granted after ``d0``;
- ongoing cost of earlier awards: ``cum(d1; events through d0, estimates as of d0, fair values of
  liabilities as of d0, no modification dated after d0) - cum(d0)``;
- modifications: the same state with the modifications dated in the period (their incremental cost
  layers and accelerations) less the previous state (ledgers with modifications);
- forfeitures and cancellations: events through ``d1`` (liability values still as of ``d0``);
- changes of estimate: estimates as of ``d1`` (liability values still as of ``d0``);
- remeasurement of cash-settled liabilities: ``cum(d1)`` less the previous state: the change of the
  fair value per unit from ``d0`` to ``d1``, and to the cash paid for units settled in the period
  (ledgers with cash-settled awards; :func:`grantval.attribution.liability.values_held_at`);
- catch-ups of closed periods: from the close (recomputed through the last
  closed period end less booked through it), in the close's first period.

A feature inserts its own :class:`BridgeStep` into :data:`STEPS` before the last one: a state
function returning the cumulative cost at ``d1`` with its news in and the later steps' news out.
The last step must be the full recomputation ``cum(d1)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from grantval.attribution.engine import measure
from grantval.attribution.liability import liability_engine, values_held_at
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
    #: ``applies(inputs) -> bool``: the line is shown for these inputs (a feature's line only when the
    #: ledger uses the feature); a step left out must change nothing (its state equals the previous one)
    applies: Callable = lambda inp: True


def _held(inp, d0, d1, kw, **when):
    """Cumulative cost at ``d1`` with the liabilities' fair values held at ``d0`` (events as ``when``)."""
    with values_held_at(inp, d0):
        return measure(inp, d1, **when, **kw).grant_cost


def _ongoing(inp, d0, d1, kw):
    return _held(without_modifications_after(inp, d0, d1), d0, d1, kw, events_through=d0, estimates_as_of=d0)


def _modified(inp, d0, d1, kw):
    return _held(inp, d0, d1, kw, events_through=d0, estimates_as_of=d0)


def _events(inp, d0, d1, kw):
    return _held(inp, d0, d1, kw, estimates_as_of=d0)


def _estimates(inp, d0, d1, kw):
    return _held(inp, d0, d1, kw)


def _full(inp, d0, d1, kw):
    return measure(inp, d1, **kw).grant_cost


def without_modifications_after(inp, d0, d1=None):
    """``inp`` without the modifications dated after ``d0`` (through ``d1``): layers at 0, accelerations undone.

    Modifications dated after ``d1`` change nothing at ``d1`` (their layers have not started and their
    accelerations are not reached), so they are kept.  Returns ``inp`` itself when the ledger has no
    modification in the interval.  The copy shares the
    liability engine and other cost hooks (they do not see modifications), not the quantities memo
    (vest dates differ).
    """
    import dataclasses

    day = np.datetime64(d0, "D")
    end = np.datetime64("9999-12-31") if d1 is None else np.datetime64(d1, "D")
    lay = inp.layers
    start = np.asarray(lay.start, dtype="datetime64[D]")
    late = (lay.kind == "modification") & (start > day) & (start <= end)
    vest = np.asarray(inp.t_vest, dtype="datetime64[D]")
    undone = vest.copy()
    values = getattr(inp.modifications, "values", None)
    if values is not None:
        t = values.terms
        when = np.asarray(t.date, dtype="datetime64[D]")[values.p_mod]
        sel = np.flatnonzero(t.accelerate[values.p_mod] & (when > day) & (when <= end))
        order = sel[np.lexsort((when[sel], values.p_tranche[sel]))]  # by tranche, then date
        tranche, first = np.unique(values.p_tranche[order], return_index=True)
        undone[tranche] = values.vest_before[order[first]]  # in force before the earliest such acceleration
    ends = _service_ends_before(inp, day, end)
    if not late.any() and np.array_equal(undone, vest) and np.array_equal(ends, inp.t_service_end):
        return inp
    layers = dataclasses.replace(lay, fair_value=np.where(late, 0.0, lay.fair_value))
    return dataclasses.replace(inp, layers=layers, t_vest=undone, t_service_end=ends, memo=None, _prep=None)


def _service_ends_before(inp, day, end) -> np.ndarray:
    """Per tranche: the service end in force before the modifications dated in (``day``, ``end``] that moved it
    (``ExpenseInputs.service_end_history``: the end before the earliest such modification)."""
    ends = np.asarray(inp.t_service_end, dtype="datetime64[D]").copy()
    hist = inp.service_end_history
    if hist is None:
        return ends
    tranche, when, before = (np.asarray(h) for h in hist)
    when = when.astype("datetime64[D]")
    sel = np.flatnonzero((when > day) & (when <= end))
    order = sel[np.lexsort((when[sel], tranche[sel]))]
    t, first = np.unique(tranche[order], return_index=True)
    ends[t] = before[order[first]].astype("datetime64[D]")
    return ends


def _has_modifications(inp) -> bool:
    return inp.modifications is not None or getattr(inp, "espp_resets", None) is not None


def _has_liabilities(inp) -> bool:
    return liability_engine(inp) is not None


MODIFICATIONS = "Modifications (incremental cost)"
REMEASUREMENT = "Remeasurement of cash-settled liabilities"

#: the lines for awards granted before the period, in order; the last is the full recomputation
STEPS: list[BridgeStep] = [
    BridgeStep("Ongoing cost of earlier awards",
               "cum(d1; events through d0, estimates as of d0, liabilities at fair values of d0, no modification "
               "dated after d0) - cum(d0), for awards granted by d0", _ongoing),
    BridgeStep(MODIFICATIONS,
               "the same state with the modifications dated after d0 through d1 (their incremental cost layers, "
               "Type III reversals and accelerations), less the previous state (ASC 718-20-35-3; IFRS 2.27, B43)",
               _modified, _has_modifications),
    BridgeStep("Forfeitures and cancellations",
               "cum(d1; events through d1, estimates as of d0, liabilities at fair values of d0) less the "
               "previous state", _events),
    BridgeStep("Changes of estimate",
               "cum(d1; liabilities at fair values of d0) - cum(d1; events through d1, estimates as of d0, "
               "liabilities at fair values of d0)", _estimates),
    BridgeStep(REMEASUREMENT,
               "cum(d1) - cum(d1; liabilities at fair values of d0): the change of the fair value per unit of "
               "cash-settled awards from d0 to d1, and to the cash paid for units settled in the period "
               "(IFRS 2.30, 33; ASC 718-30-35-3)", _full, _has_liabilities),
]


def active_steps(inp, steps: list[BridgeStep] | None = None) -> list[BridgeStep]:
    """The steps shown for ``inp``: those whose feature the ledger uses.

    A step left out changes nothing for such inputs (no modification; no liability engine, so that
    holding liability values is a no-op), so the last step shown is still the full recomputation.
    """
    steps = STEPS if steps is None else steps
    return [s for s in steps if s.applies(inp)]


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
        Default :data:`STEPS`; only the steps that apply to ``inp`` are shown (:func:`active_steps`).
    """
    steps = active_steps(inp, steps)
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
