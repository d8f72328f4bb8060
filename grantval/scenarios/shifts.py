"""A what-if scenario's assumption changes, applied to a valuation context or to the estimates.

The measurement and attribution layers know nothing of scenarios: a scenario changes
the arrays of a :class:`~grantval.measurement.context.ValuationContext` before the
award kinds value it (:func:`apply_shifts`), and hands the expense engine a function
that changes the forfeiture estimates in force (:func:`forfeiture_adjuster`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from grantval import plausibility
from grantval.awards.registry import flag
from grantval.errors import UsageError


@dataclass
class Shifts:
    """Assumption changes of a what-if scenario, applied to the grants in ``mask``.

    Each field is None or a function mapping the base values (array) to the
    scenario's values.  ``expected_term_years`` acts on the term actually used
    by BSM (given or simplified); lattice grants run to the contractual term
    and RSUs to their vesting dates, so it does not change them.  Supplied
    fair values are never changed.
    """

    label: str
    mask: np.ndarray
    share_price: Callable | None = None
    volatility: Callable | None = None
    risk_free_rate: Callable | None = None
    dividend_yield: Callable | None = None
    expected_term_years: Callable | None = None


def _shift(shifts: Shifts, name: str, base: np.ndarray, mask: np.ndarray, ids) -> np.ndarray:
    """Apply one scenario shift to the grants in ``mask``; refuse results outside the limits of
    :mod:`grantval.plausibility` (the same limits as the ledger's)."""
    fn = getattr(shifts, name)
    if fn is None or not mask.any():
        return base
    out = base.copy()
    out[mask] = fn(base[mask])
    bad = mask & plausibility.bad(name, out)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UsageError(f"scenario {shifts.label}: {name} becomes {out[i]:g} for grant {ids[i]}; it "
                         f"{plausibility.LIMITS[name].words}")
    return out


def _shift_term(shifts: Shifts, term: np.ndarray, mask: np.ndarray, contract: np.ndarray, ids) -> np.ndarray:
    """Apply the expected-term shift; the term must stay above zero and within the contractual term."""
    fn = shifts.expected_term_years
    if fn is None or not mask.any():
        return term
    out = term.copy()
    out[mask] = fn(term[mask])
    bad = mask & ((out <= 0) | (out > contract + 1e-9))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UsageError(f"scenario {shifts.label}: expected_term_years becomes {out[i]:g} for grant {ids[i]}; "
                         f"it must be above 0 and at most the contractual term {contract[i]:.4f}")
    return out


def apply_shifts(ctx, shifts: Shifts) -> None:
    """Change the valuation inputs of ``ctx`` (a ValuationContext) in place for one scenario."""
    moved = shifts.mask & ~ctx.is_supplied
    ctx.moved = moved
    ids = ctx.ledger.grants["grant_id"].to_numpy()
    option = flag(ctx.award, "option_terms")
    priced = flag(ctx.award, "priced_with_volatility")
    if ctx.market is not None:
        priced = priced | ctx.market  # a market condition's simulation uses volatility and the rate
    for name, where in (("share_price", moved), ("volatility", moved & priced),
                        ("risk_free_rate", moved & priced), ("dividend_yield", moved)):
        setattr(ctx, name, _shift(shifts, name, getattr(ctx, name), where, ids))
    bsm = moved & option & (ctx.model != "lattice")
    if ctx.per_tranche:
        ctx.term_tranche = _shift_term(shifts, ctx.term_tranche, bsm[ctx.gi], ctx.contract[ctx.gi], ids[ctx.gi])
    else:
        ctx.term_award = _shift_term(shifts, ctx.term_award, bsm, ctx.contract, ids)


def forfeiture_adjuster(fn: Callable, mask: np.ndarray) -> Callable:
    """The engine's ``estimate_adjust`` for a forfeiture-rate shift.

    ``fn`` maps annual forfeiture rates (0 where a grant has none) to the
    scenario's rates for the grants in ``mask``; grants estimated by an expected
    vest fraction are left as they are.
    """
    def adjust(rate: np.ndarray, frac: np.ndarray):
        m = mask & np.isnan(frac)
        rate = rate.copy()
        rate[m] = fn(np.nan_to_num(rate[m], nan=0.0))
        return rate, frac
    return adjust


def adjust_payouts(inp, fn: Callable, mask: np.ndarray, label: str) -> None:
    """Apply a payout shift to every assessment of the performance units in ``mask`` (in place).

    Raises
    ------
    UsageError
        When no performance unit is in ``mask``, or a payout becomes negative.
    """
    from grantval.attribution.performance import Assessments

    hooks = [h for h in inp.cost_hooks if isinstance(h.state, Assessments)]
    if not hooks or not (hooks[0].grants & mask).any():
        raise UsageError(f"scenario {label}: payout changes nothing: no performance unit (psu) grant is re-valued")
    A = hooks[0].state
    moved = mask[A.grant]
    new = A.payout.copy()
    new[moved] = fn(A.payout[moved])
    if np.any(new < 0):
        raise UsageError(f"scenario {label}: a payout becomes {new[new < 0][0]:g}; it must be zero or more")
    A.payout = new
