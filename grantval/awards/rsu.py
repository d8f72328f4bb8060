"""Restricted stock units, settled in shares at vesting.

Valued per tranche as the share price less the present value of the dividends
not received until the tranche vests, ``S e^{-q t}`` with a continuous dividend
yield (units carry no dividend equivalents); the award value is the
quantity-weighted mean of its tranches.  Cost is attributed over the service
period of each tranche.
"""

from __future__ import annotations

import numpy as np

from grantval.awards.base import AwardKind, KindValues
from grantval.measurement.unique import unique_call
from grantval.pricing import rsu_value


def value(ctx, grants: np.ndarray) -> KindValues:
    """Fair value per unit of the grants in ``grants`` (boolean mask per grant), each tranche to its vesting date."""
    out = KindValues.empty(len(grants), len(ctx.gi))
    gi = ctx.gi
    m = grants[gi]
    vals, d = unique_call(rsu_value, dict(share_price=ctx.share_price[gi][m], term=ctx.t_vest[m],
                                          dividend_yield=ctx.dividend_yield[gi][m]), ctx.cache)
    out.tranche_value[m] = vals
    out.award_term[grants] = ctx.avg_vest[grants]
    out.model[grants] = "rsu"
    out.term_method[grants] = "vesting period (RSU)"
    out.distinct = d
    return out


KIND = AwardKind(name="rsu", description="restricted stock unit, settled in shares", option_terms=False,
                 exercisable=False, disclosure_group="units", value=value)
