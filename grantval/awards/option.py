"""Employee share options, settled in shares.

Terms: ``exercise_price``, ``expiration_date`` and the vesting schedule.  Valued at
the grant date by Black-Scholes-Merton at the expected term (given, or by the
simplified method of SEC SAB Topic 14.D.2; one term per award, or per tranche under
the ``tranche`` valuation unit), or by the employee-option lattice over the
contractual term, each tranche to its own vesting date (``model`` = ``lattice`` in
the assumptions).  Cost is attributed over the service period of each tranche.
"""

from __future__ import annotations

import numpy as np

from grantval.awards.base import AwardKind, KindValues
from grantval.measurement.unique import unique_call
from grantval.pricing import bsm_value, lattice_value


def _bsm(ctx, grants: np.ndarray, out: KindValues) -> None:
    """BSM values: one expected term per award, or per tranche under the tranche unit."""
    gi = ctx.gi
    if ctx.per_tranche:
        m = grants[gi]
        vals, d = unique_call(bsm_value, dict(
            share_price=ctx.share_price[gi][m], strike=ctx.strike[gi][m], term=ctx.term_tranche[m],
            rate=ctx.risk_free_rate[gi][m], volatility=ctx.volatility[gi][m],
            dividend_yield=ctx.dividend_yield[gi][m]), ctx.cache)
        out.tranche_value[m] = vals
        out.tranche_term[m] = ctx.term_tranche[m]
    else:
        m = grants
        vals, d = unique_call(bsm_value, dict(
            share_price=ctx.share_price[m], strike=ctx.strike[m], term=ctx.term_award[m],
            rate=ctx.risk_free_rate[m], volatility=ctx.volatility[m], dividend_yield=ctx.dividend_yield[m]),
            ctx.cache)
        award_value = np.full(len(grants), np.nan)
        award_value[m] = vals
        mt = m[gi]
        out.tranche_value[mt] = award_value[gi][mt]
        out.tranche_term[mt] = ctx.term_award[gi][mt]
    out.award_term[grants] = ctx.term_award[grants]
    out.model[grants] = "bsm"
    out.term_method[grants] = np.where(np.isnan(ctx.given_term[grants]), "simplified method (SAB Topic 14.D.2)",
                                       "given")
    out.distinct += d


def _lattice(ctx, grants: np.ndarray, out: KindValues) -> None:
    """Lattice values over the contractual term, each tranche with its own vesting date."""
    gi = ctx.gi
    m = grants[gi]
    vals, d = unique_call(lattice_value, dict(
        share_price=ctx.share_price[gi][m], strike=ctx.strike[gi][m], term=ctx.contract[gi][m],
        rate=ctx.risk_free_rate[gi][m], volatility=ctx.volatility[gi][m], dividend_yield=ctx.dividend_yield[gi][m],
        vesting=np.minimum(ctx.t_vest[m], ctx.contract[gi][m]), exercise_multiple=ctx.multiple[gi][m],
        exit_rate=ctx.exit_rate[gi][m]), ctx.cache, steps=ctx.steps)
    out.tranche_value[m] = vals
    out.model[grants] = "lattice"
    out.term_method[grants] = "contractual term (lattice)"
    out.distinct += d


def value(ctx, grants: np.ndarray) -> KindValues:
    """Fair value per option of the grants in ``grants`` (boolean mask per grant)."""
    out = KindValues.empty(len(grants), len(ctx.gi))
    on_lattice = ctx.model == "lattice"
    _bsm(ctx, grants & ~on_lattice, out)
    _lattice(ctx, grants & on_lattice, out)
    return out


KIND = AwardKind(name="option", description="share option, settled in shares", option_terms=True, exercisable=True, priced_with_volatility=True,
                 disclosure_group="options", value=value)
