"""Cash-settled share appreciation rights: pay the share price less ``exercise_price`` on exercise.

Terms as for options (``exercise_price``, ``expiration_date``, vesting schedule).  The
award is a liability (IFRS 2.30-33, ASC 718-30-35-1 to 35-3): its fair value is remeasured at
every reporting date until it is exercised or expires (:mod:`grantval.measurement.remeasure`)
and its cost is the liability plus the cash paid (:mod:`grantval.attribution.liability`).
The value reported here is the grant-date fair value, on the same basis as each
remeasurement: Black-Scholes-Merton over the contractual term, or the employee-option
lattice (``model`` = ``lattice``) over it, each tranche to its own vesting date.
Exercises carry the ``share_price`` of the date; the cash paid is the intrinsic value.
"""

from __future__ import annotations

import numpy as np

from grantval.awards.base import AwardKind, KindValues
from grantval.awards.option import _lattice
from grantval.measurement.unique import unique_call
from grantval.pricing import bsm_value


def _bsm_contract(ctx, grants: np.ndarray, out: KindValues) -> None:
    """BSM over the contractual term, one value per award."""
    m = grants
    vals, d = unique_call(bsm_value, dict(
        share_price=ctx.share_price[m], strike=ctx.strike[m], term=ctx.contract[m], rate=ctx.risk_free_rate[m],
        volatility=ctx.volatility[m], dividend_yield=ctx.dividend_yield[m]), ctx.cache)
    award_value = np.full(len(grants), np.nan)
    award_value[m] = vals
    mt = m[ctx.gi]
    out.tranche_value[mt] = award_value[ctx.gi][mt]
    out.tranche_term[mt] = ctx.contract[ctx.gi][mt]
    out.award_term[m] = ctx.contract[m]
    out.model[m] = "bsm"
    out.term_method[m] = "contractual term (cash-settled: remeasured at each reporting date)"
    out.distinct += d


def value(ctx, grants: np.ndarray) -> KindValues:
    """Grant-date fair value per right of the grants in ``grants`` (boolean mask per grant)."""
    out = KindValues.empty(len(grants), len(ctx.gi))
    on_lattice = ctx.model == "lattice"
    _bsm_contract(ctx, grants & ~on_lattice, out)
    _lattice(ctx, grants & on_lattice, out)
    return out


KIND = AwardKind(name="cash_sar", description="share appreciation right, settled in cash", option_terms=True, priced_with_volatility=True,
                 exercisable=True, disclosure_group="cash", value=value, settlement="cash")
